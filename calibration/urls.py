from django.urls import path

from calibration import standard_views, views

app_name = "calibration"
urlpatterns = [
    path("<id:pk>/", views.event_detail, name="event-detail"),
    path("<id:pk>/sign/", views.sign_event, name="event-sign"),
    path("<id:pk>/countersign/", views.countersign_event, name="event-countersign"),
    path("<id:pk>/correct/", views.correct_event, name="event-correct"),
    path("<id:pk>/edit/", views.edit_draft, name="event-edit"),
    path("<id:pk>/discard/", views.discard_draft, name="event-discard"),
    path("standards/", standard_views.standard_list, name="standard-list"),
    path("standards/<id:pk>/", standard_views.standard_detail, name="standard-detail"),
    path("standards/<id:pk>/dcc/", standard_views.dcc_upload, name="standard-dcc-upload"),
    path("standards/<id:pk>/dcc/<id:dcc>/", standard_views.dcc_review, name="standard-dcc"),
    path("standards/<id:pk>/dcc/<id:dcc>/file.xml", standard_views.dcc_file, name="standard-dcc-file"),
]
