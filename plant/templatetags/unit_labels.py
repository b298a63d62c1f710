"""`{{ code|unit_label }}`: a flow unit's label (m3/h -> m³/h; a legacy spelling by its code's label)."""
from django import template

from plant.units import label_for

register = template.Library()


@register.filter
def unit_label(value):
    return label_for(value)
