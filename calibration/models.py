"""Reference standards, calibration events and their points.

A signed event, its points and its links to reference standards are locked at the model level: save(), delete(),
queryset update()/delete() and the link managers on signed rows raise SignedRecordError and change nothing. What
a signed event cites is protected in turn (plant/citations.py; the declarations are at the end of this module).
"""
import datetime as dt
import math

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MinValueValidator
from django.db import models, transaction
from django.db.models.signals import m2m_changed, post_save
from django.dispatch import receiver
from django.urls import reverse
from django.utils import timezone
from simple_history.models import HistoricalRecords

from calibration import decision, errors, signed_content, uncertainty
from plant import units
from calibration.ledger_kinds import CALIBRATION, COUNTERSIGNATURE
from ledger.signed import AlwaysSignedQuerySet, LockedQuerySet, SignedRecord, SignedRecordError, signature_errors
from plant import citations, risk
from plant.citations import CitedQuerySet, ProtectedWhileCited
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site, number_or_none

# What the tablet form can supply for a conversion between a standard's units and a meter's
# (calibration.units.conversion_needs): the fluid density at the calibration. A pair that needs more (line
# pressure and temperature, a gas density at reference conditions) is refused at entry.
ENTRY_SUPPLIES = {"density"}


def entry_can_convert(from_code, to_code):
    """Whether readings in `from_code` can be entered for a meter in `to_code` (fixed factor, or density)."""
    try:
        return units.conversion_needs(from_code, to_code) <= ENTRY_SUPPLIES
    except units.UnitError:
        return False


FULL_VACUUM_BAR_G = -1.01325  # standard atmosphere below gauge zero


class ReferenceStandard(ProtectedWhileCited, models.Model):
    class UncertaintyBasis(models.TextChoices):
        PERCENT_READING = "pct_reading", "% of reading"
        ABSOLUTE = "absolute", "absolute (flow units)"

    # the measuring principle of a standard: a device principle (a master meter, judged by the same principle×fluid
    # rules as a meter, plant/risk.py) or a primary method, which the risk rules do not restrict
    PRINCIPLE_CHOICES = [*Device.Principle.choices,
                         ("gravimetric", "Gravimetric (weighed collection)"),
                         ("volumetric_prover", "Volumetric prover (pipe or tank)")]

    identification = models.CharField(max_length=60, unique=True)
    description = models.CharField(max_length=200)
    range_min = models.FloatField(default=0.0)
    range_max = models.FloatField()
    units = models.CharField(max_length=20, choices=units.UNIT_CHOICES, default="m3/h",
                             error_messages={"invalid_choice": units.UNKNOWN_UNIT},
                             help_text="the unit its readings and its range are stated in")
    certificate_number = models.CharField(max_length=60)
    due_date = models.DateField("calibration due date")
    expanded_uncertainty = models.FloatField(
        "expanded uncertainty U (k=2)", validators=[MinValueValidator(0.0, "Uncertainty cannot be negative.")]
    )
    uncertainty_basis = models.CharField(max_length=12, choices=UncertaintyBasis.choices, default=UncertaintyBasis.PERCENT_READING)
    issuer = models.CharField("certificate issued by", max_length=120, blank=True,
                              help_text="the laboratory that calibrated this standard and issued its certificate")
    phase = models.CharField("for fluids of phase", max_length=10, choices=Fluid.Phase.choices, blank=True,
                             help_text="blank: not tied to one phase")
    principle = models.CharField("measuring principle", max_length=30, choices=PRINCIPLE_CHOICES, blank=True,
                                 help_text="blank: not stated (offered as for any principle); a stated device "
                                           "principle is not offered on a fluid it is not fit for")
    withdrawn = models.BooleanField("withdrawn from use", default=False)
    calibrated_on = models.DateField("calibrated on", null=True, blank=True,
                                     help_text="the date of the calibration its certificate reports")
    interval_days = models.PositiveIntegerField(
        "calibration interval (days)", default=365,
        validators=[MinValueValidator(1, "The interval must be at least one day.")],
        help_text="the due date is the calibration date plus this interval when a certificate is read in")
    history = HistoricalRecords()

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["identification"]

    def get_absolute_url(self):
        return reverse("calibration:standard-detail", args=[self.pk])

    def __str__(self):
        return f"{self.identification} ({self.description})"

    def clean(self):
        if self.range_max is not None and self.range_min is not None and self.range_max <= self.range_min:
            raise ValidationError({"range_max": "The range high must be above the range low."})

    def save(self, *args, **kwargs):
        self.full_clean()
        super().save(*args, **kwargs)

    @classmethod
    def offered_for(cls, device, on_date=None, convertible_only=True):
        """Standards the tablet form offers for `meter`: not withdrawn, of the meter's fluid phase (or of none
        stated), and, when `on_date` is given, in date then; by units (one query whatever the units):

        * a standard whose unit converts to the meter's by a fixed factor (the same unit included): its range
          covers the meter's calibrated range, compared after conversion;
        * a standard whose readings convert with the density entered on the calibration (mass against volume):
          offered whatever its range, which is checked at entry against the readings in its own unit
          (ReferenceStandard.problems);
        * any other unit (a conversion the form cannot make): only with ``convertible_only=False`` (the form
          accepts such a standard so that it can refuse it with the reason).

        A standard whose stated principle the principle×fluid rules call not fit for the meter's fluid
        (plant/risk.py, a ``misapplied`` finding: e.g. an electromagnetic reference on a vegetable oil) is left
        out; one with no principle stated, or a primary method (gravimetric, volumetric prover), is not.

        A new spare that has served nowhere yet has no fluid: on the bench any phase may be used."""
        qs = cls.objects.filter(withdrawn=False)
        fluid = device.fluid
        if fluid is not None:
            qs = qs.filter(models.Q(phase="") | models.Q(phase=fluid.phase))
            unfit = cls.principles_unfit_for(fluid)
            if unfit:
                qs = qs.exclude(principle__in=unfit)
        qs = qs.filter(cls._units_and_range_q(device, convertible_only))
        if on_date is not None:
            qs = qs.filter(due_date__gte=on_date)
        return qs

    @staticmethod
    def principles_unfit_for(fluid):
        """The device principles the principle×fluid rules (plant/risk.py assess) call not fit for this fluid
        (a ``misapplied`` finding), judged on the fluid alone: the standard's wetted material is not recorded."""
        props = fluid.props()
        return [p for p in risk.PRINCIPLES
                if any(f.severity == "misapplied" for f in risk.assess(p, "", props))]

    @staticmethod
    def _units_and_range_q(device, convertible_only):
        low, high = device.range_min, device.range_max
        if device.flow_units not in units.FLOW_UNITS:  # not a code (not saved through the model): same text only
            return models.Q(units=device.flow_units, range_min__lte=low, range_max__gte=high)
        allowed = models.Q(pk__in=[])
        for code in units.FLOW_UNITS:
            needs = units.conversion_needs(code, device.flow_units)
            if not needs:
                lo, hi = (units.convert(v, device.flow_units, code) for v in (low, high))
                slack = 1e-9 * max(abs(lo), abs(hi), 1.0)  # a converted bound is not exact in binary
                allowed |= models.Q(units=code, range_min__lte=lo + slack, range_max__gte=hi - slack)
            elif needs <= ENTRY_SUPPLIES or not convertible_only:
                allowed |= models.Q(units=code)
        return allowed

    @property
    def units_label(self):
        return units.label_for(self.units)

    def snapshot(self):
        """What a calibration record keeps of this standard at sign-off, as it was that day."""
        return signed_content.standard_snapshot(self)

    def problems(self, on_date, values=()):
        """Reasons this standard cannot be used on `on_date` for these reference values (empty = usable)."""
        found = []
        if self.withdrawn:
            found.append(f"Reference standard {self.identification} is withdrawn from use.")
        if on_date > self.due_date:
            found.append(f"Reference standard {self.identification} was past its due date ({self.due_date}) on {on_date}.")
        message = self.range_problem(values)
        if message:
            found.append(message)
        return found

    def range_problem(self, values):
        """The reason these reference values (in the standard's units) are outside the range where its stated
        uncertainty holds (calibration/uncertainty.py standard_usable_range), or "" when none is."""
        low, high, rule_of_thumb = uncertainty.standard_usable_range(self.range_min, self.range_max)
        slack = 1e-9 * max(abs(low), abs(high), 1.0)  # a converted value is not exact in binary
        outside = [v for v in values if v < low - slack or v > high + slack]
        if not outside:
            return ""
        label = self.units_label
        where = ", ".join(f"{v:g}" for v in outside)
        text = (f"Reference standard {self.identification} is calibrated over {self.range_min:g}–{self.range_max:g} "
                f"{label}")
        if rule_of_thumb:
            text += (f" and usable from {low:g} {label} (common practice: 10 % of its range maximum when its range "
                     "starts at 0)")
        return (text + f"; its uncertainty is not stated at {where} {label}. Use a standard whose range covers "
                "this point.")


