"""Specifications for what the nights format reads, and how strictly: one way to write a date and a number, CSV read by
its rules, messages that say what is wrong and where, and refused input that stores nothing.

- A night is an ISO 8601 calendar date in the extended format, YYYY-MM-DD (ISO 8601-1:2019, 5.2.2.1), in ASCII
  digits. Python 3.11's ``date.fromisoformat`` also reads ISO 8601's week dates ("2022-W11-1", 5.2.4.1) and the
  calendar date's basic format ("20220314"): they are refused, by the CSV import, the API and the night form alike
  (all three go through ``logbook.nights_csv``).
- A figure is a plain decimal number in ASCII digits: an optional sign, digits, an optional decimal point and an
  optional exponent ("1e3" was read before and still is; the importer's tests rely on it). Python's ``int()`` also
  reads "1_000" (PEP 515) and digits of any script ("٣", Unicode category Nd): both are refused.
- A CSV file is read by RFC 4180's rules (section 2, rules 5 to 7): a quote that opens a cell closes it, right before a
  comma or the end of the line; a quote never closed is said to be, and named by the line its row begins on.
- Excel's first line "sep=," (from memory: Excel writes and reads it as a separator hint) is skipped.
- A refused file lists its first 50 bad rows and counts the rest, the counts with a thousands separator (our own
  choice, common practice, no published source).
"""
from __future__ import annotations

import csv
import datetime as dt
import json
import os
import re
from io import StringIO

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import CommandError, call_command
from django.urls import reverse

from observatory_ops.api import services as api_services
from observatory_ops.logbook import nights_csv, services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.mirrors import response_csv
from observatory_ops.planning.services import site_today

pytestmark = pytest.mark.django_db

LATEST = dt.date(2024, 6, 30)  # the latest night the pure checks below accept


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Storing nights asks for a recompute of the site's due states: recorded here, not run."""
    return recomputes_recorded


@pytest.fixture
def last_week(site) -> dt.date:
    """A night a week back, stored: the refused input below must leave it as it is."""
    night = site_today(site) - dt.timedelta(days=7)
    NightUsage.objects.create(site=site, night=night, open_hours=6.0, slews=30)
    return night


def read_row(record: dict[str, str]) -> nights_csv.ParsedNights:
    """``record`` as the one row (line 2) of a nights CSV, read by the importer's own ``nights_csv.parse``."""
    text = StringIO()
    csv.writer(text).writerows([list(record), list(record.values())])
    return nights_csv.parse(text.getvalue(), LATEST)


def snapshot() -> list[dict]:
    """Every NightUsage row, every field."""
    return list(NightUsage.objects.order_by("site_id", "telescope_id", "night").values())


def week_date(day: dt.date) -> str:
    """``day`` as an ISO 8601 week date, extended format (ISO 8601-1:2019, 5.2.4.1): "2022-W11-1"."""
    year, week, weekday = day.isocalendar()
    return f"{year}-W{week:02d}-{weekday}"


# --- dates: YYYY-MM-DD only ------------------------------------------------------------------------------------------

NOT_YYYY_MM_DD = [
    "2022-W11-1",  # ISO 8601 week date, extended format: Python 3.11 reads it as 2022-03-14
    "2022W111",  # the same week date, basic format
    "20220314",  # ISO 8601 calendar date, basic format: Python 3.11 reads it
    "2022-073",  # ISO 8601 ordinal date
    "٢٠٢٢-٠٣-١٤",  # the right shape in Arabic-Indic digits
    "２０２２-０３-１４",  # and in fullwidth digits
    "2022-3-14",
    "+2022-03-14",
    "2022-03-14T00:00",
]


def test_python_reads_more_than_yyyy_mm_dd_which_is_why_the_format_checks_the_shape_itself():
    # Python 3.11's date.fromisoformat (the documentation's own examples): the lenience the format refuses.
    assert dt.date.fromisoformat("2022-W11-1") == dt.date(2022, 3, 14)
    assert dt.date.fromisoformat("20220314") == dt.date(2022, 3, 14)


@pytest.mark.parametrize("written", NOT_YYYY_MM_DD)
def test_a_night_not_written_as_yyyy_mm_dd_is_refused_naming_the_field_and_the_format(written):
    refused = read_row({"night": written, "open_hours": "5"})
    # A date with a time is told which date a night is (an API review: one cut from a UTC time names the next day).
    hint = ": the night is the site's local date of the evening it began, with no time" if "T" in written else ""
    assert [(p.position, p.field, p.reason) for p in refused.errors] == [
        (2, "night", f"night must be a date as YYYY-MM-DD, not {json.dumps(written, ensure_ascii=False)}{hint}")
    ]


