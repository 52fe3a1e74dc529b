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
    "stored_mechanical": "Stored mechanical energy (springs)",
    "hydraulic": "Stored hydraulic pressure and raised loads",
    "moving_machinery": "Moving telescope and dome",
    "suspended_load": "Suspended load",
    "height": "Work at height",
    "chemical": "Chemicals: corrosive, irritant or flammable",
    "cryogen": "Cryogens and CO2 snow",
    "vacuum_plant": "Vacuum coating plant",
    "laser": "Alignment lasers",
    "optical_surface": "Delicate optical surfaces",
}

#: Hazards whose energy must be isolated and locked out before work starts. A loaded spring is part of that energy
#: control (OSHA 29 CFR 1910.147(d)(5): stored energy relieved, disconnected or restrained after isolation), but it is
#: restrained at the equipment itself, not locked at a supply point, so it asks for no isolation point of its own, as
#: a moving telescope does not (``workorders.selectors._ISOLATES`` names the points that answer a hazard). Hydraulic
#: pressure is stored energy too, locked at its pump and its valve, and a raised load is lowered or blocked before work
#: under it.
ISOLATION_HAZARDS = ("electrical", "pneumatic", "stored_mechanical", "hydraulic", "moving_machinery")

#: The hazard of the energy an isolation point locks, by the point's kind (``workorders.models.IsolationPoint.Energy``;
#: "other" names none). A lockout that locks a point touches that energy, so the order prints its caution
#: (``workorders.selectors.cautions``). Which point a hazard's work needs registered is another table
#: (``workorders.selectors._ISOLATES``: electrical work asks for the AC mains point, not a DC or servo breaker).
ENERGY_HAZARDS = {
    "ac": "electrical", "dc": "electrical", "servo": "electrical", "air": "pneumatic", "hydraulic": "hydraulic",
}
#: What else a lockout that locks a point of these kinds touches, for its cautions only (not the points a hazard
#: asks for): the servo drives' points lock the telescope's drives, and restoring them lets it move, so the order
#: prints the moving telescope's caution though its work brings no such hazard (a supply's service, say).
ENERGY_ALSO = {"servo": "moving_machinery"}


#: What the page and the printed order say when the work's hazards need nothing isolated (``isolation_statement``).
NO_ISOLATION_NEEDED = (
    "This work needs no energy isolation: none of its hazards is electrical energy, stored air or hydraulic "
    "pressure, a raised load, a loaded spring or a telescope or dome that can move. If the work turns out to touch "
    "any of them, stop and ask the site engineer."
)
#: Said in its place while the order lacks hazards its subsystems now carry (the "Not up to date" notice above it).
ISOLATION_UNKNOWN_NOT_UP_TO_DATE = (
    "This work order is not up to date (see above), so it cannot say whether the work needs energy isolation: the "
    "hazards it lacks may call for it. Do not start the work until the site engineer has brought it up to date."
)
#: Said in its place while nobody has recorded the hazards of one of its subsystems (``{subsystems}``, named).
ISOLATION_UNKNOWN_NOT_RECORDED = (
    "Nobody has recorded the hazards of {subsystems}, so this work order cannot say whether the work needs energy "
    "isolation. The work must not start until an engineer has recorded them, or recorded that there are none."
)


#: Hazard -> what the order says under "Energy isolation" in place of "needs no isolation": equipment locked out by
#: its own procedure, with no isolation point of the telescope's (a coating plant's lethal supplies: a review found
#: the strip-and-coat order telling the crew that the work needed no isolation).
ISOLATED_BY_ITS_OWN_PROCEDURE = {
    "vacuum_plant": (
        "The coating plant's supplies are locked out and proved dead as the plant's own instructions and its "
        "operator's procedure say; this order lists no isolation points for them."
    ),
}


