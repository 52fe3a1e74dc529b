"""A mirror coated before its site's usage log begins: the nights from the coating to the log's first are not logged,
so a measurement dated on or before that first night has no known dust-weighted exposure (it is left out of the fit,
and the page says which, and why), and the exposure of one dated later is counted from the first logged night (the
page says so, and what that does to the fitted figures). And a recoat order's why names its recoat plan's governing
trigger first, as the due list gives it, with the reflectance forecast after it.

Sources named beside each check: scipy.stats.linregress (an independent ordinary least-squares line) for the fit of
the measurements kept; the days between two dates by hand (the calendar); the algebra of a straight line for what the
intercept absorbs.
"""
from __future__ import annotations

import datetime as dt
import html as html_text
import math
import re

import numpy as np
import pytest
from conftest import site_in_use
from django.utils.html import strip_tags
from scipy import stats

from observatory_ops.calc import reflectance
from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.models import NightUsage
from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import selectors

COATED = dt.date(2024, 5, 18)
LOG_BEGINS = dt.date(2026, 6, 1)
# From 18 May 2024 to 18 May 2026 is two years without a 29 February (2024's is before May): 730 days; to 1 Jun 14
# more. The nights 18 May 2024 to 31 May 2026, both counted.
NIGHTS_BEFORE_LOG = 744
# The reviewer's two measurements, both before the log begins.
BEFORE_LOG = [(dt.date(2025, 3, 10), 0.81), (dt.date(2025, 11, 20), 0.80)]
# 4 open hours a night at PM10 40 ug/m3, dust sensitivity 1: weight 1 + (40 - 20) / 20 = 2 (calc/exposure.py), so 8
# dust-weighted hours a night.
HOURS_A_NIGHT = 8.0


def _text(html: str) -> str:
    return re.sub(r"\s+", " ", html_text.unescape(strip_tags(html)))


@pytest.fixture
def gap(db, users):
    """A site whose nights are logged only from 1 Jun 2026 to yesterday, and its primary mirror coated on 18 May 2024
    (the recoat plans restarted from that coating, as a logged coating restarts them), measured twice before the log
    begins."""
    site = site_in_use("log-gap", kinds=("primary_mirror",), nights=0)
    today = site_today(site)
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=LOG_BEGINS + dt.timedelta(days=i), open_hours=4, pm10_ugm3=40)
        for i in range((today - LOG_BEGINS).days)
    )
    subsystem = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    mirror = Mirror.objects.create(subsystem=subsystem, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    coating = CoatingEvent.objects.create(mirror=mirror, coated_on=COATED, metal="al")
    services.coating_service_records_log(coating, users["engineer"])
    for day, value in BEFORE_LOG:
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=day, value=value, taken_by=users["technician"])
    return {"mirror": mirror, "site": site, "today": today, "users": users}


def _measure_after_the_log(gap, rate: float, scatter=(0.0, 0.0, 0.0)) -> list[tuple[float, float]]:
    """Three measurements after the log begins on R = 0.90 - rate (U + E), U the hours the unlogged nights would have
    given at the same 8 a night and E those counted from the first logged night; (E, R) of each."""
    missed_h = HOURS_A_NIGHT * NIGHTS_BEFORE_LOG
    points = []
    for day, noise in zip((dt.date(2026, 7, 1), dt.date(2026, 9, 1), dt.date(2026, 11, 1)), scatter, strict=True):
        counted_h = HOURS_A_NIGHT * (day - LOG_BEGINS).days
        value = 0.90 - rate * (missed_h + counted_h) + noise
        ReflectanceMeasurement.objects.create(mirror=gap["mirror"], measured_on=day, value=value,
                                              taken_by=gap["users"]["technician"])
        points.append((counted_h, value))
    site_recompute(gap["site"])
    return points


def test_measurements_before_the_log_are_left_out_and_named_with_why(gap):
    state = services.mirror_forecast(gap["mirror"])
    assert state.log_begins == LOG_BEGINS
    assert state.points == [] and state.exposure_by_measurement == {}  # not placed at 0 h, as if freshly coated
    assert [(m.measured_on, m.value) for m in state.unlogged_measurements] == BEFORE_LOG
    assert state.fit is None
    assert state.fit_note == (
        f"no fit yet: {reflectance.EXPOSURE_NOT_KNOWN}: 2 of the 2, which leaves 0; a decline needs at least 3")
    gap_said = (f"the usage log begins on 01 Jun 2026; the {NIGHTS_BEFORE_LOG} nights from the coating of 18 May 2024 "
                "to then are not logged")
    assert state.left_out_note == (
        "Left out of the fit: 2 band measurements (10 Mar 2025, 0.8100; 20 Nov 2025, 0.8000), dated on or before the "
        "first logged night, so their dust-weighted exposure since the coating is not known: "
        f"{gap_said}. Log those nights and they are fitted.")
    # The value of a measurement left out is known all the same: the recoat-line trigger uses the last one meanwhile.
    now = services.reflectance_now(state)
    assert (now.now, now.source) == (0.80, services.MEASURED)
    said = services.no_estimate_text(state)
    assert said.startswith("No estimate: 2 band measurements since the coating of 18 May 2024 (no fit yet: the "
                           "exposure since the coating is not known")
    assert "the last measurement, 0.8000 on 20 Nov 2025" in said
    assert "log the nights from the coating on, or log band measurements from now on" in said


