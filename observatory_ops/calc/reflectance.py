"""Decline of a mirror's measured reflectance with dust-weighted exposure, and recovery by cleaning.

Model
-----
``E`` is the dust-weighted open-dome exposure (hours) accumulated since the mirror was last coated, and
``c_1 <= c_2 <= ...`` the exposures at which it was cleaned. Between cleanings the reflectance falls
linearly with exposure at a rate ``b`` per hour. Each cleaning recovers a fraction ``f`` of the loss
accumulated since the previous cleaning (or since coating); the rest stays for good. Summing the
intervals, all of that reduces to

    R(E) = R0 - b * (E - f * c_last(E))

where ``c_last(E)`` is the exposure of the last cleaning done before the reading (0 before the first).
Which cleanings came before a reading is a matter of dates, which the caller may give
(``cleanings_before``): a reading dated before a cleaning is before it even at the same exposure (no
night logged between the two). Without them, a reading at a cleaning's exposure counts as taken after
it. Without cleanings this is a straight line. A linear loss with exposure and a partial recovery by
washing are common practice, no published source; the fit itself is ordinary least squares.

Fit
---
The model is linear in ``(R0, b, b f)``, so the least-squares solution is exact (no iteration). The
uncertainties are those of non-linear least squares in ``(R0, b, f)``: ``s^2 (J^T J)^-1`` with ``J``
the Jacobian at the solution and ``s^2`` the residual variance on ``n - p`` degrees of freedom, the
covariance that ``scipy.optimize.curve_fit`` reports (Press et al., Numerical Recipes, 3rd ed.,
section 15.5, from memory; for a straight line it equals the textbook standard errors of slope and
intercept, NIST/SEMATECH e-Handbook of Statistical Methods, chapter 4, from memory).
"""

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

#: Why ``fit_decline`` can fit nothing from readings it accepts: each the start of its ValueError's message, named so
#: that a caller telling the reasons apart (the mirror page's advice, ``mirrors.services``) follows any rewording.
SAME_EXPOSURE = "the readings need at least two different exposures"
RECOVERY_NOT_SEPARATED = "the readings cannot separate the cleaning recovery from the fresh reflectance"
NO_DECLINE = "the fitted decline rate is zero"
#: Too few readings left once those whose exposure is not known (``fit_decline``'s ``exposure_known``) are left out.
EXPOSURE_NOT_KNOWN = "the exposure since the coating is not known for some readings"


@dataclass(frozen=True)
class DeclineFit:
    """Fitted decline of a mirror's reflectance (see the module docstring for the model).

    ``recovery_fraction`` and ``recovery_sigma`` are NaN when no reading follows a cleaning (the data
    cannot tell the recovery). ``covariance`` holds the covariance of ``(r0, rate_per_hour)`` or of
    ``(r0, rate_per_hour, recovery_fraction)`` when the recovery was fitted. ``residual_rms`` is the
    root mean square of the residuals.
    """

    r0: float
    r0_sigma: float
    rate_per_hour: float
    rate_sigma: float
    recovery_fraction: float
    recovery_sigma: float
    n_points: int
    residual_rms: float
    cleaning_exposure_h: tuple[float, ...]
    covariance: tuple[tuple[float, ...], ...]


@dataclass(frozen=True)
class Crossing:
    """Exposure at which the fitted reflectance reaches a threshold, with its 1-sigma band.

    ``early_h`` and ``late_h`` are where the lower and upper 1-sigma confidence bands of the fitted
    curve reach the threshold; ``late_h`` is infinite when the decline is not significant at 1 sigma.
    """

    exposure_h: float
    early_h: float
    late_h: float


def _as_reflectances(values: ArrayLike, what: str) -> np.ndarray:
    array = np.atleast_1d(np.asarray(values, dtype=float))
    if array.ndim != 1:
        raise ValueError(f"{what} must be a one-dimensional sequence")
    if not np.all(np.isfinite(array)) or np.any(array < 0) or np.any(array > 1):
        raise ValueError(f"{what} must lie between 0 and 1 (a fraction, not a percentage)")
    return array


def _as_exposures(values: ArrayLike, what: str) -> np.ndarray:
    array = np.atleast_1d(np.asarray(values, dtype=float))
    if array.ndim != 1:
        raise ValueError(f"{what} must be a one-dimensional sequence")
    if not np.all(np.isfinite(array)) or np.any(array < 0):
        raise ValueError(f"{what} must be finite and >= 0 hours")
    return array


def _as_cleanings(values: Sequence[float]) -> np.ndarray:
    return np.sort(_as_exposures(values, "cleaning exposures"))


