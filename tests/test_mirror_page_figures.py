"""The mirror page's figures can be checked by hand: the estimate now shows the inputs it is computed from, and
the optical train's light loss says, for each mirror, which reflectance it used and where that came from, and
says when the total is incomplete (a mirror taken as fresh because never measured, or a mirror subsystem with
no mirror record)."""
from __future__ import annotations

import datetime as dt
import html as html_text
import json
import math
import re

import pytest
from conftest import site_in_use
from django.core.management import call_command
from django.utils.html import strip_tags

from observatory_ops.calc import coating
from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem

# site_in_use logs 6 open hours a night at PM10 35 ug/m3 up to yesterday. Dust weight (calc/exposure.py docstring,
# sensitivity 1, clean-air reference 20 ug/m3): 1 + (35 - 20) / 20 = 1.75, so 10.5 dust-weighted hours a night.
HOURS_A_NIGHT = 6 * 1.75
COATED_DAYS_AGO, CLEANED_DAYS_AGO = 60, 30
# Readings on R = 0.90 - 4e-5 (E - 0.5 c_last) with a small fixed scatter, so the fit is not exact.
READINGS = [(55, 0.0004), (48, -0.0003), (40, 0.0002), (33, -0.0004), (25, 0.0003), (15, -0.0002), (5, 0.0001)]


def _mirror(subsystem: Subsystem, coated_on: dt.date) -> Mirror:
    mirror = Mirror.objects.create(subsystem=subsystem, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated_on, metal="al")
    return mirror


@pytest.fixture
def train(db, users):
    """A telescope with a primary (coated 60 nights ago, cleaned 30 nights ago, measured seven times) and a
    secondary subsystem; each test decides whether the secondary has a mirror record and measurements."""
    site = site_in_use("mirror-train", kinds=("primary_mirror", "secondary_mirror"))
    today = site_today(site)
    coated_on = today - dt.timedelta(days=COATED_DAYS_AGO)
    primary = _mirror(Subsystem.objects.get(telescope__site=site, kind="primary_mirror"), coated_on)
    CleaningEvent.objects.create(mirror=primary, cleaned_on=today - dt.timedelta(days=CLEANED_DAYS_AGO),
                                 method="co2_snow")
    cleaned_h = HOURS_A_NIGHT * (COATED_DAYS_AGO - CLEANED_DAYS_AGO)
    for days_ago, scatter in READINGS:
        exposure_h = HOURS_A_NIGHT * (COATED_DAYS_AGO - days_ago)
        last_cleaning_h = cleaned_h if days_ago <= CLEANED_DAYS_AGO else 0.0
        ReflectanceMeasurement.objects.create(
            mirror=primary, measured_on=today - dt.timedelta(days=days_ago), taken_by=users["technician"],
            value=0.90 - 4e-5 * (exposure_h - 0.5 * last_cleaning_h) + scatter,
        )
    secondary = Subsystem.objects.get(telescope__site=site, kind="secondary_mirror")
    return {"primary": primary, "secondary": secondary, "today": today, "coated_on": coated_on}


def _page(client, users, mirror) -> str:
    client.force_login(users["viewer"])
    response = client.get(mirror.get_absolute_url())
    assert response.status_code == 200
    return response.content.decode()


def _text(html: str) -> str:
    return re.sub(r"\s+", " ", html_text.unescape(strip_tags(html)))


def _shown(html: str, name: str) -> str:
    return re.search(rf"<span data-{name}>([^<]+)</span>", html).group(1).replace(",", "")


def _half_unit(shown: str) -> float:
    """Half a unit in the last digit shown: how far the shown figure may be from the one computed."""
    mantissa, _, exponent = shown.partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10.0 ** (-decimals + int(exponent or 0))


