from django import forms
from django.core.exceptions import ValidationError
from django.db import models

import datetime as dt

from plant import localtime
from plant.units import UNKNOWN_UNIT, label_for
from plant.installations import Removal
from plant.models import UNKNOWN_MATERIAL, Fluid, Device, Position, Site

YES_WORDS = frozenset({"on", "yes", "y", "true", "t", "1"})
NO_WORDS = frozenset({"off", "no", "n", "false", "f", "0", ""})


def _is_yes(value) -> bool:
    return value is True or (isinstance(value, str) and value.strip().lower() in YES_WORDS)


class YesNoCheckbox(forms.CheckboxInput):
    """A checkbox that hands the posted word to the field unchanged (a plain checkbox turns "no" into True)."""

    def __init__(self, attrs=None, check_test=None):
        super().__init__(attrs, check_test=check_test or _is_yes)

    def value_from_datadict(self, data, files, name):
        if name not in data:
            return False  # an unticked box is not posted
        return data.get(name)


class YesNoField(forms.BooleanField):
    """A yes/no flag that accepts a ticked box ("on") and the usual yes/no words, and refuses anything else."""

    widget = YesNoCheckbox
    default_error_messages = {"invalid_choice": 'Enter yes or no (got "%(value)s").'}

    def to_python(self, value):
        if isinstance(value, bool) or value is None:
            return bool(value)
        word = str(value).strip().lower()
        if word in YES_WORDS:
            return True
        if word in NO_WORDS:
            return False
        raise ValidationError(self.error_messages["invalid_choice"], code="invalid_choice", params={"value": value})

    def has_changed(self, initial, data):
        if self.disabled:
            return False
        try:
            return self.to_python(initial) != self.to_python(data)
        except ValidationError:
            return True


def _yes_no_fields(model):
    return {f.name: YesNoField for f in model._meta.fields if isinstance(f, models.BooleanField)}


class FluidForm(forms.ModelForm):
    class Meta:
        model = Fluid
        fields = "__all__"
        field_classes = _yes_no_fields(Fluid)


class PositionForm(forms.ModelForm):
    """The position: tag, where it is, its duty and what the process needs there."""

    class Meta:
        model = Position
        fields = "__all__"
        error_messages = {"flow_units": {"invalid_choice": UNKNOWN_UNIT}}


class DeviceForm(forms.ModelForm):
    """The device: what it is and how it was calibrated. Where it is installed changes only by a swap."""

    class Meta:
        model = Device
        exclude = ["status"]
        error_messages = {"wetted_material": {"invalid_choice": UNKNOWN_MATERIAL},
                          "flow_units": {"invalid_choice": UNKNOWN_UNIT}}


class SwapForm(forms.Form):
    """Remove the device at a position and install another: a spare from stores, or a new one."""

    device = forms.ModelChoiceField(
        queryset=Device.objects.none(), label="Device to install",
        error_messages={"required": "Choose the device to install.",
                        "invalid_choice": "That device is not a spare on the shelf any more; choose another."})
    brand_new = YesNoField(required=False, label="New from the maker (no calibration of ours yet; its maker's "
                                                 "certificate stands until the first one)")
    on_date = forms.DateField(label="Date of the swap", widget=forms.DateInput(attrs={"type": "date"}, format="%Y-%m-%d"))
    reason = forms.CharField(max_length=200, label="Why the installed device comes out",
                             error_messages={"required": "Say why the installed device is removed."})
    removed_to = forms.ChoiceField(label="Removed device goes", choices=[
        (Removal.SHELF, "to stores as a spare"), (Removal.RETIRED, "out of use (scrapped or returned)")],
        initial=Removal.SHELF)
    unfit_reason = forms.CharField(
        required=False, max_length=1000, widget=forms.Textarea(attrs={"rows": 3}),
        label="Reviewer's reason to install a device not fit for this duty",
        help_text="Only for a device the duty rules say is not fit here; kept with the installation and shown on "
                  "the position's page.")

    def __init__(self, *args, position, may_accept_unfit=False, **kwargs):
        super().__init__(*args, **kwargs)
        self.position = position
        if not may_accept_unfit:
            del self.fields["unfit_reason"]
        self.fields["device"].queryset = Device.objects.filter(position__isnull=True, status=Device.Status.SPARE)
        self.fields["device"].label_from_instance = lambda d: (
            f"{d.device_label} · {d.get_principle_display()} · {d.range_min:g}–{d.range_max:g} {label_for(d.flow_units)}"
            f" · due {d.next_due_date:%Y-%m-%d}" if d.next_due_date else
            f"{d.device_label} · {d.get_principle_display()} · {d.range_min:g}–{d.range_max:g} {label_for(d.flow_units)}"
            " · never calibrated")
        self.fields["on_date"].initial = position.area.site.today()

    def clean_on_date(self):
        day = self.cleaned_data["on_date"]
        if day > self.position.area.site.today() + dt.timedelta(days=1):
            raise ValidationError("The date of the swap is in the future.")
        return day


class SiteFilterForm(forms.Form):
    """One site, or all: the filter of the statistics pages (calibration and maintenance)."""
    site = forms.ModelChoiceField(queryset=Site.objects.order_by("name"), required=False, empty_label="all sites")

    def today(self):
        """Today at the chosen site; for all sites (or a refused filter), the plant's date."""
        site = self.cleaned_data.get("site") if self.is_bound and self.is_valid() else None
        return site.today() if site is not None else localtime.today()