def isolation_statement(hazards: Iterable[str], missing: Iterable[str] = (), unrecorded: Iterable[str] = ()) -> str:
    """What the page and the printed order say under "Energy isolation" in place of the isolation points, for an order
    whose ``hazards`` (codes) need nothing isolated; "" when they do (the points are listed instead).

    ``missing`` are the hazards its subsystems now carry that it lacks (``workorders.selectors.hazards_missing``) and
    ``unrecorded`` the names of its subsystems whose hazards nobody has recorded, neither a hazard nor an engineer's
    "none found" (``workorders.selectors.hazards_unrecorded``). With either, the order cannot know that the work needs
    no isolation, so it never says so: ``ISOLATION_UNKNOWN_NOT_RECORDED`` or ``ISOLATION_UNKNOWN_NOT_UP_TO_DATE``;
    otherwise ``NO_ISOLATION_NEEDED``.
    """
    if needs_isolation(hazards):
        return ""
    names = list(unrecorded)
    if names:
        return ISOLATION_UNKNOWN_NOT_RECORDED.format(subsystems=in_words(names))
    if list(missing):
        return ISOLATION_UNKNOWN_NOT_UP_TO_DATE
    own = [ISOLATED_BY_ITS_OWN_PROCEDURE[h] for h in hazards if h in ISOLATED_BY_ITS_OWN_PROCEDURE]
    return " ".join(own) or NO_ISOLATION_NEEDED


def in_words(names: list[str]) -> str:
    """"A", "A and B", "A, B and C"."""
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def needs_isolation(hazards: Iterable[str]) -> bool:
    """True when any of the hazards needs energy isolated and locked out before the work."""
    return any(h in ISOLATION_HAZARDS for h in hazards)


#: The step that isolates an order's energy, placed after the steps under power (workorders.services.steps_in_groups).
#: Stored energy is more than pressure: after isolation OSHA 29 CFR 1910.147(d)(5) asks for all of it to be relieved,
#: disconnected or restrained, and a spring-applied brake's springs, like the weight of a raised or out-of-balance part,
#: keep theirs when every supply is locked off.
#: A brake that holds an axis is never what "stored energy" asks to release: it stays applied, its springs restrained
#: only at the brake with the axis pinned (the stored-mechanical caution), and the try-start ends with the controls
#: back at off, so nothing starts when the isolation is removed (OSHA 29 CFR 1910.147(d)(6), verification).
LOCKOUT_STEP = (
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'. Make stored energy safe: first "
    "lower raised parts onto their stops or block them, then bleed any stored pressure to zero; leave every brake "
    "that holds an axis applied (restrain its springs only at the brake, axis pinned first). Try to start the drives "
    "to prove they are dead, then return the controls to off, before touching anything."
)
#: The lockout step as orders stored before its present wording carry it in their steps. Such an order is still found
#: by it (``is_lockout_step``): it starts, its lockout is ticked in sequence and answered for at finish, and its paper
#: prints the words it was issued with. Add the old words here whenever ``LOCKOUT_STEP`` is reworded.
EARLIER_LOCKOUT_STEPS = (
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'; release stored "
    "pressure; try to start the drives to prove they are dead before touching anything.",
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'; relieve or restrain stored "
    "energy (pressure, loaded springs, raised or out-of-balance parts); try to start the drives to prove they are "
    "dead before touching anything.",
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'. Make stored energy safe: "
    "bleed any stored pressure to zero and lower or block raised parts, but leave every brake that holds an axis "
    "applied (springs are restrained only at the brake, axis pinned first). Try to start the drives to prove they "
    "are dead, then return the controls to off, before touching anything.",
)
_LOCKOUT_WORDINGS = frozenset((LOCKOUT_STEP, *EARLIER_LOCKOUT_STEPS))


def is_lockout_step(text: str) -> bool:
    """True when ``text``, one step (spaces around it ignored), is the lockout step in its present wording or an
    earlier one (``EARLIER_LOCKOUT_STEPS``). Every check for the lockout step goes through here, never a comparison
    with ``LOCKOUT_STEP``, so orders made before a rewording keep working."""
    return text.strip() in _LOCKOUT_WORDINGS


