"""Reliability of repairable subsystems: MTBF with its confidence interval, and a Weibull fit of the times
between failures with right-censoring.

Times are operating hours (the site's dome-open hours), not calendar time. Pure: no Django, no clock.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from scipy import optimize, special, stats

#: Two-sided confidence of the MTBF interval and of the Weibull shape test.
CONFIDENCE = 0.90
#: Fewest failures a Weibull fit is made from: with fewer, two parameters are not determined usefully.
MIN_FAILURES_FOR_FIT = 3

# What the shape says for maintenance: common practice, no published source (the shape's meaning, a failure rate
# falling, constant or rising with age, is the standard one: NIST/SEMATECH e-Handbook, chapter 8).
INFANT_MORTALITY = (
    "early failures (infant mortality): replacing on a schedule does not help; look at installation and burn-in"
)
RANDOM = "no sign of wear-out: replacing on a schedule does not help; keep spares and inspect"
WEAR_OUT = "wear-out: service or replacement well before η (by which about 63 % have failed) helps"
#: Said before ``RANDOM`` when the likelihood-ratio test cannot tell the fitted shape from 1.
NOT_TOLD_FROM_RANDOM = "cannot be told from a constant failure rate with these failures"


@dataclass(frozen=True)
class MtbfEstimate:
    """MTBF point estimate T/n with its two-sided interval (``upper`` is None when n = 0)."""

    operating_hours: float
    failures: int
    mtbf_hours: float | None
    lower_hours: float
    upper_hours: float | None
    confidence: float


def mtbf(operating_hours: float, failures: int, confidence: float = CONFIDENCE) -> MtbfEstimate:
    """Mean time between failures and its two-sided confidence interval for a time-terminated record.

    Method
    ------
    Constant failure rate (exponential times between failures, a homogeneous Poisson process). The point
    estimate is T / n. For a record that stops at a chosen time rather than at a failure (time-terminated,
    Type I), the two-sided 100(1 - a) % bounds are

        lower = 2T / chi2(1 - a/2; 2n + 2),   upper = 2T / chi2(a/2; 2n),

    with chi2(p; d) the p-quantile of chi-square with d degrees of freedom. With no failure there is no
    point estimate and no upper bound: only the lower bound, which is then a one-sided 100(1 - a/2) %
    bound. Source: NIST/SEMATECH e-Handbook of Statistical Methods, chapter 8 (Assessing Product
    Reliability), exponential (HPP) confidence bounds for time-censored tests.

    Parameters
    ----------
    operating_hours : T, the operating hours of all units together, >= 0.
    failures : n, the failures in those hours, >= 0.
    confidence : 1 - a, e.g. 0.90.
    """
    if operating_hours < 0 or not np.isfinite(operating_hours):
        raise ValueError(f"operating hours must be 0 or more, got {operating_hours}")
    if failures < 0 or int(failures) != failures:
        raise ValueError(f"the number of failures must be a whole number, 0 or more, got {failures}")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence must lie between 0 and 1, got {confidence}")
    alpha = 1.0 - confidence
    n = int(failures)
    lower = 2 * operating_hours / stats.chi2.ppf(1 - alpha / 2, 2 * n + 2)
    if n == 0:
        return MtbfEstimate(operating_hours, 0, None, float(lower), None, confidence)
    upper = 2 * operating_hours / stats.chi2.ppf(alpha / 2, 2 * n)
    return MtbfEstimate(operating_hours, n, operating_hours / n, float(lower), float(upper), confidence)


@dataclass(frozen=True)
class WeibullFit:
    """Two-parameter Weibull (shape beta, scale eta in operating hours) fitted by maximum likelihood."""

    beta: float
    eta_hours: float
    failures: int
    censored: int
    log_likelihood: float
    #: Likelihood-ratio statistic against beta = 1 (exponential) and whether beta = 1 is rejected.
    lr_against_random: float
    differs_from_random: bool

    @property
    def reading(self) -> str:
        return beta_reading(self.beta, self.differs_from_random)

    @property
    def mean_hours(self) -> float:
        """The mean time between failures the fit gives: eta x Gamma(1 + 1/beta) (the Weibull mean)."""
        return float(self.eta_hours * special.gamma(1.0 + 1.0 / self.beta))


def _profile(beta: float, times: np.ndarray, failed: np.ndarray) -> tuple[float, float]:
    """(profile log-likelihood, eta) at ``beta``; ``times`` scaled so their largest is 1 (no overflow)."""
    r = failed.sum()
    total = np.sum(times**beta)
    eta = (total / r) ** (1 / beta)
    log_likelihood = r * np.log(beta) - r * np.log(total / r) + (beta - 1) * np.log(times[failed]).sum() - r
    return float(log_likelihood), float(eta)


def weibull_fit(failure_hours: ArrayLike, censored_hours: ArrayLike = (), confidence: float = CONFIDENCE) -> WeibullFit:
    """Maximum-likelihood Weibull fit to times between failures, with right-censored times.

    Method
    ------
    Likelihood of failures t_i and censored times c_j: prod f(t_i) * prod S(c_j), with
    S(t) = exp(-(t/eta)^beta). Setting d/d eta = 0 gives eta^beta = sum(all t^beta) / r (r failures), and
    the shape solves the profile equation

        sum(t^beta ln t) / sum(t^beta) - 1/beta - mean(ln t_i over failures) = 0

    (sums over failures and censored times), which is increasing in beta, so a bracketing root finder
    (Brent) gives the unique maximum. Cohen (1965), Technometrics 7, 579; NIST/SEMATECH e-Handbook,
    chapter 8, Weibull maximum likelihood with censored data. The shape is compared with beta = 1 by the
    likelihood-ratio test, 2 (l(beta) - l(1)) against chi2(confidence; 1) (Meeker and Escobar 1998,
    Statistical Methods for Reliability Data, likelihood-based inference).

    Parameters
    ----------
    failure_hours : operating hours from the start of each interval to its failure, each > 0.
    censored_hours : operating hours of intervals still running (or ended without failure). A censored
        time of 0 carries no information and is left out.
    """
    failures = np.asarray(failure_hours, dtype=float).ravel()
    censored = np.asarray(censored_hours, dtype=float).ravel()
    if len(failures) < MIN_FAILURES_FOR_FIT:
        raise ValueError(f"a Weibull fit needs at least {MIN_FAILURES_FOR_FIT} failures, got {len(failures)}")
    if not np.all(np.isfinite(failures)) or np.any(failures <= 0):
        raise ValueError("every time to failure must be a positive number of operating hours")
    if not np.all(np.isfinite(censored)) or np.any(censored < 0):
        raise ValueError("every censored time must be 0 or more operating hours")
    censored = censored[censored > 0]
    times = np.concatenate([failures, censored])
    failed = np.concatenate([np.ones(len(failures), bool), np.zeros(len(censored), bool)])
    scale = times.max()
    times = times / scale
    mean_log_failure = np.log(times[failed]).mean()

    def slope(beta: float) -> float:
        weights = times**beta
        return float(np.sum(weights * np.log(times)) / weights.sum() - 1 / beta - mean_log_failure)

    low, high = 1e-3, 1.0
    while slope(high) < 0:
        high *= 2
        if high > 1e4:
            raise ValueError(
                "the failures do not determine a Weibull shape: every failure came at the longest time recorded"
            )
    beta = optimize.brentq(slope, low, high, xtol=1e-12, rtol=1e-12)
    log_likelihood, eta = _profile(beta, times, failed)
    at_random, _ = _profile(1.0, times, failed)
    # The scaling of times shifts every log-likelihood by the same r * ln(scale); undo it for the caller.
    shift = len(failures) * np.log(scale)
    lr = max(2 * (log_likelihood - at_random), 0.0)
    return WeibullFit(
        beta=float(beta),
        eta_hours=float(eta * scale),
        failures=len(failures),
        censored=len(censored),
        log_likelihood=float(log_likelihood - shift),
        lr_against_random=lr,
        differs_from_random=bool(lr > stats.chi2.ppf(confidence, 1)),
    )


def beta_reading(beta: float, differs_from_random: bool = True) -> str:
    """A plain reading of the Weibull shape for the page.

    The standard interpretation (NIST/SEMATECH e-Handbook, chapter 8, the Weibull distribution and the
    "bathtub" curve): beta < 1 a failure rate falling with age (early failures), beta = 1 a constant rate
    (random failures), beta > 1 a rate rising with age (wear-out). A shape that the likelihood-ratio test
    cannot tell from 1 is read as random.
    """
    if not differs_from_random:
        return f"{NOT_TOLD_FROM_RANDOM}: {RANDOM}"
    return INFANT_MORTALITY if beta < 1 else WEAR_OUT


def times_between_failures(failures_at_hours: ArrayLike, in_service_hours: float) -> tuple[np.ndarray, float]:
    """One unit's record as times between failures and the running (censored) interval.

    Method
    ------
    Each repair is taken to return the unit to as good as new (a renewal process), so the first interval
    runs from the start of service to the first failure and each next one from failure to failure; the
    interval since the last failure has not ended and is right-censored at ``in_service_hours``
    (NIST/SEMATECH e-Handbook, chapter 8: repairable systems under the renewal assumption).

    Parameters
    ----------
    failures_at_hours : the unit's operating hours (since it entered service) at each failure.
    in_service_hours : its operating hours in service up to now (or to its retirement).

    Returns
    -------
    (times between failures, in order; the censored running interval)
    """
    at = np.sort(np.asarray(failures_at_hours, dtype=float).ravel())
    if np.any(at < 0) or np.any(at > in_service_hours):
        raise ValueError(f"failures must lie within the unit's {in_service_hours:g} operating hours in service")
    between = np.diff(np.concatenate([[0.0], at]))
    return between, float(in_service_hours - (at[-1] if len(at) else 0.0))
