from django.contrib import admin

from plant.models import Area, DutyPeriod, Fluid, Meter, Site


class DutyInline(admin.TabularInline):
    model = DutyPeriod
    extra = 0


@admin.register(Meter)
class MeterAdmin(admin.ModelAdmin):
    list_display = ("tag", "principle", "area", "fluid", "status")
    list_filter = ("principle", "status", "area__site", "fluid")
    search_fields = ("tag", "serial")
    inlines = [DutyInline]


@admin.register(Fluid)
class FluidAdmin(admin.ModelAdmin):
    list_display = ("name", "phase", "conductivity_us_cm", "solids", "chlorides", "scaling", "sticky")


admin.site.register(Site)
admin.site.register(Area)
admin.site.register(DutyPeriod)
