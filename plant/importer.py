"""Bulk import / export of the register (fluids and meters) from CSV or XLSX.

Every row goes through the same ModelForms as the edit pages, so the messages a user sees for a bad cell are
the model's own field messages. Planning never saves anything (it runs inside a savepoint that is rolled
back); applying re-runs the same checks inside one transaction and saves all rows or none.

Rules for cells:
* A blank cell in a column whose field has a default and is required (range_min, flow_units, mpe_basis,
  base_interval_days, status) keeps the current value (the model default for a new row); any other blank cell
  means "no value" (and is then subject to the field's own required check).
* A column that is left out entirely keeps the current value (the default for a new row), except the required
  columns, which must be present.
* Booleans accept yes/no, true/false, y/n, 1/0 and blank (= no).
* Flow units are one of the unit codes of calibration/units.py (m3/h, L/s, kg/h, ...) or a usual spelling of one
  (m³/h, l/s, gpm, lb/hr; calibration.units.code_for); any other text is refused at its cell, never guessed.
* Choice columns accept the stored value or the label, case-insensitively. The wetted material is one of the fixed
  list (plant/materials.py) or blank; anything else is refused at its cell (liner, grade and other words go in
  material_details).
* Meters name their site, area and fluid. A missing site or area is created (the plan says so); a missing fluid
  is an error — import fluids first.
"""
from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from pathlib import PurePath

import pandas as pd
from django.core.exceptions import ValidationError
from django.db import models, transaction
from django.forms.models import model_to_dict

from calibration import units
from plant import installations, spreadsheet
from plant.forms import FluidForm, MeterForm, PositionForm
from plant.models import Area, Fluid, Meter, Position, Site, flows_above_range

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
    "meters": {"model": Meter, "form": None, "key": "tag", "columns": METER_COLUMNS},
}
TRUE_WORDS = {"yes", "y", "true", "t", "1"}
FALSE_WORDS = {"no", "n", "false", "f", "0", ""}
# PostgreSQL text cannot hold NUL, so such a cell is refused before it reaches a query (the forms say the same)
NUL_MESSAGE = "Null characters are not allowed."


class ImportFileError(ValueError):
    """The file itself cannot be read (wrong type, corrupt, no header)."""


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


@dataclass
class Plan:
    kind: str
    source_rows: list[dict]
    rows: list[PlanRow] = field(default_factory=list)
    errors: list[RowError] = field(default_factory=list)
    creates: list[str] = field(default_factory=list)  # related objects created on the way, e.g. "area North / Hall B"
    warnings: list[str] = field(default_factory=list)
    applied: bool = False

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
        try:
            frame = pd.read_excel(io.BytesIO(data), engine="openpyxl", sheet_name=0, **options)
        except Exception as exc:  # openpyxl raises several unrelated types for a corrupt workbook
            raise ImportFileError(f"Could not read {filename} as an Excel workbook: {exc}") from exc
    else:
        shown = suffix or "no extension"
        raise ImportFileError(f"Unsupported file type ({shown}). Upload a .csv or .xlsx file.")

    if frame.empty:
        raise ImportFileError("The file has no header row.")
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

    def __init__(self, device: Meter | None = None, position: Position | None = None):
        self.device = device if device is not None else Meter()
        self.position = position if position is not None else (device.position if device is not None else Position())


def _field(model, column):
    """The model field behind a column (for the register: the position's or the device's)."""
    if model is Meter and column in POSITION_COLUMNS:
        return Position._meta.get_field(column)
    return model._meta.get_field(column)


def _cell(obj, column: str) -> str:
    if isinstance(obj, RegisterRow):
        position = obj.position
        if column == "site":
            return position.area.site.name if position.area_id else ""
        if column == "area":
            return position.area.name if position.area_id else ""
        if column == "fluid":
            return position.fluid.name if position.fluid_id else ""
        return _format(getattr(position if column in POSITION_COLUMNS else obj.device, column))
    return _format(getattr(obj, column))


