"""Names that head a page's title, a mail's subject or a printed order's header are one line without control characters
(registry.models.validate_one_line): sites refused them, telescopes, subsystems, service plans and parts took them (a
bad-input review: a telescope named with a control character printed a black box on paper and broke a mail's
subject)."""
from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.api.models import ApiToken
from observatory_ops.planning.models import BookedRun, ServicePlan
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.workorders.models import IsolationPoint, Part, WorkOrder

ONE_LINE = "Write the name on one line, without tabs or other control characters."


NAMES = [(Site, "name"), (Telescope, "name"), (Subsystem, "name"), (ServicePlan, "name"), (Part, "name"),
         (WorkOrder, "title"), (IsolationPoint, "label"), (BookedRun, "title"), (ApiToken, "name")]


@pytest.mark.parametrize(("model", "field"), NAMES)
@pytest.mark.parametrize("name", ["T70\tnorth", "T70\nnorth", "T70\x07", "T70\x7f", "T70\x85north", "T70\u2028north",
                                  "T70\u2029north"])
def test_a_name_with_a_control_character_is_refused(model, field, name):
    """C0 and C1 controls (unicodedata category Cc) and the Unicode line and paragraph separators (Zl, Zp)."""
    with pytest.raises(ValidationError) as refused:
        model._meta.get_field(field).run_validators(name)
    assert refused.value.messages == [ONE_LINE]


@pytest.mark.parametrize(("model", "field"), NAMES)
def test_a_name_on_one_line_passes(model, field):
    model._meta.get_field(field).run_validators("T70 north: Axis 2 brake (spare) – ø 60 cm")


@pytest.mark.django_db
def test_the_admin_refuses_a_telescope_named_with_a_tab(admin_client, telescope):
    page = admin_client.get(f"/admin/registry/telescope/{telescope.pk}/change/")
    form = page.context["adminform"].form
    data = {name: ("" if value is None else value) for name, value in form.initial.items()}
    data["name"] = "T1\tspare"
    response = admin_client.post(f"/admin/registry/telescope/{telescope.pk}/change/", data)
    assert response.status_code == 200 and ONE_LINE in response.content.decode()
    assert Telescope.objects.get(pk=telescope.pk).name == telescope.name


@pytest.mark.django_db
def test_an_ad_hoc_order_and_a_token_take_no_line_break_either(users, telescope):
    """A bad-input review: the ad hoc order's form (not a model form) stored "Fan fault\r\nEND:VEVENT...", which the
    edit form then refused on every save; a token named over two lines printed a line of its own in `api_token list`."""
    from observatory_ops.api.services import api_token_create
    from observatory_ops.workorders.forms import AdHocForm

    form = AdHocForm({"title": "Fan fault\r\nEND:VEVENT"}, site=telescope.site)
    assert not form.is_valid() and form.errors["title"] == [ONE_LINE]
    with pytest.raises(ValueError, match="the token's name: Write the name on one line"):
        api_token_create(telescope.site, "east dome\r\nfake line: revoked")
    assert not ApiToken.objects.exists()
