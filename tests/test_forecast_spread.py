"""The forecast band's month-to-month spread (calc.forecast.months_left_out, monthly_spread) and what the recompute
makes of it.

A band must not be narrowed by a month judged against a fraction fitted from itself, nor swing with the one night
logged so far in the current month. Each complete past month is compared with the same calendar month of the other
years (leave-one-out cross-validation: M. Stone, J. R. Statist. Soc. B 36 (1974) 111-147, from memory); a month the
log holds on fewer than 20 nights, and the month still being logged, are left out.

Outside references: hand arithmetic beside each case; a plain-Python loop over (year, month) groups with
``statistics.stdev`` and ``scipy.stats.tstd`` (the sample standard deviation, n - 1) that share no code with the
vectorised functions.
"""
from __future__ import annotations

import datetime as dt
import math
import statistics
from collections import defaultdict

import numpy as np
import pytest
from conftest import constant_sky
from scipy import stats

from observatory_ops.calc.forecast import (
    MIN_MONTHS_FOR_SPREAD,
    MIN_NIGHTS_FOR_HISTORY,
    PRIOR_MONTHLY_SPREAD,
    monthly_open_fraction,
    monthly_spread,
    months_left_out,
)


def _key(year: int, month: int) -> int:
    """A (year, month) as months since January 1970, as numpy's datetime64[M] counts them."""
    return int(np.datetime64(f"{year:04d}-{month:02d}", "M").astype(int))


def _log(*months: tuple[int, int, int, float, float]) -> tuple[list[int], list[float], list[float]]:
    """Nights of (year, month, nights, open hours each, dark hours each)."""
    keys, opened, dark = [], [], []
    for year, month, count, open_h, dark_h in months:
        keys += [_key(year, month)] * count
        opened += [open_h] * count
        dark += [dark_h] * count
    return keys, opened, dark


def test_each_month_is_compared_with_the_same_month_of_the_other_years():
    # January 2025: 31 nights, 4 of 10 dark hours open each; January 2026: 31 nights, 5 of 10.
    keys, opened, dark = _log((2025, 1, 31, 4.0, 10.0), (2026, 1, 31, 5.0, 10.0))
    actual, expected = months_left_out(keys, opened, dark, first_incomplete=_key(2026, 2))
    # Jan 2025 against Jan 2026's fraction 155 / 310 = 0.5: expected 310 x 0.5 = 155, actual 124.
    # Jan 2026 against Jan 2025's fraction 124 / 310 = 0.4: expected 310 x 0.4 = 124, actual 155.
    np.testing.assert_allclose(actual, [124.0, 155.0], rtol=1e-12)
    np.testing.assert_allclose(expected, [155.0, 124.0], rtol=1e-12)


def test_a_month_opened_in_twilight_is_compared_with_its_fraction_above_1_as_the_forecast_makes_it():
    # January 2025: 12 of 10 dark hours open (opened in twilight); January 2026: 11 of 10. Hand arithmetic of the
    # project's own model (common practice, no published source): no cap at 1, as monthly_open_fraction.
    keys, opened, dark = _log((2025, 1, 31, 12.0, 10.0), (2026, 1, 31, 11.0, 10.0))
    actual, expected = months_left_out(keys, opened, dark, first_incomplete=_key(2026, 2))
    np.testing.assert_allclose(expected, [310.0 * 1.1, 310.0 * 1.2], rtol=1e-12)
    np.testing.assert_allclose(actual, [372.0, 341.0], rtol=1e-12)


def test_with_one_year_of_log_no_month_is_compared_and_the_band_keeps_the_prior():
    """With one year each month's own fraction would match it exactly: every ratio 1, a spread of 0 and no band."""
    keys, opened, dark = _log(*((2025, m, 28, 3.0 + m / 4, 10.0) for m in range(1, 13)))
    months = [k % 12 + 1 for k in keys]
    own, _ = monthly_open_fraction(months, opened, dark)
    in_sample = [sum(o for k, o in zip(keys, opened, strict=True) if k == key)
                 / (own[key % 12] * sum(d for k, d in zip(keys, dark, strict=True) if k == key))
                 for key in sorted(set(keys))]
    assert in_sample == pytest.approx([1.0] * 12)  # what the band was made of before: all on the model
    actual, expected = months_left_out(keys, opened, dark, first_incomplete=_key(2026, 1))
    assert actual.size == expected.size == 0
    assert monthly_spread(actual, expected) == PRIOR_MONTHLY_SPREAD


def test_the_month_still_being_logged_and_thinly_logged_months_are_left_out():
    keys, opened, dark = _log(
        (2025, 3, 31, 4.0, 10.0), (2026, 3, 31, 5.0, 10.0),  # both compared
        (2025, 4, MIN_NIGHTS_FOR_HISTORY - 1, 4.0, 10.0),  # 19 nights: too few of its own, and too few for 2026's
        (2026, 4, 30, 6.0, 10.0),
        (2026, 5, 1, 9.0, 10.0),  # the current month: one night so far, left out altogether
        (2025, 5, 31, 4.0, 10.0),  # no other May to compare it with, so left out too
    )
    actual, expected = months_left_out(keys, opened, dark, first_incomplete=_key(2026, 5))
    np.testing.assert_allclose(actual, [124.0, 155.0], rtol=1e-12)  # March 2025 and March 2026 only
    np.testing.assert_allclose(expected, [155.0, 124.0], rtol=1e-12)


