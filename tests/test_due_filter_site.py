"""The due list's telescope filter follows the site: a telescope chosen alone names its site (the page brings that
site up to date and lists its telescopes out of service, not the network's), and with a site chosen the telescope list
holds that site's telescopes only. Also: a tiny reading is written without an exponent. Our own rules of the page."""

import datetime as dt
import re

import pytest

from observatory_ops.planning.filters import KIND_CHOICES
from observatory_ops.planning.models import PlanStatus, figure_text
from observatory_ops.planning.services import site_recompute, site_today
from tests.conftest import site_in_use

pytestmark = pytest.mark.django_db


def test_a_telescope_chosen_alone_names_its_site_and_only_that_site_is_brought_up_to_date(client, users):
    first, second = site_in_use("first-hill"), site_in_use("second-hill")
    for site in (first, second):
        site_recompute(site)
    yesterday = dt.datetime.combine(site_today(first) - dt.timedelta(days=1), dt.time(12), tzinfo=dt.UTC)
    PlanStatus.objects.update(computed_at=yesterday, value=-1)  # both stale
    client.force_login(users["viewer"])
    telescope = first.telescopes.get()
    page = client.get(f"/due/?telescope={telescope.pk}")
    assert page.status_code == 200
    assert not PlanStatus.objects.filter(site=first, value=-1).exists()  # the telescope's site: recomputed
    assert PlanStatus.objects.filter(site=second, value=-1).exists()  # the other: left for its own look
    rows = page.context["table"].page.object_list
    assert rows and all(row.record.site_id == first.pk for row in rows)


def test_with_a_site_chosen_the_telescope_list_is_that_sites(client, users):
    first, second = site_in_use("first-hill"), site_in_use("second-hill")
    client.force_login(users["viewer"])
    page = client.get(f"/due/?site={first.pk}")
    options = list(page.context["filter"].form.fields["telescope"].queryset)
    assert options == list(first.telescopes.all())
    # Another site's telescope with the site: not applied, and said so (the page's other filters still hold).
    other = second.telescopes.get()
    page = client.get(f"/due/?site={first.pk}&telescope={other.pk}")
    warnings = [str(m) for m in page.context["messages"]]
    assert f"Telescope {other.site_label} not applied: it is not at {first.name}, the site chosen" in warnings
    assert all(row.record.site_id == first.pk for row in page.context["table"].page.object_list)


@pytest.mark.parametrize(("value", "text"), [
    (2.5e-05, "0.000025"), (-2.5e-05, "-0.000025"), (1.23456e-07, "0.0000001235"), (0.0001234, "0.0001234"),
    (12.345, "12.35"), (1234.5, "1,234"), (0.0, "0"),
])
def test_a_reading_is_written_to_four_significant_figures_without_an_exponent(value, text):
    assert figure_text("reading", "mm", value) == text


def test_a_filtered_due_list_says_what_it_is_filtered_by_in_its_title_and_count(client, users):
    """An accessibility review: after filtering, the page's title and heading did not change and the number of
    matches was not stated; a screen reader heard the filtered list as the whole one."""
    site = site_in_use("filter-words", kinds=("cooling_fans", "limits"))
    client.force_login(users["viewer"])
    whole = client.get("/due/").content.decode()
    count = int(re.search(r'<p id="due-count" role="status">(\d+) plans? listed\.</p>', whole).group(1))
    assert f"<title>Due list ({count}) · observatory_ops</title>" in whole
    page = client.get(f"/due/?site={site.pk}&kind=cooling_fans").content.decode()
    said = re.search(r'<p id="due-count" role="status">(\d+) plans? listed, ([^<]+)\.</p>', page)
    assert said and said.group(2) == f"site {site.name}; kind {dict(KIND_CHOICES)['cooling_fans']}"
    assert f"<title>Due list: site {site.name}; kind " in page


def test_a_due_list_filtered_by_telescope_names_its_site(client, users):
    """A diff review: the filter's words named "telescope T1 (0.6 m)" without its site, where several sites may have a
    T1."""
    from observatory_ops.registry.models import Telescope

    site = site_in_use("filter-scope", kinds=("cooling_fans",))
    scope = Telescope.objects.filter(site=site).first()
    client.force_login(users["viewer"])
    page = client.get(f"/due/?site={site.pk}&telescope={scope.pk}").content.decode()
    assert f"telescope {site.name}: {scope}" in page
