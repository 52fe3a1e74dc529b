"""The Weibull fit with delayed entry (left truncation): an interval already under way when it is first observed is
fitted from the age it had then (no database). The selector's use of it is specified in
tests/test_reliability_period.py (ages at a period's start) and tests/test_reliability_page.py (hours before the log).
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from lifelines import WeibullFitter
from scipy import stats

from observatory_ops.calc.reliability import weibull_fit

# Invented data sets: (failure ages, their ages at entry, censored ages, their ages at entry), operating hours.
DATA_SETS = {
    "failures only, some entered late": (
        [410.0, 655.0, 980.0, 1210.0, 1302.0, 1530.0], [0.0, 300.0, 0.0, 900.0, 0.0, 1200.0], [], [],
    ),
    "with censoring, entered late on both": (
        [410.0, 655.0, 980.0, 1210.0, 1302.0, 1530.0, 1775.0, 2210.0],
        [0.0, 300.0, 0.0, 900.0, 0.0, 0.0, 1500.0, 100.0],
        [300.0, 1400.0, 2500.0, 90.0], [0.0, 1000.0, 2000.0, 0.0],
    ),
    "short observed stretches after long ages": (
        [120.0, 240.0, 2050.0, 2300.0, 410.0], [0.0, 0.0, 2000.0, 2250.0, 0.0], [3000.0, 60.0], [2900.0, 0.0],
    ),
}


def _truncated_log_likelihood(beta, eta, failures, failure_entries, censored, censored_entries):
    """prod f(t)/S(e) * prod S(c)/S(e) in logs, from scipy.stats.weibull_min's own logpdf and logsf (independent of
    calc.reliability's profile)."""
    law = stats.weibull_min(beta, scale=eta)
    return (law.logpdf(failures).sum() - law.logsf(failure_entries).sum()
            + law.logsf(censored).sum() - law.logsf(censored_entries).sum())


@pytest.mark.parametrize("name", DATA_SETS)
def test_the_truncated_fit_agrees_with_lifelines_given_the_same_entries(name):
    """Independent reference: lifelines.WeibullFitter with entry= (its left truncation; rho_ the shape, lambda_ the
    scale), maximum likelihood by gradient optimisation. Agreement within 1e-5 relative, far inside the fit's own
    uncertainty; lifelines' log-likelihood includes the truncation terms, so it must agree too."""
    failures, failure_entries, censored, censored_entries = DATA_SETS[name]
    fit = weibull_fit(failures, censored, failure_entry_hours=failure_entries, censored_entry_hours=censored_entries)
    reference = WeibullFitter().fit(failures + censored, event_observed=[1] * len(failures) + [0] * len(censored),
                                    entry=failure_entries + censored_entries)
    assert fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert fit.log_likelihood == pytest.approx(reference.log_likelihood_, rel=1e-7)
    assert (fit.failures, fit.censored) == (len(failures), len(censored))


@pytest.mark.parametrize("name", DATA_SETS)
def test_entries_of_zero_give_exactly_the_fit_without_entries(name):
    """Every interval observed from its start: the likelihood is the untruncated one, figure for figure (the
    untruncated fit itself is checked against lifelines and scipy in tests/test_calc_reliability.py)."""
    failures, _, censored, _ = DATA_SETS[name]
    zeros = weibull_fit(failures, censored, failure_entry_hours=[0.0] * len(failures),
                        censored_entry_hours=[0.0] * len(censored))
    assert zeros == weibull_fit(failures, censored)


def test_the_random_failure_test_uses_the_truncated_exponential_likelihood_at_beta_one():
    """At beta = 1 the Weibull is the exponential, memoryless: each interval counts its hours after entry, and eta
    is sum(t - e) / r. Its log-likelihood, from scipy.stats.expon (logpdf(t) - logsf(e) for a failure, logsf(c) -
    logsf(e) for a censored time), gives the likelihood-ratio statistic by hand."""
    failures, failure_entries, censored, censored_entries = DATA_SETS["with censoring, entered late on both"]
    fit = weibull_fit(failures, censored, failure_entry_hours=failure_entries, censored_entry_hours=censored_entries)
    scale = (sum(failures) - sum(failure_entries) + sum(censored) - sum(censored_entries)) / len(failures)
    law = stats.expon(scale=scale)
    at_one = (law.logpdf(failures).sum() - law.logsf(failure_entries).sum()
              + law.logsf(censored).sum() - law.logsf(censored_entries).sum())
    statistic = 2 * (fit.log_likelihood - at_one)
    assert fit.differs_from_random == (statistic > stats.chi2.ppf(0.90, 1))
    # The fit decides on that same statistic (to 1e-6 relative): a confidence whose chi2 quantile lies just below it
    # rejects beta = 1, one just above does not.
    for factor, differs in ((1 - 1e-6, True), (1 + 1e-6, False)):
        confidence = stats.chi2.cdf(factor * statistic, 1)
        assert weibull_fit(failures, censored, confidence, failure_entry_hours=failure_entries,
                           censored_entry_hours=censored_entries).differs_from_random is differs


