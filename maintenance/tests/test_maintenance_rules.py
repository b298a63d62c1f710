"""The pure maintenance modules: tasks from principle and findings, and the found-condition loop.

Every expected value is worked by hand below. The trade facts the task mapping encodes are common practice
(maintenance/tasks.py), as are the loop's factors and thresholds (maintenance/loop.py).
"""
import datetime as dt

import numpy as np
import pytest

from maintenance import loop, tasks
from scheduling import maintenance_due as fleet
from plant import risk
from plant.risk import FluidProps

D = dt.date


def codes(specs):
    return [s.code for s in specs]


def by_code(specs):
    return {s.code: s for s in specs}


# Task mapping: common practice ---------------------------------------------------------------------
def test_every_meter_gets_a_visual_inspection_yearly():
    # common practice: a walk-by look for leaks and damage on every installed meter, yearly at least
    for principle in risk.PRINCIPLES:
        spec = by_code(tasks.derive_tasks(principle, []))["VISUAL_INSPECTION"]
        assert spec.frequency_days == 365 and spec.basis == "common practice"


def test_sticky_fluid_on_a_magmeter_calls_for_electrode_cleaning_shortened_by_severity():
    # common practice: coating insulates the electrodes (plant/risk.py EM_ELECTRODE_COATING, medium, factor 0.75)
    syrup = FluidProps(phase="liquid", conductivity_us_cm=30, sticky=True)
    found = risk.assess("electromagnetic", "316L", syrup)
    spec = by_code(tasks.derive_tasks("electromagnetic", found))["ELECTRODE_CLEAN"]
    # by hand: 180 d × 0.75 = 135 d
    assert (spec.base_days, spec.factor, spec.frequency_days) == (180, 0.75, 135)
    assert spec.because == ("EM_ELECTRODE_COATING",)
    assert "electrodes" in spec.reason and spec.basis == "common practice"


def test_brine_and_coating_together_take_the_smaller_factor():
    # chlorides (high, 0.5) and sticky (medium, 0.75) both call for the electrodes: 180 × 0.5 = 90 d
    fluid = FluidProps(phase="liquid", conductivity_us_cm=60000, chlorides=True, sticky=True)
    spec = by_code(tasks.derive_tasks("electromagnetic", risk.assess("electromagnetic", "316L", fluid)))
    assert spec["ELECTRODE_CLEAN"].frequency_days == 90
    assert set(spec["ELECTRODE_CLEAN"].because) == {"EM_CHLORIDES", "EM_ELECTRODE_COATING"}


def test_electrode_cleaning_not_called_for_on_clean_water():
    water = FluidProps(phase="liquid", conductivity_us_cm=450)
    assert codes(tasks.derive_tasks("electromagnetic", risk.assess("electromagnetic", "316L", water))) == [
        "VISUAL_INSPECTION", "TRANSMITTER_VERIFICATION"]


def test_hard_water_on_an_orifice_calls_for_impulse_line_blowdown():
    # common practice: small-bore impulse lines block with scale; medium finding (0.75): 90 × 0.75 = 67.5 -> 68 d
    hard = FluidProps(phase="liquid", conductivity_us_cm=450, scaling=True)
    spec = by_code(tasks.derive_tasks("orifice", risk.assess("orifice", "316", hard)))
    assert spec["IMPULSE_BLOWDOWN"].frequency_days == 68
    assert "impulse lines" in spec["IMPULSE_BLOWDOWN"].title.lower()
    assert spec["DP_ZERO_CHECK"].frequency_days == 365  # every DP meter: manifold and zero, yearly


def test_slimy_cooling_water_on_a_pitot_calls_for_pull_and_clean():
    # common practice: pitot ports block with slime; high finding (0.5): 90 × 0.5 = 45 d
    cooling = FluidProps(phase="liquid", conductivity_us_cm=1800, biofouling=True)
    for principle in ("pitot", "averaging_pitot"):
        spec = by_code(tasks.derive_tasks(principle, risk.assess(principle, "316", cooling)))["PITOT_PULL_CLEAN"]
        assert spec.frequency_days == 45 and "pitot" in spec.title.lower()


