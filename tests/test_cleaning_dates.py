"""A reflectance measurement belongs before a cleaning dated after it, by date, even when no night is logged between
the two (both then have the same dust-weighted exposure E).

The decline model (calc/reflectance.py) is R = R0 - b (E - f c_last), with c_last the exposure of the last cleaning
done before the reading. Until this was fixed, a measurement at a cleaning's exposure counted as taken after it, so a
measurement of 04 Jan was fitted as recovered by a cleaning of 06 Jan. ``mirrors.services.mirror_forecast`` now gives
the fit, for each measurement, the cleanings dated on or before it.

Outside reference: ``scipy.optimize.curve_fit`` of the same model with c_last built by date in plain Python.
The mirror, its nights and its measurements are invented test data.
"""
from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from conftest import constant_sky
from scipy import optimize

from observatory_ops.calc.reflectance import fit_decline, predict
from observatory_ops.logbook.models import NightUsage
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.mirrors.services import mirror_forecast
from observatory_ops.registry.models import Subsystem

R0, RATE, RECOVERY = 0.90, 2.0e-5, 0.5
COATED, CLEANED, TODAY = dt.date(2025, 10, 1), dt.date(2026, 1, 6), dt.date(2026, 4, 15)
# No night logged between the 04 Jan measurement and the cleaning of 06 Jan.
NOT_LOGGED = {dt.date(2026, 1, 4), dt.date(2026, 1, 5)}
MEASURED_ON = [dt.date(2025, 10, 21), dt.date(2025, 11, 15), dt.date(2025, 12, 10), dt.date(2026, 1, 4),
               dt.date(2026, 2, 1), dt.date(2026, 3, 1), dt.date(2026, 4, 1)]


def _curve_fit_reference(exposure, measured, last_cleaning):
    def model(x, r0, rate, recovery):
        return r0 - rate * (x[0] - recovery * x[1])

    params, _ = optimize.curve_fit(model, np.vstack([exposure, last_cleaning]), measured, p0=[0.9, 1e-5, 0.3])
    return params


def test_a_reading_at_a_cleanings_exposure_counts_before_it_when_the_dates_say_so():
    exposure = np.array([100.0, 200.0, 300.0, 300.0, 400.0, 500.0])
    cleanings_before = [0, 0, 0, 1, 1, 1]  # the first reading at 300 h was taken before the cleaning at 300 h
    last_cleaning = np.array([300.0 * n for n in cleanings_before])
    noise = np.random.default_rng(4).normal(0, 0.001, exposure.size)
    measured = R0 - RATE * (exposure - RECOVERY * last_cleaning) + noise
    fit = fit_decline(exposure, measured, [300.0], cleanings_before)
    reference = _curve_fit_reference(exposure, measured, last_cleaning)
    np.testing.assert_allclose([fit.r0, fit.rate_per_hour, fit.recovery_fraction], reference, rtol=1e-6)
    # Without dates, both readings at 300 h count as after the cleaning, as the model always said.
    by_exposure = fit_decline(exposure, measured, [300.0])
    np.testing.assert_allclose(
        [by_exposure.r0, by_exposure.rate_per_hour, by_exposure.recovery_fraction],
        _curve_fit_reference(exposure, measured, np.where(exposure >= 300.0, 300.0, 0.0)), rtol=1e-6,
    )
    # Today, after every cleaning, predicts as before.
    assert predict(fit, [600.0])[0] == pytest.approx(fit.r0 - fit.rate_per_hour * (600 - fit.recovery_fraction * 300))


@pytest.mark.parametrize("cleanings_before, problem", [
    ([0, 0, 0, 1, 1], "one whole count per reading"),
    ([0, 0, 0, 1, 1, 2], "between 0 and the 1 cleanings"),
    ([1, 0, 0, 1, 1, 1], "has more exposure than the reading"),
])
def test_counts_of_cleanings_that_cannot_be_are_refused(cleanings_before, problem):
    exposure = [100.0, 200.0, 300.0, 300.0, 400.0, 500.0]
    with pytest.raises(ValueError, match=problem):
        fit_decline(exposure, [0.9] * 6, [300.0], cleanings_before)


@pytest.fixture
def mirror(telescope, users):
    """A primary coated 01 Oct 2025: 4 h open every night in PM10 40 ug/m3 (8 dust-weighted hours a night at
    sensitivity 1) except the nights of 04 and 05 Jan 2026; cleaned 06 Jan 2026; seven band measurements exactly on
    the model, the one of 04 Jan before the cleaning."""
    site = telescope.site
    nights = [COATED + dt.timedelta(days=i) for i in range((TODAY - COATED).days)]
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=night, open_hours=4, pm10_ugm3=40) for night in nights if night not in NOT_LOGGED
    )
    constant_sky(site, COATED, TODAY + dt.timedelta(days=3 * 366 + 1))
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary")
    m = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    CoatingEvent.objects.create(mirror=m, coated_on=COATED, metal="al")
    CleaningEvent.objects.create(mirror=m, cleaned_on=CLEANED, method="co2_snow")

    def exposure(day):  # 8 h for each logged night before the day
        return 8.0 * sum(1 for night in nights if night < day and night not in NOT_LOGGED)

    for day in MEASURED_ON:
        last_cleaning = exposure(CLEANED) if day >= CLEANED else 0.0
        ReflectanceMeasurement.objects.create(mirror=m, measured_on=day, taken_by=users["technician"],
                                              value=R0 - RATE * (exposure(day) - RECOVERY * last_cleaning))
    return m


def test_a_measurement_two_days_before_a_cleaning_is_fitted_as_before_it(mirror):
    state = mirror_forecast(mirror, TODAY)
    (cleaned_on, cleaning_h), = state.cleanings
    on_4_jan = next(p for p in state.points if p[0] == dt.date(2026, 1, 4))
    assert on_4_jan[1] == cleaning_h  # the same exposure: no night logged between them
    # The measurements lie exactly on the model with the 04 Jan one before the cleaning, so the fit finds its
    # figures with no residual; counted after the cleaning, that measurement would leave one.
    assert state.fit.r0 == pytest.approx(R0, abs=1e-9)
    assert state.fit.rate_per_hour == pytest.approx(RATE, rel=1e-6)
    assert state.fit.recovery_fraction == pytest.approx(RECOVERY, rel=1e-6)
    assert state.fit.residual_rms < 1e-9
    exposures = np.array([p[1] for p in state.points])
    last_cleaning = np.array([cleaning_h if p[0] >= cleaned_on else 0.0 for p in state.points])
    np.testing.assert_allclose(
        [state.fit.r0, state.fit.rate_per_hour, state.fit.recovery_fraction],
        _curve_fit_reference(exposures, np.array([p[2] for p in state.points]), last_cleaning), rtol=1e-6,
    )
