from django.urls import path

from maintenance import stats_views, views, worklist_views

app_name = "maintenance"
urlpatterns = [
    path("<id:pk>/", views.record_detail, name="record-detail"),
    path("<id:pk>/sign/", views.sign_record, name="record-sign"),
    path("photos/<id:pk>/", views.photo, name="photo"),
    path("tasks/<id:pk>/edit/", views.task_edit, name="task-edit"),
    path("worklist/", worklist_views.work_list, name="worklist"),
    path("worklist.pdf", worklist_views.work_list_pdf, name="worklist-pdf"),
    path("worklist.csv", worklist_views.work_list_csv, name="worklist-csv"),
    path("calendar/", worklist_views.calendar_links, name="calendar"),
    path("calendar/token/", worklist_views.calendar_token, name="calendar-token"),
    path("calendar/<str:token>/area-<id:area_id>.ics", worklist_views.calendar_feed, name="calendar-feed"),
    path("stats/", stats_views.maintenance_stats, name="stats"),
    path("stats.csv", stats_views.maintenance_stats_csv, name="stats-csv"),
    path("stats.xlsx", stats_views.maintenance_stats_xlsx, name="stats-xlsx"),
]
