from django.apps import AppConfig


class PlantConfig(AppConfig):
    name = "plant"
    verbose_name = "Plant register"

    def ready(self):
        from django.urls import register_converter

        from plant.params import IdConverter

        # `<id:pk>` in every app's URLs (plant.params): an odd id is a 404 on every database, never a crash
        register_converter(IdConverter, "id")
