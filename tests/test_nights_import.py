"""Specifications for the nightly-usage importer: the service, the `import_nights` command and the upload page.

A refused import stores nothing (count and content of every NightUsage row unchanged) and names the line
of every problem of a bad row, or says why the whole file is not a nights CSV; an accepted import is
idempotent per site and night, and a column the file leaves out keeps the stored figures. Malformed
files are generated with hypothesis. Line numbers count the header as line 1, as a text editor does.
"""
from __future__ import annotations

import datetime as dt
import itertools
import re
from io import StringIO
from pathlib import Path

import hypothesis
import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import CommandError, call_command
from django.urls import reverse
from django.utils.html import escape
from hypothesis import HealthCheck, assume, given
from hypothesis import strategies as st

from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.nights_csv import earliest_accepted
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db

COLUMNS = (
    "night", "open_hours", "slews", "axis1_travel_deg", "axis2_travel_deg", "brake_cycles", "pm10_ugm3",
    "humidity_pct", "dew", "rain",
)
HEADER = ",".join(COLUMNS)
FIRST_NIGHT = dt.date(2024, 1, 5)  # well in the past; the stored fixture overlaps these nights
DB_EXAMPLES = hypothesis.settings(
    max_examples=60, deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.data_too_large],
)
_site_numbers = itertools.count()


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Record due-state recomputes instead of running them (each costs seconds of sky computation).

    The real recompute runs in test_a_successful_import_refreshes_the_due_states.
    """
    return recomputes_recorded


@pytest.fixture
def stored(site):
    """Ten nights already stored, some of which the generated files try to overwrite."""
    NightUsage.objects.bulk_create(
        NightUsage(
            site=site, night=dt.date(2024, 1, 1) + dt.timedelta(days=i), open_hours=3.0 + i / 4, slews=10 + i,
            pm10_ugm3=30.0, source=NightUsage.Source.IMPORT,
        )
        for i in range(10)
    )
    return site


def snapshot() -> list[dict]:
    """Every NightUsage row of every site, every field (including recorded_at)."""
    return list(NightUsage.objects.order_by("site_id", "night").values())


def fresh_site() -> Site:
    n = next(_site_numbers)
    return Site.objects.create(
        name=f"Site {n}", slug=f"gen-{n}", latitude_deg=30.0, longitude_deg=10.0, time_zone="Europe/Madrid"
    )


def render(rows: list[list[str]], header: str = HEADER) -> bytes:
    return "".join(f"{line}\n" for line in [header] + [",".join(cells) for cells in rows]).encode()


def good_cells(night: dt.date, open_hours: float = 6.5, slews: int = 40, pm10: str = "35.5") -> list[str]:
    return [night.isoformat(), repr(open_hours), str(slews), "812.5", "402.0", "42", pm10, "41", "no", "no"]


GOOD_FILE = render([good_cells(FIRST_NIGHT + dt.timedelta(days=i), open_hours=5.0 + i) for i in range(3)])


# --- generated files ---------------------------------------------------------------------------------

flags = st.sampled_from(["yes", "no", "", "1", "0", "true", "false", "Y", "N", "YES", " no "])


@st.composite
def good_rows(draw, min_size: int = 1, max_size: int = 15) -> list[list[str]]:
    offsets = draw(st.lists(st.integers(0, 300), min_size=min_size, max_size=max_size, unique=True))
    rows = []
    for offset in offsets:
        rows.append([
            (FIRST_NIGHT + dt.timedelta(days=offset)).isoformat(),
            repr(draw(st.floats(0, 24))),
            str(draw(st.integers(0, 5000))),
            draw(st.sampled_from(["", "0"]) | st.floats(0, 1e5).map(repr)),
            repr(draw(st.floats(0, 1e5))),
            str(draw(st.integers(0, 5000))),
            draw(st.just("") | st.floats(0, 2000).map(repr)),
            draw(st.just("") | st.floats(0, 100).map(repr)),
            draw(flags),
            draw(flags),
        ])
    return rows


NOT_A_NUMBER = st.sampled_from(["abc", "7h", "1..2", "--3", "0x10", "\u00bd", "NaN", "inf", "-inf", "1e999", "12 5"])
ROW_FAULTS = (
    "bad_number", "negative_hours", "hours_over_24", "empty_hours", "duplicate_night", "future_night", "bad_date",
    "bad_flag", "humidity_over_100", "negative_count", "fractional_count", "count_too_big", "ragged_short",
    "ragged_long", "night_too_old", "implausible_figure",
)
#: Above the plausibility bounds of nights_csv (cells 2..6: slews, travel x2, brake cycles, PM10).
IMPLAUSIBLE = {2: 10_001, 3: 1_000_000.5, 4: 2e6, 5: 10_001, 6: 10_000.01}


@st.composite
def files_with_bad_rows(draw):
    """A file of good rows in which some rows are broken; returns (bytes, bad line numbers, good rows)."""
    rows = draw(good_rows(min_size=1, max_size=12))
    bad = sorted(draw(st.sets(st.integers(0, len(rows) - 1), min_size=1)))
    today = site_today(Site(time_zone="Europe/Madrid"))
    for i in bad:
        fault = draw(st.sampled_from(ROW_FAULTS))
        earlier_good = [j for j in range(i) if j not in bad]
        if fault == "duplicate_night" and not earlier_good:
            fault = "negative_hours"
        cells = rows[i]
        if fault == "bad_number":
            cells[draw(st.integers(1, 7))] = draw(NOT_A_NUMBER)  # open_hours .. humidity_pct
        elif fault == "negative_hours":
            cells[1] = repr(-draw(st.floats(1e-3, 1e6)))
        elif fault == "hours_over_24":
            cells[1] = repr(draw(st.floats(24.001, 1e9)))
        elif fault == "empty_hours":
            cells[1] = draw(st.sampled_from(["", "  "]))
        elif fault == "duplicate_night":
            cells[0] = rows[draw(st.sampled_from(earlier_good))][0]
        elif fault == "future_night":
            cells[0] = (today + dt.timedelta(days=draw(st.integers(2, 3650)))).isoformat()
        elif fault == "bad_date":
            cells[0] = draw(st.sampled_from(["2024-13-01", "2024-02-30", "yesterday", "", "01/02/2024", "2024-1-5"]))
        elif fault == "bad_flag":
            cells[draw(st.sampled_from([8, 9]))] = draw(st.sampled_from(["maybe", "2", "si", "-"]))
        elif fault == "humidity_over_100":
            cells[7] = repr(draw(st.floats(100.01, 1e6)))
        elif fault == "negative_count":
            cells[draw(st.sampled_from([2, 5]))] = str(-draw(st.integers(1, 10**6)))
        elif fault == "fractional_count":  # "3.0" and "1e3" are whole numbers, so accepted
            cells[draw(st.sampled_from([2, 5]))] = draw(st.sampled_from(["2.5", "3.01", "1e-3"]))
        elif fault == "count_too_big":
            # Beyond what an integer column holds in every supported database (2**31 - 1).
            cells[draw(st.sampled_from([2, 5]))] = str(draw(st.integers(2**31, 10**30)))
        elif fault == "night_too_old":
            # Counted back from the night before today: the latest night that can be logged is last night
            # before local noon and tonight after it (logbook.services.latest_night).
            oldest = earliest_accepted(today - dt.timedelta(days=1))
            cells[0] = (oldest - dt.timedelta(days=draw(st.integers(1, 80_000)))).isoformat()
        elif fault == "implausible_figure":
            k = draw(st.sampled_from(sorted(IMPLAUSIBLE)))
            cells[k] = repr(IMPLAUSIBLE[k] * draw(st.sampled_from([1, 3, 1e6])))
        elif fault == "ragged_short":
            del cells[draw(st.integers(1, len(cells) - 1)):]
        elif fault == "ragged_long":
            cells.extend(draw(st.lists(st.sampled_from(["", "1", "x"]), min_size=1, max_size=3)))
    order = draw(st.permutations(range(len(COLUMNS))))

    def permute(cells: list[str]) -> list[str]:
        return [cells[k] for k in order] if len(cells) == len(COLUMNS) else cells

    header = ",".join(COLUMNS[k] for k in order)
    data = render([permute(cells) for cells in rows], header)
    good = [rows[j] for j in range(len(rows)) if j not in bad]
    return data, [i + 2 for i in bad], good


@st.composite
def files_refused_as_a_whole(draw):
    """Files that are not a nights CSV at all: returns (bytes, the line the reason must name, or None)."""
    rows = draw(good_rows(min_size=1, max_size=6))
    lines = [HEADER] + [",".join(cells) for cells in rows]
    kind = draw(st.sampled_from([
        "unknown_column", "missing_column", "repeated_column", "empty", "blank", "header_only", "latin1", "nul",
        "utf16",
    ]))
    if kind == "unknown_column":
        lines[0] = HEADER.replace(draw(st.sampled_from(COLUMNS)), draw(st.sampled_from(["date", "hours", "Dust", "x"])))
        return "\n".join(lines).encode(), None
    if kind == "missing_column":
        name = draw(st.sampled_from(["night", "open_hours"]))
        k = COLUMNS.index(name)
        kept = [",".join(c for j, c in enumerate(line.split(",")) if j != k) for line in lines]
        return "\n".join(kept).encode(), None
    if kind == "repeated_column":
        lines[0] = HEADER.replace("slews", "pm10_ugm3")
        return "\n".join(lines).encode(), None
    if kind == "empty":
        return b"", None
    if kind == "blank":
        return draw(st.sampled_from([b"\n", b"   \n\n", b"\r\n\t\r\n"])), None
    if kind == "header_only":
        return draw(st.sampled_from([HEADER, HEADER + "\n", HEADER + "\n\n,,,,,,,,,\n"])).encode(), None
    at = draw(st.integers(0, len(lines) - 1))
    if kind == "latin1":
        # A spreadsheet in a Western European locale saves "o with acute" as the single latin-1 byte 0xf3.
        lines[at] += ",Observaci\u00f3n"
        return "\n".join(lines).encode("latin-1"), at + 1
    if kind == "nul":
        data = "\n".join(lines).encode()
        offset = sum(len(line) + 1 for line in lines[:at]) + draw(st.integers(0, len(lines[at])))
        return data[:offset] + b"\x00" + data[offset:], None
    return "\n".join(lines).encode("utf-16"), None


def assert_lines_named(errors: list[tuple[int, str]], data: bytes) -> None:
    last_line = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n").count(b"\n") + 1  # CR alone ends a line too
    assert errors
    for line, reason in errors:
        assert isinstance(line, int) and 1 <= line <= last_line, (line, reason)
        assert reason.strip()


def assert_refused_as_a_file(report: services.ImportReport) -> None:
    """The whole file is refused in one sentence, with no line and no count of bad rows."""
    assert report.file_problem.startswith("This file is not a nights CSV: ")
    assert [line for line, _ in report.errors] == [None]
    assert report.summary == f"{report.file_problem}. Nothing was stored."
    assert "bad row" not in report.summary and report.refused_rows == []


# --- refused imports ---------------------------------------------------------------------------------


@DB_EXAMPLES
@given(case=files_with_bad_rows())
def test_a_file_with_bad_rows_stores_nothing_and_names_every_bad_line(stored, recomputes, case):
    data, bad_lines, _good = case
    before, recomputed_before = snapshot(), len(recomputes)
    report = services.nights_import(stored, data)
    assert sorted({line for line, _ in report.errors}) == bad_lines
    assert_lines_named(report.errors, data)
    assert not report.stored and (report.created, report.updated, report.unchanged) == (0, 0, 0)
    rows = "row" if len(bad_lines) == 1 else "rows"
    assert report.summary == f"{len(bad_lines)} bad {rows}; nothing was stored."
    assert snapshot() == before
    assert len(recomputes) == recomputed_before


@DB_EXAMPLES
@given(case=files_refused_as_a_whole())
def test_a_file_with_wrong_columns_bad_encoding_or_no_rows_is_refused_as_a_whole_and_stores_nothing(stored, case):
    data, line = case
    before = snapshot()
    report = services.nights_import(stored, data)
    assert_refused_as_a_file(report)
    if line is not None:  # a byte that is not UTF-8: the reason says where it is
        assert f"on line {line})" in report.file_problem
    assert snapshot() == before


@DB_EXAMPLES
@given(
    data=st.binary(max_size=400)
    | st.text(max_size=400).map(str.encode)
    | st.text(alphabet="0123456789-.,:e\"' \n\r\tnoyes", max_size=300).map(
        lambda body: (HEADER + "\n" + body).encode()
    ),
    skip_bad=st.booleans(),
)
def test_any_bytes_at_all_never_raise_and_a_refusal_never_writes(stored, data, skip_bad):
    before = snapshot()
    report = services.nights_import(stored, data, skip_bad=skip_bad)
    if report.file_problem:
        assert_refused_as_a_file(report)
    elif report.errors:
        assert_lines_named(report.errors, data)
    if report.errors:
        assert not report.stored and snapshot() == before
    else:
        assert report.stored


@pytest.mark.parametrize(
    ("data", "reason"),
    [
        (b"", "it is empty; it must hold a header line naming the columns (at least night and open_hours"),
        (HEADER.encode() + b"\n", "it has a header but no rows"),
        (b"night,hours\n2024-01-01,5\n", "missing column: open_hours"),
        (b"night,open_hours\n2024-01-01,5\n2024-01-02,6\nObservaci\xf3n,7\n",
         "it is not UTF-8 text (byte 0xf3 on line 4); save it as UTF-8 CSV"),
        (b"night,open_hours\n2024-01-01,5\n\x00\x01\x02", "it holds binary data, not text"),
        # The start of a PNG image: the eight-byte signature of the PNG specification (ISO/IEC 15948, 5.2).
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x10", "it holds binary data, not text"),
        ("night,open_hours".encode("utf-16"), "it is UTF-16 text; save it as UTF-8 CSV"),
        (b"night;open_hours;slews\n2024-01-01;5;3\n", "its columns are separated by semicolons, not commas"),
        (b"night\topen_hours\n2024-01-01\t5\n", "its columns are separated by tabs, not commas"),
        # A file of another kind has many columns: ten are named, the rest counted.
        (("night,open_hours," + ",".join(f"x{i}" for i in range(500))).encode() + b"\n2024-01-01,5" + b",1" * 500,
         "unknown columns: x0, x1, x2, x3, x4, x5, x6, x7, x8, x9 and 490 more (known: night,"),
    ],
)
def test_each_kind_of_file_that_is_not_a_nights_csv_is_refused_as_a_whole(stored, data, reason):
    before = snapshot()
    report = services.nights_import(stored, data)
    assert_refused_as_a_file(report)
    assert reason in report.file_problem
    assert snapshot() == before


def test_a_file_with_carriage_returns_alone_between_lines_is_read_line_by_line(site):
    """Older spreadsheets on a Mac end lines with a carriage return alone; a reviewer's such file was refused with
    Python's csv wording. It is read as the lines it holds."""
    report = services.nights_import(site, b"night,open_hours\r2024-01-01,5\r2024-01-02,6.5\r")
    assert not report.errors and not report.file_problem
    assert list(NightUsage.objects.filter(site=site).order_by("night").values_list("open_hours", flat=True)) == [5, 6.5]


