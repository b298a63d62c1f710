"""Reference standards' pages: the list, one standard with its history and its DCC files, and reading in the
standard's own DCC (upload, check, show what it says, a reviewer confirms, the standard is updated)."""
import datetime as dt
import hashlib
import warnings

from django import forms
from django.contrib.auth.decorators import permission_required
from django.core.validators import MinValueValidator
from django.db import transaction
from django.http import HttpResponse
from django.shortcuts import get_object_or_404, redirect, render
from django.utils import timezone

from calibration import dcc_read, dcc_schema, dcc_sign
from calibration.models import ReferenceStandard, StandardDcc
from plant import localtime

CHANGE = "calibration.change_referencestandard"
VIEW = "calibration.view_referencestandard"
FIELDS = ("certificate_number", "issuer", "calibrated_on", "due_date", "expanded_uncertainty", "uncertainty_basis",
          "interval_days")


class UploadForm(forms.Form):
    file = forms.FileField(label="The standard's DCC (XML file)",
                           help_text="A Digital Calibration Certificate (DCC 3.2.0) from the laboratory that "
                                     "calibrated this standard.")


class ConfirmForm(forms.Form):
    certificate_number = forms.CharField(max_length=60, label="Certificate number")
    issuer = forms.CharField(max_length=120, label="Issued by (laboratory)")
    calibrated_on = forms.DateField(label="Calibration date", widget=forms.DateInput(attrs={"type": "date"}, format="%Y-%m-%d"))
    interval_days = forms.IntegerField(label="Calibration interval (days)",
                                       validators=[MinValueValidator(1, "The interval must be at least one day.")])
    expanded_uncertainty = forms.FloatField(label="Expanded uncertainty U (k = 2)",
                                            validators=[MinValueValidator(0.0, "Uncertainty cannot be negative.")])
    uncertainty_basis = forms.ChoiceField(choices=ReferenceStandard.UncertaintyBasis.choices, label="U stated as")

    def __init__(self, *args, today=None, **kwargs):
        super().__init__(*args, **kwargs)
        self.today = today

    def clean_calibrated_on(self):
        day = self.cleaned_data["calibrated_on"]
        if self.today is not None and day > self.today:
            raise forms.ValidationError(f"The calibration date {day} is after today ({self.today}).")
        return day


def _today():
    # reference standards belong to the laboratory, not to a site: the plant's date (TIME_ZONE)
    return localtime.today()


@permission_required(VIEW, raise_exception=True)
def standard_list(request):
    return render(request, "calibration/standard_list.html",
                  {"standards": ReferenceStandard.objects.all(), "can_change": request.user.has_perm(CHANGE)})


def _history(standard):
    rows = []
    for version in standard.history.select_related("history_user").order_by("-history_date", "-history_id")[:50]:
        rows.append({"at": version.history_date, "by": version.history_user, "reason": version.history_change_reason,
                     "type": version.get_history_type_display(), **{f: getattr(version, f) for f in FIELDS}})
    return rows


@permission_required(VIEW, raise_exception=True)
def standard_detail(request, pk):
    standard = get_object_or_404(ReferenceStandard, pk=pk)
    return render(request, "calibration/standard_detail.html", {
        "standard": standard, "history": _history(standard),
        "files": standard.dcc_files.defer("xml").select_related("uploaded_by", "confirmed_by"),
        "can_change": request.user.has_perm(CHANGE),
    })


def summary_data(summary: dcc_read.DccSummary) -> dict:
    """What was read, as plain JSON for the record (and the page)."""
    from dsi_unit import DsiUnit

    def label(unit):
        if unit.startswith("|"):
            return unit[1:]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            parsed = DsiUnit(unit)
        return parsed.to_utf8() if parsed.valid else unit

    suggested = summary.suggested_uncertainty()
    return {
        "certificate_number": summary.certificate_number, "issuer": summary.issuer,
        "calibration_date": summary.calibration_date.isoformat() if summary.calibration_date else None,
        "issue_date": summary.issue_date.isoformat() if summary.issue_date else None,
        "item": summary.item, "item_ids": summary.item_ids,
        "results": [{"name": r.name, "ref_type": r.ref_type, "values": r.values, "unit": r.unit,
                     "unit_label": label(r.unit), "U": r.uncertainties, "k": r.coverage_factors,
                     "p": r.probabilities, "flow": r.flow} for r in summary.results],
        "flow_results": len(summary.flow_results),
        "suggested_uncertainty": suggested,
    }


def read_upload(data: bytes) -> tuple[dict, str]:
    """(what was read, the signature sentence) of an uploaded DCC; InvalidDcc/SchemaMissing when it cannot be read.
    Parsing is done with no DTD, no entities and no network; the schema is the local copy."""
    root = dcc_schema.parse_untrusted(data)
    dcc_schema.validate(root)
    verdict = dcc_sign.verify(data)
    return summary_data(dcc_read.summary(root)), verdict.sentence()


