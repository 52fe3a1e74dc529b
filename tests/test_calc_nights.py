"""Specifications for observatory_ops.calc.nights: Sun events, dark hours and Moon per night.

References checked against:
- PyEphem (``ephem``), an independent ephemeris library (libastro), for sunset, sunrise, twilight, Moon
  rise/set, Moon phase and full-moon instants;
- the hour-angle formula of Meeus, Astronomical Algorithms (2nd ed., 1998), ch. 15, worked by hand.

The sites are invented coordinates with real IANA time zones. No database is used.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from functools import cache
from zoneinfo import ZoneInfo

import ephem
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.nights import (
    ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG,
    MAX_NIGHTS,
    SUNSET_ALTITUDE_DEG,
    NightTable,
    Site,
    nights_for_range,
)

#: Observer.horizon strings that give PyEphem the same conventions as nights.py when combined with
#: ``pressure = 0`` (no refraction) and ``use_center=True``: -0:50 = -0.8333 deg for the Sun's centre at
#: sunset and sunrise (Meeus ch. 15), -18 deg for astronomical twilight, 0 for the Moon's centre.
PYEPHEM_SUNSET_HORIZON = "-0:50"
PYEPHEM_TWILIGHT_HORIZON = "-18"
PYEPHEM_MOON_HORIZON = "0"

YEAR = dt.date(2025, 1, 1)
DAYS_IN_YEAR = 365

# One invented site every 15 degrees of latitude from -60 to +60, each in a real time zone near its longitude.
SITES_BY_LATITUDE = {
    -60: Site(-60.0, -40.0, 0.0, "Atlantic/South_Georgia"),
    -45: Site(-45.0, 170.0, 300.0, "Pacific/Auckland"),
    -30: Site(-30.0, -70.5, 2200.0, "America/Santiago"),
    -15: Site(-15.0, -75.0, 3000.0, "America/Lima"),
    0: Site(0.0, 37.0, 2000.0, "Africa/Nairobi"),
    15: Site(15.0, 80.0, 500.0, "Asia/Kolkata"),
    30: Site(30.0, -105.0, 2000.0, "America/Denver"),
    45: Site(45.0, 7.0, 1500.0, "Europe/Rome"),
    60: Site(60.0, 25.0, 100.0, "Europe/Helsinki"),
}
#: The 15th of every month of the year: all seasons, at both signs of the Sun's declination.
MID_MONTH_NIGHTS = [(dt.date(2025, month, 15) - YEAR).days for month in range(1, 13)]

ONE_MINUTE_S = 60.0


def past_the_bundled_tables(test):
    """Silence the expected warnings for dates past astropy's bundled Earth-orientation table and ERFA's
    leap-second table: the extrapolation costs arcseconds, far below what night lengths need."""
    test = pytest.mark.filterwarnings("ignore:.*dubious year:erfa.ErfaWarning")(test)
    return pytest.mark.filterwarnings("ignore:Tried to get polar motions:astropy.utils.exceptions.AstropyWarning")(test)


# --- PyEphem as the reference ------------------------------------------------------------------------


def _to_ephem(moment: dt.datetime) -> ephem.Date:
    return ephem.Date(moment.astimezone(dt.UTC).replace(tzinfo=None))


def _observer(site: Site, moment: dt.datetime, horizon: str) -> ephem.Observer:
    observer = ephem.Observer()
    observer.lat = math.radians(site.latitude_deg)
    observer.lon = math.radians(site.longitude_deg)
    observer.elevation = site.elevation_m
    observer.pressure = 0
    observer.horizon = horizon
    observer.date = _to_ephem(moment)
    return observer


def _utc(moment: ephem.Date) -> dt.datetime:
    return moment.datetime().replace(tzinfo=dt.UTC)


def _crossings(observer: ephem.Observer, body: ephem.Body) -> tuple[dt.datetime | None, dt.datetime | None]:
    """Next setting and next rising of the body's centre after the observer's date, None if it does not cross."""
    crossings = []
    for search in (observer.next_setting, observer.next_rising):
        try:
            crossings.append(_utc(search(body, use_center=True)))
        except ephem.CircumpolarError:
            crossings.append(None)
    return crossings[0], crossings[1]


def pyephem_night(site: Site, night: dt.date) -> dict[str, dt.datetime | None]:
    """PyEphem's sunset, sunrise, dusk and dawn for the night of ``night``: the first ones after local noon."""
    noon = dt.datetime.combine(night, dt.time(12), ZoneInfo(site.time_zone))
    sunset, sunrise = _crossings(_observer(site, noon, PYEPHEM_SUNSET_HORIZON), ephem.Sun())
    dusk, dawn = _crossings(_observer(site, noon, PYEPHEM_TWILIGHT_HORIZON), ephem.Sun())
    return {"sunset": sunset, "sunrise": sunrise, "dusk": dusk, "dawn": dawn}


