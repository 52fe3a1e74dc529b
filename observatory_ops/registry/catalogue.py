"""The catalogue of subsystem kinds: what each kind is, its hazards and its default service plans.

Adding a kind: add one ``Kind`` to ``KINDS`` below (code, label, hazards, plans, and the quantities measured
on it beyond its plans' readings). Existing subsystems are not changed; new subsystems of the kind get its
default plans, which the engineer can then edit per subsystem. Every default interval says where it comes
from in ``basis``: "common practice" (a rule of thumb of the trade, no published source) or "from memory".
Replace them with the manufacturer's figures for your own equipment.

Steps come in three groups. ``before_isolation`` are done under power before anything is locked out:
closing the enclosure (a dome's shutter or a roll-off roof), parking or slewing the telescope, opening covers, tests
that need the drives or the supply live. ``after_isolation`` follow the lockout step that a work order puts after them
(``workorders.services.steps_in_groups``): anything touching drives, brakes, electrics or moving parts;
one that needs an axis or the enclosure moved says to remove the lock only under the site's lockout procedure.
``restore`` starts with the step that removes the locks that way, then whatever is done back in service.

Trigger metrics are listed in ``observatory_ops.planning.metrics``.
"""
from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from itertools import combinations

from observatory_ops.calc.trend import SERVO_LOOP_HZ, SETTLE_TIME_LIMIT_S
from observatory_ops.workorders.cautions import in_words

COMMON_PRACTICE = "common practice, no published source"
FROM_MEMORY = "from memory"


@dataclass(frozen=True)
class PlanTemplate:
    name: str
    task: str
    triggers: tuple[tuple, ...]  # (metric, limit), or (metric, limit, quantity) for a reading trigger
    basis: str
    dust_sensitivity: float = 0.0
    hazards: tuple[str, ...] = ()  # extra hazards of the task itself (beyond the subsystem's)
    before_isolation: tuple[str, ...] = ()  # done under power, before the lockout step
    after_isolation: tuple[str, ...] = ()  # done with the energy locked out, in order
    restore: tuple[str, ...] = ()  # the step that removes the locks, then anything done back in service
    estimated_hours: float = 1.0
    tools: tuple[str, ...] = ()
    parts: tuple[str, ...] = ()  # spare-part names; matched to the site's stock by name on a work order
    readings: tuple[tuple[str, str], ...] = ()  # (quantity, limit as text) to record on the work order

    @property
    def steps(self) -> tuple[str, ...]:
        """Every step in the order of the work, as a plan made from this template lists them."""
        return self.before_isolation + self.after_isolation + self.restore

    @property
    def stored_steps(self) -> dict[str, str]:
        """The steps and tools as a service plan stores them (``planning.ServicePlan``), one a line; the release step
        is the work order's to add, once, after all the locked-out work."""
        return {
            "steps_powered": "\n".join(self.before_isolation),
            "steps": "\n".join(self.after_isolation),
            "steps_restore": "\n".join(step for step in self.restore if step != RELEASE),
            "tools": "\n".join(self.tools),
        }


@dataclass(frozen=True)
class Kind:
    code: str
    label: str
    hazards: tuple[str, ...]
    plans: tuple[PlanTemplate, ...] = field(default=())
    #: Fed from a supply of its own rather than the telescope's (a dome's rotation and shutter drives): its
    #: work needs an isolation point registered for the subsystem itself (workorders.selectors.isolation_gaps).
    separate_supply: bool = False
    #: Why work on it needs an isolation point registered for the subsystem itself, which its telescope's points do not
    #: replace, as the warning says when none is (workorders.selectors.isolation_gaps): "" when its telescope's points
    #: isolate it. A kind with a supply of its own needs one (a dome's drives), and so does the AC distribution: the
    #: telescope's isolators are downstream of its boards and leave their incoming side live.
    own_point: str = ""
    #: Reading quantities (codes of ``logbook.quantities``) a technician measures on such a subsystem besides those
    #: its plans ask for or watch: the reading form offers them first (``logbook.quantities.usual_for_kind``).
    #: Empty where nothing is usually measured (the work is looking and testing), and the form says so.
    quantities: tuple[str, ...] = ()
    #: What can move once the locks of work on it come off, which the release step names (a key of ``CLEAR_OF``): the
    #: telescope, the enclosure's dome, shutter or roof, or a hoist's load. "" where the kind cannot say (Other): the
    #: subsystem's hazards then say it (``moving_parts``).
    moves: str = "telescope"


# Steps shared by several plans. Parking, closing the enclosure and live tests come before isolation; the
# last step removes the locks only as the site's lockout procedure says. "Enclosure", not "dome": the same words
# serve a dome's shutter and a roll-off roof.
READ_RECORDS = "Read the last service record and open faults for this subsystem."
_OUT_OF_SERVICE = "Take the observatory out of robotic and remote control and close the enclosure."
_PARK = "Park the telescope at its service position."
_OUT_OF_SERVICE_PARKED = "Take the observatory out of robotic and remote control and park the telescope."
#: The step an ad hoc order on a telescope that can move starts with when its steps under power are left empty
#: (workorders.services.work_order_ad_hoc), as planned orders start with it or ``_OUT_OF_SERVICE``.
OUT_OF_CONTROL_PARKED = _OUT_OF_SERVICE_PARKED
_PREPARE = (READ_RECORDS, _OUT_OF_SERVICE, _PARK)
_INSPECT = "Inspect for wear, looseness, contamination and damage; photograph anything unusual."
#: What the release step asks everyone to be clear of, by what can move once the locks come off (``Kind.moves``), in
#: the order an order names them. Removing the locks lets the drives be powered, and a dome turns, a shutter or roll-off
#: roof runs and a hoist's hook or load comes down on whoever is in their path, not only in the telescope's swept
#: volume (common practice, no published source; OSHA 29 CFR 1910.147(e)(2) asks that employees be safely positioned
#: or removed before the locks come off).
CLEAR_OF = {
    "telescope": "clear of the telescope",
    "enclosure": "clear of the path of the dome and its shutter (or of the roll-off roof)",
    "load": "clear of the load's path and the area under it",
}


#: What the release adds on an order with a step that may tag equipment out of service when it fails its inspection
#: (``is_tag_out_step``): the locks and the order's own tags come off, the out-of-service tag stays until the equipment
#: is repaired and passes (OSHA 29 CFR 1910.147(e) for the release; the rest common practice, no published source).
_TAG_STAYS = (
    ", but leave in place the out-of-service tag on anything that failed its inspection: it stays out of service "
    "until it is repaired and passes"
)


def release_step(moving: Iterable[str], tagged_out: bool = False) -> str:
    """The step that removes the locks, naming each thing that can then move (keys of ``CLEAR_OF``) once, in
    ``CLEAR_OF``'s order whatever the order of ``moving``: an order over a drive, a dome and a hoist names all three.
    With ``tagged_out`` (the order has a step that tags out what fails its inspection: ``is_tag_out_step``) it says
    that tag stays."""
    named = set(moving)
    clear = [words for key, words in CLEAR_OF.items() if key in named]
    return (
        f"When the work is done and everyone is {in_words(clear)}, remove the locks and tags as the site's lockout "
        f"procedure says{_TAG_STAYS if tagged_out else ''}."
    )