@pytest.mark.parametrize("written", ["2022-03-14", " 2022-03-14 "])
def test_a_night_written_as_yyyy_mm_dd_is_read(written):
    [(_line, values)] = read_row({"night": written, "open_hours": "5"}).rows
    assert values["night"] == dt.date(2022, 3, 14)


def test_a_date_of_the_right_shape_that_is_no_day_still_says_why():
    assert read_row({"night": "2023-02-30", "open_hours": "5"}).errors == [
        (2, "night 2023-02-30 is no such date (February 2023 has 28 days)")
    ]


def test_the_api_refuses_a_week_date_and_leaves_the_stored_night_as_it_was(client, site, last_week):
    secret = api_services.api_token_create(site, "dome computer")[1]
    before = snapshot()
    response = client.post(
        reverse("api-nights", args=[site.slug]), data=json.dumps({"night": week_date(last_week), "open_hours": 1}),
        content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}",
    )
    assert response.status_code == 400
    [error] = json.loads(response.content)["errors"]
    assert (error["index"], error["field"]) == (0, "night")
    assert error["message"] == f'night must be a date as YYYY-MM-DD, not "{week_date(last_week)}"'
    assert snapshot() == before


def test_the_csv_import_refuses_a_compact_date_naming_its_line(site, last_week):
    before = snapshot()
    compact = last_week.strftime("%Y%m%d")
    report = services.nights_import(site, f"night,open_hours\n{last_week},5\n{compact},3\n".encode())
    assert report.errors == [(3, f'night must be a date as YYYY-MM-DD, not "{compact}"')]
    assert report.errors[0].field == "night"
    assert snapshot() == before


def test_the_night_form_refuses_a_week_date_beside_its_field_and_says_no_night_was_stored(client, site, users,
                                                                                           last_week):
    client.force_login(users["technician"])
    before = snapshot()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": week_date(last_week), "open_hours": "1"})
    assert response.status_code == 200
    errors = response.context["form"].errors["night"]
    assert errors == [f'{response.context["form"].fields["night"].label}: must be a date as YYYY-MM-DD, '
                      f'not "{week_date(last_week)}"']
    assert f"Night {week_date(last_week)}:" not in response.content.decode()
    assert snapshot() == before


# --- numbers: plain ASCII decimals -----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("column", "written", "kind"),
    [
        ("slews", "1_000", "a whole number"),  # PEP 515 underscores: int() reads 1000
        ("open_hours", "٣", "a number"),  # ARABIC-INDIC DIGIT THREE: int() reads 3
        ("open_hours", "３", "a number"),  # FULLWIDTH DIGIT THREE
        ("axis1_travel_deg", "1_000.5", "a number"),
        ("pm10_ugm3", "1 000", "a number"),
        ("brake_cycles", "0x10", "a whole number"),
        ("humidity_pct", "3,5", "a number"),
    ],
)
def test_a_figure_that_is_not_a_plain_ascii_decimal_is_refused(column, written, kind):
    refused = read_row({"night": "2024-03-14", "open_hours": "5", column: written})
    assert [(p.position, p.field, p.reason) for p in refused.errors] == [
        (2, column, f"{column} must be {kind}, not {json.dumps(written, ensure_ascii=False)}")
    ]


@pytest.mark.parametrize(
    ("column", "written", "value"),
    [
        ("open_hours", "7.5", 7.5),
        ("open_hours", "+3", 3.0),
        ("open_hours", "3.", 3.0),
        ("open_hours", ".5", 0.5),
        ("open_hours", " 7 ", 7.0),
        # Exponents were read before this check and still are: tests/test_nights_import.py imports "1e3" as a count,
        # and Python's repr of a small float is written so (1e-05).
        ("slews", "1e3", 1000),
        ("slews", "1E3", 1000),
        ("brake_cycles", "4.0", 4),
        ("pm10_ugm3", "1e-05", 1e-05),
        ("axis2_travel_deg", "2.5e+2", 250.0),
    ],
)
def test_a_plain_decimal_figure_is_read(column, written, value):
    [(_line, values)] = read_row({"night": "2024-03-14", "open_hours": "5", column: written}).rows
    assert values[column] == value


@pytest.mark.parametrize("written", ["nan", "inf", "-Infinity", "1e999"])
def test_a_figure_that_is_no_finite_number_is_still_named_as_such(written):
    too_large = " (a number too large to hold)" if written == "1e999" else ""  # written as a number, too large
    assert read_row({"night": "2024-03-14", "open_hours": written}).errors == [
        (2, f"open_hours must be a finite number, not {written}{too_large}")
    ]


def test_the_api_refuses_a_figure_sent_as_a_string_with_underscores(client, site, last_week):
    secret = api_services.api_token_create(site, "dome computer")[1]
    before = snapshot()
    response = client.post(
        reverse("api-nights", args=[site.slug]),
        data=json.dumps({"night": last_week.isoformat(), "open_hours": 5, "slews": "1_000"}),
        content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}",
    )
    assert response.status_code == 400
    assert json.loads(response.content)["errors"] == [
        {"index": 0, "field": "slews", "message": 'slews must be a whole number, not "1_000"'}
    ]
    assert snapshot() == before


