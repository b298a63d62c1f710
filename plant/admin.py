from django.contrib import admin

from plant.models import Area, DutyPeriod, Fluid, Installation, Meter, Position, Site


class DutyInline(admin.TabularInline):
    model = DutyPeriod
    extra = 0


@admin.register(Meter)
class MeterAdmin(admin.ModelAdmin):
    list_display = ("__str__", "serial", "principle", "status")
    list_filter = ("principle", "status", "position__area__site", "position__fluid")
    search_fields = ("position__tag", "serial")
    inlines = [DutyInline]


@admin.register(Position)
class PositionAdmin(admin.ModelAdmin):
    list_display = ("tag", "area", "fluid", "line_size")
    list_filter = ("area__site", "fluid")
    search_fields = ("tag",)


@admin.register(Fluid)
class FluidAdmin(admin.ModelAdmin):
    list_display = ("name", "phase", "conductivity_us_cm", "solids", "chlorides", "scaling", "sticky")


admin.site.register(Site)
admin.site.register(Area)
admin.site.register(DutyPeriod)
admin.site.register(Installation)