@pytest.mark.parametrize(
    ("data", "line", "reason"),
    [
        (render([good_cells(FIRST_NIGHT)]) + b"2024-01-07,25\n", 3, "has 2 fields, the header has 10"),
        (b"night,open_hours\n2024-01-01,-1\n", 2, "open_hours cannot be below 0 (got -1)"),
        (b"night,open_hours\n2024-01-01,24.5\n", 2, "open_hours cannot be above 24 (got 24.5)"),
        (b"night,open_hours\n2024-01-01,5\n2024-01-01,6\n", 3, "night 2024-01-01 already appears on line 2"),
        (b"night,open_hours\n2024-01-01,five\n", 2, 'open_hours must be a number, not "five"'),
        (b"night,open_hours,slews\n2024-01-01,5,99999999999999999999\n", 2, "slews cannot be above"),
    ],
)
def test_each_kind_of_bad_input_gets_its_line_and_a_readable_reason(stored, data, line, reason):
    before = snapshot()
    report = services.nights_import(stored, data)
    assert len(report.errors) == 1
    assert report.errors[0][0] == line
    assert reason in report.errors[0][1]
    assert snapshot() == before


def test_a_night_in_the_future_is_refused(site):
    tomorrow = site_today(site) + dt.timedelta(days=1)
    report = services.nights_import(site, render([good_cells(tomorrow)]))
    assert report.errors == [(
        2, f"night {tomorrow} has not begun yet (a night is dated by its evening; the latest that can be logged "
        f"now is {services.latest_night(site)})"
    )]
    assert not NightUsage.objects.exists()


