"""Who may move a work order from which state to which: one table, read by services and pages.

draft --issue--> issued --start--> underway --finish--> finished --countersign--> countersigned
draft / issued / underway --withdraw--> withdrawn

Finishing records hours, findings, readings and parts, and writes the service records. Countersigning
is done by a second person: never the one who finished the work. Some moves wait as an order stands, whoever
asks (``selectors.moves_held``): issuing without a planned date, issuing or starting with a lift in the way (starting
also while no working load limit is entered), and starting a recoat phase before the phase order before it in its
recoat plan is finished. A start more than a week before the planned date is asked first, not refused
(``selectors.early_start_question``). Once the work has started, what its checklist is made of stays as stored
(``models.WorkOrder.clean``).
"""
from __future__ import annotations

from dataclasses import dataclass

from observatory_ops.access.roles import ENGINEER, TECHNICIAN

from .models import State


@dataclass(frozen=True)
class Transition:
    action: str
    label: str
    sources: tuple[str, ...]
    target: str
    role: str


TRANSITIONS: dict[str, Transition] = {
    t.action: t
    for t in (
        Transition("issue", "Issue to the technicians", (State.DRAFT,), State.ISSUED, ENGINEER),
        Transition("start", "Start work", (State.ISSUED,), State.UNDERWAY, TECHNICIAN),
        Transition("finish", "Finish and record", (State.UNDERWAY,), State.FINISHED, TECHNICIAN),
        Transition("countersign", "Countersign (second person)", (State.FINISHED,), State.COUNTERSIGNED, TECHNICIAN),
        Transition(
            "withdraw", "Withdraw", (State.DRAFT, State.ISSUED, State.UNDERWAY), State.WITHDRAWN, ENGINEER
        ),
    )
}


def available(state: str) -> list[Transition]:
    """Transitions that leave ``state`` (whoever may take them)."""
    return [t for t in TRANSITIONS.values() if state in t.sources]
