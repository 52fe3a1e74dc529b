from django.contrib import admin
from django.contrib.auth import views as auth_views
from django.http import HttpResponse
from django.urls import include, path
from django.views.generic import RedirectView

from observatory_ops.access.login import LimitedLoginView


def alive(request):
    """The address a page asks, before sending a form, whether the server answers at all (static/forms.js): nothing
    read, nothing built, nobody signed in needed."""
    return HttpResponse(status=204)


urlpatterns = [
    path("alive/", alive, name="alive"),
    path("login/", LimitedLoginView.as_view(), name="login"),
    path("logout/", auth_views.LogoutView.as_view(), name="logout"),
    # The admin signs in through the same limited sign-in page as everyone else.
    path("admin/login/", RedirectView.as_view(url="/login/?next=/admin/", query_string=False)),
    path("admin/", admin.site.urls),
    path("", include("observatory_ops.registry.urls")),
    path("", include("observatory_ops.logbook.urls")),
    path("", include("observatory_ops.planning.urls")),
    path("", include("observatory_ops.workorders.urls")),
    path("", include("observatory_ops.mirrors.urls")),
    path("", include("observatory_ops.reliability.urls")),
    path("", include("observatory_ops.api.urls")),
    path("", include("observatory_ops.archive.urls")),
]
