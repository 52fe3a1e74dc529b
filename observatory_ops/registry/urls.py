from django.urls import path

from . import views

urlpatterns = [
    path("", views.home, name="home"),
    path("sites/<slug:slug>/", views.site_dashboard, name="site-dashboard"),
    path("subsystems/<int:pk>/", views.subsystem_detail, name="subsystem-detail"),
    path("subsystems/<int:pk>/retire/", views.subsystem_retire, name="subsystem-retire"),
]