def test_turbine_rotor_bearings_and_strainer_always_and_sooner_with_solids():
    clean = FluidProps(phase="liquid")
    # moving parts note (low, 0.9): 365 × 0.9 = 328.5 -> 329 d (half up)
    spec = by_code(tasks.derive_tasks("turbine", risk.assess("turbine", "316", clean)))["TURBINE_ROTOR_STRAINER"]
    assert spec.frequency_days == 329 and "strainer" in spec.title
    dirty = FluidProps(phase="liquid", solids=True)
    spec = by_code(tasks.derive_tasks("turbine", risk.assess("turbine", "316", dirty)))["TURBINE_ROTOR_STRAINER"]
    assert spec.frequency_days == 183  # high (0.5): 365 × 0.5 = 182.5 -> 183


def test_coriolis_in_corrosive_service_gets_zero_and_tube_health_check():
    brine = FluidProps(phase="liquid", chlorides=True)
    spec = by_code(tasks.derive_tasks("coriolis", risk.assess("coriolis", "316L", brine)))
    assert spec["CORIOLIS_ZERO_TUBE"].frequency_days == 90  # 180 × 0.5
    # hot brine on stainless tubes: chloride stress-corrosion cracking (common practice) calls for the same check
    hot_brine = FluidProps(phase="liquid", chlorides=True, temperature_c=80)
    hot = by_code(tasks.derive_tasks("coriolis", risk.assess("coriolis", "316L", hot_brine)))
    assert "CORIOLIS_ZERO_TUBE" in hot
    # mitigated material (nickel alloy C-276): a low note with factor 1.0 calls for no zero/tube check of its own
    spec = by_code(tasks.derive_tasks("coriolis", risk.assess("coriolis", "alloy C-276", brine)))
    assert "CORIOLIS_ZERO_TUBE" not in spec


def test_clampon_coupling_and_transmitter_verification_by_principle():
    assert "CLAMPON_COUPLING" in codes(tasks.derive_tasks("ultrasonic_clampon", []))
    for principle in ("electromagnetic", "coriolis", "vortex", "ultrasonic_transit"):
        assert "TRANSMITTER_VERIFICATION" in codes(tasks.derive_tasks(principle, []))


def test_unknown_findings_call_for_nothing_and_unknown_principle_is_refused():
    other = risk.Finding("SOME_NEW_RULE", "high", "new", 0.5)
    assert codes(tasks.derive_tasks("vortex", [other])) == ["VISUAL_INSPECTION", "TRANSMITTER_VERIFICATION"]
    with pytest.raises(ValueError):
        tasks.derive_tasks("water wheel", [])


def test_every_mapped_finding_names_a_catalogue_task_and_every_task_is_common_practice():
    assert set(tasks.FINDING_TASKS.values()) <= set(tasks.CATALOGUE)
    assert all(k.basis == "common practice" for k in tasks.CATALOGUE.values())
    assert set(tasks.PRINCIPLE_TASKS) == set(risk.PRINCIPLES)


def test_shortened_rounds_half_up_and_refuses_bad_input():
    assert tasks.shortened(90, 0.75) == 68 and tasks.shortened(1, 0.25) == 1
    with pytest.raises(ValueError):
        tasks.shortened(0, 1.0)
    with pytest.raises(ValueError):
        tasks.shortened(90, 1.5)


# The loop: common practice rule of this tool ---------------------------------------------------------
def test_three_cleans_in_a_row_lengthen_by_half():
    # 120 d; clean, clean -> kept; third clean -> 120 × 1.5 = 180 d
    result = loop.next_frequency(120, ["clean", "clean"])
    assert result.frequency_days == 120
    result = loop.next_frequency(120, ["clean", "clean", "clean"])
    assert result.frequency_days == 180
    # six cleans: 120 -> 180 -> 270
    assert loop.next_frequency(120, ["clean"] * 6).frequency_days == 270


def test_fouled_shortens_and_resets_the_clean_count():
    # 45 d: blocked -> 22.5 -> 23 d (half up); clean, clean, heavy -> 12 (11.5 half up), clean × 3 -> 18
    assert loop.next_frequency(45, ["blocked"]).frequency_days == 23
    steps = ["blocked", "clean", "clean", "heavy_deposit", "clean", "clean", "clean"]
    assert loop.next_frequency(45, steps).frequency_days == 18


