"""Bad input to the register and the service plans, as an engineer types it in the admin: each is refused with a
message naming the field and the problem, and what was stored stays as it was.

Bounds of our own, not published limits (common practice, no published source): a site's elevation -500 m to
6,000 m and its look-ahead 1 to 365 days (``registry.models``), and each trigger metric's largest limit
(``planning.metrics.MAX_LIMIT``: calendar days at most 36,500, 100 years). The rule for a service date (not after
the site's today, at most 15 years back) is the logbook's (``logbook.services.date_problem``). That a browser ends
the lines of a text box with CR LF is the HTML standard's form encoding (WHATWG HTML, "constructing the entry
list": newlines normalised to CRLF).
"""
from __future__ import annotations

import datetime as dt
import json

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.archive.history import changes
from observatory_ops.logbook.nights_csv import MAX_YEARS_BACK
from observatory_ops.planning.metrics import MAX_LIMIT, METRICS, READING
from observatory_ops.planning.models import ServicePlan, Trigger, readings_problem
from observatory_ops.planning.services import HORIZON_DAYS, site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.registry.services import subsystem_create
from tests.conftest import constant_sky


@pytest.fixture
def engineer(engineer_in_admin):
    """The engineer in the admin (conftest.py)."""
    return engineer_in_admin


@pytest.fixture
def fans(telescope):
    """Cooling fans registered a year ago, with the catalogue's plans, on a site whose sky is cached (the admin's
    save recomputes the site)."""
    today = site_today(telescope.site)
    constant_sky(telescope.site, today - dt.timedelta(days=30), today + dt.timedelta(days=HORIZON_DAYS + 1))
    return subsystem_create(telescope, "cooling_fans", "Fans", counting_from=today - dt.timedelta(days=365))


def _unchanged(client, url: str) -> dict:
    """What the admin's change page at ``url`` sends back when saved untouched: every field of its form and of its
    inline rows, as the page shows them."""
    page = client.get(url)
    assert page.status_code == 200
    data = {}
    forms = [page.context["adminform"].form]
    for inline in page.context["inline_admin_formsets"]:
        forms += [inline.formset.management_form, *inline.formset.forms]
    for form in forms:
        for name in form.fields:
            value = form[name].value()
            data[form.add_prefix(name)] = value if isinstance(value, list) else "" if value is None else str(value)
    return data


def _errors(response, field: str) -> str:
    """The form's messages for ``field`` on a refused save (the page shown again, not a redirect)."""
    assert response.status_code == 200, "saved, not refused"
    return " ".join(response.context["adminform"].form.errors.get(field, []))


def _trigger_errors(response) -> str:
    assert response.status_code == 200, "saved, not refused"
    formsets = response.context["inline_admin_formsets"]
    return " ".join(" ".join(f.errors.get("limit", [])) for fs in formsets for f in fs.formset.forms)


def _trigger_row(data: dict, trigger: Trigger) -> str:
    """The prefix of ``trigger``'s row in the plan's change form."""
    return next(key[: -len("-id")] for key, value in data.items() if key.endswith("-id") and value == str(trigger.pk))


# --- 1: telescope names alike but for capitals ---------------------------------------------------------------


@pytest.fixture
def two_telescopes(site):
    return (Telescope.objects.create(site=site, name="R40", aperture_m=0.4, mount="fork"),
            Telescope.objects.create(site=site, name="T70", aperture_m=0.7, mount="altaz"))


def test_a_telescope_renamed_to_another_ones_name_in_other_capitals_is_refused_naming_both(engineer, two_telescopes):
    _, t70 = two_telescopes
    url = f"/admin/registry/telescope/{t70.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "name": "r40"})
    message = _errors(response, "name")
    assert "'r40'" in message and "'R40'" in message and "ignoring" in message
    t70.refresh_from_db()
    assert t70.name == "T70"


def test_a_telescope_name_alike_but_for_spaces_and_capitals_is_refused_wherever_it_is_saved(two_telescopes):
    r40, _ = two_telescopes
    with pytest.raises(ValidationError) as refused:
        Telescope(site=r40.site, name="  r40 ", aperture_m=0.3, mount="fork").full_clean()
    assert "another telescope's at this site" in str(refused.value.message_dict["name"])


