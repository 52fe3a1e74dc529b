"""A telescope out of service for a planned recoat expects no use on the recoat's nights: its counters' forecasts
step over them (planning.services._downtime_by_telescope). A reviewer planning a 16-night recoat found its
telescope's forecasts still counting those nights as used, a secondary mirror's about 83 h early.

Hand computation: every night has 10 dark hours (tests/conftest.py constant_sky) and the log 8 open hours on each of
its 400 nights, so every month's open fraction is 0.8 and 8 h a night are expected. The fans' plan counts 10 logged
nights since its start (80 h) against a limit of 180 h: 100 h remain, reached on the 13th night from today (8 x 13 =
104 >= 100), today + 12. With the recoat from today + 3, the nights of its window add nothing; the test adds them up
night by night."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.models import NightUsage
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.planning import services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.workorders import services as workorders

pytestmark = pytest.mark.django_db
PER_NIGHT, COUNTED, LIMIT = 8.0, 80.0, 180.0


@pytest.fixture
def scene(users):
    from conftest import constant_sky

    site = Site.objects.create(name="Low Fell", slug="low-fell", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="F50", aperture_m=0.5, mount="fork")
    today = services.site_today(site)
    constant_sky(site, today - dt.timedelta(days=400), today + dt.timedelta(days=services.HORIZON_DAYS + 5))
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=PER_NIGHT)
                                   for i in range(1, 401))
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    plan = ServicePlan.objects.create(subsystem=fans, name="Fan bearings", counting_from=today - dt.timedelta(days=10),
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="open_hours", limit=LIMIT)
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=300), metal="al")
    services.site_recompute(site)
    return site, today, plan, mirror


def shared_enclosure_site() -> tuple[Site, dt.date]:
    """An invented site whose telescopes share one enclosure, with the scene's sky and log (8 h on each of the last
    400 nights), and its today."""
    from conftest import constant_sky

    site = Site.objects.create(name="Twin Knoll", slug="twin-knoll", latitude_deg=0, longitude_deg=0, time_zone="UTC",
                               shared_enclosure=True)
    today = services.site_today(site)
    constant_sky(site, today - dt.timedelta(days=400), today + dt.timedelta(days=services.HORIZON_DAYS + 5))
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=PER_NIGHT)
                                   for i in range(1, 401))
    return site, today


def _reached(today: dt.date, down: tuple[dt.date, dt.date] | None, limit: float = LIMIT) -> dt.date:
    """The night the remaining hours are used, adding 8 h a night from ``today`` (the first night not logged), none
    on the recoat's nights."""
    used, day = 0.0, today
    while True:
        used += 0.0 if down and down[0] <= day <= down[1] else PER_NIGHT
        if used >= limit - COUNTED:
            return day
        day += dt.timedelta(days=1)


def test_a_planned_recoat_moves_the_telescopes_counters_past_its_nights_and_a_withdrawal_moves_them_back(scene, users):
    site, today, plan, mirror = scene
    status = PlanStatus.objects.get(plan=plan)
    assert status.value == pytest.approx(COUNTED) and status.forecast_date == today + dt.timedelta(days=12)
    assert status.forecast_date == _reached(today, None)

    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == _reached(today, (recoat.starts_on, recoat.ends_on)) > today + dt.timedelta(days=12)
    nights = (recoat.ends_on - recoat.starts_on).days + 1
    assert (f"no use on the {nights} nights of the planned recoat of F50: Primary mirror ({recoat.starts_on:%d %b %Y} "
            f"to {recoat.ends_on:%d %b %Y}): the telescope is out of service") in status.basis

    removal = recoat.work_orders.get(recoat_phase="removal")
    workorders.work_order_move(removal, "withdraw", users["engineer"], reason="postponed to spring")
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == today + dt.timedelta(days=12) and "planned recoat" not in status.basis


