"""The sites page's counts, telescopes, subsystems and mirrors named with their site where a choice spans sites, and
the dust-weighted rate's wording (a network manager's review)."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from django.urls import reverse

from observatory_ops.calc.triggers import TriggerState
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.selectors import status_counts, status_counts_by_site
from observatory_ops.planning.services import reason_text, site_recompute
from observatory_ops.registry.models import Telescope
from tests.conftest import site_in_use

pytestmark = pytest.mark.django_db


@pytest.fixture
def two_sites(db):
    """Two sites in use, each with a telescope named "MC-80" besides its "T1", and their due states stored."""
    sites = site_in_use("harrow-knoll"), site_in_use("mesa-norte", kinds=("limits",))
    for site in sites:
        Telescope.objects.create(site=site, name="MC-80", aperture_m=0.8, mount="fork")
        site_recompute(site)
    return sites


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


# --- the sites page ------------------------------------------------------------------------------------------------


def test_the_sites_page_gives_each_sites_overdue_and_due_counts(two_sites, users, client):
    client.force_login(users["viewer"])
    text = _text(client.get("/"))
    for site in two_sites:
        counts = status_counts(site)
        assert f"{site.name} " in text
        assert f"{counts['overdue']} overdue · {counts['due']} due within 30 days" in text
    assert sum(status_counts(site)["overdue"] + status_counts(site)["due"] for site in two_sites) > 0


def test_the_counts_of_every_site_are_one_query(two_sites, django_assert_num_queries):
    with django_assert_num_queries(1):
        counts = status_counts_by_site(list(two_sites))
    for site in two_sites:
        stored = PlanStatus.objects.filter(site=site)
        assert counts[site.pk] == {status: stored.filter(status=status).count() for status in ("overdue", "due",
                                                                                                 "later")}


def test_the_sites_page_links_each_count_to_the_due_list(two_sites, users, client):
    client.force_login(users["viewer"])
    page = client.get("/").content.decode()
    site = two_sites[0]
    assert f'href="{reverse("due-list")}?site={site.pk}&amp;status=overdue"' in page
    assert f'href="{reverse("due-list")}?site={site.pk}&amp;status=due"' in page


# --- telescopes named with their site ------------------------------------------------------------------------------


def test_the_subsystem_forms_telescope_choice_names_each_site(two_sites, users, client):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    page = html.unescape(client.get("/admin/registry/subsystem/add/").content.decode())
    options = re.findall(r"<option value=\"\d+\"[^>]*>([^<]*MC-80[^<]*)</option>", page)
    assert options == ["Site harrow-knoll: MC-80 (0.8 m)", "Site mesa-norte: MC-80 (0.8 m)"]
    listing = html.unescape(client.get("/admin/registry/subsystem/").content.decode())
    assert "Site harrow-knoll: MC-80 (0.8 m)" in listing and "Site mesa-norte: MC-80 (0.8 m)" in listing


def test_the_due_lists_telescope_filter_names_each_site(two_sites, users, client):
    client.force_login(users["viewer"])
    page = html.unescape(client.get(reverse("due-list")).content.decode())
    assert "Site harrow-knoll: MC-80 (0.8 m)</option>" in page and "Site mesa-norte: MC-80 (0.8 m)</option>" in page


def test_pages_of_one_site_name_a_telescope_without_its_site(two_sites):
    assert str(two_sites[0].telescopes.get(name="MC-80")) == "MC-80 (0.8 m)"


# --- subsystems and mirrors named with their telescope and site -----------------------------------------------------


def _choices(client, url: str, field: str) -> list[str]:
    """The labels of a choice's options on an admin page (the empty choice left out)."""
    page = client.get(url).content.decode()
    select = re.search(rf'<select name="{field}"[^>]*>(.*?)</select>', page, flags=re.S).group(1)
    return [html.unescape(label) for label in re.findall(r'<option value="\d+"[^>]*>([^<]*)</option>', select)]


