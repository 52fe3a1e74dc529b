"""The coating calculator refuses, before anything is computed, a band outside the recipe's optical data, a grid of
more wavelengths than ``calc.coating.MAX_GRID_SIZE`` (our own bound, no published source), band edges or a step that
are not finite numbers, and a response file over ``response_csv.MAX_BYTES``; the pure ``coating_curve`` refuses such a
grid itself before building it. The data ranges checked against are those of the embedded tables and formulas:
aluminium Rakic 1995 (0.12399-200 um), silver Johnson and Christy 1972 (0.1879-1.937 um), SiO2 Malitson 1965
(0.21-3.71 um), as tabulated in the refractiveindex.info database."""
from __future__ import annotations

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile

from observatory_ops.calc import coating
from observatory_ops.mirrors import response_csv
from observatory_ops.mirrors.forms import CalculatorForm

BAND = {"metal": "al", "layers": "", "from_nm": "400", "to_nm": "1000", "step_nm": "10"}


def _band(**given) -> dict:
    return {**BAND, **given}


# (what is typed, the field refused, words the message must hold)
BAD = [
    # The review's own requests: a grid numpy cannot allocate, and one of 198,001 wavelengths.
    (_band(from_nm="1", to_nm="1e12", step_nm="0.1"), "to_nm", ["Band to", "1e+12 nm", "0.12399 to 200,000 nm"]),
    (_band(from_nm="200", to_nm="20000", step_nm="0.1"), "step_nm",
     ["Step", "198,001 wavelengths", "the limit is 10,000", "a step of 2 nm or more"]),
    # 0.1 to 200,000 nm: 2,000,000 wavelengths at 0.1 nm, and below the aluminium table's first wavelength.
    (_band(from_nm="0.1", to_nm="200000", step_nm="0.1"), "from_nm", ["Band from", "0.1 nm", "0.12399 to 200,000"]),
    (_band(from_nm="1", to_nm="200000", step_nm="0.1"), "step_nm",
     ["Step", "1,999,991 wavelengths", "a step of 50 nm or more"]),
    # Silver's table (Johnson and Christy 1972) ends at 1937 nm.
    (_band(metal="ag", to_nm="2500"), "to_nm", ["Band to", "2500 nm", "187.9 to 1,937 nm"]),
    # An SiO2 overcoat narrows aluminium to Malitson's 210-3710 nm.
    (_band(layers="SiO2:100", from_nm="150"), "from_nm", ["Band from", "150 nm", "210 to 3,710 nm"]),
    (_band(from_nm="1000", to_nm="400"), "to_nm", ["Band to", "must be above band from"]),
    (_band(from_nm="nan"), "from_nm", ["finite number"]),
    (_band(to_nm="inf"), "to_nm", ["finite number"]),
    (_band(to_nm="1e400"), "to_nm", ["finite number"]),  # too large for a float: read as inf
    (_band(step_nm="-inf"), "step_nm", ["finite number"]),
    (_band(step_nm="0.01"), "step_nm", ["0.1"]),
]


@pytest.mark.parametrize("data, field, words", BAD)
def test_the_form_refuses_a_band_or_step_naming_the_field_and_the_problem(data, field, words):
    form = CalculatorForm(data)
    assert not form.is_valid()
    message = " ".join(form.errors[field])
    for word in words:
        assert word in message


@pytest.fixture
def viewer(users, client):
    client.force_login(users["viewer"])
    return client


@pytest.fixture
def computed(monkeypatch) -> list[tuple]:
    """Every coating curve and response file the page goes on to compute: none, for a refused form."""
    calls: list[tuple] = []
    curve, parse = coating.coating_curve, response_csv.parse
    monkeypatch.setattr(coating, "coating_curve", lambda *a, **k: calls.append(("curve", a)) or curve(*a, **k))
    monkeypatch.setattr(response_csv, "parse", lambda data: calls.append(("response", len(data))) or parse(data))
    return calls


@pytest.mark.parametrize("data, field, words", BAD)
def test_the_page_refuses_a_band_or_step_as_a_form_error_and_computes_nothing(viewer, computed, data, field, words):
    response = viewer.post("/coating/", data)
    assert response.status_code == 200
    form = response.context["form"]
    assert field in form.errors and response.context["result"] is None
    text = response.content.decode()
    assert "The form was not accepted" in text
    for word in words:
        assert word in text
    assert computed == []


