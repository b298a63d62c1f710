import json
import uuid

from django.contrib.auth.decorators import login_not_required, permission_required
from django.contrib.staticfiles import finders
from django.db import OperationalError
from django.http import HttpResponse, JsonResponse, QueryDict
from django.middleware.csrf import get_token
from django.shortcuts import render
from django.templatetags.static import static
from django.views.decorators.cache import never_cache
from django.views.decorators.http import require_GET, require_POST

from offline import kinds
from offline.kit import allowed_kinds, due_meters, kit, setting
from plant.models import Area, Site
from plant.params import query_id


@login_not_required
@require_GET
def service_worker(request):
    """The service worker, from the site root so that its scope covers every page."""
    with open(finders.find("offline/sw.js"), encoding="utf-8") as f:
        body = f.read()
    response = HttpResponse(body, content_type="application/javascript; charset=utf-8")
    response["Cache-Control"] = "no-cache"
    return response


@login_not_required
@require_GET
def manifest(request):
    return JsonResponse({
        "name": "Quenby field entry",
        "short_name": "Quenby",
        "start_url": "/field/",
        "scope": "/",
        "display": "standalone",
        "orientation": "portrait",
        "background_color": "#f7f5f0",
        "theme_color": "#0b6e69",
        "icons": [{"src": static("offline/icon.svg"), "sizes": "any", "type": "image/svg+xml"}],
    }, content_type="application/manifest+json")


def _filters(request):
    return query_id(request, "site"), query_id(request, "area")


READ_REGISTER = permission_required("plant.view_device", raise_exception=True)


@READ_REGISTER
def home(request):
    site, area = _filters(request)
    devices = list(due_meters(request.user, site=site, area=area)[: setting("max_meters") + 1])
    limit = setting("max_meters")
    return render(request, "offline/home.html", {
        "meters": devices[:limit], "more": len(devices) > limit, "limit": limit,
        "weeks": setting("weeks_ahead"), "can_enter": bool(allowed_kinds(request.user)),
        "sites": Site.objects.order_by("name"), "areas": Area.objects.select_related("site"),
        "site": site, "area": area,
    })


@READ_REGISTER
def queue(request):
    return render(request, "offline/queue.html", {"can_enter": bool(allowed_kinds(request.user))})


@READ_REGISTER
@never_cache
@require_GET
def kit_list(request):
    site, area = _filters(request)
    devices = due_meters(request.user, site=site, area=area)[: setting("max_meters")]
    return JsonResponse(kit(request.user, devices))


@never_cache
@require_GET
def token(request):
    return JsonResponse({"csrf": get_token(request)})


def _problem(status, message):
    return JsonResponse({"status": "refused", "errors": {"__all__": [message]}}, status=status)


@READ_REGISTER
@require_POST
def send(request):
    """One queued entry: {"kind", "id" (the tablet's uuid), "target", "data": [[name, value], ...]}.

    201 saved, 200 received before (nothing new saved), 422 refused with messages by field, 503 try again.
    """
    try:
        payload = json.loads(request.body)
        kind = kinds.get(payload["kind"])
        client_id = uuid.UUID(str(payload["id"]))
        target = str(payload["target"])
        data = QueryDict(mutable=True)
        for name, value in payload["data"]:
            data.appendlist(str(name), str(value))
    except (ValueError, KeyError, TypeError):
        return _problem(400, "The entry could not be read; it stays on the tablet.")
    if kind is None:
        return _problem(400, "This kind of entry is not known to the server; it stays on the tablet.")
    if kind not in allowed_kinds(request.user):
        return _problem(403, "Your account may not send this kind of entry.")
    try:
        received = kind.receive(request.user, client_id, target, data)
    except kinds.Refused as refused:
        return JsonResponse({"status": "refused", "errors": refused.errors}, status=422)
    except OperationalError as exc:
        if "locked" not in str(exc):
            raise
        return JsonResponse({"status": "busy"}, status=503)  # SQLite refused a second writer: send again
    return JsonResponse({"status": "saved" if received.created else "received before", "url": received.url,
                         "label": received.label}, status=201 if received.created else 200)