@settings(max_examples=60, deadline=None)
@given(
    intervals=st.lists(st.tuples(st.floats(1.0, 1e4), st.floats(0.0, 0.95), st.booleans()), min_size=5, max_size=25),
    step=st.sampled_from([(1.02, 1.0), (0.98, 1.0), (1.0, 1.02), (1.0, 0.98)]),
)
def test_no_nearby_shape_or_scale_does_better_than_the_fit(intervals, step):
    """A law the fit must obey: it is the maximum of the truncated likelihood (computed with scipy.stats.weibull_min,
    not with the fit's profile), so moving the shape or the scale by 2 % can only lower it. Each interval: an age,
    its age at entry as a fraction of it, and whether it failed (the first three fail, so a fit can be made)."""
    ages = [t for t, _, _ in intervals]
    entries = [t * share for t, share, _ in intervals]
    failed = [True] * 3 + [f for _, _, f in intervals[3:]]
    failures = [t for t, f in zip(ages, failed, strict=True) if f]
    if len(set(failures)) < 2:
        return  # every failure at one age: no shape to fit
    pick = [(t, e) for t, e, f in zip(ages, entries, failed, strict=True) if f]
    rest = [(t, e) for t, e, f in zip(ages, entries, failed, strict=True) if not f and t > e]
    try:
        fit = weibull_fit([t for t, _ in pick], [t for t, _ in rest], failure_entry_hours=[e for _, e in pick],
                          censored_entry_hours=[e for _, e in rest])
    except ValueError as exc:
        assert "do not determine a Weibull" in str(exc)  # a likelihood with no maximum is said, not fitted
        return
    # A shape below 0.05 puts the scale at a tiny fraction of an hour, where scipy's reference loses its digits.
    assume(fit.beta > 0.05)
    args = ([t for t, _ in pick], [e for _, e in pick], [t for t, _ in rest], [e for _, e in rest])
    best = _truncated_log_likelihood(fit.beta, fit.eta_hours, *args)
    assert best == pytest.approx(fit.log_likelihood, rel=1e-9, abs=1e-9)
    assert _truncated_log_likelihood(fit.beta * step[0], fit.eta_hours * step[1], *args) <= best + 1e-9


@settings(max_examples=30, deadline=None)
@given(stretch=st.floats(0.01, 100.0))
def test_the_truncated_fit_scales_with_the_unit_of_time(stretch):
    """Hours or minutes: the shape does not change, the scale changes by the same factor."""
    failures, failure_entries, censored, censored_entries = DATA_SETS["with censoring, entered late on both"]
    fit = weibull_fit(failures, censored, failure_entry_hours=failure_entries, censored_entry_hours=censored_entries)
    stretched = weibull_fit([t * stretch for t in failures], [t * stretch for t in censored],
                            failure_entry_hours=[e * stretch for e in failure_entries],
                            censored_entry_hours=[e * stretch for e in censored_entries])
    assert stretched.beta == pytest.approx(fit.beta, rel=1e-6)
    assert stretched.eta_hours == pytest.approx(fit.eta_hours * stretch, rel=1e-6)