def pyephem_moonless_hours(site: Site, dusk: dt.datetime, dawn: dt.datetime) -> float:
    """Hours between dusk and dawn with the Moon's centre below the horizon, from PyEphem's moonrise and moonset."""
    observer = _observer(site, dusk, PYEPHEM_MOON_HORIZON)
    moon = ephem.Moon(observer)
    moon_up = moon.alt > 0
    moment, moonless_s = dusk, 0.0
    while moment < dawn:
        observer.date = _to_ephem(moment)
        try:
            search = observer.next_setting if moon_up else observer.next_rising
            change = min(_utc(search(moon, use_center=True)), dawn)
        except ephem.CircumpolarError:
            change = dawn
        if not moon_up:
            moonless_s += (change - moment).total_seconds()
        moment, moon_up = change, not moon_up
    return moonless_s / 3600.0


def pyephem_moon_phase(site: Site, moment: dt.datetime) -> float:
    return ephem.Moon(_observer(site, moment, PYEPHEM_MOON_HORIZON)).moon_phase


# --- helpers -------------------------------------------------------------------------------------------


@cache
def year_of_nights(site: Site) -> NightTable:
    return nights_for_range(site, YEAR, DAYS_IN_YEAR)


def as_datetime(value: np.datetime64) -> dt.datetime | None:
    if np.isnat(value):
        return None
    return dt.datetime.fromtimestamp(int(value.astype("datetime64[s]").astype(np.int64)), tz=dt.UTC)


def event_difference_s(ours: np.datetime64, reference: dt.datetime | None) -> float:
    """Seconds between two event times; 0 when both say there is no event, inf when only one does."""
    mine = as_datetime(ours)
    if mine is None or reference is None:
        return 0.0 if mine is reference else math.inf
    return abs((mine - reference).total_seconds())


def local_midnight_after(site: Site, night: dt.date) -> dt.datetime:
    return dt.datetime.combine(night + dt.timedelta(days=1), dt.time(0), ZoneInfo(site.time_zone))


# --- Sun events -------------------------------------------------------------------------------------


def test_pyephem_horizons_are_the_altitudes_nights_uses() -> None:
    # Source: Meeus, Astronomical Algorithms, ch. 15: h0 = -0 deg 50' = -0.8333 deg for the Sun's centre at
    # sunset and sunrise; -18 deg for astronomical twilight. PyEphem reads "-0:50" as degrees:arcminutes.
    assert math.degrees(ephem.degrees(PYEPHEM_SUNSET_HORIZON)) == pytest.approx(-0.8333, abs=1e-4)
    assert math.degrees(ephem.degrees(PYEPHEM_SUNSET_HORIZON)) == pytest.approx(SUNSET_ALTITUDE_DEG)
    assert math.degrees(ephem.degrees(PYEPHEM_TWILIGHT_HORIZON)) == pytest.approx(ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG)


