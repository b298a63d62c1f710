from django import template
from django.utils import timezone

from offline import kinds

register = template.Library()


@register.inclusion_tag("offline/_entry_hooks.html")
def offline_entry(kind, meter):
    """Inside an entry form: what the tablet needs to keep this form's entries offline and check them."""
    handler = kinds.get(kind)
    rules = getattr(handler, "client_rules", None)
    return {"config": {"kind": kind, "title": handler.title, "target": meter.tag, "label": meter.tag,
                       "rendered_on": timezone.localdate().isoformat(), "rules": rules(meter) if rules else {}}}