def _wear_out_fleet(seed: int, units: int = 300, beta: float = 3.0, eta: float = 1000.0, window: float = 3000.0):
    """A simulated fleet (numpy, seeded): each unit is found in service at a random age, uniform over 0 to 1,500 h,
    so its running life is Weibull(beta, eta) conditioned on lasting past that age (drawn by inverting the
    conditional survival: eta ((age/eta)^beta + E)^(1/beta), E standard exponential); after each failure it is
    renewed and lives a fresh Weibull(beta, eta) life; it is watched for ``window`` hours, its last life censored.
    Returns (truncated: failures, their entries, censored, their entries), and the same record read as if every
    unit were new when the watch began (the first interval's watched hours taken as a whole life)."""
    rng = np.random.default_rng(seed)
    truncated: tuple[list, list, list, list] = ([], [], [], [])
    as_new: tuple[list, list] = ([], [])
    for _ in range(units):
        entry = rng.uniform(0.0, 1.5 * eta)
        life = eta * ((entry / eta) ** beta + rng.exponential()) ** (1 / beta)
        clock = 0.0
        while clock + life - entry <= window:
            truncated[0].append(life)
            truncated[1].append(entry)
            as_new[0].append(life - entry)
            clock, entry, life = clock + life - entry, 0.0, eta * rng.weibull(beta)
        truncated[2].append(entry + window - clock)
        truncated[3].append(entry)
        as_new[1].append(window - clock)
    return truncated, as_new


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_a_simulated_wear_out_fleet_found_at_known_ages_is_recovered_only_with_its_entries(seed):
    """A property check against a known generating distribution, Weibull beta = 3, eta = 1,000 h (wear-out): with
    each unit's age when the watch began, the fit recovers the shape within 10 % and the scale within 6 % (about
    three standard errors with some 1,000 failures; sample sizes and tolerances chosen here, no published source).
    Read as if every unit were new then, the first intervals (the rest of an aged unit's life, short) pull the shape
    far down, to below 2.5: the bias the delayed entry removes."""
    (failures, failure_entries, censored, censored_entries), (new_failures, new_censored) = _wear_out_fleet(seed)
    fit = weibull_fit(failures, censored, failure_entry_hours=failure_entries, censored_entry_hours=censored_entries)
    assert fit.beta == pytest.approx(3.0, rel=0.10)
    assert fit.eta_hours == pytest.approx(1000.0, rel=0.06)
    assert weibull_fit(new_failures, new_censored).beta < 2.5


@pytest.mark.parametrize(("entries", "said"), [
    ({"failure_entry_hours": [0.0, 200.0, 0.0]}, "failure 2: at 200 h, not after its age at entry, 200 h"),
    ({"failure_entry_hours": [0.0, 0.0, 400.0]}, "failure 3: at 300 h, not after its age at entry, 400 h"),
    ({"failure_entry_hours": [0.0, -5.0, 0.0]}, "failure 2: its age at entry must be 0 or more operating hours"),
    ({"censored_entry_hours": [float("nan")]}, "censored time 1: its age at entry must be 0 or more"),
    ({"censored_entry_hours": [60.0]}, "censored time 1: 50 h, less than its age at entry, 60 h"),
    ({"failure_entry_hours": [0.0, 0.0]}, "failures: 2 ages at entry given for 3 intervals"),
])
def test_impossible_ages_at_entry_are_refused_naming_the_interval(entries, said):
    with pytest.raises(ValueError, match=said.replace("(", r"\(")):
        weibull_fit([100.0, 200.0, 300.0], [50.0], **entries)


def test_a_censored_interval_observed_for_no_hours_carries_no_information():
    """Entered at the age it is censored at: S(c)/S(e) = 1 whatever the parameters, so it changes nothing."""
    failures, failure_entries, censored, censored_entries = DATA_SETS["with censoring, entered late on both"]
    fit = weibull_fit(failures, censored, failure_entry_hours=failure_entries, censored_entry_hours=censored_entries)
    assert weibull_fit(failures, censored + [700.0], failure_entry_hours=failure_entries,
                       censored_entry_hours=censored_entries + [700.0]) == fit


def test_failures_just_after_late_entries_determine_no_shape_and_say_so():
    """Every interval entered late: three failed within an hour of their entry at 1,000 to 3,000 h, one ran on from
    5,000 h to 100,000 h without failing. A rate that only falls with age fits best, and ever better as the shape
    falls towards 0: the profile equation's left side is above 0 at every shape (its limit at 0, the mean log-age
    under observation, ln 5,000 to ln 100,000 weighing most, exceeds the failures' mean log-age; calc.reliability.
    weibull_fit, Method), so there is no fit to give, and the fit says so."""
    with pytest.raises(ValueError, match="do not determine a Weibull shape: they come so soon after the ages"):
        weibull_fit([1001.0, 2001.0, 3001.0], [100000.0], failure_entry_hours=[1000.0, 2000.0, 3000.0],
                    censored_entry_hours=[5000.0])


def test_a_fit_whose_scale_comes_out_at_no_usable_number_of_hours_is_refused():
    """Each failure a hour after the age it was first seen at: the likelihood is greatest at a shape near 0.02, whose
    scale is 1e-148 h (checked with scipy by a reviewer), which a page would print as "scale 0 h"."""
    with pytest.raises(ValueError, match="no usable number of hours|shape near 0"):
        weibull_fit([101, 202, 303], [], failure_entry_hours=[100, 200, 300])
