from django import forms
from django.core.exceptions import ValidationError
from django.db import models

from calibration.units import UNKNOWN_UNIT
from plant.models import UNKNOWN_MATERIAL, Fluid, Meter

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


class MeterForm(forms.ModelForm):
    class Meta:
        model = Meter
        fields = "__all__"
        error_messages = {"wetted_material": {"invalid_choice": UNKNOWN_MATERIAL},
                          "flow_units": {"invalid_choice": UNKNOWN_UNIT}}
