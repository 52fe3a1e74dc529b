"""The caution library: one caution per hazard, chosen by the hazards of a subsystem and a task.

Pure data and one selection function, no Django imports, so the work-order pages, the PDF and the tests
all read the same wording. The cautions are reminders of the usual controls, not a risk assessment;
they never say that an isolation or a lift is safe.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

HAZARDS: dict[str, str] = {
    "electrical": "Hazardous electrical energy",
    "pneumatic": "Stored pneumatic energy",
    "moving_machinery": "Moving telescope and dome",
    "suspended_load": "Suspended load",
    "height": "Work at height",
    "chemical": "Corrosive or irritant chemicals",
    "cryogen": "Cryogens and CO2 snow",
    "vacuum_plant": "Vacuum coating plant",
    "laser": "Alignment lasers",
    "optical_surface": "Delicate optical surfaces",
}

#: Hazards whose energy must be isolated and locked out before work starts.
ISOLATION_HAZARDS = ("electrical", "pneumatic", "moving_machinery")


#: What the page and the printed order say when the work's hazards need nothing isolated.
NO_ISOLATION_NEEDED = (
    "This work needs no energy isolation: none of its hazards is electrical energy, stored pressure or a "
    "telescope or dome that can move. If the work turns out to touch any of them, stop and ask the site engineer."
)


def needs_isolation(hazards: Iterable[str]) -> bool:
    """True when any of the hazards needs energy isolated and locked out before the work."""
    return any(h in ISOLATION_HAZARDS for h in hazards)


# An order copies its hazards when it is made; these say so when its subsystems carry more since
# (workorders.selectors.hazards_missing), on the page and on paper.
HAZARDS_MISSING_TITLE = "Not up to date: this work order lacks hazards its subsystems now carry"
HAZARDS_MISSING_BEFORE_START = (
    "Before the work starts, the site engineer brings this work order up to date, which adds them and their "
    "cautions; until then it cannot be {moves}."
)
HAZARDS_MISSING_STARTED = (
    "Technicians: stop the work as soon as it is safe to do so, and ask the site engineer before going on. "
    "The engineer withdraws this order and makes a new one, which carries them. If the work was already done, "
    "the finish form asks you to confirm that they were controlled or did not arise, and to say how."
)
HAZARDS_MISSING_ON_PAPER = (
    "Do not start the work from this sheet, and if it has started, stop as soon as it is safe to do so: ask the "
    "site engineer for a work order that carries them."
)

#: A telescope whose primary mirror a recoat removed and has not yet put back (workorders.selectors.telescopes_out):
#: out of balance, axes pinned, drives on the site's long-term locks (the removal order's own release step). Work on
#: it meanwhile is usual, but no step of it may move an axis or take those locks off (common practice, no published
#: source; the site's lockout procedure, OSHA 29 CFR 1910.147(f)(4), and the mount maker's instructions come first).
TELESCOPE_OUT_TITLE = "{telescope} is out of service: its primary mirror is out"
TELESCOPE_OUT = (
    "{mirror} was removed on {removed_on} ({removal}), and {reinstall}. Until then the telescope is out of "
    "balance, with both axes pinned and its drives on the site's long-term locks."
)
TELESCOPE_OUT_TODO = (
    "Do no step that moves an axis, releases a brake or takes those locks off (tests under power, parking, "
    "returning the telescope to service): leave such steps until the reinstall is finished, and ask the site "
    "engineer before going on."
)

#: Parts an order's plans name that are not reserved on it (workorders.selectors.parts_unregistered).
PARTS_UNREGISTERED = (
    "its service plans name these parts, which are not reserved on this order (the site's parts register did not "
    "hold them when it was made), so none is counted out of stock: bring them, or ask the site engineer to add "
    "them to the order."
)

#: Where an order's hazards call for isolation but its steps lack the lockout step (it cannot be issued or started).
LOCKOUT_STEP_MISSING = (
    "This work's hazards call for energy isolation, but none of its steps is the lockout step. Do not start the "
    "work until the site engineer has put it in."
)

#: Why an order is neither issued nor started while its lifting figures stand in the way
#: (workorders.selectors.lift_refusal): ``{problems}`` names each figure beside its limit, as LIFT_* below word them.
LIFT_REFUSED = (
    "{number}'s lifting figures show {problems}: an engineer corrects the lifting figures (the lift page) before it "
    "is issued or started"
)
#: The conditions are those of calc.lifting's warnings (LiftFigures.over_limit, LiftFigures.too_flat).
LIFT_OVER_LIMIT = "a leg tension of {tension:,.0f} kg, above the working load limit of {limit:g} kg entered per leg"
LIFT_TOO_FLAT = (
    "a sling angle of {angle:g} degrees from horizontal (load factor {factor:.2f}), below the {shallow:g} degrees "
    "under which rigging practice advises against lifting"
)
LIFT_INPUTS_INVALID = "stored lifting inputs that are not valid ({problem})"


def hazards_missing_notice(hazards: Iterable[str], lockout_step_missing: bool) -> str:
    """What an order made without ``hazards`` (hazard codes) lacks, naming them as the cautions do, and the
    lockout step when its steps lack the one those hazards call for."""
    codes = list(hazards)
    text = (
        "Its subsystems or their service plans now carry hazards it was made without: "
        f"{', '.join(HAZARDS[code] for code in codes)}. It does not carry their safety cautions (the controls and "
        "the protective equipment)"
    )
    if lockout_step_missing:
        text += ", nor the lockout step their energy calls for"
    return text + "."


DANGER_TO_LIFE = 4
SERIOUS_INJURY = 3
INJURY = 2
EQUIPMENT_DAMAGE = 1

SEVERITY_LABELS: dict[int, str] = {
    DANGER_TO_LIFE: "Danger to life",
    SERIOUS_INJURY: "Risk of serious injury",
    INJURY: "Risk of injury",
    EQUIPMENT_DAMAGE: "Risk of damage to equipment",
}



def signal_word(severity_label: str) -> str:
    """The signal word a caution opens with, on the page and on paper alike: its severity label
    (``SEVERITY_LABELS``) in capitals, "DANGER TO LIFE"."""
    return severity_label.upper()


PRECEDENCE_STATEMENT = (
    "Local codes and regulations, the manufacturer's instructions and licensed practice take precedence "
    "over this work order. Where they differ from it, follow them and tell the site engineer. The cautions "
    "here are reminders of the usual controls, not a risk assessment, and no figure on this work order "
    "means that a lift or an isolation is safe."
)


@dataclass(frozen=True)
class Caution:
    """A caution printed on a work order for one hazard.

    ``severity`` runs from 1 (damage to equipment) to 4 (danger to life); higher is printed first.
    ``standard`` names the standard or document that governs the controls.
    """

    hazard: str
    severity: int
    title: str
    text: str
    standard: str

    @property
    def signal_word(self) -> str:
        return signal_word(SEVERITY_LABELS[self.severity])


CAUTIONS: dict[str, Caution] = {
    "electrical": Caution(
        hazard="electrical",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["electrical"],
        text=(
            "Isolate the supply at its disconnect, lock and tag it in your own name, and keep the key with you. "
            "Before you touch any conductor, test for absence of voltage with a tester proved on a known live "
            "source just before and just after the test. "
            "Treat servo drives and power supplies as live until their capacitors have discharged for the time "
            "the maker states. "
            "Work on or near exposed live parts only under an energised-work permit, by a qualified person "
            "wearing the protective equipment the arc-flash assessment calls for. "
            "Remove your lock only when everyone is clear and the covers are back on."
        ),
        standard="OSHA 29 CFR 1910.147 (lockout/tagout); ANSI/ASSP Z244.1; NFPA 70E",
    ),
    "pneumatic": Caution(
        hazard="pneumatic",
        severity=SERIOUS_INJURY,
        title=HAZARDS["pneumatic"],
        text=(
            "Close the air supply valve, lock and tag it, then vent the circuit through its exhaust before you "
            "open any fitting. "
            "Read the gauge and confirm zero pressure: receivers and lines trapped behind check valves can stay "
            "pressurised after the supply is shut. "
            "Expect brakes and clamps to move when pressure falls or returns, and keep hands out of their path. "
            "When air returns the brakes release and an out-of-balance axis can swing, so balance or block the "
            "axis first. "
            "Restore air slowly, with everyone told and clear."
        ),
        standard="ISO 4414; OSHA 29 CFR 1910.147 (lockout/tagout)",
    ),
    "moving_machinery": Caution(
        hazard="moving_machinery",
        severity=DANGER_TO_LIFE,
        # Slewing fast and stopping within about a second: common practice, no published source.
        title=HAZARDS["moving_machinery"],
        text=(
            "A telescope mount can slew fast and stop within about a second, and the dome and shutter can move "
            "on a schedule or a remote command. "
            "Nobody may be in the swept volume of the telescope or the path of the dome while the drives are "
            "energised. "
            "Before entering, take the observatory out of robotic and remote control, switch off and lock out "
            "the drives, and tell the remote operators. "
            "Check that no axis can turn under gravity when its brake is released, and block it if it can. "
            "Never rely on an emergency stop or a software limit in place of isolation."
        ),
        standard="OSHA 29 CFR 1910.147 (lockout/tagout)",
    ),
    "suspended_load": Caution(
        hazard="suspended_load",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["suspended_load"],
        text=(
            "Never stand, walk or reach under a suspended load, and keep everyone outside the exclusion zone "
            "until the load is set down and blocked. "
            "Inspect every sling and fitting before use and take out of service anything damaged or without a "
            "legible rating. "
            "Lift a few centimetres first, stop, and check balance, brakes and rigging before going higher. "
            "Control the load with tag lines and let one person give the signals. "
            "Follow the written lift plan and the rated capacities, not the figures on this sheet alone."
        ),
        standard="OSHA 29 CFR 1910.184 (slings)",
    ),
    "height": Caution(
        hazard="height",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["height"],
        text=(
            "Protect every open edge, hatch and shutter opening a person could fall through, with guardrails, "
            "covers, or a restraint or fall-arrest system tied to a rated anchor. "
            "Inspect harnesses, lanyards and anchors before use. "
            "Work from a platform or scaffold made for the job, never from the telescope, the mount or a chair. "
            "Tie tools against dropping and keep the area below clear. "
            "Agree how a fallen worker would be rescued before the work begins."
        ),
        standard="OSHA 29 CFR 1910.28 (fall protection)",
    ),
    "chemical": Caution(
        hazard="chemical",
        severity=SERIOUS_INJURY,
        title=HAZARDS["chemical"],
        text=(
            "Read the safety data sheet of every chemical before you use it and keep it at hand. "
            "Wear the gloves, eye protection and clothing it calls for, and work with the ventilation it "
            "requires. "
            "Bring only the quantity the job needs, in labelled containers, and keep it away from optics you are "
            "not cleaning. "
            "Know where the eyewash and the spill kit are, and dispose of waste as the data sheet directs."
        ),
        standard="Safety data sheet of each chemical (GHS)",
    ),
    "cryogen": Caution(
        hazard="cryogen",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["cryogen"],
        text=(
            "Handle liquid nitrogen and other cryogens only in vessels made for them, wearing a face shield, "
            "loose insulated gloves and clothing that covers arms and legs; CO2 snow and its nozzle are cold "
            "enough to burn skin in seconds. "
            "Fill, vent and clean with CO2 only where ventilation keeps enough oxygen in the air, and use an "
            "oxygen or CO2 monitor in a closed dome or a small room. "
            "Chain gas cylinders upright, open their valves slowly and close them when you stop. "
            "Never seal a cryogen in a closed container or trap it between two valves. "
            "Move dewars and cylinders on a trolley and never ride in a lift with one."
        ),
        standard="CGA P-12 (cryogenic liquids); CGA P-1 (compressed gas cylinders); the gas's safety data sheet",
    ),
    "vacuum_plant": Caution(
        hazard="vacuum_plant",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["vacuum_plant"],
        text=(
            "Work on the coating chamber only as its operating instructions say, and only if trained on it. "
            "The glow-discharge and evaporation supplies carry lethal voltages and currents: lock out and prove "
            "them dead before opening the chamber or touching a source. "
            "Filaments, boats and the chamber wall stay hot after a run; let them cool and wear heat-resistant "
            "gloves. "
            "Never stand in front of a viewport while the chamber is pumped, and vent it with dry gas before "
            "opening the door."
        ),
        standard="the coating plant maker's instructions; OSHA 29 CFR 1910.147 (lockout/tagout); NFPA 70E",
    ),
    "laser": Caution(
        hazard="laser",
        severity=SERIOUS_INJURY,
        title=HAZARDS["laser"],
        text=(
            "Read the laser's class on its label before you switch it on and apply the controls that class "
            "requires. "
            "Never look into the beam or at a mirror-like reflection of it, and keep the beam away from the eye "
            "level of anyone standing or seated nearby. "
            "Take off watches and rings, keep shiny tools out of the beam path, and stop the beam at the end of "
            "its path. "
            "Post a warning at the entrance while the laser is on, and switch it off when not in use."
        ),
        standard="ANSI Z136.1; IEC 60825-1",
    ),
    "optical_surface": Caution(
        hazard="optical_surface",
        severity=EQUIPMENT_DAMAGE,
        title=HAZARDS["optical_surface"],
        text=(
            "Touch an optical surface only as the manufacturer's handling instructions allow, and never with "
            "bare fingers. "
            "Cover the mirror whenever you are not working on it, and keep tools, fasteners and drips away from "
            "above it. "
            "Clean only with the materials and method the coating supplier approves. "
            "Report any scratch, chip or stain with a photograph before you carry on."
        ),
        standard="Manufacturer's handling instructions for the optic",
    ),
}

_LIBRARY_ORDER = {code: position for position, code in enumerate(HAZARDS)}


def cautions_for(hazards: Iterable[str]) -> list[Caution]:
    """The cautions for a set of hazards, most severe first.

    Parameters
    ----------
    hazards : iterable of str
        Hazard codes (keys of ``HAZARDS``), for example those of a subsystem and of a task together;
        repeats are allowed.

    Returns
    -------
    list of Caution
        One caution per distinct hazard, ordered by severity (danger to life first), then in the order
        of ``HAZARDS``.
    """
    if isinstance(hazards, str):
        raise ValueError(f"hazards must be a collection of hazard codes, not the single string {hazards!r}")
    codes = list(hazards)
    unknown = [code for code in codes if not isinstance(code, str) or code not in HAZARDS]
    if unknown:
        raise ValueError(f"unknown hazard {', '.join(map(repr, unknown))}; known hazards: {', '.join(HAZARDS)}")
    return sorted(
        (CAUTIONS[code] for code in set(codes)),
        key=lambda caution: (-caution.severity, _LIBRARY_ORDER[caution.hazard]),
    )