def test_a_recoat_begun_on_nights_not_yet_logged_counts_those_nights_unused_too(scene, users):
    """The log ten nights behind, the plan counting from 20 nights ago (10 logged nights, 80 h): the unlogged nights
    are counted at the expected rate from the first of them (today - 10), except those of a recoat begun five days
    ago, which took the telescope out (a fresh-eyes review found them counted as used)."""
    site, today, plan, mirror = scene
    NightUsage.objects.filter(site=site, night__gte=today - dt.timedelta(days=10)).delete()
    ServicePlan.objects.filter(pk=plan.pk).update(counting_from=today - dt.timedelta(days=20))
    first_unlogged = today - dt.timedelta(days=10)
    recoat = mirror_services.recoat_plan_create(mirror, today - dt.timedelta(days=5), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    status = PlanStatus.objects.get(plan=plan)
    assert status.value == pytest.approx(COUNTED)
    assert status.forecast_date == max(_reached(first_unlogged, (recoat.starts_on, recoat.ends_on)), today)
    assert status.forecast_date > max(_reached(first_unlogged, None), today)


def test_an_enclosure_all_telescopes_share_expects_no_use_only_on_the_nights_all_of_them_are_out(users):
    """A diff review: the enclosure a site's two telescopes share still expected use while both were out for
    recoats. It opens for either telescope, so it expects no use on the nights both are out, and only on those: with
    one recoat it counts as before; with a second overlapping the first by ``overlap`` nights, its forecast steps over
    those nights alone (the same hand count as above: 8 h a night, 340 h to go, so that the limit is reached after the
    two recoats whatever weekday the test runs on: from a Saturday, their crew's days off put the overlap after a
    nearer limit)."""
    site, today = shared_enclosure_site()
    mirrors = []
    for name in ("A40", "B40"):
        telescope = Telescope.objects.create(site=site, name=name, aperture_m=0.4, mount="fork")
        primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary mirror")
        mirror = Mirror.objects.create(subsystem=primary, diameter_mm=400, thickness_mm=40, hole_mm=100,
                                       material="borosilicate", cell_mass_kg=20)
        CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=300), metal="al")
        mirrors.append(mirror)
    dome = Subsystem.objects.create(telescope=mirrors[0].subsystem.telescope, kind="enclosure", name="Dome")
    plan = ServicePlan.objects.create(subsystem=dome, name="Dome drives", counting_from=today - dt.timedelta(days=10),
                                      counting_from_given=True)
    limit = LIMIT + 30 * PER_NIGHT
    Trigger.objects.create(plan=plan, metric="open_hours", limit=limit)
    services.site_recompute(site)
    assert PlanStatus.objects.get(plan=plan).forecast_date == _reached(today, None, limit)

    first = mirror_services.recoat_plan_create(mirrors[0], today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                               users["engineer"])
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == _reached(today, None, limit) and "planned recoat" not in status.basis

    second = mirror_services.recoat_plan_create(mirrors[1], first.ends_on - dt.timedelta(days=2), list(RECOAT_PHASES),
                                                10.0, users["engineer"])
    both = (second.starts_on, first.ends_on)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == _reached(today, both, limit) > _reached(today, None, limit)
    nights = (both[1] - both[0]).days + 1  # 3 planned; fewer when the crew's days off move the second recoat's start
    assert nights >= 1
    assert (f"no use on the {nights} night{'s' if nights != 1 else ''} of the planned recoats of A40: Primary mirror "
            "and B40: Primary mirror "
            f"({both[0]:%d %b %Y} to {both[1]:%d %b %Y}): every telescope of the site is out of service, so the "
            "enclosure they share is not opened") in status.basis


def _edited(client, order, planned: dt.date) -> None:
    """``order``'s planned date changed on its edit page, as the engineer does, its other fields as they stand."""
    from django.urls import reverse

    from observatory_ops.workorders.forms import WorkOrderEditForm

    form = WorkOrderEditForm(instance=order)
    data = {name: "" if value is None else value for name, value in form.initial.items() if name in form.fields}
    data["planned_date"] = planned.isoformat()
    response = client.post(reverse("workorder-edit", args=[order.pk]), data)
    assert response.status_code == 302, response.content.decode()[:2000]


