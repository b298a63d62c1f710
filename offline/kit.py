"""What a technician's tablet keeps for offline work: the entry pages of the meters due soon, and nothing else
of the register (each page is one the technician may open online)."""
import datetime as dt

from django.conf import settings
from django.db.models import F, Q
from django.templatetags.static import static
from django.urls import reverse
from django.utils import timezone

from offline import kinds
from plant.models import Meter

DEFAULTS = {"weeks_ahead": 6, "max_meters": 200}


def setting(name):
    return getattr(settings, "OFFLINE_KIT", {}).get(name, DEFAULTS[name])


def allowed_kinds(user):
    if not user.has_perm("plant.view_meter"):
        return []
    return [k for k in kinds.all_kinds() if user.has_perm(k.permission)]


def due_meters(user, site=None, area=None, today=None):
    """In-service meters due (or overdue, or never calibrated) within the coming weeks, most urgent first."""
    if not allowed_kinds(user):
        return Meter.objects.none()
    today = today or timezone.localdate()
    horizon = today + dt.timedelta(weeks=setting("weeks_ahead"))
    meters = (Meter.objects.select_related("position__area__site")
              .filter(status=Meter.Status.IN_SERVICE, position__isnull=False)
              .filter(Q(next_due_date__lte=horizon) | Q(next_due_date__isnull=True)))
    if site:
        meters = meters.filter(position__area__site_id=site)
    if area:
        meters = meters.filter(position__area_id=area)
    return meters.order_by(F("next_due_date").asc(nulls_first=True), "position__tag")  # never calibrated first


def kit(user, meters):
    """The URLs the tablet stores: the offline pages, the assets they need, each kind's entry pages."""
    pages = [reverse("offline:home"), reverse("offline:queue")]
    for kind in allowed_kinds(user):
        pages.extend(kind.pages(user, meters))
    assets = [static("site.css"), static("offline/field.js")]
    return {"owner": str(user.pk), "pages": pages, "assets": assets}
