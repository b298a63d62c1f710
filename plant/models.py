"""The installed-meter register: sites, areas, fluids (service duty), meters and their duty history."""
import contextvars
import math
from contextlib import contextmanager

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MinValueValidator
from django.db import models, transaction
from django.urls import reverse
from simple_history.models import HistoricalRecords

from plant import units
from plant import citations, evidence, localtime, materials, risk
from plant.citations import CitedQuerySet, ProtectedWhileCited

UNKNOWN_MATERIAL = (
    '"%(value)s" is not on the list of wetted materials; choose one of the list (its code or name), '
    "or leave it blank and describe it under material details."
)

# "not given": the caller holds no fluid for a spare, so the device reads its own duty history
UNREAD = object()

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


class Site(ProtectedWhileCited, models.Model):
    name = models.CharField(max_length=120, unique=True)
    address = models.TextField(blank=True)
    time_zone = models.CharField(
        max_length=60, blank=True, validators=[localtime.validate_time_zone],
        help_text="IANA time zone name, e.g. Europe/London; blank means the plant's TIME_ZONE setting. "
                  "Today's date, due dates and date defaults for this site are taken here.",
    )

    objects = CitedQuerySet.as_manager()

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


class Area(ProtectedWhileCited, models.Model):
    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="areas")
    name = models.CharField(max_length=120)

    objects = CitedQuerySet.as_manager()

    class Meta:
        constraints = [models.UniqueConstraint(fields=["site", "name"], name="area_unique_per_site")]
        ordering = ["site__name", "name"]

    def __str__(self):
        return f"{self.site.name} / {self.name}"


class Fluid(ProtectedWhileCited, models.Model):
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

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["name"]

    def __str__(self):
        return self.name

    def get_absolute_url(self):
        return reverse("plant:position-list") + f"?fluid={self.pk}"

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
        for device in Device.objects.filter(position__fluid=self).select_related("position"):
            device.position.fluid = self
            by_severity.setdefault(risk.worst_severity(device.findings()), []).append(device.pk)
        for severity, pks in by_severity.items():
            Device.objects.filter(pk__in=pks).update(risk_severity=severity)