def test_a_recoat_put_off_by_re_dating_its_orders_takes_its_telescope_out_on_the_new_days(scene, users, client):
    """A year's review: a recoat put off by moving its work orders kept its planned nights in the forecasts, the
    telescope counted out while it worked and in service while its mirror was away. None of its orders begun, its
    nights follow its orders: the first day of the first to the last day of the last (its planned date and its
    phase's planned length). Hand count as above."""
    site, today, plan, mirror = scene
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    client.force_login(users["engineer"])
    shift = dt.timedelta(days=28)
    for order in sorted(recoat.work_orders.all(), key=lambda o: -o.pk):  # the last first: the phases keep their order
        _edited(client, order, order.planned_date + shift)
    moved = (recoat.starts_on + shift, recoat.ends_on + shift)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == _reached(today, moved) != _reached(today, (recoat.starts_on, recoat.ends_on))
    assert (f"({moved[0]:%d %b %Y} to {moved[1]:%d %b %Y}; planned {recoat.starts_on:%d %b %Y} to "
            f"{recoat.ends_on:%d %b %Y}, now as its work orders are dated): the telescope is out of service"
            in status.basis)
    page = client.get(site.get_absolute_url()).content.decode()
    assert f"out of service {moved[0]:%d %b %Y} to {moved[1]:%d %b %Y}" in page and "Running late" not in page


def test_a_recoat_begun_and_running_on_keeps_its_telescope_out_to_its_last_phase_as_now_dated(scene, users):
    """Its removal begun, its realignment re-dated a fortnight later: the telescope is out from the recoat's first day
    to the realignment's new last day (its new date and its three planned days)."""
    from observatory_ops.workorders.models import State, WorkOrder

    site, today, plan, mirror = scene
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    orders = {o.recoat_phase: o for o in recoat.work_orders.all()}
    WorkOrder.objects.filter(pk=orders["removal"].pk).update(state=State.UNDERWAY)
    later = orders["realignment"].planned_date + dt.timedelta(days=14)
    WorkOrder.objects.filter(pk=orders["realignment"].pk).update(planned_date=later)
    services.site_recompute(site)
    realignment = next(p for p in recoat.phases if p["name"] == "realignment and measurement")
    length = (dt.date.fromisoformat(realignment["last"]) - dt.date.fromisoformat(realignment["first"])).days
    out = (recoat.starts_on, later + dt.timedelta(days=length))
    assert out[1] > recoat.ends_on
    assert PlanStatus.objects.get(plan=plan).forecast_date == _reached(today, out)


def test_a_mirror_out_with_its_reinstall_late_keeps_its_telescope_out_up_to_today(scene, users, client):
    """The recoat's days all passed, its removal finished and its reinstall still to do (late): the mirror is out, so
    the unlogged nights up to today count no use (they had counted as used once the planned days were over); from the
    next night on the forecast expects use again, and the dashboard asks for the reinstall's new day."""
    from django.utils import timezone

    from observatory_ops.workorders.models import State, WorkOrder

    site, today, plan, mirror = scene
    NightUsage.objects.filter(site=site, night__gte=today - dt.timedelta(days=10)).delete()
    ServicePlan.objects.filter(pk=plan.pk).update(counting_from=today - dt.timedelta(days=20))
    first_unlogged = today - dt.timedelta(days=10)
    recoat = mirror_services.recoat_plan_create(mirror, today - dt.timedelta(days=30), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    assert recoat.ends_on < today - dt.timedelta(days=10)  # its planned days all before the unlogged nights
    services.site_recompute(site)
    assert PlanStatus.objects.get(plan=plan).forecast_date == max(_reached(first_unlogged, None), today)

    orders = {o.recoat_phase: o for o in recoat.work_orders.all()}
    WorkOrder.objects.filter(pk=orders["removal"].pk).update(state=State.FINISHED, finished_at=timezone.now())
    services.site_recompute(site)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == max(_reached(first_unlogged, (first_unlogged, today)), today)
    assert (f"its mirror is out and its reinstall {orders['reinstall'].number} planned for "
            f"{orders['reinstall'].planned_date:%d %b %Y} is late: out of service up to today" in status.basis)
    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url()).content.decode()
    assert ("Its mirror is out (or its removal underway), so the forecasts count its telescope out of service up to "
            "today") in page


def _recoat_redated(scene, users, shift_days: int):
    """The scene's recoat planned from today + 40, its orders all re-dated by ``shift_days``."""
    from observatory_ops.workorders.models import WorkOrder

    site, today, plan, mirror = scene
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=40), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    for order in recoat.work_orders.all():
        WorkOrder.objects.filter(pk=order.pk).update(planned_date=order.planned_date + dt.timedelta(days=shift_days))
    return type(recoat).objects.get(pk=recoat.pk), today