def test_light_deposit_damage_and_leaks_hold_but_break_the_run():
    # clean, clean, light deposit, clean -> still 100 (the run of cleans was broken)
    assert loop.next_frequency(100, ["clean", "clean", "light_deposit", "clean"]).frequency_days == 100
    assert loop.next_frequency(100, ["damaged", "leaking"]).frequency_days == 100


def test_bounds_quarter_and_four_times_the_start_within_a_week_and_three_years():
    assert loop.bounds(365) == (91, 1095)  # 365/4 = 91.25 -> 91; 4 × 365 = 1460 -> 1095
    assert loop.bounds(45) == (11, 180)    # 11.25 -> 11
    assert loop.bounds(20) == (7, 80)      # 5 -> at least 7
    assert loop.next_frequency(45, ["blocked"] * 5).frequency_days == 11
    assert loop.next_frequency(365, ["clean"] * 30).frequency_days == 1095


def test_words_explain_each_step():
    result = loop.next_frequency(45, ["clean", "blocked"], [D(2025, 1, 10), D(2025, 3, 1)])
    text = result.text()
    assert "2025-01-10: found clean (1 of 3 in a row): kept at 45 d." in text
    assert "2025-03-01: found blocked: 45 d × 0.5 → 23 d." in text


def test_next_due_from_last_visit_or_due_now_when_never_done():
    assert loop.next_due(D(2026, 1, 31), 45, D(2020, 1, 1)) == D(2026, 3, 17)  # 31 Jan + 45 d
    assert loop.next_due(None, 45, D(2026, 5, 1)) == D(2026, 5, 1)
    assert "Never done" in loop.due_sentence(None, 45, D(2026, 5, 1))


def test_fouling_finding_three_of_last_four():
    newest_first = [(D(2026, 4, 1), "heavy_deposit"), (D(2026, 1, 1), "clean"), (D(2025, 10, 1), "blocked"),
                    (D(2025, 7, 1), "heavy_deposit"), (D(2025, 4, 1), "clean")]
    finding = loop.fouling_finding(newest_first)
    assert finding.code == "MAINT_FOULED" and finding.severity == "high" and finding.interval_factor == 0.5
    assert "3 of the last 4 inspections (2026-04-01, 2025-10-01, 2025-07-01)" in finding.reason
    assert loop.fouling_finding(newest_first[1:]) is None  # clean, blocked, heavy, clean: 2 of 4
    assert loop.fouling_finding(newest_first[:3]) is None  # three inspections only


def test_failure_within_thirty_days_of_heavy_deposit_is_paired():
    inspections = [(D(2026, 3, 1), "heavy_deposit"), (D(2026, 6, 1), "clean"), (D(2026, 8, 1), "blocked")]
    calibrations = [(D(2026, 3, 20), False), (D(2026, 6, 10), False), (D(2026, 8, 31), False),
                    (D(2026, 9, 1), False), (D(2026, 8, 5), True)]
    # 3-20 is 19 d after 3-01; 6-10 follows a clean; 8-31 is 30 d after 8-01 (in); 9-01 is 31 d (out)
    assert loop.failures_after_fouling(inspections, calibrations) == [(D(2026, 3, 20), D(2026, 3, 1), 19),
                                                                      (D(2026, 8, 31), D(2026, 8, 1), 30)]


def test_vectorised_loop_equals_the_reference_on_random_histories():
    rng = np.random.default_rng(12)
    names = fleet.CODES
    starts = rng.integers(1, 800, size=400)
    histories = [list(rng.choice(len(names), size=rng.integers(0, 25), p=[.45, .15, .1, .08, .06, .06, .05, .05]))
                 for _ in starts]
    width = max(len(h) for h in histories)
    matrix = np.full((len(starts), width), -1)
    for i, h in enumerate(histories):
        matrix[i, :len(h)] = h
    got = fleet.vector_frequencies(starts, matrix)
    expected = [loop.next_frequency(int(s), [names[c] for c in h]).frequency_days for s, h in zip(starts, histories)]
    assert got.tolist() == expected
