from django.urls import path

from . import views

urlpatterns = [
    path("history/<str:label>/record/<int:pk>/", views.history, name="history"),
]