def test_a_recoat_brought_forward_keeps_its_new_first_day_once_begun(scene, users):
    """A diff review brought a recoat's orders forward a month, then started the removal: the downtime went back to
    the planned days. Its first day is the earliest any order is planned for or was started on, begun or not."""
    from django.utils import timezone

    from observatory_ops.workorders.models import State, WorkOrder

    recoat, today = _recoat_redated(scene, users, -30)
    out = services.recoat_downtime(recoat, today)
    assert (out.first, out.last) == (recoat.starts_on - dt.timedelta(days=30), recoat.ends_on - dt.timedelta(days=30))
    removal = recoat.work_orders.get(recoat_phase="removal")
    WorkOrder.objects.filter(pk=removal.pk).update(state=State.UNDERWAY, started_at=timezone.now())
    out = services.recoat_downtime(type(recoat).objects.get(pk=recoat.pk), today)
    assert out.first == min(recoat.starts_on - dt.timedelta(days=30), today)
    assert out.last == recoat.ends_on - dt.timedelta(days=30) and out.mirror_out


def test_a_recoat_put_off_with_its_later_orders_undated_keeps_its_length(scene, users):
    """A diff review put the removal off and cleared the later orders' dates: the downtime shrank to the removal's two
    days. With an order undated it runs at least the recoat's planned length from its new first day."""
    from observatory_ops.workorders.models import WorkOrder

    recoat, today = _recoat_redated(scene, users, 30)
    WorkOrder.objects.filter(pk__in=recoat.work_orders.exclude(recoat_phase="removal").values("pk")).update(
        planned_date=None)
    out = services.recoat_downtime(type(recoat).objects.get(pk=recoat.pk), today)
    assert out.first == recoat.starts_on + dt.timedelta(days=30)
    assert out.last == out.first + (recoat.ends_on - recoat.starts_on)


def test_phases_stored_without_readable_dates_count_no_days_and_break_nothing(scene, users, client):
    """The admin edits a recoat's phases as JSON: a diff review removed their last days, and every recompute of the
    site (the dashboard, a night logged) failed with a KeyError."""
    site, today, plan, mirror = scene
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    type(recoat).objects.filter(pk=recoat.pk).update(phases=[{"name": p["name"]} for p in recoat.phases])
    services.site_recompute(site)
    client.force_login(users["viewer"])
    assert client.get(site.get_absolute_url()).status_code == 200


def test_a_booked_run_on_the_nights_of_a_re_dated_recoat_is_warned_of(scene, users):
    """A diff review booked a run on the nights a recoat's orders now took: the dashboard warned only of runs on its
    planned days. The runs are held against the nights as its orders stand."""
    from observatory_ops.planning.models import BookedRun

    recoat, today = _recoat_redated(scene, users, 30)
    site = scene[0]
    moved = BookedRun.objects.create(site=site, title="Comet campaign",
                                     starts_on=recoat.starts_on + dt.timedelta(days=32),
                                     ends_on=recoat.starts_on + dt.timedelta(days=33))
    BookedRun.objects.create(site=site, title="Old window", starts_on=recoat.starts_on,
                             ends_on=recoat.starts_on + dt.timedelta(days=1))
    assert [over.run for over in mirror_services.runs_over_recoats(site, today)] == [moved]


