from django import template

from offline import kinds

register = template.Library()


@register.inclusion_tag("offline/_entry_hooks.html")
def offline_entry(kind, meter):
    """Inside an entry form: what the tablet needs to keep this form's entries offline and check them."""
    if not meter.position_id:
        return {"config": None}  # a spare on the bench: entered online only (the tablet's kit holds positions)
    handler = kinds.get(kind)
    rules = getattr(handler, "client_rules", None)
    return {"device": meter.pk,
            "config": {"kind": kind, "title": handler.title, "target": meter.tag, "label": meter.tag,
                       "rendered_on": meter.today().isoformat(), "rules": rules(meter) if rules else {}}}