class StandardDcc(models.Model):
    """A reference standard's own certificate as a DCC file, kept beside it: what was read from it, the signature
    check, and, once a reviewer confirmed it, the values it set on the standard (the old ones stay in the
    standard's history). A file read but not confirmed changes nothing on the standard."""
    standard = models.ForeignKey(ReferenceStandard, on_delete=models.CASCADE, related_name="dcc_files")
    filename = models.CharField(max_length=200)
    xml = models.BinaryField("DCC file")
    sha256 = models.CharField(max_length=64)
    uploaded_at = models.DateTimeField(default=timezone.now)
    uploaded_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                    related_name="+")
    read = models.JSONField("what was read", default=dict)
    signature = models.TextField("signature check", blank=True)
    confirmed_at = models.DateTimeField(null=True, blank=True)
    confirmed_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                     related_name="+")
    applied = models.JSONField("values set on the standard (old and new)", default=dict, blank=True)

    class Meta:
        ordering = ["-uploaded_at", "-pk"]
        verbose_name = "reference standard's DCC"

    def __str__(self):
        return f"{self.filename} ({self.standard.identification})"

    @property
    def confirmed(self):
        return self.confirmed_at is not None


class CalibrationQuerySet(LockedQuerySet):
    """Signed calibrations and the rows that belong to them are locked (ledger/signed.py)."""

    record_model = "calibration.CalibrationEvent"
    changed_message = "Signed calibration records cannot be changed."
    deleted_message = "Signed calibration records cannot be deleted."


class PointQuerySet(CalibrationQuerySet):
    signed_lookup = "event__state"
    parent = "event"


