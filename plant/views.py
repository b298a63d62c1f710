from django.contrib import messages
from django.contrib.auth.decorators import permission_required
from django.db import transaction
from django.db.models import F
from django.http import HttpResponsePermanentRedirect
from django.shortcuts import get_object_or_404, redirect, render
from django.urls import reverse
from django.utils.encoding import escape_uri_path

from plant import installations, risk, sections
from plant.params import configure_table
from plant.forms import FluidForm, DeviceForm, PositionForm, SwapForm
from plant.models import Fluid, Installation, Device, Position
from plant.filters import DeviceFilter
from plant.tables import DeviceTable


@permission_required("plant.view_device", raise_exception=True)
def position_list(request):
    """The register: the positions with the device installed at each (its due date, drift, risk)."""
    queryset = Device.objects.filter(position__isnull=False).select_related("position__area__site", "position__fluid")
    meter_filter = DeviceFilter(request.GET, queryset=queryset)
    can_calibrate = request.user.has_perm("calibration.add_calibrationevent")
    table = DeviceTable(meter_filter.qs, exclude=() if can_calibrate else ("calibrate",))
    configure_table(request, table, per_page=50)
    return render(request, "plant/position_list.html", {"filter": meter_filter, "table": table})


POSITION_RELATED = ("position__area__site", "position__fluid")


def _device_context(device):
    """What the page shows of a device: its risk at the duty served, due date, drift, records, moves."""
    findings = device.findings()
    factor = min((f.interval_factor for f in findings), default=1.0)
    return {
        "device": device,
        "findings": findings,
        "factor": factor,
        "deciding": [f for f in findings if f.interval_factor == factor and factor < 1.0],
        "recommendation": risk.recommendation(findings),
        "duties": device.duties.select_related("area__site", "fluid", "position"),
        "due": device.due_rationale or {},
        "calibrations": device.calibrations.select_related("position")[:20],
        "audit": _audit_rows(device),
        "sections": sections.render_context(device),  # what calibration, maintenance and reports add
        "device_moves": device.installations.select_related("position", "installed_by", "removed_by", "unfit_accepted_by"),
    }


@permission_required("plant.view_device", raise_exception=True)
def position_detail(request, tag):
    """A position's page (URLs by tag): the position, the device installed there now, and its history."""
    position = get_object_or_404(Position.objects.select_related("area__site", "fluid"), tag=tag)
    device = position.installed_device()
    moves = list(position.installations.select_related("device", "installed_by", "removed_by", "unfit_accepted_by"))
    if device is not None:
        context = _device_context(device)
    else:
        context = {"device": None, "audit": _audit_rows(None, position), "last_move": moves[0] if moves else None,
                   "by_principle": _findings_by_principle(position, moves[0].device if moves else None)}
    context.update({
        "position": position,
        "duty_fluid": position.fluid,
        "position_moves": moves,
        "fit_warnings": installations.fit_warnings(device, position) if device is not None else [],
    })
    return render(request, "plant/position_detail.html", context)


def _findings_by_principle(position, last_device):
    """A position with no device: its findings depend on the principle of the device still to be chosen, so the
    page shows what a device of each principle would meet here (the last device's own principle marked)."""
    labels = dict(Device.Principle.choices)
    last = last_device.principle if last_device is not None else None
    return [{"principle": principle, "label": labels.get(principle, principle), "findings": findings,
             "factor": risk.interval_factor(findings),
             "risk": risk.SEVERITY_WORDS.get(risk.worst_severity(findings), "no finding"),
             "last": principle == last}
            for principle, findings in position.assess_each_principle()]


@permission_required("plant.view_device", raise_exception=True)
def device_detail(request, pk):
    """A device's own page, wherever it is: installed (its position's page says the same), or a spare."""
    device = get_object_or_404(Device.objects.select_related(*POSITION_RELATED), pk=pk)
    context = _device_context(device)
    position = device.position if device.position_id else None
    context.update({"position": position, "duty_fluid": position.fluid if position is not None else device.fluid})
    return render(request, "plant/device_detail.html", context)


@permission_required("plant.view_device", raise_exception=True)
def device_list(request):
    """Devices not installed anywhere: spares on the shelf (first the ones that may be installed) and retired."""
    spares = (Device.objects.filter(position__isnull=True).order_by("-status", F("next_due_date").asc(nulls_first=True),
                                                                  "serial", "pk"))
    return render(request, "plant/device_list.html", {"devices": spares})