@pytest.fixture
def mirrors_at_two_sites(two_sites):
    """A "T1: Primary mirror" at each site, each with its mirror record."""
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.registry.services import subsystem_create

    subsystem_create(two_sites[1].telescopes.get(name="T1"), "primary_mirror", "Primary mirror",
                     counting_from=dt.date(2026, 1, 1))
    for primary in Subsystem.objects.filter(kind="primary_mirror"):
        Mirror.objects.create(subsystem=primary, diameter_mm=800, thickness_mm=100, material="borosilicate")
    return two_sites


@pytest.mark.parametrize(("url", "field"), [
    ("/admin/planning/serviceplan/add/", "subsystem"),
    ("/admin/registry/subsystem/add/", "parent"),
])
def test_a_subsystem_choice_names_each_subsystem_with_its_site_and_telescope(two_sites, admin_client, url, field):
    # Both sites have a "T1: Limits": without the site the two options read alike.
    labels = _choices(admin_client, url, field)
    assert "Site harrow-knoll: T1: Limits" in labels and "Site mesa-norte: T1: Limits" in labels
    assert len(labels) == len(set(labels))
    # Listed by site, as the labels read: every subsystem of the first site before any of the second.
    sites = [label.split(": ")[0] for label in labels]
    assert sites == sorted(sites, key=["Site harrow-knoll", "Site mesa-norte"].index)


def test_the_mirror_record_offers_each_mirror_subsystem_named_with_its_site(two_sites, admin_client):
    from observatory_ops.registry.services import subsystem_create

    subsystem_create(two_sites[1].telescopes.get(name="T1"), "primary_mirror", "Primary mirror",
                     counting_from=dt.date(2026, 1, 1))
    assert _choices(admin_client, "/admin/mirrors/mirror/add/", "subsystem") == [
        "Site harrow-knoll: T1: Primary mirror", "Site mesa-norte: T1: Primary mirror",
    ]


@pytest.mark.parametrize("url", ["/admin/mirrors/reflectancemeasurement/add/", "/admin/mirrors/recoatplan/add/"])
def test_a_mirror_choice_names_each_mirror_with_its_site_and_telescope(mirrors_at_two_sites, admin_client, url):
    assert _choices(admin_client, url, "mirror") == [
        "Site harrow-knoll: T1: Primary mirror", "Site mesa-norte: T1: Primary mirror",
    ]


def test_a_mirror_page_in_the_admin_names_its_own_subsystem_with_its_site(mirrors_at_two_sites, admin_client):
    from observatory_ops.mirrors.models import Mirror

    mirror = Mirror.objects.get(subsystem__telescope__site=mirrors_at_two_sites[1])
    labels = _choices(admin_client, f"/admin/mirrors/mirror/{mirror.pk}/change/", "subsystem")
    assert labels == ["Site mesa-norte: T1: Primary mirror"]  # its own; the other has its mirror record


def test_the_subsystem_choice_takes_the_same_queries_however_many_subsystems_it_lists(two_sites, admin_client):
    """The site and telescope of every option come with the options (one query), not one query per option."""
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from observatory_ops.registry.services import subsystem_create

    def queries() -> int:
        with CaptureQueriesContext(connection) as captured:
            assert admin_client.get("/admin/planning/serviceplan/add/").status_code == 200
        return len(captured)

    before = queries()
    for telescope in Telescope.objects.all():
        subsystem_create(telescope, "cooling_fans", "Spare fans", counting_from=dt.date(2026, 1, 1))
    assert queries() == before


# --- the dust-weighted rate ----------------------------------------------------------------------------------------


def _state(metric: str, rate: float) -> TriggerState:
    return TriggerState(metric=metric, value=900, limit=2000, rate_per_day=rate, forecast=dt.date(2027, 2, 1),
                        unit=metrics.METRICS[metric][1])


def test_a_dust_weighted_rate_says_dust_weighted_hours_per_day():
    """A dust weight above 1 (a dusty month) makes a day count more than 24 dust-weighted hours: "24.8 h per day"
    read as an error."""
    assert ("Dust-weighted open hours: 900 of 2,000 h, about 24.8 dust-weighted h per day expected over the next "
            "30 days; forecast 01 Feb 2027.") == reason_text(_state(metrics.DUST_HOURS, 24.8))
    assert ("Open-dome hours: 900 of 2,000 h, about 6.20 h per day expected over the next 30 days; forecast "
            "01 Feb 2027.") == reason_text(_state(metrics.OPEN_HOURS, 6.2))