def _last_cleaning(exposure_h: np.ndarray, cleanings: np.ndarray) -> np.ndarray:
    """Exposure of the last cleaning at or before each exposure; 0 (the coating) before the first."""
    return np.concatenate([[0.0], cleanings])[np.searchsorted(cleanings, exposure_h, side="right")]


def _cleanings_done(exposure_h: np.ndarray, cleanings: np.ndarray, cleanings_before: Sequence[int]) -> np.ndarray:
    """Exposure of the last cleaning done before each reading, from how many were (``fit_decline``)."""
    done = np.asarray(cleanings_before) if len(cleanings_before) else np.zeros(0, dtype=np.int64)
    if done.shape != exposure_h.shape or not np.issubdtype(done.dtype, np.integer):
        raise ValueError("cleanings_before needs one whole count per reading")
    if np.any(done < 0) or np.any(done > cleanings.size):
        raise ValueError(f"cleanings_before must count between 0 and the {cleanings.size} cleanings")
    last = np.concatenate([[0.0], cleanings])[done]
    if np.any(last > exposure_h):
        raise ValueError("a cleaning counted before a reading has more exposure than the reading")
    return last


def _jacobian(fit_params: np.ndarray, exposure_h: np.ndarray, last_cleaning: np.ndarray) -> np.ndarray:
    """Derivatives of R(E) with respect to (r0, rate) or (r0, rate, recovery)."""
    if fit_params.size == 2:
        return np.column_stack([np.ones_like(exposure_h), -exposure_h])
    _, rate, recovery = fit_params
    return np.column_stack([np.ones_like(exposure_h), -(exposure_h - recovery * last_cleaning), rate * last_cleaning])


def fit_decline(
    exposure_h: ArrayLike,
    reflectance: ArrayLike,
    cleaning_exposure_h: Sequence[float] = (),
    cleanings_before: Sequence[int] | None = None,
    exposure_known: Sequence[bool] | None = None,
) -> DeclineFit:
    """Fit ``R(E) = R0 - b (E - f c_last(E))`` to measured reflectance by least squares.

    See the module docstring for the model and the source of the uncertainties.

    Parameters
    ----------
    exposure_h : array_like
        Dust-weighted exposure since coating at each reading, hours.
    reflectance : array_like
        Measured reflectance (0 to 1) at each reading.
    cleaning_exposure_h : sequence of float
        Exposure at each cleaning since coating, any order.
    cleanings_before : sequence of int, optional
        For each reading, how many of the cleanings were done before it (by their dates). By default every
        cleaning at or below the reading's exposure.
    exposure_known : sequence of bool, optional
        For each reading, whether its exposure since coating is known. A reading whose exposure is not known
        (its ``exposure_h`` is then ignored, though it must still be a number of hours) is left out of the fit:
        it has no place along the exposure axis. By default every reading's is known.

    Returns
    -------
    DeclineFit
        ``n_points`` counts the readings fitted (those whose exposure is known).

    Raises
    ------
    ValueError
        Mismatched lengths, values out of range, too few readings (3 for a line, 4 when a reading
        follows a cleaning; the message starts with ``EXPOSURE_NOT_KNOWN`` when readings were left out for it),
        ``cleanings_before`` that puts a cleaning before a reading at a lower exposure, or readings that cannot
        separate the recovery from the fresh reflectance.
    """
    exposure = _as_exposures(exposure_h, "exposures")
    measured = _as_reflectances(reflectance, "reflectances")
    cleanings = _as_cleanings(cleaning_exposure_h)
    if exposure.size != measured.size:
        raise ValueError(f"{exposure.size} exposures but {measured.size} reflectances")
    known = np.ones(exposure.size, dtype=bool) if exposure_known is None else np.asarray(exposure_known, dtype=bool)
    if known.shape != exposure.shape:
        raise ValueError("exposure_known needs one flag per reading")
    if cleanings_before is not None and len(cleanings_before) == known.size:  # else _cleanings_done says so
        cleanings_before = np.asarray(cleanings_before)[known]
    unknown = int(exposure.size - known.sum())
    exposure, measured = exposure[known], measured[known]
    last_cleaning = (_last_cleaning(exposure, cleanings) if cleanings_before is None
                     else _cleanings_done(exposure, cleanings, cleanings_before))
    fits_recovery = bool(np.any(last_cleaning > 0))
    n_params = 3 if fits_recovery else 2
    if exposure.size < n_params + 1:
        what = "a decline with cleaning recovery" if fits_recovery else "a decline"
        if unknown:
            raise ValueError(
                f"{EXPOSURE_NOT_KNOWN}: {unknown} of the {unknown + exposure.size}, which leaves {exposure.size}; "
                f"{what} needs at least {n_params + 1}"
            )
        raise ValueError(f"need at least {n_params + 1} readings to fit {what} with uncertainties; got {exposure.size}")
    columns = [np.ones_like(exposure), -exposure, last_cleaning][:n_params]
    design = np.column_stack(columns)
    largest = np.abs(design).max(axis=0)
    if not largest.all():  # a column of zeros (every reading at zero exposure): nothing to scale or fit
        raise ValueError(SAME_EXPOSURE)
    scaled = design / largest
    if np.linalg.matrix_rank(scaled) < n_params:
        if fits_recovery:
            raise ValueError(
                f"{RECOVERY_NOT_SEPARATED}: need readings at different exposures before and after a cleaning"
            )
        raise ValueError(SAME_EXPOSURE)
    solution = np.linalg.lstsq(design, measured, rcond=None)[0]
    if fits_recovery:
        if solution[1] == 0:
            raise ValueError(f"{NO_DECLINE}, so the cleaning recovery is undefined")
        params = np.array([solution[0], solution[1], solution[2] / solution[1]])
    else:
        params = solution
    residuals = measured - design @ solution
    variance = float(residuals @ residuals) / (exposure.size - n_params)
    jacobian = _jacobian(params, exposure, last_cleaning)
    covariance = variance * np.linalg.inv(jacobian.T @ jacobian)
    sigmas = np.sqrt(np.diag(covariance))
    return DeclineFit(
        r0=float(params[0]),
        r0_sigma=float(sigmas[0]),
        rate_per_hour=float(params[1]),
        rate_sigma=float(sigmas[1]),
        recovery_fraction=float(params[2]) if fits_recovery else float("nan"),
        recovery_sigma=float(sigmas[2]) if fits_recovery else float("nan"),
        n_points=int(exposure.size),
        residual_rms=float(np.sqrt(np.mean(residuals**2))),
        cleaning_exposure_h=tuple(float(c) for c in cleanings),
        covariance=tuple(tuple(float(v) for v in row) for row in covariance),
    )


