from django.shortcuts import get_object_or_404, render

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import VIEWER
from observatory_ops.calc import reliability
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site

from . import selectors
from .forms import PeriodForm
from .plots import mtbf_svg, mtbf_words


@requires(VIEWER)
def site_reliability(request, slug):
    """The figures of the default period, or of the period chosen (``from``, ``to``); a period refused says why beside
    its form, over the default period's figures."""
    site = get_object_or_404(Site, slug=slug)
    today = site_today(site)
    form = PeriodForm(request.GET or None, first_night=selectors.first_logged_night(site), today=today)
    report = selectors.site_reliability(site, today, form.period() if form.is_valid() else None)
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
            "readings": (reliability.INFANT_MORTALITY, reliability.RANDOM, reliability.WEAR_OUT),
        },
    )