def test_the_estimate_now_recomputes_by_hand_from_the_inputs_the_page_shows(train, users, client):
    html = _page(client, users, train["primary"])
    shown = {name: _shown(html, name) for name in ("r0", "b", "e", "f", "c", "estimate")}
    r0, b, e, f, c, estimate = (float(shown[name]) for name in ("r0", "b", "e", "f", "c", "estimate"))
    # The exposures by hand: 60 and 30 logged nights of 10.5 dust-weighted hours each.
    assert e == pytest.approx(HOURS_A_NIGHT * COATED_DAYS_AGO)
    assert c == pytest.approx(HOURS_A_NIGHT * (COATED_DAYS_AGO - CLEANED_DAYS_AGO))
    # calc/reflectance.py's model, R(E) = R0 - b (E - f c_last(E)), on the shown figures. They are rounded, so the
    # result may differ from the shown estimate by the rounding of each input carried through, plus its own.
    by_hand = r0 - b * (e - f * c)
    slack = (_half_unit(shown["r0"]) + abs(e - f * c) * _half_unit(shown["b"])
             + b * (_half_unit(shown["e"]) + c * _half_unit(shown["f"]) + f * _half_unit(shown["c"]))
             + _half_unit(shown["estimate"]))
    assert abs(by_hand - estimate) <= slack
    assert slack < 1e-4  # the inputs carry enough digits to give the estimate's four decimals
    text = _text(html)
    assert f"from the coating of {train['coated_on']:%d %b %Y} (E = 0)" in text
    yesterday = train["today"] - dt.timedelta(days=1)
    assert f"to the night of {yesterday:%d %b %Y}, the last logged before today" in text
    cleaned_on = train["today"] - dt.timedelta(days=CLEANED_DAYS_AGO)
    assert f"c: E at the cleaning of {cleaned_on:%d %b %Y}, the last up to today" in text


def test_a_rising_fit_writes_its_rate_after_a_plus_not_a_double_minus(train, users, client):
    """Readings rising with exposure (a reflectometer drifting, say) fit a b below zero: R0 - b E is then written
    R0 + |b| E, and the figures shown still give the estimate by hand (calc/reflectance.py's model)."""
    secondary = _mirror(train["secondary"], train["coated_on"])
    for days_ago, scatter in ((50, 0.0002), (35, -0.0003), (20, 0.0001), (8, -0.0001)):
        exposure_h = HOURS_A_NIGHT * (COATED_DAYS_AGO - days_ago)
        ReflectanceMeasurement.objects.create(mirror=secondary, taken_by=users["technician"],
                                              measured_on=train["today"] - dt.timedelta(days=days_ago),
                                              value=0.85 + 2e-5 * exposure_h + scatter)
    html = _page(client, users, secondary)
    inputs = _text(re.search(r'<div class="reason" id="estimate-inputs">(.*?)</div>', html, re.S).group(1))
    assert "− -" not in inputs and "+ -" not in inputs
    shown = {name: _shown(html, name) for name in ("r0", "b", "e", "estimate")}
    assert inputs.startswith(f"R0 − b·E = {shown['r0']} + {shown['b']} × ")
    assert "(b is below zero: the fit rises with exposure)" in inputs
    r0, b_size, e, estimate = (float(shown[name]) for name in ("r0", "b", "e", "estimate"))
    assert services.mirror_forecast(secondary).fit.rate_per_hour == pytest.approx(-b_size, rel=1e-4)
    slack = _half_unit(shown["r0"]) + e * _half_unit(shown["b"]) + b_size * _half_unit(shown["e"]) + _half_unit(
        shown["estimate"])
    assert abs(r0 + b_size * e - estimate) <= slack


def test_an_unmeasured_mirror_is_taken_as_fresh_and_the_total_says_it_is_incomplete(train, users, client):
    secondary = _mirror(train["secondary"], train["coated_on"])
    result = services.throughput(train["primary"].subsystem.telescope)
    primary_row, secondary_row = result.mirrors
    assert (primary_row.source, secondary_row.source) == (services.ESTIMATE, services.ASSUMED_FRESH)
    fresh_al = coating.coating_curve("al", [], 400, 1000, 5)["band_mean"]  # bare Al, 400-1000 nm band mean
    assert secondary_row.now == secondary_row.fresh == pytest.approx(fresh_al)
    state = services.mirror_forecast(train["primary"])
    assert (primary_row.now, primary_row.fresh) == (state.current, state.fit.r0)
    # Pogson: -2.5 log10(T now / T fresh); the secondary, taken as fresh, adds nothing to it.
    assert result.loss_mag == pytest.approx(-2.5 * math.log10(state.current / state.fit.r0))
    assert "takes T1: Secondary mirror as fresh" in result.incomplete_note
    for mirror in (train["primary"], secondary):  # both mirror pages show the same train
        text = _text(_page(client, users, mirror))
        assert "lost since fresh (incomplete)" in text
        assert f"computed fresh value assumed: not measured since its coating of {train['coated_on']:%d %b %Y}" in text
        assert "estimate from the fit at today's exposure (630.0 dust-weighted open hours" in text
        assert "Incomplete: it takes T1: Secondary mirror as fresh, so counts no loss for it." in text


