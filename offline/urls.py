from django.urls import path

from offline import views

app_name = "offline"
urlpatterns = [
    path("", views.home, name="home"),
    path("queue/", views.queue, name="queue"),
    path("kit.json", views.kit_list, name="kit"),
    path("token.json", views.token, name="token"),
    path("send/", views.send, name="send"),
]