def test_the_night_form_refuses_an_arabic_indic_digit(client, site, users, last_week):
    client.force_login(users["technician"])
    before = snapshot()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": last_week.isoformat(), "open_hours": "٣"})
    assert response.status_code == 200
    assert "open_hours" in response.context["form"].errors
    assert snapshot() == before


# --- CSV read by RFC 4180's rules, and the messages ------------------------------------------------------------------


def test_a_quote_never_closed_is_named_by_the_line_it_opens_on(site, last_week):
    # RFC 4180, section 2, rule 5: a quoted cell ends at its closing quote. Before, this was "Line 3 has 1 fields".
    before = snapshot()
    other = last_week - dt.timedelta(days=1)
    report = services.nights_import(site, f'night,open_hours\n"{last_week},3\n{other},4\n'.encode())
    assert report.errors == [(2, "the row beginning on line 2 opens a quote that is never closed, so everything after "
                                 "it (to line 3, the end of the file) was read as one cell; close the quote or remove "
                                 "it")]
    assert snapshot() == before


def test_a_quote_never_closed_on_the_last_line_is_named_too(site, last_week):
    report = services.nights_import(site, f'night,open_hours\n{last_week},3\n"{last_week}'.encode())
    assert [position for position, _ in report.errors] == [3]
    assert "opens a quote that is never closed" in report.errors[0].reason


def test_a_cell_that_goes_on_after_its_closing_quote_is_refused_not_joined_up(site, last_week):
    # RFC 4180, section 2, rule 5: a quoted cell ends at its closing quote. Read leniently, "5"0 was the figure 50.
    before = snapshot()
    report = services.nights_import(site, f'night,open_hours\n{last_week},"5"0\n'.encode())
    assert [position for position, _ in report.errors] == [2]
    assert report.errors[0].reason.startswith("a quoted cell goes on after its closing quote")
    assert snapshot() == before


def test_a_row_of_one_field_says_one_field(site, last_week):
    report = services.nights_import(site, f"night,open_hours\n{last_week}\n".encode())
    assert report.errors == [(2, "has 1 field, the header has 2")]


def test_a_cell_over_the_csv_field_limit_is_named_by_its_line(site, last_week):
    # Python's csv module refuses a cell longer than csv.field_size_limit() characters (131,072 unless changed).
    limit = csv.field_size_limit()
    data = f"night,open_hours\n{last_week},3\n{last_week},{'9' * (limit + 1)}\n"
    report = services.nights_import(site, data.encode())
    assert report.errors == [(3, f"a cell is longer than {limit:,} characters, the most one cell may hold")]


def test_excels_sep_line_is_skipped_and_the_lines_keep_their_numbers(site, last_week):
    other = last_week - dt.timedelta(days=1)
    report = services.nights_import(site, f"sep=,\nnight,open_hours\n{other},4\n{last_week},x\n".encode())
    assert report.errors == [(4, 'open_hours must be a number, not "x"')]
    report = services.nights_import(site, f"sep=,\r\nnight,open_hours\r\n{other},4\r\n".encode())
    assert not report.errors and report.created == 1


def test_a_sep_line_naming_another_separator_says_to_save_as_comma_separated(site, last_week):
    before = snapshot()
    report = services.nights_import(site, f"sep=;\nnight;open_hours\n{last_week};4\n".encode())
    assert report.file_problem == ('This file is not a nights CSV: its first line says the columns are separated by '
                                   '";"; save it as comma-separated CSV, without the "sep=" line')
    assert snapshot() == before


# --- many bad rows: the first 50 listed, the rest counted ------------------------------------------------------------


def test_a_file_of_many_bad_rows_lists_the_first_50_and_counts_the_rest(client, site, users, last_week):
    client.force_login(users["technician"])
    before = snapshot()
    data = ("night,open_hours\n" + f"{last_week},x\n" * 1234).encode()
    response = client.post(reverse("nights-import", args=[site.slug]),
                           {"file": SimpleUploadedFile("nights.csv", data, content_type="text/csv"), "confirm": ""})
    page = response.content.decode()
    assert response.status_code == 200
    assert len(re.findall(r"<td>open_hours must be a number", page)) == 50
    assert "<td>51</td>" in page and "<td>52</td>" not in page  # lines 2 to 51
    assert "the first 50 of 1,234 bad rows" in page
    assert "… and 1,184 more bad rows." in page
    assert snapshot() == before


