"""Bulk import / export of the register (fluids and meters) from CSV or XLSX.

Every row goes through the same ModelForms as the edit pages, so the messages a user sees for a bad cell are
the model's own field messages. The register is read once per file (`Register`: sites, areas, fluids, the
positions the file names with their devices) and the forms' own database look-ups (related choices, the unique
check) are answered from it, so checking a row makes no query. Planning writes nothing; applying re-runs the same
checks inside one transaction and saves all rows or none: new rows in bulk (positions, devices, installations,
duty periods, derived maintenance tasks and their audit rows, as plant.installations and maintenance.sync write
them one by one), changed rows one by one through the edit forms, then one due-date recompute of the devices
touched.

Rules for cells:
* A blank cell in a column whose field has a default and is required (range_min, flow_units, mpe_basis,
  base_interval_days, status) keeps the current value (the model default for a new row); any other blank cell
  means "no value" (and is then subject to the field's own required check).
* A column that is left out entirely keeps the current value (the default for a new row), except the required
  columns, which must be present.
* Booleans accept yes/no, true/false, y/n, 1/0 and blank (= no).
* Flow units are one of the unit codes of plant/units.py (m3/h, L/s, kg/h, ...) or a usual spelling of one
  (m³/h, l/s, gpm, lb/hr; plant.units.code_for); any other text is refused at its cell, never guessed.
* Choice columns accept the stored value or the label, case-insensitively. The wetted material is one of the fixed
  list (plant/materials.py) or blank; anything else is refused at its cell (liner, grade and other words go in
  material_details).
* Meters name their site, area and fluid. A missing site or area is created (the plan says so); a missing fluid
  is an error — import fluids first.
"""
from __future__ import annotations

import copy
import datetime as dt
import csv
import io
import math
import zipfile
from dataclasses import dataclass, field
from pathlib import PurePath

import pandas as pd
from django import forms
from django.conf import settings
from django.core.exceptions import ValidationError
from django.db import connection, connections, models, transaction
from django.db.models import Q
from django.forms.models import model_to_dict
from django.utils import timezone

from plant import units
from plant import installations, risk, spreadsheet
from plant.forms import FluidForm, DeviceForm, PositionForm
from plant.models import (Area, DutyPeriod, Fluid, Installation, Device, Position, Site, flows_above_range,
                          flows_checked_together)
from plant.signals import devices_changed, devices_registered

FLUID_COLUMNS = [
    "name", "phase", "conductivity_us_cm", "density_kg_m3", "viscosity_mpa_s", "solids", "chlorides", "scaling",
    "biofouling", "sticky", "entrained_gas", "temperature_c", "notes",
]
METER_COLUMNS = [
    "tag", "principle", "site", "area", "fluid", "line_size", "internal_diameter_mm", "range_min", "range_max",
    "flow_units", "normal_flow", "min_flow", "required_accuracy_pct", "wetted_material", "material_details", "serial",
    "maker", "model", "mpe_value", "mpe_basis", "base_interval_days",
]
# a register row is a position and the device installed there: these columns are the position's, the rest the
# device's (flow_units is both: the device's range and the position's flows are stated in the same unit here)
POSITION_COLUMNS = {"tag", "site", "area", "fluid", "line_size", "internal_diameter_mm", "normal_flow", "min_flow",
                    "required_accuracy_pct"}
REQUIRED_COLUMNS = {
    "fluids": ["name", "phase"],
    "meters": [
        "tag", "principle", "site", "area", "fluid", "line_size", "internal_diameter_mm", "range_max", "mpe_value",
    ],
}
# columns read when present, never exported (an import-only instruction, not a register value)
OPTIONAL_COLUMNS = {"meters": ("unfit_reason",)}
KINDS = {
    "fluids": {"model": Fluid, "form": FluidForm, "key": "name", "columns": FLUID_COLUMNS},
    "meters": {"model": Device, "form": None, "key": "tag", "columns": METER_COLUMNS},
}
TRUE_WORDS = {"yes", "y", "true", "t", "1"}
FALSE_WORDS = {"no", "n", "false", "f", "0", ""}
# PostgreSQL text cannot hold NUL, so such a cell is refused before it reaches a query (the forms say the same)
NUL_MESSAGE = "Null characters are not allowed."


class ImportFileError(ValueError):
    """The file itself cannot be read (wrong type, corrupt, no header, over a limit)."""


# Limits (plant/settings.py, from the environment): each refusal is one sentence naming the limit and its setting.
ZIP_RATIO_FLOOR = 1024 * 1024  # parts smaller than this unpacked are not judged by their ratio


def size_refusal(size: int) -> str | None:
    """Why a file of `size` bytes is refused, or None."""
    limit = settings.IMPORT_MAX_UPLOAD_MB
    if size > limit * 1024 * 1024:
        return (f"The file is {size / 1024 / 1024:.1f} MB, more than the import limit of {limit:g} MB "
                "(setting QUENBY_IMPORT_MAX_UPLOAD_MB).")
    return None


