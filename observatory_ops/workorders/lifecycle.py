"""Who may move a work order from which state to which: one table, read by services and pages.

draft --issue--> issued --start--> underway --finish--> finished --countersign--> countersigned
draft / issued / underway --withdraw--> withdrawn

Finishing records hours, findings, readings and parts, and writes the service records. Countersigning
is done by a second person: never one who took part in the work, by ticking its lines, finishing it or being on its
crew (``selectors.second_person_refusal``); and an order finished with its energy isolation answered for
as not done or not needed (``cautions.ISOLATION_REVIEW``) is countersigned by an engineer (``role_needed``). Some
moves wait as an order stands, whoever asks (``selectors.moves_held``): issuing without a planned date, issuing or
starting with a lift in the way (starting also while no working load limit is entered), starting a recoat phase
before the phase order before it in its recoat plan is finished, and finishing a recoat's strip and coat before its
mirror's new coating is logged. A start more than a week before the planned date is
asked first, not refused (``selectors.early_start_question``). Once the work has started, what its checklist is made
of stays as stored (``models.WorkOrder.clean``).
"""
from __future__ import annotations

from dataclasses import dataclass

from observatory_ops.access.roles import ENGINEER, TECHNICIAN, has_role

from .cautions import ISOLATION_REVIEW, ISOLATION_UNTICKED_SHORT
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


def role_needed(order, action: str) -> str:
    """The role ``action`` needs on ``order``: its transition's, except countersigning an order finished with its
    energy isolation answered for as not done or not needed (``cautions.ISOLATION_REVIEW``). Those answers are put to
    the site engineer, who reads the findings before countersigning, so that needs the engineer role or above."""
    if action == "countersign" and order.isolation_confirmed_at_finish in ISOLATION_REVIEW:
        return ENGINEER
    return TRANSITIONS[action].role


def role_refusal(order, action: str, user) -> str:
    """Why ``user``'s role may not take ``action`` on ``order`` (``role_needed``), saying who may; "" when it may."""
    needed = role_needed(order, action)
    if has_role(user, needed):
        return ""
    if needed != TRANSITIONS[action].role:
        answer = ISOLATION_UNTICKED_SHORT[order.isolation_confirmed_at_finish]
        return (f"{order.number} was finished with its energy isolation answered for as \"{answer}\": that answer and "
                f"the findings are put to the site engineer, so only someone with the {needed} role or above "
                "countersigns it")
    return f"'{TRANSITIONS[action].label}' needs the {needed} role or above"
