"""Bulk import (dry run, then apply) and export of the register as CSV / XLSX.

The file checked by a dry run stays on the server (plant/kept_uploads.py) and the apply names it by its token; it
is never sent back to the browser."""
import logging

from django import forms
from django.contrib.auth.decorators import permission_required
from django.http import HttpResponse, HttpResponseBadRequest
from django.shortcuts import render
from django.views.decorators.http import require_GET, require_http_methods

from plant import importer, kept_uploads, spreadsheet
from plant.db_failures import DATABASE_FAILURES, nothing_saved_page

logger = logging.getLogger(__name__)

KIND_CHOICES = [("meters", "Meters"), ("fluids", "Fluids (service duties)")]


class ImportForm(forms.Form):
    kind = forms.ChoiceField(choices=KIND_CHOICES, initial="meters", label="Register")
    file = forms.FileField(required=False, label="CSV or Excel (.xlsx) file")
    dry_run = forms.BooleanField(required=False, initial=True, label="Dry run — check only, save nothing")
    # after a clean dry run the page offers "Apply" without uploading again: the file is kept on the server and
    # this names it (plant/kept_uploads.py)
    token = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, user=None, **kwargs):
        super().__init__(*args, **kwargs)
        self.user = user

    def clean(self):
        cleaned = super().clean()
        upload = cleaned.get("file")
        cleaned["kept"] = None
        if upload:
            refused = importer.size_refusal(upload.size)  # before the file is read into memory
            if refused:
                self.add_error("file", refused)
                return cleaned
            cleaned["content"], cleaned["filename"] = upload.read(), upload.name
        elif cleaned.get("token"):
            try:
                kept = kept_uploads.load(self.user, cleaned["token"])
            except kept_uploads.KeptUploadError as exc:
                raise forms.ValidationError(str(exc)) from None
            cleaned.update(kept=kept, content=kept.content, filename=kept.filename, kind=kept.kind,
                           dry_run=False)
        else:
            self.add_error("file", "Choose a file to import.")
        return cleaned


@require_http_methods(["GET", "POST"])
@permission_required(["plant.add_device", "plant.change_device", "plant.add_fluid", "plant.change_fluid"], raise_exception=True)
@nothing_saved_page("import", back="plant:import")
def import_register(request):
    if request.method == "GET":
        return render(request, "plant/import.html", {"form": ImportForm()})

    form = ImportForm(request.POST, request.FILES, user=request.user)
    if not form.is_valid():
        return render(request, "plant/import.html", {"form": form}, status=400)
    kind, dry_run = form.cleaned_data["kind"], form.cleaned_data["dry_run"]
    content, filename = form.cleaned_data["content"], form.cleaned_data["filename"]
    context = {"form": form, "kind": kind, "dry_run": dry_run, "filename": filename}
    try:
        rows = importer.read_table(content, filename)
    except importer.ImportFileError as exc:
        context["file_error"] = str(exc)
        return render(request, "plant/import.html", context, status=400)

    if dry_run:
        plan = importer.plan_import(kind, rows)
    else:
        try:
            plan = importer.apply_rows(kind, rows, user=request.user)  # checked once, inside the transaction
        except DATABASE_FAILURES:
            raise  # the database itself failed: our "nothing was saved" page
        except Exception as exc:  # the transaction has rolled back; say so rather than show a bare 500
            logger.exception("Register import of %s failed and was rolled back", filename)
            context.update(apply_failed=str(exc) or exc.__class__.__name__)
            return render(request, "plant/import.html", context, status=500)
    context["plan"] = plan
    kept = form.cleaned_data["kept"]
    if plan.applied and kept is not None:
        kept_uploads.discard(kept.token)
    if plan.ok and dry_run and plan.changed_rows:
        token = kept_uploads.keep(request.user, kind, filename, content)
        context["apply_form"] = ImportForm(initial={"kind": kind, "dry_run": False, "token": token})
    return render(request, "plant/import.html", context, status=200 if plan.ok else 400)


def _kind(request):
    kind = request.GET.get("kind", "meters")
    return kind if kind in importer.KINDS else None


@require_GET
@permission_required("plant.view_device", raise_exception=True)
def export_register_csv(request):
    kind = _kind(request)
    if kind is None:
        return HttpResponseBadRequest("kind must be meters or fluids")
    # BOM so Excel opens the UTF-8 file with m³/h and µS/cm intact
    body = "\ufeff" + spreadsheet.frame_csv_text(importer.export_rows(kind), lineterminator="\r\n")
    response = HttpResponse(body.encode("utf-8"), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{kind}-register.csv"'
    return response


@require_GET
@permission_required("plant.view_device", raise_exception=True)
def export_register_xlsx(request):
    kind = _kind(request)
    if kind is None:
        return HttpResponseBadRequest("kind must be meters or fluids")
    response = HttpResponse(importer.export_xlsx_bytes(kind), content_type=spreadsheet.XLSX_TYPE)
    response["Content-Disposition"] = f'attachment; filename="{kind}-register.xlsx"'
    return response
