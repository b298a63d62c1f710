"""Number formatting for printed certificates."""
from django import template

register = template.Library()


@register.filter
def num(value, digits=6):
    """A float without trailing zeros (40.0 -> "40", 0.5 -> "0.5"), to `digits` significant digits."""
    if value is None or value == "":
        return ""
    try:
        return f"{float(value):.{int(digits)}g}"
    except (TypeError, ValueError):
        return value