#: The first restoring step of every plan: the one step that removes the locks. An order over several plans
#: writes it once (workorders.services), after all their locked-out work, in the words of what its subsystems can set
#: moving (``release_step_for``); the plans keep this one as the place it goes.
RELEASE = release_step(["telescope"])
#: The release of a recoat's reinstall order (mirrors.services), in its own words: it removes the pins and the
#: site's long-term locks of the removal too. The removal's own release leaves the locks on, so it is no release.
RELEASE_AT_REINSTALL = (
    "Only when both axes are balanced and everyone is clear, remove the pins, the locks (the site's "
    "long-term locks from the removal too) and the tags as the site's lockout procedure says."
)
#: Every wording of the release step an order can carry (``is_release_step``): each set of moving things, with or
#: without the out-of-service tag that stays, and the reinstall's. A safety review found the reinstall's unread: its
#: brake air and first moves under power counted as locked-out work, free to tick while another crew was locked out.
RELEASE_STEPS: frozenset[str] = frozenset(
    release_step(keys, tagged_out)
    for count in range(1, len(CLEAR_OF) + 1) for keys in combinations(CLEAR_OF, count) for tagged_out in (False, True)
) | {RELEASE_AT_REINSTALL}


def is_release_step(text: str) -> bool:
    """True when ``text``, one step (spaces around it ignored), is the step that removes the locks, in any of its
    wordings (``RELEASE_STEPS``). Every check for the release step goes through here, never a comparison with
    ``RELEASE``, so an order over a dome or a hoist is read like one over the telescope."""
    return text.strip() in RELEASE_STEPS


def is_tag_out_step(text: str) -> bool:
    """True when ``text``, one step, tags something out of service if it fails its check ("If anything is beyond the
    maker's limits, tag the hoist out of service ..."): a step starting "If" that says to tag it out of service. An
    order holding one says in its release that the tag stays (``release_step``)."""
    words = " ".join(text.split()).lower()
    return words.startswith("if ") and "out of service" in words and re.search(r"\btag\b", words) is not None


#: Where everyone stands while a subsystem is tested back in service under power, by what can move (``Kind.moves``):
#: the test runs with the drives powered, so whoever watches it stands there too (common practice, no published
#: source; the moving-machinery caution).
_WATCH_FROM = {
    "telescope": "outside the telescope's swept volume",
    "enclosure": "clear of the path of the dome and its shutter (or of the roll-off roof)",
    "load": "clear of the load's path and the area under it",
}


def _watched_from(moves: str) -> str:
    """Where everyone stands for the test under power of a kind that can set ``moves`` moving: always outside the
    telescope's swept volume (the order's release powers its drives too), and clear of what the kind moves."""
    return in_words([_WATCH_FROM["telescope"], *([_WATCH_FROM[moves]] if moves != "telescope" else [])])


def _back_in_service(moves: str = "telescope") -> str:
    """The step that puts a subsystem back in service and tests it under power, watched from a safe place."""
    return (
        "Restore the subsystem to service and test it under power, with everyone, whoever watches the test too, "
        f"{_watched_from(moves)}."
    )


_BACK_IN_SERVICE = _back_in_service()
_BACK_IN_SERVICE_ENCLOSURE = _back_in_service("enclosure")
#: An inspection that may end with the subsystem tagged out of service (the hoist's) returns it only if it passed.
_BACK_IN_SERVICE_IF_PASSED = (
    "Only if nothing was found beyond the maker's limits, restore the subsystem to service and test it under power, "
    f"unloaded, with everyone, whoever watches the test too, {_watched_from('load')}; otherwise leave it tagged out "
    "of service and say so in the findings."
)
#: The earlier wordings of the two steps above, which plans stored before keep (``RETURNS_TO_SERVICE``).
_EARLIER_BACK_IN_SERVICE = (
    "Restore the subsystem to service and test it under observation.",
    "Only if nothing was found beyond the maker's limits, restore the subsystem to service and test it under "
    "observation; otherwise leave it tagged out of service and say so in the findings.",
)
_RESTORE = (RELEASE, _BACK_IN_SERVICE)
_COVER_CLOSED_IN_SERVICE = "Close the mirror cover and return the telescope to service."
#: Work above the primary with its cover open, as the mirror cover's check may need: the glass covered first, and the
#: cover closed before the telescope goes back in service (common practice, no published source).
_PRIMARY_COVER = "the primary mirror's protective cover"
_PROTECT_OPEN_PRIMARY = (
    f"If the mirror cover was left open, lay {_PRIMARY_COVER} over the primary before anyone works above it, and "
    "tether the tools used over it."
)
_UNCOVER_PRIMARY = (
    "If the primary was covered, check that nothing has fallen on its protective cover, then lift the cover off."
)
_COVER_LEFT_CLOSED = (
    "With nobody near the petals and everyone outside the telescope's swept volume, close the mirror cover from the "
    "control panel and check that the closed-position switch reports closed: the telescope goes back in service with "
    "its cover closed."
)
#: Said of a test on live equipment, as the electrical caution asks (NFPA 70E: energised work by a qualified person).
_ENERGISED_WORK = (
    "This is work on live equipment: only a qualified person, under the site's rules for energised work."
)

# Work that takes the primary mirror out of its telescope (the recoat plan below, and the recoat planner's removal and
# reinstall orders, mirrors.services._PHASE_WORK, which use these words too): without its mirror the tube stands far
# out of balance, so the axes are pinned and the telescope tagged out of service until the balance is restored.
# Common practice, no published source; the site's mirror-removal procedure and the mount maker's instructions come
# first.
PIN_AXES = "Lock both axes mechanically with their locking pins; fit the mirror-handling fixture."


def out_of_balance_tag(until: str) -> str:
    """The step that tags a telescope without its primary mirror out of service, kept so ``until`` (in words)."""
    return (
        "Tag the telescope out of service at its controls and at the drive cabinet (primary mirror removed, "
        "out of balance, axes pinned: do not move), keep the observatory out of robotic and remote control "
        f"until {until}, and tell the remote operators."
    )

#: The recoat plan's last locked-out step and its return to service (the planner's reinstall words them for its own
#: phases: mirrors.services._PHASE_WORK).
_REBALANCE = (
    "Restore the axis balance with the drives still locked out, as the site's balancing procedure and the mount "
    "maker's instructions say, one axis at a time: never take a pinned or braked axis as balanced. Release an axis's "
    "brake only as the procedure says, with everyone outside the swept volume and the axis restrained, and draw its "
    "pin only once neither axis turns under gravity."
)
_FIRST_MOVES = (
    "Return the telescope to service: make the first moves under power slowly, with everyone outside the swept "
    "volume."
)

#: The code of the spring-applied, air-released brake (``KINDS["brake"]``).
AIR_BRAKE = "brake"
#: The one step that brings back the air of air-released brakes, said once by every order whose lockout vents it (an
#: air isolation point it locks on a telescope with such a brake in service, or work on such a brake, air point or
#: not): right after the release, before anything goes back in service (workorders.services.steps_in_groups). The
#: brakes of a telescope share their air, so it covers each axis, whichever brakes the order works on; the air brake
#: plan's own restoring uses these words, and an order writes them once for all its plans. The air coming back
#: releases the brakes, and an out-of-balance axis can swing (the pneumatic caution; ISO 4414 for the air's control,
#: the rest common practice, no published source).
BRAKE_AIR_BACK = (
    "With everyone told and outside the swept volume, and each axis balanced or restrained, restore the brake air the "
    "lockout vented, slowly (an air-released brake lets its axis go as the air returns), and check that each brake "
    "releases and holds."
)
#: Earlier wordings of the air brake plan's step that brought its air back, which plans stored before keep: one axis's
#: words, though the shared air releases every axis's brake. An order drops them for ``BRAKE_AIR_BACK``
#: (``is_brake_air_step``).
_BRAKE_AIR_RESTORED = (
    "With everyone outside the swept volume and the axis balanced or restrained, restore the air slowly and check that "
    "the brake releases and holds."
)
_EARLIER_BRAKE_AIR_RESTORED = "Restore the air slowly and check that the brake releases and holds."
#: The steps that bring an air brake's air back with everyone clear: steps written by hand that hold one of them
#: bring back the air of the order's own brakes (workorders.services.brake_air_back). The first wording of the brake
#: plan's (``_EARLIER_BRAKE_AIR_RESTORED``) said nothing of anyone's being clear.
RESTORES_BRAKE_AIR: frozenset[str] = frozenset({_BRAKE_AIR_RESTORED, BRAKE_AIR_BACK})
#: Every wording of a step that brings brake air back (``is_brake_air_step``).
BRAKE_AIR_STEPS: frozenset[str] = RESTORES_BRAKE_AIR | {_EARLIER_BRAKE_AIR_RESTORED}