def _params(fit: DeclineFit) -> np.ndarray:
    return np.array([fit.r0, fit.rate_per_hour, fit.recovery_fraction][: len(fit.covariance)])


def _prepare(fit: DeclineFit, exposure_h: ArrayLike, cleaning_exposure_h: Sequence[float] | None):
    exposure = _as_exposures(exposure_h, "exposures")
    chosen = fit.cleaning_exposure_h if cleaning_exposure_h is None else cleaning_exposure_h
    last_cleaning = _last_cleaning(exposure, _as_cleanings(chosen))
    if len(fit.covariance) == 2 and np.any(last_cleaning > 0):
        raise ValueError(
            "the cleaning recovery is unknown (no reading followed a cleaning): measure the mirror after cleaning"
        )
    return exposure, last_cleaning


def predict(fit: DeclineFit, exposure_h: ArrayLike, cleaning_exposure_h: Sequence[float] | None = None) -> np.ndarray:
    """Reflectance the fitted model gives at the given exposures.

    Parameters
    ----------
    fit : DeclineFit
    exposure_h : array_like
        Dust-weighted exposures since coating, hours.
    cleaning_exposure_h : sequence of float, optional
        Cleanings to assume (for example planned ones); by default the cleanings the fit was made with.

    Returns
    -------
    numpy.ndarray
        Modelled reflectance ``R0 - b (E - f c_last(E))``.
    """
    exposure, last_cleaning = _prepare(fit, exposure_h, cleaning_exposure_h)
    if len(fit.covariance) == 2:
        return fit.r0 - fit.rate_per_hour * exposure
    return fit.r0 - fit.rate_per_hour * (exposure - fit.recovery_fraction * last_cleaning)