def test_the_work_order_and_isolation_point_admin_name_telescopes_with_their_site(admin_client, db):
    # The subsystem admin did already; the work order's and the isolation point's telescope choice showed two
    # "MC-80 (0.8 m)" with no site.
    from observatory_ops.registry.models import Site, Telescope

    for name, slug in (("Harrow Knoll", "harrow-knoll"), ("Lone Fen", "lone-fen")):
        site = Site.objects.create(name=name, slug=slug, latitude_deg=30.0, longitude_deg=-100.0, elevation_m=900,
                                   time_zone="America/Chicago")
        Telescope.objects.create(site=site, name="MC-80", aperture_m=0.8, mount="fork")
    for url in ("/admin/workorders/workorder/add/", "/admin/workorders/isolationpoint/add/"):
        page = admin_client.get(url).content.decode()
        assert "Harrow Knoll: MC-80" in page and "Lone Fen: MC-80" in page, url


def test_a_work_orders_item_and_reading_rows_name_each_subsystem_with_its_site(two_sites, admin_client):
    # The work order's inline rows (the subsystems it covers, the readings it asks for) chose among every site's
    # subsystems with nothing to tell two "T1: Limits" apart.
    page = admin_client.get("/admin/workorders/workorder/add/").content.decode()
    for prefix in ("items", "required_readings"):
        select = re.search(rf'<select name="{prefix}-__prefix__-subsystem".*?</select>', page, re.S).group(0)
        assert "Site harrow-knoll: T1: Limits" in select and "Site mesa-norte: T1: Limits" in select, prefix


# --- a work order's rows: plans named in full, a stored order's own site's choices ---------------------------------

#: The plan of both sites' "T1: Limits" (registry.catalogue), named as a choice names it below the site.
LIMITS_PLAN = "T1: Limits: Test limit switches and interlocks"


def _options(page: str, name: str) -> list[str]:
    """The labels of the options of the select ``name`` on an admin page (the empty choice left out)."""
    select = re.search(rf'<select name="{name}"[^>]*>(.*?)</select>', page, flags=re.S).group(1)
    return [html.unescape(label) for label in re.findall(r'<option value="\d+"[^>]*>([^<]*)</option>', select)]


@pytest.fixture
def order_at_harrow_knoll(two_sites, users):
    """A work order for Harrow Knoll's limit switches: one item, "Site harrow-knoll: T1: Limits" and its plan."""
    from observatory_ops.planning.models import ServicePlan
    from observatory_ops.workorders.services import work_order_from_due

    plans = ServicePlan.objects.filter(subsystem__telescope__site=two_sites[0], subsystem__kind="limits")
    return work_order_from_due(list(plans), users["engineer"])


def test_a_new_orders_item_rows_name_each_plan_with_its_site_telescope_and_subsystem(two_sites, admin_client):
    """The plan choice read "Test limit switches and interlocks" once per site, with nothing to tell them apart."""
    from observatory_ops.planning.models import ServicePlan

    page = admin_client.get("/admin/workorders/workorder/add/").content.decode()
    labels = _options(page, "items-__prefix__-plan")
    assert f"Site harrow-knoll: {LIMITS_PLAN}" in labels and f"Site mesa-norte: {LIMITS_PLAN}" in labels
    assert len(labels) == len(set(labels)) == ServicePlan.objects.count()  # every site's, for an order not yet placed
    sites = [label.split(": ")[0] for label in labels]
    assert sites == sorted(sites, key=["Site harrow-knoll", "Site mesa-norte"].index)


