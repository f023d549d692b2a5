"""URL map: tablet pages under /floor/, engineering under /engineering/, supervisor and
quality pages under /board/ and /quality/, the API under /api/v1/."""

from django.conf import settings
from django.contrib import admin
from django.urls import include, path, re_path
from drf_spectacular.views import SpectacularAPIView, SpectacularSwaggerSplitView

from shopfloor import views

urlpatterns = [
    path("", views.home, name="home"),
    path("healthz", views.healthz, name="healthz"),
    path("display/theme/", views.set_theme, name="theme"),
    # Before admin.site.urls: the admin login behind the sign-in throttle and lockout.
    path("admin/login/", views.admin_login, name="admin_login"),
    path("admin/", admin.site.urls),
    path("floor/", include("shopfloor.floor.urls")),
    path("engineering/", include("routing.urls")),
    path("jobs/", include("shopfloor.orders.urls")),
    path("lab/", include("shopfloor.chemistry.urls")),
    path("", include("shopfloor.quality.urls")),
    path("planning/", include("shopfloor.planning.urls")),
    path("shipping/", include("shopfloor.shipping.urls")),
    path("api/v1/", include("shopfloor.api_urls")),
    # Anything else under /api/ (a negative id, a typo) is the API's JSON 404, also in DEBUG.
    re_path(r"^api/v1/", views.api_not_found, name="api-not-found"),
    path("api/schema/", SpectacularAPIView.as_view(), name="schema"),
    path("api/docs/", SpectacularSwaggerSplitView.as_view(url_name="schema"), name="api-docs"),
]

if settings.BENCH_ENDPOINTS:
    from bench.bare import BareInsert

    urlpatterns.append(path("bench/bare/", BareInsert.as_view()))

handler403 = "shopfloor.views.forbidden"
handler404 = "shopfloor.views.not_found"
