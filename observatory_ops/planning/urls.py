from django.urls import path

from . import views

urlpatterns = [
    path("due/", views.due_list, name="due-list"),
]