def test_a_telescope_keeps_its_own_name_and_may_share_one_with_another_sites(engineer, two_telescopes):
    r40, t70 = two_telescopes
    url = f"/admin/registry/telescope/{r40.pk}/change/"
    assert engineer.post(url, {**_unchanged(engineer, url), "aperture_m": "0.45"}).status_code == 302
    elsewhere = Site.objects.create(name="Other Hill", slug="other-hill", latitude_deg=40.0, longitude_deg=-3.0,
                                    time_zone="Europe/Madrid")
    Telescope(site=elsewhere, name="r40", aperture_m=0.4, mount="fork").full_clean()  # no error


# --- 2: a plan's readings ------------------------------------------------------------------------------------


@pytest.mark.parametrize(("readings", "says"), [
    ('[{"quantity": "bogus", "limit": "1"}]', 'Reading 1: "bogus" is not a reading quantity; the codes are'),
    ('"settle_time"', 'Readings must be a JSON list, [{"quantity": code, "limit": "in words"}, ...]'),
    ('{"a": 1}', 'not {"a": 1}'),
    ('["settle_time_s"]', 'Reading 1, "settle_time_s", must be written {"quantity": code, "limit": "in words"}'),
    ('[{"limit": "1"}]', 'Reading 1, {"limit": "1"}, has no "quantity"'),
    ('[{"quantity": "settle_time_s", "limt": "1"}]', 'holds "limt": a reading holds "quantity" and "limit" only'),
    ('[{"quantity": "settle_time_s", "limit": 2}]', "the limit is written in words, in quotes"),
    ('[{"quantity": "ripple_mv"}, {"quantity": "ripple_mv", "limit": "5"}]',
     "Reading 2 (ripple_mv) asks again for the quantity of reading 1"),
])
def test_readings_a_work_order_could_not_ask_for_are_refused_naming_the_reading(engineer, fans, readings, says):
    plan = fans.plans.first()
    before = plan.readings
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "readings": readings})
    assert says in _errors(response, "readings")
    plan.refresh_from_db()
    assert plan.readings == before


def test_a_limit_longer_than_a_work_order_holds_is_refused_with_its_length():
    assert readings_problem([{"quantity": "ripple_mv", "limit": "x" * 81}]) == (
        "Reading 1 (ripple_mv): the limit is 81 characters long; a plan's limit may be at most 80.")


def test_readings_written_as_the_help_says_are_saved_and_asked_for_on_the_work_order(engineer, fans, users):
    from observatory_ops.workorders.services import work_order_from_due

    plan = fans.plans.first()
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    readings = [{"quantity": "fan_current_a", "limit": "within the maker's range"}, {"quantity": "temperature_c"}]
    assert engineer.post(url, {**_unchanged(engineer, url), "readings": json.dumps(readings)}).status_code == 302
    plan.refresh_from_db()
    order = work_order_from_due([plan], users["engineer"], site_today(fans.telescope.site))
    asked = {(r.quantity, r.limit_text) for r in order.required_readings.all()}
    assert {("fan_current_a", "within the maker's range"), ("temperature_c", "")} <= asked


def test_a_readings_box_left_empty_means_none(engineer, fans):
    plan = fans.plans.first()
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    assert engineer.post(url, {**_unchanged(engineer, url), "readings": ""}).status_code == 302
    plan.refresh_from_db()
    assert plan.readings == []


def test_every_catalogue_plans_readings_pass_the_check():
    for kind in KINDS.values():
        for template in kind.plans:
            readings = [{"quantity": q, "limit": limit} for q, limit in template.readings]
            assert readings_problem(readings) is None, (kind.code, template.name)


# --- 3: trigger limits ---------------------------------------------------------------------------------------


