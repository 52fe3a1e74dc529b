"""The reliability page over a period an engineer chooses ("since the new drives went in", "last year only").

Every figure covers the period: operating hours of the nights dated in it only, a failure counted when its repair was
done in it, each subsystem's nights in service within it (put in service or retired part way: the page's rules cut to
the period; retired before it or put in service after it: not in it), the maintenance hours and the service-records
CSV of its days. A period refused (reversed, not a date, in the future, before the first logged night) is said beside
the form, naming the field, over the default period's figures.

The record, by hand: nights of 1 Jan to 30 Jun 2026 logged, 4 open hours a night in January to March and 6 in April to
June. The period 1 Mar to 31 May 2026 holds March's 31 nights (124 h), April's 30 (180 h) and May's 31 (186 h).
"""
from __future__ import annotations

import csv
import datetime as dt
import html
import io
import re

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from lifelines import WeibullFitter
from scipy import stats

from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.forms import PeriodForm
from observatory_ops.reliability.selectors import AFTER_RETIRED, Period, site_reliability
from tests.test_reliability_page import _order

pytestmark = pytest.mark.django_db

LOG_START, LOG_END = dt.date(2026, 1, 1), dt.date(2026, 6, 30)
TODAY = dt.date(2026, 7, 1)
SPRING = Period(dt.date(2026, 3, 1), dt.date(2026, 5, 31))


def _night_hours(night: dt.date) -> float:
    return 4.0 if night.month <= 3 else 6.0


@pytest.fixture
def drives(site, telescope, users):
    """Five fans. A: in service throughout. B: in service since 15 Apr 2026 (part way through the period). C: retired
    on 1 May 2026 (part way). D: retired on 15 Feb 2026 (before the period). E: in service since 15 Jun 2026 (after
    it). Corrective work, by the day its repair was done:
    A 10 Jan (before the period); A 1 Mar (the period's first day, entered on 3 Mar: its service record gives the day);
    A 20 Mar; C 20 Apr; C 5 May (after its retirement: left out); B 10 May; A 1 Jun (the day after the period, the
    failure of the night of 31 May); D 10 Feb."""
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=LOG_START + dt.timedelta(days=i), open_hours=_night_hours(LOG_START +
                                                                                              dt.timedelta(days=i)))
        for i in range((LOG_END - LOG_START).days + 1)
    )
    fan = {name: subsystem_create(telescope, "cooling_fans", f"Fan {name}", counting_from=LOG_START, **more)
           for name, more in (("A", {}), ("B", {"in_service_since": dt.date(2026, 4, 15)}), ("C", {}), ("D", {}),
                              ("E", {"in_service_since": dt.date(2026, 6, 15)}))}
    by = users["engineer"]

    def repaired_on(subsystem, day, entered, hours):
        order = _order(site, [subsystem], by, entered)
        ServiceRecord.objects.create(subsystem=subsystem, performed_on=day, performed_by=by, created_by=by,
                                     hours_spent=hours, summary="fan replaced", work_order=order)

    _order(site, [fan["A"]], by, dt.date(2026, 1, 10))
    repaired_on(fan["A"], SPRING.first, dt.date(2026, 3, 3), 2.0)
    _order(site, [fan["A"]], by, dt.date(2026, 3, 20))
    _order(site, [fan["C"]], by, dt.date(2026, 4, 20))
    _order(site, [fan["C"]], by, dt.date(2026, 5, 5))
    _order(site, [fan["B"]], by, dt.date(2026, 5, 10))
    repaired_on(fan["A"], dt.date(2026, 6, 1), dt.date(2026, 6, 2), 1.5)
    _order(site, [fan["D"]], by, dt.date(2026, 2, 10))
    Subsystem.objects.filter(pk=fan["C"].pk).update(retired_on=dt.date(2026, 5, 1))
    Subsystem.objects.filter(pk=fan["D"].pk).update(retired_on=dt.date(2026, 2, 15))
    return site


def _fans(site, period: Period | None = SPRING):
    return next(k for k in site_reliability(site, TODAY, period).kinds if k.code == "cooling_fans")


