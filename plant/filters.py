import django_filters
from django.db.models import Q

from plant.models import Area, Fluid, Meter, Site


class MeterFilter(django_filters.FilterSet):
    q = django_filters.CharFilter(method="search", label="Tag")
    site = django_filters.ModelChoiceFilter(field_name="area__site", queryset=Site.objects.all(), label="Site")
    area = django_filters.ModelChoiceFilter(queryset=Area.objects.select_related("site"))
    fluid = django_filters.ModelChoiceFilter(queryset=Fluid.objects.all())

    class Meta:
        model = Meter
        fields = ["q", "site", "area", "principle", "fluid", "status"]

    def search(self, queryset, name, value):
        return queryset.filter(Q(tag__icontains=value) | Q(serial__icontains=value))