def is_brake_air_step(text: str) -> bool:
    """True when ``text``, one step (spaces around it ignored), brings the brake air back, in any of its wordings
    (``BRAKE_AIR_STEPS``): an order made from plans writes ``BRAKE_AIR_BACK`` once in place of them all."""
    return text.strip() in BRAKE_AIR_STEPS

_GAS_MONITOR = "portable O2/CO2 gas monitor"  # the cryogen caution asks for one in a closed dome
#: The limit of a reading that only the equipment's maker can give.
_MAKERS_FIGURE = "the maker's figure"

# Tools that several plans bring, worded once (no commas in a tool: the work order page lists them with commas). The
# voltage tester is proved before and after use as the electrical caution says (workorders.cautions); the protective
# equipment for a solvent is what its safety data sheet says.
_PROVED = "proved on a known live source just before and just after use"
_VOLTAGE_TESTER = f"voltage tester {_PROVED}"
_FEELER_GAUGES = "feeler gauges"
_MULTIMETER = "digital multimeter with insulated probes"
_SOLVENT_PPE = "gloves and eye protection the solvent's safety data sheet calls for"


def _move_under_procedure(what: str, why: str) -> str:
    """A step after isolation that needs an axis or the enclosure moved: only under the site's procedure, and the
    isolation proved again once the locks are back on, as the lockout step proves it (OSHA 29 CFR 1910.147(d)(6))."""
    return (
        f"If {what} must move {why}, remove the lock only as the site's lockout procedure says: everyone clear, "
        "move it from the control panel, then isolate, lock and tag again and prove the isolation again (try to start "
        "the drives, then return the controls to off) before touching anything."
    )


# An axis drive: the readings need the drive under power, so they are taken before isolation.
_AXIS_BEFORE = (
    READ_RECORDS,
    _OUT_OF_SERVICE,
    "With everyone outside the swept volume, slew and track from the control computer; record the settle time, "
    "following error and motor current on this work order.",
    _PARK,
)
_AXIS_AFTER = (
    "Inspect the motor, couplings and mounting for wear, looseness and damage; photograph anything unusual.",
)