def test_skipped_rows_are_listed_the_same_way(client, site, users, last_week):
    client.force_login(users["technician"])
    data = ("night,open_hours\n" + f"{last_week},4\n" + f"{last_week},x\n" * 1234).encode()
    response = client.post(reverse("nights-import", args=[site.slug]), {
        "file": SimpleUploadedFile("nights.csv", data, content_type="text/csv"), "confirm": "", "skip_bad": "on",
    })
    page = response.content.decode()
    assert len(re.findall(r"<td>open_hours must be a number", page)) == 50
    assert "… and 1,184 more skipped rows." in page


def test_a_few_bad_rows_are_all_listed_with_no_count(client, site, users, last_week):
    client.force_login(users["technician"])
    data = ("night,open_hours\n" + f"{last_week},x\n" * 50).encode()
    response = client.post(reverse("nights-import", args=[site.slug]),
                           {"file": SimpleUploadedFile("nights.csv", data, content_type="text/csv"), "confirm": ""})
    page = response.content.decode()
    assert len(re.findall(r"<td>open_hours must be a number", page)) == 50
    assert "more bad rows" not in page and "the first 50" not in page


# --- the import command: what the path is, when it is not a file ----------------------------------------------------


def run_import(path: str, site) -> None:
    call_command("import_nights", path, "--site", site.slug, stdout=StringIO(), stderr=StringIO())


def test_the_command_says_a_directory_is_a_directory(site, tmp_path):
    with pytest.raises(CommandError, match=r"is a directory, not a file"):
        run_import(str(tmp_path), site)


def test_the_command_says_a_device_is_not_a_regular_file(site):
    with pytest.raises(CommandError, match=r"^/dev/null: is not a regular file"):
        run_import("/dev/null", site)


def test_the_command_still_says_a_missing_file_is_missing(site, tmp_path):
    with pytest.raises(CommandError, match=r"no such file$"):
        run_import(str(tmp_path / "absent.csv"), site)


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads a file whatever its permissions")
def test_the_command_says_a_file_it_may_not_read_cannot_be_read(site, tmp_path):
    path = tmp_path / "nights.csv"
    path.write_text("night,open_hours\n")
    path.chmod(0)
    with pytest.raises(CommandError, match=r"cannot be read \(Permission denied\)"):
        run_import(str(path), site)


# --- the coating calculator's response file ---------------------------------------------------------------------------


def test_a_response_cell_over_the_csv_field_limit_is_refused_naming_its_line():
    # Python's csv module refuses a cell longer than csv.field_size_limit() characters: before, an HTTP 500.
    limit = csv.field_size_limit()
    data = b"wavelength_nm,weight\n400,1\n500," + b"1" * (limit + 1) + b"\n"
    with pytest.raises(ValueError, match=rf"^line 3: a cell is longer than {limit:,} characters"):
        response_csv.parse(data)


def test_a_response_quote_never_closed_is_refused_not_a_server_error(client, users):
    client.force_login(users["viewer"])
    limit = csv.field_size_limit()
    data = b'wavelength_nm,weight\n400,"1\n' + b"500,1\n" * (limit // 6 + 1)
    upload = SimpleUploadedFile("response.csv", data, content_type="text/csv")
    response = client.post("/coating/", {"metal": "al", "layers": "", "from_nm": "400", "to_nm": "1000",
                                         "step_nm": "10", "response": upload})
    assert response.status_code == 200 and response.context["result"] is None
    assert "a cell is longer than" in response.content.decode()


def test_a_response_file_with_carriage_returns_alone_is_read():
    # Old spreadsheets on a Mac end lines with CR alone; read as lines, as the nights CSV is.
    waves, weights = response_csv.parse(b"wavelength_nm,weight\r400,1\r500,2\r")
    assert list(waves) == [400.0, 500.0] and list(weights) == [0.5, 1.0]  # in proportion, the largest 1


def test_a_response_in_micrometres_or_with_semicolons_is_told_so_and_huge_weights_keep_their_proportions():
    """A bad-input review: semicolons got "the header must name exactly ...", micrometres "the response is zero over
    the whole band", weights of 1e308 a band mean of nan."""
    with pytest.raises(ValueError, match="its columns look separated by ';': this format separates them by commas"):
        response_csv.parse(b"wavelength_nm;weight\n400;1\n500;2\n")
    with pytest.raises(ValueError, match="its columns look separated by tabs"):
        response_csv.parse(b"wavelength_nm\tweight\n400\t1\n500\t2\n")
    with pytest.raises(ValueError, match=r"^wavelengths 0.4 to 1 look like micrometres: the column wavelength_nm is "
                                         r"in nanometres \(400 to 1000\)$"):
        response_csv.parse(b"wavelength_nm,weight\n0.4,1\n1.0,2\n")
    _, weights = response_csv.parse(b"wavelength_nm,weight\n400,1e308\n500,5e307\n")
    assert list(weights) == [1.0, 0.5]
