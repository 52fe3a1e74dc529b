"""The paper asks what the finish form asks. A tablet review found that a finish typed in from a filled-in paper
could not be completed: the paper had no place for the mirror-cleaning answer the form requires, and no rows for
parts used beyond those planned, which the form takes in three rows."""
from __future__ import annotations

import pytest
from test_workorder_finish import _post, _started, cleaning_order, mirror  # noqa: F401  (fixtures, used by name)
from test_workorder_pdf import body_text

from observatory_ops.mirrors.models import CleaningEvent
from observatory_ops.workorders import selectors

pytestmark = pytest.mark.django_db


def _paper(client, order) -> str:
    return " ".join(body_text(client.get(f"/workorders/{order.pk}/pdf/").content).split())


def test_the_paper_of_a_mirror_order_asks_how_the_mirror_was_cleaned_and_for_other_parts(
    cleaning_order, mirror, users, client  # noqa: F811
):
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    paper = _paper(client, cleaning_order)
    asked = paper.index("Mirror cleaning \N{EN DASH} tick one for each mirror")
    answers = ["not cleaned in this work", *(label for _, label in CleaningEvent.Method.choices)]
    assert [label for _, label in selectors.cleaning_choices()] == answers  # the form's choices, in its order
    positions = [paper.index(answer, asked) for answer in answers]
    assert positions == sorted(positions) and mirror.subsystem.name in paper[asked:positions[0]]
    rows = paper.index("Other parts used (from the register, not listed above)")
    assert paper.index("Part Part no. How many", rows) > rows
    assert len(selectors.mirrors_asked_about(cleaning_order)) == 1

    # Finished: the record says what was done, and nothing is left to tick or fill in.
    response = client.post(f"/workorders/{cleaning_order.pk}/finish/",
                           _post(cleaning_order, **{f"cleaned_{mirror.pk}": CleaningEvent.Method.choices[0][0]}))
    assert response.status_code == 302
    paper = _paper(client, cleaning_order)
    assert "tick one for each mirror" not in paper and "Other parts used" not in paper
    assert f"{mirror.subsystem.name}: cleaned by {CleaningEvent.Method.choices[0][1]} on " in paper