@pytest.mark.parametrize("latitude", sorted(SITES_BY_LATITUDE))
def test_sunset_sunrise_dusk_and_dawn_match_pyephem_within_a_minute(latitude: int) -> None:
    # Source: PyEphem next_setting / next_rising with the same horizons, pressure 0 and the Sun's centre;
    # both say "no event" on the same nights (midnight sun, no astronomical night at +-60 in summer).
    site = SITES_BY_LATITUDE[latitude]
    table = year_of_nights(site)
    for index in MID_MONTH_NIGHTS:
        night = YEAR + dt.timedelta(days=index)
        reference = pyephem_night(site, night)
        ours = {
            "sunset": table.sunset_utc,
            "sunrise": table.sunrise_utc,
            "dusk": table.dusk_utc,
            "dawn": table.dawn_utc,
        }
        for event, times in ours.items():
            difference = event_difference_s(times[index], reference[event])
            assert difference <= ONE_MINUTE_S, f"{event} on {night} at latitude {latitude}: off by {difference} s"


@pytest.mark.parametrize("night", [dt.date(2024, 3, 20), dt.date(2025, 6, 21), dt.date(2026, 12, 21)])
def test_a_single_night_matches_pyephem_within_a_minute(night: dt.date) -> None:
    # Source: PyEphem, as above. A one-night range has the fewest interpolation nodes around it.
    site = SITES_BY_LATITUDE[-30]
    table = nights_for_range(site, night, 1)
    reference = pyephem_night(site, night)
    assert event_difference_s(table.sunset_utc[0], reference["sunset"]) <= ONE_MINUTE_S
    assert event_difference_s(table.sunrise_utc[0], reference["sunrise"]) <= ONE_MINUTE_S
    assert event_difference_s(table.dusk_utc[0], reference["dusk"]) <= ONE_MINUTE_S
    assert event_difference_s(table.dawn_utc[0], reference["dawn"]) <= ONE_MINUTE_S


@pytest.mark.parametrize("latitude", [-45, 0, 30, 60])
def test_dark_hours_match_pyephem_dusk_to_dawn_within_two_minutes(latitude: int) -> None:
    # Source: PyEphem dusk and dawn (-18 deg, Sun's centre, no refraction); 0 where PyEphem has no dusk.
    site = SITES_BY_LATITUDE[latitude]
    table = year_of_nights(site)
    for index in MID_MONTH_NIGHTS:
        reference = pyephem_night(site, YEAR + dt.timedelta(days=index))
        if reference["dusk"] is None:
            expected = 0.0
        else:
            expected = (reference["dawn"] - reference["dusk"]).total_seconds() / 3600.0
        assert table.dark_hours[index] == pytest.approx(expected, abs=2 / 60)


def test_equinox_twilight_at_the_equator_follows_the_meeus_hour_angle_formula() -> None:
    # Source: Meeus, Astronomical Algorithms, ch. 15, cos H0 = (sin h0 - sin phi sin delta) / (cos phi cos delta),
    # worked by hand for latitude phi = 0 on the March equinox 2024 (Sun on the equator at 03:06 UT, so
    # delta is about +0.27 deg by dusk and cos delta = 0.99999):
    #   dusk,   h0 = -18 deg:      cos H0 = sin(-18 deg)     = -0.30902  ->  H0 = 108.000 deg = 7.2000 h
    #   sunset, h0 = -0.8333 deg:  cos H0 = sin(-0.8333 deg) = -0.01454  ->  H0 =  90.833 deg = 6.0556 h
    # at 15 deg of hour angle per hour. So:
    #   dusk - sunset = 7.2000 h - 6.0556 h = 1.1444 h = 68.67 min
    #   dark hours    = 24 h - 2 x 7.2000 h = 9.60 h (dusk to the next dawn, symmetric about lower culmination)
    #   dusk          = local apparent noon + 7 h 12 min; on 20 March apparent noon at longitude 0 falls
    #                   about 7 min after 12:00 UT (equation of time, from memory), so dusk is near 19:19 UT.
    table = nights_for_range(Site(0.0, 0.0, 0.0, "Etc/UTC"), dt.date(2024, 3, 20), 1)
    sunset, dusk = as_datetime(table.sunset_utc[0]), as_datetime(table.dusk_utc[0])
    assert (dusk - sunset).total_seconds() / 60 == pytest.approx(68.67, abs=0.5)
    assert table.dark_hours[0] == pytest.approx(9.60, abs=0.02)
    hand_dusk = dt.datetime(2024, 3, 20, 19, 19, tzinfo=dt.UTC)
    assert abs((dusk - hand_dusk).total_seconds()) <= 90