def test_the_mirror_page_says_which_measurements_are_left_out_and_why(gap, client):
    client.force_login(gap["users"]["viewer"])
    text = _text(client.get(gap["mirror"].get_absolute_url()).content.decode())
    assert ("Left out of the fit: 2 band measurements (10 Mar 2025, 0.8100; 20 Nov 2025, 0.8000), dated on or before "
            "the first logged night, so their dust-weighted exposure since the coating is not known: the usage log "
            f"begins on 01 Jun 2026; the {NIGHTS_BEFORE_LOG} nights from the coating of 18 May 2024 to then are not "
            "logged. Log those nights and they are fitted.") in text
    assert text.count("not known (before the log): not fitted") == 2  # each in the list of measurements
    assert "0.0 dust-weighted" not in text


def test_a_measurement_logged_before_the_log_says_it_is_not_fitted(gap, client):
    client.force_login(gap["users"]["technician"])
    url = f"/mirrors/{gap['mirror'].pk}/measurements/new/"
    response = client.post(url, {"measured_on": "2026-02-02", "value": "0.79"}, follow=True)
    text = _text(response.content.decode())
    assert ("Measurement logged. It is listed below but not fitted: its dust-weighted exposure since the coating is "
            f"not known (the usage log begins on 01 Jun 2026; the {NIGHTS_BEFORE_LOG} nights from the coating of 18 "
            "May 2024 to then are not logged).") in text


def test_after_the_log_begins_the_slope_is_fitted_from_the_logged_nights_and_the_intercept_absorbs_the_rest(gap):
    points = _measure_after_the_log(gap, 2e-5, scatter=(0.0004, -0.0006, 0.0003))
    state = services.mirror_forecast(gap["mirror"])
    # The two before the log are still left out; the three after are fitted at the hours counted from 1 Jun 2026.
    assert len(state.unlogged_measurements) == 2 and state.fit.n_points == 3
    assert [p[1] for p in state.points] == pytest.approx([e for e, _ in points])
    # scipy.stats.linregress on the three kept (E, R): the same least-squares line.
    line = stats.linregress([e for e, _ in points], [r for _, r in points])
    assert -state.fit.rate_per_hour == pytest.approx(line.slope, rel=1e-9)
    assert state.fit.r0 == pytest.approx(line.intercept, rel=1e-9)
    # A straight line's algebra: 0.90 - b (U + E) = (0.90 - b U) - b E. The fitted intercept is the value at the first
    # logged night, about 0.90 - 2e-5 x 5,952 h = 0.78096, not the fresh 0.90 (the scatter moves it by ~1e-3).
    assert state.fit.rate_per_hour == pytest.approx(2e-5, rel=0.2)
    assert state.fit.r0 == pytest.approx(0.90 - 2e-5 * HOURS_A_NIGHT * NIGHTS_BEFORE_LOG, abs=2e-3)
    assert state.log_start_note == (
        "E is counted from the first logged night, 01 Jun 2026, not from the coating: the usage log begins on 01 Jun "
        f"2026; the {NIGHTS_BEFORE_LOG} nights from the coating of 18 May 2024 to then are not logged, so every E "
        "here (each measurement's and today's) misses their exposure, the same unknown amount for each. The slope b "
        "is fitted from the logged nights and does not depend on it; the intercept R0 absorbs it (the fit gives R0 "
        "less b times the missed hours), so R0 is the reflectance at the first logged night, not the fresh value, "
        "and the estimate now, taken along the same line, already allows for them. The recoat line is taken from "
        "the computed fresh value, as the loss it allows is a fall from fresh.")
    assert services.reflectance_now(state).basis.startswith(
        f"estimate from the fit at today's exposure ({state.exposure_now_h:,.1f} dust-weighted open hours since the "
        f"first logged night, 01 Jun 2026: the usage log begins on 01 Jun 2026; the {NIGHTS_BEFORE_LOG} nights from "
        "the coating of 18 May 2024 to then are not logged), against the computed fresh value, as the recoat line: "
        f"the fitted R0, {state.fit.r0:.4f}, is the value at the first logged night, not the fresh value")
    # The train's loss since fresh is a fall from the computed fresh value too (an onboarding review read 0.030 mag
    # from R0 where the fall from fresh was 0.068): -2.5 log10(now / fresh), by hand (Pogson's magnitude scale).
    now = services.reflectance_now(state)
    assert now.fresh == state.fresh_band
    assert services.throughput(gap["mirror"].subsystem.telescope).loss_mag == pytest.approx(
        -2.5 * math.log10(now.now / state.fresh_band), rel=1e-9)
    # The recoat line is a fall from fresh (Mirror.recoat_loss), so it is taken from the computed fresh value: R0 here
    # is already about 13 % below fresh, and a line from it would let the mirror fall a further 8 % first.
    assert state.threshold == pytest.approx(state.fresh_band * 0.92, rel=1e-12)
    assert state.threshold_basis.startswith("8% below the computed fresh value")
    assert state.threshold_basis.endswith(
        "; the fitted R0 is the value at the first logged night (01 Jun 2026; the nights from the coating to then are "
        "not logged), not the fresh value")


