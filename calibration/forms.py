"""Tablet entry of a calibration: the event header and two point grids (as-found, as-left)."""
import math
from decimal import Decimal, InvalidOperation

from django import forms
from django.db import transaction

from calibration import plausibility, uncertainty
from plant import units
from calibration.errors import mpe_in_flow_units, point_error
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard, entry_can_convert
from plant.forms import YesNoField

NOMINAL_POINTS = (10, 25, 50, 75, 100)
NUMERIC = {"inputmode": "decimal", "autocomplete": "off"}


class EventForm(forms.ModelForm):
    """The header. Who performed the work is the logged-in user, unless an outside contractor is named.

    The reference standards offered are those suited to the meter (ReferenceStandard.offered_for): on the empty
    form, also in date today; on a POST, one out of date on the date of calibration is refused at the field
    with its due date (CalibrationEntry.is_valid)."""

    reference_standards = forms.ModelMultipleChoiceField(
        queryset=ReferenceStandard.objects.all(), widget=forms.CheckboxSelectMultiple,
        error_messages={"required": "Choose the reference standard used.",
                        "invalid_choice": "Reference standard %(value)s is withdrawn or does not suit this meter "
                                          "(phase, measuring principle or range); choose one of those listed."},
    )
    adjusted = YesNoField(label="Adjustment made", required=False)
    values_checked = YesNoField(
        label="Readings held are right as typed", required=False,
        help_text="Tick only after looking again at each reading held with “Check this value”.")

    class Meta:
        model = CalibrationEvent
        fields = ["performed_on", "contractor", "reference_standards", "procedure", "condition_received",
                  "deviations", "ambient_temp_c", "fluid_temp_c", "pressure_bar", "density_kg_m3", "reason", "adjusted",
                  "decision_rule", "notes"]
        labels = {"contractor": "Outside contractor (only if a contractor did the work)",
                  "deviations": "Deviations from the method (blank: none)"}
        help_texts = {"contractor": "Leave blank when you did the work yourself: you are recorded as the performer."}
        widgets = {
            "performed_on": forms.DateInput(attrs={"type": "date"}, format="%Y-%m-%d"),  # what type=date expects
            "procedure": forms.Textarea(attrs={"rows": 3}),
            "condition_received": forms.Textarea(attrs={"rows": 2}),
            "deviations": forms.Textarea(attrs={"rows": 2}),
            "notes": forms.Textarea(attrs={"rows": 2}),
            "ambient_temp_c": forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
            "fluid_temp_c": forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
            "pressure_bar": forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
            "density_kg_m3": forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
        }

    def __init__(self, *args, device=None, **kwargs):
        super().__init__(*args, **kwargs)
        condition = self.fields["condition_received"]
        condition.required = True
        condition.error_messages["required"] = ("Describe the meter's condition as received (e.g. installed, in "
                                                "service, no visible damage).")
        if device is not None:
            # accepted: any suitable standard, so one expired on the date of calibration gets its own message;
            # listed: those in date today, and whatever was ticked
            field = self.fields["reference_standards"]
            # accepted also: a standard whose units cannot be converted here, so it is refused with the reason
            field.queryset = ReferenceStandard.offered_for(device, convertible_only=False)
            key = self.add_prefix("reference_standards")
            # a correction starts from the standards of the record it corrects, listed even if out of date today
            sent = ((self.data.getlist(key) if hasattr(self.data, "getlist") else self.data.get(key)) if self.is_bound
                    else self.initial.get("reference_standards", []))
            ticked = {str(v) for v in (sent if isinstance(sent, (list, tuple)) else [sent]) if v is not None}
            today = device.today()  # the date at the meter's site
            field.widget.choices = [
                (value, f"{label} · {value.instance.units_label}") for value, label in field.choices
                if (value.instance.due_date >= today and entry_can_convert(value.instance.units, device.flow_units))
                or str(value) in ticked]
            self.fields["density_kg_m3"].help_text = (
                "Needed when the reference standard measures mass and this meter volume (it is in "
                f"{units.label_for(device.flow_units)}), or the other way round: the density at the conditions of the "
                "calibration converts the reference readings.")