# --- Moon -----------------------------------------------------------------------------------------------


def test_moon_illumination_matches_pyephem_moon_phase_at_local_midnight() -> None:
    # Source: PyEphem Moon.moon_phase (fraction of the disc lit) at the same instant, local midnight.
    site = SITES_BY_LATITUDE[-30]
    table = year_of_nights(site)
    reference = [
        pyephem_moon_phase(site, local_midnight_after(site, YEAR + dt.timedelta(days=i))) for i in range(DAYS_IN_YEAR)
    ]
    assert np.abs(table.moon_illumination - reference).max() <= 0.02


def test_full_moon_nights_have_the_fullest_moon() -> None:
    # Source: PyEphem next_full_moon instants for 2025. The night whose noon-to-noon span holds the
    # instant has its Moon more than 98 % lit and at least as lit as on the nights either side.
    site = SITES_BY_LATITUDE[45]
    table = nights_for_range(site, YEAR - dt.timedelta(days=1), DAYS_IN_YEAR + 2)
    zone = ZoneInfo(site.time_zone)
    instant = ephem.next_full_moon(_to_ephem(dt.datetime(2025, 1, 1, tzinfo=dt.UTC)))
    while _utc(instant).year == 2025:
        local = _utc(instant).astimezone(zone)
        night = local.date() if local.hour >= 12 else local.date() - dt.timedelta(days=1)
        index = int((np.datetime64(night, "D") - table.dates[0]).astype(int))
        fraction = table.moon_illumination[index]
        assert fraction > 0.98, f"full moon {_utc(instant)}: {fraction}"
        assert fraction >= table.moon_illumination[[index - 1, index + 1]].max() - 0.005
        instant = ephem.next_full_moon(instant)


@pytest.mark.parametrize("latitude", [-30, 15, 45])
def test_moonless_dark_hours_match_pyephem_moonrise_and_moonset_within_three_minutes(latitude: int) -> None:
    # Source: PyEphem dusk, dawn, moonrise and moonset (Moon's centre at 0 deg, topocentric, no refraction).
    site = SITES_BY_LATITUDE[latitude]
    table = year_of_nights(site)
    for index in range(0, DAYS_IN_YEAR, 5):
        reference = pyephem_night(site, YEAR + dt.timedelta(days=index))
        expected = pyephem_moonless_hours(site, reference["dusk"], reference["dawn"])
        assert table.moonless_dark_hours[index] == pytest.approx(expected, abs=3 / 60), f"night {index}"


# --- polar and far-future nights ---------------------------------------------------------------------------


def test_midnight_sun_at_latitude_70_has_no_sunset_and_no_dark() -> None:
    # Source: PyEphem says the Sun is always up at latitude 70 on 21 June (AlwaysUpError), so no events.
    site = Site(70.0, 25.0, 0.0, "Europe/Oslo")
    night = dt.date(2025, 6, 21)
    assert pyephem_night(site, night) == {"sunset": None, "sunrise": None, "dusk": None, "dawn": None}
    record = nights_for_range(site, night, 1).to_records()[0]
    assert [record[key] for key in ("sunset", "sunrise", "dusk", "dawn")] == [None, None, None, None]
    assert record["dark_hours"] == 0.0
    assert record["moonless_dark_hours"] == 0.0


def test_polar_night_at_latitude_70_has_no_sunset_but_a_dusk_and_dawn() -> None:
    # Source: PyEphem: on 21 December at latitude 70 the Sun never reaches -0.8333 deg (NeverUpError) but
    # crosses -18 deg; dusk and dawn within a minute of PyEphem's, dark hours from them within two minutes.
    site = Site(70.0, 25.0, 0.0, "Europe/Oslo")
    night = dt.date(2025, 12, 21)
    reference = pyephem_night(site, night)
    table = nights_for_range(site, night, 1)
    assert reference["sunset"] is None and reference["sunrise"] is None
    assert np.isnat(table.sunset_utc[0]) and np.isnat(table.sunrise_utc[0])
    assert event_difference_s(table.dusk_utc[0], reference["dusk"]) <= ONE_MINUTE_S
    assert event_difference_s(table.dawn_utc[0], reference["dawn"]) <= ONE_MINUTE_S
    expected = (reference["dawn"] - reference["dusk"]).total_seconds() / 3600
    assert table.dark_hours[0] == pytest.approx(expected, abs=2 / 60)


