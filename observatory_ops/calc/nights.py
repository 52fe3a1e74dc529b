"""Sunset, sunrise, astronomical dusk and dawn, dark hours and the Moon for each night at a site.

A night belongs to the local date of its evening and spans local noon to the next local noon (DST
changes make that span 23 or 25 hours). Its events are the ones around the Sun's lower culmination
nearest local midnight: the setting before it and the rising after it.

How it is computed, for a whole range of nights at once:

1. astropy gives the apparent geocentric places of the Sun and the Moon and the local apparent sidereal
   time once per day at 00:00 UTC, in one array call; ERFA's IAU 2006/2000A matrix turns the places to
   the true equator and equinox of date, the frame of apparent sidereal time.
2. Between those daily nodes the hour angle (sidereal time minus right ascension, less the steady
   Earth rotation) and the declination and distance are cubic splines. Daily nodes keep the Moon
   within about 4 arcseconds of astropy's own place, the Sun within 0.001 arcsecond; it is what
   makes a site-year cost a fraction of a second (the Moon series is expensive per instant).
3. Event times come from the hour-angle formula of Meeus, refined by Newton steps that use the
   Sun's place at the current estimate of the event time.
4. Dark and moonless hours come from altitudes sampled every few minutes over each night, with the
   crossings inside a step found by linear interpolation.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass
from zoneinfo import ZoneInfo

import erfa
import numpy as np
from astropy import units as u
from astropy.coordinates import EarthLocation, get_body, get_sun
from astropy.time import Time
from numpy.typing import NDArray
from scipy.interpolate import CubicSpline

from observatory_ops.calc import astropy_offline
from observatory_ops.calc.night_of import zone as zone_named

astropy_offline.configure()

#: Altitude of the Sun's centre at sunset and sunrise, degrees: 34' of horizontal refraction and 16' of
#: semi-diameter below the geometric horizon (Meeus, Astronomical Algorithms, 2nd ed., ch. 15, h0 = -0.8333).
SUNSET_ALTITUDE_DEG = -50.0 / 60.0
#: Altitude of the Sun's centre that ends astronomical twilight, degrees, no refraction.
ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG = -18.0
#: The Moon counts as up while its topocentric centre is above the geometric horizon.
MOON_HORIZON_ALTITUDE_DEG = 0.0
#: Longest range of nights one call accepts: twenty years.
MAX_NIGHTS = 20 * 366

_SECONDS_PER_DAY = 86400.0
#: Rotation of the Earth relative to the equinox, radians per (UT) day (Meeus eq. 12.4: 360.98564736629 deg).
_SIDEREAL_RATE_RAD_PER_DAY = math.radians(360.98564736629)
#: Sampling of the dark-hour integration; crossings are interpolated inside a step, so 5 minutes keeps the
#: sums within seconds of the exact event times.
_SAMPLE_STEP_DAYS = 5.0 / 1440.0
#: Nights integrated together for dark hours (bounds memory on twenty-year ranges).
_NIGHTS_PER_BATCH = 366
#: Newton steps for event times; each one shrinks the error by more than a factor of 100 away from
#: grazing nights, so four leave it far below a second.
_EVENT_REFINEMENTS = 4
#: Spline nodes reach this many days beyond the nights so every event lies well inside the node range.
_NODE_MARGIN_DAYS = 3


@dataclass(frozen=True)
class Site:
    """Where the nights are computed.

    Parameters
    ----------
    latitude_deg : geodetic latitude, degrees north, -90..90.
    longitude_deg : longitude, degrees east, -180..180.
    elevation_m : height above the WGS84 ellipsoid, metres.
    time_zone : IANA time-zone name (``"America/Santiago"``) that sets the local dates and noons.

    Raises
    ------
    ValueError
        When a coordinate is out of range or not a number, or the time zone is unknown.
    """

    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    time_zone: str

    def __post_init__(self) -> None:
        _check_number("latitude", self.latitude_deg, 90.0)
        _check_number("longitude", self.longitude_deg, 180.0)
        _check_number("elevation", self.elevation_m, math.inf)
        zone_named(self.time_zone)


@dataclass(frozen=True, eq=False)
class NightTable:
    """One row per night; every attribute is a read-only numpy array of the same length.

    Attributes
    ----------
    dates : ``datetime64[D]``, the local date of each night's evening.
    sunset_utc, sunrise_utc : ``datetime64[s]`` UTC, Sun's centre at :data:`SUNSET_ALTITUDE_DEG`; NaT when the
        Sun stays above (midnight sun) or below (polar night) that altitude.
    dusk_utc, dawn_utc : ``datetime64[s]`` UTC, Sun's centre at :data:`ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG`; NaT
        when the Sun does not cross it.
    dark_hours : hours between local noon and the next local noon with the Sun below -18 deg.
    moon_illumination : illuminated fraction of the Moon's disc at local midnight, 0..1.
    moonless_dark_hours : the part of ``dark_hours`` with the Moon's centre below the horizon.
    """

    dates: NDArray[np.datetime64]
    sunset_utc: NDArray[np.datetime64]
    sunrise_utc: NDArray[np.datetime64]
    dusk_utc: NDArray[np.datetime64]
    dawn_utc: NDArray[np.datetime64]
    dark_hours: NDArray[np.float64]
    moon_illumination: NDArray[np.float64]
    moonless_dark_hours: NDArray[np.float64]

    def __post_init__(self) -> None:
        for value in vars(self).values():
            value.flags.writeable = False

    def to_records(self) -> list[dict[str, str | float | None]]:
        """The nights as JSON-ready dicts.

        Keys: ``date`` (``YYYY-MM-DD``), ``sunset``, ``sunrise``, ``dusk``, ``dawn`` (ISO 8601 UTC to the
        second ending in ``Z``, or None), ``dark_hours``, ``moon_illumination``, ``moonless_dark_hours``
        (floats rounded to 4 decimals).
        """
        events = {
            key: [None if text == "NaT" else text + "Z" for text in np.datetime_as_string(times, unit="s")]
            for key, times in (
                ("sunset", self.sunset_utc),
                ("sunrise", self.sunrise_utc),
                ("dusk", self.dusk_utc),
                ("dawn", self.dawn_utc),
            )
        }
        amounts = {
            key: np.round(values, 4).tolist()
            for key, values in (
                ("dark_hours", self.dark_hours),
                ("moon_illumination", self.moon_illumination),
                ("moonless_dark_hours", self.moonless_dark_hours),
            )
        }
        columns = {"date": np.datetime_as_string(self.dates, unit="D").tolist(), **events, **amounts}
        return [dict(zip(columns, row, strict=True)) for row in zip(*columns.values(), strict=True)]


def nights_for_range(site: Site, start: dt.date, days: int) -> NightTable:
    """Sun events, dark hours and Moon for ``days`` consecutive nights from the evening of ``start``.

    Method
    ------
    Apparent places of the Sun and Moon and the local apparent sidereal time from astropy (IAU 2006/2000A
    precession-nutation; ERFA's Sun and Moon series) at daily nodes, cubic splines between them. Event
    times by the hour-angle formula of Meeus, Astronomical Algorithms (2nd ed., 1998), ch. 15,
    ``cos H0 = (sin h0 - sin phi sin delta) / (cos phi cos delta)``, with no event when ``|cos H0| > 1``,
    refined by Newton steps with the Sun's place at the estimated event time. Dark and moonless hours by
    sampling altitudes every 5 minutes over each noon-to-noon span, the Moon's topocentric (parallax as
    the difference of geocentric vectors, Meeus ch. 40). Illuminated fraction from the elongation and
    phase angle, Meeus ch. 48.

    Parameters
    ----------
    site : the observing site.
    start : local date of the first night's evening.
    days : number of nights, 1..:data:`MAX_NIGHTS`.

    Returns
    -------
    NightTable

    Raises
    ------
    ValueError
        When ``start`` is not a date or ``days`` is out of range.
    """
    _check_range(start, days)
    zone = zone_named(site.time_zone)
    noons = _local_clock_days(zone, start, days + 1, 12)
    midnights = _local_clock_days(zone, start + dt.timedelta(days=1), days, 0)
    first_node = math.floor(noons[0]) - _NODE_MARGIN_DAYS
    nodes = np.arange(first_node, math.ceil(noons[-1]) + _NODE_MARGIN_DAYS + 1, dtype=float)
    sun, moon = _tracks(site, nodes)
    observer = _Observer.at(site)

    sunset, sunrise = _sun_crossings(sun, observer, midnights, SUNSET_ALTITUDE_DEG)
    dusk, dawn = _sun_crossings(sun, observer, midnights, ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG)
    dark_hours, moonless_dark_hours = _dark_hours(sun, moon, observer, noons)
    return NightTable(
        dates=np.datetime64(start, "D") + np.arange(days),
        sunset_utc=_to_datetime64(sunset),
        sunrise_utc=_to_datetime64(sunrise),
        dusk_utc=_to_datetime64(dusk),
        dawn_utc=_to_datetime64(dawn),
        dark_hours=dark_hours,
        moon_illumination=_illuminated_fraction(sun, moon, midnights),
        moonless_dark_hours=moonless_dark_hours,
    )


def sun_up_at_midnight(site: Site, nights: list[dt.date]) -> NDArray[np.bool_]:
    """Whether the Sun's centre stands above :data:`SUNSET_ALTITUDE_DEG` at the local midnight of each night (the
    midnight after the evening of each of ``nights``). On a night with neither sunset nor sunrise (NaT in
    :class:`NightTable`) it tells the two apart: True, the midnight sun (the Sun never sets); False, the polar night
    (it never rises).

    Method
    ------
    The Sun's apparent place and the local apparent sidereal time at each midnight from astropy, as
    :func:`nights_for_range` takes them at its daily nodes (no spline: the instants are evaluated directly), and the
    topocentric altitude of its centre as there. On a night with no crossing every instant of the night is on the
    same side of that altitude, so one instant decides.
    """
    if not nights:
        return np.zeros(0, dtype=bool)
    zone = zone_named(site.time_zone)
    midnights = np.array([_local_clock_days(zone, night + dt.timedelta(days=1), 1, 0)[0] for night in nights])
    times = Time(midnights * _SECONDS_PER_DAY, format="unix", scale="utc")
    sidereal = times.sidereal_time("apparent", longitude=site.longitude_deg * u.deg).rad
    terrestrial = times.tt
    to_true_equator = erfa.pnm06a(terrestrial.jd1, terrestrial.jd2)
    place = erfa.rxp(to_true_equator, get_sun(times).cartesian.xyz.to_value(u.km).T)
    right_ascension, declination, distance = erfa.p2s(place)
    altitude = _topocentric_altitude_deg(sidereal - right_ascension, declination, distance, _Observer.at(site))
    return altitude > SUNSET_ALTITUDE_DEG


# --- input checks -------------------------------------------------------------------------------


def _check_number(name: str, value: object, limit: float) -> None:
    """A number with ``|value| <= limit`` degrees; an infinite limit asks only for a finite number."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, not {value!r}") from None
    if not (math.isfinite(number) and abs(number) <= limit):
        allowed = "a finite number" if math.isinf(limit) else f"between -{limit:g} and {limit:g} degrees"
        raise ValueError(f"{name} must be {allowed}, not {value!r}")


