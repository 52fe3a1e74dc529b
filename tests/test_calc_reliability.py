"""Reliability: MTBF with its chi-square interval and the censored Weibull fit (no database)."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lifelines import WeibullFitter
from scipy import stats

from observatory_ops.calc.reliability import (
    INFANT_MORTALITY,
    NOT_TOLD_FROM_RANDOM,
    UNDECIDED,
    WEAR_OUT,
    beta_reading,
    mtbf,
    times_between_failures,
    weibull_fit,
)


def test_mtbf_bounds_match_the_chi_square_table_for_two_failures_in_1000_hours():
    # Time-terminated, two-sided 90 %: lower 2T/chi2(0.95; 2n+2), upper 2T/chi2(0.05; 2n) (NIST/SEMATECH
    # e-Handbook, chapter 8, exponential confidence bounds). Chi-square critical values from the standard
    # table (NIST/SEMATECH e-Handbook 1.3.6.7.4): 12.592 for 6 degrees of freedom at upper-tail 0.05,
    # 0.711 for 4 degrees of freedom at lower-tail 0.05.
    estimate = mtbf(1000.0, 2)
    assert estimate.mtbf_hours == 500.0
    assert estimate.lower_hours == pytest.approx(2000 / 12.592, rel=1e-4)
    assert estimate.upper_hours == pytest.approx(2000 / 0.711, rel=1e-3)


def test_mtbf_bounds_equal_a_hand_computation_with_scipy_chi2():
    # Hand computation with scipy.stats.chi2 quantiles, 7 failures in 5,400 hours.
    estimate = mtbf(5400.0, 7)
    assert estimate.lower_hours == pytest.approx(2 * 5400 / stats.chi2.ppf(0.95, 16))
    assert estimate.upper_hours == pytest.approx(2 * 5400 / stats.chi2.ppf(0.05, 14))


def test_no_failure_gives_only_a_lower_bound():
    # n = 0: 2T/chi2(0.95; 2) = 2T/5.991 (the same table), i.e. T / ln 20; no estimate, no upper bound.
    estimate = mtbf(3000.0, 0)
    assert estimate.mtbf_hours is None and estimate.upper_hours is None
    assert estimate.lower_hours == pytest.approx(6000 / 5.991, rel=1e-4)
    assert estimate.lower_hours == pytest.approx(3000 / np.log(20))


@pytest.mark.parametrize("hours, failures", [(-1.0, 2), (100.0, -1), (100.0, 1.5)])
def test_mtbf_refuses_negative_hours_and_broken_counts(hours, failures):
    with pytest.raises(ValueError, match="operating hours|number of failures"):
        mtbf(hours, failures)


@settings(max_examples=80, deadline=None)
@given(hours=st.floats(1.0, 1e6), failures=st.integers(1, 500))
def test_the_interval_brackets_the_point_estimate_and_narrows_with_more_failures(hours, failures):
    estimate = mtbf(hours, failures)
    assert estimate.lower_hours < estimate.mtbf_hours < estimate.upper_hours
    # Same MTBF, ten times the record: a relatively narrower interval.
    longer = mtbf(hours * 10, failures * 10)
    assert longer.upper_hours / longer.lower_hours < estimate.upper_hours / estimate.lower_hours


# Invented times between failures (operating hours) and running intervals.
FAILURES = [410.0, 655.0, 980.0, 1210.0, 1302.0, 1530.0, 1775.0, 2210.0]
CENSORED = [300.0, 1400.0, 2500.0, 90.0]


def test_weibull_fit_agrees_with_lifelines_on_the_same_censored_data():
    # Independent reference: lifelines.WeibullFitter (maximum likelihood by gradient optimisation; its
    # rho_ is the shape, lambda_ the scale). Agreement within 1e-5 relative, far inside the fit's own
    # uncertainty.
    fit = weibull_fit(FAILURES, CENSORED)
    reference = WeibullFitter().fit(FAILURES + CENSORED, event_observed=[1] * len(FAILURES) + [0] * len(CENSORED))
    assert fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert fit.log_likelihood == pytest.approx(reference.log_likelihood_, rel=1e-7)
    assert (fit.failures, fit.censored) == (8, 4)


def test_weibull_fit_agrees_with_scipy_censored_fit():
    # Second reference: scipy.stats.weibull_min.fit on scipy.stats.CensoredData, location fixed at 0.
    fit = weibull_fit(FAILURES, CENSORED)
    beta, _, eta = stats.weibull_min.fit(stats.CensoredData(uncensored=FAILURES, right=CENSORED), floc=0)
    assert fit.beta == pytest.approx(beta, rel=1e-4)
    assert fit.eta_hours == pytest.approx(eta, rel=1e-4)


def test_the_random_failure_test_uses_the_exponential_likelihood_at_beta_one():
    # At beta = 1 the Weibull is the exponential with eta = T/r (T all hours, r failures); its censored
    # log-likelihood from scipy.stats.expon gives the likelihood-ratio statistic by hand.
    fit = weibull_fit(FAILURES, CENSORED)
    scale = (sum(FAILURES) + sum(CENSORED)) / len(FAILURES)
    at_one = stats.expon.logpdf(FAILURES, scale=scale).sum() + stats.expon.logsf(CENSORED, scale=scale).sum()
    statistic = 2 * (fit.log_likelihood - at_one)
    assert fit.differs_from_random == (statistic > stats.chi2.ppf(0.90, 1))
    # The fit decides on that same statistic (to 1e-6 relative): a confidence whose chi2 quantile lies just below it
    # rejects beta = 1, one just above does not.
    for factor, differs in ((1 - 1e-6, True), (1 + 1e-6, False)):
        confidence = stats.chi2.cdf(factor * statistic, 1)
        assert weibull_fit(FAILURES, CENSORED, confidence).differs_from_random is differs


def test_weibull_fit_recovers_a_known_shape_from_a_large_simulated_sample():
    times = stats.weibull_min.rvs(2.5, scale=800.0, size=4000, random_state=np.random.default_rng(7))
    fit = weibull_fit(times)
    assert fit.beta == pytest.approx(2.5, rel=0.05)
    assert fit.eta_hours == pytest.approx(800.0, rel=0.03)
    assert fit.reading == WEAR_OUT


def test_weibull_fit_refuses_fewer_than_three_failures_and_non_positive_times():
    with pytest.raises(ValueError, match="at least 3 failures, got 2"):
        weibull_fit([100.0, 200.0], [50.0])
    with pytest.raises(ValueError, match="positive number of operating hours"):
        weibull_fit([100.0, 0.0, 200.0])


def test_a_censored_time_of_zero_carries_no_information():
    assert weibull_fit(FAILURES, CENSORED + [0.0]) == weibull_fit(FAILURES, CENSORED)


@settings(max_examples=40, deadline=None)
@given(
    failures=st.lists(st.floats(1.0, 1e5), min_size=3, max_size=30).filter(lambda x: max(x) > min(x) * 1.001),
    stretch=st.floats(0.01, 100.0),
)
def test_the_fit_scales_with_the_unit_of_time(failures, stretch):
    # Hours or minutes: the shape does not change, the scale changes by the same factor.
    fit = weibull_fit(failures)
    stretched = weibull_fit([t * stretch for t in failures])
    assert stretched.beta == pytest.approx(fit.beta, rel=1e-6)
    assert stretched.eta_hours == pytest.approx(fit.eta_hours * stretch, rel=1e-6)


def test_the_reading_of_beta_follows_the_standard_interpretation():
    # NIST/SEMATECH e-Handbook, chapter 8 (bathtub curve): < 1 early failures, 1 random, > 1 wear-out.
    assert beta_reading(0.6) == INFANT_MORTALITY
    assert beta_reading(2.4) == WEAR_OUT
    assert beta_reading(1.3, differs_from_random=False) == f"{NOT_TOLD_FROM_RANDOM}: {UNDECIDED}"


def test_a_units_record_becomes_times_between_failures_and_a_running_interval():
    # Failures at 120, 400 and 1000 hours of a unit with 1,300 hours in service (hand computation).
    between, running, entry = times_between_failures([400.0, 120.0, 1000.0], 1300.0)
    assert list(between) == [120.0, 280.0, 600.0]
    assert running == 300.0 and entry == 0.0
    between, running, entry = times_between_failures([], 800.0)
    assert len(between) == 0 and running == 800.0
    with pytest.raises(ValueError, match="within the unit's 800 operating hours"):
        times_between_failures([900.0], 800.0)


def test_a_unit_already_aged_when_its_record_starts_enters_its_first_interval_at_that_age():
    """Hand computation: a unit 250 h past its last renewal when the record starts, failing at 120 and 400 h of the
    record with 1,300 h in it: its first interval ends at age 370 h, entered at 250 h; the next is 280 h from new,
    and the running one 900 h from new. With no failure, the running interval is entered at 250 h, at age 1,050 h."""
    between, running, entry = times_between_failures([400.0, 120.0], 1300.0, age_at_start=250.0)
    assert (list(between), running, entry) == ([370.0, 280.0], 900.0, 250.0)
    assert tuple(times_between_failures([], 800.0, age_at_start=250.0))[1:] == (1050.0, 250.0)
    with pytest.raises(ValueError, match="age at the start of the record must be 0 or more"):
        times_between_failures([], 800.0, age_at_start=-1.0)


def test_the_fits_mean_is_the_weibull_mean_scipy_gives():
    """eta x Gamma(1 + 1/beta), against scipy.stats.weibull_min's own mean (an independent implementation)."""
    fit = weibull_fit([310.0, 540.0, 720.0, 905.0, 1220.0], [400.0])
    expected = stats.weibull_min(fit.beta, scale=fit.eta_hours).mean()
    assert fit.mean_hours == pytest.approx(expected, rel=1e-12)


