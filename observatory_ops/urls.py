from django.contrib import admin
from django.contrib.auth import views as auth_views
from django.urls import include, path

urlpatterns = [
    path("login/", auth_views.LoginView.as_view(), name="login"),
    path("logout/", auth_views.LogoutView.as_view(), name="logout"),
    path("admin/", admin.site.urls),
    path("", include("observatory_ops.registry.urls")),
    path("", include("observatory_ops.logbook.urls")),
    path("", include("observatory_ops.planning.urls")),
    path("", include("observatory_ops.workorders.urls")),
    path("", include("observatory_ops.mirrors.urls")),
]
