from django.urls import path

from . import views

urlpatterns = [
    path("mirrors/<int:pk>/", views.mirror_detail, name="mirror-detail"),
    path("mirrors/<int:pk>/measurements/new/", views.measurement_log, name="mirror-measurement"),
    path("measurements/<int:pk>/withdraw/", views.measurement_withdraw, name="measurement-withdraw"),
    path("mirrors/<int:pk>/cleanings/new/", views.cleaning_log, name="mirror-cleaning"),
    path("mirrors/<int:pk>/coatings/new/", views.coating_log, name="mirror-coating"),
    path("mirrors/<int:pk>/recoat/", views.recoat_planner, name="mirror-recoat"),
    path("mirrors/<int:pk>/recoat/plan/", views.recoat_plan_create, name="mirror-recoat-plan"),
    path("coating/", views.coating_calculator, name="coating-calculator"),
    path("sites/<slug:slug>/downtime.ics", views.downtime_calendar, name="downtime-ics"),
]