class RegisterRowForm:
    """The position form and the device form of one register row, checked together and saved together.

    A new tag creates the position and a new device installed there (as the register's "new meter" does); an
    existing tag changes the position and the device installed there now. Devices are swapped on the position's
    page, not by import."""

    base_fields = {**PositionForm.base_fields, **MeterForm.base_fields}

    def __init__(self, data, instance: RegisterRow):
        self.instance = instance
        self.new = instance.position.pk is None
        # a device not fit for the duty goes in only with a reviewer's written reason (plant/installations.py);
        # the import takes it from an optional unfit_reason column (the import is a reviewer's task)
        self.unfit_reason = str(data.get("unfit_reason") or "").strip()
        self.position_form = PositionForm(data={k: v for k, v in data.items() if k in PositionForm.base_fields},
                                          instance=instance.position)
        self.device_form = MeterForm(data={k: v for k, v in data.items() if k in MeterForm.base_fields},
                                     instance=instance.device)
        self.errors: dict[str, list[str]] = {}

    def is_valid(self) -> bool:
        # the flows-against-range check needs both rows' new values: it is made once, below, not by the position
        self.instance.position._device_checked_elsewhere = True
        self.instance.device._position_checked_elsewhere = True
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
        with transaction.atomic():
            position = self.position_form.save()
            if self.new:
                device = self.device_form.save(commit=False)
                device.status = Meter.Status.SPARE
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
        queryset = (Meter.objects.filter(position__isnull=False).select_related("position__area__site", "position__fluid")
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
def _spec(kind: str) -> dict:
    try:
        return KINDS[kind]
    except KeyError:
        raise ValueError(f"Unknown register kind {kind!r}; expected one of {', '.join(KINDS)}.") from None


def _find_by_name(queryset, name: str):
    found = queryset.filter(name=name).first()
    if found is None:
        matches = list(queryset.filter(name__iexact=name)[:2])
        if len(matches) == 1:
            found = matches[0]
    return found


def _parse_bool(value: str):
    word = value.strip().lower()
    if word in TRUE_WORDS:
        return True
    if word in FALSE_WORDS:
        return False
    raise ValueError(f'Enter yes or no (got "{value}").')


def _normalise_choice(model_field, value: str) -> str:
    lowered = value.lower()
    for stored, label in model_field.flatchoices:
        if lowered in (str(stored).lower(), str(label).lower()):
            return stored
    return value


class _Rollback(Exception):
    pass


def plan_import(kind: str, rows: list[dict]) -> Plan:
    """Check every row and say what an import would do. Saves nothing."""
    plan = Plan(kind=kind, source_rows=rows)
    try:
        with transaction.atomic():
            _process(plan, save=False)
            raise _Rollback  # sites / areas created to validate meter rows must not survive planning
    except _Rollback:
        pass
    return plan


def apply_import(plan: Plan) -> Plan:
    """Apply a checked plan: re-validate every row and save all of them in one transaction, or none.

    Returns the plan as re-checked at apply time (``applied`` is True only if everything was saved). If the plan
    had errors nothing is attempted. Anything raised while saving rolls the whole import back and propagates.
    """
    if plan.errors:
        return plan
    fresh = Plan(kind=plan.kind, source_rows=plan.source_rows)
    try:
        with transaction.atomic():
            _process(fresh, save=True)
            if fresh.errors:  # the register changed since the dry run; save none of it
                raise _Rollback
    except _Rollback:
        return fresh
    fresh.applied = True
    return fresh


def _process(plan: Plan, save: bool) -> None:
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

    first_seen: dict[str, int] = {}
    for index, raw in enumerate(plan.source_rows):
        row_number = index + 2
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
        plan_row = _process_row(plan, spec, raw, row_number, key, save)
        if len(plan.errors) > errors_before:
            plan_row.action = "error"
        plan.rows.append(plan_row)


def _process_row(plan: Plan, spec: dict, raw: dict, row_number: int, key: str, save: bool) -> PlanRow:
    model, form_class, key_column = spec["model"], spec["form"], spec["key"]
    field_errors: dict[str, str] = {column: NUL_MESSAGE for column in spec["columns"] if "\x00" in raw.get(column, "")}
    existing = None
    if key and key_column not in field_errors:
        if model is Meter:
            position = Position.objects.select_related("area__site", "fluid").filter(tag=key).first()
            if position is not None:
                device = position.installed_device()
                if device is None:
                    plan.errors.append(RowError(row_number, "tag", (
                        f"Position {key} has no device installed; install one on its swap page "
                        f"(/meters/{key}/swap/), then import its row.")))
                    return PlanRow(row_number=row_number, key=key, action="error")
                device.position = position
                existing = RegisterRow(device, position)
        else:
            queryset = model.objects.all()
            existing = queryset.filter(**{key_column: key}).first()
            if existing is None:
                existing = _find_by_name(queryset, key)
    instance = existing if existing is not None else (RegisterRow() if model is Meter else model())
    before = {column: _cell(instance, column) for column in spec["columns"]} if existing else {}
    plan_row = PlanRow(row_number=row_number, key=key, action="update" if existing else "create")

    if model is Meter:
        form_class = RegisterRowForm
        data = {**model_to_dict(instance.position, fields=list(PositionForm.base_fields)),
                **model_to_dict(instance.device, fields=list(MeterForm.base_fields))}
    else:
        data = model_to_dict(instance, fields=list(form_class.base_fields))
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

    if model is Meter:
        data["unfit_reason"] = raw.get("unfit_reason", "")
        _resolve_meter_relations(plan, plan_row, raw, data, field_errors, existing)

    for column, message in field_errors.items():
        plan.errors.append(RowError(row_number, column, message))
        data.pop(column, None)

    form = form_class(data=data, instance=instance)
    if not form.is_valid():
        for name, messages in form.errors.items():
            column = "" if name == "__all__" else name
            if column in field_errors or (column == "area" and "site" in field_errors):
                continue  # already explained (e.g. unknown fluid or site) — don't add "This field is required."
            for message in messages:
                plan.errors.append(RowError(row_number, column, message))
        return plan_row

    after = {column: _cell(form.instance, column) for column in spec["columns"]}
    if existing:
        plan_row.changes = [
            Change(column, before[column], after[column]) for column in spec["columns"]
            if before[column] != after[column]
        ]
        if not plan_row.changes:
            plan_row.action = "unchanged"
    if save and not plan.errors and plan_row.action in ("create", "update"):
        form.save()
    return plan_row


def _resolve_meter_relations(plan, plan_row, raw, data, field_errors, existing) -> None:
    site_name, area_name = raw.get("site", "").strip(), raw.get("area", "").strip()
    fluid_name = raw.get("fluid", "").strip()

    if "fluid" in field_errors:
        pass  # refused as it stands (null characters)
    elif not fluid_name:
        field_errors["fluid"] = "This field is required."
    else:
        fluid = _find_by_name(Fluid.objects.all(), fluid_name)
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
    site = _find_by_name(Site.objects.all(), site_name)
    if site is None:
        site = Site(name=site_name)
        try:
            site.full_clean()
        except ValidationError as exc:
            field_errors["site"] = " ".join(exc.message_dict.get("name", exc.messages))
            return
        site.save()
        plan.creates.append(f"site {site_name}")
        plan_row.notes.append(f"creates site {site_name}")
    area = _find_by_name(site.areas.all(), area_name)
    if area is None:
        area = Area(site=site, name=area_name)
        try:
            area.full_clean()
        except ValidationError as exc:
            field_errors["area"] = " ".join(exc.message_dict.get("name", exc.messages))
            return
        area.save()
        plan.creates.append(f"area {site.name} / {area_name}")
        plan_row.notes.append(f"creates area {site.name} / {area_name}")
    data["area"] = area.pk