# --- accepted imports --------------------------------------------------------------------------------


def test_importing_the_same_file_twice_changes_nothing(site, recomputes):
    first = services.nights_import(site, GOOD_FILE)
    assert (first.created, first.updated, first.unchanged, first.errors) == (3, 0, 0, [])
    after_first = snapshot()
    second = services.nights_import(site, GOOD_FILE)
    assert (second.created, second.updated, second.unchanged) == (0, 0, 3)
    assert second.summary == "0 new, 0 updated, 3 unchanged; nothing changed."
    assert snapshot() == after_first
    assert recomputes == [site.pk]  # only the import that changed something refreshes the due states


def test_a_changed_row_is_reported_as_updated_and_stored(site):
    services.nights_import(site, GOOD_FILE)
    before = {row["night"]: row for row in snapshot()}
    changed_night = FIRST_NIGHT + dt.timedelta(days=1)
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i), open_hours=5.0 + i) for i in range(3)]
    rows[1] = good_cells(changed_night, open_hours=9.25, slews=77, pm10="")
    report = services.nights_import(site, render(rows))
    assert (report.created, report.updated, report.unchanged) == (0, 1, 2)
    assert report.updated_nights == [changed_night]
    after = {row["night"]: row for row in snapshot()}
    assert (after[changed_night]["open_hours"], after[changed_night]["slews"]) == (9.25, 77)
    assert after[changed_night]["pm10_ugm3"] is None
    assert after[changed_night]["id"] == before[changed_night]["id"]
    assert after[changed_night]["recorded_at"] > before[changed_night]["recorded_at"]
    for night in (FIRST_NIGHT, FIRST_NIGHT + dt.timedelta(days=2)):
        assert after[night] == before[night]


@DB_EXAMPLES
@given(rows=good_rows(), which=st.integers(0, 10**6), new_hours=st.floats(0, 24))
def test_any_good_file_imports_once_then_reports_all_unchanged_and_one_change_as_updated(rows, which, new_hours):
    site = fresh_site()
    data = render(rows)
    first = services.nights_import(site, data)
    assert (first.created, first.updated, first.unchanged, first.errors) == (len(rows), 0, 0, [])
    stored_once = snapshot()
    second = services.nights_import(site, data)
    assert (second.created, second.updated, second.unchanged) == (0, 0, len(rows))
    assert snapshot() == stored_once

    i = which % len(rows)
    assume(float(rows[i][1]) != new_hours)
    rows[i][1] = repr(new_hours)
    third = services.nights_import(site, render(rows))
    assert (third.created, third.updated, third.unchanged) == (0, 1, len(rows) - 1)
    assert third.updated_nights == [dt.date.fromisoformat(rows[i][0])]
    assert NightUsage.objects.get(site=site, night=rows[i][0]).open_hours == new_hours


def test_skip_bad_stores_the_good_rows_and_lists_the_skipped_ones(site):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(5)]
    rows[1][1] = "-2"  # line 3
    rows[3][0] = "2024-02-30"  # line 5
    report = services.nights_import(site, render(rows), skip_bad=True)
    assert report.errors == []
    assert [line for line, _ in report.skipped] == [3, 5]
    assert report.created == 3
    assert report.summary == "3 new, 0 updated, 0 unchanged; 2 bad rows skipped."
    stored_nights = set(NightUsage.objects.filter(site=site).values_list("night", flat=True))
    assert stored_nights == {FIRST_NIGHT, FIRST_NIGHT + dt.timedelta(days=2), FIRST_NIGHT + dt.timedelta(days=4)}


@DB_EXAMPLES
@given(case=files_with_bad_rows())
def test_skip_bad_stores_exactly_the_good_rows_of_any_file(case):
    data, bad_lines, good = case
    site = fresh_site()
    report = services.nights_import(site, data, skip_bad=True)
    if not good:
        assert [line for line, _ in report.errors] == bad_lines
        assert not NightUsage.objects.filter(site=site).exists()
        return
    assert [line for line, _ in report.skipped] == bad_lines
    assert report.created == len(good)
    stored_nights = sorted(NightUsage.objects.filter(site=site).values_list("night", flat=True))
    assert stored_nights == sorted(dt.date.fromisoformat(cells[0]) for cells in good)


def test_progress_is_reported_up_to_the_last_row(site):
    seen = []
    services.nights_import(site, GOOD_FILE, progress=lambda done, total: seen.append((done, total)))
    assert seen[-1] == (3, 3)


def test_a_successful_import_refreshes_the_due_states(site, telescope, monkeypatch):
    monkeypatch.undo()  # the real recompute, with the sky computation
    mirror = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2024, 1, 1))
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i), open_hours=5.0, pm10="60") for i in range(3)]
    services.nights_import(site, render(rows))
    status = PlanStatus.objects.get(plan__subsystem=mirror, plan__name__startswith="Inspect and CO2")
    dust = next(t for t in status.trigger_rows if t["metric"] == "dust_hours")
    # Sensitivity 1 at PM10 60: weight 1 + 1 * (60 - 20) / 20 = 3; 3 nights x 5 h x 3 = 45 dust-weighted hours.
    assert dust["value"] == pytest.approx(45.0)


# --- the import_nights command -----------------------------------------------------------------------


@pytest.fixture
def csv_file(tmp_path):
    def write(data: bytes, name: str = "nights.csv") -> Path:
        path = tmp_path / name
        path.write_bytes(data)
        return path

    return write


def run_import(*args: str) -> tuple[str, str]:
    out, err = StringIO(), StringIO()
    call_command("import_nights", *args, stdout=out, stderr=err)
    return out.getvalue(), err.getvalue()


def test_command_imports_a_file_and_a_second_run_reports_all_unchanged(site, csv_file):
    path = str(csv_file(GOOD_FILE))
    out, _ = run_import(path, "--site", site.slug)
    assert f"{path}: 3 new, 0 updated, 0 unchanged." in out
    out, _ = run_import(path, "--site", site.slug)
    assert f"{path}: 0 new, 0 updated, 3 unchanged; nothing changed.\nChanged no stored nights." in out
    assert NightUsage.objects.filter(site=site).count() == 3


