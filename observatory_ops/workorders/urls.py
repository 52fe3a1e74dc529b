from django.urls import path

from . import views

urlpatterns = [
    path("workorders/", views.work_order_list, name="workorder-list"),
    path("workorders.csv", views.work_orders_csv, name="workorder-list-csv"),
    path("workorders/from-due/", views.work_order_from_due, name="workorder-from-due"),
    path("workorders/<int:pk>/", views.work_order_detail, name="workorder-detail"),
    path("workorders/<int:pk>/edit/", views.work_order_edit, name="workorder-edit"),
    path("workorders/<int:pk>/move/<slug:action>/", views.work_order_move, name="workorder-move"),
    path("workorders/<int:pk>/hazards/", views.work_order_hazards_update, name="workorder-hazards-update"),
    path("workorders/<int:pk>/finish/", views.work_order_finish, name="workorder-finish"),
    path("workorders/<int:pk>/tick/", views.work_order_tick, name="workorder-tick"),
    path("workorders/<int:pk>/lift/", views.work_order_lift, name="workorder-lift"),
    path("workorders/<int:pk>/parts/", views.work_order_part_add, name="workorder-part-add"),
    path("workorders/<int:pk>/pdf/", views.work_order_pdf, name="workorder-pdf"),
    path("sites/<slug:slug>/workorders/new/", views.work_order_ad_hoc, name="workorder-ad-hoc"),
    path("sites/<slug:slug>/workorders/batch.pdf", views.work_order_batch_pdf, name="workorder-batch-pdf"),
    path("sites/<slug:slug>/parts/", views.part_list, name="part-list"),
    path("sites/<slug:slug>/parts/used.csv", views.parts_used_csv, name="parts-used-csv"),
    path("sites/<slug:slug>/parts/<int:pk>/count/", views.part_count, name="part-count"),
]
