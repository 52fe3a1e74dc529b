from django.urls import path

from . import views

urlpatterns = [
    path("", views.home, name="home"),
    path("sites/<slug:slug>/", views.site_dashboard, name="site-dashboard"),
    path("sites/<slug:slug>/telescopes/<int:pk>/register.json", views.telescope_register, name="telescope-register"),
    path("subsystems/<int:pk>/", views.subsystem_detail, name="subsystem-detail"),
    path("subsystems/<int:pk>/retire/", views.subsystem_retire, name="subsystem-retire"),
]
