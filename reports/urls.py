from django.urls import path

from reports import review_views, views

app_name = "reports"
urlpatterns = [
    path("review/", review_views.weekly_review, name="review"),
    path("calibrations/<int:pk>/certificate.pdf", views.certificate_pdf, name="certificate"),
    path("certificates.zip", views.certificates_zip, name="certificates-zip"),
]
