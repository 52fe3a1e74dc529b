"""Mirror reflectance decline fits (observatory_ops.calc.reflectance) against outside references.

References used below:
- scipy.stats.linregress and numpy.polyfit: ordinary least-squares line, slope and intercept standard errors;
- scipy.optimize.curve_fit: independent non-linear least squares with the residual-scaled covariance;
- the textbook standard error of the fitted mean response of a straight line,
  s sqrt(1/n + (x - xbar)^2 / Sxx) (NIST/SEMATECH e-Handbook of Statistical Methods, chapter 4;
  Draper and Smith, Applied Regression Analysis; from memory), solved with scipy.optimize.brentq;
- Pogson's magnitude scale, m = -2.5 log10(flux ratio).
The synthetic mirrors are invented test data.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from observatory_ops.calc.reflectance import crossing_exposure, fit_decline, predict, throughput_loss_mag

R0, RATE, RECOVERY = 0.905, 2.0e-5, 0.6
CLEANINGS = (1500.0, 3000.0, 4500.0)


def last_cleaning(exposure: np.ndarray, cleanings=CLEANINGS) -> np.ndarray:
    """The last cleaning at or before each exposure, by brute force."""
    return np.array([max([c for c in cleanings if c <= e], default=0.0) for e in exposure])


def synthetic_mirror(noise: float, seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Invented readings: known rate and recovery, Gaussian measurement noise."""
    exposure = np.linspace(0.0, 6000.0, 41)
    clean = R0 - RATE * (exposure - RECOVERY * last_cleaning(exposure))
    return exposure, clean + np.random.default_rng(seed).normal(0.0, noise, exposure.size)


def straight_line_readings() -> tuple[np.ndarray, np.ndarray]:
    exposure = np.array([0.0, 400.0, 900.0, 1300.0, 2100.0, 2600.0, 3300.0, 4100.0, 4700.0, 5200.0])
    return exposure, 0.91 - 1.7e-5 * exposure + np.random.default_rng(3).normal(0.0, 0.003, exposure.size)


def test_fit_without_cleanings_matches_scipy_linregress():
    exposure, measured = straight_line_readings()
    fit = fit_decline(exposure, measured)
    reference = stats.linregress(exposure, measured)
    assert fit.rate_per_hour == pytest.approx(-reference.slope, rel=1e-9)
    assert fit.r0 == pytest.approx(reference.intercept, rel=1e-12)
    assert fit.rate_sigma == pytest.approx(reference.stderr, rel=1e-9)
    assert fit.r0_sigma == pytest.approx(reference.intercept_stderr, rel=1e-9)
    np.testing.assert_allclose([-fit.rate_per_hour, fit.r0], np.polyfit(exposure, measured, 1), rtol=1e-9)
    assert np.isnan(fit.recovery_fraction) and fit.n_points == exposure.size


def test_fit_with_cleanings_matches_scipy_curve_fit():
    exposure, measured = synthetic_mirror(noise=0.002)
    fit = fit_decline(exposure, measured, CLEANINGS)

    def model(x, r0, rate, recovery):
        return r0 - rate * (x[0] - recovery * x[1])

    params, covariance = optimize.curve_fit(
        model, np.vstack([exposure, last_cleaning(exposure)]), measured, p0=[0.9, 1e-5, 0.5]
    )
    np.testing.assert_allclose([fit.r0, fit.rate_per_hour, fit.recovery_fraction], params, rtol=1e-6)
    np.testing.assert_allclose(
        [fit.r0_sigma, fit.rate_sigma, fit.recovery_sigma], np.sqrt(np.diag(covariance)), rtol=1e-5
    )


