import datetime as dt

from django.shortcuts import get_object_or_404, render

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import VIEWER
from observatory_ops.calc import reliability
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site, name_key

from . import selectors
from .forms import PeriodForm
from .plots import mtbf_svg, mtbf_words


@requires(VIEWER)
def site_reliability(request, slug):
    """The figures of the default period, or of the period chosen (``from``, ``to``); a period refused says why beside
    its form, over the default period's figures."""
    site = get_object_or_404(Site, slug=slug)
    today = site_today(site)
    first_night = selectors.first_logged_night(site)
    telescopes = sorted(site.telescopes.all(), key=lambda t: name_key(t.name))
    form = PeriodForm(request.GET or None, first_night=first_night, today=today, telescopes=telescopes)
    period = form.period() if form.is_valid() else None
    telescope = form.telescope()
    report = selectors.site_reliability(site, today, period, telescope)
    years, year_rows = selectors.by_year(site, today, first_night, telescope=telescope)
    return render(
        request,
        "reliability/site_reliability.html",
        {
            "site": site,
            "form": form,
            "report": report,
            "chart": mtbf_svg(report.kinds, described_by="mtbf-words"),
            "chart_words": mtbf_words(report.kinds, report.period_words),
            "confidence_pct": round(reliability.CONFIDENCE * 100),
            # With no failure only the lower bound exists: one-sided, at the confidence of the two-sided one's lower
            # end (90 % two-sided leaves 5 % below, so the bound is a one-sided 95 %).
            "test_level_pct": round((1 - reliability.CONFIDENCE) * 100),
            "one_sided_pct": round((1 + reliability.CONFIDENCE) / 2 * 100),
            "hours_columns": selectors.HOURS_COLUMN_LABELS,
            "min_failures": reliability.MIN_FAILURES_FOR_FIT,
            "readings": (reliability.INFANT_MORTALITY, reliability.RANDOM, reliability.WEAR_OUT, reliability.UNDECIDED),
            "presets": period_presets(today, first_night),
            "years": years,
            "year_rows": year_rows,
        },
    )


def period_presets(today: dt.date, first_night: dt.date | None) -> list[tuple[str, dt.date, dt.date]]:
    """The periods a monthly or yearly report asks for, as links beside the period form (a manager's review typed
    every month and quarter's dates by hand): (label, first day, last day), each cut to the log (from its first night)
    and to today; none that ends before the log begins."""
    month_start = today.replace(day=1)
    last_month_end = month_start - dt.timedelta(days=1)
    quarter_start = dt.date(today.year, 3 * ((today.month - 1) // 3) + 1, 1)
    last_quarter_end = quarter_start - dt.timedelta(days=1)
    last_quarter_start = dt.date(last_quarter_end.year, 3 * ((last_quarter_end.month - 1) // 3) + 1, 1)
    year_ago = today - dt.timedelta(days=selectors.HOURS_WINDOW_DAYS - 1)  # the default maintenance hours' 12 months
    wanted = [
        (f"last month ({last_month_end:%b %Y})", last_month_end.replace(day=1), last_month_end),
        (f"last quarter (Q{(last_quarter_start.month - 1) // 3 + 1} {last_quarter_start.year})", last_quarter_start,
         last_quarter_end),
        ("the last 12 months", year_ago, today),
        (f"{today.year} so far", dt.date(today.year, 1, 1), today),
        (f"{today.year - 1}", dt.date(today.year - 1, 1, 1), dt.date(today.year - 1, 12, 31)),
    ]
    return [(label, max(first, first_night) if first_night else first, last) for label, first, last in wanted
            if first_night is None or last >= first_night]