def _profile_by_scipy(beta: float, failures, censored) -> float:
    """The censored Weibull log-likelihood at shape ``beta``, maximised over the scale by scipy's scalar optimiser on
    scipy.stats.weibull_min's logpdf and logsf: independent of calc.reliability's closed form for the scale."""
    from scipy import optimize

    def minus(log_eta: float) -> float:
        eta = np.exp(log_eta)
        return -(stats.weibull_min.logpdf(failures, beta, scale=eta).sum()
                 + stats.weibull_min.logsf(censored, beta, scale=eta).sum())

    best = optimize.minimize_scalar(minus, bounds=(np.log(10.0), np.log(1e6)), method="bounded",
                                    options={"xatol": 1e-10})
    return -best.fun


@pytest.mark.parametrize("failures, censored", [
    (FAILURES, CENSORED),
    ([380.0, 2100.0, 5200.0], [900.0]),  # three failures, widely spread: an interval that holds 1
])
def test_the_shapes_interval_is_where_the_profile_likelihood_ratio_reaches_the_tests_critical_value(failures,
                                                                                                      censored):
    """Profile-likelihood interval (Meeker and Escobar 1998, section 8.3, from memory): at each end, 2 (l_max -
    l_p(beta)) equals chi2(0.90; 1) = 2.7055 (NIST/SEMATECH e-Handbook 1.3.6.7.4 table, 1 degree of freedom), the
    profile computed by scipy; 1 lies outside it exactly when the test rejects a constant rate."""
    fit = weibull_fit(failures, censored)
    top = _profile_by_scipy(fit.beta, failures, censored)
    assert top == pytest.approx(fit.log_likelihood, rel=1e-7)
    for end in (fit.beta_low, fit.beta_high):
        assert end is not None
        assert 2 * (top - _profile_by_scipy(end, failures, censored)) == pytest.approx(2.7055, abs=2e-3)
    assert fit.beta_low < fit.beta < fit.beta_high
    assert (fit.beta_low <= 1 <= fit.beta_high) is (not fit.differs_from_random)


def test_three_widely_spread_failures_say_no_schedule_follows_from_them():
    """A reliability review: 3 failures, β 0.75, were read as "replacing on a schedule does not help"."""
    fit = weibull_fit([380.0, 2100.0, 5200.0], [900.0])
    assert not fit.differs_from_random and fit.beta_low < 1 < fit.beta_high
    assert fit.reading == f"{NOT_TOLD_FROM_RANDOM}: {UNDECIDED}"
    assert "does not help" not in fit.reading


def test_the_shapes_interval_is_written_to_two_significant_figures_and_an_open_end_said_so():
    from observatory_ops.calc.reliability import WeibullFit

    def text(low, high):
        return WeibullFit(1.0, 1.0, 3, 0, 0.0, False, low, high).beta_interval_text

    assert (text(2.6, 8.0), text(0.29, 1.48), text(None, 0.5), text(1.0, None), text(56.0, 99.7)) == (
        "2.6 to 8.0", "0.29 to 1.5", "below 0.001 to 0.50", "1.0 to above 1000", "56 to 100")
