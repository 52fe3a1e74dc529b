"""Mirror state and recoat planning: the shell around calc.coating, calc.reflectance and calc.windows.

``mirror_forecast`` gathers a mirror's coatings, cleanings and measurements and the site's log, and
returns every figure the mirror page, the command and the API show, each with how it was obtained.
"""
from __future__ import annotations

import bisect
import datetime as dt
import functools
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import F, Q, prefetch_related_objects
from django.utils import timezone

from observatory_ops.calc import coating, forecast, reflectance, windows
from observatory_ops.calc.exposure import running_totals, total_between
from observatory_ops.calc.triggers import LATER, OVERDUE
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.logbook.quantities import reflectance_text
from observatory_ops.logbook.services import date_problem, reading_withdraw, service_record_log, withdrawn_mark
from observatory_ops.planning import metrics
from observatory_ops.planning.models import BookedRun, Closure, NightSky, ServicePlan
from observatory_ops.planning.services import (
    Downtime,
    UsageLog,
    UsageModel,
    band_start,
    downtime_days,
    downtimes_of,
    forecast_model,
    recoat_downtime,
    recoats_in_hand,
    site_recompute,
    site_sky_refresh,
    site_today,
    usage_model,
    without_downtime,
)
from observatory_ops.registry.catalogue import (
    HAND_BACK_AFTER_REALIGNMENT,
    KINDS,
    PIN_AXES,
    RELEASE,
    RELEASE_AT_REINSTALL,
    out_of_balance_tag,
)
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.registry.selectors import crew_days_off
from observatory_ops.registry.services import retired_work_problem
from observatory_ops.workorders.cautions import HAZARDS
from observatory_ops.workorders.models import RequiredReading, State, WorkOrder, WorkOrderItem
from observatory_ops.workorders.selectors import came_out_on, recoat_began_on, telescopes_out
from observatory_ops.workorders.services import brake_air_back, steps_in_groups

from .models import TRAIN_KINDS, CleaningEvent, CoatingEvent, Mirror, RecoatPlan, ReflectanceMeasurement

#: Weight of a night inside a booked run that is not blocked: it costs this many times more to lose.
#: A setting of our own, chosen so a booked night outweighs any unbooked one; change it to taste.
BOOKED_WEIGHT = 5.0


@dataclass
class MirrorForecast:
    mirror: Mirror
    coated_on: dt.date | None
    recipe: str
    fresh_band: float | None  # computed from the coating recipe (characteristic-matrix method)
    fresh_basis: str
    exposure_now_h: float  # dust-weighted open hours since the coating, to the last logged night before today
    exposure_logged_to: dt.date | None = None  # that last logged night; None when none is logged since the coating
    points: list[tuple[dt.date, float, float]] = field(default_factory=list)  # (date, exposure, reflectance)
    # The exposure of each measurement in ``points``, by its pk: the mirror page lists it, the x of its dot.
    exposure_by_measurement: dict[int, float] = field(default_factory=dict)
    cleanings: list[tuple[dt.date, float]] = field(default_factory=list)  # (date, exposure)
    fit: reflectance.DeclineFit | None = None
    fit_note: str = ""
    # The fit's recovery per cleaning and its sigma, None (never NaN) when the data cannot tell it; then
    # ``recovery_note`` says why, in the words the page and the command print.
    recovery_fraction: float | None = None
    recovery_sigma: float | None = None
    recovery_note: str = ""
    cleaning_note: str = ""  # set when a cleaning is left out of the estimate until a measurement follows it
    # (date, exposure) of the cleaning whose exposure is c_last(E) in the estimate now; None when the estimate
    # counts no cleaning (then c_last = 0, the coating).
    cleaning_counted: tuple[dt.date, float] | None = None
    current: float | None = None
    threshold: float | None = None
    threshold_basis: str = ""
    crossing_exposure_h: float | None = None
    crossing: dt.date | None = None
    crossing_earliest: dt.date | None = None
    crossing_latest: dt.date | None = None
    dust_hours_per_day: float = 0.0
    # Past nights after the last logged one (and after the coating) up to yesterday, counted at the expected rate
    # before the crossing is forecast, as the plans count them (planning.services.forecast_model).
    unlogged_nights: int = 0
    log_note: str = ""  # what the telescope's log is made of, where its site logs per telescope (``UsageLog.note``)
    #: The coming nights the forecast counts no dust on: its telescope out (a closure, another mirror's recoat), as
    #: the plans count them (``planning.services.without_downtime``); "" when none.
    downtime_note: str = ""
    latest_note: str = ""  # the latest measurement against the fitted line (``_latest_against_the_fit``)
    # The first logged night when the coating predates it, else None: the nights from the coating to it are not
    # logged, so every exposure here counts from it (``log_start_note``), and the measurements and cleanings dated on
    # or before it have no known exposure: left out of the fit (``unlogged_measurements``, ``unlogged_cleanings``).
    log_begins: dt.date | None = None
    unlogged_measurements: list[ReflectanceMeasurement] = field(default_factory=list)
    unlogged_cleanings: list[dt.date] = field(default_factory=list)

    @property
    def rate_size(self) -> float | None:
        """The size of the fitted rate b, for a formula that writes its sign apart ("+ 1.39e-04" for a b below 0)."""
        return None if self.fit is None else abs(self.fit.rate_per_hour)

    @property
    def exposure_since(self) -> str:
        """Where this mirror's dust-weighted exposures count from, as the page's labels say it: "the coating", or "the
        first logged night" when the coating predates the log (``log_begins``)."""
        return "the first logged night" if self.log_begins else "the coating"

    @property
    def log_gap_text(self) -> str:
        """Which nights before the log are not logged, in the words of a plan's basis for the same gap
        (``planning.services._before_the_log``); "" when the log covers the coating."""
        if self.log_begins is None:
            return ""
        nights = (self.log_begins - self.coated_on).days
        return (f"the usage log begins on {self.log_begins:%d %b %Y}; the {nights} night{'s' if nights != 1 else ''} "
                f"from the coating of {self.coated_on:%d %b %Y} to then are not logged")

    @property
    def left_out_note(self) -> str:
        """The measurements and cleanings left out of the fit because their exposure since the coating is not known,
        how many, their dates and why; "" when none is."""
        if not (self.unlogged_measurements or self.unlogged_cleanings):
            return ""
        what = []
        if n := len(self.unlogged_measurements):
            dated = "; ".join(f"{m.measured_on:%d %b %Y}, {reflectance_text(m.value)}"
                              for m in self.unlogged_measurements)
            what.append(f"{n} band measurement{'s' if n != 1 else ''} ({dated})")
        if k := len(self.unlogged_cleanings):
            dated = "; ".join(f"{day:%d %b %Y}" for day in self.unlogged_cleanings)
            what.append(f"{k} cleaning{'s' if k != 1 else ''} ({dated})")
        return (f"Left out of the fit: {' and '.join(what)}, dated on or before the first logged night, so their "
                f"dust-weighted exposure since the coating is not known: {self.log_gap_text}. Log those nights and "
                "they are fitted.")

    @property
    def log_start_note(self) -> str:
        """How a fit counts exposure from the first logged night when the coating predates the log, and what that does
        to its figures; "" when the log covers the coating or there is no fit.

        With the missed exposure U the same for every fitted reading, R0 - b (E + U) = (R0 - b U) - b E: the least
        squares slope is the same whatever U is, and the intercept takes R0 - b U. A cleaning's recovery term,
        b f (c + U), does not reduce so: f is fitted as if the cleaning came U hours earlier."""
        if self.log_begins is None or self.fit is None:
            return ""
        note = (
            f"E is counted from the first logged night, {self.log_begins:%d %b %Y}, not from the coating: "
            f"{self.log_gap_text}, so every E here (each measurement's and today's) misses their exposure, the same "
            "unknown amount for each. The slope b is fitted from the logged nights and does not depend on it; the "
            "intercept R0 absorbs it (the fit gives R0 less b times the missed hours), so R0 is the reflectance at "
            "the first logged night, not the fresh value"
        )
        if self.recovery_fraction is None:
            return (f"{note}, and the estimate now, taken along the same line, already allows for them. The recoat "
                    "line is taken from the computed fresh value, as the loss it allows is a fall from fresh.")
        return (f"{note}. The recovery per cleaning f is fitted against cleaning exposures that miss the same hours, "
                "so it is not corrected for them. The recoat line is taken from the computed fresh value, as the loss "
                "it allows is a fall from fresh.")


def _coating_band(mirror: Mirror, metal: str, layers: list[dict]) -> float:
    stack = tuple((x["material"], float(x["thickness_nm"])) for x in layers)
    return _band_mean(metal, stack, mirror.band_from_nm, mirror.band_to_nm)


@functools.lru_cache(maxsize=256)
def _band_mean(metal: str, stack: tuple[tuple[str, float], ...], from_nm: float, to_nm: float) -> float:
    """Band-mean reflectance of a fresh coating; a pure function of its recipe, so kept once computed."""
    layers = [coating.Layer(material, thickness) for material, thickness in stack]
    return coating.coating_curve(metal, layers, from_nm=from_nm, to_nm=to_nm, step_nm=5)["band_mean"]


def _exposure_at(log: UsageLog, per_night: np.ndarray, since: dt.date, days: list[dt.date]) -> np.ndarray:
    """Dust-weighted hours from the night of ``since`` up to (not including) the night of each day: the count of
    ``calc.exposure.total_between``, a coating on day D counting from the night of D."""
    return total_between(log.nights, running_totals(per_night), since, np.array(days, dtype="datetime64[D]"))


def _last_logged_night(log: UsageLog, since: dt.date, before: dt.date) -> dt.date | None:
    """The last night in the log from the night of ``since`` to the night before ``before``: the last one
    ``_exposure_at`` counts for ``before``."""
    start, end = np.searchsorted(log.nights, np.array([since, before], dtype="datetime64[D]"))
    return log.nights[end - 1].astype(dt.date) if end > start else None


def _r0_is(state: MirrorForecast) -> str:
    """What the fitted R0 is: the fresh value, or where the coating predates the log the reflectance at the first
    logged night, from which the fit counts exposure (``MirrorForecast.log_start_note``)."""
    if state.log_begins is None:
        return "fresh value"
    return (f"value at the first logged night ({state.log_begins:%d %b %Y}; the nights from the coating to then are "
            "not logged),")


def _loss_basis(mirror: Mirror) -> str:
    """Where the recoat loss fraction comes from, in the model's help-text wording."""
    if mirror.recoat_loss == Mirror._meta.get_field("recoat_loss").default:
        return " (the default recoat loss: common practice, no published source)"
    return " (recoat loss set for this mirror; the default is common practice, no published source)"


