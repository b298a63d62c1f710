"""The installed-meter register: sites, areas, fluids (service duty), meters and their duty history."""
import math

from django.core.exceptions import ValidationError
from django.core.validators import MinValueValidator
from django.db import models, transaction
from django.urls import reverse
from simple_history.models import HistoricalRecords

from calibration import units
from plant import localtime, materials, risk

UNKNOWN_MATERIAL = (
    '"%(value)s" is not on the list of wetted materials; choose one of the list (its code or name), '
    "or leave it blank and describe it under material details."
)

# A sanity bound, not a policy: the policy bounds of computed intervals are CALIBRATION min/max_interval_days.
MAX_BASE_INTERVAL_DAYS = 3650


def number_or_none(value):
    """The value if it is a real number (not a flag, not an unconverted string), else None."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return value
    return None


def unstorable_value_errors(instance) -> dict:
    """Values the field validators let through but the register must not hold: NaN or infinity in a float field
    (every comparison with them is False, so range checks pass) and null characters in text (PostgreSQL refuses
    them with a server error)."""
    errors = {}
    for f in instance._meta.concrete_fields:
        value = getattr(instance, f.attname)
        if isinstance(f, models.FloatField):
            value = number_or_none(value)
            if value is not None and not math.isfinite(value):
                errors[f.name] = "Enter a finite number."
        elif isinstance(f, (models.CharField, models.TextField)) and isinstance(value, str) and "\x00" in value:
            errors[f.name] = "Null characters are not allowed."
    return errors


class Site(models.Model):
    name = models.CharField(max_length=120, unique=True)
    address = models.TextField(blank=True)
    time_zone = models.CharField(
        max_length=60, blank=True, validators=[localtime.validate_time_zone],
        help_text="IANA time zone name, e.g. Europe/London; blank means the plant's TIME_ZONE setting. "
                  "Today's date, due dates and date defaults for this site are taken here.",
    )

    def __str__(self):
        return self.name

    def clean(self):
        errors = unstorable_value_errors(self)
        if errors:
            raise ValidationError(errors)

    def save(self, *args, **kwargs):
        self.full_clean()  # a time zone that is not one is refused on every path
        super().save(*args, **kwargs)

    def zone_name(self) -> str:
        return localtime.zone_name(self.time_zone)

    def today(self):
        """Today's date at this site (its own time zone, else the plant's)."""
        return localtime.today(self.time_zone)


class Area(models.Model):
    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="areas")
    name = models.CharField(max_length=120)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["site", "name"], name="area_unique_per_site")]
        ordering = ["site__name", "name"]

    def __str__(self):
        return f"{self.site.name} / {self.name}"


class Fluid(models.Model):
    """A service duty: the fluid and the properties that decide which meters suit it."""

    class Phase(models.TextChoices):
        LIQUID = "liquid", "Liquid"
        GAS = "gas", "Gas"
        STEAM = "steam", "Steam"
        SLURRY = "slurry", "Slurry"

    name = models.CharField(max_length=120, unique=True)
    phase = models.CharField(max_length=10, choices=Phase.choices)
    conductivity_us_cm = models.FloatField(
        "conductivity (µS/cm)", null=True, blank=True,
        validators=[MinValueValidator(0.0, "Conductivity cannot be negative.")],
    )
    density_kg_m3 = models.FloatField(
        "density at process conditions (kg/m³)", null=True, blank=True,
        validators=[MinValueValidator(1e-6, "Density must be greater than zero.")],
    )
    viscosity_mpa_s = models.FloatField(
        "dynamic viscosity at process conditions (mPa·s)", null=True, blank=True,
        validators=[MinValueValidator(1e-9, "Viscosity must be greater than zero.")],
    )
    solids = models.BooleanField("abrasive solids", default=False)
    chlorides = models.BooleanField("chlorides / corrosive content", default=False)
    scaling = models.BooleanField("hardness / scaling", default=False)
    biofouling = models.BooleanField("biofouling (slime)", default=False)
    sticky = models.BooleanField("sticky / coating", default=False)
    entrained_gas = models.BooleanField(default=False)
    temperature_c = models.FloatField(
        "process temperature (°C)", null=True, blank=True,
        validators=[MinValueValidator(-273.15, "Temperature is below absolute zero.")],
    )
    notes = models.TextField(blank=True)
    history = HistoricalRecords()

    class Meta:
        ordering = ["name"]

    def __str__(self):
        return self.name

    def get_absolute_url(self):
        return reverse("plant:meter-list") + f"?fluid={self.pk}"

    def clean(self):
        errors = unstorable_value_errors(self)
        if errors:
            raise ValidationError(errors)

    def props(self) -> risk.FluidProps:
        return risk.FluidProps(
            phase=self.phase,
            conductivity_us_cm=self.conductivity_us_cm,
            density_kg_m3=self.density_kg_m3,
            viscosity_mpa_s=self.viscosity_mpa_s,
            solids=self.solids,
            chlorides=self.chlorides,
            scaling=self.scaling,
            biofouling=self.biofouling,
            sticky=self.sticky,
            entrained_gas=self.entrained_gas,
            temperature_c=self.temperature_c,
        )

    def save(self, *args, **kwargs):
        self.full_clean()
        with transaction.atomic():
            super().save(*args, **kwargs)
            self.refresh_meter_risk()

    def refresh_meter_risk(self):
        """Re-judge the meters on this fluid (their stored risk severity) after its properties changed."""
        by_severity = {}
        for meter in self.meters.all():
            meter.fluid = self
            by_severity.setdefault(risk.worst_severity(meter.findings()), []).append(meter.pk)
        for severity, pks in by_severity.items():
            Meter.objects.filter(pk__in=pks).update(risk_severity=severity)


class Meter(models.Model):
    class Principle(models.TextChoices):
        ELECTROMAGNETIC = "electromagnetic", "Electromagnetic"
        CORIOLIS = "coriolis", "Coriolis"
        VORTEX = "vortex", "Vortex"
        TURBINE = "turbine", "Turbine"
        ULTRASONIC_TRANSIT = "ultrasonic_transit", "Ultrasonic transit-time"
        ULTRASONIC_CLAMPON = "ultrasonic_clampon", "Ultrasonic clamp-on"
        ORIFICE = "orifice", "Orifice plate (DP)"
        VENTURI = "venturi", "Venturi (DP)"
        PITOT = "pitot", "Pitot tube"
        AVERAGING_PITOT = "averaging_pitot", "Averaging pitot"
        POSITIVE_DISPLACEMENT = "positive_displacement", "Positive displacement"
        THERMAL_MASS = "thermal_mass", "Thermal mass"

    class MpeBasis(models.TextChoices):
        PERCENT_READING = "pct_reading", "% of reading"
        PERCENT_SPAN = "pct_span", "% of span"
        ABSOLUTE = "absolute", "absolute (flow units)"

    class Status(models.TextChoices):
        IN_SERVICE = "in_service", "In service"
        SPARE = "spare", "Spare"
        REMOVED = "removed", "Removed"

    class DriftStatus(models.TextChoices):
        INSUFFICIENT = "insufficient", "too little history to judge"
        FLAT = "flat", "no significant drift"
        SCATTER = "scatter", "scatter exceeds tolerance"
        IMPROVING = "improving", "drifting toward zero error"
        DRIFTING = "drifting", "drifting"
        OUT_OF_TOLERANCE = "out_of_tolerance", "last found out of tolerance"

    tag = models.CharField(max_length=40, unique=True, error_messages={"unique": "A meter with this tag already exists."})
    principle = models.CharField(max_length=30, choices=Principle.choices)
    area = models.ForeignKey(Area, on_delete=models.PROTECT, related_name="meters")
    fluid = models.ForeignKey(Fluid, on_delete=models.PROTECT, related_name="meters")
    line_size = models.CharField("line size (e.g. DN50)", max_length=20)
    internal_diameter_mm = models.FloatField(
        "internal diameter (mm)", validators=[MinValueValidator(0.1, "Internal diameter must be positive.")]
    )
    range_min = models.FloatField("calibrated range low", default=0.0)
    range_max = models.FloatField("calibrated range high")
    flow_units = models.CharField(max_length=20, choices=units.UNIT_CHOICES, default="m3/h",
                                  error_messages={"invalid_choice": units.UNKNOWN_UNIT})
    normal_flow = models.FloatField("normal process flow", null=True, blank=True)
    min_flow = models.FloatField("minimum process flow", null=True, blank=True)
    wetted_material = models.CharField(
        "wetted / electrode material", max_length=60, blank=True, choices=materials.CHOICES,
        error_messages={"invalid_choice": UNKNOWN_MATERIAL},
        help_text="For a magnetic meter, the electrode material; otherwise the measuring element's. "
                  "Blank when not recorded.",
    )
    material_details = models.CharField(
        "material details", max_length=120, blank=True,
        help_text="Liner, grade or anything the list does not say, e.g. PTFE liner.",
    )
    serial = models.CharField(max_length=60, blank=True)
    maker = models.CharField(max_length=80, blank=True)
    model = models.CharField(max_length=80, blank=True)
    mpe_value = models.FloatField(
        "MPE value", validators=[MinValueValidator(1e-9, "MPE must be greater than zero.")]
    )
    mpe_basis = models.CharField("MPE basis", max_length=12, choices=MpeBasis.choices, default=MpeBasis.PERCENT_READING)
    base_interval_days = models.PositiveIntegerField(
        "base calibration interval (days)", default=365,
        validators=[MinValueValidator(1, "The interval must be at least one day.")],
    )
    status = models.CharField(max_length=12, choices=Status.choices, default=Status.IN_SERVICE)
    # kept by calibration.fleet.recompute_due_dates (bulk_update, so save() and duty history are not involved)
    last_calibrated = models.DateField(null=True, blank=True, editable=False)
    next_due_date = models.DateField(null=True, blank=True, editable=False)
    due_rationale = models.JSONField(default=dict, blank=True, editable=False)
    drift_status = models.CharField(max_length=20, blank=True, editable=False, choices=DriftStatus.choices)
    drift_rate_per_year = models.FloatField(null=True, blank=True, editable=False)
    predicted_crossing = models.DateField(null=True, blank=True, editable=False)
    last_in_tolerance = models.BooleanField("last as-found in tolerance", null=True, editable=False)
    # worst severity of the principle×fluid findings, kept so the review filters in the database; refreshed by
    # save(), by Fluid.save() for the fluid's meters and by every due-date recompute
    risk_severity = models.CharField(max_length=12, blank=True, editable=False)
    history = HistoricalRecords(excluded_fields=["last_calibrated", "next_due_date", "due_rationale", "drift_status",
                                                 "drift_rate_per_year", "predicted_crossing", "last_in_tolerance",
                                                 "risk_severity"])

    class Meta:
        ordering = ["tag"]

    def __str__(self):
        return self.tag

    def get_absolute_url(self):
        return reverse("plant:meter-detail", args=[self.tag])

    def clean(self):
        errors = unstorable_value_errors(self)
        # fields that failed their own checks keep whatever was assigned; leave them to those messages
        low, high = (None if f in errors else number_or_none(getattr(self, f)) for f in ("range_min", "range_max"))
        if high is not None and low is not None:
            if high <= low:
                errors["range_max"] = "The range high must be above the range low."
            elif not math.isfinite(high - low):
                errors["range_max"] = "The range is too wide: range high minus range low must be a finite number."
        for field in ("normal_flow", "min_flow"):
            value = None if field in errors else number_or_none(getattr(self, field))
            if value is None or high is None:
                continue
            if value < 0:
                errors[field] = "A process flow cannot be negative."
            elif value > high:
                errors[field] = (
                    f"{self._meta.get_field(field).verbose_name.capitalize()} ({value:g}) is above the "
                    f"calibrated range high ({high:g} {self.flow_units})."
                )
        normal = None if "normal_flow" in errors else number_or_none(self.normal_flow)
        minimum = None if "min_flow" in errors else number_or_none(self.min_flow)
        if minimum is not None and normal is not None and minimum > normal:
            errors["min_flow"] = "The minimum flow cannot be above the normal flow."
        interval = number_or_none(self.base_interval_days)
        if interval is not None and interval > MAX_BASE_INTERVAL_DAYS:
            errors["base_interval_days"] = (
                f"The base interval cannot be longer than {MAX_BASE_INTERVAL_DAYS} days (ten years)."
            )
        if errors:
            raise ValidationError(errors)

    def save(self, *args, **kwargs):
        self.full_clean()
        self.risk_severity = risk.worst_severity(self.findings())
        with transaction.atomic():
            previous = None
            if self.pk:
                previous = Meter.objects.filter(pk=self.pk).values("area_id", "fluid_id").first()
            super().save(*args, **kwargs)
            if previous is None or previous["area_id"] != self.area_id or previous["fluid_id"] != self.fluid_id:
                self._record_duty_change()

    def _record_duty_change(self):
        today = self.area.site.today()
        self.duties.filter(until__isnull=True).update(until=today)
        DutyPeriod.objects.create(meter=self, area_id=self.area_id, fluid_id=self.fluid_id, since=today)

    # Risk ------------------------------------------------------------------------------------------
    def findings(self):
        """The principle×fluid findings and those from what was found on the meter (maintenance)."""
        return self.duty_findings() + self.evidence_findings()

    def evidence_findings(self):
        """Findings from the meter's maintenance records (maintenance/loop.py: repeatedly found fouled).
        The bulk recompute attaches them for the whole fleet from one read; otherwise one query."""
        attached = getattr(self, "_evidence_findings", None)
        if attached is not None:
            return list(attached)
        if self.pk is None:
            return []
        from maintenance.fleet import PREFETCHED, evidence_from_prefetched, meter_evidence

        if hasattr(self, PREFETCHED):  # a page of meters read with maintenance.fleet.evidence_prefetch()
            return evidence_from_prefetched(getattr(self, PREFETCHED))
        return meter_evidence(self.pk)

    def duty_findings(self):
        return risk.assess(
            self.principle, self.wetted_material, self.fluid.props(),
            normal_flow_m3_h=self.normal_flow_m3_h(self.normal_flow),
            min_flow_m3_h=self.normal_flow_m3_h(self.min_flow),
            diameter_mm=self.internal_diameter_mm,
        )

    def normal_flow_m3_h(self, value):
        """Volume flow in m³/h for the Reynolds check; None when the units are not volumetric."""
        if value is None:
            return None
        factors = {"m³/h": 1.0, "m3/h": 1.0, "l/s": 3.6, "L/s": 3.6, "l/min": 0.06, "L/min": 0.06}
        if self.flow_units in factors:
            return value * factors[self.flow_units]
        if self.flow_units in ("kg/h", "t/h") and self.fluid.density_kg_m3:
            kg_h = value * (1000.0 if self.flow_units == "t/h" else 1.0)
            return kg_h / self.fluid.density_kg_m3
        return None

    def risk_factor(self):
        return risk.interval_factor(self.findings())

    def effective_interval_days(self):
        """Base interval × risk factor, rounded by the one rule for intervals (calibration.intervals.whole_days)."""
        from calibration.intervals import whole_days

        return max(1, whole_days(self.base_interval_days * self.risk_factor()))


class DutyPeriod(models.Model):
    """Where and on what a meter served, so its risk can be judged from its whole service life."""

    meter = models.ForeignKey(Meter, on_delete=models.CASCADE, related_name="duties")
    area = models.ForeignKey(Area, on_delete=models.PROTECT)
    fluid = models.ForeignKey(Fluid, on_delete=models.PROTECT)
    since = models.DateField()
    until = models.DateField(null=True, blank=True)

    class Meta:
        ordering = ["meter", "-since", "-id"]

    def __str__(self):
        return f"{self.meter.tag}: {self.fluid} in {self.area} from {self.since}"