def test_a_mirror_left_out_by_a_stopped_recoat_keeps_its_telescope_out_up_to_today(scene, users):
    """As the late reinstall above, with the recoat stopped (its orders still to do withdrawn) and none planned again:
    its telescope counted in service over the unlogged nights the mirror was out (the last notes). Hand computation
    as the test above: no use on the unlogged nights the mirror was out, up to today."""
    from django.utils import timezone

    from observatory_ops.workorders.models import State, WorkOrder

    site, today, plan, mirror = scene
    NightUsage.objects.filter(site=site, night__gte=today - dt.timedelta(days=10)).delete()
    ServicePlan.objects.filter(pk=plan.pk).update(counting_from=today - dt.timedelta(days=20))
    first_unlogged = today - dt.timedelta(days=10)
    recoat = mirror_services.recoat_plan_create(mirror, today - dt.timedelta(days=30), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    orders = {o.recoat_phase: o for o in recoat.work_orders.all()}
    finished = timezone.make_aware(dt.datetime.combine(first_unlogged, dt.time(12)), site.zone)
    WorkOrder.objects.filter(pk=orders["removal"].pk).update(state=State.FINISHED, finished_at=finished)
    for phase in ("coating", "reinstall", "realignment"):
        workorders.work_order_move(WorkOrder.objects.get(pk=orders[phase].pk), "withdraw", users["engineer"],
                                   reason="the coating plant closed")
    status = PlanStatus.objects.get(plan=plan)  # the withdrawal recomputed the site
    assert status.forecast_date == max(_reached(first_unlogged, (first_unlogged, today)), today)
    assert (f"the stopped recoat of F50: Primary mirror ({first_unlogged:%d %b %Y} to {today:%d %b %Y}; its primary "
            f"mirror out since {first_unlogged:%d %b %Y} (removed by {orders['removal'].number})") in status.basis

    # A diff review: a recoat entered in the admin without orders, days ahead, hid the mirror out (it has no
    # reinstall to put it back), and the unlogged nights counted as observed.
    from observatory_ops.mirrors.models import RecoatPlan

    RecoatPlan.objects.create(mirror=mirror, starts_on=today + dt.timedelta(days=20),
                              ends_on=today + dt.timedelta(days=24), phases=[], cost=0.0, created_by=users["engineer"])
    services.site_recompute(site)
    assert PlanStatus.objects.get(plan=plan).forecast_date == status.forecast_date


def test_a_recoat_entered_without_orders_counts_in_the_forecasts_as_on_the_dashboard(scene, users, client):
    """The last notes: a recoat entered in the admin with no orders showed its days on the dashboard's "Downtime
    planned", while the forecasts counted its nights as used (two lists of recoats in hand). One list now
    (``recoats_in_hand``): its planned days, until they are past."""
    from observatory_ops.mirrors.models import RecoatPlan

    site, today, plan, mirror = scene
    first, last = today + dt.timedelta(days=3), today + dt.timedelta(days=8)
    recoat = RecoatPlan.objects.create(mirror=mirror, starts_on=first, ends_on=last, phases=[], cost=0.0,
                                       created_by=users["engineer"])
    services.site_recompute(site)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == _reached(today, (first, last)) == today + dt.timedelta(days=18)
    assert f"no use on the 6 nights of the planned recoat of F50: Primary mirror ({first:%d %b %Y}" in status.basis
    client.force_login(users["viewer"])
    assert f"{first:%d %b %Y}" in client.get(site.get_absolute_url()).content.decode()
    assert services.recoats_in_hand(site, today) == [recoat]
    # The mirror page and the planner read it too: another recoat is refused while it stands, saying where it is.
    assert mirror_services.recoat_in_hand(mirror) == recoat
    assert "entered in the admin without work orders; delete it there" in mirror_services.recoat_in_hand_text(recoat)
    client.force_login(users["engineer"])
    planner = " ".join(client.get(f"/mirrors/{mirror.pk}/recoat/").content.decode().split())
    assert "entered in the admin without work orders. Another is planned once its days are past, or after it is " \
           "deleted there (Recoat plans)" in planner and ": ." not in planner  # a diff review read ": . ... withdrawn"
    assert services.recoats_in_hand(site, last) == [recoat] and services.recoats_in_hand(site, last + dt.timedelta(
        days=1)) == []
    # The calendar feed: tentative, as a draft's days are, and its description says the forecasts count it.
    from icalendar import Calendar

    from observatory_ops.mirrors.calendar_export import site_calendar

    event = next(e for e in Calendar.from_ical(site_calendar(site, "http://testserver")).walk("VEVENT")
                 if str(e["uid"]).startswith(f"recoat-{recoat.pk}@"))
    assert str(event["status"]) == "TENTATIVE" and event["dtstart"].dt == first
    assert str(event["description"]).startswith("Entered in the admin without work orders: the forecasts count the "
                                                "telescope out on these days.")
    # Its days past, the feed no longer says so (a diff review).
    RecoatPlan.objects.filter(pk=recoat.pk).update(starts_on=today - dt.timedelta(days=9),
                                                   ends_on=today - dt.timedelta(days=7))
    event = next(e for e in Calendar.from_ical(site_calendar(site, "http://testserver")).walk("VEVENT")
                 if str(e["uid"]).startswith(f"recoat-{recoat.pk}@"))
    assert str(event["description"]).startswith("Entered in the admin without work orders, its days past: the "
                                                "forecasts no longer count them.")