def mirror_forecast(
    mirror: Mirror, today: dt.date | None = None, log: UsageLog | None = None, model: UsageModel | None = None,
    downtimes: list[Downtime] | None = None,
) -> MirrorForecast:
    """Fresh reflectance, fitted decline, current estimate, recoat threshold and its crossing date.

    ``log`` and ``model`` (expected usage from ``model.first_day``, on or before ``today``'s next day) and
    ``downtimes`` (its telescope's: ``planning.services.downtimes_of``) may be passed by a caller that has already read
    them, such as the site recompute; otherwise they are read here. The nights of a downtime count no dust, as the
    plans count them, but those of the mirror's own recoat, which renews it.
    """
    today = today or site_today(mirror.subsystem.telescope.site)
    # Through ``.all()``, so the site recompute's prefetched rows serve (see planning.services).
    last = max(mirror.coatings.all(), key=lambda c: (c.coated_on, c.pk), default=None)
    if last is None:
        return MirrorForecast(mirror, None, "", None, "no coating recorded", 0.0, fit_note="no coating recorded")
    fresh = _coating_band(mirror, last.metal, last.layers)
    log = log if log is not None else UsageLog.for_telescope(mirror.subsystem.telescope)
    per_night = log.per_night(metrics.DUST_HOURS, mirror.dust_sensitivity)
    measurements = sorted(
        (m for m in mirror.measurements.all()
         if m.measured_on >= last.coated_on and m.wavelength_nm is None and m.withdrawn_at is None),
        key=lambda m: (m.measured_on, m.pk),
    )
    # A coating before the first logged night: the exposure of a measurement or cleaning dated on or before that night
    # (it counts the nights before its date) is not known, as no night before it is logged; one dated later counts
    # from that night. The cleanings of unknown exposure are left out of the fit with the measurements.
    log_begins = log.nights[0].astype(dt.date) if len(log.nights) else None
    log_begins = log_begins if log_begins is not None and last.coated_on < log_begins else None
    known = [log_begins is None or m.measured_on > log_begins for m in measurements]
    cleanings = sorted(
        (c for c in mirror.cleanings.all() if c.cleaned_on >= last.coated_on), key=lambda c: (c.cleaned_on, c.pk)
    )
    unlogged_cleanings = [c.cleaned_on for c in cleanings if log_begins is not None and c.cleaned_on <= log_begins]
    cleanings = cleanings[len(unlogged_cleanings):]
    days = [m.measured_on for m in measurements] + [c.cleaned_on for c in cleanings] + [today]
    exposures = _exposure_at(log, per_night, last.coated_on, days)
    n, k = len(measurements), len(cleanings)
    placed = [(m, float(e)) for m, e, placed in zip(measurements, exposures[:n], known, strict=True) if placed]
    result = MirrorForecast(
        mirror=mirror, coated_on=last.coated_on, recipe=last.recipe, fresh_band=fresh,
        fresh_basis=f"{last.recipe}, {mirror.band_from_nm:g}-{mirror.band_to_nm:g} nm band mean, "
        "characteristic-matrix method with published optical constants",
        exposure_now_h=float(exposures[-1]), exposure_logged_to=_last_logged_night(log, last.coated_on, today),
        log_note=log.note,
        points=[(m.measured_on, e, m.value) for m, e in placed],
        exposure_by_measurement={m.pk: e for m, e in placed},
        cleanings=[(c.cleaned_on, float(e)) for c, e in zip(cleanings, exposures[n : n + k], strict=True)],
        log_begins=log_begins,
        unlogged_measurements=[m for m, placed in zip(measurements, known, strict=True) if not placed],
        unlogged_cleanings=unlogged_cleanings,
    )
    measured_h, measured = exposures[:n], [m.value for m in measurements]
    # A measurement follows the cleanings dated on or before it, and precedes one dated after it even at the same
    # exposure (no night logged between the two): by date, not by exposure. One marked as taken before its day's
    # cleaning (``before_cleaning``) precedes that day's cleanings too.
    cleaned_on = [c.cleaned_on for c in cleanings]
    cleanings_before = [(bisect.bisect_left if m.before_cleaning else bisect.bisect_right)(cleaned_on, m.measured_on)
                        for m in measurements]
    try:
        fit = reflectance.fit_decline(measured_h, measured, [c[1] for c in result.cleanings], cleanings_before,
                                      exposure_known=known)
        if not math.isfinite(fit.recovery_fraction) and fit.cleaning_exposure_h:
            # No measurement follows any cleaning, so no recovery can be fitted, and calc.reflectance will not
            # predict past a cleaning of unknown recovery: count none until one is measured (the earlier date).
            fit = reflectance.fit_decline(measured_h, measured, exposure_known=known)
            first, last_cleaned = result.cleanings[0][0], result.cleanings[-1][0]
            which = f"The cleaning of {first:%d %b %Y} is" if k == 1 else (
                f"The {k} cleanings from {first:%d %b %Y} to {last_cleaned:%d %b %Y} are"
            )
            result.cleaning_note = (
                f"{which} not counted yet: no measurement follows, so the estimate and the forecast assume no "
                "recovery from cleaning (the earlier date) until one is measured."
            )
    except ValueError as exc:
        result.fit_note = f"no fit yet: {exc}"
        result.threshold = fresh * (1 - mirror.recoat_loss)
        result.threshold_basis = f"{mirror.recoat_loss:.0%} below the computed fresh value{_loss_basis(mirror)}"
        return result
    result.fit = fit
    _recovery(result)
    result.current = float(reflectance.predict(fit, [result.exposure_now_h])[0])
    if fit.cleaning_exposure_h:  # the fit counts the cleanings: c_last(E) is the last one at or before now
        result.cleaning_counted = max(
            (c for c in result.cleanings if c[1] <= result.exposure_now_h), key=lambda c: (c[1], c[0]), default=None
        )
    result.latest_note = _latest_against_the_fit(result, [c for c, placed in zip(cleanings_before, known,
                                                                                strict=True) if placed])
    if not 0 < fit.r0 <= 1:
        # A wild measurement kept (0.3, asked about and confirmed) can tip the fitted R0 past any reflectance, and a
        # line that followed it would lie above 1, where no crossing is found (a bad-input review stopped the site's
        # recompute so): the line is then drawn from the computed fresh value, and the page says why (reflectance_now).
        result.threshold = fresh * (1 - mirror.recoat_loss)
        result.threshold_basis = (
            f"{mirror.recoat_loss:.0%} below the computed fresh value{_loss_basis(mirror)}: the fitted R0, "
            f"{reflectance_text(fit.r0)}, is no reflectance"
        )
    elif result.log_begins is None:
        result.threshold = fit.r0 * (1 - mirror.recoat_loss)
        result.threshold_basis = (
            f"{mirror.recoat_loss:.0%} below the fitted fresh value R0 = {reflectance_text(fit.r0)}, a fraction "
            f"of R0 (R0 \N{MULTIPLICATION SIGN} {1 - mirror.recoat_loss:g}), not points of reflectance"
            f"{_loss_basis(mirror)}"
        )
    else:  # R0 is the value at the first logged night, already below fresh: the loss is a fall from fresh
        result.threshold = fresh * (1 - mirror.recoat_loss)
        result.threshold_basis = (
            f"{mirror.recoat_loss:.0%} below the computed fresh value{_loss_basis(mirror)}; the fitted R0 is the value "
            f"at the first logged night ({result.log_begins:%d %b %Y}; the nights from the coating to then are not "
            "logged), not the fresh value"
        )
    # A line below the fitted R0 moves with it (its band counts R0's uncertainty); one below the computed fresh value
    # is a fixed number.
    crossing = reflectance.crossing_exposure(fit, result.threshold,
                                             follows_r0=result.log_begins is None and 0 < fit.r0 <= 1)
    result.crossing_exposure_h = crossing.exposure_h
    if model is None or model.first_day > today + dt.timedelta(days=1):  # a model made for a later day
        model = forecast_model(mirror.subsystem.telescope.site, log, today)
    # The nights after the last logged one (and after the coating) are taken as used at the expected rate, as the
    # plans take them: the forecast counts from the first of them, and a crossing among them is today.
    start = max(model.first_day, last.coated_on)
    if downtimes is None:  # the recompute passes them, its mirrors read without their telescope
        telescope = mirror.subsystem.telescope
        downtimes = downtimes_of(telescope.site, telescope.pk, False, today)
    out = [d for d in downtimes if d.mirror_id != mirror.pk]
    expected, said = without_downtime(model.expected(metrics.DUST_HOURS, mirror.dust_sensitivity), model.first_day,
                                      out)
    result.downtime_note = said.removeprefix("; ")
    expected = expected[(start - model.first_day).days :]
    unlogged = max((today - start).days, 0)
    # Said as the plans say it: the unlogged nights counted as used, those of a downtime not among them.
    out_days = downtime_days(out)
    result.unlogged_nights = sum(1 for i in range(unlogged) if start + dt.timedelta(days=i) not in out_days)
    result.dust_hours_per_day = float(expected[unlogged:][:30].mean())
    remaining = [x - result.exposure_now_h for x in (crossing.exposure_h, crossing.early_h, crossing.late_h)]
    offsets = [
        forecast.days_reached([r], expected)[0][0] if math.isfinite(r) else -1 for r in remaining
    ]
    central, early, late = (max(start + dt.timedelta(days=int(o)), today) if o >= 0 else None for o in offsets)
    result.crossing, result.crossing_earliest, result.crossing_latest = central, early, late
    return result


#: How far the latest measurement may lie from what the earlier measurements' fit expected, in multiples of their rms
#: about that fit, before the page says the mirror has left the fitted pattern (the usual three-sigma rule for an
#: outlying point; common practice, no published source for this use).
LATEST_OFF_FIT_RMS = 3.0


def _latest_against_the_fit(state: MirrorForecast, cleanings_before: list[int]) -> str:
    """The latest measurement beside the fitted line, so the estimate now is not mistaken for it. When the fit of the
    earlier measurements (the same model, ``calc.reflectance.fit_decline``) expected it more than
    ``LATEST_OFF_FIT_RMS`` times their rms away, also why the estimate still follows the fit: the fit takes every
    cleaning as recovering the same fraction f, so a cleaning that recovered more (or less) shows here first."""
    fit = state.fit
    measured_on, exposure, value = state.points[-1]
    on_line = float(reflectance.predict(fit, [exposure])[0])
    off = value - on_line
    said = (f"Latest measurement {reflectance_text(value)} on {measured_on:%d %b %Y}, {abs(off):.4f} "
            f"{'above' if off >= 0 else 'below'} the fitted line ({reflectance_text(on_line)} there); the fit's "
            f"scatter is rms {fit.residual_rms:.4f}.")
    earlier = state.points[:-1]
    try:
        before = reflectance.fit_decline([p[1] for p in earlier], [p[2] for p in earlier],
                                         [c[1] for c in state.cleanings], cleanings_before[:-1])
        expected = float(reflectance.predict(before, [exposure])[0])
    except ValueError:  # too few earlier measurements, or none after a cleaning: nothing to hold it against
        return said
    surprise = value - expected
    if abs(surprise) <= LATEST_OFF_FIT_RMS * before.residual_rms:
        return said
    cleaned = [day for day, _ in state.cleanings if day <= measured_on]
    first_after = cleaned and not any(cleaned[-1] <= m < measured_on for m, _, _ in earlier)
    why = (f" The cleaning of {cleaned[-1]:%d %b %Y} before it recovered {'more' if surprise > 0 else 'less'} than "
           "the fitted fraction f." if first_after and state.cleaning_counted else "")
    return (
        f"{said} The fit of the {len(earlier)} earlier measurements expected {reflectance_text(expected)}: it lies "
        f"{abs(surprise):.4f} {'above' if surprise > 0 else 'below'}, over {LATEST_OFF_FIT_RMS:g} times their rms "
        f"({before.residual_rms:.4f}).{why} The estimate and the forecast follow the fit of all {fit.n_points} "
        "measurements, which takes every cleaning as recovering the same fraction f; the next measurements show "
        "whether the mirror holds this level. If it was entered in error, withdraw it (beside it, below): the fit is "
        "then made without it."
    )


def _recovery(state: MirrorForecast) -> None:
    """Copy the fit's recovery per cleaning to the state; calc.reflectance marks an unknown one NaN."""
    fit = state.fit
    if math.isfinite(fit.recovery_fraction) and math.isfinite(fit.recovery_sigma):
        state.recovery_fraction, state.recovery_sigma = fit.recovery_fraction, fit.recovery_sigma
    elif state.cleanings:
        state.recovery_note = "not determined (no measurement after a cleaning yet)"
    else:
        state.recovery_note = "not determined (no cleaning since the coating yet)"


#: Where a train mirror's reflectance now comes from (``TrainMirror.source``).
ESTIMATE, MEASURED, ASSUMED_FRESH, LEFT_OUT = "estimate", "last measurement", "assumed fresh", "left out"


@dataclass(frozen=True)
class TrainMirror:
    """One mirror of an optical train as its throughput counts it: the reflectance used now and fresh (both
    None when it is left out of the total), where they come from (``source``) and why, in the page's words."""

    subsystem: Subsystem
    mirror: Mirror | None  # None: a mirror subsystem with no mirror record
    now: float | None
    fresh: float | None
    source: str
    basis: str

    @property
    def loss_mag(self) -> float | None:
        """This mirror's share of the train's loss (the train's is the sum of its mirrors')."""
        return None if self.now is None else reflectance.throughput_loss_mag([self.now], [self.fresh])


@dataclass(frozen=True)
class Throughput:
    """A telescope's optical train: throughput now and fresh (products of the counted mirrors' band reflectances)
    and the loss in magnitudes, -2.5 log10(T now / T fresh) (Pogson; ``calc.reflectance.throughput_loss_mag``)."""

    mirrors: list[TrainMirror]
    now: float | None = None
    fresh: float | None = None
    loss_mag: float | None = None

    @property
    def incomplete_note(self) -> str:
        """Why the total understates the loss: mirrors it takes as fresh or leaves out; "" when it counts them all."""
        assumed = [str(m.subsystem) for m in self.mirrors if m.source == ASSUMED_FRESH]
        left_out = [str(m.subsystem) for m in self.mirrors if m.source == LEFT_OUT]
        counted = [str(m.subsystem) for m in self.mirrors if m.now is not None]
        parts = []
        if assumed:
            parts.append(f"it takes {' and '.join(assumed)} as fresh, so counts no loss for "
                         f"{'it' if len(assumed) == 1 else 'them'}")
        if left_out:
            covers = f"covers {' and '.join(counted)} only" if counted else "covers no mirror"
            parts.append(f"it leaves out {' and '.join(left_out)}, so {covers}")
        if not parts:
            return ""
        return f"Incomplete: {'; '.join(parts)}. The train has likely lost more light than this."

    @property
    def above_fresh_note(self) -> str:
        """Which mirrors read above their fresh value, so count a gain: a reflectometer reading high, or a fresh value
        computed low for the coating as made; "" when none does."""
        above = [m for m in self.mirrors if m.now is not None and m.now > m.fresh]
        if not above:
            return ""
        named = "; ".join(
            f"{m.subsystem} {reflectance_text(m.now)} against {reflectance_text(m.fresh)} fresh" for m in above
        )
        return (
            f"Above fresh ({named}): counted as a gain, which a mirror cannot make. A reflectometer reading high, or a "
            "fresh value that the coating as made does not reach, would do it: check the instrument against its "
            "reference, or record the coating's own recipe. The recoat line follows the fresh value."
        )


class ReflectanceNow(NamedTuple):
    """A mirror's band reflectance now and fresh as its forecast gives them (both None without a coating), where
    they come from (``source``: ``ESTIMATE``, ``MEASURED``, ``ASSUMED_FRESH`` or ``LEFT_OUT``) and why, in words: the
    one wording of the mirror page's optical train and the subsystem page's recoat line
    (``planning.services._recoat_line_state``)."""

    now: float | None
    fresh: float | None
    source: str
    basis: str


