"""The nightly-usage format: its columns, and the checks a CSV row or a JSON object must pass. No database.

A file is UTF-8 text, comma-separated, with one header line naming the columns in any order. The API
takes the same records as JSON objects keyed by the column names. ``COLUMN_SPECS`` defines every column
once (unit, accepted range, what a blank means): the checks below read it, and so does the help table of
the import page.

A record is one night of the whole site, or of one telescope when it names one (``telescope``): the names
are text here, checked against the site's telescope names the caller passes in (``logbook.services`` reads
them and turns each name back into its telescope). A telescope's log is its own rows, and the site's rows
on the nights it has none of its own (``logbook.models.NightUsage``).

A column left out of a file (or a key left out of an object) gives nothing: a night already stored keeps
that figure, and a new night takes the column's blank value. A blank cell or a JSON null is a value: the
column's blank value. On a telescope's row the blank value of a counter and of PM10 is "the site's figure"
(``Column.from_site``, stored as None): its log takes that figure from the site's row of the same night, so
control software that knows a telescope's slews but not its brake cycles or the dust leaves them out.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import itertools
import json
import math
import re
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from django.template.defaultfilters import pluralize

from observatory_ops.exports import FORMULA_START
from observatory_ops.formats.calendar_words import why_no_such_date
from observatory_ops.formats.plain_numbers import PLAIN_NUMBER, decimal_comma_hint

#: How far back a night (or a service date, see ``logbook.services``) may lie, in years. A recompute asks
#: the nights cache for every night from the earliest one logged to 3 years ahead (planning.services.
#: HORIZON_DAYS), and the cache fills at most 20 years at once (calc.nights.MAX_NIGHTS): 15 years back
#: keeps that span inside one fill with 2 years to spare.
MAX_YEARS_BACK = 15

# Plausibility bounds of our own, not published limits: far above what a small observatory logs in one
# night, so a figure beyond one is a typing, unit or counter mistake, refused before it reaches a sum.
MAX_SLEWS_PER_NIGHT = 10_000  # about one slew every 4 s through a 12-hour night
MAX_TRAVEL_DEG_PER_NIGHT = 1_000_000  # per axis: about 2,800 full turns
MAX_BRAKE_CYCLES_PER_NIGHT = 10_000
MAX_PM10_UGM3 = 10_000  # a mean over the hours the dome was open (it is shut in a dust storm)

_TRUE = {"yes", "y", "true", "1"}
_FALSE = {"no", "n", "false", "0", ""}
_JSON_KINDS = {str: "a string", int: "a number", float: "a number", bool: "true or false", list: "a list",
               type(None): "null"}
#: How many characters of a value a message repeats: enough to recognise it, never a whole 400-digit number.
SHOWN_MAX = 40


def _cut(text: str) -> str:
    return text if len(text) <= SHOWN_MAX else text[:SHOWN_MAX] + "..."


def shown(value: object) -> str:
    """A value as a message repeats it: as JSON writes it (a CSV cell is text, so in double quotes), cut after
    ``SHOWN_MAX`` characters: ``"five"``, ``true``, ``null``, ``2.5``, never Python's ``'five'``, ``True`` or
    ``None``."""
    if isinstance(value, str):
        return json.dumps(_cut(value), ensure_ascii=False)
    return _cut(json.dumps(value, ensure_ascii=False, default=str))


def _figure_shown(raw: object) -> str:
    """A figure as a range message repeats it ("got 24.5"): a CSV cell's text as typed, a JSON number as JSON
    writes it; cut as ``shown`` cuts."""
    return _cut(raw.strip()) if isinstance(raw, str) else shown(raw)


def _figure(value: float) -> str:
    """A limit as people write it: 24, 10,000, 0.5."""
    return f"{int(value):,}" if float(value).is_integer() else f"{value:g}"


#: What a flag column takes, in the words of a CSV cell and of a JSON value: both take both.
FLAG_ACCEPTED = "yes or no (also 1 or 0, true or false)"
FLAG_ACCEPTED_JSON = 'true or false (or "yes" or "no", 1 or 0)'

#: What a telescope's blank counter or PM10 stands for, in words (``Column.from_site``).
SITES_FIGURE = "the site's figure of that night (0 when the row's open hours are 0)"


@dataclass(frozen=True)
class Column:
    """One column of the format. ``kind`` is "date", "telescope" (a telescope's name), "number", "count" (a whole
    number) or "flag" (yes/no).

    ``blank`` is the value a blank cell or null stands for, and a new night's value when the column is
    left out; ``example`` is the column's cell in the example row of the help. ``from_site``: on a telescope's
    row the blank value is None instead, "the site's figure of that night" (``blank_of``).
    """

    name: str
    meaning: str
    kind: str
    example: str
    unit: str = ""
    low: float | None = None
    high: float | None = None
    required: bool = False
    blank: object = None
    from_site: bool = False

    @property
    def accepted(self) -> str:
        """The values accepted, in words."""
        if self.kind == "date":
            return (f"YYYY-MM-DD, begun by now (dated by its evening: before local noon the latest is last night), "
                    f"at most {MAX_YEARS_BACK} years back")
        if self.kind == "flag":
            return FLAG_ACCEPTED
        if self.kind == "telescope":
            return "the name of one of the site's telescopes, as registered (case and spaces around it aside)"
        whole = " (whole number)" if self.kind == "count" else ""
        return f"{_figure(self.low)} to {_figure(self.high)}{whole}"

    @property
    def blank_means(self) -> str:
        """What an empty cell (or null) means, in words."""
        if self.required:
            return "refused"
        if self.kind == "telescope":
            return "the whole site's night"
        if self.blank is None:
            said = "not measured"
        elif self.kind == "flag":
            said = "no"
        else:
            said = _figure(self.blank)
        return f"{said}; on a telescope's row: {SITES_FIGURE}" if self.from_site else said

    def blank_of(self, own: bool) -> object:
        """The blank value on a telescope's row (``own``) or on the whole site's."""
        return None if own and self.from_site else self.blank


COLUMN_SPECS: tuple[Column, ...] = (
    Column("night", "local date of the evening the night starts", "date", "2026-03-14", required=True),
    # Left out or empty: the site's night, counted for every telescope with no row of its own that night.
    Column("telescope", "whose night: one telescope's, or (empty) the whole site's", "telescope", ""),
    Column("open_hours", "hours the dome was open (on a telescope's row: the hours that telescope was open and in "
           "use)", "number", "7.5", unit="h", low=0, high=24, required=True),
    Column("slews", "number of slews", "count", "41", low=0, high=MAX_SLEWS_PER_NIGHT, blank=0, from_site=True),
    Column("axis1_travel_deg", "travel of the right ascension / azimuth axis", "number", "1030.5", unit="degrees",
           low=0, high=MAX_TRAVEL_DEG_PER_NIGHT, blank=0.0, from_site=True),
    Column("axis2_travel_deg", "travel of the declination / elevation axis", "number", "610", unit="degrees",
           low=0, high=MAX_TRAVEL_DEG_PER_NIGHT, blank=0.0, from_site=True),
    Column("brake_cycles", "brake engage and release cycles", "count", "43", low=0, high=MAX_BRAKE_CYCLES_PER_NIGHT,
           blank=0, from_site=True),
    Column("pm10_ugm3", "mean PM10 dust while open", "number", "38.2", unit="µg/m³", low=0, high=MAX_PM10_UGM3,
           from_site=True),
    # Not taken from the site's row: nothing counts humidity, so a telescope's blank is simply not measured.
    Column("humidity_pct", "mean relative humidity while open", "number", "31", unit="%", low=0, high=100),
    Column("dew", "dew formed", "flag", "no", blank=False),
    Column("rain", "rain fell", "flag", "no", blank=False),
)
COLUMNS = tuple(c.name for c in COLUMN_SPECS)
#: The columns a telescope's row may leave to the site's row of the same night.
FROM_SITE = tuple(c.name for c in COLUMN_SPECS if c.from_site)
REQUIRED = tuple(c.name for c in COLUMN_SPECS if c.required)


#: What a nights file must hold, in words that follow "it must hold" (the upload form says it of an empty file too).
WHAT_A_FILE_HOLDS = (
    f"a header line naming the columns (at least {' and '.join(REQUIRED)}, separated by commas), then one line "
    "per night"
)


def cell(value: object) -> str:
    """A stored figure as a cell of this format writes it: yes or no for a flag, nothing for not measured, a
    date as YYYY-MM-DD, a number in full (1000000, 123456.7), never rounded."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def cells_of(stored) -> dict[str, str]:
    """A stored night (a ``NightUsage``) as the cells of a row of this format, the telescope by its name: the
    row that reads back as that night."""
    return {
        c.name: cell(stored.telescope.name if stored.telescope_id else None) if c.kind == "telescope"
        else cell(getattr(stored, c.name))
        for c in COLUMN_SPECS
    }


