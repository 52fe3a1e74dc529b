"""The night a moment belongs to, in a site's own time zone."""
from __future__ import annotations

import datetime as dt
import functools
import os
import zoneinfo
from importlib import resources

_NOON = dt.time(12, 0)


def zone(name: str) -> zoneinfo.ZoneInfo:
    """The IANA time zone ``name`` (for example ``"America/Denver"``); ValueError naming it when unknown."""
    try:
        return zoneinfo.ZoneInfo(name)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, TypeError):
        raise ValueError(f"unknown time zone {name!r}: give an IANA time zone name such as 'Europe/Madrid'") from None


def night_of(moment_utc: dt.datetime, zone_name: str) -> dt.date:
    """The night a moment belongs to: the local date of that night's evening.

    Method
    ------
    The moment is converted to local civil time with the IANA time zone database (through
    :mod:`zoneinfo`, PEP 615), which carries each zone's UTC offset and daylight-saving rules. A night
    runs from local noon to the next local noon, so a local time before noon belongs to the previous
    date and a local time at or after noon to its own date. Because the split is made on the local
    clock, a night that contains a daylight-saving change is still one night (it is 23 or 25 hours
    long instead of 24).

    Parameters
    ----------
    moment_utc : an aware datetime (any offset; it is read as an instant).
    zone_name : IANA time zone name of the site, e.g. ``"America/Denver"``.

    Returns
    -------
    The local date of the evening of the night containing ``moment_utc``.

    Raises
    ------
    ValueError
        When ``moment_utc`` is naive or ``zone_name`` is not an IANA time zone name.
    """
    if not isinstance(moment_utc, dt.datetime) or moment_utc.utcoffset() is None:
        raise ValueError(f"the moment must be an aware datetime (with a UTC offset), not {moment_utc!r}")
    local = moment_utc.astimezone(zone(zone_name))
    if local.time() < _NOON:
        return local.date() - dt.timedelta(days=1)
    return local.date()


def zone_gap_h(longitude_deg: float, zone_name: str, year: int) -> tuple[float, float]:
    """How far a time zone's clock runs from the mean solar time at a longitude, in hours.

    Method
    ------
    Local mean solar time runs ahead of UTC by longitude / 15 hours, east positive (the Earth turns 360 degrees
    in 24 hours: the definition of mean solar time, e.g. Meeus, Astronomical Algorithms, ch. 12, from memory). The
    zone's UTC offset is read from the IANA time zone database (:mod:`zoneinfo`) on 15 January and 15 July of
    ``year``, so standard and daylight time are both seen whichever hemisphere the zone is in, and the one closer
    to the longitude's is used. The gap is wrapped into -12..12 hours: a zone kept across the date line
    (Pacific/Kiritimati, UTC+14 at about 157 degrees west) is near its longitude, not a day away.

    Returns
    -------
    (gap_h, offset_h): the zone's offset minus the longitude's, wrapped, and the zone's offset used (hours).

    Raises
    ------
    ValueError
        When ``zone_name`` is not an IANA time zone name.
    """
    solar_h = longitude_deg / 15.0
    gaps = [((offset - solar_h + 12.0) % 24.0 - 12.0, offset) for offset in zone_offsets_h(zone_name, year)]
    return min(gaps, key=lambda gap: abs(gap[0]))


def zone_reference_latitude(zone_name: str) -> float | None:
    """The latitude, in degrees (north positive), of the place a time zone is named after, as the IANA time zone
    database's ``zone.tab`` gives it (its second column, ISO 6709 ``+-DDMM`` or ``+-DDMMSS``); None for a zone without
    a line there (UTC, Etc/GMT-3) or where no ``zone.tab`` is installed (the system's zoneinfo directories, then the
    ``tzdata`` package)."""
    return _zone_table().get(zone_name)


@functools.cache
def _zone_table() -> dict[str, float]:
    """zone name -> latitude of its ``zone.tab`` line, from the first ``zone.tab`` found; read once."""
    for text in _zone_tab_texts():
        rows = [line.split("\t") for line in text.splitlines() if line and not line.startswith("#")]
        table = {fields[2]: _iso6709_latitude(fields[1]) for fields in rows if len(fields) >= 3}
        if table:
            return table
    return {}


def _zone_tab_texts():
    for directory in zoneinfo.TZPATH:
        try:
            with open(os.path.join(directory, "zone.tab"), encoding="utf-8") as file:
                yield file.read()
        except OSError:
            continue
    try:
        yield resources.files("tzdata").joinpath("zoneinfo", "zone.tab").read_text(encoding="utf-8")
    except (ImportError, OSError):
        return


def _iso6709_latitude(coordinates: str) -> float:
    """The latitude of a zone.tab position, ``-3157+11551`` (31 deg 57 min south) or ``+340308-1181434``."""
    split = max(coordinates.rfind("+"), coordinates.rfind("-"))
    latitude = coordinates[:split]
    sign = -1.0 if latitude[0] == "-" else 1.0
    digits = latitude[1:]
    degrees, minutes, seconds = int(digits[:2]), int(digits[2:4]), int(digits[4:6] or 0)
    return sign * (degrees + minutes / 60 + seconds / 3600)


def zone_offsets_h(zone_name: str, year: int) -> tuple[float, float]:
    """A time zone's UTC offsets in hours at noon on 15 January and on 15 July of ``year``, from the IANA time zone
    database (:mod:`zoneinfo`): its standard and its daylight time, in either order by hemisphere, or the same
    offset twice for a zone without daylight time.

    Raises
    ------
    ValueError
        When ``zone_name`` is not an IANA time zone name.
    """
    tz = zone(zone_name)
    january, july = (dt.datetime(year, month, 15, 12, tzinfo=tz).utcoffset().total_seconds() / 3600.0
                     for month in (1, 7))
    return january, july
