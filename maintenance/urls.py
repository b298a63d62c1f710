from django.urls import path

from maintenance import views

app_name = "maintenance"
urlpatterns = [
    path("<int:pk>/", views.record_detail, name="record-detail"),
    path("<int:pk>/sign/", views.sign_record, name="record-sign"),
    path("photos/<int:pk>/", views.photo, name="photo"),
    path("tasks/<int:pk>/edit/", views.task_edit, name="task-edit"),
]
