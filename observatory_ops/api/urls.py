from django.urls import path

from . import views

urlpatterns = [
    path("api/v1/sites/<slug:slug>/nights", views.nights_post, name="api-nights"),
    path("api/v1/sites/<slug:slug>/due", views.due_list, name="api-due"),
    path("api/v1/sites/<slug:slug>/planned-work.ics", views.planned_work_calendar, name="api-planned-work"),
]