def reflectance_now(state: MirrorForecast) -> ReflectanceNow:
    """The reflectance a mirror's forecast gives now and fresh, and where each comes from: the fit's estimate; the
    last measurement while there is no fit; the computed fresh value while nothing is measured since the coating."""
    if state.fresh_band is None:
        return ReflectanceNow(None, None, LEFT_OUT, "no coating recorded, so no fresh value: left out of the total")
    if state.fit is not None:
        fresh, against = state.fit.r0, f"against the fitted {_r0_is(state)} R0"
        if not 0 < fresh <= 1:  # a wild measurement (0.58 typed for 0.85) can tip the line past any reflectance
            fresh, against = state.fresh_band, (
                f"against the computed fresh value: the fitted R0, {reflectance_text(state.fit.r0)}, is no "
                "reflectance, so check the measurements (one entered in error is withdrawn on this page)"
            )
        elif state.log_begins is not None:
            # R0 at the first logged night is already below fresh, as the recoat line says: measured from it, the
            # train's loss "since fresh" read less than half of the loss (an onboarding review).
            fresh, against = state.fresh_band, (
                f"against the computed fresh value, as the recoat line: the fitted R0, {reflectance_text(state.fit.r0)}"
                ", is the value at the first logged night, not the fresh value"
            )
        since = (f"the coating of {state.coated_on:%d %b %Y}" if state.log_begins is None else
                 f"the first logged night, {state.log_begins:%d %b %Y}: {state.log_gap_text}")
        return ReflectanceNow(
            min(max(state.current, 0.0), 1.0), fresh, ESTIMATE,
            f"estimate from the fit at today's exposure ({state.exposure_now_h:,.1f} dust-weighted open hours since "
            f"{since}), {against}",
        )
    if latest := _latest_measured(state):
        measured_on, value = latest
        return ReflectanceNow(
            value, state.fresh_band, MEASURED,
            f"last measurement, {measured_on:%d %b %Y} ({state.fit_note}), against the computed fresh value",
        )
    return ReflectanceNow(
        state.fresh_band, state.fresh_band, ASSUMED_FRESH,
        f"computed fresh value assumed: not measured since its coating of {state.coated_on:%d %b %Y} "
        f"({state.fit_note})",
    )


def _latest_measured(state: MirrorForecast) -> tuple[dt.date, float] | None:
    """(date, value) of the latest band measurement since the coating, fitted or left out of the fit (its value is
    known even where its exposure is not); None when there is none."""
    dated = [(day, value) for day, _, value in state.points] + [
        (m.measured_on, m.value) for m in state.unlogged_measurements]
    return max(dated, key=lambda d: d[0], default=None)


#: What to do next for each reason ``calc.reflectance.fit_decline`` gives for no fit (its named reasons, which start
#: the message ``MirrorForecast.fit_note`` quotes), in plain words; ``_NEXT_MEASUREMENT`` for any other.
_NEXT_MEASUREMENT = ("Log a band reflectance measurement after some observing nights; take each on a different night "
                     "from the last, with observing (dust exposure) between them.")
_FIT_ADVICE = (
    (reflectance.SAME_EXPOSURE,
     "The measurements so far were all taken at the same dust exposure: on one night, or with no observing logged "
     "between them. Log the next one on a later night, after some observing nights since the last."),
    (reflectance.RECOVERY_NOT_SEPARATED,
     "The measurements cannot yet tell what a cleaning recovers from the fresh reflectance: log them on different "
     "nights with observing (dust exposure) between them, and at the next cleaning one just before it and one soon "
     "after."),
    (reflectance.NO_DECLINE,
     "The measurements show no decline yet: log another after more observing nights."),
    (reflectance.EXPOSURE_NOT_KNOWN,
     "Measurements dated on or before the first logged night have no place along the dust-weighted exposure (see "
     "the note on those left out): log the nights from the coating on, or log band measurements from now on, on "
     "different nights with observing (dust exposure) between them."),
)


def _fit_advice(fit_note: str) -> str:
    """What to measure next so the decline can be fitted, for the reason ``fit_note`` gives for no fit."""
    reason = fit_note.removeprefix("no fit yet: ")
    return next((advice for start, advice in _FIT_ADVICE if reason.startswith(start)), _NEXT_MEASUREMENT)


def _has_recoat_line(subsystem: Subsystem) -> bool:
    """The subsystem has an active plan with a recoat-line trigger (one query)."""
    return ServicePlan.objects.filter(subsystem=subsystem, active=True, triggers__metric=metrics.RECOAT_LINE).exists()


def no_estimate_text(state: MirrorForecast) -> str:
    """Why the mirror page has no estimate now, what the mirror's recoat-line trigger uses meanwhile when it has one
    (``reflectance_now``, the subsystem page's figure), and what to measure next; "" when there is an estimate (a
    fitted decline). At most one query (``_has_recoat_line``)."""
    if state.current is not None:
        return ""
    if state.coated_on is None:
        return ("No estimate: no coating recorded, so there is no fresh value for a decline to start from and no "
                "recoat line. Log the coating first.")
    meanwhile = reflectance_now(state)
    latest = _latest_measured(state)
    if latest is None:
        measured = f"no band reflectance measured since the coating of {state.coated_on:%d %b %Y}"
        used = f"the computed fresh value, {reflectance_text(meanwhile.now)}"
    else:
        n = len(state.points) + len(state.unlogged_measurements)
        measured = f"{n} band measurement{'s' if n != 1 else ''} since the coating of {state.coated_on:%d %b %Y}"
        used = f"the last measurement, {reflectance_text(meanwhile.now)} on {latest[0]:%d %b %Y}"
    trigger = (f" Until a decline is fitted, the recoat-line trigger (the subsystem page) uses {used}."
               if _has_recoat_line(state.mirror.subsystem) else "")
    return f"No estimate: {measured} ({state.fit_note}).{trigger} {_fit_advice(state.fit_note)}"


def _train_mirror(state: MirrorForecast) -> TrainMirror:
    """The reflectance a mirror's forecast gives the train now and fresh, and where each comes from."""
    return TrainMirror(state.mirror.subsystem, state.mirror, *reflectance_now(state))


def throughput(telescope: Telescope, today: dt.date | None = None) -> Throughput:
    """The telescope's optical train (``telescope_mirrors``), each mirror's reflectance now and fresh with where it
    comes from, and the train's throughput and loss over the mirrors that have figures."""
    recorded, unrecorded = telescope_mirrors(telescope)
    log = UsageLog.for_telescope(telescope) if recorded else None
    train = [_train_mirror(mirror_forecast(m, today, log)) for m in recorded] + [
        TrainMirror(s, None, None, None, LEFT_OUT, "no mirror record (coating and measurements): left out of the total")
        for s in unrecorded
    ]
    train.sort(key=lambda m: (TRAIN_KINDS.index(m.subsystem.kind) if m.subsystem.kind in TRAIN_KINDS
                              else len(TRAIN_KINDS), m.subsystem.name))
    counted = [m for m in train if m.now is not None]
    if not counted:
        return Throughput(train)
    now, fresh = [m.now for m in counted], [m.fresh for m in counted]
    return Throughput(train, float(np.prod(now)), float(np.prod(fresh)), reflectance.throughput_loss_mag(now, fresh))


def telescope_mirrors(telescope: Telescope) -> tuple[list[Mirror], list[Subsystem]]:
    """A telescope's optical train: the mirror records of its subsystems in service, and its mirror subsystems
    (``TRAIN_KINDS``) in service that have no mirror record."""
    in_service = Subsystem.objects.in_service().filter(telescope=telescope)
    return (
        list(Mirror.objects.filter(subsystem__in=in_service).select_related("subsystem__telescope__site")),
        list(in_service.filter(kind__in=TRAIN_KINDS, mirror__isnull=True).select_related("telescope")),
    )


# --- downtime windows -------------------------------------------------------------------------------


@dataclass(frozen=True)
class NightCost:
    night: dt.date
    moon_illumination: float
    moonless_dark_hours: float
    open_fraction: float
    booked: str
    cost: float
    #: The night's hours with the Sun below -18 deg (the sky cache); 0: no astronomical darkness, nothing to lose.
    dark_hours: float | None = None
    #: Why ``open_fraction`` is the prior (``calc.forecast.PRIOR_OPEN_FRACTION``), as the planner says it; "" when it
    #: is the month's own, from past years' nights.
    prior: str = ""
    #: The closure the night falls in ("F50 closed: mount overhaul", ``planning.models.Closure``): nothing is observed,
    #: so nothing is lost; "" when none.
    closed: str = ""


#: Why a month's open fraction is the prior (``calc.forecast.monthly_open_fraction``), as the recoat planner says it.
PRIOR_TOO_FEW_NIGHTS = "too few nights of this month logged"
PRIOR_NO_DARK_LOGGED = "no dark hours in the nights of this month logged"


def night_costs(site: Site, start: dt.date, horizon_days: int, telescope: Telescope | None = None,
                blocking: bool = True) -> list[NightCost]:
    """Cost to lose each coming night (``calc.windows.night_cost``): moonless dark hours x the month's open fraction; a
    booked run's nights ``BOOKED_WEIGHT`` times that, or, for a run booked as blocked, infinite, unless not
    ``blocking`` (the telescope out whatever the window: ``site_crew_windows``); a closed night nothing, unless a
    blocked run stands on it."""
    if horizon_days < 1:
        raise ValueError("the horizon must be at least one day")
    end = start + dt.timedelta(days=horizon_days - 1)
    site_sky_refresh(site, start, end)
    sky = list(NightSky.objects.filter(site=site, night__gte=start, night__lte=end).order_by("night"))
    # The open fraction of the telescope whose nights are lost (its own log), or of the site as a whole.
    log = UsageLog.for_telescope(telescope) if telescope else UsageLog.site_wide(site)
    # The share of dark hours open, at most all of them: hours open in twilight lose no dark hours.
    model = usage_model(site, log, start, 1)
    fraction = np.minimum(model.open_fraction, 1.0)
    # A month short of its own history takes the prior: said so beside the night's cost, with why.
    logged, _ = forecast.logged_per_month(log.nights[log.weather])
    prior = ["" if model.from_history[m] else PRIOR_TOO_FEW_NIGHTS
             if logged[m] < forecast.MIN_NIGHTS_FOR_HISTORY else PRIOR_NO_DARK_LOGGED for m in range(12)]
    runs = list(BookedRun.objects.filter(site=site, starts_on__lte=end, ends_on__gte=start))
    booked_name = ["" for _ in sky]
    blocked = np.zeros(len(sky), dtype=bool)
    expensive = np.zeros(len(sky), dtype=bool)
    for i, night in enumerate(sky):
        for run in runs:
            if run.starts_on <= night.night <= run.ends_on:
                booked_name[i] = run.title
                (blocked if run.blocked else expensive)[i] = True
    per_night_fraction = np.array([fraction[n.night.month - 1] for n in sky])
    moonless = np.array([n.moonless_dark_hours for n in sky])
    if not blocking:
        expensive, blocked = expensive | blocked, np.zeros(len(sky), dtype=bool)
    cost = windows.night_cost(moonless, per_night_fraction, expensive, BOOKED_WEIGHT)
    cost = np.where(blocked, np.inf, cost)
    # A night of a closure of the telescope (or of the whole site) loses nothing: it would not be observed. A run
    # booked as blocked on it stays blocked: the two contradict each other, and the run was booked to be kept.
    closed = ["" for _ in sky]
    for closure in Closure.objects.filter(site=site, first_night__lte=end, last_night__gte=start).filter(
            Q(telescope__isnull=True) | Q(telescope=telescope)).select_related("telescope"):
        for i, night in enumerate(sky):
            if closure.first_night <= night.night <= closure.last_night:
                closed[i] = f"{closure.whose} closed: {closure.reason}"
                cost[i] = cost[i] if blocked[i] else 0.0
    return [
        NightCost(n.night, n.moon_illumination, n.moonless_dark_hours, float(per_night_fraction[i]),
                  booked_name[i], float(cost[i]), dark_hours=n.dark_hours, prior=prior[n.night.month - 1],
                  closed=closed[i])
        for i, n in enumerate(sky)
    ]


def hours_lost(site: Site, first: dt.date, last: dt.date, telescope: Telescope | None = None
               ) -> tuple[float, float, float]:
    """(the usable moonless open hours lost, the hours of astronomical darkness, the moonless ones) of taking
    ``telescope`` (or the site) out of service on the nights ``first`` to ``last``, both counted. The first is each
    night's moonless dark hours x its month's open fraction (``night_costs``; nothing on a night of a closure), a
    booked run's nights at their own hours: not the planner's price of a window, which weighs a booked night
    ``BOOKED_WEIGHT`` times to steer clear of it (the runs on these nights are named beside the figure instead). The
    two others, said beside it, keep a reader from taking it for the dark time lost (a manager's review: 19.8 h read
    beside 182 h of darkness, 45.7 of them moonless)."""
    nights = night_costs(site, first, (last - first).days + 1, telescope)
    observed = [n for n in nights if not n.closed]
    lost = windows.night_cost([n.moonless_dark_hours for n in observed], [n.open_fraction for n in observed])
    return (float(lost.sum()), float(sum(n.dark_hours for n in nights)),
            float(sum(n.moonless_dark_hours for n in nights)))