def _check_workbook(data: bytes, filename: str) -> None:
    """Refuse a workbook that would unpack to more than the limits, before any of it is unpacked."""
    try:
        members = zipfile.ZipFile(io.BytesIO(data)).infolist()
    except (zipfile.BadZipFile, ValueError) as exc:
        raise ImportFileError(f"Could not read {filename} as an Excel workbook: {exc}") from exc
    unpacked = sum(member.file_size for member in members)
    limit = settings.IMPORT_MAX_XLSX_UNPACKED_MB
    if unpacked > limit * 1024 * 1024:
        raise ImportFileError(f"The workbook unpacks to {unpacked / 1024 / 1024:.0f} MB, more than the import limit "
                              f"of {limit:g} MB (setting QUENBY_IMPORT_MAX_XLSX_UNPACKED_MB).")
    ratio_limit = settings.IMPORT_MAX_XLSX_RATIO
    for member in members:
        ratio = member.file_size / max(member.compress_size, 1)
        if member.file_size > ZIP_RATIO_FLOOR and ratio > ratio_limit:
            raise ImportFileError(f"A part of the workbook ({member.filename}) unpacks to {ratio:.0f} times its "
                                  f"packed size, more than the import limit of {ratio_limit:g} times (setting "
                                  "QUENBY_IMPORT_MAX_XLSX_RATIO).")


def _check_rows(count: int) -> None:
    limit = settings.IMPORT_MAX_ROWS
    if count > limit:
        raise ImportFileError(f"The file has {count:,} data rows, more than the import limit of {limit:,} rows "
                              "(setting QUENBY_IMPORT_MAX_ROWS).")


@dataclass
class RowError:
    row_number: int  # spreadsheet row: header is row 1, first data row is 2
    column: str  # "" for a problem with the row as a whole
    message: str

    def __str__(self):
        where = f"row {self.row_number}" + (f", column {self.column}" if self.column else "")
        return f"{where}: {self.message}"


@dataclass
class Change:
    column: str
    old: str
    new: str


@dataclass
class PlanRow:
    row_number: int
    key: str
    action: str  # "create" / "update" / "unchanged" / "error"
    changes: list[Change] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    form: object = field(default=None, repr=False, compare=False)  # the checked form of a row to save


@dataclass
class Plan:
    kind: str
    source_rows: list[dict]
    rows: list[PlanRow] = field(default_factory=list)
    errors: list[RowError] = field(default_factory=list)
    creates: list[str] = field(default_factory=list)  # related objects created on the way, e.g. "area North / Hall B"
    warnings: list[str] = field(default_factory=list)
    applied: bool = False
    register: object = field(default=None, repr=False, compare=False)  # what the rows were checked against

    @property
    def ok(self) -> bool:
        return not self.errors

    def count(self, action: str) -> int:
        return sum(1 for row in self.rows if row.action == action)

    @property
    def counts(self) -> dict[str, int]:
        return {action: self.count(action) for action in ("create", "update", "unchanged")}

    @property
    def changed_rows(self) -> list[PlanRow]:
        return [row for row in self.rows if row.action in ("create", "update")]


# Reading ---------------------------------------------------------------------------------------------------------
def _normalise_header(value) -> str:
    return str(value).strip().lower().replace(" ", "_").replace("-", "_")


def read_table(uploaded, filename: str | None = None) -> list[dict]:
    """Read a CSV or XLSX file into a list of {column: string} dicts, one per data row (blank rows kept)."""
    filename = filename or getattr(uploaded, "name", "") or ""
    suffix = PurePath(filename).suffix.lower()
    if isinstance(uploaded, (bytes, bytearray)):
        data = bytes(uploaded)
    elif hasattr(uploaded, "read"):
        if hasattr(uploaded, "seek"):
            uploaded.seek(0)
        data = uploaded.read()
        if isinstance(data, str):
            data = data.encode("utf-8")
    else:
        raise ImportFileError("Nothing to read: expected an uploaded file.")
    refused = size_refusal(len(data))
    if refused:
        raise ImportFileError(refused)
    if not data.strip():
        raise ImportFileError("The file is empty.")

    options = {"header": None, "dtype": str, "keep_default_na": False}
    if suffix == ".csv":
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            text = data.decode("cp1252", errors="replace")  # Excel on Windows saves CSV in the ANSI code page
        if "\x00" in text:  # the CSV parser would cut the cell short there and import the rest silently
            line = text.count("\n", 0, text.index("\x00")) + 1
            raise ImportFileError(f"Could not read {filename} as CSV: it contains a null character (line {line}). "
                                  "Save it again as CSV (UTF-8).")
        try:
            header_line = text.split("\n", 1)[0]
            sep = ";" if header_line.count(";") > header_line.count(",") else ","  # Excel in comma-decimal locales
            frame = pd.read_csv(io.StringIO(text), skip_blank_lines=False, sep=sep, **options)
        except (pd.errors.ParserError, pd.errors.EmptyDataError, csv.Error) as exc:
            raise ImportFileError(f"Could not read {filename} as CSV: {exc}") from exc
    elif suffix in (".xlsx", ".xlsm"):
        _check_workbook(data, filename)
        try:
            frame = pd.read_excel(io.BytesIO(data), engine="calamine", sheet_name=0, **options)
        except Exception as exc:  # openpyxl raises several unrelated types for a corrupt workbook
            raise ImportFileError(f"Could not read {filename} as an Excel workbook: {exc}") from exc
    else:
        shown = suffix or "no extension"
        raise ImportFileError(f"Unsupported file type ({shown}). Upload a .csv or .xlsx file.")

    if frame.empty:
        raise ImportFileError("The file has no header row.")
    _check_rows(len(frame) - 1)
    headers = [_normalise_header(h) for h in frame.iloc[0].tolist()]
    # drop trailing unnamed columns (Excel's "used range" often includes a few empty ones)
    while headers and headers[-1] == "":
        headers.pop()
    seen = set()
    duplicates = sorted({h for h in headers if h and (h in seen or seen.add(h))})
    if duplicates:
        raise ImportFileError(f"The header row repeats column(s): {', '.join(duplicates)}.")
    rows = []
    for values in frame.iloc[1:].itertuples(index=False):
        row = {}
        for header, value in zip(headers, values):
            if header:
                # undo the apostrophe an export puts before text that a spreadsheet would run as a formula
                row[header] = "" if value is None else spreadsheet.restore(str(value).strip())
        rows.append(row)
    return rows


