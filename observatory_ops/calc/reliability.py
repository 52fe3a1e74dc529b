"""Reliability of repairable subsystems: MTBF with its confidence interval, and a Weibull fit of the times
between failures with right-censoring and delayed entry (left truncation).

Times are operating hours (the site's dome-open hours), not calendar time. Pure: no Django, no clock.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

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
#: Said when the likelihood-ratio test cannot tell the fitted shape from 1: with few failures, neither wear-out nor a
#: constant rate is shown (a reliability review was told "replacing on a schedule does not help" from 3 failures whose
#: shape interval ran from 0.29 to 1.5).
NOT_TOLD_FROM_RANDOM = "cannot be told from a constant failure rate with these failures"
UNDECIDED = ("they neither show wear-out nor rule it out, so no change of schedule follows from them; keep spares, "
             "inspect, and read it again with more failures")
#: The shapes the interval is searched over; an end beyond them is left open.
BETA_SEARCHED = (1e-3, 1e3)


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
    #: Whether the likelihood-ratio test against beta = 1 (exponential) rejects beta = 1.
    differs_from_random: bool
    #: The shape's profile-likelihood interval at the fit's confidence: the shapes the same likelihood-ratio test does
    #: not reject (1 lies outside it exactly when ``differs_from_random``). None at an end the data leave open.
    beta_low: float | None = None
    beta_high: float | None = None

    @property
    def reading(self) -> str:
        return beta_reading(self.beta, self.differs_from_random)

    @property
    def beta_interval_text(self) -> str:
        """E.g. "0.29 to 1.5"; an end the data leave open is said so."""
        def two(value: float) -> str:  # two significant figures, a trailing 0 kept ("8.0", not "8")
            return f"{value:.0f}" if value >= 99.5 else f"{value:#.2g}".rstrip(".")

        low = two(self.beta_low) if self.beta_low is not None else f"below {BETA_SEARCHED[0]:g}"
        high = two(self.beta_high) if self.beta_high is not None else f"above {BETA_SEARCHED[1]:g}"
        return f"{low} to {high}"

    @property
    def mean_hours(self) -> float:
        """The mean time between failures the fit gives: eta x Gamma(1 + 1/beta) (the Weibull mean)."""
        return float(self.eta_hours * special.gamma(1.0 + 1.0 / self.beta))


def _exposure(beta: float, times: np.ndarray, log_ratios: np.ndarray) -> float:
    """A(beta) = sum(t^beta - e^beta) over the intervals, each term as -t^beta expm1(beta ln(e/t)) (``log_ratios``
    ln(e/t), minus infinity for e = 0), so that an interval observed for a short time past a long age keeps its
    digits (a plain difference would cancel them) and a tiny e neither overflows nor underflows into 0 x inf."""
    return float(-np.sum(times**beta * np.expm1(beta * log_ratios)))


#: A fitted scale below this fraction of the longest time recorded is no usable number of hours (a shape near 0 puts
#: it at 1e-148 h, which a page would print as "0 h"): such a fit is refused.
_SMALLEST_SCALE = 1e-6


def _profile(beta: float, times: np.ndarray, log_ratios: np.ndarray, failed: np.ndarray) -> tuple[float, float]:
    """(profile log-likelihood, eta) at ``beta``; ``times`` scaled so their largest is 1 (no overflow)."""
    r = failed.sum()
    total = _exposure(beta, times, log_ratios)
    eta = (total / r) ** (1 / beta)
    log_likelihood = r * np.log(beta) - r * np.log(total / r) + (beta - 1) * np.log(times[failed]).sum() - r
    return float(log_likelihood), float(eta)


def _hours(values: ArrayLike | None, like: np.ndarray, what: str) -> np.ndarray:
    """``values`` as a flat float array the length of ``like`` (zeros when None), or a ValueError naming ``what``."""
    if values is None:
        return np.zeros(len(like))
    hours = np.asarray(values, dtype=float).ravel()
    if len(hours) != len(like):
        raise ValueError(f"{what}: {len(hours)} ages at entry given for {len(like)} intervals")
    return hours


def weibull_fit(
    failure_hours: ArrayLike,
    censored_hours: ArrayLike = (),
    confidence: float = CONFIDENCE,
    *,
    failure_entry_hours: ArrayLike | None = None,
    censored_entry_hours: ArrayLike | None = None,
) -> WeibullFit:
    """Maximum-likelihood Weibull fit to times between failures, with right-censored times and delayed entry
    (left truncation).

    Method
    ------
    An interval that had already run e operating hours when observation of it began (its age at entry; 0 for one
    observed from its start) is seen only because it lasted past e, so its contribution is conditioned on that.
    The likelihood of failures at ages t_i and censored ages c_j, entered at e_i and e_j, is

        prod f(t_i) / S(e_i) * prod S(c_j) / S(e_j),   S(t) = exp(-(t/eta)^beta)

    (Lawless 2003, Statistical Models and Methods for Lifetime Data, 2nd ed., chapter 2, left truncation;
    Meeker and Escobar 1998, Statistical Methods for Reliability Data, chapter 11, truncated data; chapter numbers
    from memory). Its log is

        l = r ln beta - r beta ln eta + (beta - 1) sum(ln t_i) - A(beta) / eta^beta,   A(beta) = sum t^beta - sum e^beta

    (r failures; the sums of A over every interval, failed or censored). Setting dl/d eta = 0 gives
    eta^beta = A(beta) / r, and dl/d beta = 0 on that profile gives the shape's equation (derived here)

        (sum t^beta ln t - sum e^beta ln e) / A(beta) - 1/beta - mean(ln t_i over failures) = 0,

    with e^beta ln e = 0 for e = 0. With every e = 0 it is Cohen's (1965, Technometrics 7, 579) equation for
    censored data (NIST/SEMATECH e-Handbook, chapter 8, Weibull maximum likelihood). The root is unique: since
    t^beta - e^beta = beta * integral from ln e to ln t of exp(beta u) du, A(beta) = beta M(beta) with
    M(beta) = integral of w(u) exp(beta u) du (w(u) the number of intervals under observation at log-age u), and
    the left side is d ln M / d beta - mean(ln t_i), the mean of u under weights w(u) exp(beta u) less a constant:
    strictly increasing in beta (its derivative is that weighting's variance), so the profile log-likelihood
    -r ln M(beta) + beta sum(ln t_i) + const is strictly concave. As beta grows the left side tends to
    ln(longest time) - mean(ln t_i), positive unless every failure came at the longest time; as beta falls to 0 it
    tends to minus infinity when some interval entered at 0, but to a finite limit when every one entered late, which
    can be positive: the likelihood then has no maximum at a positive shape, and the fit says so. A bracketing root
    finder (Brent) then gives the maximum. The shape is compared with beta = 1 by the likelihood-ratio test,
    2 (l(beta) - l(1)) against chi2(confidence; 1), both on the same truncated likelihood (at beta = 1 the
    exponential with eta = sum(t - e) / r) (Meeker and Escobar 1998, likelihood-based inference).

    Parameters
    ----------
    failure_hours : the age (operating hours since the interval began) at each failure, each > 0.
    censored_hours : the ages of intervals still running (or ended without failure). One observed for no hours
        (its age no more than its age at entry, e.g. 0) carries no information and is left out.
    failure_entry_hours, censored_entry_hours : each interval's age when its observation began, 0 or more and less
        than its failure age (no more than its censored age); None: every one observed from 0.
    """
    failures = np.asarray(failure_hours, dtype=float).ravel()
    censored = np.asarray(censored_hours, dtype=float).ravel()
    failure_entries = _hours(failure_entry_hours, failures, "failures")
    censored_entries = _hours(censored_entry_hours, censored, "censored times")
    if len(failures) < MIN_FAILURES_FOR_FIT:
        raise ValueError(f"a Weibull fit needs at least {MIN_FAILURES_FOR_FIT} failures, got {len(failures)}")
    if not np.all(np.isfinite(failures)) or np.any(failures <= 0):
        raise ValueError("every time to failure must be a positive number of operating hours")
    if not np.all(np.isfinite(censored)) or np.any(censored < 0):
        raise ValueError("every censored time must be 0 or more operating hours")
    for entries, what in ((failure_entries, "failure"), (censored_entries, "censored time")):
        bad = np.flatnonzero(~np.isfinite(entries) | (entries < 0))
        if len(bad):
            i = int(bad[0])
            raise ValueError(f"{what} {i + 1}: its age at entry must be 0 or more operating hours, got {entries[i]}")
    late = np.flatnonzero(failure_entries >= failures)
    if len(late):
        i = int(late[0])
        raise ValueError(f"failure {i + 1}: at {failures[i]:g} h, not after its age at entry, {failure_entries[i]:g} h")
    late = np.flatnonzero(censored_entries > censored)
    if len(late):
        i = int(late[0])
        raise ValueError(
            f"censored time {i + 1}: {censored[i]:g} h, less than its age at entry, {censored_entries[i]:g} h"
        )
    observed = censored > censored_entries
    censored, censored_entries = censored[observed], censored_entries[observed]
    times = np.concatenate([failures, censored])
    entries = np.concatenate([failure_entries, censored_entries])
    failed = np.concatenate([np.ones(len(failures), bool), np.zeros(len(censored), bool)])
    scale = times.max()
    times, entries = times / scale, entries / scale
    log_times = np.log(times)
    entered = entries > 0
    # ln e where e > 0; e^beta ln e is 0 for e = 0, which a 0 here gives (0^beta x 0).
    log_entries = np.log(entries, where=entered, out=np.zeros_like(entries))
    log_ratios = np.where(entered, log_entries - log_times, -np.inf)
    mean_log_failure = log_times[failed].mean()

    def slope(beta: float) -> float:
        numerator = np.sum(times**beta * log_times) - np.sum(entries**beta * log_entries)
        return float(numerator / _exposure(beta, times, log_ratios) - 1 / beta - mean_log_failure)

    low, high = 1e-3, 1.0
    if slope(low) >= 0:
        raise ValueError(
            "the failures do not determine a Weibull shape: they come so soon after the ages at which their "
            "intervals were first observed that the likelihood is greatest at a shape near 0 (below 0.001)"
        )
    while slope(high) < 0:
        high *= 2
        if high > 1e4:
            raise ValueError(
                "the failures do not determine a Weibull shape: every failure came at the longest time recorded"
            )
    beta = optimize.brentq(slope, low, high, xtol=1e-12, rtol=1e-12)
    log_likelihood, eta = _profile(beta, times, log_ratios, failed)
    if not (np.isfinite(eta) and eta > _SMALLEST_SCALE):
        raise ValueError(
            f"the failures do not determine a Weibull fit: the shape comes out at {beta:.2g}, so small that the "
            "scale is no usable number of hours"
        )
    at_random, _ = _profile(1.0, times, log_ratios, failed)
    # The profile-likelihood interval: the shapes b with 2 (l(beta) - l_p(b)) at most the test's critical value
    # (Meeker and Escobar 1998, Statistical Methods for Reliability Data, section 8.3; from memory).
    critical = stats.chi2.ppf(confidence, 1)

    def excess(b: float) -> float:
        return 2 * (log_likelihood - _profile(b, times, log_ratios, failed)[0]) - critical

    searched_low, searched_high = BETA_SEARCHED
    with np.errstate(over="ignore"):  # the scale at a shape near 0 overflows; the likelihood does not use it
        beta_low = optimize.brentq(excess, searched_low, beta, xtol=1e-10) if excess(searched_low) > 0 else None
        beta_high = optimize.brentq(excess, beta, searched_high, xtol=1e-10) if excess(searched_high) > 0 else None
    # The scaling of times shifts every log-likelihood by the same r * ln(scale) (the S(e) terms do not move); undo
    # it for the caller.
    shift = len(failures) * np.log(scale)
    return WeibullFit(
        beta=float(beta),
        eta_hours=float(eta * scale),
        failures=len(failures),
        censored=len(censored),
        log_likelihood=float(log_likelihood - shift),
        differs_from_random=bool(2 * (log_likelihood - at_random) > critical),
        beta_low=None if beta_low is None else float(beta_low),
        beta_high=None if beta_high is None else float(beta_high),
    )


def beta_reading(beta: float, differs_from_random: bool = True) -> str:
    """A plain reading of the Weibull shape for the page.

    The standard interpretation (NIST/SEMATECH e-Handbook, chapter 8, the Weibull distribution and the
    "bathtub" curve): beta < 1 a failure rate falling with age (early failures), beta = 1 a constant rate
    (random failures), beta > 1 a rate rising with age (wear-out). A shape that the likelihood-ratio test
    cannot tell from 1 is read as neither: ``UNDECIDED``.
    """
    if not differs_from_random:
        return f"{NOT_TOLD_FROM_RANDOM}: {UNDECIDED}"
    return INFANT_MORTALITY if beta < 1 else WEAR_OUT


class UnitRecord(NamedTuple):
    """One unit's record as the fit takes it (``times_between_failures``)."""

    between: np.ndarray  # the age at each failure, in order
    running: float  # the age of the interval still running (right-censored)
    entry: float  # the age of the first interval (the first failure's, or the running one's) when counting began


def times_between_failures(
    failures_at_hours: ArrayLike, in_service_hours: float, age_at_start: float = 0.0
) -> UnitRecord:
    """One unit's record as times between failures and the running (censored) interval.

    Method
    ------
    Each repair is taken to return the unit to as good as new (a renewal process), so the first interval
    runs from the start of the record to the first failure and each next one from failure to failure; the
    interval since the last failure has not ended and is right-censored at ``in_service_hours``
    (NIST/SEMATECH e-Handbook, chapter 8: repairable systems under the renewal assumption). A unit that had
    already run ``age_at_start`` hours since it was last new when the record starts enters observation at that
    age: its first interval's age at its end counts those hours, and ``entry`` says so, for the fit's delayed
    entry (``weibull_fit``); every later interval starts from new, at 0.

    Parameters
    ----------
    failures_at_hours : the unit's operating hours (since the record starts) at each failure.
    in_service_hours : its operating hours in the record up to now (or to its retirement).
    age_at_start : its operating hours since it was last new (since its last failure, or since it entered
        service) when the record starts, 0 or more.
    """
    at = np.sort(np.asarray(failures_at_hours, dtype=float).ravel())
    if np.any(at < 0) or np.any(at > in_service_hours):
        raise ValueError(f"failures must lie within the unit's {in_service_hours:g} operating hours in service")
    if not np.isfinite(age_at_start) or age_at_start < 0:
        raise ValueError(f"the unit's age at the start of the record must be 0 or more operating hours, got "
                         f"{age_at_start}")
    between = np.diff(np.concatenate([[-age_at_start], at]))
    running = float(in_service_hours - (at[-1] if len(at) else -age_at_start))
    return UnitRecord(between, running, float(age_at_start))
