"""A small SVG chart builder shared by the pages' pictures (no plotting library, no JavaScript).

Numbers map linearly to the plot area; x may be numbers or dates. Every text drawn is escaped.
"""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

from django.utils.html import escape
from django.utils.safestring import SafeString, mark_safe

INK, MUTED, ACCENT, ALERT, BAND = "#1f2a33", "#5b6975", "#2e5d7a", "#a3261b", "#a86a00"


class Chart:
    def __init__(self, x_low, x_high, y_low: float, y_high: float, title: str = "", width=720, height=260):
        self.x_low, self.x_high = x_low, x_high
        self.y_low, self.y_high = y_low, (y_high if y_high > y_low else y_low + 1.0)
        self.width, self.height = width, height
        self.left, self.right, self.top, self.bottom = 64, 16, 16, 40
        self.parts = [
            f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" role="img" '
            f'aria-label="{escape(title)}">',
            f'<rect x="{self.left}" y="{self.top}" width="{width - self.left - self.right}" '
            f'height="{height - self.top - self.bottom}" fill="#fbfbfa" stroke="#d5dbe0"/>',
        ]

    def _number(self, value) -> float:
        return value.toordinal() if isinstance(value, dt.date) else float(value)

    def x(self, value) -> float:
        low, high = self._number(self.x_low), self._number(self.x_high)
        return self.left + (self.width - self.left - self.right) * (self._number(value) - low) / ((high - low) or 1.0)

    def y(self, value: float) -> float:
        span = self.y_high - self.y_low
        return self.top + (self.height - self.top - self.bottom) * (1 - (value - self.y_low) / span)

    def text(self, x: float, y: float, words: str, anchor: str = "start", colour: str = INK) -> None:
        self.parts.append(
            f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="11" fill="{colour}">'
            f"{escape(words)}</text>"
        )

    def axes(self, y_format: str | None = ",.4g", x_label: str = "") -> None:
        """Five labels on each axis; ``y_format=None`` leaves the y axis unlabelled (rows labelled in the plot)."""
        for i in range(5 if y_format else 0):
            value = self.y_low + (self.y_high - self.y_low) * i / 4
            self.text(self.left - 6, self.y(value) + 4, format(value, y_format), "end", MUTED)
        low, high = self._number(self.x_low), self._number(self.x_high)
        dates = isinstance(self.x_low, dt.date)
        for i in range(5):
            at = low + (high - low) * i / 4
            label = dt.date.fromordinal(round(at)).strftime("%d %b %y") if dates else f"{at:,.0f}"
            anchor = "start" if i == 0 else "end" if i == 4 else "middle"
            self.text(self.x(at), self.height - self.bottom + 16, label, anchor, MUTED)
        if x_label:
            self.text(self.width - self.right, self.height - 6, x_label, "end", MUTED)

    def band(self, x_from, x_to, label: str = "") -> None:
        self.parts.append(
            f'<rect x="{self.x(x_from):.1f}" y="{self.top}" width="{max(self.x(x_to) - self.x(x_from), 1):.1f}" '
            f'height="{self.height - self.top - self.bottom}" fill="{BAND}" fill-opacity="0.15">'
            f"<title>{escape(label)}</title></rect>"
        )

    def hline(self, value: float, label: str, colour: str = ALERT) -> None:
        y = self.y(value)
        self.parts.append(
            f'<line x1="{self.left}" x2="{self.width - self.right}" y1="{y:.1f}" y2="{y:.1f}" stroke="{colour}" '
            'stroke-width="1.5" stroke-dasharray="6 4"/>'
        )
        self.text(self.width - self.right - 4, y - 5, label, "end", colour)

    def vline(self, at, label: str) -> None:
        x = self.x(at)
        self.parts.append(
            f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{self.top}" y2="{self.height - self.bottom}" stroke="{INK}"/>'
        )
        near_right = x > self.width - self.right - 60
        self.text(x - 3 if near_right else x + 3, self.top + 12, label, "end" if near_right else "start")

    def line(self, points: Sequence[tuple], colour: str = ACCENT, dashed: bool = False, width: float = 2) -> None:
        if len(points) < 2:
            return
        path = " ".join(f"{self.x(a):.1f},{self.y(b):.1f}" for a, b in points)
        dash = ' stroke-dasharray="3 3"' if dashed else ""
        self.parts.append(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="{width}"{dash}/>')

    def dots(self, points: Sequence[tuple], colour: str = INK, label: str = "") -> None:
        for a, b in points:
            self.parts.append(
                f'<circle cx="{self.x(a):.1f}" cy="{self.y(b):.1f}" r="3.5" fill="{colour}"><title>{escape(label)}'
                "</title></circle>"
            )

    def marker(self, at, value: float, label: str) -> None:
        x = self.x(at)
        self.parts.append(f'<circle cx="{x:.1f}" cy="{self.y(value):.1f}" r="4.5" fill="{BAND}"/>')
        anchor = "end" if x > self.width - self.right - 90 else "start" if x < self.left + 90 else "middle"
        self.text(x, self.y(value) + 16, label, anchor)

    def svg(self) -> SafeString:
        # Every text drawn is escaped in text(), band() and dots(); the rest is numbers we format.
        return mark_safe("".join(self.parts) + "</svg>")  # noqa: S308  # nosec B308 B703