def with_days_out(plans: list[RecoatPlan], today: dt.date) -> list[RecoatPlan]:
    """``plans`` (recoats in hand, with their mirror's telescope and site read), each given ``out``, the nights it
    takes its telescope out of service as its work orders now stand (``planning.services.recoat_downtime``);
    ``out_cost``, the hours lost on those nights (``hours_lost``) when they differ from its planned days, else None
    (its stored ``cost`` is theirs); ``out_lost``, those hours whatever its days, where ``cost`` is the planner's
    price (a booked night weighed more); and ``out_dark`` and ``out_moonless``, their hours of darkness and the
    moonless ones (a diff review: the price beside them read as more moonless hours lost than there were). What the
    dashboard, the mirror page and the recoat planner say of its days."""
    prefetch_related_objects(plans, "work_orders")  # a recoat's nights are its orders' (recoat_downtime)
    for plan in plans:
        plan.out = recoat_downtime(plan, today)
        plan.out_lost, plan.out_dark, plan.out_moonless = hours_lost(
            plan.mirror.subsystem.telescope.site, plan.out.first, plan.out.last, plan.mirror.subsystem.telescope)
        plan.out_cost = plan.out_lost if plan.out.changed else None
    return plans


def _dated(first_night: dt.date, window: windows.Window) -> dict:
    return {
        "start": first_night + dt.timedelta(days=window.start_index),
        "end": first_night + dt.timedelta(days=window.start_index + window.days - 1),
        "nights": window.days,
        "cost": round(window.cost, 3),
    }


def crew_windows(
    first_night: dt.date, cost: np.ndarray, phases: list[windows.Phase], crew_days: frozenset[int],
    days_off: Mapping[dt.date, str], alternatives: int = 3, lost_from_start: bool = False,
) -> list[dict]:
    """The cheapest windows for ``phases`` with the crew working ``crew_days`` and off on ``days_off`` (date ->
    note) (``calc.windows.cheapest_crew_windows``), cheapest first, each with its start and end dates, its phases'
    dates (``phase_dates``) and the days off that hold up its work at the telescope as (date, note) pairs: those
    inside the window but not while the mirror is away (transport, coating: calendar days, which a day off does not
    change). ``lost_from_start``: each window costs every night from ``first_night`` to its end (the mirror out)."""
    found = windows.cheapest_crew_windows(cost, phases, first_night.isoweekday(), crew_days, alternatives,
                                          days_off=_day_numbers(first_night, days_off),
                                          lost_from_start=lost_from_start)
    out = []
    for window in (_dated(first_night, w) for w in found):
        laid = phase_dates(window["start"], phases, crew_days, days_off)
        away = [(p["first"], p["last"]) for p in laid if not p["phase"].needs_crew]
        pausing = [(day, days_off[day]) for day in sorted(days_off) if window["start"] <= day <= window["end"]
                   and not any(first <= day <= last for first, last in away)]
        out.append({**window, "phases": laid, "days_off": pausing})
    return out


def site_crew_windows(
    site: Site, start: dt.date, horizon_days: int, phases: list[windows.Phase], alternatives: int = 3,
    telescope: Telescope | None = None, out_already: bool = False,
) -> tuple[list[NightCost], dict[dt.date, str], list[dict]]:
    """What the recoat planner and the ``windows`` command search at a site: each coming night's cost
    (``night_costs``), the site's crew days off in the horizon (date -> note), and the cheapest windows for
    ``phases`` with the site's crew (``crew_windows``), cheapest first. ``telescope``: the one taken out of service
    (the recoat planner), whose own open fraction prices its nights.

    ``out_already``: the telescope is out of service from ``start`` whatever the window (its mirror out,
    ``mirror_out``): each window costs every night from ``start`` to its end, so the soonest to end is the cheapest (a
    diff review was offered the window four months on, "4.4 hours", the telescope out all the while); a booked run
    cannot be observed before the mirror is back, so its nights are priced at ``BOOKED_WEIGHT`` times their hours, not
    blocked."""
    costs = night_costs(site, start, horizon_days, telescope, blocking=not out_already)
    days_off = crew_days_off(site, costs[0].night, costs[-1].night)
    found = crew_windows(costs[0].night, np.array([c.cost for c in costs]), phases, site.crew_days, days_off,
                         alternatives, lost_from_start=out_already)
    return costs, days_off, found


def phase_dates(
    starts_on: dt.date, phases: list[windows.Phase], crew_days: frozenset[int], days_off: Iterable[dt.date]
) -> list[dict]:
    """The first and last date of each phase that takes days, for work that may begin on ``starts_on``: a phase of
    crew work on the crew's working days, less ``days_off`` (``calc.windows.phase_days``), so it may begin later
    and pause over days off.
    """
    return [
        {"phase": laid.phase, "first": starts_on + dt.timedelta(days=laid.first),
         "last": starts_on + dt.timedelta(days=laid.last)}
        for laid in windows.phase_days(phases, starts_on.isoweekday(), crew_days,
                                       days_off=_day_numbers(starts_on, days_off))
        if laid.phase.days
    ]


def plan_out_of_step(plan: RecoatPlan) -> str:
    """For a recoat plan with work still to do: what changed since it was made, when the site's crew days (its
    weekdays or days off) would now put its phases on other days; "" when they fall as planned.

    The phases are laid out again from the plan's first day (``phase_dates``) and compared with the days stored
    when it was made; a phase whose name is not one of the planner's (``windows.RECOAT_PHASES``) is not checked.
    """
    if not plan.work_orders.filter(state__in=(State.DRAFT, State.ISSUED)).exists():
        return ""
    known = {p.name: p for p in windows.RECOAT_PHASES}
    if any(p["name"] not in known for p in plan.phases):
        return ""
    site = plan.mirror.subsystem.telescope.site
    phases = [windows.Phase(p["name"], p["days"], known[p["name"]].work) for p in plan.phases]
    days_off = crew_days_off(site, plan.starts_on)
    now = phase_dates(plan.starts_on, phases, site.crew_days, days_off)
    stored = [(dt.date.fromisoformat(p["first"]), dt.date.fromisoformat(p["last"])) for p in plan.phases]
    moved = [f"{laid['phase'].name} {laid['first']:%a %d %b} to {laid['last']:%a %d %b}"
             for laid, was in zip(now, stored, strict=True) if (laid["first"], laid["last"]) != was]
    if not moved:
        return ""
    inside = [f"{day:%a %d %b %Y}" + (f" ({note})" if note else "") for day, note in days_off.items()
              if plan.starts_on <= day <= plan.ends_on]
    listed = f" Days off now listed inside it: {'; '.join(inside)}." if inside else ""
    return (f"The crew's working days or days off have changed since this plan was made: laid out again from its "
            f"first day, {'; '.join(moved)}.{listed} Withdraw its orders still to do and plan the window again.")


def _day_numbers(first: dt.date, days: Iterable[dt.date]) -> list[int]:
    """``days`` from ``first`` on as day numbers counted from it (``first`` is day 0), as calc.windows takes them."""
    return [(day - first).days for day in days if day >= first]


def recoat_due(mirror: Mirror):
    """The due state (``planning.models.PlanStatus``) of the mirror's recoat plan due first, as the due list has it:
    by whichever of its triggers comes first (the recoat line, or the calendar days since the last coating); None
    when it has no recoat plan with a due state."""
    from observatory_ops.planning.models import PlanStatus

    states = PlanStatus.objects.filter(plan__in=recoat_plans(mirror.subsystem)).select_related("plan")
    return min(states, key=lambda s: (s.urgency, s.forecast_date or dt.date.max), default=None)


@dataclass
class RecoatComing:
    """A recoat to plan (``recoats_to_plan``): the mirror, its recoat plan's due state, the booked runs on the nights
    around its forecast day."""

    mirror: Mirror
    due: object  # planning.models.PlanStatus
    runs: list


def recoats_to_plan(site: Site, today: dt.date) -> list[RecoatComing]:
    """The site's mirrors in service whose recoat is one to plan now (``recoat_to_plan``: due, overdue or forecast
    within ``RECOAT_PLANNED_AHEAD_DAYS``, none in hand), soonest first, each with the booked runs over its forecast
    band (earliest to latest; overdue, the next ``DOWNTIME_MARGIN_DAYS`` days): the dashboard names them beside the
    recoats planned (a manager's review read "No recoat planned" seven weeks before a crossing forecast inside a
    booked campaign)."""
    coming = []
    mirrors = Mirror.objects.filter(subsystem__telescope__site=site, subsystem__retired_on__isnull=True).select_related(
        "subsystem__telescope__site")
    runs = list(BookedRun.objects.filter(site=site, ends_on__gte=today))
    for mirror in mirrors:
        due = recoat_due(mirror)
        if not recoat_to_plan(mirror, due, today):
            continue
        if due.status == OVERDUE:  # to be done now: the runs of the coming weeks stand in its way (a diff review)
            first, last = today, today + dt.timedelta(days=DOWNTIME_MARGIN_DAYS)
        else:
            first = due.earliest or due.forecast_date or today
            last = due.latest or due.forecast_date or first
        coming.append(RecoatComing(mirror, due, [r for r in runs if r.starts_on <= last and r.ends_on >= first]))
    return sorted(coming, key=lambda c: (c.due.forecast_date or dt.date.max, c.mirror.pk))


def _recoats_going_ahead(site: Site):
    """The site's recoats still going ahead (no order of theirs withdrawn: a withdrawn one stops the recoat), soonest
    first, with their mirror's subsystem and telescope."""
    return (
        RecoatPlan.objects.filter(mirror__subsystem__telescope__site=site).exclude(work_orders__state=State.WITHDRAWN)
        .select_related("mirror__subsystem__telescope__site").order_by("starts_on")
    )


def recoat_in_hand(mirror: Mirror) -> RecoatPlan | None:
    """The mirror's recoat in hand (``planning.services.recoats_in_hand``: an order of it drafted, issued or underway
    and none withdrawn, or one entered in the admin without orders whose days are not past), with its orders; None
    when there is none. A mirror has one recoat in hand at a time: another is refused until it is done or stopped (an
    order withdrawn), and the planner names it. The dashboard's "Downtime planned" and this read one list (a diff
    review saw a recoat entered in the admin there and the same mirror under "Recoats to plan")."""
    site = mirror.subsystem.telescope.site
    return next((plan for plan in recoats_in_hand(site, site_today(site)) if plan.mirror_id == mirror.pk), None)


def mirror_out(mirror: Mirror) -> WorkOrder | None:
    """The finished removal that took the mirror out of its telescope when no reinstall has put it back since
    (``workorders.selectors.telescopes_out``); None when it is in. A recoat stopped with its mirror out (an order after
    the removal withdrawn) leaves it so."""
    subsystem = mirror.subsystem
    return next((o.removal for o in telescopes_out([subsystem.telescope.site]) if o.subsystem_id == subsystem.pk),
                None)


@dataclass(frozen=True)
class PhasesLeft:
    """The phases the recoat planner offers for a mirror (``windows.RECOAT_PHASES``, by their place in it) and, when
    some are left out, why: ``removal`` is the finished removal of an earlier recoat the new one goes on from."""

    phases: tuple[tuple[int, windows.Phase], ...]
    removal: WorkOrder | None = None
    coating: CoatingEvent | None = None

    @property
    def orders_text(self) -> str:
        """The phases that get a work order, in order: "removal, strip and coat, reinstall, realignment and
        measurement"."""
        return ", ".join(p.name for _, p in self.phases if p.work)

    @property
    def text(self) -> str:
        """Why the planner leaves phases out, "" when it offers them all."""
        if self.removal is None:
            return ""
        said = (f"The mirror has been out of the telescope since {came_out_on(self.removal):%d %b %Y} (removed by "
                f"{self.removal.number} for an earlier recoat, which was stopped), so this recoat goes on from there "
                "with no removal")
        if self.coating is not None:
            said += (f"; it was coated on {self.coating.coated_on:%d %b %Y}, so no transport or strip and coat "
                     "either")
        return (f"{said}: {', '.join(p.name for _, p in self.phases)}. The telescope stays out of service, out of "
                "balance, until the reinstall is finished.")


def recoat_phases_left(mirror: Mirror) -> PhasesLeft:
    """The phases of the mirror's next recoat: all of them with the mirror in its cell; with it out since an earlier
    recoat was stopped (``mirror_out``), no removal (a hand-back walk-through planned a second recoat with the mirror
    still out: the planner asked for a removal, whose slews under power the page did not hold); and coated since it
    came out (a coating dated on or after that day), no transport or strip and coat either."""
    every = tuple(enumerate(windows.RECOAT_PHASES))
    removal = mirror_out(mirror)
    if removal is None:
        return PhasesLeft(every)
    coating = mirror.coatings.filter(coated_on__gte=came_out_on(removal)).order_by("-coated_on", "-pk").first()
    skipped = {"removal", "transport", "strip and coat"} if coating is not None else {"removal"}
    return PhasesLeft(tuple((i, p) for i, p in every if p.name not in skipped), removal, coating)


def orders_that_may_clean(mirror: Mirror) -> list[WorkOrder]:
    """The work orders still to do (drafted, issued or underway) on the mirror's subsystem that are no recoat phase:
    finishing each asks how the mirror was cleaned (``workorders.selectors.mirrors_asked_about``), and a cleaning
    recovers part of the loss. The forecast counts no cleaning not yet logged, so the page names them beside the
    crossing date: a reviewer planned a recoat five weeks too early, the cleaning already issued for the next day."""
    return list(
        WorkOrder.objects.filter(items__subsystem=mirror.subsystem, recoat_phase="",
                                 state__in=(State.DRAFT, State.ISSUED, State.UNDERWAY))
        .distinct().order_by(F("planned_date").asc(nulls_last=True), "pk")
    )