def example_csv(telescopes: Sequence[str] = ()) -> str:
    """A header line and the whole site's row, every column given; then the same night of each of ``telescopes``."""
    rows = [{**{c.name: c.example for c in COLUMN_SPECS}, "telescope": name} for name in ("", *telescopes)]
    return "\n".join([",".join(COLUMNS), *(",".join(row[name] for name in COLUMNS) for row in rows)])


def earliest_accepted(today: dt.date) -> dt.date:
    """The earliest date accepted on ``today``: ``MAX_YEARS_BACK`` years back (from 29 February, the 28th)."""
    year = today.year - MAX_YEARS_BACK
    try:
        return today.replace(year=year)
    except ValueError:
        return today.replace(year=year, day=28)


class Problem(tuple):
    """A refused record as the pair (position, reason), plus the ``field`` it concerns.

    The position is a CSV line number or a JSON list index, None for a problem of the whole file or body
    (whose records were then not read); ``field`` is None when no one field is at fault. Being a pair
    keeps ``for line, reason in report.errors`` working for every caller. ``telescope_unknown``: the name the record
    gives that is no telescope of the site, when that is the problem (``logbook.services`` says it once for every row
    of another site's telescope, not on each row's line).
    """

    field: str | None
    telescope_unknown: str | None

    def __new__(cls, position: int | None, reason: str, field: str | None = None,
                telescope_unknown: str | None = None):
        problem = super().__new__(cls, (position, reason))
        problem.field = field
        problem.telescope_unknown = telescope_unknown
        return problem

    @property
    def position(self) -> int | None:
        return self[0]

    @property
    def reason(self) -> str:
        return self[1]


