"""The plant's own pages; quenby/urls.py puts them at their addresses."""
from django.urls import path, re_path

from plant import import_views, views

# under /positions/, in the plant namespace
position_patterns = [
    path("", views.position_list, name="position-list"),
    path("import/", import_views.import_register, name="import"),
    path("export.csv", import_views.export_register_csv, name="export-csv"),
    path("export.xlsx", import_views.export_register_xlsx, name="export-xlsx"),
    path("<str:tag>/", views.position_detail, name="position-detail"),
    path("<str:tag>/edit/", views.position_edit, name="position-edit"),
    path("<str:tag>/swap/", views.position_swap, name="position-swap"),
]

# at the root, without a namespace
urlpatterns = [
    # every address the position pages had before, the register's import and exports with them
    re_path(r"^meters/(?P<rest>.*)\Z", views.meters_moved, name="meters-moved"),
    path("fluids/<id:pk>/edit/", views.fluid_edit, name="fluid-edit"),
    path("devices/", views.device_list, name="device-list"),
    path("devices/<id:pk>/", views.device_detail, name="device-detail"),
    path("devices/<id:pk>/edit/", views.device_edit, name="device-edit"),
]
