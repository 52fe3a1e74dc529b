from django.shortcuts import get_object_or_404, render

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import VIEWER
from observatory_ops.calc import reliability
from observatory_ops.registry.models import Site

from . import selectors
from .plots import mtbf_svg


@requires(VIEWER)
def site_reliability(request, slug):
    site = get_object_or_404(Site, slug=slug)
    report = selectors.site_reliability(site)
    return render(
        request,
        "reliability/site_reliability.html",
        {
            "site": site,
            "report": report,
            "chart": mtbf_svg(report.kinds),
            "confidence_pct": round(reliability.CONFIDENCE * 100),
            "min_failures": reliability.MIN_FAILURES_FOR_FIT,
            "readings": (reliability.INFANT_MORTALITY, reliability.RANDOM, reliability.WEAR_OUT),
        },
    )
