import re

from django import template
from django.utils.html import conditional_escape
from django.utils.safestring import mark_safe

register = template.Library()
ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}")


@register.filter
def whole_dates(text):
    """Escape the text and keep each ISO date on one line (a narrow tablet column would break it at a hyphen)."""
    escaped = str(conditional_escape(text))
    return mark_safe(ISO_DATE.sub(lambda m: f'<span class="nowrap">{m.group(0)}</span>', escaped))