def test_synthetic_mirror_recovers_its_decline_rate_and_cleaning_recovery_within_three_sigma():
    # Source: the invented true values R0, b, f above; an unbiased estimate with a normal error lies within three
    # standard errors of the truth 99.7 % of the time (the normal distribution, NIST/SEMATECH e-Handbook of
    # Statistical Methods, from memory), so a fixed seed outside it would point to a wrong fit or a wrong sigma.
    # The residual rms near the noise put in (within 30 %): common practice, no published source.
    fit = fit_decline(*synthetic_mirror(noise=0.002), CLEANINGS)
    assert abs(fit.r0 - R0) <= 3 * fit.r0_sigma
    assert abs(fit.rate_per_hour - RATE) <= 3 * fit.rate_sigma
    assert abs(fit.recovery_fraction - RECOVERY) <= 3 * fit.recovery_sigma
    assert fit.residual_rms == pytest.approx(0.002, rel=0.3)


def test_noise_free_mirror_is_fitted_exactly():
    # Source: readings made exactly from the model's published form (module docstring of calc.reflectance),
    # R(E) = R0 - b (E - f c_last(E)), with the invented R0, b, f above: least squares reproduces them exactly.
    fit = fit_decline(*synthetic_mirror(noise=0.0), list(reversed(CLEANINGS)))
    assert (fit.r0, fit.rate_per_hour, fit.recovery_fraction) == pytest.approx((R0, RATE, RECOVERY), rel=1e-9)
    assert fit.cleaning_exposure_h == CLEANINGS


def test_each_cleaning_recovers_its_fraction_of_the_loss_since_the_previous_cleaning():
    # Source: the model's published form (module docstring of calc.reflectance), by hand: just before the cleaning
    # at c2 = 3000 h, R = R0 - b (c2 - f c1); just after, R = R0 - b (c2 - f c2); the jump is f b (c2 - c1)
    # = 0.6 * 2e-5 * 1500 = 0.018.
    fit = fit_decline(*synthetic_mirror(noise=0.0), CLEANINGS)
    before, after = predict(fit, [2999.999999, 3000.0])
    assert after - before == pytest.approx(RECOVERY * RATE * (3000.0 - 1500.0), rel=1e-5)


def test_predict_can_assume_planned_cleanings():
    # Source: the model's published form (module docstring of calc.reflectance), by hand with c_last = 7000 h:
    # R(7500) = 0.905 - 2e-5 * (7500 - 0.6 * 7000) = 0.905 - 2e-5 * 3300 = 0.839.
    fit = fit_decline(*synthetic_mirror(noise=0.0), CLEANINGS)
    planned = (*CLEANINGS, 7000.0)
    assert predict(fit, [7500.0], planned)[0] == pytest.approx(R0 - RATE * (7500.0 - RECOVERY * 7000.0))


def test_crossing_of_a_noise_free_line_is_where_the_line_meets_the_threshold():
    exposure = np.linspace(0.0, 3000.0, 7)
    fit = fit_decline(exposure, 0.9 - 2e-5 * exposure)
    crossing = crossing_exposure(fit, 0.85)
    assert crossing.exposure_h == pytest.approx(2500.0)
    assert crossing.early_h == pytest.approx(2500.0) and crossing.late_h == pytest.approx(2500.0)


def test_crossing_band_matches_the_textbook_confidence_band_of_a_line():
    exposure, measured = straight_line_readings()
    reference = stats.linregress(exposure, measured)
    residuals = measured - (reference.intercept + reference.slope * exposure)
    s = np.sqrt(residuals @ residuals / (exposure.size - 2))
    sxx = np.sum((exposure - exposure.mean()) ** 2)

    def band_minus_threshold(x: float, side: float) -> float:
        standard_error = s * np.sqrt(1 / exposure.size + (x - exposure.mean()) ** 2 / sxx)
        return reference.intercept + reference.slope * x + side * standard_error - 0.84

    crossing = crossing_exposure(fit_decline(exposure, measured), 0.84)
    assert crossing.early_h == pytest.approx(optimize.brentq(band_minus_threshold, 0, 2e4, args=(-1.0,)), rel=1e-7)
    assert crossing.late_h == pytest.approx(optimize.brentq(band_minus_threshold, 0, 2e4, args=(1.0,)), rel=1e-7)
    assert crossing.early_h < crossing.exposure_h < crossing.late_h


