"""The mirror page's picture: measured reflectance against dust-weighted exposure, the fit and the line."""
from __future__ import annotations

import math

import numpy as np
from django.utils.safestring import SafeString

from observatory_ops.calc import reflectance
from observatory_ops.charts import BAND, Chart
from observatory_ops.logbook.quantities import reflectance_text

from .services import MirrorForecast

#: The colour of the cleanings' dashed lines and of their key: 4.89:1 on the chart's #fbfbfa, as the key's words need
#: (WCAG 2.2 SC 1.4.3: 4.5:1); a teal, apart from the fit's blue and the fresh line's green.
CLEANING = "#4a7676"


def decline_svg(state: MirrorForecast, described_by: str = "") -> SafeString | None:
    """Measured band reflectance against dust-weighted exposure, the fit, the recoat and fresh lines, the cleanings
    and the crossing; ``described_by``: the ids of the page's words with its figures (``Chart``)."""
    if not state.points and state.fresh_band is None:
        return None
    ends = [state.exposure_now_h, *(p[1] for p in state.points)]
    for value in (state.crossing_exposure_h,):
        if value is not None and math.isfinite(value):
            ends.append(value)
    x_high = max(ends) * 1.1 or 100.0
    lines = (state.fresh_band, state.threshold, state.current)
    values = [p[2] for p in state.points] + [v for v in lines if v is not None]
    chart = Chart(0.0, x_high, min(values) - 0.01, max(values) + 0.01, f"Reflectance of {state.mirror}",
                  described_by=described_by)
    chart.axes(x_label=f"dust-weighted open hours since {state.exposure_since}", y_label="band reflectance (fraction)")
    if state.fit is not None:
        grid = np.linspace(0, x_high, 200)
        chart.line(list(zip(grid, reflectance.predict(state.fit, grid), strict=True)))
    if state.threshold is not None:
        chart.hline(state.threshold, f"recoat line {reflectance_text(state.threshold)}")
    if state.fresh_band is not None:
        chart.hline(state.fresh_band, f"computed fresh {reflectance_text(state.fresh_band)}", colour="#4a6b4a")
    for _, exposure in state.cleanings:
        chart.line([(exposure, chart.y_low), (exposure, chart.y_high)], colour=CLEANING, width=1, dashed=True,
                   keep_clear=False)
    chart.dots([(p[1], p[2]) for p in state.points], label="measured")
    chart.vline(state.exposure_now_h, "now")
    if state.current is not None:  # a titled dot, not a label: a label here would cross the recoat line's
        chart.dots([(state.exposure_now_h, state.current)], colour=BAND,
                   label=f"estimate now {reflectance_text(state.current)}")
    if state.crossing_exposure_h is not None and math.isfinite(state.crossing_exposure_h) and state.crossing:
        if state.crossing_exposure_h <= state.exposure_now_h:  # crossed already: its date is clamped to today
            chart.marker(state.exposure_now_h, state.threshold, "below the line now")
        else:
            chart.marker(state.crossing_exposure_h, state.threshold, f"crosses about {state.crossing:%d %b %Y}")
    # Keyed in the cleanings' own colour (the recoat line's red is the line's alone).
    chart.text(chart.left + 6, chart.height - chart.bottom - 6, "dashed verticals: cleanings", colour=CLEANING)
    return chart.svg()


def curve_svg(result: dict, described_by: str = "") -> SafeString:
    """Reflectance against wavelength for a computed coating curve, with its band mean; ``described_by`` as
    ``decline_svg``'s."""
    waves = [p["wavelength_nm"] for p in result["curve"]]
    values = [p["reflectance"] for p in result["curve"]]
    chart = Chart(waves[0], waves[-1], min(values) - 0.01, min(max(values) + 0.01, 1.0), "Coating reflectance",
                  described_by=described_by)
    chart.axes(x_label="wavelength (nm)")
    chart.hline(result["band_mean"], f"band mean {reflectance_text(result['band_mean'])}", colour="#4a6b4a")
    chart.line(list(zip(waves, values, strict=True)))
    return chart.svg()