class RowError(ValueError):
    """A problem of one value of a record (``_checked`` gathers them all); ``field`` names its field, and
    ``telescope_unknown`` the name written, when the record names a telescope the site does not have."""

    def __init__(self, field: str | None, message: str, telescope_unknown: str | None = None):
        super().__init__(message)
        self.field = field
        self.telescope_unknown = telescope_unknown


class FileError(ValueError):
    """The file cannot be read as text; the message says why, in words that follow "This file is not a
    nights CSV:"."""


@dataclass
class ParsedNights:
    """Records checked one by one against the same rules, CSV rows or JSON objects alike.

    ``as_json``: the records are JSON objects sent to the API (positions are list indexes, and a message words a
    value as JSON does), else CSV rows (positions are line numbers); ``telescopes`` are the names of the site's
    telescopes. Each row of ``rows`` holds the values of the columns its record gives,
    night and open_hours always among them; its ``telescope``, when given, is the name as registered (None: the
    whole site's night).
    """

    latest_night: dt.date
    as_json: bool
    telescopes: Sequence[str] = ()
    rows: list[tuple[int, dict]] = field(default_factory=list)  # (position, NightUsage field values)
    errors: list[Problem] = field(default_factory=list)
    _seen: dict[tuple[str | None, dt.date], int] = field(default_factory=dict, repr=False)

    @property
    def where(self) -> str:
        """A position, in the words of the duplicate-night message."""
        return "at index" if self.as_json else "on line"

    @property
    def whole_problem(self) -> str | None:
        """The problem of the whole file or body, or None."""
        return next((p.reason for p in self.errors if p.position is None), None)

    def add(self, position: int, record: Mapping[str, object]) -> None:
        """Check one record; keep its values, or every problem it has.

        A night of the site, or of one telescope, may appear only once among the good records; a record
        refused for its own figures takes no part in that check.
        """
        values, problems = _checked(record, self.latest_night, self.telescopes, self.as_json)
        key = (values.get("telescope"), values.get("night"))
        if not problems and key in self._seen:
            whose = f" of telescope {key[0]}" if key[0] else ""
            problems.append(RowError("night", f"night {key[1]}{whose} already appears {self.where} {self._seen[key]}"))
        for problem in problems:
            self.refuse(position, str(problem), problem.field, problem.telescope_unknown)
        if not problems:
            self._seen[key] = position
            self.rows.append((position, values))

    def refuse(self, position: int | None, reason: str, field_name: str | None = None,
               telescope_unknown: str | None = None) -> None:
        self.errors.append(Problem(position, reason, field_name, telescope_unknown))