# Export ----------------------------------------------------------------------------------------------------------
def _format(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if math.isfinite(value) and value.is_integer() and abs(value) < 1e15:
            return str(int(value))
        return repr(value)
    return str(value)


class RegisterRow:
    """One row of the meter register: a position and the device installed there (new, unsaved ones for a new row)."""

    def __init__(self, device: Device | None = None, position: Position | None = None):
        self.device = device if device is not None else Device()
        self.position = position if position is not None else (device.position if device is not None else Position())
        self.unfit_reason = ""  # a reviewer's reason to install a device not fit for the duty (new rows)


def _field(model, column):
    """The model field behind a column (for the register: the position's or the device's)."""
    if model is Device and column in POSITION_COLUMNS:
        return Position._meta.get_field(column)
    return model._meta.get_field(column)


def _related(instance, name):
    """The object a foreign key points at, saved or not yet (a new site's area before the apply), or None."""
    model_field = instance._meta.get_field(name)
    if model_field.is_cached(instance) or getattr(instance, model_field.attname) is not None:
        return getattr(instance, name)
    return None


def _cell(obj, column: str) -> str:
    if isinstance(obj, RegisterRow):
        position = obj.position
        if column in ("site", "area", "fluid"):
            related = _related(position, "fluid" if column == "fluid" else "area")
            if related is None:
                return ""
            return related.site.name if column == "site" else related.name
        return _format(getattr(position if column in POSITION_COLUMNS else obj.device, column))
    return _format(getattr(obj, column))


class RegisterRowForm:
    """The position form and the device form of one register row, checked together and saved together.

    A new tag creates the position and a new device installed there (as the register's "new meter" does); an
    existing tag changes the position and the device installed there now. Devices are swapped on the position's
    page, not by import."""

    base_fields = {**PositionForm.base_fields, **DeviceForm.base_fields}

    def __init__(self, data, instance: RegisterRow, position_form=PositionForm, device_form=DeviceForm):
        self.instance = instance
        self.new = instance.position.pk is None
        # a device not fit for the duty goes in only with a reviewer's written reason (plant/installations.py);
        # the import takes it from an optional unfit_reason column (the import is a reviewer's task)
        self.unfit_reason = instance.unfit_reason = str(data.get("unfit_reason") or "").strip()
        self.position_form = position_form(data={k: v for k, v in data.items() if k in PositionForm.base_fields},
                                           instance=instance.position)
        self.device_form = device_form(data={k: v for k, v in data.items() if k in DeviceForm.base_fields},
                                       instance=instance.device)
        self.errors: dict[str, list[str]] = {}

    def is_valid(self) -> bool:
        # the flows-against-range check needs both rows' new values: it is made once, below, not by the position
        with flows_checked_together(self.instance.position, self.instance.device):
            self.position_form.is_valid()
            self.device_form.is_valid()
        self.errors = {**{k: list(v) for k, v in self.position_form.errors.items()},
                       **{k: list(v) for k, v in self.device_form.errors.items()}}
        # judged whenever both values are numbers (a refused range rule does not hide a flow above it)
        for name, message in flows_above_range(self.instance.position, self.instance.device).items():
            if name not in self.errors:
                self.errors[name] = [message]
        if self.new and not self.errors and not self.unfit_reason:
            position, device = self.instance.position, self.instance.device
            findings = installations.unfit_findings(device, position)
            if findings:
                self.errors["principle"] = [
                    installations.unfit_sentence(device, position, findings)
                    + " To import it all the same, give a reviewer's reason in an unfit_reason column."]
        return not self.errors

    def save(self):
        with transaction.atomic(), flows_checked_together(self.instance.position, self.instance.device):
            position = self.position_form.save()
            if self.new:
                device = self.device_form.save(commit=False)
                device.status = Device.Status.SPARE
                device.save()
                installations.install(device, position, position.area.site.today(), new_device=True, recompute=False,
                                      unfit_reason=self.unfit_reason)
            else:
                self.device_form.save()
        return self.instance


def export_rows(kind: str) -> pd.DataFrame:
    """The register as a DataFrame of strings, in exactly the import columns (so it imports back unchanged)."""
    spec = _spec(kind)
    if kind == "meters":
        queryset = (Device.objects.filter(position__isnull=False).select_related("position__area__site", "position__fluid")
                    .order_by("position__tag"))
        objects = [RegisterRow(device) for device in queryset]
    else:
        objects = spec["model"].objects.all().order_by(spec["key"])
    records = [[_cell(obj, column) for column in spec["columns"]] for obj in objects]
    return pd.DataFrame(records, columns=spec["columns"], dtype=object)


def numeric_columns(kind: str) -> list[str]:
    model = _spec(kind)["model"]
    return [
        column for column in _spec(kind)["columns"]
        if column not in ("site", "area", "fluid")
        and isinstance(_field(model, column), (models.FloatField, models.IntegerField))
        and not isinstance(_field(model, column), models.BooleanField)
    ]


def export_xlsx_bytes(kind: str) -> bytes:
    """The export as an .xlsx workbook, with numeric columns written as numbers."""
    frame = export_rows(kind)
    for column in numeric_columns(kind):
        frame[column] = pd.to_numeric(frame[column].replace("", None), errors="coerce")
    return spreadsheet.frames_xlsx_bytes({kind: frame})


# Planning / applying ---------------------------------------------------------------------------------------------
# The whole file is checked against the register read once (sites, areas, fluids, the positions it names with
# their installed devices): a row makes no query of its own, so a plant's register of tens of thousands of rows
# is checked in seconds. The forms are the edit pages' forms with their two database look-ups (the area and fluid
# choices, and the unique check of the key) answered from what was read; the messages are the forms' own.
LOOKUP_BATCH = 500  # tags per read of the positions a file names (under every database's parameter limit)
WRITE_BATCH = 1000  # rows per INSERT


def _spec(kind: str) -> dict:
    try:
        return KINDS[kind]
    except KeyError:
        raise ValueError(f"Unknown register kind {kind!r}; expected one of {', '.join(KINDS)}.") from None


class _Names:
    """Objects found by name as the register has always found them: the exact name, else the one object whose name
    matches it ignoring case (two such objects: none is chosen)."""

    def __init__(self, objects=()):
        self.exact: dict[str, models.Model] = {}
        self.folded: dict[str, list] = {}
        for obj in objects:
            self.add(obj)

    def add(self, obj):
        self.exact[obj.name] = obj
        self.folded.setdefault(obj.name.casefold(), []).append(obj)

    def find(self, name: str):
        found = self.exact.get(name)
        if found is None:
            matches = self.folded.get(name.casefold(), [])
            if len(matches) == 1:
                found = matches[0]
        return found


class Register:
    """What the rows of one file refer to, read once: every fluid, and for the meter register every site and area
    and the positions the file names, with the device installed at each. New sites and areas the file calls for
    are added here (unsaved) so that later rows find them, as they found the ones the per-row import created."""

    def __init__(self, kind: str, rows: list[dict]):
        self.fluids = _Names(Fluid.objects.all())
        self.fluids_by_pk = {fluid.pk: fluid for fluid in self.fluids.exact.values()}
        self.new_sites: list[Site] = []
        self.new_areas: list[Area] = []
        self.positions: dict[str, Position] = {}
        if kind != "meters":
            return
        sites = list(Site.objects.all())
        self.sites = _Names(sites)
        by_pk = {site.pk: site for site in sites}
        self._areas = {id(site): _Names() for site in sites}
        self.areas_by_pk = {}
        for area in Area.objects.all():
            area.site = by_pk[area.site_id]
            self._areas[id(area.site)].add(area)
            self.areas_by_pk[area.pk] = area
        tags = sorted({str(row.get("tag", "")).strip() for row in rows} - {""})
        tags = [tag for tag in tags if "\x00" not in tag]  # refused at their cell; PostgreSQL would refuse the read
        for start in range(0, len(tags), LOOKUP_BATCH):
            for position in (Position.objects.select_related("device")
                             .filter(tag__in=tags[start:start + LOOKUP_BATCH])):
                position.area = self.areas_by_pk[position.area_id]
                position.fluid = self.fluids_by_pk[position.fluid_id]
                self.positions[position.tag] = position

    def find_area(self, site, name):
        return self._areas[id(site)].find(name)

    def add_site(self, site):
        self.sites.add(site)
        self._areas[id(site)] = _Names()
        self.new_sites.append(site)

    def add_area(self, area):
        self._areas[id(area.site)].add(area)
        self.new_areas.append(area)

    def existing_row(self, key: str) -> RegisterRow | None:
        """A copy of the position named `key` and of its installed device (each row edits its own copy)."""
        found = self.positions.get(key)
        if found is None:
            return None
        position = copy.copy(found)
        device = found.installed_device()
        if device is not None:
            device = copy.copy(device)
            device.position = position
            Position.device.related.set_cached_value(position, device)
        return RegisterRow(device, position) if device is not None else RegisterRow(None, position)


class _Known(forms.Field):
    """A choice of a related object among those read once for the file (the edit form's choice field reads the
    database for each row); the same messages as that field."""

    default_error_messages = {"invalid_choice": forms.ModelChoiceField.default_error_messages["invalid_choice"]}

    def __init__(self, objects: dict, **kwargs):
        super().__init__(**kwargs)
        self.objects = objects

    def to_python(self, value):
        if value in self.empty_values:
            return None
        if isinstance(value, models.Model):  # a new site's area, not saved before the apply
            return value
        try:
            return self.objects[int(value)]
        except (KeyError, TypeError, ValueError):
            raise ValidationError(self.error_messages["invalid_choice"], code="invalid_choice") from None


class _SharedFields(dict):
    """A form class's fields, shared by the forms of every row of a file instead of deep-copied for each (a form
    copies its fields so that a page can change them; checking rows never does, and the copy was most of the
    time a row took)."""

    def __deepcopy__(self, memo):
        return dict(self)


def _checked_against(form_class, known: dict[str, dict]):
    """`form_class` with its related choices answered from `known` ({field: {pk: object}}) and without the unique
    check's query. The key column is the row's key: a key already in the register makes the row an update of that
    object, a key twice in the file is refused by _process, so the unique check has nothing left to find."""

    class Checked(form_class):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, label_suffix="", **kwargs)  # never rendered: no translated suffix to look up

        def _clean_fields(self):
            # Django's loop, without a bound field per field (no field here is disabled or a file, and the form has
            # no clean_<field> method: checked below)
            for name, form_field in self.fields.items():
                try:
                    self.cleaned_data[name] = form_field.clean(
                        form_field.widget.value_from_datadict(self.data, self.files, name))
                except ValidationError as exc:
                    self.add_error(name, exc)

        def _get_validation_exclusions(self):
            # the model's foreign key check reads the database too; the choice above has checked the object
            return super()._get_validation_exclusions() | set(known)

        def validate_unique(self):
            pass

    fields = dict(form_class.base_fields)
    if any(f.disabled or isinstance(f, forms.FileField) or hasattr(form_class, f"clean_{name}")
           for name, f in fields.items()):
        raise TypeError(f"{form_class.__name__} needs the bound-field loop of Django's forms")
    for name, objects in known.items():
        original = fields[name]
        fields[name] = _Known(objects, required=original.required, label=original.label,
                              error_messages=original.error_messages, help_text=original.help_text)
    Checked.base_fields = _SharedFields(fields)
    Checked.__name__ = Checked.__qualname__ = f"Checked{form_class.__name__}"
    return Checked


