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
import reprlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

REQUIRED = ("night", "open_hours")
OPTIONAL = ("slews", "axis1_travel_deg", "axis2_travel_deg", "brake_cycles", "pm10_ugm3", "humidity_pct", "dew", "rain")
COLUMNS = REQUIRED + OPTIONAL
#: Largest whole number stored: the top of an integer column in every database Django supports.
MAX_COUNT = 2_147_483_647
_TRUE = {"yes", "y", "true", "1"}
_FALSE = {"no", "n", "false", "0", ""}
_JSON_KINDS = {str: "a string", int: "a number", float: "a number", bool: "true or false", list: "a list",
               type(None): "null"}


class Problem(tuple):
    """A refused record as the pair (position, reason), plus the ``field`` it concerns.

    The position is a CSV line number or a JSON list index; ``field`` is None for a problem of the whole
    file or body. Being a pair keeps ``for line, reason in report.errors`` working for every caller.
    """

    field: str | None

    def __new__(cls, position: int | None, reason: str, field: str | None = None):
        problem = super().__new__(cls, (position, reason))
        problem.field = field
        return problem

    @property
    def position(self) -> int | None:
        return self[0]

    @property
    def reason(self) -> str:
        return self[1]


class RowError(ValueError):
    """The first problem of one record; ``field`` names the column or key it concerns."""

    def __init__(self, field: str | None, message: str):
        super().__init__(message)
        self.field = field


class FileError(ValueError):
    """The file cannot be read as text; ``line`` is where the first bad byte is."""

    def __init__(self, line: int, message: str):
        super().__init__(message)
        self.line = line


@dataclass
class ParsedNights:
    """Records checked one by one against the same rules, CSV rows or JSON objects alike.

    ``where`` words a position in the duplicate-night message ("on line", "at index").
    """

    latest_night: dt.date
    where: str
    rows: list[tuple[int, dict]] = field(default_factory=list)  # (position, NightUsage field values)
    errors: list[Problem] = field(default_factory=list)
    _seen: dict[dt.date, int] = field(default_factory=dict, repr=False)

    def add(self, position: int, record: Mapping[str, object]) -> None:
        """Validate one record; keep its values, or its first problem. A night may appear only once."""
        try:
            values = parse_row(record, self.latest_night)
        except RowError as exc:
            self.refuse(position, str(exc), exc.field)
            return
        night = values["night"]
        if night in self._seen:
            self.refuse(position, f"night {night} already appears {self.where} {self._seen[night]}", "night")
            return
        self._seen[night] = position
        self.rows.append((position, values))

    def refuse(self, position: int | None, reason: str, field_name: str | None = None) -> None:
        self.errors.append(Problem(position, reason, field_name))


def _number(raw: object, name: str, low: float | None = 0.0, high: float | None = None, whole: bool = False):
    """A CSV cell or a JSON number as a number within limits; a JSON float is never a whole number."""
    kind = "a whole number" if whole else "a number"
    shown = raw.strip() if isinstance(raw, str) else repr(raw)
    try:
        if isinstance(raw, str):
            value = int(shown) if whole else float(shown)
        elif isinstance(raw, int) and not isinstance(raw, bool):
            value = raw if whole else float(raw)
        elif isinstance(raw, float) and not whole:
            value = raw
        else:
            raise ValueError
    except ValueError:
        raise RowError(name, f"{name} must be {kind}, not {reprlib.repr(raw)}") from None
    except OverflowError:  # a JSON integer too large for a float, as "1e999" is in a CSV cell
        value = math.inf
    if not math.isfinite(value):
        raise RowError(name, f"{name} must be a finite number, not {reprlib.repr(raw)}")
    if low is not None and value < low:
        raise RowError(name, f"{name} cannot be below {low:g} (got {shown})")
    if high is not None and value > high:
        raise RowError(name, f"{name} cannot be above {high:g} (got {shown})")
    return value


def _flag(raw: object, name: str) -> bool:
    if isinstance(raw, bool):
        return raw
    if isinstance(raw, str):
        text = raw.strip().lower()
        if text in _TRUE:
            return True
        if text in _FALSE:
            return False
    elif isinstance(raw, int) and raw in (0, 1):
        return bool(raw)
    raise RowError(name, f"{name} must be yes or no, not {reprlib.repr(raw)}")