def test_crossing_after_cleanings_starts_from_the_last_cleaning():
    fit = fit_decline(*synthetic_mirror(noise=0.002), CLEANINGS)
    crossing = crossing_exposure(fit, 0.85)
    # Source: the model's published form (module docstring of calc.reflectance), R(E) = R0 - b (E - f c_last(E)),
    # solved by hand for R(E) = T past the last cleaning (c_last = 4500 h): E = f c_last + (R0 - T) / b.
    closed_form = fit.recovery_fraction * CLEANINGS[-1] + (fit.r0 - 0.85) / fit.rate_per_hour
    assert crossing.exposure_h == pytest.approx(closed_form, rel=1e-9)
    assert CLEANINGS[-1] < crossing.early_h < crossing.exposure_h < crossing.late_h
    # The same by hand with the invented true values: 0.6 * 4500 + (0.905 - 0.85) / 2e-5 = 2700 + 2750 = 5450 h.
    assert crossing_exposure(fit_decline(*synthetic_mirror(noise=0.0), CLEANINGS), 0.85).exposure_h == pytest.approx(
        5450.0, rel=1e-9
    )


def test_crossing_band_is_open_ended_when_the_decline_is_not_significant():
    # Source: inverse prediction by Fieller's method (Draper and Smith, Applied Regression Analysis, on inverse
    # regression, from memory): the interval is bounded only when the slope differs from zero at the chosen level,
    # here |b| > 1 sigma_b; else the upper band, whose slope tends to -b + sigma_b >= 0, never falls to the threshold.
    exposure = np.array([0.0, 1000.0, 2000.0, 3000.0, 4000.0])
    fit = fit_decline(exposure, np.array([0.900, 0.905, 0.895, 0.902, 0.897]))
    assert fit.rate_sigma > abs(fit.rate_per_hour)
    assert np.isinf(crossing_exposure(fit, 0.85).late_h)


def test_mirror_already_below_threshold_crosses_at_its_last_cleaning():
    # Source: the model's published form, by hand: just after the last cleaning R(4500) = 0.905 - 2e-5 * (4500 -
    # 0.6 * 4500) = 0.905 - 0.036 = 0.869, already below 0.89; that such a mirror is given the last cleaning's
    # exposure is the convention crossing_exposure states (common practice, no published source).
    fit = fit_decline(*synthetic_mirror(noise=0.0), CLEANINGS)
    crossing = crossing_exposure(fit, 0.89)
    assert crossing.exposure_h == crossing.early_h == crossing.late_h == CLEANINGS[-1]


def test_three_mirrors_each_losing_seven_percent_cost_a_quarter_magnitude():
    # Pogson: -2.5 log10((0.855 / 0.92)^3) = 7.5 * 0.03182 = 0.2387 mag, worked by hand.
    assert throughput_loss_mag([0.855] * 3, [0.92] * 3) == pytest.approx(0.2387, abs=1e-4)