def _parse_bool(value: str):
    word = value.strip().lower()
    if word in TRUE_WORDS:
        return True
    if word in FALSE_WORDS:
        return False
    raise ValueError(f'Enter yes or no (got "{value}").')


_CHOICE_WORDS: dict = {}


def _normalise_choice(model_field, value: str) -> str:
    """The stored value of a choice given as its stored value or its label, any case (the first that matches, in
    the field's order); anything else as it was, for the form to refuse."""
    words = _CHOICE_WORDS.get(model_field)
    if words is None:
        words = {}
        for stored, label in model_field.flatchoices:
            words.setdefault(str(stored).lower(), stored)
            words.setdefault(str(label).lower(), stored)
        _CHOICE_WORDS[model_field] = words
    return words.get(value.lower(), value)


def plan_import(kind: str, rows: list[dict]) -> Plan:
    """Check every row and say what an import would do. Saves nothing (and writes nothing)."""
    plan = Plan(kind=kind, source_rows=rows)
    _spec(kind)
    _process(plan, Register(kind, rows))
    return plan


def apply_import(plan: Plan, user=None) -> Plan:
    """Apply a checked plan: re-check every row against the register as it is now and save all of them in one
    transaction, or none.

    Returns the plan as re-checked at apply time (``applied`` is True only if everything was saved). If the plan
    had errors nothing is attempted. Anything raised while saving rolls the whole import back and propagates.
    New rows are written in bulk (positions, devices, installations, duty periods, derived maintenance tasks, with
    their audit rows); changed rows are saved one by one through the edit forms, as on the edit pages; one due-date
    recompute of the devices touched ends the import. `user` is recorded as who installed the new devices and made
    the audit rows (on a page, the history middleware names the user anyway).
    """
    if plan.errors:
        return plan
    fresh = Plan(kind=plan.kind, source_rows=plan.source_rows)
    try:
        with transaction.atomic():
            _process(fresh, Register(plan.kind, plan.source_rows))
            if fresh.errors:  # the register changed since the dry run; save none of it
                raise _Rollback
            _write(fresh, user)
    except _Rollback:
        return fresh
    fresh.applied = True
    return fresh


