"""What a technician's tablet keeps for offline work: the entry pages of the meters due soon, and nothing else
of the register (each page is one the technician may open online)."""
import datetime as dt
from functools import reduce
from operator import or_

from django.conf import settings
from django.db.models import F, Q
from django.templatetags.static import static
from django.urls import reverse

from offline import kinds
from plant import localtime
from plant.models import Device, Site

DEFAULTS = {"weeks_ahead": 6, "max_meters": 200}


def setting(name):
    return getattr(settings, "OFFLINE_KIT", {}).get(name, DEFAULTS[name])


def allowed_kinds(user):
    if not user.has_perm("plant.view_device"):
        return []
    return [k for k in kinds.all_kinds() if user.has_perm(k.permission)]


def due_meters(user, site=None, area=None, today=None):
    """In-service meters due (or overdue, or never calibrated) within the coming weeks, most urgent first."""
    if not allowed_kinds(user):
        return Device.objects.none()
    weeks = dt.timedelta(weeks=setting("weeks_ahead"))
    devices = (Device.objects.select_related("position__area__site")
              .filter(status=Device.Status.IN_SERVICE, position__isnull=False)
              .filter(_due_by(today, weeks) | Q(next_due_date__isnull=True)))
    if site:
        devices = devices.filter(position__area__site_id=site)
    if area:
        devices = devices.filter(position__area_id=area)
    return devices.order_by(F("next_due_date").asc(nulls_first=True), "position__tag")  # never calibrated first


def _due_by(today, weeks):
    """Due within ``weeks`` of today, today taken at each position's site (sites that share a date grouped)."""
    if today is not None:
        return Q(next_due_date__lte=today + weeks)
    sites_by_date = {}
    for site in Site.objects.only("pk", "time_zone"):
        sites_by_date.setdefault(site.today(), []).append(site.pk)
    if len(sites_by_date) <= 1:  # one date everywhere: no condition on the site
        return Q(next_due_date__lte=next(iter(sites_by_date), localtime.today()) + weeks)
    return reduce(or_, (Q(position__area__site__in=pks, next_due_date__lte=day + weeks)
                        for day, pks in sites_by_date.items()))


def kit(user, devices):
    """The URLs the tablet stores: the offline pages, the assets they need, each kind's entry pages."""
    pages = [reverse("offline:home"), reverse("offline:queue")]
    for kind in allowed_kinds(user):
        pages.extend(kind.pages(user, devices))
    assets = [static("site.css"), static("offline/field.js")]
    return {"owner": str(user.pk), "pages": pages, "assets": assets}