class StandardLinkQuerySet(CalibrationQuerySet):
    signed_lookup = "calibrationevent__state"
    parent = "calibrationevent"
    changed_message = deleted_message = "The reference standards of a signed calibration cannot be changed."


def history_model_name(name):
    """The audit trail's model names: the links' history keeps the name (and table) it had before StandardLink
    was a model of its own."""
    return "HistoricalCalibrationEvent_reference_standards" if name == "StandardLink" else f"Historical{name}"


class StandardLink(models.Model):
    """A reference standard used by a calibration: the table behind CalibrationEvent.reference_standards (the
    one Django made for it before, same table and columns). A model of its own so that its rows are locked like
    the event's: the standards of a signed calibration are neither removed nor re-pointed, whether through the
    event's or the standard's link manager (`refuse_relinking_signed`), a query on this table or a save."""

    calibrationevent = models.ForeignKey("calibration.CalibrationEvent", on_delete=models.CASCADE, related_name="+")
    referencestandard = models.ForeignKey(ReferenceStandard, on_delete=models.CASCADE, related_name="+")

    objects = StandardLinkQuerySet.as_manager()

    class Meta:
        db_table = "calibration_calibrationevent_reference_standards"
        unique_together = [("calibrationevent", "referencestandard")]

    def _signed(self, event_id):
        return CalibrationEvent.objects.filter(pk=event_id, state=CalibrationEvent.State.SIGNED).exists()

    def save(self, *args, **kwargs):
        stored = StandardLink.objects.filter(pk=self.pk).values_list("calibrationevent_id", flat=True).first()
        if any(event_id and self._signed(event_id) for event_id in {stored, self.calibrationevent_id}):
            raise SignedRecordError(StandardLinkQuerySet.changed_message)
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if self._signed(self.calibrationevent_id):
            raise SignedRecordError(StandardLinkQuerySet.deleted_message)
        return super().delete(*args, **kwargs)


def in_force(outer="pk"):
    """Records not replaced by a signed correction (a draft correction replaces nothing yet: the record it corrects
    counts until it is signed). `outer`: the event's id in the query it filters, "pk" for events, "event" for points.
    NOT EXISTS, not a left join with OR: SQLite then scans the whole table for each row (measured by the benchmark)."""
    return ~models.Exists(CalibrationEvent.objects.filter(supersedes=models.OuterRef(outer),
                                                          state=CalibrationEvent.State.SIGNED))


