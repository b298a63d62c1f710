from django.urls import path

from reports import views

app_name = "reports"
urlpatterns = [
    path("calibrations/<int:pk>/certificate.pdf", views.certificate_pdf, name="certificate"),
    path("certificates.zip", views.certificates_zip, name="certificates-zip"),
]