class Position(ProtectedWhileCited, models.Model):
    """A place in the process, named by its tag: where a device is installed and the duty it serves there.

    The device (a `Device`) is installed, removed and swapped through `plant.installations`; calibration and
    maintenance history follow the device, duty and the principle×fluid risk follow the position it served.
    """

    tag = models.CharField(max_length=40, unique=True,
                           error_messages={"unique": "A position with this tag already exists."})
    area = models.ForeignKey(Area, on_delete=models.PROTECT, related_name="positions")
    fluid = models.ForeignKey(Fluid, on_delete=models.PROTECT, related_name="positions")
    line_size = models.CharField("line size (e.g. DN50)", max_length=20)
    internal_diameter_mm = models.FloatField(
        "internal diameter (mm)", validators=[MinValueValidator(0.1, "Internal diameter must be positive.")]
    )
    flow_units = models.CharField(
        "units of the process flows", max_length=20, choices=units.UNIT_CHOICES, default="m3/h",
        error_messages={"invalid_choice": units.UNKNOWN_UNIT},
    )
    normal_flow = models.FloatField("normal process flow", null=True, blank=True)
    min_flow = models.FloatField("minimum process flow", null=True, blank=True)
    required_accuracy_pct = models.FloatField(
        "required accuracy (± % of reading)", null=True, blank=True,
        validators=[MinValueValidator(1e-6, "The required accuracy must be greater than zero.")],
        help_text="What the process needs of the measurement here; a device whose MPE is wider is flagged.",
    )
    history = HistoricalRecords()

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["tag"]

    def __str__(self):
        return self.tag

    def get_absolute_url(self):
        return reverse("plant:position-detail", args=[self.tag])

    def installed_device(self):
        """The device installed here now, or None (one read; None without a query when there is none)."""
        try:
            return self.device
        except Device.DoesNotExist:
            return None

    def clean(self):
        errors = unstorable_value_errors(self)
        for field in ("normal_flow", "min_flow"):
            value = None if field in errors else number_or_none(getattr(self, field))
            if value is not None and value < 0:
                errors[field] = "A process flow cannot be negative."
        normal = None if "normal_flow" in errors else number_or_none(self.normal_flow)
        minimum = None if "min_flow" in errors else number_or_none(self.min_flow)
        if minimum is not None and normal is not None and minimum > normal:
            errors["min_flow"] = "The minimum flow cannot be above the normal flow."
        device = self.installed_device() if self.pk and id(self) not in _checked_together.get() else None
        if device is not None and not errors:
            errors.update(flows_above_range(self, device))
        if errors:
            raise ValidationError(errors)

    def save(self, *args, **kwargs):
        self.full_clean()
        with transaction.atomic():
            previous = None
            if self.pk:
                previous = Position.objects.filter(pk=self.pk).values("area_id", "fluid_id").first()
            super().save(*args, **kwargs)
            device = self.installed_device()
            if device is None:
                return
            device.position = self
            if previous is not None and (previous["area_id"], previous["fluid_id"]) != (self.area_id, self.fluid_id):
                device.record_duty_change()
            Device.objects.filter(pk=device.pk).update(risk_severity=risk.worst_severity(device.findings()))

    def flow_in(self, value, to_code):
        """A flow of this position (in its own units) in `to_code`, or None when it cannot be converted
        without facts the register does not hold (line conditions of a gas)."""
        if value is None:
            return None
        try:
            return units.convert(value, units.code_for(self.flow_units), units.code_for(to_code),
                                 density_kg_m3=self.fluid.density_kg_m3 if self.fluid_id else None)
        except units.UnitError:
            return None

    def flow_m3_h(self, value):
        """Volume flow in m³/h for the Reynolds check; None when it cannot be converted."""
        return self.flow_in(value, "m3/h")

    def _flow_conditions(self):
        return {"normal_flow_m3_h": self.flow_m3_h(self.normal_flow), "min_flow_m3_h": self.flow_m3_h(self.min_flow),
                "diameter_mm": self.internal_diameter_mm}

    def assess(self, principle, wetted_material, fluid=None):
        """The principle×fluid findings a device of this principle and material meets here (plant/risk.py)."""
        return risk.assess(principle, wetted_material, (fluid or self.fluid).props(), **self._flow_conditions())

    def assess_each_principle(self, wetted_material=""):
        """What a device of each principle would meet here, the least shortened first (plant/risk.py)."""
        return risk.assess_each_principle(wetted_material, self.fluid.props(), **self._flow_conditions())


# the position and device (by identity) whose flows-against-range check the caller makes itself, with both new values
_checked_together = contextvars.ContextVar("flows_checked_together", default=frozenset())


@contextmanager
def flows_checked_together(position, device):
    """Inside: the position's and the device's own checks leave the flows-against-range check to the caller, who
    has both rows' new values (the register import checks a row's position and device together; either row's own
    check would compare with the other's stored values)."""
    token = _checked_together.set(_checked_together.get() | {id(position), id(device)})
    try:
        yield
    finally:
        _checked_together.reset(token)


def flows_above_range(position, device) -> dict:
    """{field: message} for the position's process flows above the device's calibrated range high."""
    errors = {}
    high = number_or_none(device.range_max)
    if high is None:
        return errors
    for field in ("normal_flow", "min_flow"):
        value = number_or_none(getattr(position, field))
        if value is None:
            continue
        in_device_units = position.flow_in(value, device.flow_units)
        # a converted flow may differ from the range high in the last digit only by rounding
        slack = 0.0 if in_device_units == value else 1e-9 * abs(high)
        if in_device_units is not None and in_device_units > high + slack:
            label = position._meta.get_field(field).verbose_name.capitalize()
            which = f"of device {device.device_label}" if device.pk else "of the device"
            errors[field] = (
                f"{label} at {position.tag} ({value:g} {units.label_for(position.flow_units)}) is above the calibrated "
                f"range high ({high:g} {units.label_for(device.flow_units)}) {which}."
            )
    return errors