@pytest.mark.parametrize(("metric", "limit", "says"), [
    ("calendar_days", "1e308", "Calendar days: a limit of 1e+308 days is more than this tool takes, at most "
                               "36,500 days (100 years)."),
    ("calendar_days", "5000000", "a limit of 5,000,000 days is more than this tool takes"),
    ("calendar_days", "0", "must be more than zero"),
    ("open_hours", "1e308", "at most 876,000 h (every hour of 100 years)"),
])
def test_a_trigger_limit_beyond_its_metrics_bound_is_refused_not_a_server_error(engineer, fans, metric, limit, says):
    plan = ServicePlan.objects.filter(subsystem=fans, triggers__metric=metric).first()
    trigger = plan.triggers.get(metric=metric)
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    data = _unchanged(engineer, url)
    data[f"{_trigger_row(data, trigger)}-limit"] = limit
    response = engineer.post(url, data)
    assert says in _trigger_errors(response)
    assert Trigger.objects.get(pk=trigger.pk).limit == trigger.limit


def test_a_travel_limit_of_1e308_is_refused(fans):
    trigger = Trigger(plan=fans.plans.first(), metric="axis1_travel_deg", limit=1e308)
    with pytest.raises(ValidationError) as refused:
        trigger.full_clean()
    assert "at most 100,000,000 deg" in " ".join(refused.value.message_dict["limit"])


@pytest.mark.parametrize("limit", [float("inf"), float("nan")])
def test_a_limit_that_is_no_finite_number_is_refused(fans, limit):
    with pytest.raises(ValidationError) as refused:
        Trigger(plan=fans.plans.first(), metric="slews", limit=limit).full_clean()
    assert "finite number" in " ".join(refused.value.message_dict["limit"])


def test_a_reading_triggers_limit_is_held_to_its_quantitys_plausible_range(fans):
    with pytest.raises(ValidationError) as refused:
        Trigger(plan=fans.plans.first(), metric=READING, quantity="settle_time_s", limit=1e308).full_clean()
    assert "Settle time after a slew cannot be above 3,600 s" in " ".join(refused.value.message_dict["limit"])
    Trigger(plan=fans.plans.first(), metric=READING, quantity="settle_time_s", limit=2.0).full_clean()


def test_a_calendar_limit_of_100_years_is_taken_and_computed(engineer, fans):
    plan = ServicePlan.objects.filter(subsystem=fans, triggers__metric="calendar_days").first()
    trigger = plan.triggers.get(metric="calendar_days")
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    data = _unchanged(engineer, url)
    data[f"{_trigger_row(data, trigger)}-limit"] = "36500"
    assert engineer.post(url, data).status_code == 302
    assert Trigger.objects.get(pk=trigger.pk).limit == 36_500


def test_every_metric_but_a_reading_has_a_bound_above_every_catalogue_default():
    assert set(MAX_LIMIT) == set(METRICS) - {READING}
    for kind in KINDS.values():
        for template in kind.plans:
            for metric, limit, *_quantity in template.triggers:
                if metric != READING:
                    assert 0 < limit <= MAX_LIMIT[metric][0], (kind.code, template.name, metric)


# --- 4: dates ------------------------------------------------------------------------------------------------


@pytest.mark.parametrize(("counting_from", "says"), [
    ("2030-01-01", "The counting date cannot be in the future."),
    ("1900-01-01", f"Counting date 1900-01-01 is more than {MAX_YEARS_BACK} years ago; the earliest accepted is"),
])
def test_a_counting_date_in_the_future_or_too_long_ago_is_refused(engineer, fans, counting_from, says):
    plan = fans.plans.first()
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "counting_from": counting_from})
    message = _errors(response, "counting_from")
    assert says in message and "rule of service dates" in message
    assert ServicePlan.objects.get(pk=plan.pk).counting_from == plan.counting_from


def test_a_counting_date_stored_long_ago_stays_when_the_plan_is_saved_for_something_else(engineer, fans):
    plan = fans.plans.first()
    long_ago = site_today(fans.telescope.site).replace(year=2000)
    ServicePlan.objects.filter(pk=plan.pk).update(counting_from=long_ago)  # within the rule when it was given
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    assert engineer.post(url, {**_unchanged(engineer, url), "estimated_hours": "2.5"}).status_code == 302
    assert ServicePlan.objects.get(pk=plan.pk).counting_from == long_ago