def test_command_lists_updated_nights(site, csv_file):
    run_import(str(csv_file(GOOD_FILE)), "--site", site.slug)
    changed = render([good_cells(FIRST_NIGHT, open_hours=1.5)])
    out, _ = run_import(str(csv_file(changed, "changed.csv")), "--site", site.slug)
    assert f"updated night {FIRST_NIGHT}" in out
    assert "0 new, 1 updated, 0 unchanged." in out


def test_command_refuses_a_bad_file_with_each_line_on_stderr_and_stores_nothing(stored, csv_file):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(4)]
    rows[1][1] = "30"  # line 3
    rows[2][2] = "many"  # line 4
    path = str(csv_file(render(rows)))
    before = snapshot()
    err = StringIO()
    with pytest.raises(CommandError, match="2 bad rows; nothing was stored"):
        call_command("import_nights", path, "--site", stored.slug, stdout=StringIO(), stderr=err)
    assert "line 3: open_hours cannot be above 24 (got 30)" in err.getvalue()
    assert 'line 4: slews must be a whole number, not "many"' in err.getvalue()
    assert snapshot() == before


def test_command_refuses_a_file_that_is_not_a_nights_csv_in_one_sentence(stored, csv_file):
    path = str(csv_file(b"night;open_hours\n2026-01-01;5\n"))
    before = snapshot()
    err = StringIO()
    with pytest.raises(CommandError, match="not a nights CSV.*semicolons.*Nothing was stored"):
        call_command("import_nights", path, "--site", stored.slug, stdout=StringIO(), stderr=err)
    assert "line None" not in err.getvalue()
    assert snapshot() == before


def test_command_with_skip_bad_stores_the_good_rows_and_lists_the_skipped(site, csv_file):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(3)]
    rows[2][8] = "perhaps"  # line 4
    out, err = run_import(str(csv_file(render(rows))), "--site", site.slug, "--skip-bad")
    assert 'line 4: dew must be yes or no (also 1 or 0, true or false), not "perhaps"' in err
    assert "2 new, 0 updated, 0 unchanged; 1 bad row skipped." in out
    assert NightUsage.objects.filter(site=site).count() == 2


def test_command_names_an_unknown_site_and_the_known_ones(site, csv_file):
    with pytest.raises(CommandError, match="no site with slug 'nowhere' \\(known: test-hill\\)"):
        run_import(str(csv_file(GOOD_FILE)), "--site", "nowhere")
    assert not NightUsage.objects.exists()


def test_command_names_a_missing_file(site, tmp_path):
    with pytest.raises(CommandError, match="no such file"):
        run_import(str(tmp_path / "absent.csv"), "--site", site.slug)


def test_command_refuses_a_file_over_the_upload_pages_size_limit_before_reading_it(stored, csv_file, settings):
    """The upload page's limit (settings.NIGHTS_UPLOAD_MAX_BYTES): a 50 MB file took 87 s and 2.3 GB of memory."""
    settings.NIGHTS_UPLOAD_MAX_BYTES = len(GOOD_FILE)
    path = str(csv_file(GOOD_FILE + b"\n"))
    before = snapshot()
    with pytest.raises(CommandError) as refused:
        run_import(path, "--site", stored.slug)
    assert str(refused.value) == (
        f"{path}: the file is {len(GOOD_FILE) + 1:,} bytes; the limit is {len(GOOD_FILE):,} bytes. Split it into "
        "files of fewer nights and import each. Nothing was stored."
    )
    assert snapshot() == before
    out, _ = run_import(str(csv_file(GOOD_FILE, "at-the-limit.csv")), "--site", stored.slug)  # at the limit: read
    assert "0 new, 3 updated, 0 unchanged." in out


@pytest.mark.parametrize("skip_bad", [False, True])
def test_command_lists_the_first_50_bad_rows_as_the_upload_page_and_counts_the_rest(stored, csv_file, skip_bad):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(80)]
    for row in rows[:62]:
        row[1] = "30"  # lines 2 to 63: above 24 hours
    before = snapshot()
    options = ["--skip-bad"] if skip_bad else []
    if skip_bad:
        out, err = run_import(str(csv_file(render(rows))), "--site", stored.slug, *options)
        assert "18 new, 0 updated, 0 unchanged; 62 bad rows skipped." in out
    else:
        err_buffer = StringIO()
        with pytest.raises(CommandError, match="62 bad rows; nothing was stored"):
            call_command("import_nights", str(csv_file(render(rows))), "--site", stored.slug, stdout=StringIO(),
                         stderr=err_buffer)
        err = err_buffer.getvalue()
        assert snapshot() == before
    listed = re.findall(r"^line (\d+): open_hours cannot be above 24 \(got 30\)$", err, re.MULTILINE)
    assert listed == [str(line) for line in range(2, 52)]
    assert f"... and 12 more {'skipped' if skip_bad else 'bad'} rows, not listed." in err


# --- the upload page ---------------------------------------------------------------------------------


@pytest.fixture
def technician_client(client, users):
    client.force_login(users["technician"])
    return client


def upload(client, site, data: bytes, skip_bad: bool = False, name: str = "nights.csv", confirm: str = ""):
    payload = {"file": SimpleUploadedFile(name, data, content_type="text/csv"), "confirm": confirm}
    if skip_bad:
        payload["skip_bad"] = "on"
    return client.post(reverse("nights-import", args=[site.slug]), payload)


def test_upload_page_shows_the_form_and_the_format(technician_client, site):
    response = technician_client.get(reverse("nights-import", args=[site.slug]))
    assert response.status_code == 200
    assert b"open_hours" in response.content


def test_upload_of_a_good_file_stores_it_and_says_so(technician_client, site):
    response = upload(technician_client, site, GOOD_FILE)
    assert response.status_code == 200
    assert b"Import done: 3 new, 0 updated, 0 unchanged." in response.content
    assert NightUsage.objects.filter(site=site).count() == 3


def test_upload_of_a_bad_file_shows_each_line_and_stores_nothing(technician_client, stored):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(4)]
    rows[0][1] = "-1"  # line 2
    rows[3][0] = "next tuesday"  # line 5
    before = snapshot()
    response = upload(technician_client, stored, render(rows))
    assert response.status_code == 200
    page = response.content.decode()
    assert "Import refused: 2 bad rows; nothing was stored." in page
    assert "<td>2</td><td>open_hours cannot be below 0 (got -1)</td>" in page
    reason = escape('night must be a date as YYYY-MM-DD, not "next tuesday"')
    assert f"<td>5</td><td>{reason}</td>" in page
    assert snapshot() == before


def test_upload_with_skip_bad_stores_the_good_rows_and_lists_the_skipped(technician_client, site):
    rows = [good_cells(FIRST_NIGHT + dt.timedelta(days=i)) for i in range(3)]
    rows[1][7] = "140"  # line 3
    response = upload(technician_client, site, render(rows), skip_bad=True)
    page = response.content.decode()
    assert "2 new, 0 updated, 0 unchanged; 1 bad row skipped." in page
    assert "<td>3</td><td>humidity_pct cannot be above 100 (got 140)</td>" in page
    assert NightUsage.objects.filter(site=site).count() == 2


@DB_EXAMPLES
@given(
    case=files_with_bad_rows().map(lambda c: c[0])
    | files_refused_as_a_whole().map(lambda c: c[0])
    | st.binary(min_size=1, max_size=300),
)
def test_upload_of_any_malformed_file_is_never_a_server_error_and_stores_nothing(technician_client, stored, case):
    before = snapshot()
    response = upload(technician_client, stored, case)
    assert response.status_code == 200
    assert snapshot() == before


