from django.contrib import admin
from django.urls import include, path
from django.views.generic import RedirectView

from plant import views

plant_patterns = (
    [
        path("", views.meter_list, name="meter-list"),
        path("<str:tag>/", views.meter_detail, name="meter-detail"),
    ],
    "plant",
)

urlpatterns = [
    path("", RedirectView.as_view(url="/meters/", permanent=False)),
    path("meters/", include(plant_patterns)),
    path("admin/", admin.site.urls),
]
