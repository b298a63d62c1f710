from django.urls import path

app_name = "reports"
urlpatterns = []
