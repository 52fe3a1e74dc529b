"""Every page of the demo answers: each subsystem, work order and mirror page, for a viewer."""
from __future__ import annotations

import pytest


@pytest.fixture
def demo(db):
    from fixtures_demo import generator

    generator.demo_users()
    site, _ = generator.build()
    return site


def test_every_demo_page_renders(demo, client):
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.workorders.models import WorkOrder

    client.login(username="viewer", password="demo-viewer-2026")
    urls = ["/", f"/sites/{demo.slug}/", "/due/", "/due/?export=csv", "/workorders/", "/coating/",
            f"/sites/{demo.slug}/nights/", f"/sites/{demo.slug}/parts/", f"/sites/{demo.slug}/downtime.ics"]
    urls += [s.get_absolute_url() for s in Subsystem.objects.all()]
    urls += [w.get_absolute_url() for w in WorkOrder.objects.all()]
    urls += [m.get_absolute_url() for m in Mirror.objects.all()]
    urls += [f"/mirrors/{m.pk}/recoat/" for m in Mirror.objects.all()]
    for url in urls:
        response = client.get(url)
        assert response.status_code in (200, 302), f"{url}: {response.status_code}"