class Device(ProtectedWhileCited, models.Model):
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
        SCATTER = "scatter", "scatter too large to predict"
        IMPROVING = "improving", "drifting toward zero error"
        DRIFTING = "drifting", "drifting"
        OUT_OF_TOLERANCE = "out_of_tolerance", "last found out of tolerance"

    principle = models.CharField(max_length=30, choices=Principle.choices)
    range_min = models.FloatField("calibrated range low", default=0.0)
    range_max = models.FloatField("calibrated range high")
    flow_units = models.CharField(max_length=20, choices=units.UNIT_CHOICES, default="m3/h",
                                  error_messages={"invalid_choice": units.UNKNOWN_UNIT})
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
    # kept by scheduling.fleet.recompute_due_dates (batched UPDATE statements, so save() and duty history are not involved)
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
    # conformity risk of the last calibration's as-found points (calibration/conformity_fleet.py, JCGM 106), kept by
    # the recompute: the global PFA of the decision rule applied (worst point) and the lowest conformance probability
    # of a point inside its MPE (None: no such point, or no uncertainty stated)
    conformity_pfa = models.FloatField("PFA of the rule applied", null=True, blank=True, editable=False)
    conformity_min_pc = models.FloatField("lowest p_c inside the MPE", null=True, blank=True, editable=False)
    history = HistoricalRecords(excluded_fields=["last_calibrated", "next_due_date", "due_rationale", "drift_status",
                                                 "drift_rate_per_year", "predicted_crossing", "last_in_tolerance",
                                                 "risk_severity", "conformity_pfa", "conformity_min_pc"])

    # the position the device is installed at now; set only through plant.installations (install/remove/swap)
    position = models.OneToOneField(Position, null=True, blank=True, on_delete=models.PROTECT,
                                    related_name="device", editable=False)

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["position__tag", "serial", "pk"]
        permissions = [("swap_device", "Can install, remove and swap devices at positions")]
        # The review's counts and page reads are answered from this index alone, without reading the device rows
        # (wide with their due rationale): status and position pick the installed devices, then the stored fields
        # each review list tests, and the principle the page may be filtered by.
        # (PostgreSQL keeps the id in the index too, so that its index-only scans can count and join by it;
        # SQLite's indexes carry the row id already.)
        indexes = [models.Index(fields=["status", "position", "next_due_date", "predicted_crossing", "drift_status",
                                        "last_in_tolerance", "risk_severity", "principle", "conformity_pfa",
                                        "conformity_min_pc"], include=["id"],
                                name="device_review_idx")]

    def __str__(self):
        return self.tag or self.device_label

    @property
    def device_label(self):
        """How a device is named when no tag names it: its serial, else its register number."""
        return f"S/N {self.serial}" if self.serial else f"device #{self.pk}"

    def get_absolute_url(self):
        if self.position_id:
            return reverse("plant:position-detail", args=[self.position.tag])
        return reverse("device-detail", args=[self.pk])

    def calibrate_url(self):
        """Where this device is calibrated: at its position (by tag), or on the bench when it is a spare."""
        if self.position_id:
            return reverse("plant:position-calibrate", args=[self.position.tag])
        return reverse("device-calibrate", args=[self.pk])

    # What the device reads of the position it serves (read-only: change them on the position) ------
    @property
    def tag(self):
        return self.position.tag if self.position_id else None

    @property
    def area(self):
        return self.position.area if self.position_id else None

    @property
    def area_id(self):
        return self.position.area_id if self.position_id else None

    @property
    def fluid(self):
        """The fluid of the position served now; for a spare, of the last position it served (its duty
        history), so a device that served on brine keeps that finding on the shelf."""
        if self.position_id:
            return self.position.fluid
        if not hasattr(self, "_last_duty_fluid"):
            last = self.duties.select_related("fluid").first() if self.pk else None
            self._last_duty_fluid = last.fluid if last else None
        return self._last_duty_fluid

    @property
    def fluid_id(self):
        fluid = self.fluid
        return fluid.pk if fluid else None

    @property
    def line_size(self):
        return self.position.line_size if self.position_id else ""

    @property
    def internal_diameter_mm(self):
        return self.position.internal_diameter_mm if self.position_id else None

    @property
    def normal_flow(self):
        return self.position.normal_flow if self.position_id else None

    @property
    def min_flow(self):
        return self.position.min_flow if self.position_id else None

    def position_on(self, day):
        """The id of the position the device was installed at on `day`, or None (on the shelf or the bench).
        A device removed on a day is counted off its position that day; one installed that day, on it."""
        if self.pk is None:
            return None
        moves = list(Installation.objects.filter(device=self).order_by("since", "id")
                     .values_list("since", "until", "position_id"))
        for since, until, position_id in reversed(moves):
            if since <= day and (until is None or until > day):
                return position_id
        # a record dated before the register knew the device (entered from paper, say) belongs to the
        # position it was first installed at, if it has never been anywhere else before that
        if moves and day < moves[0][0]:
            return moves[0][2]
        return None

    def today(self):
        """Today's date where the device is (its position's site; the plant's time zone for a spare)."""
        return self.position.area.site.today() if self.position_id else localtime.today("")

    def clean(self):
        errors = unstorable_value_errors(self)
        # fields that failed their own checks keep whatever was assigned; leave them to those messages
        low, high = (None if f in errors else number_or_none(getattr(self, f)) for f in ("range_min", "range_max"))
        if high is not None and low is not None:
            if high <= low:
                errors["range_max"] = "The range high must be above the range low."
            elif not math.isfinite(high - low):
                errors["range_max"] = "The range is too wide: range high minus range low must be a finite number."
        if (self.position_id and "range_max" not in errors and "flow_units" not in errors
                and id(self) not in _checked_together.get()):
            errors.update({"range_max": message for message in flows_above_range(self.position, self).values()})
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
        super().save(*args, **kwargs)

    def record_duty_change(self, on_date=None):
        """Close the open duty period and open one for the position served now (none for a spare)."""
        on_date = on_date or self.today()
        self.duties.filter(until__isnull=True).update(until=on_date)
        if self.position_id:
            DutyPeriod.objects.create(device=self, position=self.position, area_id=self.position.area_id,
                                      fluid_id=self.position.fluid_id, since=on_date)
        self.__dict__.pop("_last_duty_fluid", None)

    # Risk ------------------------------------------------------------------------------------------
    def findings(self, evidence=None, last_fluid=UNREAD):
        """The principle×fluid findings and those from what was found on the meter (maintenance).

        evidence: the findings from what was found, when the caller read them already (the bulk recompute reads
        the whole fleet's at once); last_fluid: for a spare, the fluid it last served, likewise."""
        found = self.evidence_findings() if evidence is None else list(evidence)
        return self.duty_findings(last_fluid) + found

    def evidence_findings(self):
        """Findings from what was found on the device, from the sources the apps above plant register
        (plant/evidence.py; repeatedly found fouled, say)."""
        if self.pk is None:
            return []
        return evidence.findings_of(self)

    def duty_findings(self, last_fluid=UNREAD):
        if self.position_id:
            return self.position.assess(self.principle, self.wetted_material)
        # a spare: the fluid it last served, without the flows of a place
        fluid = self.fluid if last_fluid is UNREAD else last_fluid
        if fluid is None:
            return []  # a new device that has served nowhere yet
        return risk.assess(self.principle, self.wetted_material, fluid.props())

    def risk_factor(self, evidence=None, last_fluid=UNREAD):
        return risk.interval_factor(self.findings(evidence, last_fluid))

    def effective_interval_days(self, evidence=None, last_fluid=UNREAD):
        """Base interval × risk factor, rounded by the one rule for intervals (plant.risk.whole_days)."""
        return max(1, risk.whole_days(self.base_interval_days * self.risk_factor(evidence, last_fluid)))