def test_upload_of_an_empty_file_is_refused_with_a_message(technician_client, site):
    response = upload(technician_client, site, b"")
    assert response.status_code == 200
    assert ("The file is empty. A nights CSV holds a header line naming the columns (at least night and "
            "open_hours, separated by commas), then one line per night.") in response.content.decode()
    assert not NightUsage.objects.exists()


def test_upload_over_the_size_limit_is_refused_with_a_message(technician_client, site, settings):
    limit = settings.NIGHTS_UPLOAD_MAX_BYTES
    response = upload(technician_client, site, b"x" * (limit + 1))
    assert response.status_code == 200
    assert f"The file is {limit + 1:,} bytes; the limit is {limit:,} bytes.".encode() in response.content
    assert not NightUsage.objects.exists()


def test_upload_size_limit_is_read_from_settings_and_a_file_at_the_limit_passes(technician_client, site, settings):
    settings.NIGHTS_UPLOAD_MAX_BYTES = len(GOOD_FILE)
    assert upload(technician_client, site, GOOD_FILE).status_code == 200
    assert NightUsage.objects.filter(site=site).count() == 3
    response = upload(technician_client, site, GOOD_FILE + b"\n")
    assert f"the limit is {len(GOOD_FILE):,} bytes".encode() in response.content


# --- columns left out of the file --------------------------------------------------------------------

OPTIONAL = COLUMNS[2:]


@pytest.fixture
def full(site):
    """Three nights with every figure given (none of them equal to a column's blank value)."""
    NightUsage.objects.bulk_create(
        NightUsage(
            site=site, night=FIRST_NIGHT + dt.timedelta(days=i), open_hours=6.0, slews=40 + i, axis1_travel_deg=812.5,
            axis2_travel_deg=402.0, brake_cycles=42, pm10_ugm3=35.5, humidity_pct=41.0, dew=True, rain=True,
            source=NightUsage.Source.IMPORT,
        )
        for i in range(3)
    )
    return site


def test_a_file_of_only_the_required_columns_keeps_every_other_stored_figure(full, recomputes):
    before = {row["night"]: row for row in snapshot()}
    second, new_night = FIRST_NIGHT + dt.timedelta(days=1), FIRST_NIGHT + dt.timedelta(days=30)
    data = render([[FIRST_NIGHT.isoformat(), "6.0"], [second.isoformat(), "9.5"], [new_night.isoformat(), "4"]],
                  header="night,open_hours")
    report = services.nights_import(full, data)
    assert (report.created, report.updated, report.unchanged) == (1, 1, 1)
    assert report.updated_nights == [second]
    after = {row["night"]: row for row in snapshot()}
    assert after[FIRST_NIGHT] == before[FIRST_NIGHT]  # its one given figure is the stored one: untouched
    assert after[FIRST_NIGHT + dt.timedelta(days=2)] == before[FIRST_NIGHT + dt.timedelta(days=2)]
    moved = {"open_hours", "recorded_at"}
    assert {k: v for k, v in after[second].items() if k not in moved} == {
        k: v for k, v in before[second].items() if k not in moved
    }
    assert after[second]["open_hours"] == 9.5
    # A new night takes the blank values, as it always has.
    assert {k: after[new_night][k] for k in OPTIONAL} == {
        "slews": 0, "axis1_travel_deg": 0.0, "axis2_travel_deg": 0.0, "brake_cycles": 0, "pm10_ugm3": None,
        "humidity_pct": None, "dew": False, "rain": False,
    }
    assert recomputes == [full.pk]


def test_a_blank_cell_in_a_column_that_is_there_still_clears_the_figure(full):
    report = services.nights_import(full, render([[FIRST_NIGHT.isoformat(), "6.0", "", ""]],
                                                 header="night,open_hours,pm10_ugm3,slews"))
    assert (report.updated, report.unchanged) == (1, 0)
    stored = NightUsage.objects.get(site=full, night=FIRST_NIGHT)
    assert (stored.pm10_ugm3, stored.slews, stored.brake_cycles, stored.humidity_pct) == (None, 0, 42, 41.0)


@DB_EXAMPLES
@given(first=good_rows(max_size=8), second=good_rows(max_size=8), given_columns=st.sets(st.sampled_from(OPTIONAL)))
def test_a_column_left_out_never_changes_a_stored_night_and_only_real_changes_count_as_updated(
    first, second, given_columns
):
    site = fresh_site()
    services.nights_import(site, render(first))
    before = {row["night"]: row for row in NightUsage.objects.filter(site=site).values()}
    kept = [k for k, name in enumerate(COLUMNS) if k < 2 or name in given_columns]
    header = ",".join(COLUMNS[k] for k in kept)
    sent = render([[cells[k] for k in kept] for cells in second], header)
    report = services.nights_import(site, sent)
    assert report.errors == []
    after = {row["night"]: row for row in NightUsage.objects.filter(site=site).values()}
    expected_updated = []
    parsed = services.nights_csv.parse(sent.decode(), site_today(site))  # each row's values, as the importer reads
    assert parsed.errors == [] and len(parsed.rows) == len(second)
    for _line, read in parsed.rows:
        night = read["night"]
        if night not in before:
            continue
        for name in COLUMNS[1:]:
            assert after[night][name] == read.get(name, before[night][name]), name
        if any(before[night][name] != value for name, value in read.items()):
            expected_updated.append(night)
        else:
            assert after[night] == before[night]
    assert report.updated_nights == sorted(expected_updated)
    assert report.created == len({dt.date.fromisoformat(cells[0]) for cells in second} - set(before))


# --- how far back, and how large ----------------------------------------------------------------------


def test_a_night_more_than_15_years_back_is_refused_naming_the_earliest_accepted(stored, recomputes):
    earliest = earliest_accepted(services.latest_night(stored))
    before = snapshot()
    report = services.nights_import(stored, b"night,open_hours\n1900-01-01,5\n1800-01-01,5\n")
    assert report.errors == [
        (2, f"night 1900-01-01 is more than 15 years ago; the earliest accepted is {earliest}"),
        (3, f"night 1800-01-01 is more than 15 years ago; the earliest accepted is {earliest}"),
    ]
    assert snapshot() == before and recomputes == []
    report = services.nights_import(stored, render([good_cells(earliest - dt.timedelta(days=1))]))
    assert [(p.position, p.field) for p in report.errors] == [(2, "night")]


def test_a_night_at_the_earliest_accepted_date_is_stored_and_the_due_states_computed(site, telescope, monkeypatch):
    """The real recompute, with the sky of every night from then to the forecast horizon: the span that
    made the nights cache refuse (a server error) for older nights."""
    monkeypatch.undo()
    subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2024, 1, 1))
    earliest = earliest_accepted(services.latest_night(site))
    report = services.nights_import(site, render([good_cells(earliest)]))
    assert (report.created, report.errors) == (1, [])
    assert PlanStatus.objects.filter(plan__subsystem__telescope=telescope).exists()


def test_the_earliest_accepted_date_keeps_a_recompute_inside_one_fill_of_the_nights_cache():
    # planning.services.usage_model asks for every night from the earliest logged to HORIZON_DAYS after today;
    # calc.nights computes at most MAX_NIGHTS at once. Checked for every day of a leap-year cycle.
    from observatory_ops.calc.nights import MAX_NIGHTS
    from observatory_ops.planning.services import HORIZON_DAYS

    for offset in range(4 * 366):
        today = dt.date(2026, 1, 1) + dt.timedelta(days=offset)
        assert (today - earliest_accepted(today)).days + 1 + HORIZON_DAYS <= MAX_NIGHTS


def test_the_earliest_accepted_date_is_the_same_day_15_years_before_and_the_28th_for_29_february():
    assert earliest_accepted(dt.date(2026, 12, 2)) == dt.date(2011, 12, 2)
    assert earliest_accepted(dt.date(2028, 2, 29)) == dt.date(2013, 2, 28)


