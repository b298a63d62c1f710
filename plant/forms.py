from django import forms

from plant.models import Fluid, Meter


class FluidForm(forms.ModelForm):
    class Meta:
        model = Fluid
        fields = "__all__"


class MeterForm(forms.ModelForm):
    class Meta:
        model = Meter
        fields = "__all__"
