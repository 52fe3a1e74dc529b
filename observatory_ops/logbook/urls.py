from django.urls import path

from . import views

urlpatterns = [
    path("subsystems/<int:pk>/service/new/", views.service_log, name="service-log"),
    path("service/<int:pk>/correct/", views.service_correct, name="service-correct"),
    path("subsystems/<int:pk>/readings/new/", views.reading_log, name="reading-log"),
    path("readings/<int:pk>/withdraw/", views.reading_withdraw, name="reading-withdraw"),
    path("sites/<slug:slug>/service-records.csv", views.service_records_csv, name="service-records-csv"),
    path("sites/<slug:slug>/readings.csv", views.readings_csv, name="readings-csv"),
    path("sites/<slug:slug>/nights/", views.nights_list, name="nights-list"),
    path("sites/<slug:slug>/nights/import/", views.nights_import, name="nights-import"),
    path("sites/<slug:slug>/nights.csv", views.nights_csv_download, name="nights-csv"),
    path("sites/<slug:slug>/nights/new/", views.night_log, name="night-log"),
]