@pytest.mark.parametrize("latitude", [89.0, -89.0, 90.0, -90.0])
def test_near_the_poles_a_whole_year_runs_with_24_hour_or_no_darkness_at_the_solstices(latitude: float) -> None:
    # Source: at latitude +-89 the Sun's altitude stays within 1 deg of its declination (spherical geometry,
    # Meeus ch. 13), about -23.4 deg at the winter solstice (dark all 24 h) and +23.4 deg at the summer one.
    table = nights_for_range(Site(latitude, 0.0, 0.0, "Etc/UTC"), YEAR, DAYS_IN_YEAR)
    june, december = (dt.date(2025, 6, 21) - YEAR).days, (dt.date(2025, 12, 21) - YEAR).days
    winter, summer = (december, june) if latitude > 0 else (june, december)
    assert table.dark_hours[winter] == pytest.approx(24.0)
    assert table.dark_hours[summer] == 0.0
    assert np.isnat(table.dusk_utc[winter]) and np.isnat(table.sunset_utc[summer])
    assert np.all((table.dark_hours >= 0) & (table.dark_hours <= 24.0 + 1e-9))


@past_the_bundled_tables
def test_plans_ten_years_ahead_without_internet() -> None:
    # Source: PyEphem (libastro), an independent ephemeris library that needs no Earth-orientation table, for a
    # date ten years out, past the IERS Earth-orientation table astropy bundles (astropy's own documentation on
    # IERS data, from memory): with no download the events still match PyEphem within a minute there.
    site = SITES_BY_LATITUDE[-30]
    night = dt.date.today() + dt.timedelta(days=3653)
    table = nights_for_range(site, night, 30)
    reference = pyephem_night(site, night)
    assert event_difference_s(table.sunset_utc[0], reference["sunset"]) <= ONE_MINUTE_S
    assert event_difference_s(table.dawn_utc[0], reference["dawn"]) <= ONE_MINUTE_S
    assert np.all(np.isfinite(table.moonless_dark_hours))


# --- local dates and daylight saving time ------------------------------------------------------------------


@pytest.mark.parametrize(
    ("time_zone", "latitude", "longitude", "change"),
    [
        ("Europe/Berlin", 50.0, 10.0, dt.date(2025, 3, 30)),  # 02:00 -> 03:00
        ("America/New_York", 41.0, -74.0, dt.date(2025, 3, 9)),  # 02:00 -> 03:00
        ("America/Santiago", -30.0, -70.5, dt.date(2025, 9, 7)),  # 24:00 -> 01:00: local midnight does not exist
    ],
)
def test_spring_dst_change_leaves_one_night_per_date(
    time_zone: str, latitude: float, longitude: float, change: dt.date
) -> None:
    # Source: tz database (zoneinfo) for the change dates. The night of the evening before the change is
    # 23 hours from noon to noon but still one night: consecutive dates, one sunset each, ~24 h apart in UTC,
    # each sunset on its own local date in the evening, and within a minute of PyEphem.
    site = Site(latitude, longitude, 0.0, time_zone)
    first = change - dt.timedelta(days=3)
    table = nights_for_range(site, first, 6)
    assert np.all(np.diff(table.dates) == np.timedelta64(1, "D"))
    gaps_h = np.diff(table.sunset_utc).astype(float) / 3600
    assert np.all(np.abs(gaps_h - 24) < 0.1)
    zone = ZoneInfo(time_zone)
    for night, sunset in zip(table.dates, table.sunset_utc, strict=True):
        local = as_datetime(sunset).astimezone(zone)
        assert local.date() == night.astype(dt.date) and local.hour >= 12
        reference = pyephem_night(site, night.astype(dt.date))
        assert event_difference_s(sunset, reference["sunset"]) <= ONE_MINUTE_S
    assert np.all(np.abs(np.diff(table.dark_hours)) < 0.1)