@permission_required(CHANGE, raise_exception=True)
def dcc_upload(request, pk):
    standard = get_object_or_404(ReferenceStandard, pk=pk)
    form = UploadForm(request.POST or None, request.FILES or None)
    if request.method == "POST" and form.is_valid():
        upload = form.cleaned_data["file"]
        data = upload.read(dcc_schema.MAX_BYTES + 1)
        try:
            read, signature = read_upload(data)
        except (dcc_schema.InvalidDcc, dcc_schema.SchemaMissing) as exc:
            form.add_error("file", f"Not read, nothing saved: {exc}")
        else:
            record = StandardDcc.objects.create(
                standard=standard, filename=(upload.name or "dcc.xml")[:200], xml=data,
                sha256=hashlib.sha256(data).hexdigest(), uploaded_by=request.user, read=read, signature=signature)
            return redirect("calibration:standard-dcc", pk=standard.pk, dcc=record.pk)
    status = 400 if request.method == "POST" else 200
    return render(request, "calibration/standard_dcc_upload.html",
                  {"standard": standard, "form": form, "schema_dir": dcc_schema.schema_dir()}, status=status)


def _initial(standard, read):
    calibrated = dt.date.fromisoformat(read["calibration_date"]) if read.get("calibration_date") else None
    suggested = read.get("suggested_uncertainty")
    return {
        "certificate_number": read.get("certificate_number") or standard.certificate_number,
        "issuer": read.get("issuer") or standard.issuer,
        "calibrated_on": calibrated or standard.calibrated_on,
        "interval_days": standard.interval_days,
        "expanded_uncertainty": dcc_read.round_up(suggested) if suggested is not None else standard.expanded_uncertainty,
        "uncertainty_basis": ReferenceStandard.UncertaintyBasis.PERCENT_READING if suggested is not None
        else standard.uncertainty_basis,
    }


@permission_required(VIEW, raise_exception=True)
def dcc_review(request, pk, dcc):
    standard = get_object_or_404(ReferenceStandard, pk=pk)
    record = get_object_or_404(StandardDcc.objects.select_related("uploaded_by", "confirmed_by"), pk=dcc,
                               standard=standard)
    can_confirm = request.user.has_perm(CHANGE) and not record.confirmed
    form = None
    if can_confirm:
        form = ConfirmForm(request.POST if request.method == "POST" else None,
                           initial=_initial(standard, record.read), today=_today())
        if request.method == "POST" and form.is_valid():
            _confirm(standard, record, form.cleaned_data, request.user)
            return redirect(standard)
    elif request.method == "POST":
        return render(request, "calibration/standard_dcc_review.html",
                      {"standard": standard, "record": record, "form": None,
                       "error": "This DCC was already confirmed, or you may not confirm it: nothing changed."},
                      status=400)
    shown = [r for r in record.read.get("results", []) if r.get("U")]
    return render(request, "calibration/standard_dcc_review.html", {
        "standard": standard, "record": record, "form": form, "read": record.read, "shown": shown,
        "other_results": len(record.read.get("results", [])) - len(shown),
        "offered": (f"{dcc_read.round_up(record.read['suggested_uncertainty']):g}"
                    if record.read.get("suggested_uncertainty") is not None else ""),
    }, status=400 if form is not None and form.is_bound else 200)


def _confirm(standard, record, values, user):
    """Set the standard's certificate facts from the confirmed values, in one transaction; the audit trail keeps
    the old values (django-simple-history), and the DCC record keeps both."""
    new = dict(values)
    new["due_date"] = values["calibrated_on"] + dt.timedelta(days=values["interval_days"])
    with transaction.atomic():
        locked = ReferenceStandard.objects.select_for_update().get(pk=standard.pk)
        record = StandardDcc.objects.select_for_update().get(pk=record.pk)
        if record.confirmed:
            return
        old = {f: getattr(locked, f) for f in FIELDS}
        for name, value in new.items():
            setattr(locked, name, value)
        # the audit trail keeps at most 100 characters of a reason; the file record keeps who, when and the hash
        number = record.read.get("certificate_number") or record.filename
        locked._change_reason = f"Read from its DCC (file {record.pk}): {number}"[:100]
        locked.save()
        record.confirmed_at, record.confirmed_by = timezone.now(), user
        record.applied = {f: [_plain(old[f]), _plain(new[f])] for f in FIELDS}
        record.save(update_fields=["confirmed_at", "confirmed_by", "applied"])


def _plain(value):
    return value.isoformat() if isinstance(value, dt.date) else value


@permission_required(VIEW, raise_exception=True)
def dcc_file(request, pk, dcc):
    record = get_object_or_404(StandardDcc, pk=dcc, standard_id=pk)
    response = HttpResponse(bytes(record.xml), content_type="application/xml")
    safe = "".join(c for c in record.filename if c.isalnum() or c in "._-") or "dcc.xml"
    response["Content-Disposition"] = f'attachment; filename="{safe}"'
    return response
