"""The admin's list of people shows each one's role and filters by it (access.roles: the highest role group a person
is in; a superuser is an administrator)."""
from __future__ import annotations

import pytest
from django.contrib.auth.models import Group, User

pytestmark = pytest.mark.django_db


@pytest.fixture
def people(users):
    """The four role users of conftest, plus an engineer also in the technician group, a superuser in no group, and
    a person in no role group."""
    both = User.objects.create_user("ilse", password="pw-ilse-123456")
    both.groups.add(Group.objects.get(name="technician"), Group.objects.get(name="engineer"))
    User.objects.create_superuser("root-admin", password="pw-root-123456")
    User.objects.create_user("newcomer", password="pw-new-123456")
    users["administrator"].is_staff = True  # the admin needs staff status; the role group gives the permissions
    users["administrator"].save()
    return users


def _listed(client, query: str = "") -> dict[str, str]:
    """username -> role as the admin's list shows them."""
    response = client.get(f"/admin/auth/user/{query}")
    assert response.status_code == 200
    changelist = response.context["cl"]
    return {user.username: changelist.model_admin.role(user) for user in changelist.result_list}


def test_the_people_list_has_a_role_column(people, client):
    client.force_login(people["administrator"])
    page = client.get("/admin/auth/user/").content.decode()
    assert 'class="column-role"' in page
    assert _listed(client) == {
        "administrator": "administrator", "engineer": "engineer", "technician": "technician", "viewer": "viewer",
        "ilse": "engineer", "root-admin": "administrator", "newcomer": "–",
    }


@pytest.mark.parametrize(
    ("role", "listed"),
    [
        ("administrator", {"administrator", "root-admin"}),
        ("engineer", {"engineer", "ilse"}),
        ("technician", {"technician"}),  # not ilse: her role is the higher one
        ("viewer", {"viewer"}),
        ("none", {"newcomer"}),
    ],
)
def test_the_people_list_filters_by_role(people, client, role, listed):
    client.force_login(people["administrator"])
    assert set(_listed(client, f"?role={role}")) == listed
