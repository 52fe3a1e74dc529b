"""Points a newcomer setting up a site from an empty database ran into: each page says what is wrong or what it
shows in words a site engineer reads without the code (common practice, no published source)."""
from __future__ import annotations

import html

from observatory_ops.mirrors.forms import CoatingForm
from observatory_ops.mirrors.models import CoatingEvent


def test_a_batch_whose_dates_are_reversed_says_so(site, users, client):
    client.force_login(users["viewer"])
    response = client.get(f"/sites/{site.slug}/workorders/batch.pdf?from=2027-01-01&to=2026-01-01", follow=True)
    page = html.unescape(response.content.decode())
    assert "from 01 Jan 2027 to 01 Jan 2026, which ends before it starts" in page
    assert "No issued work orders" not in page


def test_the_coating_metal_is_named_not_coded():
    assert dict(CoatingEvent._meta.get_field("metal").choices) == {"al": "Aluminium (Al)", "ag": "Silver (Ag)"}
    assert dict(CoatingForm().fields["metal"].choices)["ag"] == "Silver (Ag)"


def test_a_large_reading_is_written_whole_not_with_an_exponent():
    from observatory_ops.planning.metrics import READING
    from observatory_ops.planning.models import figure_text

    assert figure_text(READING, "count", 12345.6) == "12,346"  # "{:,.4g}" alone wrote 1.235e+04
    assert figure_text(READING, "s", 1.0580) == "1.058"


def test_a_fault_order_at_a_site_without_subsystems_says_to_register_them_first(site, users, client):
    client.force_login(users["engineer"])
    page = html.unescape(client.get(f"/sites/{site.slug}/workorders/new/").content.decode())
    assert "has no subsystem in service yet" in page and "Draft it" not in page
