from django.urls import path

from calibration import views

app_name = "calibration"
urlpatterns = [
    path("<id:pk>/", views.event_detail, name="event-detail"),
    path("<id:pk>/sign/", views.sign_event, name="event-sign"),
    path("<id:pk>/countersign/", views.countersign_event, name="event-countersign"),
    path("<id:pk>/correct/", views.correct_event, name="event-correct"),
    path("<id:pk>/edit/", views.edit_draft, name="event-edit"),
    path("<id:pk>/discard/", views.discard_draft, name="event-discard"),
]
