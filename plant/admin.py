from django.contrib import admin, messages
from django.contrib.auth import get_user_model
from django.contrib.auth.admin import UserAdmin
from django.core.exceptions import ValidationError
from django.forms.models import BaseInlineFormSet

from plant import citations
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site


class RefuseCitedDeletes:
    """ModelAdmin mixin: an object that signed records cite is not deleted from its delete page nor by the bulk
    delete action; both pages say why in one sentence (plant/citations.py) and offer the kind's alternative
    (withdraw, deactivate) instead of a confirmation. The sentences go in the list of protected objects, which
    is what stops the admin from deleting on POST; the templates show them as refusals."""

    delete_confirmation_template = "admin/refused_delete_confirmation.html"
    delete_selected_confirmation_template = "admin/refused_delete_selected_confirmation.html"

    def get_deleted_objects(self, objs, request):
        refused = citations.refusals(objs)
        if refused:
            return [], {}, set(), refused
        return super().get_deleted_objects(objs, request)


class RefuseCitedInlineDeletes(BaseInlineFormSet):
    """Inline rows ticked for deletion that signed records cite: refused above the inline, nothing saved."""

    def clean(self):
        super().clean()
        ticked = [form.instance for form in self.forms
                  if self.can_delete and self._should_delete_form(form) and form.instance.pk is not None]
        refused = citations.refusals(ticked)
        if refused:
            raise ValidationError(list(refused))


class DutyInline(admin.TabularInline):
    model = DutyPeriod
    formset = RefuseCitedInlineDeletes
    extra = 0


@admin.register(Device)
class DeviceAdmin(RefuseCitedDeletes, admin.ModelAdmin):
    list_display = ("__str__", "serial", "principle", "status")
    list_filter = ("principle", "status", "position__area__site", "position__fluid")
    search_fields = ("position__tag", "serial")
    inlines = [DutyInline]


@admin.register(Position)
class PositionAdmin(RefuseCitedDeletes, admin.ModelAdmin):
    list_display = ("tag", "area", "fluid", "line_size")
    list_filter = ("area__site", "fluid")
    search_fields = ("tag",)


@admin.register(Fluid)
class FluidAdmin(RefuseCitedDeletes, admin.ModelAdmin):
    list_display = ("name", "phase", "conductivity_us_cm", "solids", "chlorides", "scaling", "sticky")


@admin.register(Site, Area, DutyPeriod, Installation)
class RegisterAdmin(RefuseCitedDeletes, admin.ModelAdmin):
    pass


User = get_user_model()
admin.site.unregister(User)


@admin.register(User)
class AccountAdmin(RefuseCitedDeletes, UserAdmin):
    """A user named on signed records is deactivated, not deleted (the records keep pointing at the account)."""

    actions = ["deactivate_accounts"]

    @admin.action(description="Deactivate the selected accounts (they can no longer log in)", permissions=["change"])
    def deactivate_accounts(self, request, queryset):
        names = sorted(queryset.filter(is_active=True).values_list("username", flat=True))
        queryset.update(is_active=False)
        if names:
            self.message_user(request, f"Deactivated {', '.join(names)}: they can no longer log in; the records "
                                       "they signed keep their names.", messages.SUCCESS)
        else:
            self.message_user(request, "The selected accounts were already inactive.", messages.INFO)