def test_a_stored_orders_rows_offer_its_own_sites_subsystems_and_plans_named_as_before(
    order_at_harrow_knoll, admin_client
):
    """Every item and reading row listed every site's subsystems and plans: at 100 sites of 50 subsystems the change
    page took 6 s. A stored order is at one site: its rows, stored or added, offer that site's, still named with it."""
    from observatory_ops.planning.models import ServicePlan
    from observatory_ops.registry.models import Subsystem

    site = order_at_harrow_knoll.site
    page = admin_client.get(f"/admin/workorders/workorder/{order_at_harrow_knoll.pk}/change/").content.decode()
    subsystems = [f"{site.name}: {s}" for s in
                  Subsystem.objects.filter(telescope__site=site).order_by("telescope__name", "name")]
    plans = [f"{site.name}: {p.subsystem}: {p.name}" for p in ServicePlan.objects.filter(
        subsystem__telescope__site=site).order_by("subsystem__telescope__name", "subsystem__name", "name")]
    assert len(subsystems) == 4 and f"{site.name}: {LIMITS_PLAN}" in plans
    for name in ("items-0-subsystem", "items-__prefix__-subsystem", "required_readings-__prefix__-subsystem"):
        assert _options(page, name) == subsystems, name
    for name in ("items-0-plan", "items-__prefix__-plan"):
        assert _options(page, name) == plans, name
    item = order_at_harrow_knoll.items.get()
    assert re.search(rf'<option value="{item.subsystem_id}" selected>Site harrow-knoll: T1: Limits</option>', page)
    assert re.search(rf'<option value="{item.plan_id}" selected>Site harrow-knoll: {LIMITS_PLAN}</option>', page)


def test_a_stored_order_saves_as_it_stands_and_refuses_a_row_of_another_site_saying_which(
    order_at_harrow_knoll, two_sites, admin_client
):
    from observatory_ops.registry.models import Subsystem
    from tests.test_start_holds import _admin_post

    url = f"/admin/workorders/workorder/{order_at_harrow_knoll.pk}/change/"
    assert _admin_post(admin_client, url).status_code == 302
    elsewhere = Subsystem.objects.get(telescope__site=two_sites[1], kind="limits")
    response = _admin_post(admin_client, url, **{"items-0-subsystem": elsewhere.pk})
    assert response.status_code == 200
    assert "Choose one at Site harrow-knoll, the site of this work order." in _text(response)
    assert order_at_harrow_knoll.items.get().subsystem.telescope.site == two_sites[0]


def test_the_isolation_points_subsystem_search_names_each_subsystem_with_its_site_as_the_saved_choice(
    two_sites, admin_client
):
    """The search behind the subsystem choice (typed into: a network has thousands) answered "T1: Limits" twice, while
    the choice once saved read "Site mesa-norte: T1: Limits". Both now read alike, and the site's name narrows it."""
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.workorders.models import IsolationPoint

    def found(term: str) -> list[str]:
        answer = admin_client.get("/admin/autocomplete/", {
            "app_label": "workorders", "model_name": "isolationpoint", "field_name": "subsystem", "term": term,
        })
        return [result["text"] for result in answer.json()["results"]]

    assert found("limits") == ["Site harrow-knoll: T1: Limits", "Site mesa-norte: T1: Limits"]
    assert found("mesa limits") == ["Site mesa-norte: T1: Limits"]
    # Typed as the pages write it, colons and all (a walk-through's "R40: Axis 1 brake" had found nothing).
    assert found("Site mesa-norte: T1: Limits") == ["Site mesa-norte: T1: Limits"]
    limits = Subsystem.objects.get(telescope__site=two_sites[1], kind="limits")
    point = IsolationPoint.objects.create(telescope=limits.telescope, subsystem=limits, energy="ac",
                                          label="Limits supply")
    page = admin_client.get(f"/admin/workorders/isolationpoint/{point.pk}/change/").content.decode()
    assert re.search(rf'<option value="{limits.pk}" selected>Site mesa-norte: T1: Limits</option>', page)


def test_the_subsystem_search_takes_the_same_queries_however_many_subsystems_it_finds(two_sites, admin_client):
    """Each result's site and telescope come with the results (one query), not one query per result."""
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from observatory_ops.registry.services import subsystem_create

    def queries() -> int:
        with CaptureQueriesContext(connection) as captured:
            admin_client.get("/admin/autocomplete/", {"app_label": "workorders", "model_name": "isolationpoint",
                                                      "field_name": "subsystem", "term": "fans"})
        return len(captured)

    before = queries()
    for telescope in Telescope.objects.all():
        subsystem_create(telescope, "cooling_fans", "Spare fans", counting_from=dt.date(2026, 1, 1))
    assert queries() == before
