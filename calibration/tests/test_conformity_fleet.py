"""Conformity risk in the bulk recompute (calibration/conformity_fleet.py): the stored priors of like devices and
each device's stored PFA and lowest p_c, against the scalar JCGM 106 functions fed through the ORM one device
at a time (calibration/conformity.py is itself checked against scipy in test_conformity.py)."""
import statistics
from collections import defaultdict

import pytest
from django.core.management import call_command

from calibration import conformity
from calibration.conformity_fleet import prior_for_meter, stored_fits
from scheduling.fleet import recompute_due_dates
from calibration.models import CalibrationEvent, CalibrationPoint, ErrorPrior, in_force
from plant.models import Device


def as_found_errors_by_group():
    """Independent of the bulk code: every as-found error / MPE of the signed calibrations in force, by
    (principle, fluid now) and by principle, read through the ORM device by device."""
    groups = defaultdict(list)
    for device in Device.objects.order_by("pk"):
        fluid = device.fluid
        points = CalibrationPoint.objects.filter(in_force("event"), event__device=device,
                                                 event__state=CalibrationEvent.State.SIGNED,
                                                 kind=CalibrationPoint.Kind.AS_FOUND)
        for error in points.values_list("error", flat=True):
            groups[(device.principle, fluid.pk if fluid else None)].append(error / device.mpe_value)
            groups[(device.principle, None)].append(error / device.mpe_value)
    return groups


@pytest.mark.django_db
def test_stored_priors_are_the_normal_fits_of_like_devices():
    call_command("make_fleet", meters=60, seed=5, verbosity=0)   # make_fleet ends with the whole-fleet recompute
    groups = as_found_errors_by_group()
    fits = stored_fits()
    assert fits, "the recompute stores the priors"
    assert fits.keys() == {k for k, v in groups.items() if len(v) >= 2}
    for key, (mean, sd, count) in fits.items():
        values = groups[key]
        assert count == len(values)
        assert mean == pytest.approx(statistics.fmean(values), abs=1e-12)
        assert sd == pytest.approx(statistics.stdev(values), rel=1e-9)   # n - 1, Python's statistics module
    # and every device finds a prior: its group's when large enough, else its principle's, else the default
    for device in Device.objects.order_by("pk")[:20]:
        prior = prior_for_meter(device)
        fluid = device.fluid
        group = fits.get((device.principle, fluid.pk if fluid else None))
        if group and group[2] >= conformity.PRIOR_MIN_COUNT:
            assert (prior.scope, prior.mean, prior.count) == ("principle and fluid", group[0], group[2])
        elif fits.get((device.principle, None), (0, 0, 0))[2] >= conformity.PRIOR_MIN_COUNT:
            assert prior.scope == "principle"
        else:
            assert (prior.scope, prior.mean, prior.sd) == ("default", conformity.DEFAULT_PRIOR_MEAN,
                                                           conformity.DEFAULT_PRIOR_SD)


def scalar_risks(device, fits):
    """The worst PFA and lowest p_c inside the MPE of the device's last calibration, scalar and through the ORM."""
    last = (CalibrationEvent.objects.filter(in_force(), device=device, state=CalibrationEvent.State.SIGNED)
            .order_by("-performed_on", "-id").first())
    if last is None:
        return None, None
    fluid = device.fluid
    mean, sd, _, _ = conformity.choose_prior(fits, device.principle, fluid.pk if fluid else None)
    pfas, pcs = [], []
    for p in last.points.filter(kind=CalibrationPoint.Kind.AS_FOUND):
        if not p.expanded_uncertainty:
            continue
        u = p.expanded_uncertainty / p.coverage_factor
        half = p.mpe if last.decision_rule == "simple" else max(p.mpe - p.expanded_uncertainty, 0.0)
        pfas.append(conformity.global_risks(mean * p.mpe, sd * p.mpe, u, -p.mpe, p.mpe, -half, half)["pfa"])
        if abs(p.error) <= p.mpe:
            pcs.append(conformity.conformance_probability(p.error, u, -p.mpe, p.mpe))
    return (max(pfas) if pfas else None), (min(pcs) if pcs else None)


@pytest.mark.django_db
def test_stored_device_risks_equal_the_scalar_computation(settings):
    settings.CALIBRATION = {**settings.CALIBRATION, "decision_rule": "guarded"}
    call_command("make_fleet", meters=40, seed=9, verbosity=0)
    recompute_due_dates()
    fits = stored_fits()
    checked = 0
    for device in Device.objects.order_by("pk"):
        pfa, pc = scalar_risks(device, fits)
        if pfa is None:
            assert device.conformity_pfa is None
        else:
            assert device.conformity_pfa == pytest.approx(pfa, abs=1e-9), device.pk
            checked += 1
        if pc is None:
            assert device.conformity_min_pc is None
        else:
            assert device.conformity_min_pc == pytest.approx(pc, abs=1e-12), device.pk
    assert checked >= 20


@pytest.mark.django_db
def test_single_device_recompute_reads_the_stored_priors():
    call_command("make_fleet", meters=40, seed=9, verbosity=0)
    before = list(ErrorPrior.objects.order_by("pk").values_list("principle", "fluid_id", "mean", "sd", "count"))
    whole = dict(Device.objects.values_list("pk", "conformity_pfa"))
    some = list(Device.objects.filter(calibrations__isnull=False).distinct().order_by("pk")[:3])
    Device.objects.filter(pk__in=[m.pk for m in some]).update(conformity_pfa=None, conformity_min_pc=None)
    recompute_due_dates(Device.objects.filter(pk__in=[m.pk for m in some]))
    after = list(ErrorPrior.objects.order_by("pk").values_list("principle", "fluid_id", "mean", "sd", "count"))
    assert after == before   # a few devices' recompute leaves the priors of the fleet as they were
    for device in some:
        device.refresh_from_db()
        assert device.conformity_pfa == whole[device.pk]