@pytest.mark.parametrize(
    ("column", "highest", "too_high"),
    [
        ("slews", "10000", "10001"),
        ("axis1_travel_deg", "1000000", "1000000.5"),
        ("axis2_travel_deg", "1000000", "1e7"),
        ("brake_cycles", "10000", "10001"),
        ("pm10_ugm3", "10000", "10000.01"),
        ("humidity_pct", "100", "100.5"),
        ("open_hours", "24", "24.01"),
    ],
)
def test_each_figure_is_accepted_up_to_its_plausibility_bound_and_refused_above_it(site, column, highest, too_high):
    header = "night,open_hours" if column == "open_hours" else f"night,open_hours,{column}"

    def file(value: str) -> bytes:
        cells = [FIRST_NIGHT.isoformat(), value] if column == "open_hours" else [FIRST_NIGHT.isoformat(), "5", value]
        return render([cells], header)

    report = services.nights_import(site, file(too_high))
    [(line, reason)] = report.errors
    assert line == 2 and reason.startswith(f"{column} cannot be above ") and f"(got {too_high})" in reason
    assert not NightUsage.objects.exists()
    assert services.nights_import(site, file(highest)).created == 1


@pytest.mark.parametrize("value", ["nan", "NaN", "inf", "-inf", "Infinity", "1e999"])
@pytest.mark.parametrize("column", ["open_hours", "slews", "axis1_travel_deg", "pm10_ugm3", "humidity_pct"])
def test_a_figure_that_is_not_finite_is_refused(site, column, value):
    cells = {"night": FIRST_NIGHT.isoformat(), "open_hours": "5", column: value}
    report = services.nights_import(site, render([list(cells.values())], ",".join(cells)))
    too_large = " (a number too large to hold)" if value == "1e999" else ""  # written as a number, too large for one
    assert report.errors == [(2, f"{column} must be a finite number, not {value}{too_large}")]
    assert not NightUsage.objects.exists()


def test_a_count_written_as_a_whole_decimal_is_accepted_and_a_fraction_refused(site):
    report = services.nights_import(site, b"night,open_hours,slews,brake_cycles\n2024-01-05,5,4.0,1e3\n")
    assert (report.created, report.errors) == (1, [])
    stored = NightUsage.objects.get(site=site)
    assert (stored.slews, stored.brake_cycles) == (4, 1000) and isinstance(stored.slews, int)
    report = services.nights_import(site, b"night,open_hours,slews\n2024-01-06,5,4.5\n")
    assert report.errors == [(2, "slews must be a whole number, not 4.5")]


def test_every_problem_of_a_row_is_reported_not_only_the_first(site):
    data = b"night,open_hours,slews,humidity_pct,dew\n2024-01-05,30,-1,140,perhaps\n2024-01-06,5,3,40,no\n"
    report = services.nights_import(site, data)
    assert [(p.position, p.field) for p in report.errors] == [
        (2, "open_hours"), (2, "slews"), (2, "humidity_pct"), (2, "dew")
    ]
    assert report.summary == "1 bad row; nothing was stored."
    assert report.refused_rows == [(
        2, "open_hours cannot be above 24 (got 30); slews cannot be below 0 (got -1); "
           "humidity_pct cannot be above 100 (got 140); "
           'dew must be yes or no (also 1 or 0, true or false), not "perhaps"',
    )]
    assert not NightUsage.objects.exists()


# --- the command and the page, as a user meets them -----------------------------------------------------


def test_command_refuses_a_night_far_in_the_past_with_a_message_and_stores_nothing(stored, csv_file):
    before = snapshot()
    err = StringIO()
    with pytest.raises(CommandError, match="1 bad row; nothing was stored"):
        call_command("import_nights", str(csv_file(b"night,open_hours\n1800-01-01,5\n")), "--site", stored.slug,
                     stdout=StringIO(), stderr=err)
    earliest = earliest_accepted(services.latest_night(stored))
    assert f"line 2: night 1800-01-01 is more than 15 years ago; the earliest accepted is {earliest}" in err.getvalue()
    assert snapshot() == before


def test_command_refuses_a_file_that_is_not_a_nights_csv_as_a_whole(stored, csv_file):
    before = snapshot()
    with pytest.raises(CommandError, match="This file is not a nights CSV: missing column: open_hours"):
        run_import(str(csv_file(b"night,hours\n2024-01-01,5\n")), "--site", stored.slug)
    assert snapshot() == before


def test_upload_page_explains_the_format_in_a_table_drawn_from_the_parser_columns(technician_client, site):
    from observatory_ops.logbook import nights_csv

    page = technician_client.get(reverse("nights-import", args=[site.slug])).content.decode()
    assert "=====" not in page and "README.md" not in page  # not the module docstring any more
    for column in nights_csv.COLUMN_SPECS:
        assert f"<td><code>{column.name}</code></td><td>{'yes' if column.required else 'no'}</td>" in page
        assert f"<td>{escape(column.accepted)}</td>" in page
    assert "<td>0 to 10,000 (whole number)</td>" in page  # slews and brake cycles
    assert "<td>0 to 1,000,000</td>" in page  # axis travel
    assert escape(nights_csv.example_csv()) in page
    earliest = earliest_accepted(services.latest_night(site))
    assert f"Nights are accepted from {earliest:%Y-%m-%d} on." in page


def test_the_example_of_the_help_is_a_good_file():
    from observatory_ops.logbook import nights_csv

    parsed = nights_csv.parse(nights_csv.example_csv(), latest_night=dt.date(2026, 3, 14))
    assert parsed.errors == [] and len(parsed.rows) == 1
    assert set(parsed.rows[0][1]) == set(nights_csv.COLUMNS)


@pytest.mark.parametrize(
    ("data", "name", "reason"),
    [
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x10\x00\x00\x00\x10", "sky.png", "it holds binary data"),
        (b"night;open_hours\n2024-01-05;5\n", "nights.csv", "its columns are separated by semicolons, not commas"),
        (b"night,hours\n2024-01-05,5\n", "nights.csv", "missing column: open_hours"),
    ],
)
def test_upload_of_a_file_that_is_not_a_nights_csv_says_so_without_a_row_count(
    technician_client, stored, data, name, reason
):
    before = snapshot()
    page = upload(technician_client, stored, data, name=name).content.decode()
    assert f"This file is not a nights CSV: {escape(reason)}" in page
    assert re.search(r"\d bad rows?", page) is None and "Fix these rows" not in page and "<th>Line</th>" not in page
    assert snapshot() == before


def test_upload_lists_every_problem_of_a_row_on_its_line(technician_client, stored):
    before = snapshot()
    page = upload(technician_client, stored, b"night,open_hours,slews,humidity_pct\n2024-01-05,5,-1,140\n"
                  ).content.decode()
    assert "Import refused: 1 bad row; nothing was stored." in page
    assert "<td>2</td><td>slews cannot be below 0 (got -1); humidity_pct cannot be above 100 (got 140)</td>" in page
    assert snapshot() == before


def test_upload_of_a_night_far_in_the_past_is_a_message_not_a_server_error(technician_client, stored):
    before = snapshot()
    response = upload(technician_client, stored, b"night,open_hours\n1900-01-01,5\n")
    assert response.status_code == 200
    earliest = earliest_accepted(services.latest_night(stored))
    assert f"<td>2</td><td>night 1900-01-01 is more than 15 years ago; the earliest accepted is {earliest}</td>" in (
        response.content.decode()
    )
    assert snapshot() == before