#: How far ahead a recoat is planned (a coating plant booked, the downtime chosen): the mirror page advises planning it
#: once a pending cleaning is logged only while its recoat plan is forecast within this many days (common practice,
#: no published source).
RECOAT_PLANNED_AHEAD_DAYS = 365


def recoat_to_plan(mirror: Mirror, due, today: dt.date) -> bool:
    """Whether the mirror's recoat is one to plan now: its recoat plan's due state (``recoat_due``) due, overdue or
    forecast within ``RECOAT_PLANNED_AHEAD_DAYS``, and no recoat in hand (``recoat_in_hand``). A walk-through read the
    advice to plan the recoat window on a mirror just recoated."""
    if due is None or recoat_in_hand(mirror) is not None:
        return False
    if due.status != LATER:
        return True
    return due.forecast_date is not None and due.forecast_date <= today + dt.timedelta(days=RECOAT_PLANNED_AHEAD_DAYS)


def orders_that_may_clean_text(orders: list[WorkOrder], planning: bool = True) -> str:
    """The sentence the mirror page and the recoat planner give for ``orders_that_may_clean``; "" for none.
    ``planning``: a recoat is to be planned (the planner; the mirror page: ``recoat_to_plan``), so the sentence ends
    by saying to plan it once the cleaning is logged."""
    if not orders:
        return ""
    named = ", ".join(
        f"{o.number} ({o.get_state_display().lower()}, "
        f"{f'planned {o.planned_date:%d %b %Y}' if o.planned_date else 'no day set'})" for o in orders
    )
    one = len(orders) == 1
    said = (f"Work still to do on this mirror may clean it: {named}. The forecast counts no cleaning until it is "
            f"logged (at {'its' if one else 'their'} finish): a cleaning there moves the crossing later")
    # A cleaning days before the mirror is stripped is work and consumables lost (a recoat review was told to clean
    # first, with the last CO2 cylinder): the sentence says both ways.
    return (f"{said}, so plan the recoat window once it is logged; or, if the mirror is to be recoated anyway, take "
            "the cleaning off that work: the new coating is a clean surface." if planning else f"{said}.")


#: How far past a recoat's last day a service plan's forecast may fall and still be offered for the recoat's downtime:
#: work due within two months is done while the telescope is down anyway (common practice, no published source).
DOWNTIME_MARGIN_DAYS = 60
#: How far before a recoat's first day a plan's forecast may fall and still be listed (not ticked) for its downtime:
#: sooner than that, it is the due list's, to be done when due (common practice, no published source).
DOWNTIME_EARLY_DAYS = 30


@dataclass(frozen=True)
class DowntimeOffer:
    """The other work a recoat's downtime could take (``due_in_downtime``): the due states of the telescope's other
    plans, and the day an order for them is planned (the realignment's first day: the mirror back and the telescope
    balanced, not yet back in service; the recoat's last day without one)."""

    states: list
    planned_on: dt.date
    margin_days: int = DOWNTIME_MARGIN_DAYS
    early_days: int = DOWNTIME_EARLY_DAYS


def due_in_downtime(plan: RecoatPlan) -> DowntimeOffer | None:
    """For a recoat in hand not yet over, the service plans of its telescope's other subsystems forecast from
    ``DOWNTIME_EARLY_DAYS`` before the day an order for them is planned to ``DOWNTIME_MARGIN_DAYS`` after the recoat's
    last day, and on no work order still to do: a site engineer folds them into
    the downtime rather than taking the telescope out again (a reviewer had to find them by hand on the due list).
    Overdue plans are not offered: they are done now, not put off to the downtime. Each state carries ``days_early``,
    how many days before the day the order would be planned (the realignment's first day) it comes due (0 when on or
    after it): the page ticks only those at 0, since folding in the others leaves them that late. None when the recoat
    is over (its last day gone, or its work all done or stopped) or nothing is offered."""
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.workorders.selectors import orders_for_plans  # mirrors builds on work orders

    if plan.mirror.subsystem.retired_on is not None:  # not recoated, so no downtime (``recoats_in_hand``)
        return None
    site = plan.mirror.subsystem.telescope.site
    today = site_today(site)
    orders = list(plan.work_orders.all())
    # Its days as its work orders now stand (a recoat re-dated was offered work for its planned days).
    out = recoat_downtime(plan, today)
    # Over once its last day has gone or its work is all done (or stopped): nothing is offered for it then.
    if out.last < today or not any(o.state in (State.DRAFT, State.ISSUED, State.UNDERWAY) for o in orders):
        return None
    realignment = next((o.planned_date for o in orders if o.recoat_phase == "realignment" and o.planned_date), None)
    # On the realignment's later days the offer plans for today: a day gone by is refused.
    planned_on = max(realignment or out.last, today)
    horizon = out.last + dt.timedelta(days=DOWNTIME_MARGIN_DAYS)
    states = list(
        PlanStatus.objects.filter(plan__subsystem__telescope=plan.mirror.subsystem.telescope, plan__active=True,
                                  forecast_date__lte=horizon,
                                  forecast_date__gte=planned_on - dt.timedelta(days=DOWNTIME_EARLY_DAYS))
        .exclude(plan__subsystem=plan.mirror.subsystem).exclude(status=OVERDUE)
        .select_related("plan__subsystem").order_by("forecast_date", "plan_id")
    )
    held = orders_for_plans(s.plan_id for s in states)
    states = [s for s in states if s.plan_id not in held]
    for state in states:  # how late the order, planned for ``planned_on``, does it (a walk-through: 8 days said, 21)
        state.days_early = max((planned_on - state.forecast_date).days, 0)
    if not states:
        return None
    return DowntimeOffer(states, planned_on)


def recoat_in_hand_text(plan: RecoatPlan) -> str:
    """Why another recoat of the mirror is not planned while ``plan`` is in hand (``recoat_in_hand``)."""
    out = recoat_downtime(plan, site_today(plan.mirror.subsystem.telescope.site))
    if not plan.work_orders.all():  # entered in the admin: it has no orders to finish or withdraw
        return (f"a recoat of this mirror is already planned, {_days_text(out.first, out.last)}, entered in the admin "
                "without work orders; delete it there (Recoat plans), or wait until its days are past, before "
                "planning another")
    numbers = ", ".join(o.number for o in sorted(plan.work_orders.all(), key=lambda o: o.pk))
    stand = " as its work orders now stand" if out.changed else ""
    return (f"a recoat of this mirror is already planned, {_days_text(out.first, out.last)}{stand} ({numbers}), and "
            "its work is not all done; finish it, or withdraw its work orders to stop it, before planning another")


def recoats_of_retired(site: Site) -> list[RecoatPlan]:
    """The site's recoats going ahead with work still to do on a mirror since retired (with the optical tube it is a
    part of, say): no longer counted as downtime (``planning.services.recoats_in_hand``), since a
    retired mirror is not recoated, and named on the dashboard so their orders are withdrawn. Each carries
    ``orders_to_do``, those orders. A review retired a tube and its primary's four draft recoat orders kept the
    telescope out of service on the dashboard and in the forecasts."""
    to_do = (State.DRAFT, State.ISSUED, State.UNDERWAY)
    plans = list(_recoats_going_ahead(site).filter(mirror__subsystem__retired_on__isnull=False,
                                                   work_orders__state__in=to_do).prefetch_related("work_orders").distinct())
    for plan in plans:
        plan.orders_to_do = sorted((o for o in plan.work_orders.all() if o.state in to_do), key=lambda o: o.pk)
    return plans


def _days_text(first: dt.date, last: dt.date) -> str:
    return f"{first:%d %b %Y}" if first == last else f"{first:%d %b %Y} to {last:%d %b %Y}"


@dataclass(frozen=True)
class RunOverRecoat:
    """A booked observing run falling on nights of a recoat going ahead (``runs_over_recoats``): ``first`` to ``last``
    are the nights of both, from today on, both counted."""

    plan: RecoatPlan
    run: BookedRun
    first: dt.date
    last: dt.date
    out: Downtime  # the recoat's nights as its work orders now stand (``recoat_downtime``)

    @property
    def nights(self) -> int:
        return (self.last - self.first).days + 1

    def _clash(self, recoat: str) -> str:
        run, nights = self.run, f"{self.nights} night{'s' if self.nights != 1 else ''}"
        booked = f"Booked run '{run.title}' ({_days_text(run.starts_on, run.ends_on)}"
        if (self.first, self.last) == (run.starts_on, run.ends_on):  # every night of the run: its dates say which
            said = f"{booked}{f', {nights}' if self.nights > 1 else ''}) falls wholly within {recoat}"
        else:
            said = f"{booked}) falls on {nights}, {_days_text(self.first, self.last)}, of {recoat}"
        if run.blocked:
            return (f"{said}: the run is marked as blocking downtime on its nights, so move the run or re-plan the "
                    "recoat.")
        return (f"{said}: the run is not marked as blocking downtime, so it loses those nights; move the run or "
                "re-plan the recoat, unless losing them is accepted.")

    @property
    def text(self) -> str:
        """The caution under the recoat, on the dashboard and the mirror's pages."""
        return self._clash("this recoat")

    @property
    def admin_text(self) -> str:
        """The admin's warning on saving the run: the recoat named as the site's pages name its subsystem, with its
        work orders (their states too)."""
        orders = ", ".join(f"{o.number} ({o.get_state_display().lower()})"
                           for o in sorted(self.plan.work_orders.all(), key=lambda o: o.pk))
        recoat = (f"the recoat of {self.plan.mirror.subsystem} planned {_days_text(self.out.first, self.out.last)}"
                  + (f" with work orders {orders}" if orders else " (no work orders)"))
        how = ("withdraw its work orders (which stops it) and plan it again on the mirror's recoat page" if orders
               else "delete this recoat plan in the admin (Recoat plans) and plan it again on the mirror's recoat page")
        return f"{self._clash(recoat)} The run is saved; to re-plan the recoat, {how}."


def runs_over_recoats(site: Site, today: dt.date, plans: list[RecoatPlan] | None = None) -> list[RunOverRecoat]:
    """The site's booked runs falling on nights of its recoats in hand (``planning.services.recoats_in_hand``),
    with the nights of both from ``today`` on (nights already past cannot be moved), soonest recoat first. The recoat
    planner keeps a new recoat off a blocked run's nights and prices an unblocked one's higher (``night_costs``), but
    a run booked, moved or blocked after the recoat was planned shows only here. Four queries, whatever the numbers.
    A run is booked at the site, so it is held against every telescope's recoat there, as the planner holds it."""
    plans = recoats_in_hand(site, today) if plans is None else plans  # a caller that has them read them once
    if not plans:
        return []
    prefetch_related_objects(plans, "work_orders")  # a recoat's nights are its orders' (recoat_downtime)
    out = {plan.pk: recoat_downtime(plan, today) for plan in plans}
    runs = list(
        BookedRun.objects.filter(
            site=site, ends_on__gte=max(today, min(d.first for d in out.values())),
            starts_on__lte=max(d.last for d in out.values()),
        ).order_by("starts_on", "pk")
    )
    found = []
    for plan in plans:
        for run in runs:
            first, last = max(out[plan.pk].first, run.starts_on, today), min(out[plan.pk].last, run.ends_on)
            if first <= last:
                found.append(RunOverRecoat(plan, run, first, last, out[plan.pk]))
    return found


def runs_over_each_recoat(
    site: Site, today: dt.date, plans: list[RecoatPlan] | None = None
) -> dict[int, list[RunOverRecoat]]:
    """``runs_over_recoats`` by recoat plan (its pk): the cautions each page lists under a recoat."""
    by_plan: dict[int, list[RunOverRecoat]] = {}
    for over in runs_over_recoats(site, today, plans):
        by_plan.setdefault(over.plan.pk, []).append(over)
    return by_plan


def _recoats_planned_at(site: Site, mirror: Mirror, first: dt.date, last: dt.date) -> list[RecoatPlan]:
    """The site's other mirrors' recoats in hand within [first, last] on their days as their work orders now stand
    (``recoat_downtime``): the crew is committed on those days, which the planner does not price, so it names them."""
    today = site_today(site)
    others = [plan for plan in recoats_in_hand(site, today) if plan.mirror_id != mirror.pk]
    prefetch_related_objects(others, "work_orders")  # a recoat's nights are its orders' (recoat_downtime)
    for plan in others:
        plan.out = recoat_downtime(plan, today)
    return [plan for plan in others if plan.out.first <= last and first <= plan.out.last]


def default_horizon_days(mirror: Mirror, today: dt.date) -> int:
    """Look no further than the day the mirror is forecast to cross its recoat line (late side), or the day its
    recoat plan is due (``recoat_due``: a calendar limit may come first), whichever is sooner."""
    due = recoat_due(mirror)
    ends = [day for day in (mirror_forecast(mirror, today).crossing_latest, due and due.forecast_date)
            if day is not None and day > today]
    return max(min((min(ends) - today).days, 3 * 366), 30) if ends else 365


