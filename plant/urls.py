from django.contrib import admin
from django.urls import include, path
from django.views.generic import RedirectView

from calibration import views as calibration_views
from maintenance import views as maintenance_views
from offline import views as offline_views
from plant import accounts, import_views, views

plant_patterns = (
    [
        path("", views.meter_list, name="meter-list"),
        path("import/", import_views.import_register, name="import"),
        path("export.csv", import_views.export_register_csv, name="export-csv"),
        path("export.xlsx", import_views.export_register_xlsx, name="export-xlsx"),
        path("<str:tag>/", views.meter_detail, name="meter-detail"),
        path("<str:tag>/calibrate/", calibration_views.new_calibration, name="meter-calibrate"),
        path("<str:tag>/edit/", views.meter_edit, name="meter-edit"),
        path("<str:tag>/swap/", views.position_swap, name="meter-swap"),
        path("<str:tag>/maintain/", maintenance_views.new_record, name="meter-maintain"),
        path("<str:tag>/tasks/add/", maintenance_views.task_add, name="meter-task-add"),
    ],
    "plant",
)

urlpatterns = [
    path("", RedirectView.as_view(url="/meters/", permanent=False)),
    path("meters/", include(plant_patterns)),
    path("fluids/<id:pk>/edit/", views.fluid_edit, name="fluid-edit"),
    path("devices/", views.device_list, name="device-list"),
    path("devices/<id:pk>/", views.device_detail, name="device-detail"),
    path("devices/<id:pk>/edit/", views.device_edit, name="device-edit"),
    path("devices/<id:pk>/calibrate/", calibration_views.new_bench_calibration, name="device-calibrate"),
    path("calibrations/", include("calibration.urls")),
    path("maintenance/", include("maintenance.urls")),
    path("", include("reports.urls")),
    path("accounts/lockouts/", accounts.lockout_list, name="lockouts"),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
    path("field/", include("offline.urls")),
    path("sw.js", offline_views.service_worker, name="service-worker"),
    path("manifest.webmanifest", offline_views.manifest, name="web-manifest"),
]