KINDS: dict[str, Kind] = {
    k.code: k
    for k in (
        Kind(
            "primary_mirror",
            "Primary mirror",
            # Work on a mirror in a telescope that can move: an ad hoc order on it carries the moving-telescope
            # caution too (a recoat's coating phase, away at the plant, takes only its own hazards).
            ("optical_surface", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect and CO2-snow clean primary",
                    "Inspect the coating, clean with CO2 snow, measure reflectance at the marked positions.",
                    (("dust_hours", 400.0), ("calendar_days", 120.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("cryogen", "height", "moving_machinery"),
                    tools=("CO2 snow gun with dry-gas purge", "reflectometer", "head torch", _GAS_MONITOR),
                    parts=("CO2 cylinder for snow cleaning",),
                    # One value per reading on the finish form: the one after cleaning, which the mirror's record
                    # fits; the value before goes in the findings.
                    readings=(("reflectance", "the mean after cleaning; the mean before in the findings"),),
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Park the telescope pointing at the horizon stop, so the mirror can be reached from the "
                        "front (not at the service position other work uses).",
                        "Open the mirror cover; let the mirror reach ambient temperature to avoid condensation.",
                    ),
                    after_isolation=(
                        "Measure reflectance at the marked positions before cleaning.",
                        "Clean with CO2 snow from the centre outward, keeping the nozzle moving.",
                        "Measure reflectance again at the same positions: record their mean as the reflectance "
                        "reading, and both sets of values in the findings.",
                    ),
                    restore=(RELEASE, _COVER_CLOSED_IN_SERVICE),
                    estimated_hours=3.0,
                ),
                PlanTemplate(
                    "Recoat primary",
                    "Remove, strip and recoat the primary mirror (aluminium is commonly recoated every one to two "
                    "years).",
                    (("recoat_line", 1.0), ("calendar_days", 730.0)),
                    COMMON_PRACTICE,
                    hazards=("suspended_load", "chemical", "vacuum_plant", "moving_machinery"),
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Close the mirror cover and park the telescope where the site's mirror-removal procedure "
                        "says.",
                    ),
                    # One order for all the work the recoat planner splits into phases: pinned and tagged out of service
                    # as the planner's removal is, and left safe if it stops part way (workorders.selectors
                    # .standing_notes); the locks stay on until the balance is restored.
                    after_isolation=(
                        PIN_AXES,
                        out_of_balance_tag("the mirror is back, the balance restored and this order finished"),
                        "Remove, strip and recoat the primary as the site's mirror-removal procedure, the lift plan "
                        "and the coating plant's instructions say.",
                        "Refit the mirror and its cell with the supports and clips set as before.",
                        _REBALANCE,
                    ),
                    restore=(RELEASE, _FIRST_MOVES),
                    tools=(
                        "the lifting table or cart and the rated slings the lift plan lists",
                        "mirror-handling fixture",
                        "transport crate",
                        "axis locking pins",
                        "out-of-service tags",
                    ),
                    estimated_hours=40.0,
                ),
            ),
        ),
        Kind(
            "secondary_mirror",
            "Secondary mirror",
            ("optical_surface", "height", "moving_machinery"),  # in a telescope that can move, as the primary
            (
                PlanTemplate(
                    "Inspect and clean secondary",
                    "Inspect the secondary coating and clean with CO2 snow.",
                    (("dust_hours", 800.0), ("calendar_days", 180.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("cryogen", "moving_machinery"),
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Close the primary mirror cover and point the telescope so the secondary can be reached "
                        "from the work platform.",
                    ),
                    after_isolation=(
                        "Inspect the secondary coating; photograph anything unusual.",
                        "Clean with CO2 snow from the centre outward, keeping the nozzle moving.",
                    ),
                    restore=_RESTORE,
                    tools=("CO2 snow gun with dry-gas purge", _GAS_MONITOR),
                    estimated_hours=2.0,
                ),
            ),
            # Its reflectance, measured as the primary's is, tells when a clean no longer brings it back.
            quantities=("reflectance",),
        ),
        Kind(
            # A refractor's objective with its cell, its dew shield and the dew heater wrapped round them: glass at the
            # front of a tube that can move, and a heater fed from the telescope's supply. Not a mirror: no mirror
            # record, no recoat and no lifting figures (mirrors.models.TRAIN_KINDS leaves it out).
            "objective_lens",
            "Objective lens (refractor)",
            ("optical_surface", "electrical", "moving_machinery"),
            (
                # An objective is cleaned far less often than it is looked at: every clean risks its coatings, and a
                # little dust costs almost nothing (common practice, no published source).
                PlanTemplate(
                    "Inspect objective, clean only if needed",
                    "Look over the objective's outer surface for dust, dew spots and fungus with a flashlight; clean "
                    "it only where that is needed, loose dust blown off first, then lens tissue and cleaning fluid.",
                    (("dust_hours", 600.0), ("calendar_days", 90.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("chemical", "height"),
                    before_isolation=(READ_RECORDS, _OUT_OF_SERVICE, _PARK),
                    after_isolation=(
                        "Take the cap off the dew shield, if it has one, and inspect the objective's outer surface "
                        "with a flashlight held at a low angle, looking across the glass: note any dust, dew spots or "
                        "water marks in the findings, and any fungus (fine threads or a web-like haze, often starting "
                        "at the edge of the glass); photograph anything unusual.",
                        "If there is fungus, a haze inside the lens or anything between its elements, do not clean: "
                        "cover the objective and tell the site engineer; only the maker or someone trained for it "
                        "opens the cell.",
                        "Clean only if the dust or spots are heavy enough to matter. Blow the loose dust off first "
                        "with a hand blower, then lift what stays with a soft lens brush, brushing outward.",
                        "Only where marks remain, wet a fresh lens tissue with a few drops of the lens cleaning fluid "
                        "(never pour fluid on the glass: it runs under the retaining ring) and wipe gently from the "
                        "centre outward, a fresh tissue for each pass. Never wipe the glass dry, and never before the "
                        "grit is off it: grit dragged across a coating scratches it.",
                        "Put back the dew shield's cap, if it has one, and check that nothing was left on the tube.",
                    ),
                    restore=_RESTORE,
                    tools=(
                        "flashlight",
                        "hand blower",
                        "soft lens brush",
                        "lens tissue",
                        "the lens cleaning fluid the objective's maker approves",
                        "powder-free gloves and the eye protection the fluid's safety data sheet calls for",
                        "step ladder",
                    ),
                ),
                PlanTemplate(
                    "Check dew heater, its cable and the dew shield",
                    "Check that the dew heater warms evenly at its supply voltage, inspect the heater band, its cable "
                    "and connectors, and check the dew shield's fit and condition.",
                    # Before each damp season, twice a year; the cable wears with the telescope's moves, so open hours
                    # too.
                    (("calendar_days", 180.0), ("open_hours", 2000.0)),
                    COMMON_PRACTICE,
                    hazards=("height",),
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        _PARK,
                        "With the dew heater's controller at full power, measure the voltage at the heater's "
                        "connector and record it on this work order; after a few minutes, feel along the outside of "
                        "the dew shield over the heater band for even warmth all round and note any cold section in "
                        f"the findings. {_ENERGISED_WORK}",
                    ),
                    after_isolation=(
                        "Test for absence of voltage at the dew heater's connector with the voltage tester before "
                        "touching it.",
                        "Inspect the heater band for burn marks, cracked covering and a loose fit, and its cable and "
                        "connectors for chafe, kinks and strain; check that the cable is tied so that it cannot snag "
                        "as the telescope moves; photograph anything unusual.",
                        "Measure the heater band's resistance at its connector with the multimeter and note it in the "
                        "findings beside the maker's figure.",
                        "Inspect the dew shield: seated and fixed on the tube, not dented, its inside blackening not "
                        "flaking towards the objective.",
                    ),
                    restore=_RESTORE,
                    tools=(_MULTIMETER, _VOLTAGE_TESTER, "step ladder"),
                    readings=(("supply_voltage_v", _MAKERS_FIGURE),),
                ),
            ),
            # The objective's (or its cell's) temperature against the air's, where the dew heater's controller reads
            # it: kept a few degrees above the dew point, the glass stays clear (common practice, no published source).
            quantities=("temperature_c",),
        ),
        Kind(
            "mirror_cover",
            "Mirror cover",
            ("moving_machinery", "electrical"),
            (
                PlanTemplate(
                    "Check cover petals, hinges and seals",
                    "Check petal motion, hinge play, seal condition and the closed-position switch.",
                    (("calendar_days", 180.0), ("open_hours", 1500.0)),
                    COMMON_PRACTICE,
                    before_isolation=(
                        *_PREPARE,
                        "With nobody near the petals, close and open the cover from the control panel; watch "
                        "every petal move and check that the closed-position switch reports closed. Then close it "
                        "again, and leave it open only if the hinges, petals or seals to be checked cannot be "
                        "reached with it closed.",
                    ),
                    # Work above an open primary: anything dropped lands on the glass (common practice, no published
                    # source).
                    after_isolation=(
                        _PROTECT_OPEN_PRIMARY,
                        "Check each hinge for play and each petal and seal for wear and damage; photograph "
                        "anything unusual.",
                        _UNCOVER_PRIMARY,
                    ),
                    restore=(*_RESTORE, _COVER_LEFT_CLOSED),
                    tools=(_PRIMARY_COVER,),
                ),
            ),
            # The petals' time to open or close and their drives' current both grow as the hinges stiffen.
            quantities=("open_close_time_s", "motor_current_a"),
        ),
        Kind(
            "mirror_cell",
            "Mirror cell and support",
            ("optical_surface", "suspended_load", "moving_machinery"),
            (
                PlanTemplate(
                    "Check support points, pads and clips",
                    "Check axial and lateral support pads, clip clearances and the cell's fixing bolts.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    hazards=("moving_machinery",),
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Close the mirror cover and park the telescope where the cell can be reached.",
                    ),
                    after_isolation=(
                        "Check the axial and lateral support pads, the clip clearances and the cell's fixing "
                        "bolts; photograph anything unusual.",
                    ),
                    restore=_RESTORE,
                    tools=(_FEELER_GAUGES,),  # the clips' clearances
                    estimated_hours=2.0,
                ),
            ),
            quantities=("clearance_mm",),  # each clip's clearance to the mirror, with feeler gauges
        ),
        Kind(
            "axis1_drive",
            "Right ascension / azimuth drive",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect axis 1 drive and check tracking",
                    "Inspect motor, couplings and mounting; check following error, settle time and motor current.",
                    # Settle time: a well-tuned direct-drive mount settles within about 1 s after a slew.
                    (
                        ("calendar_days", 180.0),
                        ("axis1_travel_deg", 250000.0),
                        ("reading", SETTLE_TIME_LIMIT_S, "settle_time_s"),
                    ),
                    FROM_MEMORY + "; settle-time limit " + COMMON_PRACTICE,
                    before_isolation=_AXIS_BEFORE,
                    after_isolation=_AXIS_AFTER,
                    restore=_RESTORE,
                    tools=("laptop with the mount's tuning software", "clamp meter"),
                    readings=(("following_error_arcsec", "as the mount's acceptance test"), ("motor_current_a", "")),
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "axis2_drive",
            "Declination / elevation drive",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect axis 2 drive and check tracking",
                    "Inspect motor, couplings and mounting; check following error, settle time and motor current.",
                    # Settle time: a well-tuned direct-drive mount settles within about 1 s after a slew.
                    (
                        ("calendar_days", 180.0),
                        ("axis2_travel_deg", 150000.0),
                        ("reading", SETTLE_TIME_LIMIT_S, "settle_time_s"),
                    ),
                    FROM_MEMORY + "; settle-time limit " + COMMON_PRACTICE,
                    before_isolation=_AXIS_BEFORE,
                    after_isolation=_AXIS_AFTER,
                    restore=_RESTORE,
                    tools=("laptop with the mount's tuning software", "clamp meter"),
                    readings=(("following_error_arcsec", "as the mount's acceptance test"), ("motor_current_a", "")),
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "drive_rollers",
            "Drive rollers",
            ("moving_machinery",),
            (
                PlanTemplate(
                    "Clean and inspect rollers and drive disc",
                    "Clean the roller and disc contact surfaces with solvent wipes; check for flats and pitting.",
                    (("calendar_days", 180.0), ("axis1_travel_deg", 150000.0), ("dust_hours", 1500.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=0.5,
                    hazards=("chemical",),
                    before_isolation=_PREPARE,
                    after_isolation=(
                        "Clean the roller and disc contact surfaces within reach with solvent wipes; check them "
                        "for flats and pitting.",
                        _move_under_procedure("the axis", "to bring the rest of the disc within reach"),
                    ),
                    restore=_RESTORE,
                    tools=("solvent wipes the roller maker approves", _SOLVENT_PPE),
                ),
            ),
            # A flat or slipping roller shows in the tracking error; a stiff one in the drive's current.
            quantities=("following_error_arcsec", "motor_current_a"),
        ),
        Kind(
            "encoder",
            "Encoder scale and read head",
            ("moving_machinery", "optical_surface"),
            (
                PlanTemplate(
                    "Clean encoder scale, check read-head signal",
                    "Clean the scale with the maker's solvent, check read-head signal level along the full travel.",
                    (("calendar_days", 180.0), ("dust_hours", 600.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("chemical",),
                    before_isolation=_PREPARE,
                    after_isolation=(
                        "Clean the scale within reach with the maker's solvent; inspect it and the read head for "
                        "damage.",
                        _move_under_procedure("the axis", "to bring the rest of the scale within reach"),
                    ),
                    restore=(
                        *_RESTORE,
                        "With the drives back in service and everyone outside the swept volume, check the "
                        "read-head signal level along the full travel and record the lowest level on this work "
                        "order.",
                    ),
                    tools=(
                        "the encoder maker's solvent and lint-free wipes",
                        _SOLVENT_PPE,
                        "the encoder maker's signal-level tool or the mount's diagnostic software",
                    ),
                    readings=(("encoder_signal_pct", _MAKERS_FIGURE),),
                ),
            ),
        ),
        Kind(
            # Applied by springs and released by air: with the air vented it is applied, and its springs stay loaded
            # (OSHA 29 CFR 1910.147(d)(5): stored energy restrained), as a spring brake's do.
            "brake",  # the code stored subsystems and the benchmark use; the label says which brake it is
            "Brake, spring-applied, air-released",
            ("pneumatic", "stored_mechanical", "moving_machinery"),
            (
                PlanTemplate(
                    "Check brake pads, air pressure and holding",
                    "Check pad wear, supply pressure, release time and that the brake holds the axis out of balance.",
                    (("calendar_days", 180.0), ("brake_cycles", 5000.0)),
                    FROM_MEMORY,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "With everyone outside the swept volume, read the brake supply pressure, time the brake "
                        "release, and check that the brake holds the axis out of balance; record the readings.",
                        _PARK,
                    ),
                    after_isolation=(
                        "Measure the pad wear with feeler gauges and note it in the findings; check the pads, "
                        "fittings and hoses for damage and photograph anything unusual.",
                        "If the pads are worn to the maker's limit, replace them with a new pad set as the maker's "
                        "instructions say: first pin or block the axis, since nothing holds it while the brake is "
                        "apart; restrain the springs with the maker's spring-restraining tool before taking the brake "
                        "apart; keep the axis pinned until the brake is back together and its springs apply it.",
                        "If the axis was pinned or blocked for the pads, take the pin or block out once the brake is "
                        "back together and holds the axis.",
                    ),
                    # The air first, then the test, then back in service (an order over several plans puts every
                    # plan's return to service after the others' restoring, and writes the air step once for all of
                    # them: workorders.services._steps_for).
                    restore=(RELEASE, BRAKE_AIR_BACK, _BACK_IN_SERVICE),
                    tools=(
                        "pressure gauge with quick coupling", _FEELER_GAUGES, "stopwatch",
                        "the brake maker's spring-restraining tool", "axis locking pin or block",
                    ),
                    parts=("Brake pad set",),
                    readings=(("brake_pressure_bar", "within the maker's range"), ("brake_release_s", "")),
                ),
            ),
            quantities=("clearance_mm",),  # the pads' gap, with the feeler gauges the plan brings
        ),
        Kind(
            # Springs apply it and its coil, fed from the drive's supply, releases it: with the power locked off it
            # is applied, and its springs stay loaded (OSHA 29 CFR 1910.147(d)(5): stored energy restrained).
            "spring_brake",
            "Brake, spring-applied, electrically released",
            ("electrical", "stored_mechanical", "moving_machinery"),
            (
                PlanTemplate(
                    "Check brake air gap, release voltage and holding",
                    "Check the air gap and lining wear, the coil voltage when released, and that the brake holds the "
                    "axis out of balance.",
                    (("calendar_days", 180.0), ("brake_cycles", 5000.0)),  # as the air-operated brake's
                    COMMON_PRACTICE,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "With everyone outside the swept volume, measure the voltage at the brake coil while the "
                        "drive holds the brake released and record it on this work order; then, with the drive "
                        "disabled, check that the springs apply the brake and that it holds the axis out of balance. "
                        f"{_ENERGISED_WORK}",
                        _PARK,
                    ),
                    after_isolation=(
                        "Test for absence of voltage at the brake coil's terminals with the voltage tester before "
                        "touching them.",
                        "With the brake applied by its springs, holding the axis, measure the air gap between "
                        "armature and magnet body with feeler gauges at three points round the brake and record the "
                        "largest clearance on this work order; note the lining wear in the findings.",
                        "If the gap or the lining is beyond the maker's limit, adjust or replace only as the maker's "
                        "instructions say: restrain or relieve the spring force with the maker's release screws or "
                        "tool before taking the brake apart, and keep the axis pinned or blocked while its brake is "
                        "off.",
                        "Check the coil's terminals and cable for heat marks, looseness and damage; photograph "
                        "anything unusual.",
                    ),
                    restore=(
                        RELEASE,
                        "Restore the supply and, with everyone outside the swept volume, check that the brake "
                        "releases when the drive is enabled and holds when it is disabled.",
                        _BACK_IN_SERVICE,
                    ),
                    tools=(
                        _FEELER_GAUGES,
                        _MULTIMETER,
                        _VOLTAGE_TESTER,
                        "the brake maker's release screws or spring-restraining tool",
                    ),
                    readings=(("clearance_mm", _MAKERS_FIGURE), ("supply_voltage_v", _MAKERS_FIGURE)),
                    estimated_hours=1.5,
                ),
            ),
            # The release time, where the drive logs it: a coil or an air gap going wrong slows the release.
            quantities=("brake_release_s",),
        ),
        Kind(
            "limits",
            "Limits and interlocks",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Test limit switches and interlocks",
                    "Drive slowly onto each soft and hard limit; test emergency stops and enclosure interlocks.",
                    (("calendar_days", 90.0),),
                    COMMON_PRACTICE,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "With everyone outside the swept volume, drive each axis slowly onto each soft and then "
                        "each hard limit from the control panel and check that it stops; test every emergency "
                        "stop and enclosure interlock.",
                        _PARK,
                    ),
                    after_isolation=(
                        "Inspect the limit switches, their actuators and their wiring for wear, looseness and "
                        "damage; photograph anything unusual.",
                    ),
                    restore=_RESTORE,
                ),
            ),
        ),
        Kind(
            "cable_routing",
            "Cable routing and cable wraps",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect cable wraps for chafe and strain",
                    "Move each axis through its full range slowly and watch every cable wrap for snagging and wear.",
                    (("calendar_days", 180.0), ("axis1_travel_deg", 200000.0)),
                    COMMON_PRACTICE,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Move each axis slowly through its full range from the control panel and watch every "
                        "cable wrap for snagging, from outside the swept volume or by camera.",
                        _PARK,
                    ),
                    after_isolation=(
                        "Inspect each cable wrap close up for chafe, strain and loose ties; photograph anything "
                        "unusual.",
                    ),
                    restore=_RESTORE,
                ),
            ),
        ),
        Kind(
            "cooling_fans",
            "Cooling fans and filters",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Replace fan filters",
                    "Replace the intake filters of the mirror-cell and electronics fans.",
                    (("dust_hours", 500.0), ("calendar_days", 180.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.5,
                    before_isolation=_PREPARE,
                    after_isolation=(
                        "Replace the intake filters of the mirror-cell and electronics fans.",
                        _INSPECT,
                    ),
                    restore=(
                        RELEASE,
                        "Restore the supply and check that every fan runs.",
                    ),
                    estimated_hours=0.5,
                    parts=("Fan intake filter 120 mm",),
                ),
                PlanTemplate(
                    "Check fan bearings and current",
                    "Listen for bearing noise, measure fan current, replace fans that drift.",
                    (("open_hours", 4000.0), ("calendar_days", 365.0)),
                    FROM_MEMORY,
                    before_isolation=(
                        *_PREPARE,
                        "With the fans running, listen to each for bearing noise and measure its current; note each "
                        "fan's current in the findings.",
                    ),
                    after_isolation=(
                        "Replace any fan that is noisy or whose current has drifted from its rating.",
                    ),
                    restore=(
                        RELEASE,
                        "Restore the supply and check that every fan runs.",
                    ),
                    tools=("clamp meter with a low-current range for the fans' supply (AC or DC)",),
                    estimated_hours=0.5,
                ),
            ),
            # A fan's current drifts as its bearings wear; the temperature is that of the air or mirror it cools.
            quantities=("fan_current_a", "temperature_c"),
        ),
        Kind(
            "focus_mechanism",
            "Focus and tip-tilt mechanism",
            ("moving_machinery", "height"),
            (
                PlanTemplate(
                    "Check focus and tip-tilt travel, lubricate",
                    "Run the focuser over its full range, check backlash, lubricate screws per the maker.",
                    (("calendar_days", 365.0), ("open_hours", 2000.0)),
                    COMMON_PRACTICE,
                    before_isolation=(
                        *_PREPARE,
                        "From the control computer, run the focuser and the tip-tilt over their full range and "
                        "check the backlash; note the backlash and anything unusual in the findings.",
                    ),
                    after_isolation=(
                        "Clean and lubricate the screws as the maker says; inspect them and their bearings for "
                        "wear.",
                    ),
                    restore=_RESTORE,
                    tools=("dial indicator on a magnetic base", "the lubricant the maker names"),
                ),
            ),
            quantities=("focus_backlash_mm",),
        ),
        Kind(
            "truss",
            "Trusses and top end",
            ("height", "moving_machinery"),
            (
                PlanTemplate(
                    "Check truss fasteners and collimation",
                    "Check fastener torque marks on trusses and spider, then check collimation.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    hazards=("laser", "moving_machinery"),
                    tools=("torque wrench", "alignment laser or autocollimator"),
                    before_isolation=_PREPARE,
                    after_isolation=(
                        "Check the torque marks of every truss and spider fastener; retighten to the maker's "
                        "torque any that has moved, and mark it again.",
                        "Check collimation with the alignment laser or autocollimator, with the laser's "
                        "controlled area posted.",
                    ),
                    restore=_RESTORE,
                    estimated_hours=3.0,
                ),
            ),
        ),
        Kind(
            "ac_power",
            "AC power and switching",
            ("electrical",),
            (
                PlanTemplate(
                    "Inspect AC distribution and test residual-current devices",
                    "Inspect distribution boards and terminations for heat marks, test residual-current devices.",
                    (("calendar_days", 180.0),),
                    COMMON_PRACTICE,
                    before_isolation=(
                        *_PREPARE,
                        "Tell everyone on site, then test each residual-current device with its test button and "
                        f"an RCD tester; the circuits behind it go dead when it trips. {_ENERGISED_WORK}",
                    ),
                    after_isolation=(
                        "With the supply that feeds the distribution boards locked off upstream of them (their own "
                        "isolation point, not only the telescope's isolators after them), open the boards, test for "
                        "absence of voltage on their incoming terminals as well as their outgoing ones, and inspect "
                        "the terminations for heat marks and looseness; photograph anything unusual.",
                    ),
                    restore=_RESTORE,
                    tools=("RCD tester", _VOLTAGE_TESTER),
                ),
            ),
            own_point="which is fed from upstream of the telescope's isolation points: they leave its incoming side "
            "live",
            # The mains voltage at the distribution board; each residual-current device's trip time from the tester.
            quantities=("supply_voltage_v", "rcd_trip_time_ms"),
        ),
        Kind(
            "dc_supplies",
            "DC power supplies",
            ("electrical",),
            (
                PlanTemplate(
                    "Check DC supply voltages and ripple",
                    "Measure each DC rail under load; record voltage and ripple.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    before_isolation=(
                        *_PREPARE,
                        "Measure each DC rail under load; record on this work order the voltage and ripple of the "
                        "rail that carries the most current, and note every rail's voltage and ripple in the "
                        f"findings. {_ENERGISED_WORK}",
                    ),
                    after_isolation=(
                        "Test for absence of voltage at the supplies' terminals, then inspect their terminations, fans "
                        "and filters for heat marks, dust and looseness; photograph anything unusual.",
                    ),
                    restore=_RESTORE,
                    tools=(_MULTIMETER, "oscilloscope (for the ripple)", _VOLTAGE_TESTER),
                    readings=(("supply_voltage_v", _MAKERS_FIGURE), ("ripple_mv", _MAKERS_FIGURE)),
                ),
            ),
        ),
        Kind(
            "computers",
            "Control computers",
            ("electrical",),
            (
                PlanTemplate(
                    "Check disks, backups, clock and intake filters",
                    "Check disk health, that backups restore, time synchronisation, and clean the intake filters.",
                    (("calendar_days", 90.0), ("dust_hours", 1000.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    before_isolation=(
                        *_PREPARE,
                        "Check disk health, that a backup restores, and time synchronisation; note the results in the "
                        "findings.",
                        "Shut the control computers down cleanly.",
                    ),
                    after_isolation=(
                        "Clean the intake filters; inspect the cases and cables for dust and damage.",
                    ),
                    restore=(
                        RELEASE,
                        "Start the computers and check that the telescope answers.",
                    ),
                ),
            ),
            quantities=("temperature_c",),  # the disks' and processors' temperature, as their health checks report it
        ),
        Kind(
            "servo_drives",
            "Servo drives",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Check servo drive fault log and tuning",
                    "Read the fault log, check the drive's cooling, and step-test the loop: a direct-drive mount's "
                    f"loop closes at about {SERVO_LOOP_HZ / 1000:g} kHz and settles within about "
                    f"{SETTLE_TIME_LIMIT_S:g} s ({COMMON_PRACTICE}).",
                    (("calendar_days", 180.0), ("slews", 30000.0)),
                    FROM_MEMORY,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE,
                        "Read and save the drive's fault log.",
                        "With everyone outside the swept volume, step-test each loop from the tuning software; record "
                        "the longest settle time on this work order and note how each loop settles in the findings.",
                        _PARK,
                    ),
                    after_isolation=(
                        "Wait the discharge time the maker states and test for absence of voltage on the DC bus, then "
                        "clean the heat sinks and fan grilles and check by hand that the fans spin freely.",
                    ),
                    restore=_RESTORE,
                    tools=(
                        "laptop with the drive's tuning software",
                        f"voltage tester rated for the drive's DC bus and {_PROVED}",
                    ),
                    readings=(("settle_time_s", _MAKERS_FIGURE),),
                ),
            ),
            # The heat sink's temperature, the DC bus voltage and the motor current, as the drive reports them.
            quantities=("temperature_c", "supply_voltage_v", "motor_current_a"),
        ),
        Kind(
            "enclosure",
            "Enclosure (dome, shutter, roof)",
            ("moving_machinery", "electrical", "height"),
            (
                # Worded for a dome (shutter and rotation) and a roll-off roof alike.
                PlanTemplate(
                    "Inspect enclosure drives, wheels and seals, lubricate",
                    "Inspect the enclosure's drives (shutter, roof, rotation), wheels, seals and rain sensor; "
                    "lubricate as the maker says.",
                    (("calendar_days", 90.0), ("open_hours", 1000.0)),
                    COMMON_PRACTICE,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE_PARKED,
                        "With everyone clear of the enclosure's moving parts and their path, open the enclosure a "
                        "little and check that the rain sensor closes it.",
                        "Close the enclosure, with a dome turned to its service position first.",
                    ),
                    after_isolation=(
                        "Inspect the enclosure's drives, wheels, rails and seals; lubricate as the maker says; "
                        "photograph anything unusual.",
                        _move_under_procedure("the enclosure", "to bring the rest of the wheels within reach"),
                    ),
                    restore=(RELEASE, _BACK_IN_SERVICE_ENCLOSURE),
                    tools=("grease gun", "the lubricants the maker names"),
                    estimated_hours=3.0,
                ),
            ),
            separate_supply=True,
            own_point="which has a supply of its own: the telescope's points do not make its drives safe",
            # The rotation and shutter drives' current, and the shutter's (or roof's) time to open or close: both grow
            # as wheels, chains and seals drag.
            quantities=("motor_current_a", "open_close_time_s"),
            moves="enclosure",
        ),
        Kind(
            # An electric hoist or crane in the dome, for the mirror and instruments: its own supply, its hook over
            # people working below. Worked on from a platform above the telescope, in a dome that can turn under it.
            "hoist",
            "Hoist or crane",
            ("suspended_load", "electrical", "height", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect hoist, hook and rope or chain, test brake and limits",
                    "Inspect the hook, the wire rope or load chain and the brake; test the limit switches, the brake "
                    "and the emergency stop unloaded.",
                    # A periodic inspection at 1- to 12-month intervals, the harder the use the shorter (OSHA 29 CFR
                    # 1910.179(j) for cranes, ASME B30.16 for hoists), from memory: yearly for an observatory's light
                    # use. The maker's interval comes first.
                    (("calendar_days", 365.0),),
                    FROM_MEMORY,
                    before_isolation=(
                        READ_RECORDS,
                        _OUT_OF_SERVICE_PARKED,
                        "With the hook unloaded and everyone clear of its path and the area under it, raise and lower "
                        "it from the pendant (and travel the hoist along its beam, if it travels): check that the "
                        "upper and lower limit switches stop it, that the brake holds the hook without drift at each "
                        "stop, and that the emergency stop works; note anything unusual in the findings.",
                        "Set the hook block down on the floor or its rest, unloaded, so that the rope or chain is paid "
                        "out for the checks below.",
                    ),
                    after_isolation=(
                        "Inspect the hook for cracks, twist and a widened throat, and check its safety latch; inspect "
                        "the paid-out wire rope or load chain for broken wires, wear, kinks, corrosion and stretch, "
                        "and its end fixings; photograph anything unusual.",
                        "From a work platform, inspect the hoist's brake and gearbox for wear, oil leaks and damage, "
                        "and the pendant and its cable for damage.",
                        "If anything is beyond the maker's limits, tag the hoist out of service at its pendant and its "
                        "isolator, and tell the site engineer before anyone uses it.",
                    ),
                    restore=(RELEASE, _BACK_IN_SERVICE_IF_PASSED),
                    tools=("the hoist maker's inspection instructions", "hook throat gauge or calipers",
                           "out-of-service tags"),
                    estimated_hours=2.0,
                ),
            ),
            own_point="which has a supply of its own: the telescope's points do not make the hoist safe",
            moves="load",
        ),
        Kind("other", "Other", (), moves=""),
    )
}

