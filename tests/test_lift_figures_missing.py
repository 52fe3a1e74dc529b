"""An order whose hazards hold a suspended load but which has no lifting figures, and lifts no registered mirror (whose
start waits for them instead: test_lift_cell_mass.py), says so on its page and its paper. A safety review lowered a
mirror cell on an ad hoc order whose caution spoke of "the figures on this sheet" and found none, with nothing said.
Comparing the load with the rigging's rated capacity before a lift: ASME B30.9."""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from conftest import mains_isolator
from pypdf import PdfReader

from observatory_ops.mirrors.models import Mirror
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import NO_LIFT_FIGURES_NOTE

pytestmark = pytest.mark.django_db


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_an_ad_hoc_cell_lift_without_figures_says_so_on_the_page_and_the_paper(telescope, users, client):
    mains_isolator(telescope)
    cell = subsystem_create(telescope, "mirror_cell", "Primary mirror cell", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_ad_hoc(
        telescope.site, [cell], "Lower the cell", users["engineer"],
        steps="Unbolt the cell.\nLower the cell onto the lifting table with the hoist.",
        planned_date=dt.date(2026, 7, 1))
    assert "suspended_load" in order.hazards and selectors.lift(order) is None
    assert NO_LIFT_FIGURES_NOTE in selectors.standing_notes(order)
    client.force_login(users["technician"])
    page = _flat(html.unescape(re.sub(r"<[^>]+>", " ", client.get(order.get_absolute_url()).content.decode())))
    assert _flat(NO_LIFT_FIGURES_NOTE) in page
    document = client.get(f"/workorders/{order.pk}/pdf/").content
    paper = _flat(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(document)).pages))
    assert "this order carries no lifting figures" in paper


def test_an_order_with_figures_or_lifting_a_registered_mirror_carries_no_such_note(telescope, users):
    mains_isolator(telescope)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    order = services.work_order_ad_hoc(telescope.site, [primary], "Lift the primary", users["engineer"],
                                       steps="Lift it out.", hazards=["suspended_load"],
                                       planned_date=dt.date(2026, 7, 1))
    assert NO_LIFT_FIGURES_NOTE not in selectors.standing_notes(order)  # its start waits for the figures instead
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    plain = services.work_order_ad_hoc(telescope.site, [fans], "Fans", users["engineer"], steps="Clean them.")
    assert NO_LIFT_FIGURES_NOTE not in selectors.standing_notes(plain)