@permission_required("plant.swap_device", raise_exception=True)
def position_swap(request, tag):
    """Remove the device at a position and install a spare or a new device; both recorded, nothing half done."""
    position = get_object_or_404(Position.objects.select_related("area__site", "fluid"), tag=tag)
    current = position.installed_device()
    may_accept_unfit = request.user.has_perm(installations.UNFIT_PERMISSION)
    form = SwapForm(request.POST or None, position=position, may_accept_unfit=may_accept_unfit)
    if request.method == "POST" and form.is_valid():
        data = form.cleaned_data
        unfit_reason = data.get("unfit_reason", "")
        try:
            if current is None:
                installations.install(data["device"], position, data["on_date"], request.user,
                                      new_device=data["brand_new"], unfit_reason=unfit_reason)
            else:
                installations.swap(position, data["device"], data["on_date"], data["reason"], request.user,
                                   to=data["removed_to"], brand_new=data["brand_new"], unfit_reason=unfit_reason)
        except installations.InstallationError as refused:
            for field, messages_ in refused.errors.items():
                for message in messages_:
                    form.add_error(field if field in form.fields else None, message)
        else:
            what = f"Device {data['device'].device_label} installed at {position.tag}"
            if current is not None:
                what += f"; {current.device_label} removed ({data['reason']})"
            messages.success(request, what + ".")
            return redirect(position.get_absolute_url())
    spares = list(form.fields["device"].queryset.order_by(F("next_due_date").desc(nulls_last=True), "serial"))
    return render(request, "plant/swap.html", {
        "position": position, "current": current, "form": form, "fluid": position.fluid,
        "may_accept_unfit": may_accept_unfit,
        "spares": [{"device": d,
                    "problems": installations.install_problems(d, position, position.area.site.today(), replacing=True),
                    "unfit": installations.unfit_findings(d, position),
                    "warnings": installations.fit_warnings(d, position)} for d in spares],
    }, status=400 if request.method == "POST" else 200)


def _audit_rows(device, position=None, limit=30):
    """Who changed what on this device, the position it serves (or `position`), its installations and the
    position's fluid, newest first, with old and new values."""
    rows = []
    position = position or (device.position if device is not None and device.position_id else None)
    sources = []
    if device is not None:
        sources.append((f"device {device.device_label}", device.history.select_related("history_user")[:limit]))
        sources.append(("installation", Installation.history.filter(device=device)
                        .select_related("history_user", "position")[:limit]))
    if position is not None:
        sources.append((f"position {position.tag}", position.history.select_related("history_user")[:limit]))
        sources.append((f"fluid {position.fluid.name}", position.fluid.history.select_related("history_user")[:limit]))
    for label, records in sources:
        records = list(records)
        for newer, older in zip(records, records[1:] + [None]):
            changes = []
            if older is not None:
                changes = [(c.field, c.old, c.new) for c in newer.diff_against(older).changes]
            rows.append({"what": label, "when": newer.history_date, "who": newer.history_user or "system",
                         "kind": newer.get_history_type_display(), "changes": changes})
    return sorted(rows, key=lambda r: r["when"], reverse=True)[:limit]


def _edit(request, instance, form_class, template, title):
    """Change one register record: all fields checked by the model, saved whole or not at all."""
    form = form_class(request.POST or None, instance=instance)
    if request.method == "POST" and form.is_valid():
        with transaction.atomic():
            saved = form.save()
        messages.success(request, f"{title} saved.")
        return redirect(saved.get_absolute_url())
    status = 400 if request.method == "POST" else 200
    return render(request, template, {"form": form, "title": title, "instance": instance}, status=status)


@permission_required("plant.change_position", raise_exception=True)
def position_edit(request, tag):
    position = get_object_or_404(Position, tag=tag)
    return _edit(request, position, PositionForm, "plant/record_form.html", f"Position {position.tag}")


@permission_required("plant.change_device", raise_exception=True)
def device_edit(request, pk):
    device = get_object_or_404(Device, pk=pk)
    return _edit(request, device, DeviceForm, "plant/record_form.html", f"Device {device.device_label}")


@permission_required("plant.change_fluid", raise_exception=True)
def fluid_edit(request, pk):
    fluid = get_object_or_404(Fluid, pk=pk)
    return _edit(request, fluid, FluidForm, "plant/record_form.html", f"Fluid {fluid.name}")


def meters_moved(request, rest=""):
    """The position pages were under /meters/ before they had their own address: every old address, query and
    all, answers with its new one for good. A form posted to an old address (from a page a tablet kept before
    the move) keeps its method and body (308); a 301 would turn it into a GET and drop what was entered."""
    location = reverse("plant:position-list") + escape_uri_path(rest)
    if request.META.get("QUERY_STRING"):
        location += "?" + request.META["QUERY_STRING"]
    response = HttpResponsePermanentRedirect(location)
    if request.method not in ("GET", "HEAD"):
        response.status_code = 308
    return response