def crossing_exposure(fit: DeclineFit, threshold: float, follows_r0: bool = False) -> Crossing:
    """Exposure at which the mirror reaches a reflectance threshold if it is not cleaned again.

    The central value solves ``R(E) = threshold`` on the segment after the fit's last cleaning. The band
    is the inverse prediction of regression (Fieller's method; Draper and Smith, Applied Regression
    Analysis, on inverse regression, from memory): the exposures where the fitted curve minus and plus
    its 1-sigma standard error, ``sqrt(g^T C g)`` with ``g`` the gradient of ``R(E)`` in the fitted
    parameters and ``C`` their covariance, reach the threshold. Exposures are never earlier than the
    last cleaning: a mirror already below the threshold then gets that exposure.

    A threshold set as a fraction k of the fitted R0 (``follows_r0``: the recoat line "x % below the fitted fresh
    value") moves with R0, so the band is that of ``R(E) - k R0``: its gradient is ``g`` less ``k`` in R0's place
    (the delta method, as for ``g``). Taking such a line as exact narrows the band by R0's share of it.

    Parameters
    ----------
    fit : DeclineFit
    threshold : float
        Reflectance (0 to 1) at which the mirror is due for recoating.
    follows_r0 : bool
        The threshold is ``threshold / fit.r0`` times the fitted R0, uncertain with it; else a fixed number.

    Returns
    -------
    Crossing
        Exposures in hours since coating; infinite where the curve or its band never reaches the
        threshold (no decline, or a decline not significant at 1 sigma).
    """
    threshold = float(_as_reflectances(threshold, "threshold")[0])
    start = fit.cleaning_exposure_h[-1] if fit.cleaning_exposure_h else 0.0
    _, last_cleaning = _prepare(fit, [start], None)
    params = _params(fit)
    covariance = np.array(fit.covariance)
    # R(E) - threshold = margin - b E and its gradient g(E) = g0 + E g1, both linear in E on this segment.
    margin = float(predict(fit, [start])[0]) - threshold + fit.rate_per_hour * start
    g0 = _jacobian(params, np.array([0.0]), last_cleaning)[0]
    g1 = _jacobian(params, np.array([1.0]), last_cleaning)[0] - g0
    if follows_r0:  # the line k R0 has gradient k in R0's place, constant in E
        g0 = g0 - np.eye(params.size)[0] * (threshold / fit.r0)
    rate = fit.rate_per_hour
    real_roots = _real_roots(
        rate**2 - g1 @ covariance @ g1,
        -2.0 * (margin * rate + g0 @ covariance @ g1),
        margin**2 - g0 @ covariance @ g0,
    )

    def mean_minus_threshold(exposure: float) -> float:
        return margin - rate * exposure

    def sigma(exposure: float) -> float:
        gradient = g0 + exposure * g1
        return float(np.sqrt(max(gradient @ covariance @ gradient, 0.0)))

    def first_reach(side: float) -> float:
        if mean_minus_threshold(start) + side * sigma(start) <= 0:
            return start
        # A root of the quadratic lies on the lower band where the mean is above the threshold, on the
        # upper band where it is below.
        # (A band of no width, from readings on a perfect line, gives a double root on both at once.)
        tolerance = 1e-9 * abs(margin)
        candidates = [r for r in real_roots if r > start and -side * mean_minus_threshold(r) >= -tolerance]
        return float(candidates[0]) if candidates else float("inf")

    central = start if mean_minus_threshold(start) <= 0 else (margin / rate if rate > 0 else float("inf"))
    return Crossing(exposure_h=float(central), early_h=first_reach(-1.0), late_h=first_reach(1.0))


def _real_roots(a: float, b: float, c: float) -> list[float]:
    """Real roots of ``a x^2 + b x + c``, smallest first.

    The cancellation-free form ``q = -(b + sign(b) sqrt(b^2 - 4ac)) / 2``, roots ``q / a`` and ``c / q``
    (Press et al., Numerical Recipes, "Quadratic and cubic equations", from memory). A discriminant
    below zero by no more than rounding (a band of no width touching the threshold) counts as zero, so
    a double root is found rather than lost as a pair of complex ones.
    """
    if a == 0.0:
        return [-c / b] if b != 0.0 else []
    discriminant = b * b - 4.0 * a * c
    if discriminant < 0.0:
        if -discriminant > 1e-10 * max(b * b, abs(4.0 * a * c)):
            return []
        discriminant = 0.0
    q = -0.5 * (b + math.copysign(math.sqrt(discriminant), b))
    if q == 0.0:  # b = 0 and c = 0: both roots at zero
        return [0.0, 0.0]
    return sorted([q / a, c / q])


def throughput_loss_mag(r_now: Sequence[float], r_fresh: Sequence[float]) -> float:
    """Loss of an optical train's throughput in magnitudes, from each mirror's reflectance.

    ``-2.5 log10(prod(r_now) / prod(r_fresh))``: the train's throughput is the product of its mirrors'
    reflectances, and a flux ratio in magnitudes is ``-2.5 log10`` of it (Pogson's magnitude scale).

    Parameters
    ----------
    r_now : sequence of float
        Present reflectance of each mirror in the train, (0, 1].
    r_fresh : sequence of float
        Fresh-coating reflectance of the same mirrors, same order, (0, 1].

    Returns
    -------
    float
        Magnitudes lost (positive when the train is dimmer than fresh).
    """
    now = _as_reflectances(r_now, "present reflectances")
    fresh = _as_reflectances(r_fresh, "fresh reflectances")
    if now.size == 0 or now.size != fresh.size:
        raise ValueError(f"need one present and one fresh reflectance per mirror; got {now.size} and {fresh.size}")
    if np.any(now == 0) or np.any(fresh == 0):
        raise ValueError("a reflectance of 0 has no magnitude: every mirror must reflect something")
    return float(-2.5 * np.sum(np.log10(now) - np.log10(fresh)))
