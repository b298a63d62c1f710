"""Login throttling (django-axes) as the project uses it: the client's address, the lockouts now in force,
and the administrator's unlock page (/accounts/lockouts/).

The rules are in quenby/settings.py (AXES_*): a number of failed logins for one account, or from one
address, blocks logging in there for the cool-off time; a successful login clears the account's count.
"""
from __future__ import annotations

from django.conf import settings
from django.contrib import messages
from django.contrib.auth.decorators import permission_required
from django.db.models import Max, Sum
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods

from axes.models import AccessAttempt
from axes.utils import reset


def client_ip(request) -> str | None:
    """The client's address: REMOTE_ADDR, or behind TRUSTED_PROXY_COUNT reverse proxies the address the
    outermost trusted proxy saw, counted from the right of X-Forwarded-For (entries further left are
    whatever the client sent and cannot be trusted)."""
    proxies = getattr(settings, "TRUSTED_PROXY_COUNT", 0)
    remote = request.META.get("REMOTE_ADDR") or None
    if proxies <= 0:
        return remote
    forwarded = [part.strip() for part in request.META.get("HTTP_X_FORWARDED_FOR", "").split(",") if part.strip()]
    if len(forwarded) < proxies:
        return remote
    return forwarded[-proxies]


def _recent_attempts():
    attempts = AccessAttempt.objects.all()
    if settings.AXES_COOLOFF_TIME:
        attempts = attempts.filter(attempt_time__gte=timezone.now() - settings.AXES_COOLOFF_TIME)
    return attempts


def lockouts():
    """(accounts, addresses) locked now: dicts of the name or address, its failures and the last attempt."""
    attempts = _recent_attempts()
    limit = settings.AXES_FAILURE_LIMIT

    def locked(field):
        return list(attempts.exclude(**{f"{field}__isnull": True}).values(field)
                    .annotate(failures=Sum("failures_since_start"), last=Max("attempt_time"))
                    .filter(failures__gte=limit).order_by(field))

    return locked("username"), locked("ip_address")


@require_http_methods(["GET", "POST"])
@permission_required("axes.delete_accessattempt", raise_exception=True)
def lockout_list(request):
    """Administrators see the accounts and addresses locked out now and unlock them."""
    if request.method == "POST":
        username, address = request.POST.get("username", ""), request.POST.get("ip_address", "")
        if username:
            count = reset(username=username)
            messages.success(request, f"Account {username} unlocked ({count} failed-login record(s) cleared).")
        elif address:
            count = reset(ip=address)
            messages.success(request, f"Address {address} unlocked ({count} failed-login record(s) cleared).")
        else:
            messages.error(request, "Say which account or address to unlock.")
        return redirect("lockouts")
    accounts, addresses = lockouts()
    return render(request, "registration/lockouts.html", {
        "accounts": accounts, "addresses": addresses, "limit": settings.AXES_FAILURE_LIMIT,
        "cooloff_minutes": int(settings.AXES_COOLOFF_TIME.total_seconds() // 60) if settings.AXES_COOLOFF_TIME else None,
    })


def lockout_response(request, original_response=None, credentials=None):
    """The page a locked-out login gets (HTTP 429): what happened, for how long, and who can lift it."""
    minutes = int(settings.AXES_COOLOFF_TIME.total_seconds() // 60) if settings.AXES_COOLOFF_TIME else None
    return render(request, "registration/locked_out.html", {
        "failure_limit": settings.AXES_FAILURE_LIMIT, "cooloff_minutes": minutes,
    }, status=settings.AXES_HTTP_RESPONSE_CODE)