#: A figure as text: ``formats.plain_numbers.PLAIN_NUMBER`` (ASCII digits with an optional sign and decimal point, and
#: an optional exponent: "1e3", which counts have always taken and Python's repr of a float writes: 1e-05). Python's
#: int() and float() take more than this: "1_000" and digits of other scripts ("٣"), which a figure typed or exported
#: by mistake should not pass as.
#: What float() reads as no finite number. Still read, so the message says "must be a finite number", not "a number".
NOT_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)


def _read_number(raw: str | int | float) -> int | float:
    """An int for a whole-number literal, else a float; raises ValueError for text that is no plain number
    (``PLAIN_NUMBER``, or ``NOT_FINITE``)."""
    if not isinstance(raw, str):
        return raw
    text = raw.strip()
    if not (PLAIN_NUMBER.fullmatch(text) or NOT_FINITE.fullmatch(text)):
        raise ValueError(f"not a plain decimal number: {text!r}")
    try:
        return int(text)
    except ValueError:
        return float(text)


def _number(raw: object, column: Column) -> float | int:
    """A CSV cell or a JSON number within the column's range; a count takes any whole value (4, 4.0, 4e0)."""
    name, whole = column.name, column.kind == "count"
    wrong_kind = f"{name} must be {'a whole number' if whole else 'a number'}, not {shown(raw)}"
    if isinstance(raw, bool) or not isinstance(raw, str | int | float):
        raise RowError(name, wrong_kind)
    try:
        value = _read_number(raw)
        if not whole:
            value = float(value)
    except ValueError:
        raise RowError(name, wrong_kind) from None
    except OverflowError:  # a JSON integer too large for a float, as "1e999" is in a CSV cell
        value = math.inf
    if isinstance(value, float):
        if not math.isfinite(value):
            # JSON reads 1e400 as Infinity too: the sentence says both, the value itself being gone.
            beyond = " (or a number too large to hold)" if math.isinf(value) and not isinstance(raw, str) else ""
            if isinstance(raw, str) and PLAIN_NUMBER.fullmatch(raw.strip()):  # digits, too many for a number
                beyond = " (a number too large to hold)"
            raise RowError(name, f"{name} must be a finite number, not {_figure_shown(raw)}{beyond}")
        if whole:
            if not value.is_integer():  # a number all the same: shown as one
                raise RowError(name, f"{name} must be a whole number, not {_figure_shown(raw)}")
            value = int(value)
    if column.low is not None and value < column.low:
        raise RowError(name, f"{name} cannot be below {_figure(column.low)} (got {_figure_shown(raw)})")
    if column.high is not None and value > column.high:
        raise RowError(name, f"{name} cannot be above {_figure(column.high)} (got {_figure_shown(raw)})")
    return value


def _flag(raw: object, name: str, as_json: bool) -> bool:
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
    accepted = FLAG_ACCEPTED_JSON if as_json else FLAG_ACCEPTED
    raise RowError(name, f"{name} must be {accepted}, not {shown(raw)}")


#: A date as this format writes it: ISO 8601's calendar date in the extended format, YYYY-MM-DD, in ASCII digits.
#: Python's date.fromisoformat (3.11) also reads ISO 8601's week dates ("2022-W11-1", a Monday in March) and its
#: basic format ("20220314"): the format has one way of writing a date, and anything else is refused, never guessed at.
WRITTEN_DATE = re.compile(r"([0-9]{4})-([0-9]{2})-([0-9]{2})")
#: A date in another layout, as a spreadsheet program shows dates and may save them ("12/6/2023", "6.12.2023",
#: "2023/12/06 0:00"): digits in three groups separated by / or by dot.
RELAID_DATE = re.compile(
    r"[0-9]{1,4}([/.])[0-9]{1,2}\1[0-9]{1,4}"  # 12/6/2023, 6.12.2023, 2023/12/06
    r"|[0-9]{1,2}-[0-9]{1,2}-[0-9]{2,4}"  # 6-12-2023 (not 2024-1-5: typed, not relaid)
    r"|[0-9]{1,2}[ -]?[A-Za-z]{3,9}[ ,-]+[0-9]{2,4}"  # 06-Dec-2023, 6 December 2023
    r"|[A-Za-z]{3,9}[ -][0-9]{1,2},? [0-9]{2,4}"  # Dec 6, 2023 (a diff review's layouts got no word)
)
#: What a CSV file with such a date is told. Its day and month are never guessed: "12/6/2023" is 12 June in one
#: country and 6 December in another.
RELAID_HINT = ("; a spreadsheet program may have changed the dates' layout when the file was saved: keep the night "
               "column as text, or save the dates as YYYY-MM-DD")