class DutyPeriod(ProtectedWhileCited, models.Model):
    """Where and on what a device served, so its risk can be judged from its whole service life."""

    device = models.ForeignKey(Device, on_delete=models.CASCADE, related_name="duties")
    position = models.ForeignKey(Position, null=True, blank=True, on_delete=models.PROTECT, related_name="duties")
    area = models.ForeignKey(Area, on_delete=models.PROTECT)
    fluid = models.ForeignKey(Fluid, on_delete=models.PROTECT)
    since = models.DateField()
    until = models.DateField(null=True, blank=True)

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["device", "-since", "-id"]

    def __str__(self):
        where = self.position.tag if self.position_id else str(self.area)
        return f"{self.device.device_label}: {self.fluid} at {where} from {self.since}"


class Installation(ProtectedWhileCited, models.Model):
    """A device at a position from one date until another (open while it is there)."""

    device = models.ForeignKey(Device, on_delete=models.PROTECT, related_name="installations")
    position = models.ForeignKey(Position, on_delete=models.PROTECT, related_name="installations")
    since = models.DateField()
    until = models.DateField(null=True, blank=True)
    installed_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                     related_name="+")
    removed_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                   related_name="+")
    removal_reason = models.CharField(max_length=200, blank=True)
    # the as-left of the device's last calibration before it was installed here (its starting point)
    starting_point = models.JSONField(default=dict, blank=True)
    # a device not fit for the position's duty goes in only with a reviewer's written reason (plant/installations.py)
    unfit_reason = models.TextField(blank=True, default="")
    unfit_findings = models.CharField(max_length=300, blank=True, default="")
    unfit_accepted_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                          related_name="+")
    history = HistoricalRecords()

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["position__tag", "-since", "-id"]
        permissions = [("accept_unfit_device", "Install a device not fit for the position's duty, with a reason")]
        constraints = [
            models.UniqueConstraint(fields=["device"], condition=models.Q(until__isnull=True),
                                    name="one_open_installation_per_device"),
            models.UniqueConstraint(fields=["position"], condition=models.Q(until__isnull=True),
                                    name="one_open_installation_per_position"),
        ]

    def __str__(self):
        until = self.until or "now"
        return f"{self.device.device_label} at {self.position.tag} {self.since} – {until}"