KIND_CHOICES = [(k.code, k.label) for k in KINDS.values()]

_EARLIER_OUT_OF_SERVICE = "Take the observatory out of robotic and remote control and close the dome."
_EARLIER_DOME_CLOSED = "Turn the dome to its service position and close the shutter."
#: Earlier wordings of steps done before isolation, which plans stored before the step groups may hold.
_EARLIER_BEFORE_ISOLATION = (
    "With the fans running, listen to each for bearing noise and measure its current; record the currents.",
    "From the control computer, run the focuser and the tip-tilt over their full range and check the backlash; "
    "record what you find.",
    "Measure each DC rail under load and record its voltage and ripple. This is work on live equipment: only a "
    "qualified person, under the site's rules for energised work.",
    "Check disk health, that a backup restores, and time synchronisation; record what you find.",
    "With everyone outside the swept volume, step-test each loop from the tuning software and record how it "
    "settles.",
    # Worded for a dome before the enclosure's steps served a roll-off roof too.
    _EARLIER_OUT_OF_SERVICE,
    "With everyone outside the swept volume, drive each axis slowly onto each soft and then each hard limit from the "
    "control panel and check that it stops; test every emergency stop and dome interlock.",
    "With everyone clear of the shutter and the dome's path, open the shutter a little and check that the rain "
    "sensor closes it.",
    _EARLIER_DOME_CLOSED,
)