def apply_rows(kind: str, rows: list[dict], user=None) -> Plan:
    """Check and apply `rows` in one pass (the apply of a file already checked by a dry run, and the command line):
    the checks are made once, inside the apply's transaction. Returns the plan as `apply_import` does."""
    _spec(kind)
    return apply_import(Plan(kind=kind, source_rows=rows), user=user)


class _Rollback(Exception):
    pass


def _process(plan: Plan, register: Register) -> None:
    spec = _spec(plan.kind)
    columns, key_column = spec["columns"], spec["key"]
    present = set().union(*(row.keys() for row in plan.source_rows)) if plan.source_rows else set()
    missing = [c for c in REQUIRED_COLUMNS[plan.kind] if c not in present]
    if missing:
        plan.errors.append(RowError(1, ", ".join(missing), f"Missing required column(s): {', '.join(missing)}."))
        return
    unknown = sorted(present - set(columns) - set(OPTIONAL_COLUMNS.get(plan.kind, ())))
    if unknown:
        plan.warnings.append(f"Ignored unknown column(s): {', '.join(unknown)}.")
    if not plan.source_rows:
        plan.warnings.append("The file has no data rows.")

    if plan.kind == "meters":
        forms_used = {"position": _checked_against(PositionForm, {"area": register.areas_by_pk,
                                                                  "fluid": register.fluids_by_pk}),
                      "device": _checked_against(DeviceForm, {})}
        new = RegisterRow()
        forms_used["new"] = {**model_to_dict(new.position, fields=list(PositionForm.base_fields)),
                             **model_to_dict(new.device, fields=list(DeviceForm.base_fields))}
    else:
        forms_used = {"fluid": _checked_against(FluidForm, {})}
    first_seen: dict[str, int] = {}
    for index, raw in enumerate(plan.source_rows):
        row_number = index + 2
        raw = {column: "" if value is None else str(value) for column, value in raw.items()}
        if not any(value.strip() for value in raw.values()):
            continue  # blank spreadsheet row
        key = raw.get(key_column, "").strip()
        errors_before = len(plan.errors)
        if key:
            folded = key.casefold() if plan.kind == "fluids" else key
            if folded in first_seen:
                plan.errors.append(RowError(
                    row_number, key_column,
                    f'Duplicate {key_column} "{key}" in the file (first on row {first_seen[folded]}).',
                ))
            else:
                first_seen[folded] = row_number
        plan_row = _process_row(plan, spec, raw, row_number, key, register, forms_used)
        if len(plan.errors) > errors_before:
            plan_row.action = "error"
            plan_row.form = None
        plan.rows.append(plan_row)
    plan.register = register