def _condition_cleaner(name):
    def clean(self):
        value = self.cleaned_data.get(name)
        if name.endswith("_temp_c") and value is not None and value < -273.15:
            return value  # the model's own validator says "below absolute zero"
        if value is not None:
            try:
                problem = plausibility.condition_out_of_bounds(name, value)
            except ValueError:
                problem = "Enter a finite number."
            if problem:
                raise forms.ValidationError(problem)
        return value
    return clean


for _name in plausibility.CONDITION_BOUNDS:
    setattr(EventForm, f"clean_{_name}", _condition_cleaner(_name))


class CorrectionForm(EventForm):
    """The header of a correction (ISO/IEC 17025:2017 §7.8.8): the same fields, and why the record is corrected."""

    class Meta(EventForm.Meta):
        fields = ["correction_reason", *EventForm.Meta.fields]
        labels = {**EventForm.Meta.labels, "correction_reason": "Reason for the correction (printed on the new certificate)"}
        widgets = {**EventForm.Meta.widgets, "correction_reason": forms.Textarea(attrs={"rows": 2})}

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        reason = self.fields["correction_reason"]
        reason.required = True
        reason.error_messages["required"] = ("State why the calibration is corrected (e.g. indications entered "
                                             "against the wrong points): it is printed on the new certificate.")


HEADER_COPIED = ["performed_on", "contractor", "procedure", "condition_received", "deviations", "ambient_temp_c",
                 "fluid_temp_c", "pressure_bar", "density_kg_m3", "reason", "adjusted", "decision_rule", "notes"]


def correction_initial(original):
    """The tablet form filled with a signed record's header and readings (as entered), to correct what was wrong."""
    header = {name: getattr(original, name) for name in HEADER_COPIED}
    header["reference_standards"] = [s.pk for s in original.reference_standards.all()]
    grids = {}
    for kind in (CalibrationPoint.Kind.AS_FOUND, CalibrationPoint.Kind.AS_LEFT):
        grids[kind] = [{"nominal_pct": p.nominal_pct, "reference_value": p.reference_as_entered,
                        "indicated_value": p.indicated_value, "repeats": " ".join(f"{v:g}" for v in p.repeats),
                        "resolution": p.resolution or None}
                       for p in original.points_of(kind)] or None
    return header, grids


def density_required_message(standard_units, meter_units):
    return (f"The reference standard reads in {units.label_for(standard_units)} and this meter in "
            f"{units.label_for(meter_units)}: enter the fluid density at the conditions of the calibration, so the "
            "reference readings can be converted.")


def inconvertible_message(standard, meter_units):
    needs = units.conversion_needs(standard.units, meter_units)
    what = {"line_conditions": "the line's absolute pressure and temperature",
            "reference_density": "the gas density at reference conditions"}
    missing = " and ".join(what[n] for n in sorted(needs) if n in what)
    return (f"Reference standard {standard.identification} reads in {standard.units_label} and this meter in "
            f"{units.label_for(meter_units)}: converting between them needs {missing}, which this form does not take. "
            "Choose a standard whose readings convert to the meter's units.")


class ReferenceConversion:
    """How a row's reference reading, entered in the standard's units, becomes the meter's units.

    ``units``: the code the readings are entered in; ``known``: False when the units of the readings cannot be
    settled (standards of different units ticked, a pair the form cannot convert, the density missing): the rows
    are then not range-checked, as the entry is refused at the standards or density field anyway."""

    def __init__(self, meter_units, entered_units=None, density=None, known=True):
        self.meter_units = meter_units
        self.units = entered_units or meter_units
        self.density = density
        self.known = known

    @property
    def converts(self):
        return self.known and self.units != self.meter_units

    def to_meter(self, value):
        if not self.converts:
            return value
        return units.convert(value, self.units, self.meter_units, density_kg_m3=self.density)

    def factor(self):
        return self.to_meter(1.0) if self.converts else 1.0


def _finite(value, label):
    if value is not None and not math.isfinite(value):
        raise forms.ValidationError(f"{label} must be a number.")
    return value