def _blank(raw: object) -> bool:
    """Nothing given: an empty CSV cell or a JSON null."""
    return raw is None or (isinstance(raw, str) and not raw.strip())


def parse_row(record: Mapping[str, object], latest_night: dt.date) -> dict:
    """Validate one record and return NightUsage field values. Raises RowError naming the field.

    A record is a CSV row (every value a string) or a JSON object (strings, numbers, booleans, null);
    the rules are the same: a blank cell and null both mean "not given", whole-number columns take
    no fractions, ``dew`` and ``rain`` take yes/no, 1/0, true/false or a JSON boolean.
    """
    unknown = [name for name in record if name not in COLUMNS]
    if unknown:
        raise RowError(unknown[0], f"unknown field {unknown[0]!r} (known: {', '.join(COLUMNS)})")
    if "night" not in record:
        raise RowError("night", "night is missing")
    raw_night = record["night"]
    try:
        night = dt.date.fromisoformat(raw_night.strip())
    except (AttributeError, ValueError):
        shown = raw_night.strip() if isinstance(raw_night, str) else raw_night
        raise RowError("night", f"night must be a date as YYYY-MM-DD, not {reprlib.repr(shown)}") from None
    if night > latest_night:
        raise RowError(
            "night", f"night {night} is in the future (the latest night that can be logged is {latest_night})"
        )
    if "open_hours" not in record:
        raise RowError("open_hours", "open_hours is missing")
    if _blank(record["open_hours"]):
        raise RowError("open_hours", "open_hours is empty")

    def optional(name: str, **limits):
        raw = record.get(name)
        return None if _blank(raw) else _number(raw, name, **limits)

    return {
        "night": night,
        "open_hours": _number(record["open_hours"], "open_hours", 0, 24),
        "slews": optional("slews", whole=True, high=MAX_COUNT) or 0,
        "axis1_travel_deg": optional("axis1_travel_deg") or 0.0,
        "axis2_travel_deg": optional("axis2_travel_deg") or 0.0,
        "brake_cycles": optional("brake_cycles", whole=True, high=MAX_COUNT) or 0,
        "pm10_ugm3": optional("pm10_ugm3"),
        "humidity_pct": optional("humidity_pct", high=100),
        "dew": False if _blank(record.get("dew")) else _flag(record["dew"], "dew"),
        "rain": False if _blank(record.get("rain")) else _flag(record["rain"], "rain"),
    }


def parse_objects(records: Sequence[object], latest_night: dt.date) -> ParsedNights:
    """Validate nights sent as JSON objects (keys: the CSV column names); positions are list indexes.

    Every bad object is reported with its index and field; an empty list is one problem of the whole body.
    """
    if isinstance(records, str | bytes | Mapping) or not isinstance(records, Sequence):
        raise ValueError(f"the nights must be a list of objects, not {type(records).__name__}")
    result = ParsedNights(latest_night, where="at index")
    if not records:
        result.refuse(None, "the list of nights is empty")
    for index, record in enumerate(records):
        if isinstance(record, Mapping):
            result.add(index, record)
        else:
            kind = _JSON_KINDS.get(type(record), type(record).__name__)
            result.refuse(index, f"each night must be an object with the CSV column names as keys, not {kind}")
    return result


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


def parse(text: str, latest_night: dt.date) -> ParsedNights:
    """Parse and validate the whole file. Every bad row is reported with its line number.

    A file-level problem (empty file, missing or unknown columns) is reported as line 1.
    """
    result = ParsedNights(latest_night, where="on line")
    if not text.strip():
        result.refuse(1, "the file is empty")
        return result
    reader = csv.reader(io.StringIO(text))
    try:
        header = [h.strip().lower() for h in next(reader)]
    except csv.Error as exc:
        result.refuse(1, f"the header line is not valid CSV ({exc})")
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
        result.refuse(1, "; ".join(problems))
        return result
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            result.refuse(reader.line_num, f"not valid CSV ({exc})")
            continue
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(header):
            result.refuse(line, f"has {len(cells)} fields, the header has {len(header)}")
            continue
        result.add(line, dict(zip(header, cells, strict=True)))
    if not result.rows and not result.errors:
        result.refuse(1, "the file has a header but no rows")
    return result
