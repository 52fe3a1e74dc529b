from django.urls import path

from . import views

urlpatterns = [
    path("due/", views.due_list, name="due-list"),
    path("plans/<int:pk>/catalogue-steps/", views.plan_catalogue_steps, name="plan-catalogue-steps"),
]
