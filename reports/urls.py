from django.urls import path

from reports import review_views, stats_views, views

app_name = "reports"
urlpatterns = [
    path("review/", review_views.weekly_review, name="review"),
    path("stats/", stats_views.fleet_stats, name="stats"),
    path("stats.csv", stats_views.fleet_stats_csv, name="stats-csv"),
    path("stats.xlsx", stats_views.fleet_stats_xlsx, name="stats-xlsx"),
    path("calibrations/<id:pk>/certificate.pdf", views.certificate_pdf, name="certificate"),
    path("calibrations/<id:pk>/certificate.xml", views.certificate_xml, name="certificate-xml"),
    path("certificates.zip", views.certificates_zip, name="certificates-zip"),
]