class CalibrationEvent(SignedRecord):
    class State(models.TextChoices):
        DRAFT = "draft", "Draft"
        SIGNED = "signed", "Signed"
        # a draft its author or a reviewer withdrew, with a reason; kept (never signed, never counted), not deleted
        DISCARDED = "discarded", "Discarded draft"

    class Reason(models.TextChoices):
        SCHEDULED = "scheduled", "Scheduled"
        AFTER_REPAIR = "after_repair", "After repair"
        SUSPECTED_FAULT = "suspected_fault", "Suspected fault"
        NEW_INSTALLATION = "new_installation", "New installation"

    class Rule(models.TextChoices):
        SIMPLE = "simple", "Simple acceptance (ILAC-G8, w = 0)"
        GUARDED = "guarded", "Guarded acceptance (ILAC-G8, w = U)"
        RISK = "risk", "Risk-based acceptance (JCGM 106, PFA within the target)"

    device = models.ForeignKey(Device, on_delete=models.PROTECT, related_name="calibrations")
    # the position the device was installed at when calibrated (blank: calibrated on the bench as a spare)
    position = models.ForeignKey(Position, null=True, blank=True, on_delete=models.PROTECT,
                                 related_name="calibrations", editable=False)
    performed_on = models.DateField("date of calibration")
    # the name printed as "performed by": the performing user's name, or the outside contractor's
    technician = models.CharField(max_length=120)
    performed_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                     related_name="calibrations_performed",
                                     help_text="the logged-in technician who performed the work (none for a contractor)")
    contractor = models.CharField("outside contractor", max_length=120, blank=True,
                                  help_text="only when an outside contractor performed the work: name and company")
    condition_received = models.TextField("condition of the item as received", blank=True)
    deviations = models.TextField("deviations from the method", blank=True)
    # each reference standard as it was at sign-off (ReferenceStandard.snapshot); certificates print this
    standards_snapshot = models.JSONField(default=list, blank=True)
    reference_standards = models.ManyToManyField(ReferenceStandard, related_name="events", through=StandardLink)
    procedure = models.TextField("method / procedure")
    ambient_temp_c = models.FloatField("ambient temperature (°C)", null=True, blank=True)
    fluid_temp_c = models.FloatField("fluid temperature (°C)", null=True, blank=True)
    pressure_bar = models.FloatField("line pressure (bar g)", null=True, blank=True)
    density_kg_m3 = models.FloatField(
        "fluid density at the calibration (kg/m³)", null=True, blank=True,
        help_text="needed when the reference standard measures mass and the meter volume, or the other way round")
    # the units the reference readings were entered in (the standard's) and the meter's units that day;
    # blank on records entered before units were codes: both were then the meter's units
    reference_units = models.CharField("units of the reference readings", max_length=20, blank=True,
                                       choices=units.UNIT_CHOICES, editable=False)
    meter_units = models.CharField("meter's units at the calibration", max_length=20, blank=True,
                                   choices=units.UNIT_CHOICES, editable=False)
    reason = models.CharField(max_length=20, choices=Reason.choices, default=Reason.SCHEDULED)
    adjusted = models.BooleanField("adjustment made", default=False)
    notes = models.TextField(blank=True)
    decision_rule = models.CharField(max_length=10, choices=Rule.choices, default=Rule.SIMPLE)
    state = models.CharField(max_length=10, choices=State.choices, default=State.DRAFT)
    signed_by = models.CharField(max_length=120, blank=True)
    signed_role = models.CharField(max_length=60, blank=True)
    signed_at = models.DateTimeField(null=True, blank=True)
    # the signed calibration this one corrects (ISO/IEC 17025 §7.8.8); it replaces that one when it is signed
    supersedes = models.OneToOneField("self", null=True, blank=True, on_delete=models.PROTECT, related_name="superseded_by")
    discard_reason = models.TextField("why the draft was discarded", blank=True)
    discarded_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                     related_name="+")
    discarded_at = models.DateTimeField(null=True, blank=True)
    correction_reason = models.TextField("reason for the correction", blank=True,
                                         help_text="why the certificate it replaces is corrected; printed on the new one")
    # everything the certificate prints, frozen at sign-off (calibration/signed_content.py); locked with the record
    signed_content = models.JSONField("content as signed", default=dict, blank=True, editable=False)
    as_found_in_tolerance = models.BooleanField(null=True)
    as_left_in_tolerance = models.BooleanField(null=True)
    # the observed as-found condition, every |error| <= MPE whatever the rule (decision.observed_in_tolerance): what
    # the interval methods and reliability statistics count (issue 31); blank on records loaded without it, which
    # are counted by their verdict (observed_or_verdict)
    as_found_observed_in_tolerance = models.BooleanField("as found within the MPE (observed)", null=True,
                                                         editable=False)
    created_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                   related_name="calibrations_entered")
    # the id a tablet gave the entry while offline; unique, so a repeated or interrupted send adds nothing twice
    client_id = models.UUIDField(null=True, blank=True, unique=True, editable=False)
    # the signed content is written once, with the signature, and never changes: a copy per version adds nothing
    history = HistoricalRecords(m2m_fields=[reference_standards], custom_model_name=history_model_name,
                                excluded_fields=["signed_content"])

    objects = CalibrationQuerySet.as_manager()
    ledger_kind = CALIBRATION.name

    class Meta:
        ordering = ["-performed_on", "-id"]
        # drafts are few among hundreds of thousands of signed events: the review finds them by this index
        indexes = [models.Index(fields=["device"], condition=models.Q(state="draft"), name="calibration_draft_idx")]
        permissions = [
            ("sign_calibration", "Can sign own calibrations"),
            ("countersign_calibration", "Can countersign calibrations"),
            ("view_review", "Can see the weekly review and fleet statistics"),
        ]

    def __str__(self):
        return f"{self.device} {self.performed_on} ({self.get_state_display()})"

    def clean(self):
        errors = {}
        for name in ("ambient_temp_c", "fluid_temp_c"):
            value = number_or_none(getattr(self, name))
            if value is not None and value < -273.15:
                errors[name] = "Temperature is below absolute zero."
        density = number_or_none(self.density_kg_m3)
        if density is not None and not (math.isfinite(density) and density > 0):
            errors["density_kg_m3"] = "The density must be a number above zero (kg/m³)."
        pressure = number_or_none(self.pressure_bar)
        if pressure is not None and pressure < FULL_VACUUM_BAR_G:
            errors["pressure_bar"] = f"A gauge pressure cannot be below full vacuum ({FULL_VACUUM_BAR_G} bar g)."
        # a day's slack: the tablet's local date may be a day ahead of the server's (UTC)
        if (isinstance(self.performed_on, dt.date) and self._state.adding
                and self.performed_on > timezone.localdate() + dt.timedelta(days=1)):
            errors["performed_on"] = "The date of calibration is in the future."
        if self.contractor and self.performed_by_id:
            errors["contractor"] = "Work is performed either by the logged-in technician or by an outside contractor, not both."
        errors.update(signature_errors(self))
        errors.update(self.correction_errors())
        if errors:
            raise ValidationError(errors)

    def correction_errors(self):
        """A correction (ISO/IEC 17025 §7.8.8) replaces a signed record of the same device and says why."""
        if not self.supersedes_id:
            return {}
        found = {}
        if not (self.correction_reason or "").strip():
            found["correction_reason"] = "State why the calibration is corrected: the reason is printed on the new certificate."
        replaced = CalibrationEvent.objects.filter(pk=self.supersedes_id).values("state", "device_id").first()
        if replaced is None or replaced["state"] != self.State.SIGNED:
            found["supersedes"] = "Only a signed calibration can be corrected; a draft is signed or left as it is."
        elif self.device_id and replaced["device_id"] != self.device_id:
            found["supersedes"] = "A correction is recorded for the same device as the calibration it corrects."
        return found

    def get_absolute_url(self):
        return reverse("calibration:event-detail", args=[self.pk])

    @property
    def is_signed(self):
        return self.state == self.State.SIGNED

    # Units -----------------------------------------------------------------------------------------
    @property
    def device_units(self):
        """The meter's units on this record: as recorded at entry, else (older records) the meter's now."""
        return self.meter_units or self.device.flow_units

    @property
    def entered_units(self):
        """The units the reference readings were entered in (the standard's)."""
        return self.reference_units or self.device_units

    @property
    def converted(self):
        """Whether the reference readings were converted from the standard's units to the meter's."""
        return self.entered_units != self.device_units

    def unit_factor(self):
        """Meter units per standard unit (every conversion made at entry is a proportion)."""
        if not self.converted:
            return 1.0
        return units.convert(1.0, self.entered_units, self.device_units, density_kg_m3=self.density_kg_m3)

    @property
    def density_used(self):
        """Whether the density entered converted the readings (mass against volume)."""
        if not self.converted or self.density_kg_m3 is None:
            return False
        try:
            return "density" in units.conversion_needs(self.entered_units, self.device_units)
        except units.UnitError:
            return False

    def _stored_state(self):
        if not self.pk:
            return None
        return CalibrationEvent.objects.filter(pk=self.pk).values_list("state", flat=True).first()

    def save(self, *args, **kwargs):
        stored = self._stored_state()
        if stored == self.State.SIGNED:
            raise SignedRecordError(f"Calibration {self.pk} is signed and cannot be changed; record a correction instead.")
        if stored == self.State.DISCARDED:
            raise SignedRecordError(f"Calibration {self.pk} was discarded and cannot be changed; enter a new one.")
        problems = self.correction_errors()
        if problems:
            raise ValidationError(problems)
        if self._state.adding and self.position_id is None and self.device_id:
            # where the device served when it was calibrated; a correction keeps the record's it corrects
            if self.supersedes_id:
                self.position_id = self.supersedes.position_id
            elif isinstance(self.performed_on, dt.date):
                self.position_id = self.device.position_on(self.performed_on)
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if self._stored_state() == self.State.SIGNED:
            raise SignedRecordError(f"Calibration {self.pk} is signed and cannot be deleted.")
        return super().delete(*args, **kwargs)

    @property
    def is_draft(self):
        return self.state == self.State.DRAFT

    @property
    def is_discarded(self):
        return self.state == self.State.DISCARDED

    def discard(self, reason: str, user):
        """Withdraw this draft with a reason: it stays on file (and in its history) as a discarded draft, is never
        signed and counts nowhere. A discarded correction no longer holds the record it was to correct, so that one
        can be corrected again."""
        reason = (reason or "").strip()
        if not reason:
            raise ValidationError({"discard_reason": "Say why the draft is discarded (kept with the record)."})
        with transaction.atomic():
            stored = CalibrationEvent.objects.select_for_update().filter(pk=self.pk).values_list("state", flat=True).first()
            if stored != self.State.DRAFT:
                raise SignedRecordError(f"Calibration {self.pk} is not a draft any more ({stored}); it cannot be "
                                        "discarded.")
            if self.supersedes_id:
                reason = f"{reason} (it was a correction of calibration {self.supersedes_id})"
                self.supersedes = None
            self.state, self.discard_reason = self.State.DISCARDED, reason
            self.discarded_by, self.discarded_at = user, timezone.now()
            self._change_reason = f"discarded: {reason}"[:100]
            super().save()

    # Computation ---------------------------------------------------------------------------------
    def points_of(self, kind):
        return [p for p in self.points.all() if p.kind == kind]

    def problems(self):
        """Everything that stops this event being signed, as messages."""
        found = []
        as_found = self.points_of(CalibrationPoint.Kind.AS_FOUND)
        as_left = self.points_of(CalibrationPoint.Kind.AS_LEFT)
        if not as_found:
            found.append("No as-found points recorded.")
        if self.adjusted and not as_left:
            found.append("An adjustment was made, so as-left points are required.")
        if self.supersedes_id and not (self.correction_reason or "").strip():
            found.append("A correction must state why it replaces the calibration it corrects.")
        standards = list(self.reference_standards.all())
        if not standards:
            found.append("No reference standard selected.")
        values = [p.reference_as_entered for p in as_found + as_left]
        for standard in standards:
            if self.reference_units and standard.units != self.reference_units:
                found.append(f"Reference standard {standard.identification} is stated in {standard.units_label}, "
                             f"but the reference readings were entered in {units.unit(self.reference_units).label}.")
                continue
            found.extend(standard.problems(self.performed_on, values))
        return found

    def standards_as_signed(self):
        """The reference standards as recorded: the sign-off snapshot; for a record signed before snapshots were
        kept, each standard's audit-trail version as of the signing time (the current one if there is none)."""
        if self.standards_snapshot:
            return [dict(s, due_date=dt.date.fromisoformat(s["due_date"])) for s in self.standards_snapshot]
        found = []
        for standard in self.reference_standards.all():
            version = None
            if self.signed_at is not None:
                version = standard.history.filter(history_date__lte=self.signed_at).order_by("-history_date").first()
            snap = (version.instance if version is not None else standard).snapshot()
            found.append(dict(snap, due_date=dt.date.fromisoformat(snap["due_date"])))
        return found

    def content_as_signed(self):
        """What the certificate prints (calibration/signed_content.py): the content frozen at sign-off; for a record
        stored without it (signed before it was kept, or loaded without a sign-off) the content rebuilt from the
        audit trail as of the signing time, which says so and names the parts taken from the register as it is."""
        if not self.is_signed:
            raise ValueError("Only a signed calibration has signed content.")
        if self.signed_content:
            return self.signed_content
        from django.apps import apps

        return signed_content.rebuilt(self, apps)

    @property
    def content_stored(self):
        return bool(self.signed_content)

    def content_digest(self):
        """SHA-256 of the canonical JSON of the content as signed: equal digests, equal certificates."""
        return signed_content.digest(self.content_as_signed())

    def evaluate(self):
        """Compute every point and the event verdicts; returns nothing, updates unsaved fields."""
        standards = list(self.reference_standards.all())
        factor = self.unit_factor()
        for point in self.points.all():
            point.compute(self.device, standards, self.decision_rule, factor=factor)
        as_found = [p.decision for p in self.points_of(CalibrationPoint.Kind.AS_FOUND)]
        as_left = [p.decision for p in self.points_of(CalibrationPoint.Kind.AS_LEFT)] or as_found
        self.as_found_in_tolerance = decision.verdict_in_tolerance(as_found) if as_found else None
        self.as_left_in_tolerance = decision.verdict_in_tolerance(as_left) if as_left else None
        found_points = self.points_of(CalibrationPoint.Kind.AS_FOUND)
        self.as_found_observed_in_tolerance = decision.observed_in_tolerance([p.error for p in found_points],
                                                                             [p.mpe for p in found_points])

    # Sign-off (the one sign path is ledger/signed.py) ----------------------------------------------------
    def not_signable(self, state, signed_by):
        if state == self.State.DISCARDED:
            return SignedRecordError(f"Calibration {self.pk} was discarded and cannot be signed.")
        return SignedRecordError(f"Calibration {self.pk} is already signed by {signed_by}.")

    def before_signature(self):
        """Refuse a calibration that cannot be signed; compute and store its points' results and its verdicts."""
        problems = self.problems()
        if problems:
            raise ValidationError(problems)
        standards = list(self.reference_standards.all())
        factor = self.unit_factor()
        self._points_signed = list(self.points.all())
        for point in self._points_signed:
            point.compute(self.device, standards, self.decision_rule, factor=factor)
            point.save()
        self.evaluate()
        self.standards_snapshot = [s.snapshot() for s in standards]

    def at_signature(self):
        # what the certificate prints, from the register as it stands now, locked with the signature
        self.signed_content = signed_content.at_sign_off(self, self._points_signed)