def _check_range(start: dt.date, days: int) -> None:
    if isinstance(start, dt.datetime) or not isinstance(start, dt.date):
        raise ValueError(f"start must be a date (the evening of the first night), not {start!r}")
    if isinstance(days, bool) or not isinstance(days, (int, np.integer)):
        raise ValueError(f"number of nights must be a whole number, not {days!r}")
    if not 1 <= days <= MAX_NIGHTS:
        raise ValueError(f"number of nights must be between 1 and {MAX_NIGHTS}, not {days}")


# --- time ---------------------------------------------------------------------------------------
# Instants are float days since 1970-01-01T00:00 UTC (POSIX): exact to a microsecond over centuries.


def _local_clock_days(zone: ZoneInfo, first: dt.date, count: int, hour: int) -> NDArray[np.float64]:
    """The instants of ``hour``:00 local time on ``count`` consecutive dates.

    zoneinfo resolves DST per date; a wall time that does not exist (a change at midnight) is read
    with the offset before the change (PEP 495).
    """
    clock = dt.time(hour)
    seconds = [dt.datetime.combine(first + dt.timedelta(days=i), clock, zone).timestamp() for i in range(count)]
    return np.asarray(seconds) / _SECONDS_PER_DAY


def _to_datetime64(days: NDArray[np.float64]) -> NDArray[np.datetime64]:
    found = ~np.isnan(days)
    out = np.full(days.shape, np.datetime64("NaT"), dtype="datetime64[s]")
    out[found] = np.round(days[found] * _SECONDS_PER_DAY).astype(np.int64).astype("datetime64[s]")
    return out