def test_a_retired_date_after_the_sites_today_is_refused_and_today_taken(engineer, fans):
    url = f"/admin/registry/subsystem/{fans.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "retired_on": "2030-01-01"})
    assert "Retired on 01 Jan 2030 is in the future: the site's today is" in _errors(response, "retired_on")
    assert Subsystem.objects.get(pk=fans.pk).retired_on is None
    today = site_today(fans.telescope.site)
    assert engineer.post(url, {**_unchanged(engineer, url), "retired_on": today.isoformat()}).status_code == 302


# --- 5: a site's elevation and look-ahead --------------------------------------------------------------------


@pytest.mark.parametrize(("field", "value", "says"), [
    ("elevation_m", "-20000", "An elevation below -500 m is lower than any land"),
    ("elevation_m", "8000", "An elevation above 6,000 m is higher than any observatory"),
    ("look_ahead_days", "100000", "Look ahead at most 365 days"),
    ("look_ahead_days", "0", "Look ahead at least 1 day"),
])
def test_a_site_elevation_or_look_ahead_out_of_bounds_is_refused(engineer, site, field, value, says):
    url = f"/admin/registry/site/{site.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), field: value})
    assert says in _errors(response, field)
    stored = Site.objects.get(pk=site.pk)
    assert (stored.elevation_m, stored.look_ahead_days) == (site.elevation_m, site.look_ahead_days)


def test_a_site_at_the_bounds_is_taken(engineer, site):
    url = f"/admin/registry/site/{site.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "elevation_m": "6000", "look_ahead_days": "365"})
    assert response.status_code == 302


# --- 6: text saved unchanged from a browser ------------------------------------------------------------------


def _as_a_browser_sends(data: dict) -> dict:
    return {k: v.replace("\n", "\r\n") if isinstance(v, str) else v for k, v in data.items()}


def test_a_plan_saved_unchanged_from_a_browser_records_no_changed_text(engineer, fans):
    plan = fans.plans.first()
    plan.steps, plan.steps_powered = "Clean the filter.\nCheck the bearings.", "Park the telescope.\nClose the dome."
    plan.save()
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    listed = len(changes(plan))
    assert engineer.post(url, _as_a_browser_sends(_unchanged(engineer, url))).status_code == 302
    stored = ServicePlan.objects.get(pk=plan.pk)
    assert (stored.steps, stored.steps_powered, stored.steps_restore) == (
        plan.steps, plan.steps_powered, plan.steps_restore)
    newest, before = stored.history.all()[:2]
    assert newest.diff_against(before).changes == []  # the save stored, with no difference
    assert len(changes(stored)) == listed  # and the history does not list it (archive.history)


@pytest.mark.parametrize(("model", "field"), [("site", "dust_climate"), ("telescope", "notes"),
                                              ("subsystem", "notes")])
def test_register_texts_saved_unchanged_from_a_browser_record_no_change(engineer, fans, model, field):
    record = {"site": fans.telescope.site, "telescope": fans.telescope, "subsystem": fans}[model]
    type(record).objects.filter(pk=record.pk).update(**{field: "First line.\nSecond line."})
    record.refresh_from_db()
    record.save()  # a history entry with the text, to compare the next with
    url = f"/admin/registry/{model}/{record.pk}/change/"
    listed = len(changes(record))
    assert engineer.post(url, _as_a_browser_sends(_unchanged(engineer, url))).status_code == 302
    record.refresh_from_db()
    assert getattr(record, field) == "First line.\nSecond line."
    newest, before = record.history.all()[:2]
    assert newest.diff_against(before).changes == []
    assert len(changes(record)) == listed


@pytest.mark.parametrize("stored", [1e308, 5_000_000, float("inf")])
def test_a_calendar_limit_stored_before_the_bound_counts_at_the_bound_and_the_site_still_recomputes(fans, stored):
    """Limits stored before they were bounded (written here past the model's checks, as an old database holds them)
    must not stop the site's recompute: counted at 36,500 days, the plan is due a century after its baseline."""
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.planning.services import site_recompute

    plan = fans.plans.first()
    Trigger.objects.filter(plan=plan).delete()
    trigger = Trigger.objects.create(plan=plan, metric="calendar_days", limit=30)
    Trigger.objects.filter(pk=trigger.pk).update(limit=stored)
    site_recompute(fans.telescope.site)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == plan.counting_from + dt.timedelta(days=36_500)