def recoat_windows(mirror: Mirror, start: dt.date, horizon_days: int, phases: list[windows.Phase]) -> dict:
    """The cheapest windows for a recoat of these phases, and each coming night's cost for the calendar.

    The phases at the telescope are laid on the site's crew working days, less its crew days off in the horizon
    (``site_crew_windows``), so a window may hold more nights than the phases' days. The calendar's ``shade`` is
    the night's cost relative to the costliest night in the horizon (0..1); ``chosen`` marks the nights of the
    cheapest window; ``day_off`` a listed crew day off (``day_off_note`` says why) and ``crew_works`` a crew
    working weekday. ``days_off`` are the site's crew days off in the horizon, date -> note; ``crew_rest_days``
    the weekdays the crew does not work, in short words ("" when it works every day). ``booked_runs`` are the site's
    runs on nights of the horizon, each once, by their first night (two of one title stay apart).
    """
    days = windows.total_days(phases)
    site = mirror.subsystem.telescope.site
    out_already = mirror_out(mirror) is not None
    costs, days_off, found = site_crew_windows(site, start, horizon_days, phases, telescope=mirror.subsystem.telescope,
                                               out_already=out_already)
    crew = site.crew_days
    chosen = {found[0]["start"] + dt.timedelta(days=i) for i in range(found[0]["nights"])} if found else set()
    worst = max((c.cost for c in costs if np.isfinite(c.cost)), default=1.0) or 1.0
    calendar = [
        {"night": c.night, "cost": c.cost, "moon": c.moon_illumination, "booked": c.booked,
         "moonless": c.moonless_dark_hours, "open_fraction": c.open_fraction, "dark_hours": c.dark_hours,
         "prior": c.prior, "closed": c.closed,
         "weight": BOOKED_WEIGHT if c.booked and np.isfinite(c.cost) else None,
         "shade": min(c.cost / worst, 1.0) if np.isfinite(c.cost) else 1.0,
         "blocked": not np.isfinite(c.cost), "chosen": c.night in chosen,
         "day_off": c.night in days_off, "day_off_note": days_off.get(c.night, ""),
         "crew_works": c.night.isoweekday() in crew}
        for c in costs
    ]
    lead = (calendar[0]["night"].weekday()) if calendar else 0  # Monday-first weeks
    horizon_end = start + dt.timedelta(days=horizon_days - 1)
    booked_runs = list(BookedRun.objects.filter(site=site, starts_on__lte=horizon_end, ends_on__gte=start)
                       .order_by("starts_on", "pk"))
    due = recoat_due(mirror)
    committed = _recoats_planned_at(site, mirror, start, start + dt.timedelta(days=horizon_days))
    dark_hours = {c.night: c.dark_hours for c in costs}
    closed = {c.night for c in costs if c.closed}
    for window in found:  # a window starting after the recoat plan is due: the due list shows it overdue by then
        # With the mirror out, the recoat is under way: no window is "late" for it, each is priced from the start.
        window["late"] = bool(due and due.forecast_date and window["start"] > due.forecast_date) and not out_already
        window["waiting"] = (window["start"] - start).days if out_already else 0
        end = window["start"] + dt.timedelta(days=window["nights"] - 1)
        window["crew_committed"] = [p for p in committed if p.out.first <= end and window["start"] <= p.out.last]
        window["realignment_undark"] = _realignment_without_darkness(window["phases"], dark_hours)
        # Its nights that a closure takes anyway: out of service, but not lost to the recoat (they cost nothing).
        window["closed_nights"] = sum(1 for i in range(window["nights"])
                                      if window["start"] + dt.timedelta(days=i) in closed)
    return {"windows": found, "days": days, "calendar": calendar, "out_already": out_already,
            "lead_blanks": range(lead), "due": due, "committed": committed, "booked_runs": booked_runs,
            "days_off": days_off,
            "crew_rest_days": windows.weekdays_text(windows.EVERY_DAY - crew)}


def _realignment_without_darkness(laid: list[dict], dark_hours: dict[dt.date, float | None]) -> dict | None:
    """The realignment phase among ``laid`` (a window's phases on their days) when none of its nights has astronomical
    darkness (far from the equator in summer), else None: its checks on stars wait for the first dark night after it,
    or are done in twilight on a bright star, and the window's cost (nothing for such nights) does not say so."""
    for p in laid:
        if p["phase"].work == "realignment":
            nights = [p["first"] + dt.timedelta(days=i) for i in range((p["last"] - p["first"]).days + 1)]
            known = nights and all(n in dark_hours for n in nights)  # the horizon's nights: beyond it, unknown
            return p if known and not any(dark_hours[n] for n in nights) else None
    return None


# --- recoat plans -----------------------------------------------------------------------------------

class _PhaseWork(NamedTuple):
    """What one kind of recoat work (``calc.windows.Phase.work``) asks of its work order.

    ``before`` is done under power before isolation, ``locked`` with the energy locked out, ``after`` once
    the locked-out work is done; when the hazards call for isolation, the lockout step goes between the first
    two and ``release`` between the last two (``workorders.services.steps_in_groups``): the catalogue's step
    that removes the locks, or the phase's own words where the locks stay on or come off only on a condition.
    ``lifted`` says what the order's lifting figures are for:
    the mirror in its cell, the mirror alone, or nothing. ``at_telescope`` is False for work done with the
    mirror away from the telescope (at a coating plant): its order carries the phase's own hazards only, not
    the mirror subsystem's (a telescope that can move is not part of that work). ``brakes`` says that its lockout
    holds the axis brakes: the hazards of the telescope's brakes join its own (``_brakes_of``); ``balance_check``,
    that its locked-out work ends with the check of the balance, worded for those brakes (``_balance_check``).
    ``locks_stay_on``: its release leaves the locks on (the removal, until the reinstall), so nothing the lockout
    vented comes back with it; the other phases that isolate bring an air brake's air back after the release, as
    every order does (``workorders.services.brake_air_back``).
    """

    hazards: tuple[str, ...]
    before: tuple[str, ...]
    locked: tuple[str, ...]
    after: tuple[str, ...]
    tools: tuple[str, ...]
    release: str = RELEASE
    lifted: str = ""
    at_telescope: bool = True
    brakes: bool = False
    balance_check: bool = False
    locks_stay_on: bool = False


_WITH_CELL, _MIRROR_ONLY = "mirror and cell", "mirror alone"

# Between the removal and the reinstall the telescope stands for days without its heaviest part: the axes
# stay pinned, the telescope tagged out of service and out of robotic control, and the drives locked out
# (or powered only under the site's lockout procedure with the pins in). Telescope handling here is common
# practice, no published source; the site's mirror-removal procedure and the maker's instructions come first.
_OUT_OF_BALANCE_TAG = out_of_balance_tag("the reinstall order is finished")
_MIRROR_ONLY_LIFT = (
    "The lifting figures on this order are for the mirror and its cell together; the mirror lifted alone "
    "is a smaller load (the mirror mass row), so rig for the figures or for the mirror mass as the lift "
    "plan says."
)
class _Brakes(NamedTuple):
    """How the balance check words a telescope's axis brakes, and the hazards of the brakes that the phases locking
    them out add (``_PhaseWork.brakes``): ``held`` says why a braked axis shows nothing of its balance, ``release``
    how one axis's brake is released for the check, ``apply`` how it is applied again."""

    held: str
    release: str
    apply: str
    hazards: tuple[str, ...]


#: The catalogue's axis brakes (registry.catalogue.KINDS): both applied by springs, released by air or by their coil.
_AIR_BRAKE, _SPRING_BRAKE = "brake", "spring_brake"

#: The brakes' wording by the kinds registered in service on the telescope (``_brakes_of``). Applied by springs, they
#: hold an axis with their air vented or their power isolated whatever its balance, so an axis that stays put while
#: pinned or braked shows nothing. The pneumatic caution comes with an air brake ("When air returns the brakes
#: release"), and the stored-mechanical one with either (their springs stay loaded, OSHA 29 CFR 1910.147(d)(5)).
#: Without a registered brake the check follows the mount's own arrangement and adds no brake hazard, as nothing says
#: which. Common practice, no published source; the site's balancing procedure and the mount maker's instructions
#: come first.
_BRAKES = {
    frozenset({_AIR_BRAKE}): _Brakes(
        held="The brakes are applied by springs and released by air, so with the air vented they hold an axis "
        "whatever its balance",
        release="its air restored under the site's lockout procedure, or the maker's manual release",
        apply="vent its air and lock it out again",
        hazards=("pneumatic", "stored_mechanical"),  # its springs stay loaded with the air vented
    ),
    frozenset({_SPRING_BRAKE}): _Brakes(
        held="The brakes are applied by springs and released electrically, so with their power isolated they hold "
        "an axis whatever its balance",
        release="its brake power restored under the site's lockout procedure, or the maker's manual release",
        apply="isolate its power and lock it out again",
        hazards=("stored_mechanical",),
    ),
    frozenset({_AIR_BRAKE, _SPRING_BRAKE}): _Brakes(
        held="The brakes are applied by springs, some released by air and some electrically, so with the air vented "
        "and their power isolated they hold an axis whatever its balance",
        release="its air or its brake power, whichever releases it, restored under the site's lockout procedure, or "
        "the maker's manual release",
        apply="vent its air or isolate its power, whichever released it, and lock it out again",
        hazards=("pneumatic", "stored_mechanical"),
    ),
    frozenset(): _Brakes(
        held="No axis brake is registered for this telescope: follow the mount's own brake arrangement as its "
        "maker's instructions describe it (and have an engineer register its brakes, if it has any). A brake holds "
        "an axis whatever its balance",
        release="by the means the mount's brake arrangement gives, under the site's lockout procedure, or the "
        "maker's manual release",
        apply="by the same means, and lock it out again",
        hazards=(),
    ),
}


def _brakes_of(telescope: Telescope) -> _Brakes:
    """The wording and hazards of the telescope's axis brakes, by the kinds of brake it has in service."""
    kinds = Subsystem.objects.in_service().filter(telescope=telescope, kind__in=(_AIR_BRAKE, _SPRING_BRAKE))
    return _BRAKES[frozenset(kinds.values_list("kind", flat=True))]


def _balance_check(brakes: _Brakes) -> str:
    """The reinstall's check of the balance, releasing one axis's brake at a time under the site's procedure with
    the drives disabled and the axis restrained (common practice, no published source; the site's balancing
    procedure and the mount maker's instructions come first), in the words of the telescope's brakes."""
    return (
        "Check the balance one axis at a time, as the site's balancing procedure and the mount maker's "
        f"instructions say. {brakes.held}: never take a pinned or braked axis as balanced. For each axis: keep "
        "the drives locked out and disabled, everyone outside the swept volume, and the axis held or restrained "
        "as the procedure says, with its pin in; release that axis's brake only as the procedure says "
        f"({brakes.release}); draw the pin only when ready, and let the restraint out slowly to see whether the "
        f"axis turns under gravity. Then pin it and apply its brake again ({brakes.apply}) before checking the "
        "other axis, and correct the balance until neither axis turns."
    )