def _night(raw: object, latest_night: dt.date, as_json: bool) -> dt.date:
    """The night a cell or a JSON string names, written exactly as YYYY-MM-DD (``WRITTEN_DATE``). ``as_json``: sent
    as JSON, which no spreadsheet program saved (no word on one)."""
    written = WRITTEN_DATE.fullmatch(raw.strip()) if isinstance(raw, str) else None
    if not written:
        # A date with a time (an ISO 8601 timestamp) gets a word on which date: one cut from a UTC time taken after
        # midnight names the next day (an API review).
        timed = isinstance(raw, str) and WRITTEN_DATE.match(raw.strip()) and raw.strip()[10:11] in {"T", "t", " "}
        hint = (": the night is the site's local date of the evening it began, with no time" if timed else "")
        # A handover review's file, re-saved from a spreadsheet, was refused without a word on how its dates changed.
        if not as_json and isinstance(raw, str) and RELAID_DATE.match(raw.strip()):
            hint = RELAID_HINT
        raise RowError("night", f"night must be a date as YYYY-MM-DD, not {shown(raw)}{hint}")
    try:
        night = dt.date.fromisoformat(written.group())
    except ValueError:
        problem = why_no_such_date(*map(int, written.groups()))
        raise RowError("night", f"night {written.group()} is no such date ({problem})") from None
    if night > latest_night:
        raise RowError(
            "night", f"night {night} has not begun yet (a night is dated by its evening; the latest that can be "
            f"logged now is {latest_night})"
        )
    earliest = earliest_accepted(latest_night)
    if night < earliest:
        raise RowError(
            "night", f"night {night} is more than {MAX_YEARS_BACK} years ago; the earliest accepted is {earliest}"
        )
    return night


def _blank(raw: object) -> bool:
    """Nothing in the cell: an empty CSV cell or a JSON null."""
    return raw is None or (isinstance(raw, str) and not raw.strip())


def _telescope(raw: object, telescopes: Sequence[str]) -> str:
    """The name, as registered, of the site's telescope that ``raw`` names: written as registered, or else
    ignoring case, so long as that names one telescope (names differing only in case can each be written
    exactly). Surrounding spaces never count, nor the apostrophe our downloads put before a name a spreadsheet would
    take for a formula ("'=T1": ``exports.safe_cell``), so the log downloaded imports back."""
    if not isinstance(raw, str):
        raise RowError("telescope", f"telescope must be a telescope's name, not {shown(raw)}")
    written = raw.strip()
    by_name = {name.strip(): name for name in telescopes}
    if written not in by_name and written.startswith("'") and written[1:].startswith(FORMULA_START):
        written = written[1:]
    if written in by_name:
        return by_name[written]
    alike = [name for name in telescopes if name.strip().casefold() == written.casefold()]
    if len(alike) == 1:
        return alike[0]
    if alike:
        raise RowError("telescope", f"telescope {shown(written)} could be any of {', '.join(alike)}: write the name "
                       "as registered")
    known = f"known at this site: {', '.join(telescopes)}" if telescopes else "this site has no telescope registered"
    raise RowError("telescope", f"unknown telescope {shown(written)} ({known}); leave it empty for the whole site's "
                   "night", telescope_unknown=written)


def _value(
    column: Column, raw: object, latest_night: dt.date, telescopes: Sequence[str], own: bool, as_json: bool
) -> object:
    """The value of one cell; ``own``: the record is a telescope's night (``Column.blank_of``); ``as_json``: it was
    sent as JSON (``ParsedNights.as_json``)."""
    if _blank(raw):
        if column.required:
            raise RowError(column.name, f"{column.name} cannot be null" if raw is None else f"{column.name} is empty")
        return column.blank_of(own)
    if column.kind == "date":
        return _night(raw, latest_night, as_json)
    if column.kind == "telescope":
        return _telescope(raw, telescopes)
    if column.kind == "flag":
        return _flag(raw, column.name, as_json)
    return _number(raw, column)