def test_a_mirror_subsystem_without_a_mirror_record_is_named_as_left_out(train, users, client):
    result = services.throughput(train["primary"].subsystem.telescope)
    assert [(str(m.subsystem), m.source) for m in result.mirrors] == [
        ("T1: Primary mirror", services.ESTIMATE), ("T1: Secondary mirror", services.LEFT_OUT)]
    text = _text(_page(client, users, train["primary"]))
    assert "Secondary mirror: no mirror record (coating and measurements): left out of the total" in text
    assert "it leaves out T1: Secondary mirror, so covers T1: Primary mirror only" in text


def test_a_mirror_measured_too_few_times_for_a_fit_counts_its_last_measurement(train, users):
    secondary = _mirror(train["secondary"], train["coated_on"])
    for days_ago, value in ((20, 0.885), (10, 0.880)):
        ReflectanceMeasurement.objects.create(mirror=secondary, value=value, taken_by=users["technician"],
                                              measured_on=train["today"] - dt.timedelta(days=days_ago))
    result = services.throughput(train["primary"].subsystem.telescope)
    row = result.mirrors[1]
    fresh = services.mirror_forecast(secondary).fresh_band
    assert (row.source, row.now, row.fresh) == (services.MEASURED, 0.880, fresh)
    assert row.basis.startswith(f"last measurement, {train['today'] - dt.timedelta(days=10):%d %b %Y} (no fit yet:")
    assert result.incomplete_note == ""
    # The train's loss is the sum of its mirrors' (the log of a product), each -2.5 log10(now / fresh).
    assert result.loss_mag == pytest.approx(sum(-2.5 * math.log10(m.now / m.fresh) for m in result.mirrors))
    assert result.mirrors[1].loss_mag == pytest.approx(-2.5 * math.log10(row.now / row.fresh))


def test_a_retired_mirror_is_not_in_the_train(train):
    secondary = _mirror(train["secondary"], train["coated_on"])
    Subsystem.objects.filter(pk=secondary.subsystem_id).update(retired_on=train["today"])
    result = services.throughput(train["primary"].subsystem.telescope)
    assert [m.subsystem.kind for m in result.mirrors] == ["primary_mirror"]
    assert result.incomplete_note == ""


def test_the_forecast_command_lists_where_each_train_figure_comes_from(train, capsys):
    _mirror(train["secondary"], train["coated_on"])
    call_command("mirror_forecast", str(train["primary"].subsystem_id), "--json")
    out = json.loads(capsys.readouterr().out)
    assert [m["source"] for m in out["optical_train"]] == [services.ESTIMATE, services.ASSUMED_FRESH]
    assert out["throughput_incomplete"].startswith("Incomplete: it takes T1: Secondary mirror as fresh")


def test_the_estimate_says_whose_log_it_counts_where_the_site_logs_per_telescope(client, users, train):
    """A telescope that sends nights of its own (here its last 10, the same figures as the site's) counts its own
    log (planning.services.UsageLog): the page says what that log is made of, beside E."""
    from observatory_ops.logbook.models import NightUsage

    primary = train["primary"]
    telescope = primary.subsystem.telescope
    site_nights = NightUsage.objects.filter(site=telescope.site, telescope__isnull=True).order_by("-night")
    logged = site_nights.count()
    for night in list(site_nights[:10]):
        night.pk, night.telescope = None, telescope
        night.save()
    shown = _text(_page(client, users, primary))
    assert f"this telescope's log: its own nights on 10 of {logged:,} logged nights, the whole site's on the rest." \
        in shown
    assert services.mirror_forecast(primary).log_note.startswith("this telescope's log: its own nights on 10 of")