def test_upload_of_only_the_required_columns_keeps_the_stored_figures(technician_client, full):
    data = render([[FIRST_NIGHT.isoformat(), "7.25"]], "night,open_hours")
    page = upload(technician_client, full, data, confirm=confirm_token(upload(technician_client, full, data)))
    assert b"Import done: 0 new, 1 updated, 0 unchanged." in page.content
    stored = NightUsage.objects.get(site=full, night=FIRST_NIGHT)
    assert (stored.open_hours, stored.slews, stored.pm10_ugm3, stored.humidity_pct, stored.dew) == (
        7.25, 40, 35.5, 41.0, True
    )


def test_the_readme_table_states_the_ranges_the_parser_applies():
    from observatory_ops.logbook import nights_csv

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for column in nights_csv.COLUMN_SPECS:
        if column.kind in ("number", "count"):
            cells = [f"`{column.name}`", "yes" if column.required else "no", column.unit, column.accepted]
            assert "|" + "|".join(f" {cell} " if cell else " " for cell in cells) + "|" in readme, column.name


# --- changing stored nights: the page shows the changes and asks first ----------------------------------


def confirm_token(response) -> str:
    """The token of the changes the page asks to confirm, as its form carries it."""
    found = re.search(r'name="confirm" value="([0-9a-f]+)"', response.content.decode())
    assert found, "the page asks for no confirmation"
    return found.group(1)


def messages_of(response) -> list[str]:
    return [str(m) for m in response.context["messages"]]


@pytest.fixture
def night_of_759(site):
    """The reviewer's case: a stored night of 7.59 h that a file gives as 7.5 h."""
    NightUsage.objects.create(site=site, night=FIRST_NIGHT, open_hours=7.59, slews=40, pm10_ugm3=35.5,
                              source=NightUsage.Source.IMPORT)
    return site


CHANGING_FILE = render(
    [[FIRST_NIGHT.isoformat(), "7.5", "40", ""], [(FIRST_NIGHT + dt.timedelta(days=1)).isoformat(), "6", "12", "20"]],
    "night,open_hours,slews,pm10_ugm3",
)
#: The first cells of a change of the stored night in the page's list: the night, and whose (no telescope named).
CHANGED_NIGHT = f"<td>{FIRST_NIGHT}</td><td>whole site</td>"


def test_an_upload_that_would_change_a_stored_night_lists_each_change_and_stores_nothing_yet(
    technician_client, night_of_759, recomputes
):
    before = snapshot()
    response = upload(technician_client, night_of_759, CHANGING_FILE)
    page = response.content.decode()
    assert messages_of(response) == [
        "Check the changes below and confirm them. The file would change 1 stored night (1 new, 0 unchanged); "
        "nothing was stored yet."
    ]
    assert f"{CHANGED_NIGHT}<td><code>open_hours</code></td><td>7.59</td><td>7.5</td>" in page
    assert f"{CHANGED_NIGHT}<td><code>pm10_ugm3</code></td><td>35.5</td><td>empty</td>" in page
    assert f"{CHANGED_NIGHT}<td><code>slews</code>" not in page  # the same figure as stored is no change
    assert "press <em>Store these changes</em> (the file is kept until then)" in page
    assert ">Store these changes</button>" in page
    # Nothing at all is stored, not even the new night: an import is all or nothing.
    assert snapshot() == before and recomputes == []


def test_the_same_file_sent_again_with_the_token_stores_the_changes_shown_and_a_third_time_changes_nothing(
    technician_client, night_of_759, recomputes
):
    token = confirm_token(upload(technician_client, night_of_759, CHANGING_FILE))
    response = upload(technician_client, night_of_759, CHANGING_FILE, confirm=token)
    assert messages_of(response) == ["Import done: 1 new, 1 updated, 0 unchanged."]
    page = response.content.decode()
    assert "Changed in stored nights:" in page and "<th>Was</th><th>Now</th>" in page
    assert f"{CHANGED_NIGHT}<td><code>open_hours</code></td><td>7.59</td><td>7.5</td>" in page
    stored = NightUsage.objects.get(site=night_of_759, night=FIRST_NIGHT)
    assert (stored.open_hours, stored.slews, stored.pm10_ugm3) == (7.5, 40, None)
    assert NightUsage.objects.filter(site=night_of_759).count() == 2 and recomputes == [night_of_759.pk]
    after = snapshot()
    # Sent once more (a second click, the browser's back button): nothing changes, and the page says so.
    response = upload(technician_client, night_of_759, CHANGING_FILE, confirm=token)
    assert messages_of(response) == ["Import done: 0 new, 0 updated, 2 unchanged; nothing changed."]
    assert snapshot() == after and recomputes == [night_of_759.pk]


def test_the_changes_are_confirmed_without_choosing_the_file_again(technician_client, night_of_759, recomputes):
    """Browsers never keep a chosen file: the page keeps the one whose changes it lists, so pressing Store these
    changes with no file stores them; with no file and no changes waiting, the page asks for a file."""
    token = confirm_token(upload(technician_client, night_of_759, CHANGING_FILE))
    url = reverse("nights-import", args=[night_of_759.slug])
    response = technician_client.post(url, {"confirm": token})
    assert messages_of(response) == ["Import done: 1 new, 1 updated, 0 unchanged."]
    assert NightUsage.objects.get(site=night_of_759, night=FIRST_NIGHT).open_hours == 7.5
    after = snapshot()
    again = technician_client.post(url, {"confirm": token})  # the kept file was spent with its import
    assert "Choose the CSV file to import." in again.content.decode() and snapshot() == after
    assert technician_client.post(url, {"confirm": ""}).context["form"].errors == {
        "file": ["Choose the CSV file to import."]
    }


def test_a_token_of_other_changes_stores_nothing_and_shows_the_changes_now_due(
    technician_client, night_of_759, recomputes
):
    token = confirm_token(upload(technician_client, night_of_759, CHANGING_FILE))
    # Someone corrects the night in between: what was confirmed is no longer what the file would change.
    NightUsage.objects.filter(site=night_of_759, night=FIRST_NIGHT).update(open_hours=7.75)
    before = snapshot()
    response = upload(technician_client, night_of_759, CHANGING_FILE, confirm=token)
    assert messages_of(response)[0].startswith(
        "These changes are not the ones confirmed (the file or the stored nights differ): check them again."
    )
    assert f"{CHANGED_NIGHT}<td><code>open_hours</code></td><td>7.75</td><td>7.5</td>" in (
        response.content.decode()
    )
    assert snapshot() == before and recomputes == []
    # Another file under the token of the first is refused the same way.
    other = render([[FIRST_NIGHT.isoformat(), "7.0"]], "night,open_hours")
    upload(technician_client, night_of_759, other, confirm=confirm_token(response))
    assert snapshot() == before


def test_a_file_that_changes_no_stored_night_is_stored_at_once(technician_client, night_of_759):
    new_only = render([[(FIRST_NIGHT + dt.timedelta(days=3)).isoformat(), "5"], [FIRST_NIGHT.isoformat(), "7.59"]],
                      "night,open_hours")
    response = upload(technician_client, night_of_759, new_only)
    assert messages_of(response) == ["Import done: 1 new, 0 updated, 1 unchanged."]
    assert ">Store these changes</button>" not in response.content.decode()
    assert NightUsage.objects.filter(site=night_of_759).count() == 2


def test_skip_bad_with_changes_lists_the_rows_it_will_skip_and_stores_the_good_ones_once_confirmed(
    technician_client, night_of_759
):
    data = CHANGING_FILE + b"next week,5,1,1\n"
    before = snapshot()
    first = upload(technician_client, night_of_759, data, skip_bad=True)
    page = first.content.decode()
    assert "Rows that will be skipped:" in page and "<td>4</td>" in page
    assert 'name="skip_bad" id="id_skip_bad" checked' in page  # the tick is kept for the second send
    assert snapshot() == before
    done = upload(technician_client, night_of_759, data, skip_bad=True, confirm=confirm_token(first))
    assert messages_of(done) == ["Import done: 1 new, 1 updated, 0 unchanged; 1 bad row skipped."]