class SentObject(dict):
    """A JSON object as ``object_from_pairs`` reads it: each key's value (the last, where a key is repeated), and in
    ``repeated`` the keys it gives more than once."""

    repeated: tuple[str, ...] = ()


def object_from_pairs(pairs: list[tuple[str, object]]) -> SentObject:
    """``json.loads``'s ``object_pairs_hook`` for nights: a key given twice in one object is refused as a problem of
    that night, with its index and the key as the field (as the CSV import refuses a repeated column), never taken
    silently with the last value winning."""
    sent = SentObject(pairs)
    sent.repeated = tuple(key for key, count in Counter(key for key, _ in pairs).items() if count > 1)
    return sent


def _checked(
    record: Mapping[str, object], latest_night: dt.date, telescopes: Sequence[str], as_json: bool
) -> tuple[dict, list[RowError]]:
    """The values of the columns the record gives, and every problem found."""
    values, problems = {}, []
    for name in record:
        if name not in COLUMNS:
            problems.append(RowError(name, f"unknown field {shown(name)} (known: {', '.join(COLUMNS)})"))
    for name in getattr(record, "repeated", ()):
        problems.append(RowError(name, f"{shown(name)} is given more than once in this night; send each key once"))
    for column in COLUMN_SPECS:
        if column.name not in record:
            if column.required:
                problems.append(RowError(column.name, f"{column.name} is missing"))
            continue
        try:
            # COLUMN_SPECS puts the telescope before the figures whose blank value depends on it.
            own = values.get("telescope") is not None
            values[column.name] = _value(column, record[column.name], latest_night, telescopes, own, as_json)
        except RowError as exc:
            problems.append(exc)
    return values, problems


def parse_objects(records: Sequence[object], latest_night: dt.date, telescopes: Sequence[str] = ()) -> ParsedNights:
    """Check nights sent as JSON objects (keys: the CSV column names); positions are list indexes.

    Every problem of every object is reported with its index and field (a key an object repeats, read by
    ``object_from_pairs``, among them); an empty list is one problem of the whole body. ``telescopes``: the
    names of the site's telescopes.
    """
    if isinstance(records, str | bytes | Mapping) or not isinstance(records, Sequence):
        raise ValueError(f"the nights must be a list of objects, not {type(records).__name__}")
    result = ParsedNights(latest_night, as_json=True, telescopes=telescopes)
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
    """The file's text; raises FileError when it is not UTF-8 text."""
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise FileError("it is UTF-16 text; save it as UTF-8 CSV")
    if b"\x00" in data:
        raise FileError("it holds binary data, not text (a spreadsheet or an image?); export the sheet as UTF-8 CSV")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        byte = data[exc.start]
        raise FileError(f"it is not UTF-8 text (byte 0x{byte:02x} on line {line}); save it as UTF-8 CSV") from None


def _header_problem(columns: dict[int, str], first_line: str) -> str | None:
    """Why the header line does not name the columns of a nights CSV, or None. ``columns`` maps the position
    (from 0) of each column that counts to its name; a column with a blank name is named by its position."""
    names = list(columns.values())
    missing = [c for c in REQUIRED if c not in names]
    for separator, called in ((";", "semicolons"), ("\t", "tabs"), ("|", "bars")):
        if missing and all(c in [h.strip().lower() for h in first_line.split(separator)] for c in REQUIRED):
            return f"its columns are separated by {called}, not commas; save it as comma-separated CSV"
    unknown = [name or f"column {position + 1} (its header is blank)"
               for position, name in columns.items() if name not in COLUMNS]
    duplicated = sorted({name for name in names if name and names.count(name) > 1})
    problems = []
    if missing:
        problems.append(f"missing column{pluralize(missing)}: {', '.join(missing)}")
    if unknown:
        named = ", ".join(unknown[:UNKNOWN_NAMED]) + (f" and {len(unknown) - UNKNOWN_NAMED:,} more"
                                                      if len(unknown) > UNKNOWN_NAMED else "")
        problems.append(f"unknown column{pluralize(unknown)}: {named} (known: {', '.join(COLUMNS)})")
    if duplicated:
        problems.append(f"repeated column{pluralize(duplicated)}: {', '.join(duplicated)}")
    return "; ".join(problems) or None