#: Taking the observatory out of robotic and remote control, and nothing else: the first step of an order whose plans'
#: steps would take it out of that control more than once (workorders.services._out_of_control_once).
OUT_OF_CONTROL = "Take the observatory out of robotic and remote control."
_CLOSE_ENCLOSURE = "Close the enclosure."
_PARK_PLAIN = "Park the telescope."  # as the plans said it: no position (a primary's own parking names another one)
#: The parking a split wording leaves (``OUT_OF_CONTROL_AND``), and the catalogue's parking at the service position,
#: which stands for it where another plan on the same telescope parks there already: one parking, not two
#: (workorders.services._out_of_control_once).
PARK_PLAIN = _PARK_PLAIN
PARK_AT_SERVICE = _PARK
_EARLIER_CLOSE_DOME = "Close the dome."
#: The catalogue's steps that take the observatory out of robotic and remote control, in their present and earlier
#: wordings, each with the steps it does besides, in its own words: an order that would say it more than once says
#: ``OUT_OF_CONTROL`` first and those steps where each plan had its own (workorders.services._out_of_control_once).
#: A step the site wrote in words of its own is the site's, and stays as it is.
OUT_OF_CONTROL_AND: dict[str, tuple[str, ...]] = {
    _OUT_OF_SERVICE: (_CLOSE_ENCLOSURE,),
    _OUT_OF_SERVICE_PARKED: (_PARK_PLAIN,),
    _EARLIER_OUT_OF_SERVICE: (_EARLIER_CLOSE_DOME,),
    OUT_OF_CONTROL: (),
}
#: The steps that take the observatory out of robotic and remote control, in their present and earlier wordings: an
#: order holding one hands it back at its very end (``HAND_BACK``, workorders.services).
TAKES_OUT_OF_CONTROL: frozenset[str] = frozenset(OUT_OF_CONTROL_AND)
#: The last step of an order that took the observatory out of robotic and remote control (``TAKES_OUT_OF_CONTROL``):
#: written once, after every plan's test, by the order (workorders.services), not by its plans. The remote operators
#: must know that the telescope can move again under their control (common practice, no published source).
HAND_BACK = (
    "Only when the tests of the telescope and the enclosure on this order have passed (equipment tagged out of service "
    "stays out of service), and everyone has left the telescope's swept volume and the path of the dome and its "
    "shutter (or of the roll-off roof), return the observatory to robotic and remote control and tell the remote "
    "operators it is back."
)
#: The steps under power before a lockout that move no axis of the telescope: taking the observatory out of robotic
#: control, closing the enclosure, reading the records. While a telescope's mirror is out (out of balance, its axes
#: pinned) every other step before the lockout waits for the reinstall (workorders.services.moves_or_restores).
MOVES_NO_AXIS: frozenset[str] = frozenset({
    OUT_OF_CONTROL, _OUT_OF_SERVICE, _EARLIER_OUT_OF_SERVICE, _CLOSE_ENCLOSURE, _EARLIER_CLOSE_DOME, READ_RECORDS,
})
#: The catalogue's parkings: each moves the telescope's axes under power.
PARKINGS: frozenset[str] = frozenset({_PARK, _PARK_PLAIN, _OUT_OF_SERVICE_PARKED})
#: The recoat realignment's own hand-back (mirrors.services), after its check on a star.
HAND_BACK_AFTER_REALIGNMENT = (
    "Return the observatory to robotic and remote control only when the collimation check is recorded, and tell the "
    "remote operators it is back."
)
#: Every step that hands the observatory back to robotic and remote control, in its wordings: it waits while another
#: crew has work left on the telescope (workorders.services.still_working). A diff review found the realignment's
#: own wording unread, so it handed the telescope back with another crew at it.
HAND_BACKS: frozenset[str] = frozenset({HAND_BACK, HAND_BACK_AFTER_REALIGNMENT})