def _process_row(plan: Plan, spec: dict, raw: dict, row_number: int, key: str, register: Register,
                 forms_used: dict) -> PlanRow:
    model, key_column = spec["model"], spec["key"]
    field_errors: dict[str, str] = {column: NUL_MESSAGE for column in spec["columns"] if "\x00" in raw.get(column, "")}
    existing = None
    if key and key_column not in field_errors:
        if model is Device:
            existing = register.existing_row(key)
            if existing is not None and existing.device.position_id is None:
                plan.errors.append(RowError(row_number, "tag", (
                    f"Position {key} has no device installed; install one on its swap page "
                    f"(/positions/{key}/swap/), then import its row.")))
                return PlanRow(row_number=row_number, key=key, action="error")
        else:
            found = register.fluids.find(key)
            existing = copy.copy(found) if found is not None else None
    instance = existing if existing is not None else (RegisterRow() if model is Device else model())
    before = {column: _cell(instance, column) for column in spec["columns"]} if existing else {}
    plan_row = PlanRow(row_number=row_number, key=key, action="update" if existing else "create")

    if existing is None and "new" in forms_used:
        data = dict(forms_used["new"])  # a new row starts from the defaults, the same for every new row
    elif model is Device:
        data = {**model_to_dict(instance.position, fields=list(PositionForm.base_fields)),
                **model_to_dict(instance.device, fields=list(DeviceForm.base_fields))}
    else:
        data = model_to_dict(instance, fields=list(FluidForm.base_fields))
    for column in spec["columns"]:
        if column not in raw or column in ("site", "area", "fluid") or column in field_errors:
            continue
        value = raw[column]
        model_field = _field(model, column)
        if isinstance(model_field, models.BooleanField):
            try:
                data[column] = _parse_bool(value)
            except ValueError as exc:
                field_errors[column] = str(exc)
            continue
        if value == "" and model_field.has_default() and not model_field.blank:
            continue  # keep the current value (the default for a new row)
        if column == "flow_units":
            try:
                data[column] = units.code_for(value)
            except units.UnitError:
                field_errors[column] = units.UNKNOWN_UNIT % {"value": value}
            continue
        if model_field.choices and value:
            value = _normalise_choice(model_field, value)
        data[column] = value

    if model is Device:
        data["unfit_reason"] = raw.get("unfit_reason", "")
        _resolve_meter_relations(plan, plan_row, raw, data, field_errors, register)

    for column, message in field_errors.items():
        plan.errors.append(RowError(row_number, column, message))
        data.pop(column, None)

    if model is Device:
        form = RegisterRowForm(data=data, instance=instance, position_form=forms_used["position"],
                               device_form=forms_used["device"])
    else:
        form = forms_used["fluid"](data=data, instance=instance)
    if not form.is_valid():
        for name, messages in form.errors.items():
            column = "" if name == "__all__" else name
            if column in field_errors or (column == "area" and "site" in field_errors):
                continue  # already explained (e.g. unknown fluid or site) — don't add "This field is required."
            for message in messages:
                plan.errors.append(RowError(row_number, column, message))
        return plan_row

    if existing:
        after = {column: _cell(form.instance, column) for column in spec["columns"]}
        plan_row.changes = [
            Change(column, before[column], after[column]) for column in spec["columns"]
            if before[column] != after[column]
        ]
        if not plan_row.changes:
            plan_row.action = "unchanged"
    if plan_row.action in ("create", "update"):
        plan_row.form = form
    return plan_row


