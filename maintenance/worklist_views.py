"""The work list (seven days from a chosen date) (page, PDF, CSV) and the iCalendar feeds of due work per area behind a per-user token."""
import datetime as dt

from django import forms
from django.contrib.auth.decorators import login_not_required, permission_required
from django.http import Http404, HttpResponse
from django.shortcuts import redirect, render
from django.template.loader import render_to_string
from django.urls import reverse
from django.utils import timezone
from django.views.decorators.http import require_POST

from maintenance import worklist
from maintenance.models import CalendarToken
from plant import localtime, spreadsheet
from plant.models import Area, Site

FEED_WEEKS = 8  # the feed holds what is overdue and what falls due in the next eight weeks


class WorkListForm(forms.Form):
    start = forms.DateField(label="From", required=False,
                            widget=forms.DateInput(attrs={"type": "date"}, format="%Y-%m-%d"),
                            error_messages={"invalid": "Enter a date, e.g. 2026-12-07."})
    site = forms.ModelChoiceField(queryset=Site.objects.order_by("name"), required=False, empty_label="all sites")
    area = forms.ModelChoiceField(queryset=Area.objects.select_related("site"), required=False,
                                  empty_label="all areas")


def _work(request):
    form = WorkListForm(request.GET or None)
    if form.is_bound and not form.is_valid():
        return form, None
    data = form.cleaned_data if form.is_bound else {}
    # the date at the site in scope (an area's site); the whole plant: the plant's date
    site = data.get("site") or (data["area"].site if data.get("area") else None)
    today = site.today() if site is not None else localtime.today()
    first, last = worklist.span(data.get("start") or today)
    items = worklist.rows(last, site=data.get("site"), area=data.get("area"), start=first)
    return form, {"first": first, "last": last, "today": today, "items": items,
                  "groups": worklist.group(items), "query": request.GET.urlencode()}


@permission_required("maintenance.view_maintenancetask", raise_exception=True)
def work_list(request):
    form, work = _work(request)
    return render(request, "maintenance/worklist.html", {"form": form, **(work or {})},
                  status=400 if work is None else 200)


@permission_required("maintenance.view_maintenancetask", raise_exception=True)
def work_list_pdf(request):
    form, work = _work(request)
    if work is None:
        return _bad(form)
    from weasyprint import HTML  # heavy: only when printing

    html = render_to_string("maintenance/worklist_pdf.html", {**work, "product": "Quenby",
                                                              "printed": timezone.localtime()})
    response = HttpResponse(HTML(string=html).write_pdf(), content_type="application/pdf")
    response["Content-Disposition"] = f'attachment; filename="work-list-{work["first"].isoformat()}.pdf"'
    return response


CSV_COLUMNS = ["site", "area", "walk order", "tag", "serial", "kind", "work", "due date", "days overdue", "principle",
               "fluid", "reference standards", "why", "draft"]


@permission_required("maintenance.view_maintenancetask", raise_exception=True)
def work_list_csv(request):
    form, work = _work(request)
    if work is None:
        return _bad(form)
    rows = [CSV_COLUMNS] + [
        [item.site, item.area, "" if item.walk == worklist.NO_WALK_POSITION else item.walk, item.tag, item.serial,
         item.kind, item.work, item.due.isoformat() if item.due else "never calibrated",
         item.overdue_days(work["today"]), item.principle, item.fluid, "; ".join(item.standards), item.reason,
         request.build_absolute_uri(reverse("calibration:event-detail", args=[item.draft_id]))
         if item.draft_waiting else ""]
        for item in work["items"]]
    response = HttpResponse(spreadsheet.csv_text(rows), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="work-list-{work["first"].isoformat()}.csv"'
    return response


def _bad(form):
    text = "; ".join(f"{field}: {' '.join(errors)}" for field, errors in form.errors.items())
    return HttpResponse(f"Bad filter: {text}", status=400, content_type="text/plain; charset=utf-8")


# iCalendar ---------------------------------------------------------------------------------------------
@permission_required("maintenance.view_maintenancetask", raise_exception=True)
def calendar_links(request):
    token = CalendarToken.objects.filter(user=request.user).first()
    areas = Area.objects.select_related("site").order_by("site__name", "name")
    links = []
    if token:
        links = [(area, request.build_absolute_uri(reverse("maintenance:calendar-feed", args=[token.token, area.pk])))
                 for area in areas]
    return render(request, "maintenance/calendar.html", {"token": token, "links": links})


@require_POST
@permission_required("maintenance.view_maintenancetask", raise_exception=True)
def calendar_token(request):
    """Create a new secret (revoking the old one) or, with action=revoke, revoke it."""
    CalendarToken.objects.filter(user=request.user).delete()
    if request.POST.get("action") != "revoke":
        CalendarToken.objects.create(user=request.user)
    return redirect("maintenance:calendar")


@login_not_required  # a calendar application cannot log in: the secret token in the URL stands for the user
def calendar_feed(request, token, area_id):
    holder = CalendarToken.objects.select_related("user").filter(token=token).first()
    if holder is None or not holder.user.is_active or not holder.user.has_perm("maintenance.view_maintenancetask"):
        raise Http404("No such calendar.")
    try:
        area = Area.objects.select_related("site").get(pk=area_id)
    except Area.DoesNotExist:
        raise Http404("No such area.")
    today = area.site.today()
    items = worklist.rows(today + dt.timedelta(weeks=FEED_WEEKS), area=area)
    response = HttpResponse(feed_ics(area, items, today, request.get_host()), content_type="text/calendar; charset=utf-8")
    response["Content-Disposition"] = f'inline; filename="area-{area.pk}.ics"'
    response["Cache-Control"] = "private, no-store"
    return response


CAUTION = ("Before you start: permit to work; isolate, depressurise and drain where the work needs it; check for "
           "hazardous fluids and wear the PPE they call for. Follow your site's procedures, local codes and licensed "
           "practice.")


def feed_ics(area, items, today, host) -> bytes:
    """One all-day event per item on its due date; overdue and never-done work on today, marked overdue."""
    from icalendar import Calendar, Event

    calendar = Calendar()
    calendar.add("prodid", "-//Quenby//due work//EN")
    calendar.add("version", "2.0")
    calendar.add("x-wr-calname", f"Due work: {area.site.name} / {area.name}")
    stamp = timezone.now()
    for item in items:
        late = item.due is None or item.due < today
        day = today if late else item.due
        event = Event()
        kind = item.kind.lower()
        event.add("uid", f"{kind}-{item.tag}-{item.work[:40]}@{host}".replace(" ", "-"))
        event.add("dtstamp", stamp)
        event.add("dtstart", day)
        event.add("dtend", day + dt.timedelta(days=1))
        event.add("summary", f"{'OVERDUE · ' if late else ''}{item.tag} · {item.work} ({kind})")
        event.add("location", f"{item.site} / {item.area}")
        event.add("description", f"{item.when(today)}. {item.principle} on {item.fluid}; {item.reason}.\n{CAUTION}")
        calendar.add_component(event)
    return calendar.to_ical()