def unlabelled(step: str) -> str:
    """A step without the "[plan label] " an order of several plans puts before it (workorders.services._labelled)."""
    return step.split("] ", 1)[1] if step.startswith("[") and "] " in step else step


def is_hand_back(step: str) -> bool:
    """True when ``step`` (a "[plan] " label before it ignored) hands the observatory back to robotic control."""
    return unlabelled(step).strip() in HAND_BACKS


#: The words by which a step asks for its result with its tick (the realignment's check of the collimation on a star,
#: or a site's own step written so): the tick then takes what was found, in the site's own measure (arcseconds of
#: coma, a spot's offset in pixels, "no coma seen"), since none is the same everywhere.
RESULT_ASKED = "record the result"


def asks_result(step: str) -> bool:
    """True when ``step`` asks for its result with its tick: ``RESULT_ASKED`` in it as words, in any case ("record the
    results" of a site's own step does not: its results go in the findings, as before)."""
    return re.search(rf"\b{RESULT_ASKED}\b", step, flags=re.IGNORECASE) is not None

#: Every step the catalogue places before isolation, and every step of its plans' restoring: how the upgrade
#: that gave stored plans their three step groups (planning migration 0007) told them apart by their words.
#: Work orders no longer read words: they place steps by the plans' groups (workorders.services).
BEFORE_ISOLATION: frozenset[str] = frozenset(
    step for k in KINDS.values() for plan in k.plans for step in plan.before_isolation
) | frozenset(_EARLIER_BEFORE_ISOLATION)
RESTORE: frozenset[str] = frozenset(
    step for k in KINDS.values() for plan in k.plans for step in plan.restore
) | frozenset(_EARLIER_BACK_IN_SERVICE) | {_BRAKE_AIR_RESTORED, _EARLIER_BRAKE_AIR_RESTORED, HAND_BACK}

