"""The reliability page's picture: each kind's MTBF with its 90 % interval, on one axis of operating hours."""
from __future__ import annotations

from django.utils.safestring import SafeString

from observatory_ops.charts import ACCENT, INK, Chart

from .selectors import KindReliability

#: Where, as a fraction of the axis, an interval running past the right edge turns dashed.
RUNS_ON_FROM = 0.9


def mtbf_svg(kinds: list[KindReliability]) -> SafeString | None:
    """One row per kind with at least one failure: a line from the lower to the upper bound (its last stretch
    dashed where the upper bound lies past the axis) and a dot at the estimate. Kinds without failures are in the
    table."""
    rows = [k for k in kinds if k.failures and k.operating_hours > 0]
    if not rows:
        return None
    ends = [k.mtbf.mtbf_hours for k in rows]
    # Upper bounds of one or two failures run far out; the axis stops at twice the largest estimate.
    x_high = max(ends) * 2.0
    height = 60 + 34 * len(rows)
    chart = Chart(0.0, x_high, 0.0, float(len(rows)), "MTBF by subsystem kind, with 90 % intervals", height=height)
    chart.axes(y_format=None, x_label="operating hours (dome open) between failures")
    for i, kind in enumerate(rows):
        y = len(rows) - i - 0.6
        estimate = kind.mtbf
        upper = estimate.upper_hours
        if upper > x_high:  # solid to near the edge, then dashed: the interval runs on past it
            cut = max(x_high * RUNS_ON_FROM, estimate.lower_hours)
            chart.line([(estimate.lower_hours, y), (cut, y)], colour=ACCENT, width=3)
            chart.line([(cut, y), (x_high, y)], colour=ACCENT, width=3, dashed=True)
        else:
            chart.line([(estimate.lower_hours, y), (upper, y)], colour=ACCENT, width=3)
        chart.dots([(estimate.mtbf_hours, y)], label=f"{kind.label}: {estimate.mtbf_hours:,.0f} h")
        note = f"{kind.failures} failure{'s' if kind.failures != 1 else ''}"
        chart.text(chart.x(0) + 4, chart.y(y) - 8, f"{kind.label} ({note})", colour=INK)
    return chart.svg()
