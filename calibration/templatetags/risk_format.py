"""`{{ p|percent }}`: a probability as a percentage for pages and certificates (issue 31)."""
from django import template

register = template.Library()


@register.filter
def percent(value):
    """0.9745 -> "97.4 %"; above 99.9 % -> "> 99.9 %"; below 0.1 % -> two significant digits ("0.0012 %")."""
    if value is None or value == "":
        return ""
    try:
        p = float(value) * 100
    except (TypeError, ValueError):
        return value
    if p > 99.95:
        return "> 99.9 %"
    if p < 0.1:
        return f"{p:.2g} %"
    return f"{p:.1f} %"