def test_a_response_file_over_the_limit_is_refused_by_its_size_before_it_is_read(viewer, computed):
    too_big = b"wavelength_nm,weight\n" + b"500,1\n" * (response_csv.MAX_BYTES // 6)
    assert len(too_big) > response_csv.MAX_BYTES
    upload = SimpleUploadedFile("r.csv", too_big, content_type="text/csv")
    response = viewer.post("/coating/", _band(response=upload))
    assert response.status_code == 200 and response.context["result"] is None
    message = " ".join(response.context["form"].errors["response"])
    assert f"the file is {len(too_big):,} bytes; the limit is 1,048,576 bytes" in message
    assert message in response.content.decode()
    assert computed == []


def test_the_form_alone_refuses_a_response_file_over_the_limit():
    upload = SimpleUploadedFile("r.csv", b"x" * (response_csv.MAX_BYTES + 1), content_type="text/csv")
    form = CalculatorForm(BAND, {"response": upload})
    assert not form.is_valid() and "Response: the file is 1,048,577 bytes" in form.errors["response"][0]


def test_a_response_read_past_the_limit_is_refused_by_the_parser_too():
    with pytest.raises(ValueError, match="over the limit of 1,048,576 bytes"):
        response_csv.parse(b"x" * (response_csv.MAX_BYTES + 1))


def test_a_large_grid_within_the_limit_is_computed(viewer, computed):
    # 400 to 1399.9 nm every 0.1 nm: exactly 10,000 wavelengths, the limit.
    response = viewer.post("/coating/", _band(to_nm="1399.9", step_nm="0.1"))
    assert response.status_code == 200 and not response.context["form"].errors
    curve = response.context["result"]["curve"]
    assert len(curve) == coating.MAX_GRID_SIZE == 10_000
    assert (curve[0]["wavelength_nm"], curve[-1]["wavelength_nm"]) == (400.0, 1399.9)
    assert [kind for kind, _ in computed] == ["curve"]


def test_a_grid_one_wavelength_over_the_limit_is_refused():
    form = CalculatorForm(_band(to_nm="1400", step_nm="0.1"))
    assert not form.is_valid() and "10,001 wavelengths" in form.errors["step_nm"][0]


@pytest.mark.parametrize("from_nm, to_nm, suggested, finer", [("200", "20000", "2", "1"), ("1", "200000", "50", "20")])
def test_the_suggested_step_is_the_finest_round_one_within_the_limit(from_nm, to_nm, suggested, finer):
    assert CalculatorForm(_band(from_nm=from_nm, to_nm=to_nm, step_nm=suggested)).is_valid()
    assert "step_nm" in CalculatorForm(_band(from_nm=from_nm, to_nm=to_nm, step_nm=finer)).errors


@pytest.mark.parametrize("from_nm, to_nm, step_nm", [(1.0, 1e12, 0.1), (200.0, 20000.0, 0.1), (-1e308, 1e308, 1.0)])
def test_coating_curve_refuses_a_grid_over_the_limit_before_building_it(from_nm, to_nm, step_nm):
    # Built, the first would need 72.8 TiB: numpy's MemoryError, not this ValueError, would come out.
    with pytest.raises(ValueError, match="wavelengths"):
        coating.coating_curve("al", [], from_nm, to_nm, step_nm)


@pytest.mark.parametrize("from_nm, to_nm, step_nm, message", [
    (float("nan"), 1000.0, 10.0, "finite"),
    (400.0, float("inf"), 10.0, "finite"),
    (400.0, 1000.0, float("nan"), "step"),
    (400.0, 1000.0, float("inf"), "step"),
])
def test_coating_curve_refuses_numbers_that_are_not_finite(from_nm, to_nm, step_nm, message):
    with pytest.raises(ValueError, match=message):
        coating.coating_curve("al", [], from_nm, to_nm, step_nm)


@pytest.mark.parametrize("from_nm, to_nm, step_nm", [
    (400.0, 1000.0, 10.0), (450.0, 700.0, 60.0), (400.0, 1399.9, 0.1), (400.0, 400.05, 0.1), (0.2, 0.3, 0.1),
])
def test_grid_size_counts_the_wavelengths_coating_curve_computes(from_nm, to_nm, step_nm):
    curve = coating.coating_curve("al", [], from_nm, to_nm, step_nm)["curve"]
    assert coating.grid_size(from_nm, to_nm, step_nm) == len(curve)
    assert curve[-1]["wavelength_nm"] == to_nm


def test_the_lower_limit_as_printed_is_accepted_typed_back():
    """The range is printed as 0.12399 nm (Rakic 1995's table in micrometres times 1000 gave 0.12399000000000002):
    typed back, it is inside."""
    low, _ = coating.wavelength_range_nm(["al"])
    assert f"{low:g}" == "0.12399" and low == 0.12399
    form = CalculatorForm(_band(from_nm="0.12399", to_nm="1000", step_nm="1"))
    assert form.is_valid(), form.errors


def test_a_utf16_response_file_is_told_to_be_saved_as_utf8():
    """A bad-input review's UTF-16 response file was called "not a text CSV file"."""
    data = "wavelength_nm,weight\n500,1\n600,1\n".encode("utf-16")
    with pytest.raises(ValueError, match="the response file is UTF-16 text; save it as UTF-8 CSV"):
        response_csv.parse(data)
