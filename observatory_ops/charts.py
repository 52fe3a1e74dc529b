"""A small SVG chart builder shared by the pages' pictures (no plotting library, no JavaScript).

Numbers map linearly to the plot area; x may be numbers or dates. Axes are ticked at round values
(:func:`nice_ticks`, :func:`date_ticks`). The labels of reference lines and markers are placed when the
picture is finished, each at the first of its candidate places that keeps clear of the texts, lines and
markers already there. Every text drawn is escaped.
"""
from __future__ import annotations

import datetime as dt
import itertools
import math
from collections.abc import Sequence

from django.utils.html import escape
from django.utils.safestring import SafeString, mark_safe

INK, MUTED, ACCENT, ALERT, BAND, GRID = "#1f2a33", "#5b6975", "#2e5d7a", "#a3261b", "#a86a00", "#e6e9ec"
#: Font size of every text, px, and the width of one character and the height of a line of it, estimated
#: generously for a sans-serif face (about 0.58 em a character), so that labels judged clear are clear.
FONT_PX, CHAR_PX, LINE_PX = 11, 6.4, 13

Box = tuple[float, float, float, float]  # x0, y0, x1, y1 in picture pixels


def _nice_number(x: float, rounded: bool) -> float:
    """A number of the form 1, 2, 2.5 or 5 x 10^n near ``x``: the nearest one (``rounded``) or the least
    not below it (Heckbert's ``nicenum``, with 2.5 added to his 1, 2, 5)."""
    exponent = math.floor(math.log10(x))
    fraction = x / 10.0**exponent
    if rounded:  # nearest, with the bounds halfway between neighbours (Heckbert: 1.5, 3, 7)
        nice = 1 if fraction < 1.5 else 2 if fraction < 2.25 else 2.5 if fraction < 3.5 else 5 if fraction < 7 else 10
    else:
        nice = next(n for n in (1, 2, 2.5, 5, 10) if fraction <= n)
    return nice * 10.0**exponent


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick values covering ``low`` to ``high``: about ``count`` of them, spaced 1, 2, 2.5 or 5 x 10^n.

    Method
    ------
    Loose labelling of P. S. Heckbert, "Nice numbers for graph labels", Graphics Gems (1990): the span is
    rounded up to a nice number, the step is the nice number nearest to that span / (count - 1), and the
    ticks run from the multiple of the step at or below ``low`` to the one at or above ``high``. So the
    first and last ticks may lie outside the range; a chart draws those inside it.
    """
    if not (math.isfinite(low) and math.isfinite(high)) or high <= low:
        raise ValueError(f"ticks need a range with high above low, not {low} to {high}")
    step = _nice_number(_nice_number(high - low, rounded=False) / (count - 1), rounded=True)
    first, last = math.floor(low / step), math.ceil(high / step)
    digits = tick_decimals(step) + 1  # removes float noise (0.30000000000000004) and nothing else
    return [round(k * step, digits) + 0.0 for k in range(first, last + 1)]


def tick_decimals(step: float) -> int:
    """Decimals that show every multiple of ``step`` exactly: 0 for 5 or 100, 1 for 0.5 or 2.5, 2 for 0.25."""
    for decimals in range(12):
        scaled = step * 10**decimals
        if abs(scaled - round(scaled)) <= 1e-9 * max(1.0, scaled):
            return decimals
    return 12


#: Steps of a date axis: days, then calendar months.
_DAY_STEPS = (1, 2, 7, 14)
_MONTH_STEPS = (1, 2, 3, 6, 12, 24, 60)


def date_ticks(start: dt.date, end: dt.date, count: int = 5) -> tuple[list[dt.date], str]:
    """Round dates from ``start`` to ``end`` (both included) for a date axis, and the strftime format to
    label them: at most ``count`` + 1 of them.

    Method
    ------
    The same idea as :func:`nice_ticks` for the calendar: the smallest step of 1, 2, 7 or 14 days, or of
    1, 2, 3, 6, 12, 24 or 60 months, that gives no more than ``count`` + 1 ticks. Month steps fall on the
    first of a month whose number is a multiple of the step (quarters on January, April, July, October;
    years on 1 January), so the ticks are the same whatever the range's first day.
    """
    if end < start:
        raise ValueError(f"a date axis needs its end ({end}) on or after its start ({start})")
    span = (end - start).days
    for days in _DAY_STEPS:
        if span // days + 1 <= count + 1:
            return [start + dt.timedelta(days=k * days) for k in range(span // days + 1)], "%d %b"
    first_month, last_month = start.year * 12 + start.month - 1, end.year * 12 + end.month - 1
    for months in _MONTH_STEPS:
        ticks = [
            dt.date(m // 12, m % 12 + 1, 1)
            for m in range(-(-first_month // months) * months, last_month + 1, months)
            if dt.date(m // 12, m % 12 + 1, 1) >= start
        ]
        if len(ticks) <= count + 1:
            return ticks, "%Y" if months >= 12 else "%b %Y"
    raise ValueError(f"a date axis from {start} to {end} is too long to label")


def text_box(x: float, y: float, words: str, anchor: str = "start") -> Box:
    """The box a text of ``FONT_PX`` takes with its baseline at ``y``, anchored at ``x`` (an estimate)."""
    width = CHAR_PX * len(words)
    left = x if anchor == "start" else x - width if anchor == "end" else x - width / 2
    return (left, y - FONT_PX + 2, left + width, y + 3)


def overlap(a: Box, b: Box) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


class Chart:
    """An SVG picture, one image to a screen reader: ``title`` names it, and ``described_by`` gives the ids of the
    page's sentences or table that carry its figures in words (aria-describedby), for whoever cannot see it."""

    def __init__(
        self, x_low, x_high, y_low: float, y_high: float, title: str = "", width=720, height=260,
        described_by: str = "",
    ):
        self.x_low, self.x_high = x_low, x_high
        self.y_low, self.y_high = y_low, (y_high if y_high > y_low else y_low + 1.0)
        self.width, self.height = width, height
        self.left, self.right, self.top, self.bottom = 64, 16, 16, 40
        described = f' aria-describedby="{escape(described_by)}"' if described_by else ""
        self.parts = [
            f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" role="img" '
            f'aria-label="{escape(title)}"{described}>',
            f'<rect x="{self.left}" y="{self.top}" width="{width - self.left - self.right}" '
            f'height="{height - self.top - self.bottom}" fill="#fbfbfa" stroke="#d5dbe0"/>',
        ]
        # What a label placed later must keep clear of (texts, reference lines, markers), and the labels
        # still to place: (candidate places, words, colour), placed in turn by svg().
        self.taken: list[Box] = []
        self.labels: list[tuple[list[tuple[float, float, str]], str, str]] = []

    def _number(self, value) -> float:
        return value.toordinal() if isinstance(value, dt.date) else float(value)

    def x(self, value) -> float:
        low, high = self._number(self.x_low), self._number(self.x_high)
        return self.left + (self.width - self.left - self.right) * (self._number(value) - low) / ((high - low) or 1.0)

    def y(self, value: float) -> float:
        span = self.y_high - self.y_low
        return self.top + (self.height - self.top - self.bottom) * (1 - (value - self.y_low) / span)

    @property
    def area(self) -> Box:
        """The plot area, inside the axes."""
        return (self.left, self.top, self.width - self.right, self.height - self.bottom)

    def text(self, x: float, y: float, words: str, anchor: str = "start", colour: str = INK) -> None:
        self.parts.append(
            f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="{FONT_PX}" fill="{colour}">'
            f"{escape(words)}</text>"
        )
        self.taken.append(text_box(x, y, words, anchor))

    def label(self, candidates: list[tuple[float, float, str]], words: str, colour: str = INK) -> None:
        """A text to place when the picture is finished: at the first of ``candidates`` (x, baseline y,
        anchor) that lies inside the plot area clear of everything else, or at the first if none does."""
        self.labels.append((candidates, words, colour))

    def axes(self, y_format: str | None = "", x_label: str = "", y_label: str = "") -> None:
        """Round ticks on both axes (``nice_ticks``, ``date_ticks``) with light grid lines across the plot.

        ``y_format``: "" writes each y tick with the decimals its step needs; a format spec (".3f") writes
        them so; None leaves the y axis unlabelled (rows labelled in the plot). ``y_label`` names the y axis, written
        up the left margin beside its ticks.
        """
        if y_label:
            middle = (self.top + self.height - self.bottom) / 2
            self.parts.append(
                f'<text x="12" y="{middle:.1f}" text-anchor="middle" font-size="{FONT_PX}" fill="{MUTED}" '
                f'transform="rotate(-90 12 {middle:.1f})">{escape(y_label)}</text>'
            )
        x0, y0, x1, y1 = self.area
        if y_format is not None:
            ticks = [v for v in nice_ticks(self.y_low, self.y_high) if self.y_low <= v <= self.y_high]
            decimals = tick_decimals(ticks[1] - ticks[0]) if len(ticks) > 1 else 0
            for value in ticks:
                y = self.y(value)
                self.parts.append(f'<line x1="{x0}" x2="{x1}" y1="{y:.1f}" y2="{y:.1f}" stroke="{GRID}"/>')
                words = format(value, y_format) if y_format else f"{value:,.{decimals}f}"
                self.text(self.left - 6, y + 4, words, "end", MUTED)
        if isinstance(self.x_low, dt.date):
            days, pattern = date_ticks(self.x_low, self.x_high)
            x_ticks = [(day, day.strftime(pattern)) for day in days]
        else:
            values = [v for v in nice_ticks(self.x_low, self.x_high) if self.x_low <= v <= self.x_high]
            decimals = tick_decimals(values[1] - values[0]) if len(values) > 1 else 0
            x_ticks = [(v, f"{v:,.{decimals}f}") for v in values]
        for at, words in x_ticks:
            x = self.x(at)
            self.parts.append(f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{y1}" y2="{y1 + 4}" stroke="{MUTED}"/>')
            half = CHAR_PX * len(words) / 2  # keep a label at either end inside the picture
            anchor = "start" if x - half < 2 else "end" if x + half > self.width - 2 else "middle"
            self.text(x, y1 + 16, words, anchor, MUTED)
        if x_label:
            self.text(self.width - self.right, self.height - 6, x_label, "end", MUTED)

    def band(self, x_from, x_to, label: str = "") -> None:
        self.parts.append(
            f'<rect x="{self.x(x_from):.1f}" y="{self.top}" width="{max(self.x(x_to) - self.x(x_from), 1):.1f}" '
            f'height="{self.height - self.top - self.bottom}" fill="{BAND}" fill-opacity="0.15">'
            f"<title>{escape(label)}</title></rect>"
        )

    def hline(self, value: float, label: str, colour: str = ALERT) -> None:
        """A horizontal reference line across the plot, labelled at its right end (above it, else below it,
        else moved left in steps until clear)."""
        y = self.y(value)
        x0, _, x1, _ = self.area
        self.parts.append(
            f'<line x1="{x0}" x2="{x1}" y1="{y:.1f}" y2="{y:.1f}" stroke="{colour}" '
            'stroke-width="1.5" stroke-dasharray="6 4"/>'
        )
        self.taken.append((x0, y - 1, x1, y + 1))
        ends = [x1 - 4 - step for step in range(0, max(int(x1 - x0 - CHAR_PX * len(label)), 1), 24)]
        self.label([(x, y + dy, "end") for x in ends for dy in (-5, LINE_PX)], label, colour)

    def vline(self, at, label: str) -> None:
        """A vertical reference line, labelled at its top beside it (on the roomier side first), moved down
        a line at a time until clear."""
        x = self.x(at)
        x0, y0, x1, y1 = self.area
        self.parts.append(f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{y0}" y2="{y1}" stroke="{INK}"/>')
        self.taken.append((x - 1, y0, x + 1, y1))
        sides = [(x + 3, "start"), (x - 3, "end")]
        if x > (x0 + x1) / 2:
            sides.reverse()
        self.label([(side, y, anchor) for y in range(int(y0) + 12, int(y1), LINE_PX) for side, anchor in sides],
                   label)

    def line(
        self, points: Sequence[tuple], colour: str = ACCENT, dashed: bool = False, width: float = 2,
        keep_clear: bool = True,
    ) -> None:
        """A polyline; labels keep clear of it unless ``keep_clear`` is False (a light guide line that a label may
        cross, such as a mirror's cleanings spanning the whole plot, which would otherwise leave no room)."""
        if len(points) < 2:
            return
        pixels = [(self.x(a), self.y(b)) for a, b in points]
        path = " ".join(f"{x:.1f},{y:.1f}" for x, y in pixels)
        dash = ' stroke-dasharray="3 3"' if dashed else ""
        self.parts.append(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="{width}"{dash}/>')
        if not keep_clear:
            return
        for (xa, ya), (xb, yb) in itertools.pairwise(pixels):  # labels keep clear of the line: a dot every 6 px
            steps = max(1, int(math.hypot(xb - xa, yb - ya) // 6))
            self.taken += [(xa + (xb - xa) * k / steps - 1, ya + (yb - ya) * k / steps - 1,
                            xa + (xb - xa) * k / steps + 1, ya + (yb - ya) * k / steps + 1) for k in range(steps + 1)]

    def dots(self, points: Sequence[tuple], colour: str = INK, label: str = "") -> None:
        for a, b in points:
            self.parts.append(
                f'<circle cx="{self.x(a):.1f}" cy="{self.y(b):.1f}" r="3.5" fill="{colour}"><title>{escape(label)}'
                "</title></circle>"
            )

    def marker(self, at, value: float, label: str) -> None:
        """A dot at (at, value), labelled under it, else over it, else the nearest place clear of the rest
        (a line up or down, 24 px aside, at a time)."""
        x, y = self.x(at), self.y(value)
        self.parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="4.5" fill="{BAND}"/>')
        self.taken.append((x - 5, y - 5, x + 5, y + 5))
        anchor = "end" if x > self.width - self.right - 90 else "start" if x < self.left + 90 else "middle"
        moves = [(dy, 24 * aside) for k in range(8) for dy in (16 + k * LINE_PX, -8 - k * LINE_PX)
                 for aside in range(-8, 9)]
        moves.sort(key=lambda move: (abs(move[0]) - 16) / LINE_PX + abs(move[1]) / 24)  # nearest first
        self.label([(x + aside, y + dy, anchor) for dy, aside in moves], label)

    def _place_labels(self) -> None:
        x0, y0, x1, y1 = self.area
        for candidates, words, colour in self.labels:
            def clear(place: tuple[float, float, str], words: str = words) -> bool:
                box = text_box(*place[:2], words, place[2])
                inside = x0 <= box[0] and box[2] <= x1 and y0 <= box[1] and box[3] <= y1
                return inside and not any(overlap(box, other) for other in self.taken)

            x, y, anchor = next(filter(clear, candidates), candidates[0])
            self.text(x, y, words, anchor, colour)
        self.labels = []

    def svg(self) -> SafeString:
        self._place_labels()
        # Every text drawn is escaped in text(), band() and dots(); the rest is numbers we format.
        return mark_safe("".join(self.parts) + "</svg>")  # noqa: S308  # nosec B308 B703