# How to leave the removal and the reinstall if their work stops part way (both take more than a day and may pause
# over the crew's days off) is a standing note of their orders, not a step to tick: workorders.selectors.standing_notes.
_PHASE_WORK = {
    "removal": _PhaseWork(
        # The drives and the brakes are locked out: their cautions (an axis out of balance swings when its brake
        # releases) belong on the sheet with the lift, the brakes' as the telescope's are registered.
        hazards=("suspended_load", "optical_surface", "moving_machinery", "height", "electrical"),
        before=(
            "Take the observatory out of robotic and remote control and close the enclosure.",
            "Point the tube at the zenith at its service position, so the cell can come out of the tube "
            "from below (or park as the site's mirror-removal procedure says, if it removes the mirror "
            "another way).",
        ),
        locked=(
            PIN_AXES,
            "Set the lifting table (or cart) under the cell, rated for at least the total suspended load in "
            "the lifting figures; a competent person checks the table and any rigging.",
            "Raise the lifting table (or take up the hoist) until it carries the cell's whole weight before any cell "
            "bolt is loosened. Then unbolt the cell from beside the tube: nobody stands or reaches under the cell "
            "while it is unbolted or lowered. Lower it, with the mirror in it, out of the tube onto the lifting table, "
            "and move it clear of the telescope.",
            f"Lift the mirror out of its cell with rated slings and place it face up in its transport crate. "
            f"{_MIRROR_ONLY_LIFT}",
            "The tube is now far out of balance: fit the balance weights the site's mirror-removal procedure "
            "gives, if it gives any, and keep both axes pinned either way.",
        ),
        release=(
            "When the phase's work is done and everyone is clear, leave both axes pinned and the drives locked "
            "out: do not take the locks off as at the end of other work. Replace each person's own lock with the "
            "site's long-term lock as its lockout procedure says, so the drives stay locked out until the reinstall."
        ),
        after=(
            _OUT_OF_BALANCE_TAG,
            "If the site needs power back before the reinstall, restore it only as the site's lockout "
            "procedure says, with both axes still pinned and the drives disabled; never release a brake or "
            "move an axis until the reinstall restores the balance.",
        ),
        tools=(
            "Lifting table or cart rated for at least the total suspended load (mirror and cell)",
            "Rated slings and shackles for the mirror lift, inspected before use",
            "Mirror-handling fixture",
            "Axis locking pins",
            "Balance weights, if the site's procedure uses them",
            "Transport crate",
            "Out-of-service tags",
        ),
        lifted=_WITH_CELL,
        brakes=True,
        locks_stay_on=True,
    ),
    "coating": _PhaseWork(
        hazards=("suspended_load", "chemical", "vacuum_plant", "optical_surface"),
        before=(),
        locked=(
            "If an outside coating plant does this work, the plant's own procedures, lift plans and safety "
            "rules apply to all work there and take precedence over the steps below.",
            "Before stripping, have the names of the stripping chemicals and their safety data sheets at "
            "hand: the coating plant chooses the chemicals, and this order cannot know which it uses. Write "
            "the chemicals' names here: ______________________",
            "Lift the mirror from its crate into the stripping tank, and later into the coating chamber, with "
            "rated slings or the plant's lifting fixture; a competent person checks the rigging. The lifting "
            "figures on this order are for the mirror alone: add the mass of the fixture or spreader used.",
            "Strip the old coating with those chemicals as their safety data sheets say.",
            "Coat to the recipe in the vacuum chamber, operated only by people trained on that plant and as "
            "its operating instructions say. Note each witness sample's reflectance, with the wavelength or band it "
            "was measured over, in this order's findings: it is the coating's, not a measurement of the mirror "
            "(the realignment order measures the mirror itself, as its reflectance reading).",
            "Lift the mirror back into its transport crate, face up, as the lifting figures say.",
            "Log the new coating (the day it was coated and its recipe) on the mirror's page, so its decline starts "
            "again, and copy the witness samples' reflectance from this order's findings into its note: this order "
            "is finished only once the coating is logged.",
        ),
        after=(),
        tools=(
            "Safety data sheets of the stripping chemicals named by the coating plant",
            "Personal protective equipment the safety data sheets call for",
            "Rated slings and shackles, or the coating plant's mirror-lifting fixture, inspected before use",
            "Witness samples",
        ),
        lifted=_MIRROR_ONLY,
        at_telescope=False,
    ),
    "reinstall": _PhaseWork(
        # The drives and the brakes are locked out: their cautions (an axis out of balance swings when its brake
        # releases) belong on the sheet with the lift, the brakes' as the telescope's are registered.
        hazards=("suspended_load", "optical_surface", "moving_machinery", "height", "electrical"),
        before=(
            "Check that the telescope is as the removal left it: both axes pinned with the tube at the "
            "zenith, tagged out of service, out of robotic and remote control (if the drives were powered "
            "since, the lockout step below isolates them again). Do not move an axis under power: the "
            "telescope is out of balance until this order restores the balance.",
        ),
        locked=(
            f"Lift the mirror from its crate into the cell with rated slings; set the support pads and clips. "
            f"{_MIRROR_ONLY_LIFT}",
            "Raise the cell on the lifting table into the tube from below, a competent person having checked the "
            "table and any rigging; keep the table carrying the cell's whole weight until every cell bolt is in and "
            "tightened, and work from beside the tube: nobody stands or reaches under the cell. Tighten the bolts to "
            "the torque and in the order that the site's mirror-reinstall procedure (or the cell maker) gives.",
            "Take off any balance weights fitted at the removal and restore the axis balance with the drives "
            "still locked out, as the site's balancing procedure and the mount maker's instructions say.",
        ),
        release=RELEASE_AT_REINSTALL,
        # The first moves come after the release and after the brake air is back (workorders.services.brake_air_back
        # puts that step straight after the release): never under power with the brakes still to be tested.
        after=(
            "Make the first moves under power slowly, with everyone outside the swept volume.",
            "Keep the observatory out of robotic and remote control until the realignment order is finished.",
        ),
        tools=(
            "Lifting table or cart rated for at least the total suspended load (mirror and cell)",
            "Rated slings and shackles for the mirror lift, inspected before use",
            "Mirror-handling fixture",
            "Torque wrench for the cell bolts",
            "The axis restraint the site's balancing procedure uses",
        ),
        lifted=_WITH_CELL,
        brakes=True,
        balance_check=True,
    ),
    "realignment": _PhaseWork(
        # The drives are locked out while the cell is adjusted: the lockout isolates the same energies as the
        # removal's and the reinstall's, so the same cautions go with it (electrical, and the brakes' own).
        hazards=("laser", "moving_machinery", "height", "electrical"),
        brakes=True,
        before=("Park the telescope at its service position.",),
        locked=(
            "Collimate with the alignment laser (laser controlled area posted), adjusting the cell with the "
            "drives locked out.",
            "Measure reflectance at the marked positions; record their mean as the reflectance reading, and each "
            "position's value in the findings.",
        ),
        # The check on a star runs under power with the enclosure open, the telescope and the dome moving: from the
        # control room or from outside the swept volume and the dome's path (common practice, no published source).
        after=(
            "At night, in weather fit to open, with everyone outside the telescope's swept volume and clear of the "
            "path of the dome and its shutter (or of the roll-off roof), open the enclosure from the control panel.",
            "Under power, from the control panel, with everyone still outside the swept volume and the dome's path, "
            "check the collimation on a star and record the result.",
            HAND_BACK_AFTER_REALIGNMENT,
        ),
        tools=("Alignment laser", "Reflectometer"),
    ),
}


def _phase_steps(subsystem: Subsystem, hazards: list[str], work: _PhaseWork, brakes: _Brakes) -> str:
    """A phase's steps for the mirror ``subsystem`` in the order of the work, the isolation placed as on every order;
    ``brakes`` are the telescope's (``_brakes_of``). A phase whose lockout holds the axis brakes vents the air of
    air-released ones (its pneumatic hazard), air point registered or not, so the air comes back after its release
    as after any order's."""
    locked = [*work.locked, _balance_check(brakes)] if work.balance_check else [*work.locked]
    vents_brakes = work.brakes and "pneumatic" in brakes.hazards
    air_back = not work.locks_stay_on and (vents_brakes or brake_air_back([subsystem], hazards, work.after))
    return "\n".join(steps_in_groups(hazards, [*work.before], locked, [*work.after], work.release, air_back))


def _phase_lift(mirror: Mirror, work: _PhaseWork) -> dict | None:
    """The lifting figures' inputs: the mirror in its cell, or alone (no cell, fixture not known here)."""
    if work.lifted == _WITH_CELL:
        return mirror.lift_inputs
    if work.lifted == _MIRROR_ONLY:
        return {**mirror.lift_inputs, "fixture_kg": 0.0}
    return None


def recoat_due_text(due) -> str:
    """The due state of a recoat plan (``recoat_due``) as the due list gives it: its status and the sentence of its
    governing trigger (``PlanStatus.reason``), for the mirror page and a recoat order's why."""
    when = f"due {due.forecast_date:%d %b %Y}" if due.forecast_date and due.status != OVERDUE else due.status
    return f"The recoat plan {due.plan.name} is {when} on the due list, by its first trigger: {due.reason}"


def _reflectance_reason(state: MirrorForecast) -> str:
    """The recoat line and the reflectance against it: the estimate below it, or the forecast crossing with its
    band, or why there is none."""
    if state.threshold is None:
        return f"No recoat line yet ({state.fit_note})"
    line = f"the recoat line {reflectance_text(state.threshold)}"
    if state.current is not None and state.current <= state.threshold:
        return (f"Reflectance estimated at {reflectance_text(state.current)}, already at or below {line}"
                f"{_fit_trace(state)}")
    if state.fit is None:
        return f"Recoat line {reflectance_text(state.threshold)}, no crossing forecast ({state.fit_note})"
    if state.crossing is None:
        return f"Reflectance not forecast to reach {line} within three years"
    # The early side is reached before the central date, so it is known whenever the central date is.
    early, late = state.crossing_earliest, state.crossing_latest
    if late is None:
        band = f"between {early:%d %b %Y} and beyond three years"
    else:
        band = f"between {band_start(early, late)} and {late:%d %b %Y}"
    return f"Reflectance forecast to reach {line} on {state.crossing:%d %b %Y} ({band}){_fit_trace(state)}"


def _fit_trace(state: MirrorForecast) -> str:
    """Where the reason's figures come from, for the order's paper (it keeps them as computed when it was made): the
    decline fit over its measurements as the mirror page gives it, the line's basis, and the exposure a day the
    forecast expects (a
    paper review: a recoat order said only "forecast to reach the recoat line 0.8285 on 22 Jan 2027"). "" without a
    fit."""
    if state.fit is None:
        return ""
    fit, cleaning = state.fit, state.cleaning_counted
    # As the mirror page writes it (its estimate's inputs): with a cleaning counted, the share f of the loss it won
    # back at its exposure c.
    counted = cleaning is not None and math.isfinite(fit.recovery_fraction)
    model, recovered = ("R0 - b x (E - f x c)", f", f {fit.recovery_fraction:.2f} at the cleaning of "
                        f"{cleaning[0]:%d %b %Y}, c {cleaning[1]:,.0f} h") if counted else ("R0 - b x E", "")
    rising = " (below zero: the fit rises with exposure)" if fit.rate_per_hour < 0 else ""
    trace = (f" [decline fit R = {model} over {fit.n_points} measurements: R0 {reflectance_text(fit.r0)}, "
             f"b {fit.rate_per_hour * 1000:.4f}{rising} per 1,000 dust-weighted open hours, E "
             f"{state.exposure_now_h:,.0f} h now{recovered}; the line {state.threshold_basis}")
    if state.dust_hours_per_day:
        trace += f"; about {state.dust_hours_per_day:.1f} dust-weighted open hours a day expected"
    return trace + "]"


def recoat_reason(state: MirrorForecast, starts_on: dt.date, ends_on: dt.date, due=None) -> str:
    """Why a recoat order exists, and the window. ``due``: the recoat plan's stored due state (``recoat_due``), None
    when there is none. Where its governing trigger is not the recoat line (a calendar limit, say), that trigger comes
    first as the due list words it (``recoat_due_text``) and the reflectance against the line after it; otherwise
    the recoat line it answers, with the forecast crossing and its band."""
    window = f"recoat window {starts_on:%d %b %Y} to {ends_on:%d %b %Y}"
    reflectance_said = _reflectance_reason(state)
    if due is None or due.metric == metrics.RECOAT_LINE:
        return f"{reflectance_said}; {window}"
    also = reflectance_said[0].lower() + reflectance_said[1:]
    return f"{recoat_due_text(due)} Also: {also}; {window}"


#: A recoat phase order's estimated hours for each day of its phase: one person's working day (our own planning
#: figure, no published source); the engineer edits the estimate where the crew or the plant's hours differ.
PHASE_DAY_HOURS = 8.0


def phase_estimate_basis(phase: windows.Phase) -> str:
    """Where a recoat phase order's estimated hours come from, as its page and paper say beside them."""
    days = f"{phase.days} day{'s' if phase.days != 1 else ''}"
    return f"{days} of the phase x {PHASE_DAY_HOURS:g} h, one person's working day (our own planning figure)"


def retired_recoat_text(mirror: Mirror) -> str:
    """Why no recoat is planned for ``mirror``, "" when one may be: its subsystem was retired (a review planned four
    draft orders on the primary of a tube retired weeks before)."""
    subsystem = mirror.subsystem
    if subsystem.retired_on is None:
        return ""
    return (f"{subsystem} was retired on {subsystem.retired_on:%d %b %Y}: a retired mirror is not recoated, so no "
            "recoat is planned for it")


def recoat_plan_create(
    mirror: Mirror, starts_on: dt.date, phases: list[windows.Phase], cost: float, by
) -> RecoatPlan:
    """Turn a chosen window into a recoat plan and one draft work order per hands-on phase; recompute.

    ``starts_on`` is the first day the work may begin. The phases are laid on the site's crew working days, less
    its crew days off (``phase_dates``): each order is dated on its phase's first day, a crew phase's on a working
    day, and the plan runs from the first phase's first day to the last one's last day (a window from
    ``recoat_windows`` begins with its first phase). The realignment order asks for a band reflectance reading of
    the new coating, and it carries the mirror's recoat service plans (``recoat_plans``, if any): the due list says
    they are on it, and finishing it restarts those the new coating did not (the coating's records come first:
    ``workorders.services._restarted_by_the_new_coating``). Refused for a retired mirror (``retired_recoat_text``).
    """
    if refused := retired_recoat_text(mirror):
        raise ValidationError(refused)
    left = recoat_phases_left(mirror)
    if [p.name for p in phases] != [p.name for _, p in left.phases]:
        raise ValidationError(left.text.rstrip(".") if left.removal is not None else
                              "the mirror is in its telescope: a recoat begins with its removal")
    subsystem = mirror.subsystem
    site = subsystem.telescope.site
    laid = phase_dates(starts_on, phases, site.crew_days, crew_days_off(site, starts_on))
    starts_on, ends_on = laid[0]["first"], laid[-1]["last"]
    realignment_plans = recoat_plans(subsystem) or [None]
    why = recoat_reason(mirror_forecast(mirror), starts_on, ends_on, recoat_due(mirror))
    brakes = _brakes_of(subsystem.telescope)
    with transaction.atomic():
        Mirror.objects.select_for_update().filter(pk=mirror.pk).exists()  # two submits at once take turns
        if in_hand := recoat_in_hand(mirror):
            raise ValidationError(recoat_in_hand_text(in_hand))
        plan = RecoatPlan.objects.create(
            mirror=mirror, starts_on=starts_on, ends_on=ends_on,
            phases=[{"name": d["phase"].name, "days": d["phase"].days, "first": d["first"].isoformat(),
                     "last": d["last"].isoformat()} for d in laid],
            cost=cost, created_by=by, continues_from=left.removal,
        )
        for dates in laid:
            phase = dates["phase"]
            kind = phase.work
            if kind in _PHASE_WORK:
                work = _PHASE_WORK[kind]
                own = {*work.hazards, *(brakes.hazards if work.brakes else ())}
                mirror_hazards = set(subsystem.hazards) if work.at_telescope else set()
                hazards = [h for h in HAZARDS if h in own | mirror_hazards]
                order = WorkOrder.objects.create(
                    site=subsystem.telescope.site, telescope=subsystem.telescope,
                    title=f"Recoat {subsystem.telescope.name} {subsystem.name}: {phase.name}",
                    planned_date=dates["first"],
                    estimated_hours=PHASE_DAY_HOURS * phase.days, estimate_basis=phase_estimate_basis(phase),
                    steps=_phase_steps(subsystem, hazards, work, brakes),
                    tools="\n".join(work.tools), hazards=hazards, at_telescope=work.at_telescope, recoat_phase=kind,
                    lift_inputs=_phase_lift(mirror, work) if "suspended_load" in hazards else None,
                    created_by=by,
                )
                for service_plan in realignment_plans if kind == "realignment" else [None]:
                    WorkOrderItem.objects.create(work_order=order, subsystem=subsystem, plan=service_plan, why=why)
                if kind == "realignment":
                    RequiredReading.objects.create(work_order=order, subsystem=subsystem, quantity="reflectance",
                                                   unit="fraction", limit_text=_expected_fresh(mirror))
                plan.work_orders.add(order)
        site_recompute(subsystem.telescope.site)
    return plan


