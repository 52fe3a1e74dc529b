"""The reliability page's picture: each kind's MTBF with its 90 % interval, on one axis of operating hours."""
from __future__ import annotations

from django.utils.safestring import SafeString

from observatory_ops.calc.reliability import CONFIDENCE
from observatory_ops.charts import ACCENT, INK, Chart

from .selectors import KindReliability

#: Where, as a fraction of the axis, an interval running past the right edge turns dashed.
RUNS_ON_FROM = 0.9


def charted(kinds: list[KindReliability]) -> list[KindReliability]:
    """The kinds the picture draws, one row each: those with a failure in logged operating hours. Kinds without
    failures are in the table only."""
    return [k for k in kinds if k.failures and k.operating_hours > 0]


def axis_end_hours(rows: list[KindReliability]) -> float:
    """Where the picture's axis stops: upper bounds of one or two failures run far out, so at twice the largest
    estimate."""
    return max(k.mtbf.mtbf_hours for k in rows) * 2.0


def mtbf_svg(kinds: list[KindReliability], described_by: str = "") -> SafeString | None:
    """One row per charted kind (``charted``): a line from the lower to the upper bound (its last stretch dashed where
    the upper bound lies past the axis) and a dot at the estimate. ``described_by``: the ids of the page's words with
    its figures (``Chart``; ``mtbf_words`` writes them)."""
    rows = charted(kinds)
    if not rows:
        return None
    x_high = axis_end_hours(rows)
    height = 60 + 34 * len(rows)
    chart = Chart(0.0, x_high, 0.0, float(len(rows)), "MTBF by subsystem kind, with 90 % intervals", height=height,
                  described_by=described_by)
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


def mtbf_words(kinds: list[KindReliability], period: str) -> str:
    """What ``mtbf_svg`` draws, in words, for whoever cannot see it: the period its figures cover (``period``, as
    ``SiteReliability.period_words`` says it), each charted kind's MTBF, its interval and its failures, top row first,
    and the intervals that run on past the axis's end; "" when nothing is drawn."""
    rows = charted(kinds)
    if not rows:
        return ""
    x_high = axis_end_hours(rows)
    each = "; ".join(
        f"{k.label} {k.mtbf.mtbf_hours:,.0f} h ({k.mtbf.lower_hours:,.0f} to {k.mtbf.upper_hours:,.0f} h, "
        f"{k.failures} failure{'s' if k.failures != 1 else ''})" for k in rows
    )
    words = (f"The picture, of the failures and operating hours {period}, kind by kind from the top: the MTBF in "
             f"operating hours and its {round(CONFIDENCE * 100)} % interval: {each}. The axis runs to {x_high:,.0f} h")
    past = [k.label for k in rows if k.mtbf.upper_hours > x_high]
    if past:
        words += f"; intervals that run on past it: {'; '.join(past)}"
    return f"{words}."