def test_a_periods_mtbf_is_its_hours_over_its_failures_by_hand(drives):
    """Hours in the period only: A all of it, 124 + 180 + 186 = 490 h; B from 15 Apr, 16 x 6 + 186 = 282 h; C to the
    day before it was retired, 124 + 180 = 304 h; D and E were not in service in it. T = 1,076 h.
    Failures repaired in it: A's of 1 Mar and 20 Mar, C's of 20 Apr, B's of 10 May; n = 4 (A's of 10 Jan and 1 Jun,
    D's of 10 Feb fall outside it; C's of 5 May came after its retirement). MTBF = 1,076 / 4 = 269 h."""
    fans = _fans(drives)
    assert (fans.counted, fans.in_service, fans.retired) == (3, 2, 1)  # A, B in service at its end; C retired in it
    assert fans.operating_hours == pytest.approx(490.0 + 282.0 + 304.0)
    assert fans.failures == 4
    assert fans.mtbf.mtbf_hours == pytest.approx(1076.0 / 4) == pytest.approx(269.0)
    # Its 90 % interval, 2T / chi2(0.95; 2n+2) to 2T / chi2(0.05; 2n), with scipy.stats.chi2's quantiles (NIST/SEMATECH
    # e-Handbook, chapter 8, time-terminated exponential bounds).
    assert fans.mtbf.lower_hours == pytest.approx(2 * 1076.0 / stats.chi2.ppf(0.95, 10))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 1076.0 / stats.chi2.ppf(0.05, 8))
    assert [(f.subsystem, f.night, f.reason) for f in fans.left_out] == [("T1: Fan C", dt.date(2026, 5, 5),
                                                                         AFTER_RETIRED)]