def _resolve_meter_relations(plan, plan_row, raw, data, field_errors, register: Register) -> None:
    site_name, area_name = raw.get("site", "").strip(), raw.get("area", "").strip()
    fluid_name = raw.get("fluid", "").strip()

    if "fluid" in field_errors:
        pass  # refused as it stands (null characters)
    elif not fluid_name:
        field_errors["fluid"] = "This field is required."
    else:
        fluid = register.fluids.find(fluid_name)
        if fluid is None:
            field_errors["fluid"] = f'Unknown fluid "{fluid_name}". Import it on the fluids register first.'
        else:
            data["fluid"] = fluid.pk

    if not site_name:
        field_errors.setdefault("site", "This field is required.")
    if not area_name:
        field_errors.setdefault("area", "This field is required.")
    if "site" in field_errors or "area" in field_errors:
        return
    site = register.sites.find(site_name)
    if site is None:
        site = Site(name=site_name)
        try:
            site.full_clean(validate_unique=False)  # not found by name: no site has this name
        except ValidationError as exc:
            field_errors["site"] = " ".join(exc.message_dict.get("name", exc.messages))
            return
        register.add_site(site)
        plan.creates.append(f"site {site_name}")
        plan_row.notes.append(f"creates site {site_name}")
    area = register.find_area(site, area_name)
    if area is None:
        area = Area(site=site, name=area_name)
        try:
            # the site may be new (saved at the apply); no area of the site has this name
            area.full_clean(exclude=["site"], validate_unique=False, validate_constraints=False)
        except ValidationError as exc:
            field_errors["area"] = " ".join(exc.message_dict.get("name", exc.messages))
            return
        register.add_area(area)
        plan.creates.append(f"area {site.name} / {area_name}")
        plan_row.notes.append(f"creates area {site.name} / {area_name}")
    data["area"] = area if area.pk is None else area.pk


# Writing ---------------------------------------------------------------------------------------------------------
# Tens of thousands of new rows (and as many audit rows) are written with one prepared INSERT each table, run for
# every row (executemany; COPY on PostgreSQL), with the ids taken first from the table's own sequence: Django's bulk_create builds the
# statement value by value, and that building was most of an import's time. Values are converted as Django
# converts them for the database (get_db_prep_save), except types the drivers take as they are.
AS_THEY_ARE = {"AutoField", "BigAutoField", "BooleanField", "CharField", "FloatField", "ForeignKey", "IntegerField",
               "OneToOneField", "PositiveIntegerField", "PositiveSmallIntegerField", "SmallIntegerField", "TextField"}


def _fast_writes() -> bool:
    return connection.vendor in ("sqlite", "postgresql")


def _reserve_ids(model, count: int) -> list[int]:
    """`count` new ids of `model`'s table, taken from its sequence so that no other writer uses them."""
    table, column = model._meta.db_table, model._meta.pk.column
    quote = connection.ops.quote_name
    with connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            cursor.execute("SELECT nextval(pg_get_serial_sequence(%s, %s)) FROM generate_series(1, %s)",
                           [quote(table), column, count])
            return [row[0] for row in cursor.fetchall()]
        # SQLite: the UPDATE takes the database's write lock for the rest of the transaction first, so the highest
        # id read next stays the highest; the table's AUTOINCREMENT counter follows the ids written
        cursor.execute("UPDATE sqlite_sequence SET seq = seq WHERE name = %s", [table])
        cursor.execute(f"SELECT max({quote(column)}) FROM {quote(table)}")
        highest = cursor.fetchone()[0] or 0
        cursor.execute("SELECT seq FROM sqlite_sequence WHERE name = %s", [table])
        row = cursor.fetchone()
        start = max(highest, row[0] if row else 0) + 1
        return list(range(start, start + count))


def _converter(model_field, real_connection):
    """The field's conversion for the database; dates and times (few different ones in an import) converted once
    per value."""
    seen = {}

    def convert(value):
        if isinstance(value, (dt.date, dt.datetime)):
            if value not in seen:
                seen[value] = model_field.get_db_prep_save(value, real_connection)
            return seen[value]
        return model_field.get_db_prep_save(value, real_connection)

    return convert


def _insert(model, columns: list, rows: list[list]) -> None:
    """INSERT `rows` (values in the order of `columns`, model fields) into `model`'s table, one statement run
    for every row."""
    if not rows:
        return
    real = connections[connection.alias]  # not the proxy: it looks the connection up on every use
    converters = [None if f.get_internal_type() in AS_THEY_ARE else _converter(f, real) for f in columns]
    prepared = [[value if convert is None or value is None else convert(value)
                 for convert, value in zip(converters, values)] for values in rows]
    quote = connection.ops.quote_name
    table, names = quote(model._meta.db_table), ", ".join(quote(f.column) for f in columns)
    if connection.vendor == "postgresql":  # COPY: the rows streamed in one command
        with connection.cursor() as cursor:
            def copy_rows(sql, params, many, context):
                with cursor.cursor.copy(sql) as copy:
                    for values in prepared:
                        copy.write_row(values)

            # through the connection's execute wrappers (what watches the queries sees it) and with the
            # driver's errors turned into Django's, as for any other statement
            with connection.wrap_database_errors:
                cursor._execute_with_wrappers(f"COPY {table} ({names}) FROM STDIN", None, False, copy_rows)
        return
    sql = f"INSERT INTO {table} ({names}) VALUES ({', '.join(['%s'] * len(columns))})"
    with connection.cursor() as cursor:
        for start in range(0, len(prepared), WRITE_BATCH * 10):
            cursor.executemany(sql, prepared[start:start + WRITE_BATCH * 10])