@settings(deadline=None)
@given(
    st.lists(
        st.tuples(st.floats(0.01, 1.0), st.floats(0.01, 1.0)),
        min_size=1,
        max_size=6,
    )
)
def test_throughput_loss_of_a_train_is_the_sum_of_its_mirrors_losses(mirrors):
    # Magnitudes of a product of flux ratios add (Pogson's scale is logarithmic).
    now, fresh = zip(*mirrors, strict=True)
    each = sum(throughput_loss_mag([n], [f]) for n, f in mirrors)
    assert throughput_loss_mag(now, fresh) == pytest.approx(each, abs=1e-9)


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda: fit_decline([0, 100, 200], [91.0, 90.0, 89.0]), "between 0 and 1"),
        (lambda: fit_decline([0, 100], [0.91, 0.90]), "at least 3 readings"),
        (lambda: fit_decline([0, 100, 200], [0.91, 0.90, 0.9], [150.0]), "at least 4 readings"),
        (lambda: fit_decline([0, 100, 200], [0.91, 0.90]), "3 exposures but 2"),
        (lambda: fit_decline([-5, 100, 200], [0.91, 0.90, 0.89]), ">= 0 hours"),
        (lambda: fit_decline([100, 100, 100], [0.91, 0.90, 0.89]), "two different exposures"),
        (lambda: fit_decline([600, 700, 800, 900], [0.91, 0.90, 0.89, 0.88], [500.0]), "cannot separate"),
        (lambda: throughput_loss_mag([0.9, 1.2], [0.92, 0.92]), "between 0 and 1"),
        (lambda: throughput_loss_mag([0.9], [0.92, 0.92]), "one present and one fresh"),
        (lambda: throughput_loss_mag([0.0], [0.92]), "reflectance of 0"),
    ],
)
def test_bad_input_is_refused_with_a_clear_message(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_recovery_unknown_without_a_reading_after_the_cleaning_is_refused():
    fit = fit_decline([0.0, 500.0, 1000.0], [0.91, 0.90, 0.89], [1200.0])
    with pytest.raises(ValueError, match="recovery is unknown"):
        predict(fit, [1500.0])
    with pytest.raises(ValueError, match="recovery is unknown"):
        crossing_exposure(fit, 0.85)


def test_threshold_outside_zero_to_one_is_refused():
    fit = fit_decline([0.0, 500.0, 1000.0], [0.91, 0.90, 0.89])
    with pytest.raises(ValueError, match="threshold must lie between 0 and 1"):
        crossing_exposure(fit, 85.0)


@pytest.mark.parametrize("seed", range(5))
def test_the_quadratic_solver_agrees_with_numpy_roots(seed):
    """Outside reference: numpy.roots (eigenvalues of the companion matrix), an independent method."""
    from observatory_ops.calc.reflectance import _real_roots

    rng = np.random.default_rng(seed)
    for a, b, c in rng.normal(size=(50, 3)) * [1.0, 10.0, 5.0]:
        expected = np.roots([a, b, c])
        expected = np.sort(expected.real[np.abs(expected.imag) < 1e-12])
        assert _real_roots(a, b, c) == pytest.approx(list(expected), rel=1e-9, abs=1e-12)


def test_a_double_root_lost_to_rounding_is_still_found():
    """(x - 2500)^2 scaled as in a noise-free fit: the discriminant is zero, or below it by rounding."""
    from observatory_ops.calc.reflectance import _real_roots

    rate, margin = 2e-5, 0.05
    assert _real_roots(rate**2, -2 * margin * rate, margin**2) == pytest.approx([2500.0, 2500.0])


def test_readings_all_at_zero_exposure_are_refused_without_a_numpy_warning():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a divide-by-zero RuntimeWarning would fail the test
        with pytest.raises(ValueError, match="two different exposures"):
            fit_decline([0.0, 0.0, 0.0], [0.90, 0.89, 0.91])


def test_a_recoat_line_below_the_fitted_r0_widens_the_band_by_r0s_uncertainty():
    """The line 0.92 R0 moves with the fitted R0, so the band is where R(E) - 0.92 R0 = (0.08 R0 + b E) (b the fitted
    slope, below 0) is zero within one standard error. Checked against scipy's curve_fit: its parameter covariance
    of the straight line (an independent fit) and the delta method, the gradient of 0.08 R0 + b E being (0.08, E);
    the roots found by brentq."""
    exposure, measured = straight_line_readings()
    fit = fit_decline(exposure, measured)
    (intercept, slope), covariance = optimize.curve_fit(lambda x, a, b: a + b * x, exposure, measured)
    line = 0.92 * intercept

    def band_minus_line(x: float, side: float) -> float:
        gradient = np.array([0.08, x])
        return 0.08 * intercept + slope * x + side * np.sqrt(gradient @ covariance @ gradient)

    moving = crossing_exposure(fit, line, follows_r0=True)
    assert moving.early_h == pytest.approx(optimize.brentq(band_minus_line, 0, 2e4, args=(-1.0,)), rel=1e-6)
    assert moving.late_h == pytest.approx(optimize.brentq(band_minus_line, 0, 2e4, args=(1.0,)), rel=1e-6)
    fixed = crossing_exposure(fit, line)
    assert moving.exposure_h == pytest.approx(fixed.exposure_h)
    assert moving.early_h < fixed.early_h < fixed.exposure_h < fixed.late_h < moving.late_h