# --- output and input ----------------------------------------------------------------------------------------


def test_records_are_json_ready_with_z_times_none_for_no_event_and_four_decimals() -> None:
    # Source: ISO 8601 / RFC 3339 UTC notation ("Z" suffix) for the times.
    records = nights_for_range(Site(65.0, 25.0, 0.0, "Europe/Helsinki"), dt.date(2025, 6, 20), 2).to_records()
    assert json.loads(json.dumps(records)) == records
    record = records[0]
    assert list(record) == [
        "date",
        "sunset",
        "sunrise",
        "dusk",
        "dawn",
        "dark_hours",
        "moon_illumination",
        "moonless_dark_hours",
    ]
    assert record["date"] == "2025-06-20"
    assert record["sunset"].endswith("Z") and dt.datetime.fromisoformat(record["sunset"]).tzinfo == dt.UTC
    assert record["dusk"] is None and record["dawn"] is None
    assert round(record["moon_illumination"], 4) == record["moon_illumination"]


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda: Site(90.5, 0.0, 0.0, "Etc/UTC"), "latitude must be between -90 and 90"),
        (lambda: Site(float("nan"), 0.0, 0.0, "Etc/UTC"), "latitude must be between -90 and 90"),
        (lambda: Site(0.0, -180.5, 0.0, "Etc/UTC"), "longitude must be between -180 and 180"),
        (lambda: Site(0.0, 0.0, float("inf"), "Etc/UTC"), "elevation must be a finite number"),
        (lambda: Site("north", 0.0, 0.0, "Etc/UTC"), "latitude must be a number"),
        (lambda: Site(0.0, 0.0, 0.0, "Mars/Olympus_Mons"), "unknown time zone 'Mars/Olympus_Mons'"),
        (lambda: Site(0.0, 0.0, 0.0, ""), "unknown time zone"),
        (lambda: nights_for_range(SITES_BY_LATITUDE[0], YEAR, 0), "number of nights must be between 1 and"),
        (lambda: nights_for_range(SITES_BY_LATITUDE[0], YEAR, MAX_NIGHTS + 1), "number of nights must be between"),
        (lambda: nights_for_range(SITES_BY_LATITUDE[0], YEAR, 2.5), "number of nights must be a whole number"),
        (lambda: nights_for_range(SITES_BY_LATITUDE[0], "2025-01-01", 3), "start must be a date"),
        (lambda: nights_for_range(SITES_BY_LATITUDE[0], dt.datetime(2025, 1, 1), 3), "start must be a date"),
    ],
)
def test_bad_input_raises_value_error_naming_the_problem(make, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        make()


@past_the_bundled_tables
@settings(max_examples=20, deadline=None)
@given(
    latitude=st.floats(-90, 90),
    longitude=st.floats(-180, 180),
    start=st.dates(dt.date(2000, 1, 1), dt.date(2045, 12, 31)),
)
def test_moonless_dark_hours_never_exceed_dark_hours_which_never_exceed_the_night(
    latitude: float, longitude: float, start: dt.date
) -> None:
    # Law: the Moon-down part of the dark is part of the dark, the dark is part of the noon-to-noon span
    # (24 h in a zone without DST), and a lit fraction is a fraction.
    table = nights_for_range(Site(latitude, longitude, 0.0, "Etc/UTC"), start, 3)
    assert np.all(table.moonless_dark_hours <= table.dark_hours + 1e-9)
    assert np.all((table.dark_hours >= 0) & (table.dark_hours <= 24 + 1e-9))
    assert np.all((table.moon_illumination >= 0) & (table.moon_illumination <= 1))
    both = ~np.isnat(table.dusk_utc) & ~np.isnat(table.dawn_utc)
    assert np.all(table.dawn_utc[both] > table.dusk_utc[both])