def _reference_ratios(keys, opened, dark, first_incomplete) -> list[float]:
    """Plain Python: group the complete months by (year, month), then each group against the sums of the other
    years' same month."""
    groups: dict[int, list[tuple[float, float]]] = defaultdict(list)
    for key, open_h, dark_h in zip(keys, opened, dark, strict=True):
        if key < first_incomplete:
            groups[key].append((open_h, dark_h))
    ratios = []
    for key in sorted(groups):
        others = [night for other, nights in groups.items() if other != key and other % 12 == key % 12
                  for night in nights]
        if len(groups[key]) < 20 or len(others) < 20:
            continue
        other_dark = math.fsum(d for _, d in others)
        if other_dark <= 0:
            continue
        fraction = min(math.fsum(o for o, _ in others) / other_dark, 1.0)
        expected = fraction * math.fsum(d for _, d in groups[key])
        if expected > 0:
            ratios.append(math.fsum(o for o, _ in groups[key]) / expected)
    return ratios


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_the_spread_matches_a_plain_python_leave_one_out_and_scipy_tstd(seed):
    """Three years and a bit of an invented log with gaps: random open and dark hours, months of 5 to 31 nights."""
    rng = np.random.default_rng(seed)
    keys, opened, dark = [], [], []
    for key in range(_key(2023, 1), _key(2026, 4) + 1):
        count = int(rng.integers(5, 32))
        keys += [key] * count
        dark += rng.uniform(6, 12, count).tolist()
        opened += (np.array(dark[-count:]) * rng.uniform(0, 1, count) * (rng.uniform(size=count) < 0.6)).tolist()
    first_incomplete = _key(2026, 4)
    reference = [r - 1 for r in _reference_ratios(keys, opened, dark, first_incomplete)]
    actual, expected = months_left_out(keys, opened, dark, first_incomplete)
    np.testing.assert_allclose(actual / expected - 1, reference, rtol=1e-12)
    assert len(reference) >= MIN_MONTHS_FOR_SPREAD
    spread = monthly_spread(actual, expected)
    assert spread == pytest.approx(statistics.stdev(reference), rel=1e-12)
    assert spread == pytest.approx(stats.tstd(reference), rel=1e-12)


# --- the recompute's usage model -------------------------------------------------------------------------------------


@pytest.fixture
def flat_site(db):
    """A site with a constant sky (10 dark hours every night) cached from two years back to past the horizon."""
    from observatory_ops.planning.services import HORIZON_DAYS
    from observatory_ops.registry.models import Site

    site = Site.objects.create(name="Flatland", slug="flatland", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    first = TODAY - dt.timedelta(days=800)
    constant_sky(site, first, first + dt.timedelta(days=800 + HORIZON_DAYS + 4))
    return site


TODAY = dt.date(2026, 6, 2)


def _usage_log(nights: list[dt.date], open_hours: list[float]):
    from observatory_ops.planning import metrics
    from observatory_ops.planning.services import UsageLog

    columns = {field: np.zeros(len(nights)) for field in metrics.USAGE_FIELDS.values()}
    columns["open_hours"] = np.array(open_hours, dtype=float)
    return UsageLog(np.array(nights, dtype="datetime64[D]"), columns, np.full(len(nights), np.nan))


def _two_years(rng) -> tuple[list[dt.date], list[float]]:
    """1 Jun 2024 to 31 May 2026, every night logged, open 0 to 10 h at random."""
    first = dt.date(2024, 6, 1)
    nights = [first + dt.timedelta(days=i) for i in range((dt.date(2026, 6, 1) - first).days)]
    return nights, rng.uniform(0, 10, len(nights)).round(2).tolist()


def test_one_night_of_the_current_month_does_not_move_the_band(flat_site):
    from observatory_ops.planning.services import forecast_model

    nights, opened = _two_years(np.random.default_rng(5))
    before = forecast_model(flat_site, _usage_log(nights, opened), TODAY)
    for lone_night in (0.0, 10.0):  # 1 Jun 2026, the one night logged of June so far, dome shut or open all night
        after = forecast_model(flat_site, _usage_log([*nights, dt.date(2026, 6, 1)], [*opened, lone_night]), TODAY)
        assert after.spread == before.spread
    assert before.spread_months == 24  # every month of both years, each against the other year's
    assert f"this site's month-to-month spread {before.spread:.0%} (24 complete months" in before.basis


def test_one_year_of_log_keeps_the_prior_band_and_says_so(flat_site):
    from observatory_ops.planning.services import forecast_model

    nights, opened = _two_years(np.random.default_rng(6))
    model = forecast_model(flat_site, _usage_log(nights[-365:], opened[-365:]), TODAY)
    assert model.spread == PRIOR_MONTHLY_SPREAD and model.spread_months == 0
    assert "one-sigma band (about 68 %) from a prior month-to-month spread of 35%" in model.basis
    assert "divided by the square root of the months to the limit" in model.basis
