"""The nightly-usage CSV format: parsing and validation, with no database access.

Format (UTF-8, comma-separated, one header line; column order free; README.md documents it):

=================  ========  ===================================================================
column             required  meaning
=================  ========  ===================================================================
night              yes       local date of the evening the night starts, YYYY-MM-DD
open_hours         yes       hours the dome was open, 0 to 24
slews              no        number of slews (whole number, default 0)
axis1_travel_deg   no        travel of the RA / azimuth axis in degrees (default 0)
axis2_travel_deg   no        travel of the Dec / elevation axis in degrees (default 0)
brake_cycles       no        brake engage/release cycles (whole number, default 0)
pm10_ugm3          no        mean PM10 dust while open, ug/m3 (blank: not measured)
humidity_pct       no        mean relative humidity, % (blank: not measured)
dew                no        yes/no (also 1/0, true/false; blank: no)
rain               no        yes/no
=================  ========  ===================================================================
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import math
from dataclasses import dataclass, field

REQUIRED = ("night", "open_hours")
OPTIONAL = ("slews", "axis1_travel_deg", "axis2_travel_deg", "brake_cycles", "pm10_ugm3", "humidity_pct", "dew", "rain")
COLUMNS = REQUIRED + OPTIONAL
#: Largest whole number stored: the top of an integer column in every database Django supports.
MAX_COUNT = 2_147_483_647
_TRUE = {"yes", "y", "true", "1"}
_FALSE = {"no", "n", "false", "0", ""}


@dataclass
class ParsedFile:
    rows: list[tuple[int, dict]] = field(default_factory=list)  # (line number, NightUsage field values)
    errors: list[tuple[int, str]] = field(default_factory=list)  # (line number, reason)


class RowError(ValueError):
    pass


class FileError(ValueError):
    """The file cannot be read as text; ``line`` is where the first bad byte is."""

    def __init__(self, line: int, message: str):
        super().__init__(message)
        self.line = line


def _number(raw: str, name: str, low: float | None = 0.0, high: float | None = None, whole: bool = False):
    text = raw.strip()
    try:
        value = int(text) if whole else float(text)
    except ValueError:
        kind = "a whole number" if whole else "a number"
        raise RowError(f"{name} must be {kind}, not {raw!r}") from None
    if not math.isfinite(value):
        raise RowError(f"{name} must be a finite number, not {raw!r}")
    if low is not None and value < low:
        raise RowError(f"{name} cannot be below {low:g} (got {text})")
    if high is not None and value > high:
        raise RowError(f"{name} cannot be above {high:g} (got {text})")
    return value


def _flag(raw: str, name: str) -> bool:
    text = raw.strip().lower()
    if text in _TRUE:
        return True
    if text in _FALSE:
        return False
    raise RowError(f"{name} must be yes or no, not {raw!r}")


def parse_row(record: dict[str, str], latest_night: dt.date) -> dict:
    """Validate one CSV record and return NightUsage field values. Raises RowError with the reason."""
    raw_night = (record.get("night") or "").strip()
    try:
        night = dt.date.fromisoformat(raw_night)
    except ValueError:
        raise RowError(f"night must be a date as YYYY-MM-DD, not {raw_night!r}") from None
    if night > latest_night:
        raise RowError(f"night {night} is in the future (the latest night that can be logged is {latest_night})")
    if not (record.get("open_hours") or "").strip():
        raise RowError("open_hours is empty")

    def optional(name: str, **limits):
        raw = record.get(name)
        return None if raw is None or not raw.strip() else _number(raw, name, **limits)

    return {
        "night": night,
        "open_hours": _number(record["open_hours"], "open_hours", 0, 24),
        "slews": optional("slews", whole=True, high=MAX_COUNT) or 0,
        "axis1_travel_deg": optional("axis1_travel_deg") or 0.0,
        "axis2_travel_deg": optional("axis2_travel_deg") or 0.0,
        "brake_cycles": optional("brake_cycles", whole=True, high=MAX_COUNT) or 0,
        "pm10_ugm3": optional("pm10_ugm3"),
        "humidity_pct": optional("humidity_pct", high=100),
        "dew": _flag(record.get("dew") or "", "dew"),
        "rain": _flag(record.get("rain") or "", "rain"),
    }


def decode(data: bytes) -> str:
    """The file's text; raises FileError, naming the line of the first bad byte, when it is not UTF-8 text."""
    nul = data.find(b"\x00")
    if nul >= 0:
        raise FileError(data.count(b"\n", 0, nul) + 1, "the file is not a text CSV file (it contains binary data)")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise FileError(
            data.count(b"\n", 0, exc.start) + 1,
            f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x} on this line); save it as UTF-8 CSV",
        ) from None


def parse(text: str, latest_night: dt.date) -> ParsedFile:
    """Parse and validate the whole file. Every bad row is reported with its line number.

    A file-level problem (empty file, missing or unknown columns) is reported as line 1.
    """
    result = ParsedFile()
    if not text.strip():
        result.errors.append((1, "the file is empty"))
        return result
    reader = csv.reader(io.StringIO(text))
    try:
        header = [h.strip().lower() for h in next(reader)]
    except csv.Error as exc:
        result.errors.append((1, f"the header line is not valid CSV ({exc})"))
        return result
    missing = [c for c in REQUIRED if c not in header]
    unknown = [h for h in header if h not in COLUMNS]
    duplicated = sorted({h for h in header if header.count(h) > 1})
    if missing or unknown or duplicated:
        problems = []
        if missing:
            problems.append(f"missing column(s): {', '.join(missing)}")
        if unknown:
            problems.append(f"unknown column(s): {', '.join(unknown)} (known: {', '.join(COLUMNS)})")
        if duplicated:
            problems.append(f"repeated column(s): {', '.join(duplicated)}")
        result.errors.append((1, "; ".join(problems)))
        return result
    seen: dict[dt.date, int] = {}
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            result.errors.append((reader.line_num, f"not valid CSV ({exc})"))
            continue
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(header):
            result.errors.append((line, f"has {len(cells)} fields, the header has {len(header)}"))
            continue
        try:
            values = parse_row(dict(zip(header, cells, strict=True)), latest_night)
        except RowError as exc:
            result.errors.append((line, str(exc)))
            continue
        if values["night"] in seen:
            result.errors.append((line, f"night {values['night']} already appears on line {seen[values['night']]}"))
            continue
        seen[values["night"]] = line
        result.rows.append((line, values))
    if not result.rows and not result.errors:
        result.errors.append((1, "the file has a header but no rows"))
    return result