#: Steps about the whole telescope or observatory, not one subsystem: an order over several plans on one telescope
#: writes each once for all of them (workorders.services._shared_once). Any other step two plans share is about each
#: plan's own subsystem ("the brake", "this subsystem") and stays one per subsystem, named, so an order over two
#: brakes tests each of them.
TELESCOPE_STEPS: frozenset[str] = frozenset({
    _OUT_OF_SERVICE, _PARK, _OUT_OF_SERVICE_PARKED, _COVER_CLOSED_IN_SERVICE,
    _EARLIER_OUT_OF_SERVICE, _EARLIER_DOME_CLOSED,  # as plans stored before a roll-off roof was served word them
    OUT_OF_CONTROL, _CLOSE_ENCLOSURE, _EARLIER_CLOSE_DOME, _PARK_PLAIN,  # what they say apart (OUT_OF_CONTROL_AND)
})
#: The restoring steps that put a subsystem or the telescope back in service: an order over several plans puts them
#: after every other plan's restoring (its air or power restored and tested), whichever plan they come from
#: (workorders.services._steps_for), so nothing goes back into service before the energy it needs is back.
RETURNS_TO_SERVICE: frozenset[str] = frozenset(
    {_BACK_IN_SERVICE, _BACK_IN_SERVICE_ENCLOSURE, _BACK_IN_SERVICE_IF_PASSED, _COVER_CLOSED_IN_SERVICE, _FIRST_MOVES,
     *_EARLIER_BACK_IN_SERVICE}
)


#: The hazards that say a subsystem of a kind that names nothing it moves (Other) holds up a load: a hoist or sling
#: rig, or a hydraulic lift or platform.
_HOLDS_A_LOAD = ("suspended_load", "hydraulic")


def moving_parts(code: str, hazards: Iterable[str] = ()) -> tuple[str, ...]:
    """What can move once the locks of work on a subsystem of kind ``code`` come off (keys of ``CLEAR_OF``): its
    kind's (``Kind.moves``); for a kind that cannot say (Other), a load where its ``hazards`` hold one up, and the
    telescope where they name a moving telescope or nothing else."""
    spec = KINDS.get(code)
    if spec is not None and spec.moves:
        return (spec.moves,)
    found = set(hazards)
    load = ("load",) if found & set(_HOLDS_A_LOAD) else ()
    return load + (("telescope",) if "moving_machinery" in found or not load else ())


def release_step_for(subsystems: Iterable, tagged_out: bool = False) -> str:
    """The release step of an order over ``subsystems`` (each with its ``kind`` and ``hazards``, as
    ``registry.models.Subsystem``): everyone clear of all they can set moving, each named once, and always of the
    telescope: the lockout locks each of the order's telescopes' own points for all work there
    (``workorders.selectors.isolation_points``), so removing the locks powers its drives whatever the work was on.
    ``tagged_out``: the order has a step that tags out what fails its inspection (``is_tag_out_step``)."""
    return release_step(
        ["telescope", *(key for s in subsystems for key in moving_parts(s.kind, s.hazards))], tagged_out
    )


def kind(code: str) -> Kind:
    try:
        return KINDS[code]
    except KeyError:
        raise ValueError(f"unknown subsystem kind {code!r}; known kinds: {', '.join(KINDS)}") from None