# --- Sun and Moon -------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Track:
    """Apparent geocentric place of one body at the site's meridian, interpolated between daily nodes.

    The local hour angle is the steady Earth rotation plus a slow ``hour_angle_drift`` (minus the
    body's right ascension, plus nutation and UT1 wander), which is what the spline holds.
    """

    epoch_days: float
    hour_angle_drift_rad: CubicSpline
    declination_rad: CubicSpline
    distance_km: CubicSpline

    def hour_angle_rad(self, days: NDArray[np.float64]) -> NDArray[np.float64]:
        return _SIDEREAL_RATE_RAD_PER_DAY * (days - self.epoch_days) + self.hour_angle_drift_rad(days)

    def hour_angle_rate(self, days: NDArray[np.float64]) -> NDArray[np.float64]:
        """Radians per day."""
        return _SIDEREAL_RATE_RAD_PER_DAY + self.hour_angle_drift_rad(days, 1)


def _tracks(site: Site, nodes: NDArray[np.float64]) -> tuple[_Track, _Track]:
    """Sun and Moon tracks from one astropy evaluation at the nodes (days)."""
    times = Time(nodes * _SECONDS_PER_DAY, format="unix", scale="utc")
    sidereal = times.sidereal_time("apparent", longitude=site.longitude_deg * u.deg).rad
    # GCRS to true equator and equinox of date (IAU 2006/2000A), the rotation astropy's TETE frame applies to a
    # geocentric place. Applied here directly: SkyCoord.transform_to(TETE) compares its per-instant frame
    # attributes element by element and took a third of the run time.
    terrestrial = times.tt
    to_true_equator = erfa.pnm06a(terrestrial.jd1, terrestrial.jd2)
    return tuple(
        _track(nodes, sidereal, erfa.rxp(to_true_equator, body.cartesian.xyz.to_value(u.km).T))
        for body in (get_sun(times), get_body("moon", times))
    )


