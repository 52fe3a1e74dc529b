"""The one place that keeps astropy offline and usable for dates years ahead.

Planning runs years into the future, past the end of the bundled Earth-orientation (IERS) table, and
the machines it runs on have no internet. ``configure()`` tells astropy never to download and to warn,
not fail, when it must extrapolate Earth orientation (the error is well under a second of time, far
below what night lengths need). It is called by :mod:`observatory_ops.calc.nights` on import and by the
registry app at start-up, before any time or coordinate work.
"""
import warnings


def configure() -> None:
    from astropy.utils import data, iers

    data.conf.allow_internet = False
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "ignore"
    # ERFA warns about "dubious year" for dates past its leap-second table; harmless for our use.
    warnings.filterwarnings("ignore", message=".*dubious year.*")
    warnings.filterwarnings("ignore", category=UserWarning, module="erfa")
    # Past the bundled table astropy falls back to mean polar motion (arcsecond level): expected, not news.
    warnings.filterwarnings("ignore", message=".*polar motions for times after IERS data is valid.*")
