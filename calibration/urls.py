from django.urls import path

from calibration import views

app_name = "calibration"
urlpatterns = [
    path("<int:pk>/", views.event_detail, name="event-detail"),
    path("<int:pk>/sign/", views.sign_event, name="event-sign"),
    path("<int:pk>/countersign/", views.countersign_event, name="event-countersign"),
    path("<int:pk>/correct/", views.correct_event, name="event-correct"),
]