def test_the_slope_does_not_depend_on_the_unlogged_hours():
    """The claim the page makes, on calc.reflectance alone: the same readings shifted by any missed exposure U give
    the same slope, and an intercept lower by b U (a straight line's algebra)."""
    counted = np.array([240.0, 736.0, 1224.0, 1500.0])
    values = 0.78 - 2e-5 * counted + np.array([4e-4, -6e-4, 3e-4, -1e-4])
    fitted = reflectance.fit_decline(counted, values)
    for missed in (100.0, 5952.0):
        shifted = reflectance.fit_decline(counted + missed, values)
        assert shifted.rate_per_hour == pytest.approx(fitted.rate_per_hour, rel=1e-9)
        assert fitted.r0 == pytest.approx(shifted.r0 - shifted.rate_per_hour * missed, rel=1e-9)


def test_readings_of_unknown_exposure_are_left_out_of_the_fit():
    """fit_decline with exposure_known: the fit of the known readings alone (scipy.stats.linregress on them); too few
    known gives the named reason."""
    exposure = [0.0, 0.0, 240.0, 736.0, 1224.0]
    values = [0.81, 0.80, 0.776, 0.765, 0.756]
    known = [False, False, True, True, True]
    fit = reflectance.fit_decline(exposure, values, exposure_known=known)
    line = stats.linregress(exposure[2:], values[2:])
    assert (fit.n_points, -fit.rate_per_hour, fit.r0) == (3, pytest.approx(line.slope), pytest.approx(line.intercept))
    with pytest.raises(ValueError, match=f"^{reflectance.EXPOSURE_NOT_KNOWN}: 3 of the 5, which leaves 2; a decline "
                                         "needs at least 3$"):
        reflectance.fit_decline(exposure, values, exposure_known=[False, False, False, True, True])
    with pytest.raises(ValueError, match="exposure_known needs one flag per reading"):
        reflectance.fit_decline(exposure, values, exposure_known=[True])


def test_a_cleaning_before_the_log_is_left_out_with_the_measurements(gap):
    CleaningEvent.objects.create(mirror=gap["mirror"], cleaned_on=dt.date(2025, 6, 1), method="co2_snow")
    _measure_after_the_log(gap, 2e-5)
    state = services.mirror_forecast(gap["mirror"])
    assert state.unlogged_cleanings == [dt.date(2025, 6, 1)] and state.cleanings == []
    assert state.left_out_note.startswith(
        "Left out of the fit: 2 band measurements (10 Mar 2025, 0.8100; 20 Nov 2025, 0.8000) and 1 cleaning (01 Jun "
        "2025), dated on or before the first logged night")
    # The fit is the straight line of the three after the log: the cleaning's recovery is in the intercept too.
    assert state.fit.n_points == 3 and state.recovery_fraction is None


def test_the_page_says_exposure_counts_from_the_first_logged_night(gap, client):
    _measure_after_the_log(gap, 2e-5, scatter=(0.0004, -0.0006, 0.0003))
    client.force_login(gap["users"]["viewer"])
    text = _text(client.get(gap["mirror"].get_absolute_url()).content.decode())
    assert (f"E: dust-weighted open hours from the first logged night, 01 Jun 2026 (E = 0; the usage log begins on 01 "
            f"Jun 2026; the {NIGHTS_BEFORE_LOG} nights from the coating of 18 May 2024 to then are not logged, so E "
            "misses their exposure: see below), to the night of") in text
    assert "E is counted from the first logged night, 01 Jun 2026, not from the coating" in text
    assert ("against dust-weighted open hours E since the first logged night, 01 Jun 2026 (the nights from the "
            "coating to then are not logged; measurements on or before it left out)") in text
    assert "Left out of the fit: 2 band measurements" in text
    # The table's column and the chart's axis say the same, not "since coating".
    assert "Dust-weighted open hours since the first logged night" in text
    assert "dust-weighted open hours since the first logged night" in text
    assert "since coating" not in text


