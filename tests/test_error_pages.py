"""The pages a person sees when something is missing, refused or broken, as a production installation (DEBUG off)
serves them: in the product's own frame, saying what happened to what they sent."""
import pytest
from django.test import Client, override_settings

pytestmark = pytest.mark.django_db


@override_settings(DEBUG=False)
def test_a_missing_page_names_the_address_and_links_back(client):
    page = client.get("/work-orders/999999/")
    assert page.status_code == 404
    text = page.content.decode()
    assert "No such page" in text and "/work-orders/999999/" in text
    assert 'href="/due/"' in text


@override_settings(DEBUG=False)
def test_a_form_sent_with_a_stale_security_mark_says_nothing_was_saved():
    client = Client(enforce_csrf_checks=True)
    page = client.post("/login/", {"username": "x", "password": "y"})
    assert page.status_code == 403
    assert "Nothing from it was saved" in page.content.decode()


@override_settings(DEBUG=False)
def test_a_server_failure_page_renders_without_a_request_context():
    from django.test import RequestFactory
    from django.views.defaults import server_error

    page = server_error(RequestFactory().get("/"))
    assert page.status_code == 500
    assert b"Something went wrong" in page.content


def test_the_address_asked_before_a_form_is_sent_answers_at_once_and_reads_nothing(client, django_assert_num_queries):
    # forms.js asked the page's own address: a POST-only page logged a refusal at every send, and the recoat planner
    # searched its windows again before "Plan it" went.
    with django_assert_num_queries(0):
        assert client.head("/alive/").status_code == 204
    assert 'data-alive="/alive/"' in client.get("/login/").content.decode()