def _track(nodes: NDArray[np.float64], sidereal_rad: NDArray[np.float64], place_km: NDArray[np.float64]) -> _Track:
    right_ascension, declination, distance = erfa.p2s(place_km)
    drift = sidereal_rad - right_ascension - _SIDEREAL_RATE_RAD_PER_DAY * (nodes - nodes[0])
    return _Track(
        epoch_days=float(nodes[0]),
        hour_angle_drift_rad=CubicSpline(nodes, np.unwrap(drift)),
        declination_rad=CubicSpline(nodes, declination),
        distance_km=CubicSpline(nodes, distance),
    )


@dataclass(frozen=True)
class _Observer:
    """The site as the altitude formulas need it."""

    latitude_rad: float
    #: Distance from the Earth's axis and height above the equator plane, km (Meeus's rho cos phi', rho sin phi').
    axis_distance_km: float
    equator_height_km: float

    @classmethod
    def at(cls, site: Site) -> _Observer:
        x, y, z = EarthLocation.from_geodetic(site.longitude_deg, site.latitude_deg, site.elevation_m).geocentric
        return cls(math.radians(site.latitude_deg), math.hypot(x.to_value(u.km), y.to_value(u.km)), z.to_value(u.km))


def _altitude_deg(track: _Track, observer: _Observer, days: NDArray[np.float64]) -> NDArray[np.float64]:
    """Topocentric altitude of the body's centre, no refraction.

    The topocentric vector is the geocentric one minus the observer's, both in the frame of the
    local meridian and the true equator (Meeus ch. 40 does the same in closed form); altitude is its
    angle above the plane normal to the geodetic vertical.
    """
    return _topocentric_altitude_deg(
        track.hour_angle_rad(days), track.declination_rad(days), track.distance_km(days), observer
    )