def test_the_recoat_picture_starts_its_fitted_line_at_the_first_logged_night(gap):
    """E = 0 is the first logged night where the coating predates the log: the line's first knot is dated there,
    with the fit's intercept R0 (the value there, which absorbed the unlogged exposure), not at the coating."""
    from observatory_ops.planning.plots import fitted_decline_by_date, recoat_caption

    _measure_after_the_log(gap, 2e-5, scatter=(0.0004, -0.0006, 0.0003))
    state = services.mirror_forecast(gap["mirror"])
    first_day, first_value = fitted_decline_by_date(state, gap["today"])[0]
    assert first_day == LOG_BEGINS and first_value == pytest.approx(state.fit.r0)
    caption = recoat_caption(state)
    assert ("E, the dust-weighted open hours since the first logged night, 01 Jun 2026 (the coating of 18 May 2024 "
            "predates the log)") in caption
    assert "The line is the fit at the first logged night, at each measurement" in caption


def test_a_recoat_order_overdue_by_the_calendar_names_that_trigger_first(gap):
    # A decline so slow (1e-6 per dust-weighted hour, 0.003 a year at 8 h a night) that the line, 8 % below R0, is
    # not reached within three years.
    _measure_after_the_log(gap, 1e-6)
    mirror, today = gap["mirror"], gap["today"]
    due = services.recoat_due(mirror)
    assert due.metric == "calendar_days" and due.status == "overdue"
    # The plan restarted at the coating: the days from it to today by the calendar, the limit 730 days after it.
    assert due.reason == f"Calendar days: {(today - COATED).days:,} of 730 days; limit reached on 18 May 2026."
    state = services.mirror_forecast(mirror)
    assert state.fit is not None and state.crossing is None
    line = f"{state.threshold:.4f}"
    starts_on = today + dt.timedelta(days=30)
    plan = services.recoat_plan_create(mirror, starts_on, list(RECOAT_PHASES), 3.5, gap["users"]["engineer"])
    expected = (
        f"The recoat plan Recoat primary is overdue on the due list, by its first trigger: {due.reason} Also: "
        f"reflectance not forecast to reach the recoat line {line} within three years; recoat window "
        f"{plan.starts_on:%d %b %Y} to {plan.ends_on:%d %b %Y}"
    )
    for order in plan.work_orders.all():
        (why,) = selectors.sheet(order, "https://ops.example/").why
        assert why.endswith(expected)


def test_the_recoat_reason_follows_the_line_when_the_line_governs(gap):
    """With no due state, or one governed by the recoat line, the reason is the line's alone, as before."""
    _measure_after_the_log(gap, 2e-5)
    state = services.mirror_forecast(gap["mirror"])
    due = PlanStatus.objects.get(plan__name="Recoat primary", plan__subsystem=gap["mirror"].subsystem)
    due.metric = "recoat_line"
    window = (dt.date(2027, 1, 4), dt.date(2027, 1, 15))
    assert services.recoat_reason(state, *window, due) == services.recoat_reason(state, *window)
    assert services.recoat_reason(state, *window).startswith("Reflectance ")


def test_a_cleaning_after_the_log_begins_has_its_recovery_fitted_against_the_counted_hours(gap):
    """The page says f is not corrected for the missed hours. On exact readings of R = 0.90 - b (U + E - f (U + c))
    after a cleaning at c counted hours (U + c in all), the fit's recovery term b f (U + c) is read as b f' c, so
    f' = f (U + c) / c: the model's own algebra, checked here."""
    users, mirror = gap["users"], gap["mirror"]
    missed_h, rate, recovered = HOURS_A_NIGHT * NIGHTS_BEFORE_LOG, 2e-5, 0.1
    cleaned_on = dt.date(2026, 8, 15)
    cleaned_h = HOURS_A_NIGHT * (cleaned_on - LOG_BEGINS).days
    CleaningEvent.objects.create(mirror=mirror, cleaned_on=cleaned_on, method="co2_snow")
    for day in (dt.date(2026, 7, 1), dt.date(2026, 8, 1), dt.date(2026, 9, 1), dt.date(2026, 11, 1)):
        counted_h = HOURS_A_NIGHT * (day - LOG_BEGINS).days
        back = recovered * (missed_h + cleaned_h) if day > cleaned_on else 0.0
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=day, taken_by=users["technician"],
                                              value=0.90 - rate * (missed_h + counted_h - back))
    state = services.mirror_forecast(mirror)
    assert state.fit.rate_per_hour == pytest.approx(rate, rel=1e-6)
    assert state.recovery_fraction == pytest.approx(recovered * (missed_h + cleaned_h) / cleaned_h, rel=1e-6)
    assert ("The recovery per cleaning f is fitted against cleaning exposures that miss the same hours, so it is not "
            "corrected for them.") in state.log_start_note