class PointRowForm(forms.Form):
    nominal_pct = forms.FloatField(widget=forms.HiddenInput)
    reference_value = forms.FloatField(
        required=False, widget=forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
        error_messages={"invalid": "Enter the reference flow as a number."},
    )
    indicated_value = forms.FloatField(
        required=False, widget=forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
        error_messages={"invalid": "Enter the meter's indication as a number."},
    )
    repeats = forms.CharField(required=False, help_text="optional repeat readings, separated by spaces or ;")
    resolution = forms.FloatField(
        required=False, min_value=0, widget=forms.NumberInput(attrs={**NUMERIC, "step": "any"}),
        error_messages={"invalid": "Enter the resolution as a number.", "min_value": "Resolution cannot be negative."},
    )

    def __init__(self, *args, device=None, conversion=None, **kwargs):
        self.device = device
        self.conversion = conversion or ReferenceConversion(device.flow_units if device is not None else "")
        self.values_checked = False  # the header's tick: readings held with "check this value" are confirmed
        super().__init__(*args, **kwargs)

    def _hold_implausible(self, data):
        """Hold a reading further from the reference than the meter could explain (calibration/plausibility.py)
        until the header's tick confirms it."""
        device, ref, ind = self.device, data.get("reference_value"), data.get("indicated_value")
        if self.values_checked or self.errors or device is None or ref is None or ind is None or not self.conversion.known:
            return
        try:
            mpe = mpe_in_flow_units(device.mpe_value, device.mpe_basis, ref, device.range_max - device.range_min)
            held = plausibility.reading_to_check(ref, ind, device.range_min, device.range_max, mpe,
                                                 units.label_for(device.flow_units))
        except (ValueError, ArithmeticError, TypeError):
            return  # the row's own checks say what is wrong
        if held:
            self.add_error("repeats" if data.get("repeats") else "indicated_value",
                           held + " If it is right as typed, tick “Readings held are right as typed” and save again.")

    def clean_reference_value(self):
        return _finite(self.cleaned_data.get("reference_value"), "The reference flow")

    def clean_indicated_value(self):
        return _finite(self.cleaned_data.get("indicated_value"), "The indication")

    def clean_repeats(self):
        text = (self.cleaned_data.get("repeats") or "").replace(";", " ").replace(",", " ")
        try:
            values = [float(v) for v in text.split()]
        except ValueError:
            raise forms.ValidationError("Repeat readings must be numbers separated by spaces.")
        if any(not math.isfinite(v) for v in values):
            raise forms.ValidationError("Repeat readings must be numbers.")
        return values

    def is_blank(self):
        data = getattr(self, "cleaned_data", {})
        return data.get("reference_value") is None and data.get("indicated_value") is None and not data.get("repeats")

    def _typed_half_digit(self):
        """Half a unit in the last digit of the indication as typed (50.4 -> 0.05, 50 -> 0.5)."""
        raw = (self.data.get(self.add_prefix("indicated_value")) or "").strip()
        try:
            exponent = Decimal(raw).as_tuple().exponent
        except InvalidOperation:
            return 0.0
        return 0.5 * 10.0 ** exponent if isinstance(exponent, int) else 0.0

    def clean(self):
        """One rule for repeat readings: when there are any, the indication used is their mean. The indicated
        value may then be left blank, or must be that mean to the digits typed (50.03 for 50.0, 50.0, 50.1);
        what is stored as the indicated value is the mean itself, and the pages say it is a mean."""
        data = super().clean()
        if self.errors or self.is_blank():
            return data
        ref, ind = data.get("reference_value"), data.get("indicated_value")
        repeats = data.get("repeats")
        if ref is None:
            self.add_error("reference_value", "Enter the reference flow.")
        if ind is None and not repeats:
            self.add_error("indicated_value", "Enter the meter's indication.")
        if repeats:
            mean = sum(repeats) / len(repeats)
            if (ind is not None and math.isfinite(mean)
                    and abs(ind - mean) > self._typed_half_digit() + 1e-12 * max(abs(mean), 1.0)):
                self.add_error(
                    "indicated_value",
                    f"The indication {ind:g} is not the mean of the repeat readings ({mean:.6g}); with repeat "
                    "readings the mean is used: leave the indication blank, or correct the indication or the "
                    "readings.")
            else:
                data["indicated_value"] = mean
        # the reading as entered (the standard's units) is kept; the error is computed in the meter's units
        data["reference_entered"] = ref
        conversion = self.conversion
        if ref is not None and self.device is not None:
            device = self.device
            label = units.label_for(device.flow_units)
            converted = ref
            if conversion.converts:
                converted = data["reference_value"] = conversion.to_meter(ref)
            if ref < 0:
                self.add_error("reference_value", "The reference flow cannot be negative.")
            elif not conversion.known:
                pass  # refused at the standards or density field; the range cannot be judged in unknown units
            elif not math.isfinite(converted):
                self.add_error("reference_value", "The reference flow is too large to convert to the meter's units; "
                                                  "check the value, the standard and the density.")
            elif converted < device.range_min or converted > device.range_max:
                shown = (f"{ref:g} {units.label_for(conversion.units)} ({converted:.6g} {label})" if conversion.converts
                         else f"{ref:g} {label}")
                self.add_error("reference_value",
                               f"{shown} is outside the meter's calibrated range "
                               f"{device.range_min:g}–{device.range_max:g} {label}.")
            elif converted == 0 and device.mpe_basis == "pct_reading":
                self.add_error("reference_value", "A % of reading error needs a reference flow above zero.")
        self._hold_implausible(data)
        return data

    def check_results(self, standards, rule):
        """Refuse a row whose results (error, U, decision) cannot be computed as finite numbers; return the computed
        (unsaved) point when they can, else None.

        Runs the same computation as the save, on an unsaved point, so nothing can fail later with a server error.
        """
        data = self.cleaned_data
        point = CalibrationPoint(
            nominal_pct=data["nominal_pct"], reference_value=data["reference_value"],
            reference_entered=data.get("reference_entered"),
            indicated_value=data["indicated_value"], repeats=data["repeats"], resolution=data["resolution"] or 0.0,
        )
        try:
            point.compute(self.device, standards, rule, factor=self.conversion.factor())
            if math.isfinite(point.error) and math.isfinite(point.expanded_uncertainty):
                return point
        except (ValueError, ArithmeticError):
            pass
        repeats = data["repeats"]
        if repeats and not math.isfinite(sum(repeats) / len(repeats)):
            self.add_error("repeats", "The repeat readings are too large to average; check the values and units.")
            return
        indicated = sum(repeats) / len(repeats) if repeats else data["indicated_value"]
        try:
            error = point_error(data["reference_value"], indicated, self.device.mpe_basis,
                                self.device.range_max - self.device.range_min)
        except (ValueError, ArithmeticError):
            error = math.inf
        if not math.isfinite(error):
            self.add_error("repeats" if repeats else "indicated_value",
                           "The indication is too far from the reference flow to give a finite error; "
                           "check the value and its units.")
            return
        self.add_error("resolution" if data["resolution"] else ("repeats" if repeats else "reference_value"),
                       "The uncertainty at this point cannot be computed from these values (a number is too large "
                       "or too small); check the resolution, the repeat readings and the reference flow.")
        return None


