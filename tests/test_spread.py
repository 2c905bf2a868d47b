"""Monte Carlo yield, Wilson interval, corner and RSS worst case, sensitivities,
reproducibility (rcc.spread).

Statistics are checked twice: with a stand-in evaluator whose quantities are
closed-form linear functions of the part values (fast, thousands of samples),
and with the real full check on a case whose pass region is known in closed
form (a zener clamp: the switch peak is bus + clamp voltage).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.stats import binomtest

from rcc.design import load_design
from rcc.mains import bus_voltage_range
from rcc.margins import Evaluation, FindingMargin
from rcc.spread import spread, wilson_interval

# ------------------------------------------------------------ Wilson interval
#: Newcombe, R. G., "Two-sided confidence intervals for the single proportion:
#: comparison of seven methods", Statistics in Medicine 17, 857-872 (1998),
#: Table II, method 3 (Wilson score interval without continuity correction),
#: 95 % intervals, published to 4 decimals  # from memory; scipy agrees below
NEWCOMBE_1998_TABLE_II_WILSON = [
    (81, 263, 0.2553, 0.3662),
    (15, 148, 0.0624, 0.1605),
    (0, 20, 0.0000, 0.1611),
    (1, 29, 0.0061, 0.1718),
]


@pytest.mark.parametrize("successes, trials, low, high", NEWCOMBE_1998_TABLE_II_WILSON)
def test_wilson_reproduces_newcombe_1998(successes, trials, low, high):
    computed = wilson_interval(successes, trials)
    # the source gives 4 decimals: agree to half a unit in the last place
    assert computed == pytest.approx((low, high), abs=5e-5)


def test_wilson_agrees_with_scipy_over_a_grid():
    # scipy.stats.binomtest(...).proportion_ci(method="wilson"), an independent code
    for trials in (1, 7, 50, 1000):
        for successes in sorted({0, 1, trials // 3, trials - 1, trials}):
            reference = binomtest(successes, trials).proportion_ci(0.95, method="wilson")
            assert wilson_interval(successes, trials) == pytest.approx(
                (reference.low, reference.high), abs=1e-12)


# ------------------------------------------------------- stand-in evaluator
#: A stand-in model, linear in three part values: quantities and one margin
#: whose pass region is a half-space, so yields and worst cases are closed-form.
SLOPE_R, SLOPE_C, SLOPE_L = 2e-6, 3e8, 1e3


def linear_quantity(design) -> float:
    return (SLOPE_R * design.startup.resistance + SLOPE_C * design.drive.capacitance
            + SLOPE_L * design.transformer.magnetizing_inductance)


def linear_evaluator(design) -> Evaluation:
    """switch_peak_v = 2e-6 R + 3e8 C + 1e3 L; fails when R > 700 k."""
    resistance = design.startup.resistance
    findings = ()
    if resistance > 700e3:
        findings = (FindingMargin("startup-resistor-power", "fail", -(resistance - 700e3) / 700e3),)
    quantities = {"switch_peak_v": linear_quantity(design),
                  "output_v": 12.0 - 1e-6 * resistance}
    return Evaluation("fail" if findings else "pass", findings,
                      {"switch-voltage": 1 - linear_quantity(design) / 10}, quantities)


def _design_with(standby_case, tolerances):
    return load_design(standby_case, overrides={
        "tolerances": tolerances, "switch.hfe_min": 30, "switch.hfe_max": 30})


@pytest.fixture
def linear_design(standby_case):
    return _design_with(standby_case, {
        "startup": {"resistance": {"min": "600 kohm", "max": "800 kohm"}},
        "drive": {"capacitance": {"tolerance": "10%", "distribution": "normal"}},
        "transformer": {"magnetizing_inductance": "10%"}})


def test_yield_matches_the_closed_form_fraction(linear_design):
    result = spread(linear_design, samples=4000, seed=5, evaluator=linear_evaluator)
    # R uniform on [600 k, 800 k] fails above 700 k: exactly half fail
    analytic = 0.5
    low, high = result.pass_yield.interval_95
    assert low <= analytic <= high
    (finding,) = result.findings
    assert finding.fail.interval_95[0] <= 1 - analytic <= finding.fail.interval_95[1]


def test_rss_matches_the_linear_case(linear_design):
    result = spread(linear_design, samples=50, seed=1, evaluator=linear_evaluator)
    # sigma of each part: uniform width/sqrt(12), normal (3 sigma = 10 %) width/6
    sigma_r = 200e3 / math.sqrt(12)
    sigma_c = 0.2 * 68e-9 / 6
    sigma_l = 0.2 * 2.5e-3 / math.sqrt(12)
    three_sigma = 3 * math.sqrt((SLOPE_R * sigma_r) ** 2 + (SLOPE_C * sigma_c) ** 2
                                + (SLOPE_L * sigma_l) ** 2)
    centre = SLOPE_R * 700e3 + SLOPE_C * 68e-9 + SLOPE_L * 2.5e-3
    (worst,) = [w for w in result.worst_case if w.quantity == "switch_peak_v"]
    assert worst.nominal == pytest.approx(centre, rel=1e-12)
    assert worst.rss == pytest.approx(centre + three_sigma, rel=1e-9)
    # the corner is the top of every band; normalized sensitivity of R = slope R / Q
    assert worst.value == pytest.approx(SLOPE_R * 800e3 + SLOPE_C * 1.1 * 68e-9
                                        + SLOPE_L * 1.1 * 2.5e-3, rel=1e-12)
    sensitivity = {s.parameter: s.value for s in result.sensitivities
                   if s.quantity == "switch_peak_v"}
    assert sensitivity["startup.resistance"] == pytest.approx(SLOPE_R * 700e3 / centre)


@pytest.mark.parametrize("extra", [{}, {
    # five parameters: above MAX_FULL_CORNERS, the sensitivity-directed vertices
    "limiter": {"sense_resistance": "5%"}, "drive": {"resistance": "5%"}}])
def test_corners_bound_every_sample_of_monotone_quantities(standby_case, extra):
    tolerances = {"startup": {"resistance": {"min": "600 kohm", "max": "800 kohm"}},
                  "drive": {"capacitance": {"tolerance": "10%", "distribution": "normal"}},
                  "transformer": {"magnetizing_inductance": "10%"}}
    for section, entries in extra.items():
        tolerances.setdefault(section, {}).update(entries)
    design = _design_with(standby_case, tolerances)
    result = spread(design, samples=2000, seed=2, evaluator=linear_evaluator)
    for worst in result.worst_case:
        column = result.quantity_samples[worst.quantity]
        if worst.quantity not in ("switch_peak_v", "output_v"):
            continue
        if worst.extreme == "max":
            assert worst.value >= column.max()
        else:
            assert worst.value <= column.min()


def test_same_seed_same_result_bit_for_bit(linear_design):
    first = spread(linear_design, samples=300, seed=11, evaluator=linear_evaluator)
    again = spread(linear_design, samples=300, seed=11, evaluator=linear_evaluator)
    other = spread(linear_design, samples=300, seed=12, evaluator=linear_evaluator)
    assert np.array_equal(first.values, again.values)
    assert first.to_json() == again.to_json()
    assert not np.array_equal(first.values, other.values)


# ----------------------------------------------------------- the full check
@pytest.fixture(scope="module")
def clamp_case():
    """The standby case with a zener clamp whose voltage spreads uniformly over
    150..250 V above the bus and a VCEV that puts the pass limit inside it."""
    from tests.conftest import STANDBY_CASE

    base = load_design(STANDBY_CASE, overrides={"switch.hfe_min": 30, "switch.hfe_max": 30})
    bus_max = float(bus_voltage_range(base)[2])
    threshold = 200.0  # clamp voltage at which the switch peak meets its limit
    vcev = (bus_max + threshold) / base.limits.voltage_derating
    design = load_design(STANDBY_CASE, overrides={
        "switch.hfe_min": 30, "switch.hfe_max": 30, "switch.vcev": vcev,
        "clamp.type": "zener", "clamp.voltage": 200.0,
        "tolerances": {"clamp": {"voltage": {"min": "150 V", "max": "250 V"}}}})
    return design, bus_max, threshold


def test_full_check_yield_matches_the_closed_form(clamp_case):
    design, bus_max, threshold = clamp_case
    result = spread(design, samples=16, seed=3, workers=2)
    clamp = result.values[:, 0]
    # every sample: switch peak = highest bus + clamp voltage (zener clamp above
    # the reflected voltage); it fails exactly when the clamp exceeds the threshold
    assert result.quantity_samples["switch_peak_v"] == pytest.approx(bus_max + clamp, rel=1e-9)
    fails = next(f for f in result.findings if f.code == "switch-overvoltage").fail
    assert fails.count == int(np.sum(clamp > threshold))
    analytic = (250.0 - threshold) / (250.0 - 150.0)
    low, high = fails.interval_95
    assert low <= analytic <= high
    # one parameter: the two vertices are the band ends, bounding every sample
    (worst,) = [w for w in result.worst_case if w.quantity == "switch_peak_v"]
    assert worst.value == pytest.approx(bus_max + 250.0, rel=1e-9)
    assert worst.corner == {"clamp.voltage": 250.0}
    test_full_check_yield_matches_the_closed_form.result = result


def test_workers_do_not_change_results(clamp_case):
    design, _, _ = clamp_case
    two = getattr(test_full_check_yield_matches_the_closed_form, "result", None)
    if two is None:
        two = spread(design, samples=16, seed=3, workers=2)
    one = spread(design, samples=16, seed=3, workers=1)
    first, second = one.to_json(), two.to_json()
    first.pop("workers"), second.pop("workers")
    assert first == second


def test_spread_command_json_and_figure(standby_case, tmp_path):
    from typer.testing import CliRunner

    from rcc.cli import app

    figure = tmp_path / "spread.png"
    result = CliRunner().invoke(app, [
        "spread", str(standby_case), "--samples", "2", "--seed", "4", "--workers", "1",
        "--json", "--plot", str(figure), "--set", "switch.hfe_min=30", "--set", "switch.hfe_max=30",
        "--set", "tolerances={startup = {resistance = '5%'}}"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["samples"] == 2 and data["seed"] == 4
    assert set(data["yield"]) >= {"fraction", "interval_95"}
    assert [p["key"] for p in data["parameters"]] == ["startup.resistance"]
    assert {"quantity", "value", "unit", "corner"} <= set(data["worst_case"][0])
    assert data["quantities"]["switch_peak_v"]["unit"] == "V"
    assert all({"quantity", "parameter", "value"} == set(s) for s in data["sensitivities"])
    assert figure.stat().st_size > 10_000


# ------------------------------------------------ samples the cycle model doubts
def doubting_evaluator(design) -> Evaluation:
    """The linear stand-in, with the cycle model's doubts of a real check:
    ``pattern`` above 750 kohm, ``invariant: power balance`` above 790 kohm."""
    evaluation = linear_evaluator(design)
    resistance = design.startup.resistance
    doubts = (("pattern",) if resistance > 750e3 else ()) + (
        ("invariant: power balance",) if resistance > 790e3 else ())
    return Evaluation(evaluation.verdict, evaluation.findings, evaluation.margins,
                      evaluation.quantities, doubts)


def test_doubted_samples_are_unverified_per_reason_and_kept_apart(linear_design):
    from rcc.cli.spread import format_spread

    result = spread(linear_design, samples=2000, seed=7, evaluator=doubting_evaluator,
                    worst_case=False)
    resistance = result.values[:, 0]
    pattern = resistance > 750e3
    invariant = resistance > 790e3
    passing = resistance <= 700e3  # the stand-in fails above 700 kohm
    assert result.unverified == {"pattern": int(pattern.sum()),
                                 "invariant: power balance": int(invariant.sum())}
    assert result.unverified_samples == int(pattern.sum())
    # the yield over the verified samples counts none of the doubted ones
    assert result.verified_yield.trials == int((~pattern).sum())
    assert result.verified_yield.count == int((passing & ~pattern).sum())
    assert result.verified_pass.count == int((passing & ~pattern).sum())
    assert result.verified_pass.trials == 2000
    # here every doubted sample also fails, so the yield over all samples agrees
    assert result.pass_yield.count == int(passing.sum())
    data = result.to_json()
    assert data["unverified"]["samples"] == int(pattern.sum())
    assert data["unverified"]["reasons"] == result.unverified
    assert set(data["unverified"]["meaning"]) == set(result.unverified)
    text = format_spread(result)
    assert f"UNVERIFIED: {int(pattern.sum())} of 2000 samples" in text
    for reason, count in result.unverified.items():
        assert any(reason in line and f" {count} " in line for line in text.splitlines())
    assert "Yield counting unverified samples as failing" in text


def test_a_sample_whose_point_the_model_doubts_is_unverified():
    """With the full check: the 5 V case's cycle model doubts points (a burst
    pattern, a lock-up); every sample carries those doubts, none is verified."""
    from rcc.checks import check_design
    from rcc.margins import doubts_of, evaluate
    from tests.conftest import WORKED_CASES

    design = load_design(WORKED_CASES / "aux_5v_48v_dc.toml")
    report = check_design(design)
    expected = {str(d) for points in (report.points,) + report.corners
                for d in np.ravel(points.doubt)} - {""}
    assert expected  # the case has doubtful points
    assert set(doubts_of(report)) == expected
    assert set(evaluate(design).unverified) == expected
    result = spread(design, samples=2, seed=1, worst_case=False)
    assert result.unverified_samples == 2
    assert set(result.unverified) >= expected
    assert result.verified_yield.trials == 0 and result.verified_pass.count == 0
