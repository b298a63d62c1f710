from django import template
from django.utils import timezone

from offline import kinds
from offline.rules import entry_rules

register = template.Library()


@register.inclusion_tag("offline/_entry_hooks.html")
def offline_entry(kind, meter):
    """Inside an entry form: what the tablet needs to keep this form's entries offline and check them."""
    assert kinds.get(kind) is not None, kind
    return {"config": {"kind": kind, "target": meter.tag, "label": meter.tag,
                       "rendered_on": timezone.localdate().isoformat(),
                       "rules": entry_rules(meter) if kind == "calibration" else {}}}