class CalibrationPoint(models.Model):
    class Kind(models.TextChoices):
        AS_FOUND = "as_found", "As found"
        AS_LEFT = "as_left", "As left"

    event = models.ForeignKey(CalibrationEvent, on_delete=models.CASCADE, related_name="points")
    kind = models.CharField(max_length=10, choices=Kind.choices)
    nominal_pct = models.FloatField("nominal (% of range)")
    # in the meter's units (converted from the standard's at entry when they differ); the error is computed from it
    reference_value = models.FloatField(validators=[MinValueValidator(0.0, "The reference flow cannot be negative.")])
    # the reading as entered, in the reference standard's units (event.entered_units); blank on older records
    reference_entered = models.FloatField("reference value as entered (standard's units)", null=True, blank=True)
    indicated_value = models.FloatField()
    repeats = models.JSONField(default=list, blank=True)
    resolution = models.FloatField(default=0.0, validators=[MinValueValidator(0.0, "Resolution cannot be negative.")])
    # computed at save, kept so certificates and fleet statistics read stored values
    error = models.FloatField(null=True, blank=True)
    mpe = models.FloatField(null=True, blank=True)
    expanded_uncertainty = models.FloatField(null=True, blank=True)
    # k and nu_eff of U (GUM G.4); records computed before k was evaluated per point used k = 2
    coverage_factor = models.FloatField("coverage factor k", default=2.0)
    dof_effective = models.FloatField("effective degrees of freedom", null=True, blank=True,
                                      help_text="Welch–Satterthwaite; blank: infinite (no Type A component)")
    decision = models.CharField(max_length=20, blank=True)
    # the |error| up to which the rule accepts (simple: MPE; guarded: MPE - U, at least 0; risk-based: the limit
    # meeting the PFA target with the prior of like devices, JCGM 106 §8); blank on records computed before
    acceptance_limit = models.FloatField("acceptance limit (±)", null=True, blank=True)

    objects = PointQuerySet.as_manager()

    class Meta:
        ordering = ["event", "kind", "nominal_pct"]

    def _event_signed(self):
        return CalibrationEvent.objects.filter(pk=self.event_id, state=CalibrationEvent.State.SIGNED).exists()

    def save(self, *args, **kwargs):
        if self.event_id and self._event_signed():
            raise SignedRecordError("Points of a signed calibration cannot be changed.")
        if self.event_id and CalibrationEvent.objects.filter(pk=self.event_id,
                                                             state=CalibrationEvent.State.DISCARDED).exists():
            raise SignedRecordError("Points of a discarded calibration cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if self._event_signed():
            raise SignedRecordError("Points of a signed calibration cannot be deleted.")
        return super().delete(*args, **kwargs)

    @property
    def reference_as_entered(self):
        return self.reference_value if self.reference_entered is None else self.reference_entered

    @property
    def indication_used(self):
        """The indication the error is computed from: the mean of the repeat readings when there are any
        (the tablet form then stores that mean as the indicated value), else the indicated value."""
        return sum(self.repeats) / len(self.repeats) if self.repeats else self.indicated_value

    @property
    def tur(self):
        """Test uncertainty ratio of this point (ANSI/NCSL Z540.3: MPE / the point's own 95 % U), or None."""
        if self.mpe is None or self.expanded_uncertainty is None:
            return None
        return uncertainty.test_uncertainty_ratio(abs(self.mpe), self.expanded_uncertainty)

    @property
    def tur_warning(self):
        tur = self.tur
        return None if tur is None else uncertainty.tur_warning(tur)

    def compute(self, device, standards, rule, factor=1.0):
        """Error, MPE, expanded uncertainty (all in the meter's error basis), k, nu_eff and the decision.

        `standards`: the reference standards used (all of them enter U), or one standard, or None.
        `factor`: meter units per unit of the standards (CalibrationEvent.unit_factor): a standard's absolute
        uncertainty is stated in its own units and is converted by it."""
        if standards is None:
            standards = []
        elif isinstance(standards, ReferenceStandard):
            standards = [standards]
        span = device.range_max - device.range_min
        basis = device.mpe_basis
        # stored to 9 decimals (far below the 3 shown): 20.15 vs 20 is 0.75 %, not 0.7499999999999929 %
        self.error = round(errors.point_error(self.reference_value, self.indication_used, basis, span), 9)
        self.mpe = device.mpe_value
        if not standards:
            raise ValueError("reference_standards: choose the reference standard used; the uncertainty of a point "
                             "cannot be computed without it")
        budget = uncertainty.point_uncertainty(
            self.reference_value,
            [(s.expanded_uncertainty * factor if s.uncertainty_basis == ReferenceStandard.UncertaintyBasis.ABSOLUTE
              else s.expanded_uncertainty, s.uncertainty_basis) for s in standards],
            self.repeats, self.resolution,
            repeatability=None if len(self.repeats or []) >= 2 else past_repeatability(device, self.reference_value),
        )
        self.expanded_uncertainty = errors.to_error_units(budget.U, basis, self.reference_value, span)
        self.coverage_factor = budget.k
        self.dof_effective = budget.nu_eff if budget.nu_eff != float("inf") else None
        self.acceptance_limit = self.limit_for(device, rule)
        self.decision = decision.decide(self.error, self.mpe, self.expanded_uncertainty, rule,
                                        accept_limit=self.acceptance_limit)

    def limit_for(self, device, rule):
        """The acceptance limit of `rule` at this point (after error, MPE, U and k are computed). Risk-based: from
        the stored prior of like devices and the PFA target (calibration.conformity.acceptance_limits_for_pfa)."""
        if rule == CalibrationEvent.Rule.SIMPLE:
            return self.mpe
        if rule == CalibrationEvent.Rule.GUARDED:
            return max(self.mpe - self.expanded_uncertainty, 0.0)
        from calibration import conformity, conformity_fleet

        if not self.expanded_uncertainty or not self.coverage_factor:
            return self.mpe   # no uncertainty stated: the measurement is taken as exact (as the other rules do)
        prior = getattr(device, "_conformity_prior", None)
        if prior is None:
            prior = device._conformity_prior = conformity_fleet.prior_for_meter(device)
        u = self.expanded_uncertainty / self.coverage_factor
        _, upper = conformity.acceptance_limits_for_pfa(prior.mean * self.mpe, prior.sd * self.mpe, u, -self.mpe,
                                                        self.mpe, conformity_fleet.pfa_target())
        return min(max(upper, 0.0), self.mpe)


def observed_or_verdict():
    """The observed as-found condition of an event for queries: the stored observation, else (a record loaded
    without it) the verdict, which is the same under simple acceptance."""
    from django.db.models.functions import Coalesce

    return Coalesce("as_found_observed_in_tolerance", "as_found_in_tolerance")


class ErrorPrior(models.Model):
    """The prior of the true error of like devices (JCGM 106 §9.2): a normal fitted to the as-found errors of the
    signed calibrations in force of the devices of one principle (fluid blank) or of one principle on one fluid,
    in MPE units (error / MPE). Kept by the whole-fleet recompute (calibration/conformity_fleet.py), so pages and
    single-device recomputes read it without scanning the history."""

    principle = models.CharField(max_length=30)
    fluid = models.ForeignKey("plant.Fluid", null=True, blank=True, on_delete=models.CASCADE, related_name="+")
    mean = models.FloatField("mean (MPE units)")
    sd = models.FloatField("standard deviation (MPE units)")
    count = models.PositiveIntegerField("as-found errors fitted")
    computed_at = models.DateTimeField()

    class Meta:
        ordering = ["principle", "fluid"]
        indexes = [models.Index(fields=["principle", "fluid"], name="error_prior_group_idx")]

    def __str__(self):
        return f"{self.principle} / {self.fluid_id or 'any fluid'}: {self.mean:+.3f} ± {self.sd:.3f} MPE (n={self.count})"


def past_repeatability(device, reference_value):
    """The device's repeatability from its own past repeats, for a point of fewer than two readings: the pooled
    relative SD (GUM 4.2.4) of the repeat readings of its signed points with two or more, scaled to this
    reference flow; None when it has none. Read once per meter object (cached on it)."""
    if device is None or device.pk is None:
        return None
    cached = getattr(device, "_past_repeatability", False)
    if cached is False:
        groups = []
        rows = CalibrationPoint.objects.filter(in_force("event"), event__device_id=device.pk,
                                               event__state=CalibrationEvent.State.SIGNED)
        for repeats in rows.values_list("repeats", flat=True):
            values = [float(v) for v in (repeats or [])]
            mean = sum(values) / len(values) if values else 0.0
            if len(values) >= 2 and mean != 0 and all(math.isfinite(v) for v in values):
                groups.append([v / abs(mean) for v in values])  # relative to the mean reading
        cached = None
        if groups:
            relative, dof = uncertainty.pooled_sd(groups)
            cached = (relative, dof, sum(len(g) for g in groups), len(groups))
        device._past_repeatability = cached
    if cached is None:
        return None
    relative, dof, readings, points = cached
    return uncertainty.KnownRepeatability(
        sd=relative * abs(float(reference_value)), dof=dof,
        source=f"pooled SD of the device's own past repeats ({readings} readings in {points} points)")


@receiver(post_save, sender=CalibrationEvent)
def note_loaded_raw(sender, instance, raw, **kwargs):
    """A fixture or a backup being loaded saves a signed event as it was, then sets its standards (loaddata):
    that first setting is the record as it was signed, not a change of it."""
    if raw:
        instance._links_being_loaded = True


@receiver(m2m_changed, sender=StandardLink)
def refuse_relinking_signed(sender, instance, action, reverse, pk_set, **kwargs):
    """add/remove/clear/set on a signed event's standards, from either side, is refused before anything moves."""
    if action not in ("pre_add", "pre_remove", "pre_clear"):
        return
    if reverse:  # `instance` is a standard; pk_set holds events (None: all of the standard's, for clear)
        events = CalibrationEvent.objects.filter(pk__in=instance.events.all() if pk_set is None else pk_set)
        signed = list(events.filter(state=CalibrationEvent.State.SIGNED).order_by("pk").values_list("pk", flat=True))
        if signed:
            raise SignedRecordError(
                f"Reference standard {instance.identification} is cited by signed "
                f"{'calibration' if len(signed) == 1 else 'calibrations'} {', '.join(map(str, signed[:10]))}"
                f"{' …' if len(signed) > 10 else ''}; the standards of a signed calibration cannot be changed.")
    elif instance.pk and not (action == "pre_add" and getattr(instance, "_links_being_loaded", False)):
        if CalibrationEvent.objects.filter(pk=instance.pk, state=CalibrationEvent.State.SIGNED).exists():
            raise SignedRecordError(f"Calibration {instance.pk} is signed; its reference standards cannot be changed.")


class CountersignatureQuerySet(AlwaysSignedQuerySet):
    """Every countersignature is signed: no bulk update (it would re-point the signer or the event) or delete."""

    changed_message = "A countersignature cannot be changed."
    deleted_message = "A countersignature cannot be deleted."


class Countersignature(SignedRecord):
    """A reviewer's countersignature: a separate, append-only record, so the signed event stays untouched."""

    event = models.OneToOneField(CalibrationEvent, on_delete=models.PROTECT, related_name="countersignature")
    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT)
    name = models.CharField(max_length=120)
    role = models.CharField(max_length=60)
    at = models.DateTimeField(default=timezone.now)

    objects = CountersignatureQuerySet.as_manager()
    ledger_kind = COUNTERSIGNATURE.name

    def save(self, *args, **kwargs):
        if self.pk:
            raise SignedRecordError("A countersignature cannot be changed.")
        with transaction.atomic():  # signed as it is written
            super().save(*args, **kwargs)
            self.seal()

    def delete(self, *args, **kwargs):
        raise SignedRecordError("A countersignature cannot be deleted.")