# What the register keeps while signed records cite it (plant/citations.py; the citing records are declared by the
# calibration and maintenance apps). A duty period or an installation says where and on what a device served on the
# dates of its signed records (the certificate reads the fluid served that day from the duty history): its device,
# place and start stay fixed; closing it (until) is how a device moves and stays allowed.
STAYS = "it stays in the register with them"
citations.protect(Site, label=lambda s: f"Site {s.name}", instead=STAYS)
citations.protect(Area, label=lambda a: f"Area {a}", instead=STAYS)
citations.protect(Fluid, label=lambda f: f"Fluid {f.name}", instead=STAYS)
citations.protect(Position, label=lambda p: f"Position {p.tag}",
                  instead="it stays in the register as the place they were made")
citations.protect(Device, label=lambda m: f"Device S/N {m.serial}" if m.serial else f"Device #{m.pk}",
                  instead="take it out of service instead")
citations.protect(DutyPeriod, label=lambda d: f"Duty period {d}", instead="it stays in the device's duty history",
                  frozen=("device", "position", "area", "fluid", "since"))
citations.protect(Installation, label=lambda i: f"Installation {i}",
                  instead="it stays in the device's installation history", frozen=("device", "position", "since"))
# users: every link from a signed record to a user is a PROTECT foreign key, so Django refuses the delete itself;
# this gives the admin the sentence and the alternative
citations.protect(settings.AUTH_USER_MODEL,
                  label=lambda u: f"User {u.get_username()}" + (f" ({u.get_full_name()})" if u.get_full_name() else ""),
                  instead="deactivate the account instead", action=("deactivate_accounts", "Deactivate"))