# Finishing an order whose lockout step or an isolation point nobody ticked (workorders.forms.FinishForm,
# services.work_order_finish). The isolation comes before the work and its locks come off only after it (OSHA 29 CFR
# 1910.147(d), (e)), so an unticked lockout is not covered by the box that confirms the other unticked lines: the
# person finishing says, on its own, which of these is true, and the findings say why. The record keeps the answer.
ISOLATION_UNTICKED_TITLE = "The energy isolation is not ticked"
ISOLATION_UNTICKED_QUESTION = (
    "Nobody ticked these lines of the lockout on the work order page. Say which of the answers below is true: it is "
    "asked apart from the other unticked lines, the record keeps it, and the findings must say why. If none is "
    "true, do not finish: ask the site engineer."
)
#: The answer that the energy was not isolated: the record shows it to the engineer who countersigns.
NOT_ISOLATED = "not_isolated"
#: The answer that the work needed no isolation. The order was made with a lockout because its hazards call for one,
#: so this answer goes to the countersigning engineer too (``ISOLATION_REVIEW``): a finish with nothing past the
#: lockout ticked and "needed no isolation, ok" once passed without anyone looking.
NOT_NEEDED = "not_needed"
#: Answer code -> what the person finishing confirms (the form's choice, the page's and the paper's record).
ISOLATION_UNTICKED = {
    "isolated": (
        "The energy was isolated: every source listed was locked and tagged, stored energy released and the "
        "isolation proved before the work, and the locks were removed only after it. It was not ticked here (ticked "
        "on paper, or missed); the findings say why."
    ),
    NOT_NEEDED: (
        "The work needed no isolation: it touched nothing energised, pressurised or able to move. The findings say "
        "why."
    ),
    NOT_ISOLATED: "The energy was NOT isolated. The findings say why, and how the hazards were controlled instead.",
}
#: The same answers in a few words, beside each unticked line of the lockout on the finished paper.
ISOLATION_UNTICKED_SHORT = {
    "isolated": "the energy was isolated, not ticked here",
    NOT_NEEDED: "the work needed no isolation",
    NOT_ISOLATED: "the energy was NOT isolated",
}
ISOLATION_UNTICKED_RECORD = (
    "Finished with the energy isolation not ticked; {person} confirmed, apart from the other lines: {answer}"
)
ISOLATION_UNTICKED_REQUIRED = (
    "the energy isolation is not ticked ({lines}): tick it on the work order page, or say on the finish form, on its "
    "own, whether the energy was isolated, the work needed no isolation, or the energy was not isolated"
)
ISOLATION_UNTICKED_FINDINGS = (
    "say in the findings why the energy isolation was not ticked: how it was isolated, why the work needed none, or "
    "why it was not isolated and how the hazards were controlled instead"
)
#: Answer -> what the record of an order finished with it says to the engineer who countersigns it.
ISOLATION_REVIEW = {
    NOT_ISOLATED: (
        "The site engineer reads the findings before countersigning, and follows the site's lockout procedure on work "
        "done without isolation."
    ),
    NOT_NEEDED: (
        "This order's hazards called for isolation. The site engineer reads the findings before countersigning and "
        "confirms with the crew that the work touched nothing energised, pressurised or able to move; if it did, the "
        "site's lockout procedure on work done without isolation applies."
    ),
}