#: How many unknown columns a refusal names before it counts the rest (a file of another kind may have hundreds).
UNKNOWN_NAMED = 10

#: The name the log's download gives its file (``logbook.views.nights_csv_download``): the site's slug, "-nights-", the
#: first and last night logged, ".csv"; a browser saving a second copy adds " (1)" or "(1)" before ".csv". The slug may
#: itself hold "-nights-": the dates at the end are fixed, so the slug is whatever comes before them.
DOWNLOAD_NAME = re.compile(
    r"(?P<slug>.+)-nights-[0-9]{4}-[0-9]{2}-[0-9]{2}-[0-9]{4}-[0-9]{2}-[0-9]{2}(?: ?\([0-9]+\))?\.csv", re.IGNORECASE
)


def download_name(slug: str, first: dt.date, last: dt.date) -> str:
    """The name the log's download gives its file, which ``DOWNLOAD_NAME`` reads back."""
    return f"{slug}-nights-{first.isoformat()}-{last.isoformat()}.csv"


def slug_named(file_name: str) -> str | None:
    """The slug of the site whose downloaded log ``file_name`` is by its name (``DOWNLOAD_NAME``), or None for a name
    that is not a download's."""
    named = DOWNLOAD_NAME.fullmatch(file_name.strip())
    return named.group("slug") if named else None


def _names(cells: Sequence[str]) -> list[str]:
    """A line's cells as column names are compared: trimmed, in lower case, without the blank cells at its end."""
    names = [c.strip().lower() for c in cells]
    while names and not names[-1]:
        names.pop()
    return names


def _is_header(cells: Sequence[str]) -> bool:
    """Whether a line names columns instead of giving a night: every cell is blank or a column's name, the required
    ones among them (a night's own row has a date where a header has night)."""
    names = _names(cells)
    return all(name in names for name in REQUIRED) and all(name in COLUMNS for name in names if name)


def _split_figures(cells: Sequence[str]) -> list[tuple[str, str]]:
    """Each two cells side by side that a point would join into a plain number ("7" and "5": 7.5)."""
    trimmed = [c.strip() for c in cells]
    return [(left, right) for left, right in itertools.pairwise(trimmed)
            if left and right and decimal_comma_hint(f"{left},{right}")]


def _too_many_fields(cells: Sequence[str], header: Sequence[str]) -> str:
    """Why a row with more fields than the header is refused; where a point joining two fields side by side would make
    a plain number, with the hint of a decimal comma (a spreadsheet in a locale that writes 7,5 for 7.5 saves it
    unquoted). The figure is named when only one pair of fields could be one; with several, the example is 7,5."""
    said = f"has {len(cells)} fields, the header has {len(header)}"
    pairs = _split_figures(cells)
    if not pairs:
        return said
    left, right = pairs[0] if len(pairs) == 1 else ("7", "5")
    return (f"{said}; a decimal comma may have split a figure in two ({left},{right} read as {left} and {right}): "
            f"{decimal_comma_hint(f'{left},{right}')}")

#: The first line Excel writes, and reads, to say which character separates the columns ("sep=,"). A "sep=," line is
#: skipped; another separator is refused, as a file separated by semicolons is.
SEPARATOR_LINE = re.compile(r"sep=.", re.IGNORECASE)


def _quote_left_open(exc: csv.Error) -> bool:
    """Whether the reader came to the end of the text inside a quoted cell. Python's csv module says so only in
    these words (its strict dialect; Modules/_csv.c, unchanged since Python 2.5)."""
    return str(exc) == "unexpected end of data"


def _csv_problem(exc: csv.Error, start: int, end: int) -> str:
    """Why the row from line ``start`` to line ``end`` is not valid CSV, in words for whoever saved the file. The
    rules are RFC 4180's (section 2): a quoted cell ends at its closing quote, which comes right before a comma or
    the end of the line, and a quote inside it is written twice."""
    said = str(exc)
    if _quote_left_open(exc):
        return (f"the row beginning on line {start} opens a quote that is never closed, so everything after it (to "
                f"line {end}, the end of the file) was read as one cell; close the quote or remove it")
    if said.endswith("expected after '\"'"):
        return ("a quoted cell goes on after its closing quote; end the cell at its closing quote, and write a quote "
                'inside a quoted cell twice ("")')
    if said.startswith("field larger than field limit"):
        return f"a cell is longer than {csv.field_size_limit():,} characters, the most one cell may hold"
    return f"not valid CSV ({said})"