def test_the_service_asks_only_when_told_to_and_the_command_and_api_store_at_once(night_of_759, csv_file):
    asked = services.nights_import(night_of_759, CHANGING_FILE, confirmed="")
    assert not asked.stored and asked.confirm_token and not asked.confirmed_other
    assert [(c.night, c.column, c.old, c.new) for c in asked.changes] == [
        (FIRST_NIGHT, "open_hours", 7.59, 7.5), (FIRST_NIGHT, "pm10_ugm3", 35.5, None),
    ]
    out, _ = run_import(str(csv_file(CHANGING_FILE)), "--site", night_of_759.slug)
    assert f"updated night {FIRST_NIGHT}: open_hours 7.59 -> 7.5; pm10_ugm3 35.5 -> empty\n" in out
    assert out.endswith("1 new, 1 updated, 0 unchanged.\nChanged 1 stored night.\n")
    # The API (nights_ingest) never asks: a night sent with other figures is updated, as before.
    report = services.nights_ingest(night_of_759, [{"night": FIRST_NIGHT.isoformat(), "open_hours": 7.25}])
    assert (report.updated, report.stored) == (1, True)


@DB_EXAMPLES
@given(first=good_rows(max_size=8), second=good_rows(max_size=8))
def test_storing_after_confirmation_gives_exactly_what_the_command_stores_at_once(first, second):
    asked_site, direct_site = fresh_site(), fresh_site()
    for target in (asked_site, direct_site):
        services.nights_import(target, render(first))
    direct = services.nights_import(direct_site, render(second))
    asked = services.nights_import(asked_site, render(second), confirmed="")
    assert [(c.night, c.column) for c in asked.changes] == [(c.night, c.column) for c in direct.changes]
    if asked.confirm_token:
        assert not asked.stored
        asked = services.nights_import(asked_site, render(second), confirmed=asked.confirm_token)
    assert asked.stored and (asked.created, asked.updated, asked.unchanged) == (
        direct.created, direct.updated, direct.unchanged
    )

    def figures(target):
        return [{k: v for k, v in row.items() if k not in ("id", "site_id", "recorded_at")}
                for row in NightUsage.objects.filter(site=target).order_by("night").values()]

    assert figures(asked_site) == figures(direct_site)


# --- messages ---------------------------------------------------------------------------------------------


def test_empty_columns_a_spreadsheet_exports_are_ignored(site):
    data = b"night,open_hours,slews,,,\n2024-01-05,5,3,,,\n2024-01-06,6,4,, ,\n"
    report = services.nights_import(site, data)
    assert (report.created, report.errors) == (2, [])


@pytest.mark.parametrize(
    ("data", "reason"),
    [
        (b"night,open_hours,,\n2024-01-05,5,,x\n", "unknown column: column 4 (its header is blank)"),
        (b"night,,open_hours,\n2024-01-05,1,5,2\n",
         "unknown columns: column 2 (its header is blank), column 4 (its header is blank)"),
        (b"slews,,\n3,,\n", "missing columns: night, open_hours"),
        (b"night,open_hours,night,open_hours,,\n2024-01-05,5,2024-01-06,5,,\n", "repeated columns: night, open_hours"),
    ],
)
def test_a_blank_header_over_values_is_named_by_its_position_and_counts_read_as_words(site, data, reason):
    report = services.nights_import(site, data)
    assert_refused_as_a_file(report)
    assert report.file_problem.startswith(f"This file is not a nights CSV: {reason}")
    assert not NightUsage.objects.exists()


@pytest.mark.parametrize(
    ("night", "reason"),
    [
        ("2023-02-30", "night 2023-02-30 is no such date (February 2023 has 28 days)"),
        ("2024-02-30", "night 2024-02-30 is no such date (February 2024 has 29 days)"),  # 2024 is a leap year
        ("2024-04-31", "night 2024-04-31 is no such date (April 2024 has 30 days)"),
        ("2024-13-01", "night 2024-13-01 is no such date (there is no month 13)"),
        ("2024-00-10", "night 2024-00-10 is no such date (there is no month 0)"),
        ("2024-1-5", 'night must be a date as YYYY-MM-DD, not "2024-1-5"'),
    ],
)
def test_a_date_written_as_yyyy_mm_dd_that_the_calendar_lacks_is_called_no_such_date(site, night, reason):
    report = services.nights_import(site, f"night,open_hours\n{night},5\n".encode())
    assert report.errors == [(2, reason)]


def test_the_import_page_says_each_result_once(technician_client, night_of_759):
    cases = [
        (render([good_cells(FIRST_NIGHT + dt.timedelta(days=9))]), "Import done: 1 new, 0 updated, 0 unchanged."),
        (b"night,open_hours\n2024-01-05,-1\n", "Import refused: 1 bad row; nothing was stored."),
        (b"night;open_hours\n2024-01-05;5\n", "This file is not a nights CSV: its columns are separated by "
                                              "semicolons, not commas; save it as comma-separated CSV. "
                                              "Nothing was stored."),
        (CHANGING_FILE, "Check the changes below and confirm them."),
    ]
    for data, said in cases:
        response = upload(technician_client, night_of_759, data)
        assert response.content.decode().count(escape(said)) == 1, said


def test_a_file_of_blank_lines_says_what_a_nights_file_holds(site, csv_file):
    with pytest.raises(CommandError, match="it is empty; it must hold a header line naming the columns"):
        run_import(str(csv_file(b"\n  \n")), "--site", site.slug)


def test_after_the_confirmed_changes_are_stored_the_page_offers_a_plain_import_again(technician_client, night_of_759):
    """A site engineer's review: the stored result still showed "Store these changes" with the spent token filled in,
    so the next file chosen would have been sent as a confirmation of changes it does not make."""
    asked = upload(technician_client, night_of_759, CHANGING_FILE)
    stored = upload(technician_client, night_of_759, CHANGING_FILE, confirm=confirm_token(asked))
    assert messages_of(stored) == ["Import done: 1 new, 1 updated, 0 unchanged."]
    page = stored.content.decode()
    assert ">Import</button>" in page and ">Store these changes</button>" not in page
    assert re.search(r'name="confirm"(?: value="")? id="id_confirm"', page)  # the hidden token is empty
    # A refused file sent with the token is not asked to confirm either.
    refused = upload(technician_client, night_of_759, b"night,open_hours\n2024-01-05,-1\n",
                     confirm=confirm_token(asked))
    assert ">Import</button>" in refused.content.decode()
    assert not re.search(r'name="confirm" value="[0-9a-f]+"', refused.content.decode())


def test_a_row_with_a_quoted_line_break_is_named_by_its_first_line():
    """A bad-input review: a row whose quoted cell held a line break was named by its last line."""
    import datetime as dt

    from observatory_ops.logbook.nights_csv import parse

    text = ("night,open_hours\n"
            "2026-03-01,5.5\n"
            '2026-03-02,"-1\n"\n'
            "2026-03-03,4\n")
    result = parse(text, dt.date(2026, 12, 1))
    assert [line for line, _ in result.errors] == [3]


def test_a_figure_of_thousands_of_digits_is_said_too_large_to_hold(site):
    """A bad-input review's 5,000-digit slews cell was called "must be a finite number", which its digits are."""
    from observatory_ops.logbook import services as logbook_services

    report = logbook_services.nights_import(site, f"night,open_hours,slews\n2024-01-05,5,{'9' * 5000}\n".encode())
    assert report.errors and "(a number too large to hold)" in report.errors[0].reason
