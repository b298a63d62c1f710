import django_filters
from django.db.models import Q

from plant.models import Area, Fluid, Device, Site


class DeviceFilter(django_filters.FilterSet):
    q = django_filters.CharFilter(method="search", label="Tag")
    site = django_filters.ModelChoiceFilter(field_name="position__area__site", queryset=Site.objects.all(), label="Site")
    area = django_filters.ModelChoiceFilter(field_name="position__area", queryset=Area.objects.select_related("site"))
    fluid = django_filters.ModelChoiceFilter(field_name="position__fluid", queryset=Fluid.objects.all())

    class Meta:
        model = Device
        fields = ["q", "site", "area", "principle", "fluid"]

    def search(self, queryset, name, value):
        return queryset.filter(Q(position__tag__icontains=value) | Q(serial__icontains=value))
