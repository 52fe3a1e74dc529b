"""Every answer of the API is JSON, errors included, so control software reads one format."""
from __future__ import annotations

import pytest

from observatory_ops.api import services as api_services


@pytest.fixture
def auth(site) -> dict:
    return {"HTTP_AUTHORIZATION": f"Bearer {api_services.api_token_create(site, 'dome computer')[1]}"}


@pytest.mark.parametrize("path", ["/api/v1/sites/test-hill/due/", "/api/v1/sites/test-hill/night", "/api/"])
def test_a_path_that_names_no_endpoint_is_a_json_404_listing_the_endpoints(client, site, auth, path):
    response = client.get(path, **auth)
    assert response.status_code == 404 and response["Content-Type"] == "application/json"
    message = response.json()["errors"][0]["message"]
    assert path in message and "GET /api/v1/sites/<slug>/due" in message


def test_a_failure_inside_the_api_is_a_json_500_and_the_pages_keep_their_own(client, site, auth, monkeypatch):
    from observatory_ops.api import views

    def broken(*_args, **_kwargs):
        raise RuntimeError("a bug")

    monkeypatch.setattr(views, "due_records", broken)
    client.raise_request_exception = False
    response = client.get("/api/v1/sites/test-hill/due", **auth)
    assert response.status_code == 500 and response["Content-Type"] == "application/json"
    assert "stored nothing" in response.json()["errors"][0]["message"]
    assert client.get("/no-such-page/").status_code == 404  # outside /api/ nothing changes


def test_the_endpoints_a_wrong_address_is_told_are_every_route_of_the_api():
    """``api.middleware.ENDPOINTS`` is written by hand beside api/urls.py (a newcomer review): a new route must be
    named there too, with its method."""
    from observatory_ops.api.middleware import ENDPOINTS
    from observatory_ops.api.urls import urlpatterns

    routes = ["/" + str(p.pattern).replace("<slug:slug>", "<slug>") for p in urlpatterns]
    assert all(route in ENDPOINTS for route in routes), (routes, ENDPOINTS)
    assert ENDPOINTS.count("/api/v1/") == len(routes)
