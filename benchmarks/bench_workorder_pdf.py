"""Time the work-order PDF renderer on one typical work order, against a bare reportlab document.

Run from the repository root: ``python -m benchmarks.bench_workorder_pdf``.
Target: at most 60 ms for one work order INCLUDING the database reads. This script times the renderer
alone (``render_sheet`` on a ready-made Sheet, no database), so the render must leave room for the reads.
The reference is a bare reportlab document of two pages with a table and a QR code (reportlab's own
QrCodeWidget), timed in the same run on the same machine.
"""

import datetime as dt
import importlib.util
import io
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

from pypdf import PdfReader
from reportlab.graphics.barcode.qr import QrCodeWidget
from reportlab.graphics.shapes import Drawing
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import getSampleStyleSheet
from reportlab.platypus import PageBreak, Paragraph, SimpleDocTemplate, Table

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # run as a plain script too

from observatory_ops.calc.lifting import lift_figures
from observatory_ops.workorders.cautions import PRECEDENCE_STATEMENT, SEVERITY_LABELS, cautions_for
from observatory_ops.workorders.pdf import render_batch, render_sheet
from observatory_ops.workorders.sheet import Sheet, SheetCaution, SheetLifting, SheetPart, SheetReading

TARGET_MS = 60.0
REPEATS = 30
BATCH = 10
URL = "https://ops.high-vale.example/workorders/118/"


def typical_sheet() -> Sheet:
    """A mirror-cell job of the invented High Vale observatory: four cautions, lifting, eight steps."""
    lift = lift_figures(diameter_mm=600, thickness_mm=90, material="borosilicate", hole_mm=140, fixture_kg=35,
                        legs=2, angle_deg=60, wll_kg=400)
    return Sheet(
        number="WO-2026-0118",
        title="Mirror cell support pads: inspect and reseat",
        site="High Vale Observatory",
        telescope="North dome, 0.6 m reflector",
        subsystems=("Primary mirror", "Mirror cell", "Mirror cover"),
        order_type="Preventive",
        priority="High",
        state="Issued",
        planned_date=dt.date(2026, 9, 8),
        issued_on=dt.date(2026, 9, 1),
        assignee="Tomas Ferreira",
        estimated_hours=5.0,
        why=(
            "Mirror cell inspection: 388 of 365 calendar days since the last service (overdue by 23 days)",
            "Support pad wear: 1,904 of 2,000 slews, limit forecast for 2026-09-19 (band 2026-09-14 to 2026-09-27)",
        ),
        cautions=tuple(
            SheetCaution(caution.title, caution.text, caution.standard, SEVERITY_LABELS[caution.severity])
            for caution in cautions_for(["electrical", "moving_machinery", "suspended_load", "optical_surface"])
        ),
        precedence_statement=PRECEDENCE_STATEMENT,
        isolation_needed=True,
        isolation_points=(
            "AC mains to the mount cabinet, isolator Q1",
            "Servo drives, enable key switch S2",
            "Compressed air to the brakes, valve V1",
        ),
        steps=(
            "Park the telescope horizon-pointing and take the observatory out of remote control.",
            "Lock out and tag every isolation point above; test for absence of voltage at the drive terminals.",
            "Fit the cell lifting fixture and take the weight on the hoist.",
            "Remove the cell bolts and lower the cell onto its trolley.",
            "Inspect each support pad for wear, cracks and adhesive failure; photograph each one.",
            "Reseat loose pads with the approved adhesive and let it cure for the time the maker states.",
            "Reinstall the cell and torque the bolts to the maker's figure.",
            "Remove locks and tags, restore power and air, home the axes and check collimation on a star.",
        ),
        parts=(SheetPart("Support pad adhesive, 50 ml", "ADH-50", 1), SheetPart("Cell bolt M10x40", "B-M10-40", 6),
               SheetPart("Nitrile gloves, box", "GL-M", 1)),
        tools=("Torque wrench 20-100 N m", "Cell lifting fixture LF-600", "Two-leg chain sling, 1 t"),
        readings=(SheetReading("Pad height spread", "mm", "<= 0.2"),
                  SheetReading("Brake air pressure after restart", "bar", "5.5 to 6.5"),
                  SheetReading("Dec following error, RMS", "arcsec", "<= 0.5")),
        lifting=SheetLifting(
            rows=(
                ("Mirror mass (estimate)", f"{lift.mirror_kg:.1f} kg"),
                ("Total suspended load", f"{lift.total_kg:.1f} kg ({lift.total_lb:.1f} lb)"),
                ("Tension per bearing leg", f"{lift.leg_tension_kg:.1f} kg ({lift.leg_tension_lb:.1f} lb)"),
                ("Working load limit per leg / margin", f"{lift.wll_kg:g} kg / {lift.margin:.2f}"),
            ),
            warnings=lift.warnings,
            checks=lift.checks,
        ),
        url=URL,
        generated_at=dt.datetime(2026, 9, 1, 7, 45),
    )


def bare_reportlab_document() -> bytes:
    """The reference: two A4 pages, a 20-row table and a QR code, with reportlab alone."""
    styles = getSampleStyleSheet()
    code = QrCodeWidget(URL)
    left, bottom, right, top = code.getBounds()
    qr = Drawing(80, 80, transform=[80 / (right - left), 0, 0, 80 / (top - bottom), 0, 0])
    qr.add(code)
    table = Table([[f"Row {row}", "Lens tissue", "LT-200", str(row)] for row in range(20)])
    buffer = io.BytesIO()
    SimpleDocTemplate(buffer, pagesize=A4).build(
        [Paragraph("Reference document", styles["Title"]), qr, table, PageBreak(),
         Paragraph("Second page.", styles["Normal"])]
    )
    return buffer.getvalue()


def timings_ms(job: Callable[[], bytes], repeats: int = REPEATS) -> tuple[float, list[float]]:
    """(first call, later calls) in milliseconds."""
    start = time.perf_counter()
    job()
    first = 1000.0 * (time.perf_counter() - start)
    later = []
    for _ in range(repeats):
        start = time.perf_counter()
        job()
        later.append(1000.0 * (time.perf_counter() - start))
    return first, later


def main() -> None:
    sheet = typical_sheet()
    pages = len(PdfReader(io.BytesIO(render_sheet(sheet))).pages)
    accelerated = importlib.util.find_spec("_rl_accel") is not None
    print("work order PDF, render only (no database reads): render_sheet on a ready-made Sheet, A4")
    print(f"  typical sheet: {len(sheet.cautions)} cautions, {len(sheet.steps)} steps, lifting figures, {pages} pages")
    print(f"  reportlab C accelerator (_rl_accel, package rl_accel): {'present' if accelerated else 'absent'}")
    jobs = [
        ("work order, render only", lambda: render_sheet(sheet), f"target <= {TARGET_MS:.0f} ms including DB reads"),
        ("bare reportlab: 2 pages, table, QR", bare_reportlab_document, "reference, same run"),
    ]
    for label, job, note in jobs:
        first, later = timings_ms(job)
        print(f"  {label:36s} first {first:6.1f} ms   median of {REPEATS} {statistics.median(later):6.1f} ms   "
              f"fastest {min(later):6.1f} ms   ({note})")
    sheets = [typical_sheet() for _ in range(BATCH)]
    _, later = timings_ms(lambda: render_batch(sheets), repeats=5)
    batch_ms = statistics.median(later)
    print(f"  batch of {BATCH} work orders, render only: median of 5 {batch_ms:6.1f} ms, "
          f"{batch_ms / BATCH:.1f} ms per work order")


if __name__ == "__main__":
    main()
