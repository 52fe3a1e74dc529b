"""Specifications for the caution library observatory_ops.workorders.cautions (pure data, no database)."""

import re

import pytest

from observatory_ops.workorders.cautions import (
    CAUTIONS,
    DANGER_TO_LIFE,
    HAZARDS,
    ISOLATION_HAZARDS,
    NO_ISOLATION_NEEDED,
    PRECEDENCE_STATEMENT,
    SERIOUS_INJURY,
    SEVERITY_LABELS,
    Caution,
    cautions_for,
    needs_isolation,
)

# The standard each hazard must name, the published standard that governs it in US and international practice
# (which standard covers which hazard: from memory): OSHA 29 CFR 1910.147, ANSI/ASSP Z244.1 and NFPA 70E
# (electrical), ISO 4414 (pneumatic), OSHA 1910.184 (slings), OSHA 1910.28 (fall protection), ANSI Z136.1 /
# IEC 60825-1 (lasers), safety data sheets under GHS (chemicals), CGA P-12 (cryogens); the manufacturer's handling
# instructions for optical surfaces; OSHA 29 CFR 1910.147(d)(5) (stored energy relieved, disconnected or restrained)
# for the springs of a spring-applied brake.
REQUIRED_STANDARDS = {
    "electrical": ("1910.147", "Z244.1", "NFPA 70E"),
    "pneumatic": ("ISO 4414",),
    "stored_mechanical": ("1910.147(d)(5)", "maker"),
    "hydraulic": ("ISO 4413", "1910.147"),  # ISO 4413: hydraulic fluid power, the counterpart of ISO 4414
    "moving_machinery": ("1910.147",),
    "suspended_load": ("1910.184",),
    "height": ("1910.28",),
    "chemical": ("safety data sheet", "GHS", "1910.106"),  # OSHA 29 CFR 1910.106: flammable liquids
    "cryogen": ("CGA P-12",),
    "vacuum_plant": ("1910.147",),  # lockout of the plant's supplies (OSHA 29 CFR 1910.147)
    "laser": ("ANSI Z136.1", "IEC 60825-1"),
    "optical_surface": ("manufacturer",),
}


def test_every_hazard_has_a_caution_naming_its_standard():
    assert set(CAUTIONS) == set(HAZARDS) == set(REQUIRED_STANDARDS)
    for code, caution in CAUTIONS.items():
        assert caution.hazard == code
        assert caution.title == HAZARDS[code]
        assert caution.severity in SEVERITY_LABELS
        for name in REQUIRED_STANDARDS[code]:
            assert name.lower() in caution.standard.lower(), (code, name)


def test_every_caution_is_three_to_six_sentences():
    for code, caution in CAUTIONS.items():
        sentences = re.findall(r"[.!?](?:\s|$)", caution.text)
        assert 3 <= len(sentences) <= 6, code


def test_cautions_are_ordered_by_severity_danger_to_life_first():
    cautions = cautions_for(HAZARDS)
    severities = [caution.severity for caution in cautions]
    assert severities == sorted(severities, reverse=True)
    assert cautions[0].severity == DANGER_TO_LIFE
    assert cautions[-1].hazard == "optical_surface"


def test_equal_severity_keeps_library_order_whatever_the_input_order():
    forward = cautions_for(["electrical", "moving_machinery", "height"])
    backward = cautions_for(["height", "moving_machinery", "electrical"])
    assert [caution.hazard for caution in forward] == ["electrical", "moving_machinery", "height"]
    assert forward == backward


def test_union_of_subsystem_and_task_hazards_has_no_repeats():
    subsystem = ["electrical", "moving_machinery", "optical_surface"]
    task = ["suspended_load", "electrical", "optical_surface", "height"]
    cautions = cautions_for(subsystem + task)
    assert [caution.hazard for caution in cautions] == [
        "electrical",
        "moving_machinery",
        "suspended_load",
        "height",
        "optical_surface",
    ]


def test_no_hazards_give_no_cautions():
    assert cautions_for([]) == []