def parse(text: str, latest_night: dt.date, telescopes: Sequence[str] = ()) -> ParsedNights:
    """Parse and check the whole file. Every problem of every bad row is reported with its line number.

    A problem of the whole file (empty, no rows, a header that does not name the columns) is reported
    with position None, and no row is checked. A column with neither a header nor a value is left out:
    spreadsheets export the empty columns right of the data that way. A first line "sep=," (``SEPARATOR_LINE``) is
    skipped. ``telescopes``: the names of the site's telescopes.
    """
    result = ParsedNights(latest_night, as_json=False, telescopes=telescopes)
    if not text.strip():
        result.refuse(None, f"it is empty; it must hold {WHAT_A_FILE_HOLDS}")
        return result
    # Universal newlines: a file saved with carriage returns alone (older spreadsheets on a Mac) reads as lines too.
    # Strict: a quote never closed is said to be (not read as one cell running to the end of the file), and so is a
    # cell that goes on after its closing quote (not joined up: "5"0 is not 50).
    reader = csv.reader(io.StringIO(text, newline=None), strict=True)
    head = io.StringIO(text, newline=None)
    header_line = head.readline().rstrip("\n")
    if SEPARATOR_LINE.fullmatch(header_line.strip(" ")):
        separator = header_line.strip(" ")[4:]
        if separator != ",":
            result.refuse(None, f"its first line says the columns are separated by {shown(separator)}; save it as "
                          'comma-separated CSV, without the "sep=" line')
            return result
        next(reader)  # skipped; the reader still counts it, so every line keeps its number in the file
        header_line = head.readline().rstrip("\n")
    start = header_number = reader.line_num + 1
    try:
        header = [h.strip().lower() for h in next(reader, [])]
    except csv.Error as exc:
        result.refuse(None, f"its header line is not valid CSV: {_csv_problem(exc, start, reader.line_num)}")
        return result
    lines: list[tuple[int, list[str] | str]] = []  # (line number, its cells or why it is not valid CSV)
    while True:
        start = reader.line_num + 1
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            lines.append((start if _quote_left_open(exc) else reader.line_num,
                          _csv_problem(exc, start, reader.line_num)))
            continue
        if any(c.strip() for c in cells):
            # Named by its first line: a row with a quoted line break in a cell runs over several lines, and the
            # reader's count is its last (a bad-input review looked for the problem on the wrong line).
            lines.append((start, cells))
    columns = {
        position: name for position, name in enumerate(header)
        if name or any(isinstance(cells, list) and position < len(cells) and cells[position].strip()
                       for _, cells in lines)
    }
    problem = _header_problem(columns, header_line)
    if problem:
        result.refuse(None, problem)
        return result
    # A second header naming other columns, or the same in another order: the nights after it would be read under the
    # first header's columns, some figures in the wrong ones, so no row of the file is read.
    other_header = next((line for line, cells in lines
                         if isinstance(cells, list) and _is_header(cells) and _names(cells) != _names(header)), None)
    if other_header:
        result.refuse(None, f"line {other_header} is a second header line, its columns not those of line "
                      f"{header_number}, as where two files were joined: the nights after it would be read under the "
                      "wrong columns; put all the nights under one header line")
        return result
    for line, cells in lines:
        if isinstance(cells, str):
            result.refuse(line, cells)
        elif _is_header(cells):  # the same as the first (any other was refused above)
            # Two files joined, each with its header: one message for the line, not one per column.
            result.refuse(line, f"repeats the header line (line {header_number}), as where two files were joined; "
                          "remove this line")
        elif len(cells) > len(header):
            result.refuse(line, _too_many_fields(cells, header))
        elif len(cells) < len(header):
            result.refuse(line, f"has {len(cells)} field{pluralize(len(cells))}, the header has {len(header)}")
        else:
            result.add(line, {name: cells[position] for position, name in columns.items()})
    if not result.rows and not result.errors:
        result.refuse(None, "it has a header but no rows")
    return result