class BasePointGrid(forms.BaseFormSet):
    def __init__(self, *args, device=None, **kwargs):
        self.device = device
        kwargs.setdefault("initial", [{"nominal_pct": n} for n in NOMINAL_POINTS])
        super().__init__(*args, **kwargs)

    def get_form_kwargs(self, index):
        return {"device": self.device}

    def kept_forms(self):
        """The rows not ticked "remove" (a removed row is neither checked nor saved)."""
        return [f for f in self.forms if not (getattr(f, "cleaned_data", None) or {}).get("DELETE")]

    def filled_rows(self):
        return [f.cleaned_data for f in self.kept_forms() if f.cleaned_data and not f.is_blank()]

    def clean(self):
        # a negative row count would silently drop every row sent (the page never sends one)
        if self.management_form.cleaned_data.get(forms.formsets.TOTAL_FORM_COUNT, 0) < 0:
            raise forms.ValidationError(
                "The number of rows sent is not valid; reload the page and enter the points again."
            )


def entry_post_data(header: dict, as_found=(), as_left=()) -> dict:
    """The POST body of the tablet form: header fields by name, point rows as (reference, indicated),
    row i at the nominal NOMINAL_POINTS[i % 5]. For scripted entries (the benchmark, the tests)."""
    data = {f"ev-{name}": value for name, value in header.items()}
    for prefix, rows in (("af", as_found), ("al", as_left)):
        data.update({f"{prefix}-TOTAL_FORMS": str(len(rows)), f"{prefix}-INITIAL_FORMS": "0",
                     f"{prefix}-MIN_NUM_FORMS": "0", f"{prefix}-MAX_NUM_FORMS": "20"})
        for i, (reference, indicated) in enumerate(rows):
            data[f"{prefix}-{i}-nominal_pct"] = str(NOMINAL_POINTS[i % len(NOMINAL_POINTS)])
            data[f"{prefix}-{i}-reference_value"] = str(reference)
            data[f"{prefix}-{i}-indicated_value"] = str(indicated)
    return data