def fresh_band_on(mirror: Mirror, day: dt.date) -> tuple[float, CoatingEvent] | None:
    """The fresh band-mean reflectance of the coating in force on ``day`` (the latest coated on or before it), with
    that coating; None before the first coating recorded."""
    coating = mirror.coatings.filter(coated_on__lte=day).order_by("-coated_on", "-pk").first()
    return (_coating_band(mirror, coating.metal, coating.layers), coating) if coating else None


def _expected_fresh(mirror: Mirror) -> str:
    """The realignment's reflectance row as it reads: the computed fresh band value of the mirror's newest coating,
    with its recipe. Made with the recoat plan from the coating it replaces, and written again when the new coating is
    logged (``coating_service_records_log``): a recoat review's realignment printed the old bare aluminium's 0.9032
    beside a reading of the new protected coating, whose fresh value is 0.83."""
    last = mirror.coatings.order_by("-coated_on", "-pk").first()
    if last is None:
        return ""
    value = reflectance_text(_coating_band(mirror, last.metal, last.layers))
    text = f"about {value} expected (computed fresh for {last.recipe})"
    return text if len(text) <= RequiredReading._meta.get_field("limit_text").max_length else (
        f"about {value} expected (computed fresh)")


# --- mirror events ------------------------------------------------------------------------------------


def _check_date(mirror: Mirror, day: dt.date, what: str, retired_refused: bool = True) -> None:
    """A mirror's dates follow the rule of every logged date (``logbook.services.date_problem``): not after today at
    the site, and no further back than a night may be; and, with ``retired_refused``, not after the day its subsystem
    was retired (``registry.services.retired_work_problem``), as its service work and readings."""
    problem = date_problem(mirror.subsystem.telescope.site, day, what)
    if problem is None and retired_refused:
        problem = retired_work_problem(mirror.subsystem, day, f"A {what.removesuffix(' date')}")
    if problem:
        raise ValidationError(problem)


def measurement_withdraw(measurement: ReflectanceMeasurement, by, reason: str) -> ReflectanceMeasurement:
    """Withdraw a measurement entered in error: it stays listed, marked with who withdrew it and why, and the decline
    fit leaves it out from now on (the site is recomputed). One filed from a logbook reading is withdrawn with its
    reading, as withdrawing the reading does (``logbook.services.reading_withdraw``)."""
    if measurement.reading_id is not None:
        reading_withdraw(measurement.reading, by, reason)
        measurement.refresh_from_db()
        return measurement
    reason = reason.strip()
    if not reason:
        raise ValidationError("say why the measurement is withdrawn (for example: 0.58 typed for 0.85)")
    with transaction.atomic():
        measurement = ReflectanceMeasurement.objects.select_for_update().get(pk=measurement.pk)
        if measurement.withdrawn_at is not None:
            raise ValidationError(f"this measurement was already withdrawn on {measurement.withdrawn_at:%d %b %Y}")
        withdrawn_mark([measurement], by, reason)
        site_recompute(measurement.mirror.subsystem.telescope.site)
    return measurement


def measurement_log(mirror: Mirror, by, measured_on: dt.date, value: float, **fields) -> ReflectanceMeasurement:
    """Append a band reflectance measurement and refresh the site's due states (the recoat line moves)."""
    _check_date(mirror, measured_on, "measurement date")
    if not 0 <= value <= 1:
        raise ValidationError("a reflectance is a fraction between 0 and 1")
    with transaction.atomic():
        measurement = ReflectanceMeasurement.objects.create(
            mirror=mirror, measured_on=measured_on, value=value, taken_by=by, **fields
        )
        site_recompute(mirror.subsystem.telescope.site)
    return measurement


def cleaning_log(
    mirror: Mirror, by, cleaned_on: dt.date, method: str, note: str = "", work_order=None
) -> CleaningEvent:
    """A cleaning: the decline fit counts its recovery, and the mirror's cleaning plans
    (``plans_a_cleaning_restarts``) restart their counting from it, as a coating restarts the recoat plans.
    ``work_order``: the order whose finishing records it, whose page and paper then show it; what the work orders of a
    retired mirror may still record is theirs to say, so its retire day is not held against it here."""
    _check_date(mirror, cleaned_on, "cleaning date", retired_refused=work_order is None)
    with transaction.atomic():
        cleaning = CleaningEvent.objects.create(
            mirror=mirror, cleaned_on=cleaned_on, method=method, note=note, work_order=work_order
        )
        cleaning_service_records_log(cleaning, by)
    return cleaning


def coating_log(mirror: Mirror, by, coated_on: dt.date, metal: str, layers: list[dict], note: str = "") -> CoatingEvent:
    """A new coating: the decline starts again from it, and the mirror's recoat plans restart their counting. Refused
    while a recoat in hand has not taken the mirror out (``coating_before_removal``)."""
    _check_date(mirror, coated_on, "coating date")
    if problem := coating_before_removal(mirror, coated_on):
        raise ValidationError(problem)
    with transaction.atomic():
        event = CoatingEvent.objects.create(mirror=mirror, coated_on=coated_on, metal=metal, layers=layers, note=note)
        coating_service_records_log(event, by)
    return event


def coating_before_removal(mirror: Mirror, coated_on: dt.date) -> str:
    """Why a coating of ``mirror`` dated ``coated_on`` is not logged yet, "" when it may be: a recoat in hand
    (``recoat_in_hand``) whose removal is not finished still has the mirror in the telescope with its old coating. A
    year's review logged the coating while the removal waited for its lifting figures: the cleaning plan restarted and
    came overdue while the old coating was still in, and the dusty weeks to the removal were charged to the new one.
    Before the removal is finished, a coating dated before the recoat was planned and before its first day (an old one
    entered late) is not this recoat's (``workorders.selectors.coating_unlogged`` takes the same day). Once the mirror
    is out, every coating is dated on or after the day it came out: a recoat review's slip of three days before it was
    taken for an old coating, restarted the plans and gave the old coating's last measurement to the new one."""
    plan = recoat_in_hand(mirror)
    if plan is None:
        return ""
    removal = plan.removal()
    if removal is None or removal.state == State.WITHDRAWN:
        return ""
    if removal.state in (State.FINISHED, State.COUNTERSIGNED):
        # Finished: the mirror came out on the day its work was done (a diff review dated a coating ten days before).
        done = came_out_on(removal)
        if coated_on >= done:
            return ""
        return (f"the mirror came out of the telescope on {done:%d %b %Y} ({removal.number}, its removal): a coating "
                f"of this recoat is dated on or after that day, not {coated_on:%d %b %Y}. An earlier coating entered "
                "late is logged once this recoat is finished")
    if coated_on < recoat_began_on(plan):
        return ""
    return (f"the mirror's removal for its recoat, {removal.number}, is {removal.get_state_display()}: the mirror is "
            "still in the telescope with its old coating. Log the new coating once the removal is finished and the "
            "mirror has been coated")


def recoat_plans(subsystem: Subsystem) -> list[ServicePlan]:
    """The subsystem's active recoat service plans: those with a recoat-line trigger.

    When none has one (an engineer removed the trigger), the plans named as its kind's catalogue plans
    with a recoat-line trigger. The plan's name alone is not trusted: a site may rename it.
    """
    plans = ServicePlan.objects.filter(subsystem=subsystem, active=True).order_by("pk")
    watched = list(plans.filter(triggers__metric=metrics.RECOAT_LINE).distinct())
    if watched:
        return watched
    spec = KINDS.get(subsystem.kind)
    names = [p.name for p in spec.plans if any(t[0] == metrics.RECOAT_LINE for t in p.triggers)] if spec else []
    return list(plans.filter(name__in=names))


def plans_a_cleaning_restarts(subsystem: Subsystem) -> list[ServicePlan]:
    """The mirror's cleaning plans: its active plans counting dust-weighted hours (the dust on the surface)."""
    cleaning = ServicePlan.objects.filter(subsystem=subsystem, active=True, triggers__metric=metrics.DUST_HOURS)
    return list(cleaning.distinct().order_by("pk"))


def plans_a_coating_restarts(subsystem: Subsystem) -> list[ServicePlan]:
    """The mirror's recoat plans (``recoat_plans``), then its cleaning plans (``plans_a_cleaning_restarts``),
    since a new coating is a clean surface."""
    return list(dict.fromkeys([*recoat_plans(subsystem), *plans_a_cleaning_restarts(subsystem)]))


def _plans_restart(
    subsystem: Subsystem, plans: list[ServicePlan], day: dt.date, by, summary: str
) -> list[ServiceRecord]:
    """A service record dated ``day`` for each plan, so each counts again from it; none for a plan that already
    has a record in force on that day (the work order that did the work wrote it), so it is idempotent. Each
    record recomputes the site (``service_record_log``). None after the day ``subsystem`` was retired: its plans are
    not counted, and its service work dated then is refused (a work order's finish may still record a cleaning)."""
    if subsystem.retired_on is not None and day > subsystem.retired_on:
        return []
    records = []
    for plan in plans:
        in_force = ServiceRecord.objects.filter(plan=plan, performed_on=day, void=False, corrected_by__isnull=True)
        if not in_force.exists():
            records.append(service_record_log(subsystem, plan, day, by, summary))
    return records


def coating_service_records_log(event: CoatingEvent, by) -> list[ServiceRecord]:
    """Restart the mirror's recoat plans from a coating, and its cleaning plans (those counting dust-weighted
    hours: a new coating is a clean surface): a service record for each, dated the coating date.

    Idempotent: a plan that already has a record in force on that date gets no second one. Every record
    recomputes the site (``service_record_log``); without such a plan the site is recomputed once here,
    since the new coating moves the mirror's recoat line all the same.
    """
    subsystem = event.mirror.subsystem
    summary = f"New coating: {event.recipe}"[:200]
    if (plan := recoat_in_hand(event.mirror)) is not None:  # its realignment expects the new coating's fresh value
        for row in RequiredReading.objects.filter(
            work_order__in=plan.work_orders.filter(recoat_phase="realignment").exclude(
                state__in=(State.FINISHED, State.COUNTERSIGNED, State.WITHDRAWN)),
            subsystem=subsystem, quantity="reflectance", reading__isnull=True,
            limit_text__contains="expected (computed fresh",  # as made: an engineer's own words stay
        ):
            row.limit_text = _expected_fresh(event.mirror)
            row.save(update_fields=["limit_text"])
    records = _plans_restart(subsystem, plans_a_coating_restarts(subsystem), event.coated_on, by, summary)
    if not records:
        site_recompute(subsystem.telescope.site)
    return records


def cleaning_service_records_log(cleaning: CleaningEvent, by) -> list[ServiceRecord]:
    """Restart the mirror's cleaning plans (``plans_a_cleaning_restarts``) from a cleaning: a service record for
    each, dated the cleaning date. The one path of a cleaning logged on the mirror page, on a work order or in the
    admin.

    Idempotent as ``coating_service_records_log``; without such a plan the site is recomputed once here, since
    the cleaning moves the mirror's decline all the same.
    """
    subsystem = cleaning.mirror.subsystem
    summary = f"Cleaning: {cleaning.get_method_display()}"[:200]
    records = _plans_restart(subsystem, plans_a_cleaning_restarts(subsystem), cleaning.cleaned_on, by, summary)
    if not records:
        site_recompute(subsystem.telescope.site)
    return records


def measurement_from_reading(reading: Reading) -> ReflectanceMeasurement | None:
    """File a reflectance reading of a mirror subsystem among the mirror's measurements (the decline fit).

    A reading is band-averaged (no wavelength), dated its local date at the site. Idempotent per reading;
    None for any other reading. The caller recomputes the site, as it does for the reading itself.
    """
    if reading.quantity != "reflectance":
        return None
    mirror = Mirror.objects.select_related("subsystem__telescope__site").filter(subsystem=reading.subsystem_id).first()
    if mirror is None:
        return None
    local_day = timezone.localtime(reading.taken_at, mirror.subsystem.telescope.site.zone).date()
    measurement, _ = ReflectanceMeasurement.objects.get_or_create(
        reading=reading,
        defaults={
            "mirror": mirror, "measured_on": local_day, "value": reading.value, "taken_by_id": reading.taken_by_id
        },
    )
    return measurement