def insert_with_history(model, objects, user):
    """Insert new `objects` with their audit rows ("created", with the user and each object's change reason), as
    saving them one by one would have made. Sets their ids."""
    if not objects:
        return objects
    for obj in objects:  # what save() does first: a related object saved meanwhile gives its id
        obj._prepare_related_fields_for_save(operation_name="bulk_create")
    if not _fast_writes():
        model.objects.bulk_create(objects, batch_size=WRITE_BATCH)
        if hasattr(model, "history"):
            model.history.bulk_history_create(objects, batch_size=WRITE_BATCH, default_user=user)
        return objects
    for obj, pk in zip(objects, _reserve_ids(model, len(objects))):
        obj.pk = pk
        obj._state.adding, obj._state.db = False, connection.alias
    fields = model._meta.concrete_fields
    _insert(model, list(fields), [[getattr(obj, f.attname) for f in fields] for obj in objects])
    if hasattr(model, "history"):
        history = model.history.model
        tracked = [f.attname for f in history.tracked_fields]
        meta = history._meta
        columns = [meta.get_field(name) for name in tracked]
        columns += [meta.get_field(name) for name in ("history_date", "history_change_reason", "history_type",
                                                       "history_user")]
        now, user_id = timezone.now(), getattr(user, "pk", None)
        _insert(history, columns, [[getattr(obj, name) for name in tracked]
                                   + [now, getattr(obj, "_change_reason", None), "+", user_id] for obj in objects])
    return objects


def _plain(model, objects):
    """Insert new `objects` of a model without audit rows, whose ids nobody reads back."""
    if not _fast_writes():
        model.objects.bulk_create(objects, batch_size=WRITE_BATCH)
        return
    fields = [f for f in model._meta.concrete_fields if not f.primary_key]
    for obj in objects:
        obj._prepare_related_fields_for_save(operation_name="bulk_create")
    _insert(model, fields, [[getattr(obj, f.attname) for f in fields] for obj in objects])


def _write(plan: Plan, user) -> None:
    """Save a checked plan (inside the caller's transaction); the listeners of devices_changed recompute the due
    dates of the devices it touched."""
    register = plan.register
    changed = [row for row in plan.rows if row.action in ("create", "update")]
    if plan.kind == "fluids":
        for row in changed:
            if row.action == "update":
                row.form.save()  # the fluid's meters are re-judged and their tasks follow (Fluid.save, signals)
        insert_with_history(Fluid, [row.form.instance for row in changed if row.action == "create"], user)
        updated = [row.form.instance.pk for row in changed if row.action == "update"]
        if updated:
            devices_changed.send(sender=Device, devices=Device.objects.filter(position__fluid__in=updated))
        return

    Site.objects.bulk_create(register.new_sites, batch_size=WRITE_BATCH)
    Area.objects.bulk_create(register.new_areas, batch_size=WRITE_BATCH)
    updated_ids = []
    for row in changed:
        position = row.form.instance.position
        position.area = position.area  # a new area has its id now: the position takes it
        if row.action == "update":
            row.form.save()  # one by one, as the edit page saves: duty history, risk and tasks follow
            updated_ids.append(row.form.instance.device.pk)
    new_rows = [row.form.instance for row in changed if row.action == "create"]
    new_ids = _create_rows(new_rows, user)
    touched = Q(pk__in=updated_ids)
    if new_ids:
        # the new devices' ids; a device another session added meanwhile is recomputed too, which is harmless
        touched |= Q(pk__range=(min(new_ids), max(new_ids)))
    if len(updated_ids) > 10 * LOOKUP_BATCH:
        # the whole fleet in one pass costs less than a query naming every id
        devices_changed.send(sender=Device, devices=None)
    elif updated_ids or new_ids:
        devices_changed.send(sender=Device, devices=Device.objects.filter(touched))


def _unfit_fields(row: RegisterRow, user) -> dict:
    """What an installation keeps of a device not fit for its duty, imported with a reviewer's reason (as
    plant.installations.install keeps it); nothing for a fit device."""
    reason = getattr(row, "unfit_reason", "")
    findings = installations.unfit_findings(row.device, row.position) if reason else []
    return installations.unfit_fields(findings, reason, user) if findings else {}


def _create_rows(rows: list[RegisterRow], user) -> list[int]:
    """New positions, each with a new device installed there, written in bulk as plant.installations.install
    writes them one by one: the position, the device (in service there, its risk judged), its installation from
    today at the site and its first duty period; the listeners of devices_registered add what else a new device
    brings (the maintenance tasks its duty calls for)."""
    if not rows:
        return []
    today_at: dict[int, object] = {}
    for row in rows:
        site = row.position.area.site
        row.today = today_at.setdefault(id(site), site.today())
    insert_with_history(Position, [row.position for row in rows], user)
    devices, duty_findings = [], []
    for row in rows:
        device = row.device
        device.position = row.position
        device.status = Device.Status.IN_SERVICE
        findings = device.duty_findings()  # a new device: no maintenance findings yet
        device.risk_severity = risk.worst_severity(findings)  # as Device.save judges it
        devices.append(device)
        duty_findings.append(findings)
    insert_with_history(Device, devices, user)
    insert_with_history(Installation, [Installation(device=row.device, position=row.position, since=row.today,
                                                    installed_by=user, starting_point={}, **_unfit_fields(row, user))
                                       for row in rows], user)
    _plain(DutyPeriod, [DutyPeriod(device=row.device, position=row.position, area_id=row.position.area_id,
                                   fluid_id=row.position.fluid_id, since=row.today) for row in rows])
    devices_registered.send(sender=Device, devices=devices, duty_findings=duty_findings, user=user)
    return [device.pk for device in devices]
