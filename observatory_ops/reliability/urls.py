from django.urls import path

from . import views

urlpatterns = [
    path("sites/<slug:slug>/reliability/", views.site_reliability, name="site-reliability"),
]
