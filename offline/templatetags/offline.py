from django import template

from offline import kinds

register = template.Library()


@register.inclusion_tag("offline/_entry_hooks.html")
def offline_entry(kind, device):
    """Inside an entry form: what the tablet needs to keep this form's entries offline and check them."""
    if not device.position_id:
        return {"config": None}  # a spare on the bench: entered online only (the tablet's kit holds positions)
    handler = kinds.get(kind)
    rules = getattr(handler, "client_rules", None)
    return {"device": device.pk,
            "config": {"kind": kind, "title": handler.title, "target": device.tag, "label": device.tag,
                       "rendered_on": device.today().isoformat(), "rules": rules(device) if rules else {}}}