PointGrid = forms.formset_factory(PointRowForm, formset=BasePointGrid, extra=0, min_num=0, max_num=20, can_delete=True)


class CalibrationEntry:
    """The whole tablet form; validates everything first, then saves in one transaction."""

    def __init__(self, device, data=None, user=None, corrects=None, draft=None):
        """`corrects`: the signed record this entry corrects (ISO/IEC 17025 §7.8.8); the form starts from its values.
        `draft`: a draft being edited; the form starts from its values and saving rewrites it (and its points)."""
        from django.conf import settings

        self.device = device
        self.user = user
        self.draft = draft
        self.corrects = corrects if draft is None else draft.supersedes
        bound = data is not None
        initial = {"decision_rule": settings.CALIBRATION["decision_rule"], "performed_on": device.today()}  # the date at the meter's site
        grids = {}
        if self.corrects is not None:
            initial, grids = correction_initial(self.corrects)
        if draft is not None:
            initial, grids = correction_initial(draft)
            initial["correction_reason"] = draft.correction_reason
        header = CorrectionForm if self.corrects is not None else EventForm
        self.low_tur_policy = settings.CALIBRATION.get("low_tur_policy", "require_guarded")
        instance = {"instance": draft} if draft is not None else {}
        self.event_form = (header(data, prefix="ev", device=device, **instance) if bound
                           else header(prefix="ev", initial=initial, device=device))
        self.as_found, self.as_left = (
            PointGrid(data, prefix=prefix, device=device) if bound
            else PointGrid(prefix=prefix, device=device, **({"initial": grids[kind]} if grids.get(kind) else {}))
            for prefix, kind in (("af", CalibrationPoint.Kind.AS_FOUND), ("al", CalibrationPoint.Kind.AS_LEFT)))
        self.non_field_errors = []
        self.conversion = ReferenceConversion(device.flow_units)

    def _conversion(self):
        """The units of the reference readings (the ticked standards') and how they become the meter's; a
        pair that cannot be converted, or a missing density, is refused at its field here."""
        form, meter_units = self.event_form, self.device.flow_units
        data = getattr(form, "cleaned_data", {})
        standards = list(data.get("reference_standards") or [])
        if not standards:
            return ReferenceConversion(meter_units)  # refused at the field; rows checked in the meter's units
        found = {s.units for s in standards}
        if len(found) > 1:
            form.add_error("reference_standards",
                           "The standards ticked read in different units ("
                           + ", ".join(sorted(units.label_for(u) for u in found))
                           + "); the reference readings are entered in one: tick standards of one unit.")
            return ReferenceConversion(meter_units, known=False)
        entered = found.pop()
        if not entry_can_convert(entered, meter_units):
            form.add_error("reference_standards", inconvertible_message(standards[0], meter_units))
            return ReferenceConversion(meter_units, entered, known=False)
        density = data.get("density_kg_m3")
        if "density" in units.conversion_needs(entered, meter_units) and density is None:
            if "density_kg_m3" not in form.errors:
                form.add_error("density_kg_m3", density_required_message(entered, meter_units))
            return ReferenceConversion(meter_units, entered, known=False)
        return ReferenceConversion(meter_units, entered, density)

    def is_valid(self):
        event_ok = self.event_form.is_valid()
        self.conversion = self._conversion()
        checked = bool(getattr(self.event_form, "cleaned_data", {}).get("values_checked"))
        for grid in (self.as_found, self.as_left):
            for form in grid.forms:
                form.conversion = self.conversion
                form.values_checked = checked
        ok = all([event_ok, not self.event_form.errors, self.as_found.is_valid(), self.as_left.is_valid()])
        if not ok:
            return False
        found_rows = self.as_found.filled_rows()
        if not found_rows:
            self.non_field_errors.append("Enter at least one as-found point.")
        for form in self.as_found.kept_forms():
            if form.is_blank():
                form.add_error("reference_value", "Enter the reference flow at this point, or tick Remove on its row.")
        adjusted = self.event_form.cleaned_data.get("adjusted")
        if adjusted and not self.as_left.filled_rows():
            self.non_field_errors.append("An adjustment was made: enter the as-left points.")
            for form in self.as_left.kept_forms():
                form.add_error("reference_value", "As-left point required after an adjustment.")
        date = self.event_form.cleaned_data.get("performed_on")
        problems = []
        for standard in self.event_form.cleaned_data.get("reference_standards", []):
            problems.extend(standard.problems(date))
        for p in problems:
            self.event_form.add_error("reference_standards", p)
        # a reading outside a standard's usable range: refused at the reference field of its row
        for grid in (self.as_found, self.as_left):
            for form in grid.kept_forms():
                if form.errors or form.is_blank() or form.cleaned_data.get("reference_entered") is None:
                    continue
                for standard in self.event_form.cleaned_data.get("reference_standards", []):
                    message = standard.range_problem([form.cleaned_data["reference_entered"]])
                    if message:
                        form.add_error("reference_value", message)
                        problems.append(message)
        standards = self.event_form.cleaned_data.get("reference_standards")
        if not problems and standards:
            rule = self.event_form.cleaned_data.get("decision_rule")
            computed = []
            for grid in (self.as_found, self.as_left):
                for form in grid.kept_forms():
                    if not form.errors and not form.is_blank():
                        computed.append(form.check_results(list(standards), rule))
            low = [p for p in computed if p is not None and p.tur < uncertainty.TUR_WARNING]
            if low and uncertainty.low_tur_requires_guarded(rule, [p.tur for p in low], self.low_tur_policy):
                label = units.label_for(self.device.flow_units)
                where = ", ".join(f"{p.reference_value:.6g} {label} ({p.tur:.1f}:1)" for p in low)
                self.event_form.add_error(
                    "decision_rule",
                    f"The test uncertainty ratio is below {uncertainty.TUR_WARNING:g}:1 at {where}: the "
                    + ("decision-rule policy requires risk-based acceptance (JCGM 106, PFA within the target) then. "
                       "Choose risk-based acceptance, or use a better reference standard."
                       if self.low_tur_policy == "require_risk" else
                       "decision-rule policy requires guarded acceptance (ILAC-G8, w = U) then. Choose guarded "
                       "acceptance, or use a better reference standard."))
        return not (self.non_field_errors or self.event_form.errors or any(f.errors for f in self.as_found.kept_forms())
                    or any(f.errors for f in self.as_left.kept_forms()))

    @transaction.atomic
    def save(self):
        event = self.event_form.save(commit=False)
        event.device = self.device
        event.meter_units = self.device.flow_units
        event.reference_units = self.conversion.units
        original = self.corrects
        if original is not None:
            event.supersedes = original
        if self.draft is not None:
            # an edited draft keeps who entered and who performed it; its rows are entered again from the form
            if event.contractor:
                event.performed_by, event.technician = None, event.contractor
            elif self.draft.performed_by_id is None and self.draft.created_by_id:
                event.performed_by = self.draft.created_by
                event.technician = self.draft.created_by.get_full_name() or self.draft.created_by.username
            event.save()
            self.event_form.save_m2m()
            event.points.all().delete()
            return self._save_points(event)
        event.created_by = self.user
        if event.contractor:
            event.performed_by, event.technician = None, event.contractor
        elif original is not None and not original.contractor:
            # a correction restates the same calibration: performed by whoever performed it, entered by this user
            event.performed_by, event.technician = original.performed_by, original.technician
        else:
            event.performed_by = self.user
            event.technician = (self.user.get_full_name() or self.user.username) if self.user else ""
        event.save()
        self.event_form.save_m2m()
        return self._save_points(event)

    def _save_points(self, event):
        standards = list(event.reference_standards.all())
        factor = self.conversion.factor()
        for kind, grid in ((CalibrationPoint.Kind.AS_FOUND, self.as_found), (CalibrationPoint.Kind.AS_LEFT, self.as_left)):
            for row in grid.filled_rows():
                point = CalibrationPoint(
                    event=event, kind=kind, nominal_pct=row["nominal_pct"], reference_value=row["reference_value"],
                    reference_entered=row["reference_entered"],
                    indicated_value=row["indicated_value"], repeats=row["repeats"], resolution=row["resolution"] or 0.0,
                )
                point.compute(self.device, standards, event.decision_rule, factor=factor)
                point.save()
        event.evaluate()
        event.save()
        return event
