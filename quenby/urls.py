"""The site's addresses: each app's pages, put together here, the one place that may import every app."""
from django.contrib import admin
from django.urls import include, path, re_path
from django.views.generic import RedirectView

from calibration import views as calibration_views
from maintenance import views as maintenance_views
from offline import views as offline_views
from plant import accounts
from plant import urls as plant_urls

# a position's pages that other apps serve sit under the position's address, in the plant namespace
plant_patterns = (
    plant_urls.position_patterns
    + [
        path("<str:tag>/calibrate/", calibration_views.new_calibration, name="position-calibrate"),
        path("<str:tag>/maintain/", maintenance_views.new_record, name="position-maintain"),
        path("<str:tag>/tasks/add/", maintenance_views.task_add, name="position-task-add"),
    ],
    "plant",
)

urlpatterns = [
    path("", RedirectView.as_view(pattern_name="plant:position-list", permanent=False)),
    path("positions/", include(plant_patterns)),
    *plant_urls.urlpatterns,
    path("devices/<id:pk>/calibrate/", calibration_views.new_bench_calibration, name="device-calibrate"),
    path("calibrations/", include("calibration.urls")),
    path("maintenance/", include("maintenance.urls")),
    path("", include("reports.urls")),
    path("accounts/lockouts/", accounts.lockout_list, name="lockouts"),
    path("accounts/", include("django.contrib.auth.urls")),
    # the admin pages of the device model from before it was renamed Device (Meter)
    re_path(r"^admin/plant/(?P<historical>(historical)?)meter/(?P<rest>.*)$",
            RedirectView.as_view(url="/admin/plant/%(historical)sdevice/%(rest)s", permanent=True, query_string=True)),
    path("admin/", admin.site.urls),
    path("field/", include("offline.urls")),
    path("sw.js", offline_views.service_worker, name="service-worker"),
    path("manifest.webmanifest", offline_views.manifest, name="web-manifest"),
]
