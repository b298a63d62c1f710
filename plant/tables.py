import django_tables2 as tables

from plant.models import Meter


class MeterTable(tables.Table):
    tag = tables.Column(linkify=True)
    area = tables.Column(accessor="area__name", verbose_name="Area", order_by=("area__name",))
    site = tables.Column(accessor="area__site__name", verbose_name="Site", order_by=("area__site__name",))
    fluid = tables.Column(accessor="fluid__name", verbose_name="Fluid", order_by=("fluid__name",))

    class Meta:
        model = Meter
        fields = ("tag", "principle", "site", "area", "fluid", "line_size", "status")
        attrs = {"class": "grid"}
