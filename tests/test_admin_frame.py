"""The admin's frame: our name, and which clock its times are on (it shows UTC while the product's pages show each
site's own time; a history entry at 23:30 UTC is the next day in Europe and the same evening in the Americas)."""
import pytest
from django.contrib.auth.models import User

pytestmark = pytest.mark.django_db


def test_every_admin_page_says_its_times_are_utc(client):
    client.force_login(User.objects.create_superuser("root", "root@example.org", "x"))
    page = client.get("/admin/").content.decode()
    assert "observatory_ops: register, plans and people" in page
    assert "Django administration" not in page
    assert "Times on these admin pages are in UTC" in page