# Two orders underway on one telescope at once (workorders.selectors.work_alongside): personal locks protect only
# once they are on, and before that two crews can each power or move the telescope under the other. OSHA 29 CFR
# 1910.147(f)(3) asks, for a crew, that each person is protected by a lock of their own (group lockout); the rest is
# common practice, no published source.
ALONGSIDE_TITLE = "Other work is underway on {telescopes}"
ALONGSIDE_TITLE_ON_PAPER = "When this was printed, other work was underway on {telescopes}"
ALONGSIDE_ADVICE = (
    "Two crews on one telescope: agree with the other crew before any step that powers, moves or releases anything, "
    "and before either lockout comes off. Each person puts a lock of their own on every isolation point they work "
    "under (a group lockout); nobody removes another person's lock."
)
# A crew that finishes (or is withdrawn) while another crew with a hand-back of its own is still at work on the
# telescope leaves the hand-back to robotic and remote control to it (workorders.services.left_to_the_last_crew;
# WorkOrder.hand_back_left_to): the last crew out hands back. Common practice, no published source.
HAND_BACKS_HELD_TITLE = "This crew holds the hand-back of other work on the telescope"
HAND_BACKS_HELD_ADVICE = (
    "They left the hand-back to robotic and remote control to the last crew out, this one. This order's own hand-back "
    "step hands the telescope back for them too, once no other crew is at work on it. Withdrawn, its page says who "
    "holds it next."
)
ALONGSIDE_START_QUESTION = (
    "{orders} {verb} underway on {telescopes}: have you agreed with {whose} crew how the two jobs share the telescope "
    "and its isolation? Start anyway?"
)


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

# A subsystem with no hazard recorded and no engineer's record that it has none (registry.models.Subsystem
# .no_hazards_found, the kind "Other" as it is added): its orders cannot know their cautions or whether to isolate
# (workorders.selectors.hazards_unrecorded), and they are neither issued nor started until an engineer records them.
HAZARDS_UNRECORDED_TITLE = "Hazards not recorded: this work must not start"
HAZARDS_UNRECORDED = (
    "Nobody has recorded the hazards of {subsystems}: neither a hazard nor an engineer's record that there are "
    "none. This work order cannot carry their safety cautions or say whether the energy must be isolated."
)
HAZARDS_UNRECORDED_BEFORE_START = (
    "Before the work starts, the site engineer records them on the subsystem in the admin (its hazards, or 'No "
    "hazards found' once checked), then brings this work order up to date if it lacks any; until then it cannot be "
    "{moves}."
)
HAZARDS_UNRECORDED_STARTED = (
    "Technicians: stop the work as soon as it is safe to do so, and ask the site engineer to record the hazards "
    "before going on."
)
HAZARDS_UNRECORDED_ON_PAPER = (
    "Do not start the work from this sheet, and if it has started, stop as soon as it is safe to do so: ask the "
    "site engineer to record the hazards and give you a work order that carries them."
)
#: Why such an order is not issued or started (workorders.selectors.moves_held).
HAZARDS_UNRECORDED_HELD = (
    "nobody has recorded the hazards of {subsystems}: an engineer records them on the subsystem in the admin, or "
    "records that there are none, before it is issued or started"
)

#: Why an order whose hazards call for isolating an energy with no isolation point registered for it
#: (workorders.selectors.isolation_gaps) is neither issued nor started: its lockout step would send the technician to
#: a list of points that leaves the energy out, and the finish form would read "every isolation point ticked".
#: ``missing``: each warning's first sentence, so the hold names the energy and where (a walk-through's phone showed
#: the hold at the top and its warning a long scroll below).
ISOLATION_POINTS_MISSING_HELD = (
    "its work calls for isolating energy that has no isolation point registered ({missing}; the warnings under Energy "
    "isolation points): an engineer adds the points to the register (admin, Isolation points) before it is issued or "
    "started"
)

#: A telescope whose mirror (its primary, or another) a recoat removed and has not yet put back
#: (workorders.selectors.telescopes_out):
#: out of balance, axes pinned, drives on the site's long-term locks (the removal order's own release step). Work on
#: it meanwhile is usual, but no step of it may move an axis or take those locks off (common practice, no published
#: source; the site's lockout procedure, OSHA 29 CFR 1910.147(f)(4), and the mount maker's instructions come first).
TELESCOPE_OUT_TITLE = "{telescope} is out of service: its {kind} is out"
TELESCOPE_OUT = (
    "{mirror} was removed on {removed_on} ({removal}), and {reinstall}. Until then the telescope is out of "
    "balance, with both axes pinned and its drives on the site's long-term locks."
)
TELESCOPE_OUT_TODO = (
    "Do no step that moves an axis, releases a brake or takes those locks off (tests under power, parking, "
    "returning the telescope to service): leave such steps until the reinstall is finished, and ask the site "
    "engineer before going on."
)