def _topocentric_altitude_deg(
    hour_angle: NDArray[np.float64], declination: NDArray[np.float64], distance: NDArray[np.float64],
    observer: _Observer,
) -> NDArray[np.float64]:
    """:func:`_altitude_deg` from the body's apparent geocentric place: local hour angle and declination (true
    equator of date, radians) and distance (km)."""
    toward_meridian = distance * np.cos(declination) * np.cos(hour_angle) - observer.axis_distance_km
    westward = distance * np.cos(declination) * np.sin(hour_angle)
    northward = distance * np.sin(declination) - observer.equator_height_km
    up = math.cos(observer.latitude_rad) * toward_meridian + math.sin(observer.latitude_rad) * northward
    return np.degrees(np.arcsin(up / np.sqrt(toward_meridian**2 + westward**2 + northward**2)))


def _sun_crossings(
    sun: _Track, observer: _Observer, midnights: NDArray[np.float64], altitude_deg: float
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Setting and rising of the Sun's centre through ``altitude_deg`` around each night's lower culmination.

    Method
    ------
    Meeus ch. 15: the Sun is at altitude h0 at hour angle +-H0 with
    ``cos H0 = (sin h0 - sin phi sin delta) / (cos phi cos delta)``. The setting is at hour angle
    ``H_low - (pi - H0)`` and the rising at ``H_low + (pi - H0)``, ``H_low`` being the lower culmination
    nearest local midnight. Each Newton step takes the declination, hour angle and hour-angle rate at
    the current estimate. NaN where ``|cos H0| > 1`` at the final estimate (no crossing that day).
    """
    sin_h0 = math.sin(math.radians(altitude_deg))
    sin_phi, cos_phi = math.sin(observer.latitude_rad), math.cos(observer.latitude_rad)
    hour_angle_midnight = sun.hour_angle_rad(midnights)
    lower_culmination = math.pi + 2 * math.pi * np.round((hour_angle_midnight - math.pi) / (2 * math.pi))

    def cos_h0(days: NDArray[np.float64]) -> NDArray[np.float64]:
        declination = sun.declination_rad(days)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (sin_h0 - sin_phi * np.sin(declination)) / (cos_phi * np.cos(declination))

    crossings = []
    for side in (-1.0, 1.0):
        days = midnights.copy()
        for _ in range(_EVENT_REFINEMENTS):
            semi_arc = np.arccos(np.clip(cos_h0(days), -1.0, 1.0))
            target = lower_culmination + side * (math.pi - semi_arc)
            days = days + (target - sun.hour_angle_rad(days)) / sun.hour_angle_rate(days)
        crossings.append(np.where(np.abs(cos_h0(days)) <= 1.0, days, np.nan))
    return crossings[0], crossings[1]


def _below_part(altitude_deg: NDArray[np.float64], limit_deg: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """For each step between samples (last axis), the fractions ``[start, end]`` of the step spent below
    the limit, the altitude taken as linear within the step. An empty part has ``end <= start``."""
    before = altitude_deg[..., :-1] - limit_deg
    after = altitude_deg[..., 1:] - limit_deg
    with np.errstate(divide="ignore", invalid="ignore"):
        crossing = np.clip(before / (before - after), 0.0, 1.0)
    start = np.where(before < 0, 0.0, np.where(after < 0, crossing, 1.0))
    end = np.where(after < 0, 1.0, np.where(before < 0, crossing, 0.0))
    return start, end


def _dark_hours(
    sun: _Track, moon: _Track, observer: _Observer, noons: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Hours of each noon-to-noon span with the Sun below -18 deg, and of those with the Moon down too.

    Taken a year of nights at a time, so the sample arrays stay a few megabytes however long the range.
    """
    batches = [
        _dark_hours_of_batch(sun, moon, observer, noons[first : first + _NIGHTS_PER_BATCH + 1])
        for first in range(0, noons.size - 1, _NIGHTS_PER_BATCH)
    ]
    dark, moonless = (np.concatenate(column) for column in zip(*batches, strict=True))
    return dark, moonless


def _dark_hours_of_batch(
    sun: _Track, moon: _Track, observer: _Observer, noons: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """:func:`_dark_hours` for the nights between consecutive ``noons``.

    Samples every 5 minutes from each opening noon; samples past the closing noon are held at it and add
    steps of zero length, so 23- and 25-hour DST nights are measured exactly.
    """
    span = np.diff(noons)
    steps = math.ceil(span.max() / _SAMPLE_STEP_DAYS)
    offsets = np.minimum(np.arange(steps + 1) * _SAMPLE_STEP_DAYS, span[:, None])
    samples = noons[:-1, None] + offsets
    step_hours = np.diff(offsets, axis=1) * 24.0
    sun_start, sun_end = _below_part(_altitude_deg(sun, observer, samples), ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG)
    moon_start, moon_end = _below_part(_altitude_deg(moon, observer, samples), MOON_HORIZON_ALTITUDE_DEG)
    dark = np.maximum(sun_end - sun_start, 0.0)
    moonless = np.maximum(np.minimum(sun_end, moon_end) - np.maximum(sun_start, moon_start), 0.0)
    return (step_hours * dark).sum(axis=1), (step_hours * moonless).sum(axis=1)


def _illuminated_fraction(sun: _Track, moon: _Track, days: NDArray[np.float64]) -> NDArray[np.float64]:
    """Illuminated fraction of the Moon's disc (geocentric).

    Method
    ------
    Meeus ch. 48: elongation ``cos psi = sin d0 sin d + cos d0 cos d cos(a0 - a)`` (eq. 48.2; the
    difference of right ascensions is the difference of hour angles), phase angle
    ``tan i = R sin psi / (Delta - R cos psi)`` (eq. 48.3), fraction ``k = (1 + cos i) / 2`` (eq. 48.1).
    """
    sun_dec, moon_dec = sun.declination_rad(days), moon.declination_rad(days)
    cos_elongation = np.sin(sun_dec) * np.sin(moon_dec) + np.cos(sun_dec) * np.cos(moon_dec) * np.cos(
        moon.hour_angle_rad(days) - sun.hour_angle_rad(days)
    )
    elongation = np.arccos(np.clip(cos_elongation, -1.0, 1.0))
    sun_km = sun.distance_km(days)
    phase_angle = np.arctan2(sun_km * np.sin(elongation), moon.distance_km(days) - sun_km * np.cos(elongation))
    return (1.0 + np.cos(phase_angle)) / 2.0