def test_a_periods_failures_sit_at_its_hours_and_the_fit_is_of_them(drives):
    """Each failure at the hours of its subsystem's nights in the period up to it: A's repaired on 1 Mar failed the
    night before the period, at 0 h of it; A's of 20 Mar after 20 nights, 80 h; C's of 20 Apr after 124 + 20 x 6 =
    244 h; B's of 10 May after 16 x 6 + 10 x 6 = 156 h; running A 490 - 80 = 410, B 282 - 156 = 126, C 304 - 244 = 60 h.
    Each unit's age when the period began, from the log (delayed entry): A had run the 49 nights of 11 Jan to 28 Feb
    since its failure of the night of 10 Jan, 196 h; C all 59 nights of January and February since its hours began,
    236 h; B entered service in the period, at 0 h. So the intervals, as (age at failure, age at entry): A (196, 196),
    (80, 0); B (156, 0); C (244 + 236 = 480, 236). A's first, with no hours in the period, counts in the MTBF and is
    left out of the fit."""
    fans = _fans(drives)
    assert [(f.subsystem, f.night, f.hours) for f in fans.failures_listed] == [
        ("T1: Fan A", dt.date(2026, 2, 28), 0.0), ("T1: Fan A", dt.date(2026, 3, 20), 80.0),
        ("T1: Fan C", dt.date(2026, 4, 20), 244.0), ("T1: Fan B", dt.date(2026, 5, 10), 156.0),
    ]
    assert sorted(zip(fans.between, fans.between_entry, strict=True)) == [(80.0, 0.0), (156.0, 0.0), (196.0, 196.0),
                                                                          (480.0, 236.0)]
    assert fans.zero_intervals == 1 and fans.delayed_entries == 1 and fans.unknown_age == []
    assert sorted(fans.running) == [60.0, 126.0, 410.0] and fans.running_entry == [0.0, 0.0, 0.0]
    # lifelines.WeibullFitter with entry= (left truncation) on the same censored data (independent reference).
    reference = WeibullFitter().fit([80, 156, 480, 60, 126, 410], event_observed=[1, 1, 1, 0, 0, 0],
                                    entry=[0, 0, 236, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert fans.fit_inputs.startswith(
        "between failures: 80, 156, 480 (counted from 236) h; still running (censored): 60, 126, 410 h; left out: ")


def test_in_a_period_a_unit_of_unknown_age_is_fitted_from_its_first_failure_seen(drives, telescope, users):
    """Three fans in service since 1 Dec 2025, before the log began (1 Jan 2026): their hours before the log are not
    known. F fails on the night of 25 Mar, at 25 x 4 = 100 h of the period: its interval up to then is of unknown age
    and left out of the fit; it runs 490 - 100 = 390 h from new since. G failed on the night of 20 Jan, before the
    period, and is new from then: at the period's start it had run the 39 nights of 21 Jan to 28 Feb, 156 h; it
    fails on the night of 10 Apr, at 124 + 10 x 6 = 184 h of the period: age 340 h, entered at 156 h; it runs
    490 - 184 = 306 h since. H never fails: its only interval is of unknown age, and it is not in the fit.
    The MTBF still counts every hour and failure: T = 1,076 + 3 x 490 = 2,546 h, n = 4 + 2 = 6."""
    by = users["engineer"]
    before_the_log = dt.date(2025, 12, 1)
    fan = {name: subsystem_create(telescope, "cooling_fans", f"Fan {name}", counting_from=LOG_START,
                                  in_service_since=before_the_log) for name in "FGH"}
    _order(drives, [fan["F"]], by, dt.date(2026, 3, 25))
    _order(drives, [fan["G"]], by, dt.date(2026, 1, 20))
    _order(drives, [fan["G"]], by, dt.date(2026, 4, 10))
    fans = _fans(drives)
    assert fans.operating_hours == pytest.approx(1076.0 + 3 * 490.0) and fans.failures == 6
    assert fans.mtbf.mtbf_hours == pytest.approx(2546.0 / 6)
    assert fans.unknown_age == ["T1: Fan F", "T1: Fan H"]
    assert fans.fitted_between == [(80.0, 0.0), (156.0, 0.0), (340.0, 156.0), (480.0, 236.0)]
    assert fans.fitted_running == [(60.0, 0.0), (126.0, 0.0), (306.0, 0.0), (390.0, 0.0), (410.0, 0.0)]
    assert fans.delayed_entries == 2
    # lifelines.WeibullFitter with entry= (left truncation) on the same data (independent reference).
    reference = WeibullFitter().fit([80, 156, 340, 480, 60, 126, 306, 390, 410],
                                    event_observed=[1, 1, 1, 1, 0, 0, 0, 0, 0], entry=[0, 0, 156, 236, 0, 0, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert fans.entry_note == (
        "2 intervals were already under way when the count began and are fitted from the ages the log gives them "
        "then; 2 first intervals (T1: Fan F, T1: Fan H) are left out of the fit, as their subsystems' hours before "
        "the log began are not known.")


def test_the_whole_record_as_a_period_fits_as_the_default_does(drives):
    """A period from the first logged night: every unit's age at its start is 0 or not known, as by default."""
    whole, default = _fans(drives, Period(LOG_START, TODAY)), _fans(drives, None)
    assert (whole.fit, whole.delayed_entries, whole.unknown_age) == (default.fit, 0, [])


def test_a_periods_maintenance_hours_are_the_service_done_in_it(drives):
    """The record of 1 Mar (2 h) is in the period, the one of 1 Jun (1.5 h) is not."""
    report = site_reliability(drives, TODAY, SPRING)
    assert (report.hours_since, report.hours_until) == (SPRING.first, SPRING.last)
    assert report.records_in_window == 1 and report.hours_by_type["corrective"] == 2.0


def test_periods_end_to_end_count_each_failure_and_each_hour_once(drives):
    """Two periods that meet count together what the one covering both does: no failure or night twice, none lost."""
    whole = _fans(drives, Period(LOG_START, LOG_END))
    halves = [_fans(drives, Period(LOG_START, dt.date(2026, 3, 31))), _fans(drives, Period(dt.date(2026, 4, 1),
                                                                                             LOG_END))]
    assert sum(h.failures for h in halves) == whole.failures
    assert sum(h.operating_hours for h in halves) == pytest.approx(whole.operating_hours)


def test_without_a_period_the_figures_are_the_whole_records(drives):
    """The default: every logged night to today and every failure, as the page always counted them."""
    assert _fans(drives, None).operating_hours == _fans(drives, Period(LOG_START, TODAY)).operating_hours


def test_a_period_left_open_at_one_end_runs_from_the_first_logged_night_or_to_today():
    """'Since the new drives went in': only From; 'up to the overhaul': only To."""
    def chosen(**given):
        form = PeriodForm(given, first_night=LOG_START, today=TODAY)
        assert form.is_valid(), form.errors
        return form.period()

    assert chosen(**{"from": "2026-04-15"}) == Period(dt.date(2026, 4, 15), TODAY)
    assert chosen(to="2026-03-31") == Period(LOG_START, dt.date(2026, 3, 31))
    assert chosen(**{"from": "", "to": ""}) is None


def test_the_selector_reads_a_fixed_number_of_queries_over_a_period(drives, django_assert_max_num_queries):
    with django_assert_max_num_queries(8):  # the usage log reads the site's closures too (planning.UsageLog)
        site_reliability(drives, TODAY, SPRING)


# --- the page ---------------------------------------------------------------------------------------------------


def _page(client, site, **query) -> str:
    return html.unescape(client.get(reverse("site-reliability", args=[site.slug]), query).content.decode())


def test_the_page_shows_the_periods_figures_and_says_which_period_they_cover(drives, users, client):
    client.force_login(users["viewer"])
    page = _page(client, drives, **{"from": "2026-03-01", "to": "2026-05-31"})
    assert "Period: 01 Mar 2026 to 31 May 2026." in page
    assert "the operating hours of the nights dated in it, the failures whose repair was done in it" in page
    assert f'<a href="/sites/{drives.slug}/reliability/">Back to the default period</a>' in page
    assert "<strong>269 h</strong>" in page
    assert "Maintenance hours (person-hours), 01 Mar 2026 to 31 May 2026" in page
    assert "1 service record in this period" in page
    assert "one put in service part way counts from the day its hours count from" in page
    assert "T1: Fan B: from 15 Apr 2026 (the in-service date given)" in page
    # Beside the fit, how many intervals were fitted from the age they had when the period began (fan C's).
    assert ("1 interval was already under way when the count began and is fitted from the age the log gives it "
            "then.</span>") in page
    assert "480 (counted from 236)" in page
    assert ("In the period, each from 01 Mar 2026 or its later day above, to 31 May 2026 or the day before it was "
            "retired") in page
    # The picture's words say the period, and its figures: T = 1,076 h, n = 4, bounds from scipy.stats.chi2.
    words = re.search(r'<figcaption [^>]*id="mtbf-words">(.*?)</figcaption>', page, re.S).group(1)
    assert "of the failures and operating hours from 01 Mar 2026 to 31 May 2026" in words
    assert (f"Cooling fans and filters 269 h ({2 * 1076 / stats.chi2.ppf(0.95, 10):,.0f} to "
            f"{2 * 1076 / stats.chi2.ppf(0.05, 8):,.0f} h, 4 failures)") in words


def test_the_pages_csv_is_of_the_period(drives, users, client):
    client.force_login(users["viewer"])
    page = _page(client, drives, **{"from": "2026-03-01", "to": "2026-05-31"})
    link = re.search(r'<p class="noprint" id="records-csv"><a href="([^"]+)">', page).group(1)
    assert link == f"/sites/{drives.slug}/service-records.csv?from=2026-03-01&to=2026-05-31"
    rows = list(csv.DictReader(io.StringIO(client.get(link).content.decode("utf-8-sig"))))
    assert [r["performed_on"] for r in rows] == ["2026-03-01"]


def test_the_default_period_is_the_whole_record_and_the_last_12_months_of_maintenance(drives, users, client):
    client.force_login(users["viewer"])
    today = site_today(drives)
    page = _page(client, drives)
    assert "Default period." in page and "Back to the default period" not in page
    assert "from the first logged night, 01 Jan 2026," in page
    since = today - dt.timedelta(days=364)
    assert f"the last 12 months, {since:%d %b %Y} to {today:%d %b %Y}" in page
    assert f"service-records.csv?from={since}&to={today}" in page


@pytest.mark.parametrize(("query", "said"), [
    ({"from": "2026-05-01", "to": "2026-03-01"},
     '<a href="#id_from">From</a>: 01 May 2026 is after To, 01 Mar 2026'),
    ({"from": "2026-02-30"}, '<a href="#id_from">From</a>: 2026-02-30 is not a day of the calendar'),
    ({"to": "not a day"}, '<a href="#id_to">To</a>: not a day is not a day of the calendar'),
    ({"from": "2025-12-01"},
     "<a href=\"#id_from\">From</a>: 01 Dec 2025 is before the site's first logged night, 01 Jan 2026"),
    ({"to": "FUTURE"}, '<a href="#id_to">To</a>: {future} is in the future'),
    ({"from": "FUTURE"}, '<a href="#id_from">From</a>: {future} is in the future'),
])
def test_a_period_refused_is_said_beside_the_form_over_the_default_figures(drives, users, client, query, said):
    future = site_today(drives) + dt.timedelta(days=1)
    query = {name: future.isoformat() if value == "FUTURE" else value for name, value in query.items()}
    client.force_login(users["viewer"])
    response = client.get(reverse("site-reliability", args=[drives.slug]), query)
    assert response.status_code == 200
    page = html.unescape(response.content.decode())
    assert said.format(future=f"{future:%d %b %Y}") in page
    assert page.index('id="period-form"') < page.index('id="error-summary"') < page.index("<h2>Failures")
    assert "<title>Error: " in page
    assert "This period was not applied: the figures below are the default period's." in page
    assert "Default period." in page
    default = next(k for k in site_reliability(drives).kinds if k.code == "cooling_fans")
    assert f"<strong>{default.mtbf.mtbf_hours:,.0f} h</strong>" in page and default.mtbf.mtbf_hours != 269.0


def test_a_site_with_no_night_logged_has_no_period_to_choose(site, users, client):
    client.force_login(users["viewer"])
    page = _page(client, site, **{"from": "2026-01-01"})
    assert "no night is logged at this site yet, so there is no period to choose" in page


def test_the_page_reads_as_many_queries_over_a_period_as_by_default(drives, users, client):
    client.force_login(users["viewer"])
    url = reverse("site-reliability", args=[drives.slug])
    with CaptureQueriesContext(connection) as default:
        client.get(url)
    with CaptureQueriesContext(connection) as chosen:
        client.get(url, {"from": "2026-03-01", "to": "2026-05-31"})
    assert len(chosen) == len(default)


def test_the_period_presets_are_the_calendars_cut_to_the_log():
    """A manager's review typed each month's and quarter's dates by hand: the page offers last month, last quarter,
    the last 12 months, this year so far and last year as links, cut to the log's first night and to today. By hand
    for Thursday 05 Nov 2026 (a log from 20 Jul 2025): October 2026; Q3 2026, 01 Jul to 30 Sep; 06 Nov 2025 to today
    (365 days, as the default maintenance hours); 2026 from 01 Jan; 2025 from the log's first night."""
    from observatory_ops.reliability.views import period_presets

    today, first = dt.date(2026, 11, 5), dt.date(2025, 7, 20)
    assert period_presets(today, first) == [
        ("last month (Oct 2026)", dt.date(2026, 10, 1), dt.date(2026, 10, 31)),
        ("last quarter (Q3 2026)", dt.date(2026, 7, 1), dt.date(2026, 9, 30)),
        ("the last 12 months", dt.date(2025, 11, 6), today),
        ("2026 so far", dt.date(2026, 1, 1), today),
        ("2025", first, dt.date(2025, 12, 31)),
    ]
    # January: last month and last quarter are the year before's; a log begun this month leaves out what ends before.
    assert [label for label, _, _ in period_presets(dt.date(2027, 1, 10), dt.date(2027, 1, 2))] == [
        "the last 12 months", "2027 so far"]
    assert period_presets(dt.date(2027, 1, 10), None)[:2] == [
        ("last month (Dec 2026)", dt.date(2026, 12, 1), dt.date(2026, 12, 31)),
        ("last quarter (Q4 2026)", dt.date(2026, 10, 1), dt.date(2026, 12, 31))]


def test_year_by_year_counts_each_calendar_year_as_a_period_of_its_own(drives, users, client):
    """A manager's review loaded three yearly periods by hand to tell whether a kind got better or worse: the page
    gives each of the last three calendar years of the log as a period (``selectors.by_year``), each cell the figures
    the period page gives for that year."""
    from observatory_ops.reliability import selectors

    today = site_today(drives)
    first_night = selectors.first_logged_night(drives)
    labels, rows = selectors.by_year(drives, today, first_night)
    assert labels and labels[-1].startswith(f"{today.year} so far")
    for label, cells in rows:
        for year_label, cell in zip(labels, cells, strict=True):
            if cell is None:
                continue
            year = int(year_label[:4])
            period = selectors.Period(max(dt.date(year, 1, 1), first_night), min(dt.date(year, 12, 31), today))
            [row] = [k for k in selectors.site_reliability(drives, today, period).kinds if k.label == label]
            assert (cell.failures, cell.operating_hours, cell.maintenance_hours) == (
                row.failures, row.operating_hours, row.hours_total)
            # The MTBF point estimate of a time-terminated record, T / n (NIST/SEMATECH e-Handbook of Statistical
            # Methods, section 8.1.7.1, from memory); none with no failure.
            assert cell.mtbf_hours == (pytest.approx(cell.operating_hours / cell.failures) if cell.failures else None)
            # Its two-sided 90 % interval, time-terminated: 2T / chi2(0.95; 2n+2) to 2T / chi2(0.05; 2n) (same
            # handbook, chapter 8, exponential confidence bounds), from scipy.stats.chi2.
            if cell.failures:
                t, n = cell.operating_hours, cell.failures
                assert cell.mtbf_lower_hours == pytest.approx(2 * t / stats.chi2.ppf(0.95, 2 * n + 2))
                assert cell.mtbf_upper_hours == pytest.approx(2 * t / stats.chi2.ppf(0.05, 2 * n))
    client.force_login(users["viewer"])
    assert 'id="year-by-year"' in client.get(f"/sites/{drives.slug}/reliability/").content.decode()