def test_moving_machinery_caution_says_the_mount_stops_within_about_a_second():
    # Common practice, no published source: a mount can slew fast and stop within about a second.
    text = CAUTIONS["moving_machinery"].text
    assert "within about a second" in text
    assert "swept volume" in text and "energised" in text


def test_unknown_hazard_raises_value_error_listing_known_hazards():
    with pytest.raises(ValueError, match="unknown hazard 'radiation'") as excinfo:
        cautions_for(["electrical", "radiation"])
    for code in HAZARDS:
        assert code in str(excinfo.value)


def test_single_string_instead_of_a_collection_raises_value_error():
    with pytest.raises(ValueError, match="not the single string"):
        cautions_for("electrical")


def test_precedence_statement_names_local_codes_manufacturer_and_licensed_practice():
    statement = PRECEDENCE_STATEMENT.lower()
    for phrase in ("local codes", "manufacturer's instructions", "licensed practice", "take precedence"):
        assert phrase in statement


def test_cautions_are_immutable():
    with pytest.raises(AttributeError):
        CAUTIONS["laser"].severity = 1  # type: ignore[misc]
    assert isinstance(CAUTIONS["laser"], Caution)


# --- stored mechanical energy (the springs of a spring-applied brake) ----------------------------------------


def test_the_spring_caution_says_locking_off_the_power_leaves_the_springs_loaded_and_how_to_restrain_them():
    # OSHA 29 CFR 1910.147(d)(5)(i): after the energy isolating devices are applied, potentially hazardous stored
    # energy shall be relieved, disconnected, restrained and otherwise rendered safe.
    caution = CAUTIONS["stored_mechanical"]
    text = caution.text.lower()
    assert "stay loaded" in text and "does not release" in text
    assert "relieve or restrain the spring force" in text and "the maker provides" in text
    # Releasing a brake frees the axis it holds (common practice, no published source).
    assert "pin or block the axis" in text
    # A spring pack let go can hurt badly; the axis it frees is the moving-telescope caution's danger to life.
    assert caution.severity == SERIOUS_INJURY


def test_a_loaded_spring_is_part_of_energy_control_and_the_no_isolation_note_names_it():
    # OSHA 29 CFR 1910.147(d)(5): stored energy belongs to the energy control procedure, so work whose only hazard is
    # a spring still gets the lockout step and its stored-energy line.
    assert "stored_mechanical" in ISOLATION_HAZARDS
    assert needs_isolation(["stored_mechanical"])
    assert "a loaded spring" in NO_ISOLATION_NEEDED


# --- what stays live or pressurised after the isolator is off ------------------------------------------------


def test_the_electrical_caution_names_back_feed_and_tests_at_the_point_of_work():
    # OSHA 29 CFR 1910.333(b)(2)(iv): a circuit is verified de-energised before it is worked on as such, the test
    # finding any voltage back-fed from elsewhere. The sources named are common practice, no published source.
    caution = CAUTIONS["electrical"]
    text = caution.text
    assert "A UPS, a generator, a battery bank or a second supply can keep a circuit live after its isolator is off" \
        in text
    assert "back-feed" in text and "isolate and lock each source that can feed the work" in text
    assert "test for absence of voltage at the point of work, not at the isolator" in text
    assert "proved on a known live source just before and just after the test" in text  # as before
    assert "1910.333(b)(2)(iv)" in caution.standard
    assert caution.severity == DANGER_TO_LIFE


def test_the_hydraulic_caution_says_a_zero_at_the_pump_proves_nothing_about_the_part_worked_on():
    # ISO 4413 asks for the system to be isolated and its stored pressure released; that check valves, an
    # accumulator or a load held by a cylinder keep part of the circuit pressurised while the pump's gauge reads zero
    # is common practice, no published source.
    caution = CAUTIONS["hydraulic"]
    text = caution.text
    assert "Zero on the gauge at the pump does not prove the circuit dead" in text
    assert "check valves, an accumulator or a load held up by a cylinder keep pressure trapped in their part" in text
    assert "bleed the part you work on and confirm zero on a gauge or test point on that part" in text
    assert "ISO 4413" in caution.standard

