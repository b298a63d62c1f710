"""The plant's own pages; quenby/urls.py puts them at their addresses."""
from django.urls import path

from plant import import_views, views

# under /meters/, in the plant namespace
meter_patterns = [
    path("", views.meter_list, name="meter-list"),
    path("import/", import_views.import_register, name="import"),
    path("export.csv", import_views.export_register_csv, name="export-csv"),
    path("export.xlsx", import_views.export_register_xlsx, name="export-xlsx"),
    path("<str:tag>/", views.meter_detail, name="meter-detail"),
    path("<str:tag>/edit/", views.meter_edit, name="meter-edit"),
    path("<str:tag>/swap/", views.position_swap, name="meter-swap"),
]

# at the root, without a namespace
urlpatterns = [
    path("fluids/<id:pk>/edit/", views.fluid_edit, name="fluid-edit"),
    path("devices/", views.device_list, name="device-list"),
    path("devices/<id:pk>/", views.device_detail, name="device-detail"),
    path("devices/<id:pk>/edit/", views.device_edit, name="device-edit"),
]
