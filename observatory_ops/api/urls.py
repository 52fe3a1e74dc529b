from django.urls import path

from . import views

urlpatterns = [
    path("api/v1/sites/<slug:slug>/nights", views.nights_post, name="api-nights"),
    path("api/v1/sites/<slug:slug>/due", views.due_list, name="api-due"),
]