#: Parts an order's plans name that are not on its parts list (workorders.selectors.parts_unregistered).
PARTS_UNREGISTERED = (
    "its service plans name these parts, which are not on this order's parts list (the site's parts register did not "
    "hold them when it was made, or held two parts whose names differ only in capitals), so none is counted out of "
    "stock: bring them, or ask the site engineer to add them to the order."
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
#: A lift with no working load limit entered (LiftFigures.no_limit) is not started: the paper may go out before the
#: slings are chosen, but the legs' rated capacity is compared with their tension before the lift (ASME B30.9).
#: An order whose work lifts a registered mirror (a suspended load among its hazards) with no lifting figures at all is
#: not started: nobody has compared the load with the slings (ASME B30.9), and the caution refers to figures that
#: are not there.
LIFT_NO_FIGURES_REFUSED = (
    "{number} lifts a suspended load on {mirror} but has no lifting figures: an engineer enters them, with the "
    "working load limit per leg of the slings as rigged, on the lift page ('Lifting figures' on the work order page) "
    "before the work starts; the order may be issued meanwhile"
)
#: The standing note of an order whose hazards hold a suspended load but which carries no lifting figures and lifts no
#: registered mirror (whose start ``LIFT_NO_FIGURES_REFUSED`` holds instead): an ad hoc lift of a mirror cell, a hoist
#: job. A safety review found such an order's paper silent, its caution speaking of "the figures on this sheet".
NO_LIFT_FIGURES_NOTE = (
    "This work's hazards include a suspended load, and this order carries no lifting figures. Before anything is "
    "lifted, the site engineer enters the load and the working load limit per leg of the slings as rigged on the lift "
    "page ('Lifting figures' on the work order page), or gives them in a written lift plan, and a competent person "
    "checks the rigging (ASME B30.9). Where a caution speaks of the figures on this sheet, there are none yet."
)
LIFT_NO_LIMIT = "no working load limit entered per leg"
LIFT_NO_LIMIT_REFUSED = (
    "{number}'s lifting figures have no working load limit entered, so the sling legs' rated capacity is not compared "
    "with their tension: an engineer enters the working load limit per leg of the slings as rigged on the lift page "
    "('Lifting figures' on the work order page) before the work starts; the order may be issued meanwhile"
)
#: A lift with no cell / fixture mass entered (LiftFigures.fixture_not_entered) is not started either: its load and leg
#: tension are the mirror's alone, below those of the mirror in its cell, so slings, shackles or a lifting table
#: chosen for them may be under-rated (ASME B30.9: each item's rated capacity at least the load it carries).
#: ``{where}`` is LIFT_CELL_ON_MIRROR for an order on a registered mirror, LIFT_CELL_ON_LIFT_PAGE otherwise.
LIFT_NO_CELL = "no cell / fixture mass entered, so they are the mirror alone (enter it {where})"
LIFT_NO_CELL_REFUSED = (
    "{number}'s lifting figures have no cell / fixture mass entered, so the load and the sling legs' tension are the "
    "mirror's alone, without the cell it is lifted in, and the slings and lifting table may be chosen too light: an "
    "engineer enters the mass of the cell, or 0 for a mirror lifted without its cell, {where} before the work starts; "
    "the order may be issued meanwhile"
)
LIFT_CELL_ON_MIRROR = "on the mirror's record in the admin ({url})"
LIFT_CELL_ON_LIFT_PAGE = "on the lift page ('Lifting figures' on the work order page)"

#: Said on the page and the paper of a recoat's removal and reinstall orders still to do (workorders.selectors
#: .standing_notes), to keep in mind throughout, not a step to tick: the work takes more than a day and may pause over
#: the crew's days off, so it is left safe at every stop and the lockout carried over from shift to shift or onto the
#: site's long-term locks (OSHA 29 CFR 1910.147(f)(4), shift or personnel changes; the site's lockout procedure says
#: how). A load is never left hanging: common practice, no published source.
WORK_STOPPED_PART_WAY = (
    "If the work stops before this order is finished (at the end of a shift, or over the crew's days off), "
    "leave it safe first: the mirror set down and secured in its crate or in its cell on the lowered lifting "
    "table, never left hanging; both axes pinned; the locks and tags kept on, handed over from person to person "
    "or onto the site's long-term locks as its lockout procedure says for work over several shifts."
)


#: An order over several plans whose steps before the lockout prepare the telescope for more than one plan's work in
#: its own way (workorders.selectors.prepared_apart): one lockout covers all their work, so the position the last of
#: them leaves may not suit the first plan's work (a reviewer's primary and secondary cleaning: the primary's cover
#: opened, then closed again and the tube pointed for the secondary, before one lockout). Nothing is moved under the
#: locks (OSHA 29 CFR 1910.147(d): the equipment isolated before the work); the rest common practice, no published
#: source. Said on the page and the paper (a standing note) and asked before the order is issued.
PREPARED_APART_NOTE = (
    "The steps before the lockout prepare the telescope for the work of {n} plans ({plans}), each its own way, and "
    "one lockout covers all their work. If the position the telescope or a cover is left in does not suit a plan's "
    "work, stop: never move the telescope or a cover under the locks. Ask the site engineer, who splits the order or "
    "edits its steps (a release, that plan's preparation and a new lockout before its work)."
)
PREPARED_APART_QUESTION = (
    "{number} merges the work of {n} plans under one lockout, and each prepares the telescope its own way before it "
    "(steps {steps}). Can every plan's work be done with the telescope and its covers as the last of those steps "
    "leave them? If not, edit the steps (a release, the preparation and a new lockout before that plan's work) or make "
    "one order for each plan. Issue as written?"
)


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
    # Back-feed: OSHA 29 CFR 1910.333(b)(2)(iv) asks that a de-energised circuit be verified dead before it is worked
    # on as such, the test at the parts people will touch also finding voltage back-fed from elsewhere. That a UPS, a
    # generator, a battery bank or a second supply is where it comes from at an observatory is common practice, no
    # published source.
    "electrical": Caution(
        hazard="electrical",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["electrical"],
        text=(
            "Isolate the supply at its disconnect, lock and tag it in your own name, and keep the key with you. "
            "A UPS, a generator, a battery bank or a second supply can keep a circuit live after its isolator is off "
            "(back-feed): isolate and lock each source that can feed the work. "
            "Before you touch any conductor, test for absence of voltage at the point of work, not at the isolator, "
            "with a tester proved on a known live source just before and just after the test. "
            "Treat servo drives and power supplies as live until their capacitors have discharged for the time "
            "the maker states. "
            "Work on or near exposed live parts only under an energised-work permit, by a qualified person "
            "wearing the protective equipment the arc-flash assessment calls for. "
            "Remove your lock only when everyone is clear and the covers are back on."
        ),
        standard=(
            "OSHA 29 CFR 1910.147 (lockout/tagout); OSHA 29 CFR 1910.333(b)(2)(iv) (de-energisation verified before "
            "work); ANSI/ASSP Z244.1; NFPA 70E"
        ),
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
    # A spring-applied brake (or any spring pack) keeps its energy when every supply is locked off: OSHA 29 CFR
    # 1910.147(d)(5) asks for stored energy to be relieved, disconnected or restrained before the work. Releasing the
    # brake frees the axis it holds, which the moving-telescope caution covers too. Worded for a brake released by air
    # and one released by its coil alike: both are applied by springs.
    "stored_mechanical": Caution(
        hazard="stored_mechanical",
        severity=SERIOUS_INJURY,
        title=HAZARDS["stored_mechanical"],
        text=(
            "A spring-applied brake, released by air or by a coil, holds its axis with springs that stay loaded "
            "when every supply is locked off and the air vented: isolating the power or the air does not release "
            "that energy. "
            "Before you adjust or take apart a brake or any spring pack, pin or block the axis it holds, then relieve "
            "or restrain the spring force with the tool or release screws the maker provides, never by prying the "
            "armature, the pads or the disc. "
            "Releasing a brake, by hand, by air or by power, frees the axis it holds: pin or block the axis first, "
            "and keep hands out of the gap between the pads or armature and the disc. "
            "Check that the brake applies and holds the axis again before anyone relies on it."
        ),
        standard="OSHA 29 CFR 1910.147(d)(5) (stored energy); the brake maker's instructions",
    ),
    # A hydraulic lift or platform holds its load on trapped oil, so a raised load is stored energy as pressure is
    # (OSHA 29 CFR 1910.147(d)(5)); a fine jet of oil under pressure can be injected under the skin (common practice,
    # no published source; the hydraulic system's maker and ISO 4413 give the controls). ISO 4413 asks in general for
    # a system that can be isolated and its stored pressure released; that check valves, an accumulator or a load
    # held up by a cylinder keep pressure in part of the circuit while the gauge at the pump reads zero, so the
    # pressure is bled and proved zero at the part worked on, is common practice, no published source.
    "hydraulic": Caution(
        hazard="hydraulic",
        severity=DANGER_TO_LIFE,
        title=HAZARDS["hydraulic"],
        text=(
            "A hydraulic lift, jack or platform holds its load on trapped oil: a leaking seal, an opened fitting or "
            "a valve moved by mistake lets a raised load come down. "
            "Before anyone works under or beside a raised platform or load, lower it onto its mechanical stops or "
            "block it with rated props or the maker's safety locks; never rely on the hydraulics alone. "
            "Switch off and lock out the pump, and release the pressure through the maker's release valve with the "
            "load lowered or propped. "
            "Zero on the gauge at the pump does not prove the circuit dead: check valves, an accumulator or a load "
            "held up by a cylinder keep pressure trapped in their part of it, so bleed the part you work on and "
            "confirm zero on a gauge or test point on that part. "
            "Never loosen a fitting under pressure or feel for a leak by hand: a fine jet of oil can pierce the "
            "skin, and such an injury needs a hospital at once however small it looks. "
            "Restore the pressure slowly, with everyone clear of the load's path."
        ),
        standard="ISO 4413 (hydraulic fluid power); OSHA 29 CFR 1910.147 (lockout/tagout)",
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
        # Solvent vapour gathers in a closed dome, and aluminium dissolving in acid or alkali gives off hydrogen
        # (from memory; the chemicals' safety data sheets say so for each).
        text=(
            "Read the safety data sheet of every chemical before you use it and keep it at hand; wear the gloves, "
            "eye protection and clothing it calls for, and work with the ventilation it asks for. "
            "Solvents and solvent wipes (for encoders, rollers and optics) are flammable, and their vapour gathers "
            "inside a closed dome or enclosure: keep the space ventilated, keep sparks, flames and hot surfaces "
            "away, and close each container as soon as you have used it. "
            "Stripping aluminium in an acid or alkali bath gives off hydrogen, which burns and can explode: strip "
            "only with the extraction running and nothing that could ignite it nearby. "
            "Bring only the small quantity the job needs, in labelled containers, and keep it away from optics you "
            "are not cleaning. "
            "Know where the eyewash and the spill kit are, and dispose of waste and used wipes as the data sheet "
            "directs."
        ),
        standard="Safety data sheet of each chemical (GHS); OSHA 29 CFR 1910.106 (flammable liquids)",
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
            "Cover the mirror or lens whenever you are not working on it, and keep tools, fasteners and drips away "
            "from above it. "
            "Clean only with the materials and method the optic's maker or coating supplier approves. "
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


#: A standing note of an order whose hand-back waits for a recoat's realignment (``selectors.recoat_hands_back``).
RECOAT_HOLDS_HAND_BACK = (
    "The recoat of {telescope} is not done: its realignment, {number}, returns the observatory to robotic and remote "
    "control once the collimation is recorded. Do not hand it back on this order: leave this order's hand-back step "
    "to that order, and say so when this order is finished."
)
