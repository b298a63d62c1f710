from django import forms

from plant.models import Area, Fluid, Device, Site


class ReviewFilterForm(forms.Form):
    site = forms.ModelChoiceField(queryset=Site.objects.all(), required=False)
    area = forms.ModelChoiceField(queryset=Area.objects.select_related("site"), required=False)
    principle = forms.ChoiceField(choices=[("", "any")] + list(Device.Principle.choices), required=False)
    fluid = forms.ModelChoiceField(queryset=Fluid.objects.all(), required=False)
    days = forms.IntegerField(min_value=1, max_value=365, initial=14, required=False, label="Look ahead (days)",
                              error_messages={"min_value": "Look ahead at least one day.",
                                              "max_value": "Look ahead at most 365 days."})

    def filters(self):
        data = self.cleaned_data
        return {
            "site": data["site"].pk if data.get("site") else None,
            "area": data["area"].pk if data.get("area") else None,
            "principle": data.get("principle") or None,
            "fluid": data["fluid"].pk if data.get("fluid") else None,
        }