def test_the_estimate_shows_the_latest_measurement_against_the_fitted_line(client, users, train):
    """The estimate now is the fitted line at today's exposure, not the latest measurement: the page puts the latest
    measurement beside the line's value there, R0 - b (E - f c), with the fit's scatter, so neither is taken for the
    other. A cleaning that recovered far more than the fitted fraction f (the measurement after it more than 3 rms
    off what the fit of the earlier measurements expected) is said to have done so."""
    primary, today = train["primary"], train["today"]
    state = services.mirror_forecast(primary)
    measured_on, exposure_h, value = state.points[-1]
    fit, (_, cleaned_h) = state.fit, state.cleanings[-1]
    on_line = fit.r0 - fit.rate_per_hour * (exposure_h - fit.recovery_fraction * cleaned_h)
    assert (f"Latest measurement {value:.4f} on {measured_on:%d %b %Y}, {abs(value - on_line):.4f} "
            f"{'above' if value >= on_line else 'below'} the fitted line ({on_line:.4f} there); the fit's scatter is "
            f"rms {fit.residual_rms:.4f}.") in _text(_page(client, users, primary))
    assert "times the scatter" not in state.latest_note  # the readings lie within 0.0004 of the line

    CleaningEvent.objects.create(mirror=primary, cleaned_on=today, method="co2_snow")
    ReflectanceMeasurement.objects.create(mirror=primary, measured_on=today, taken_by=users["technician"], value=0.95)
    note = services.mirror_forecast(primary).latest_note
    assert note.startswith(f"Latest measurement 0.9500 on {today:%d %b %Y}, ")
    assert "The fit of the 7 earlier measurements expected " in note and "over 3 times their rms" in note
    assert f"The cleaning of {today:%d %b %Y} before it recovered more than the fitted fraction f. The estimate and " \
           "the forecast follow the fit of all 8 measurements" in note


def test_the_subsystem_heading_names_its_kind_only_when_the_name_does_not(client, users, train):
    primary = train["primary"].subsystem
    primary.name = primary.kind_label.lower()  # "primary mirror": the name says the kind already
    primary.save()
    client.force_login(users["viewer"])
    heading = re.search(r"<h1>.*?</h1>", client.get(primary.get_absolute_url()).content.decode()).group(0)
    assert heading == f"<h1>{primary.telescope.name}: {primary.name}</h1>"
    primary.name = "Main mirror"
    primary.save()
    heading = re.search(r"<h1>.*?</h1>", client.get(primary.get_absolute_url()).content.decode()).group(0)
    assert heading == f'<h1>{primary.telescope.name}: Main mirror <span class="muted">{primary.kind_label}</span></h1>'


def test_a_mirror_measured_above_its_fresh_value_is_pointed_out_not_counted_silently(train, users, client):
    """The secondary, measured twice above its computed fresh value (no fit from two readings: its last measurement
    counts, against the computed fresh value), makes the train's loss negative; the page says why that cannot be."""
    secondary = _mirror(train["secondary"], train["coated_on"])
    fresh = services.mirror_forecast(secondary).fresh_band
    for days_ago, value in ((20, fresh + 0.02), (10, fresh + 0.03)):
        ReflectanceMeasurement.objects.create(
            mirror=secondary, measured_on=train["today"] - dt.timedelta(days=days_ago), taken_by=users["technician"],
            value=value,
        )
    result = services.throughput(secondary.subsystem.telescope)
    row = next(m for m in result.mirrors if m.mirror == secondary)
    assert (row.source, row.now) == (services.MEASURED, pytest.approx(fresh + 0.03))
    note = f"{secondary.subsystem} {fresh + 0.03:.4f} against {fresh:.4f} fresh"
    assert f"Above fresh ({note}): counted as a gain, which a mirror cannot make." in result.above_fresh_note
    assert "Above fresh (" in _text(_page(client, users, secondary))