# What signed calibrations and countersignatures cite (plant/citations.py) --------------------------------------------
SIGNED_CALIBRATIONS = ("signed calibration", "signed calibrations")
SIGNED_ONLY = {"state": CalibrationEvent.State.SIGNED}
citations.protect(ReferenceStandard, label=lambda s: f"Reference standard {s.identification}",
                  instead="withdraw it from use instead", action=("withdraw_from_use", "Withdraw from use"))
for cited, lookup, noun in (
    (ReferenceStandard, "reference_standards", SIGNED_CALIBRATIONS),
    (Device, "device", SIGNED_CALIBRATIONS),
    (Position, "position", SIGNED_CALIBRATIONS),
    (Area, "position__area", ("signed calibration at its positions", "signed calibrations at its positions")),
    (Site, "position__area__site", ("signed calibration at its positions", "signed calibrations at its positions")),
    (Fluid, "position__fluid", ("signed calibration at positions on it", "signed calibrations at positions on it")),
):
    citations.cite(cited, citations.Citation(CalibrationEvent._meta.label, lookup, "is cited by", noun, SIGNED_ONLY))
for cited, device_field in ((DutyPeriod, "device"), (Installation, "device")):
    citations.cite(cited, citations.Coverage(CalibrationEvent._meta.label, "covers the dates of", SIGNED_CALIBRATIONS,
                                             device_field, SIGNED_ONLY))
# the signer is the user who entered the record (the sign-off views allow no one else): signed_by keeps the name
for lookup, verb, noun in (("performed_by", "performed", SIGNED_CALIBRATIONS),
                           ("created_by", "entered and signed", ("calibration", "calibrations"))):
    citations.cite(settings.AUTH_USER_MODEL,
                   citations.Citation(CalibrationEvent._meta.label, lookup, verb, noun, SIGNED_ONLY))
citations.cite(settings.AUTH_USER_MODEL, citations.Citation("calibration.Countersignature", "user", "countersigned",
                                                            ("calibration", "calibrations")))
