"""Our own page when the database fails in the middle of a save (sign-off, countersignature, import).

Those saves run in one transaction, so a database that fails under them (restarted, unreachable, out of disk)
leaves nothing half written: the page says so, with status 503 (try again later), instead of a bare
"Server Error (500)". It is rendered without the request, so neither it nor the base template's navigation
reads the database or the signed-in user again.
"""
import functools
import logging

from django.db import DatabaseError, InterfaceError
from django.http import HttpResponse
from django.template.loader import render_to_string
from django.urls import reverse
from django.utils import timezone

# django.db.InterfaceError is not a DatabaseError: a closed connection raises it
DATABASE_FAILURES = (DatabaseError, InterfaceError)

logger = logging.getLogger(__name__)


def nothing_saved_page(what, back=None):
    """Decorate a view that saves: a database failure inside it gives the "nothing was saved" page.

    `what` names the action in the page's sentence ("sign-off"); `back` is the URL name of the page to try
    again from, reversed with the view's own URL arguments."""

    def decorate(view):
        @functools.wraps(view)
        def wrapper(request, *args, **kwargs):
            try:
                return view(request, *args, **kwargs)
            except DATABASE_FAILURES:
                logger.exception("Database failure during %s at %s; the transaction was rolled back", what,
                                 request.path)
                return database_failure_response(what, reverse(back, args=args, kwargs=kwargs) if back else "/")
        return wrapper

    return decorate


def database_failure_response(what, back_url):
    html = render_to_string("database_failure.html", {"what": what, "back_url": back_url,
                                                      "when": timezone.localtime()})
    response = HttpResponse(html, status=503)
    response["Retry-After"] = "60"
    return response
