"""Where the printed order breaks its pages. A safety review found the lockout step printed "... before" at the foot
of page 1 and "touching anything." at the head of page 2: a step of a few lines moves whole to the next page, so the
technician reads each step on one sheet."""
from __future__ import annotations

import pytest
from test_workorder_pdf import flat, make_sheet, page_texts

from observatory_ops.workorders.cautions import LOCKOUT_STEP
from observatory_ops.workorders.pdf import render_sheet

FILLER = "Check the {n}th fastener of the cover for tightness and mark it with paint."


@pytest.mark.parametrize("fillers", range(24, 44, 2))
def test_a_step_of_a_few_lines_is_never_split_across_two_pages(fillers):
    # Enough one-line steps before the lockout step to walk it down the page and over the break, in steps of two.
    steps = tuple(FILLER.format(n=n) for n in range(fillers)) + (LOCKOUT_STEP, "Inspect the mirror surface.")
    pages = [flat(text) for text in page_texts(render_sheet(make_sheet(steps=steps)))]
    assert sum(flat(LOCKOUT_STEP) in page for page in pages) == 1, f"the lockout step split over pages ({fillers})"
