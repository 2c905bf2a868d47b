"""IEC 60063 preferred values (rcc.eseries) and `rcc fix` suggestions: every
suggestion, applied with --set, makes its finding pass (rcc.fix)."""

from __future__ import annotations

import json
import math
import os

import pytest
from typer.testing import CliRunner

from rcc.cli import app
from rcc.design import load_design
from rcc.eseries import nearest_preferred, preferred_values, series_mantissas
from rcc.cli.overrides import load_with_overrides
from rcc.fix import ADJUSTABLE, NOT_RUNNING, suggest_fixes
from rcc.margins import Evaluation, FindingMargin
from rcc.mains import rectified_peak
from tests.conftest import WORKED_CASES

runner = CliRunner()

#: IEC 60063:2015, "Preferred number series for resistors and capacitors",
#: Table 1: the E24 series (two significant figures)  # from memory
IEC_60063_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
                 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
#: IEC 60063:2015, Table 2: the first ten values of E96  # from memory
IEC_60063_E96_START = (1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24)


def test_series_are_the_standard_ones():
    assert series_mantissas("E24") == IEC_60063_E24
    assert series_mantissas("E12") == IEC_60063_E24[::2]
    assert series_mantissas("E6") == (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
    assert series_mantissas("E96")[:10] == IEC_60063_E96_START
    assert series_mantissas("E48") == series_mantissas("E96")[::2]
    assert len(series_mantissas("E192")) == 192 and 9.20 in series_mantissas("E192")
    with pytest.raises(ValueError, match="expected one of E6, E12, E24"):
        series_mantissas("E7")


def test_preferred_values_span_decades_and_include_bounds():
    values = preferred_values("E12", 4.7e-9, 10e-9)
    assert values == pytest.approx([4.7e-9, 5.6e-9, 6.8e-9, 8.2e-9, 10e-9])
    assert nearest_preferred(700e3, "E24") == pytest.approx(680e3)
    assert nearest_preferred(0.95, "E6") == pytest.approx(1.0)


def _check_with_set(path, texts) -> list[dict]:
    """`rcc check --set key=value ...` (cycle-model points only: no engine budget
    for doubtful points; the start-up engine still runs): its findings."""
    arguments = ["check", str(path), "--json", "--quiet", "--engine-budget", "0s"]
    for key, text in texts.items():
        arguments += ["--set", f"{key}={text}"]
    outcome = runner.invoke(app, arguments)
    assert outcome.exit_code in (0, 1), outcome.output
    return json.loads(outcome.stdout)["findings"]


OPEN_RESISTOR_CASE = WORKED_CASES / "fault_startup_resistor_open.toml"
#: The start-up resistor alone: the sense resistor's ladder reaches 47 ohm, where
#: one full check of this case costs minutes of CPU in the cycle model's bus
#: balance (measured 213 s); its search runs in the opt-in test below.
OPEN_RESISTOR_KEYS = ("startup.resistance",)


@pytest.fixture(scope="module")
def open_resistor_fixes():
    design = load_design(OPEN_RESISTOR_CASE)
    return design, suggest_fixes(design, keys=OPEN_RESISTOR_KEYS)


def test_fix_open_startup_resistor(open_resistor_fixes):
    design, result = open_resistor_fixes
    original = result.original
    # open resistor: no start, and after a first cycle no restart either (the
    # base-emitter resistor bleeds the base); the current limit leaves less than
    # the 10 % reserve over the heaviest load (6.38 W for 6.00 W): a warning
    assert {"no-start", "no-restart"} <= set(original.failing)
    assert original.severity_of("overload") == "warn"
    # the output is the cycle model's running orbit (once running, the ring keeps
    # it switching without the start-up current: 12.5 V), or none where it does
    # not switch at all -- never 0 V
    output = original.quantities["output_v"]
    assert output is None or output > 0.5 * design.output.voltage_target
    # the start-up resistor sets neither the current limit nor what the supply
    # would do once running: the core flux at the current limit of this old
    # design revision (core-saturation, found since the cycle model's loaded
    # ring and inverse-mode reset, notes/cycle_model.md) stays unfixed too, as
    # does the collector peak of the RCD clamp capacitor at high line where it
    # reaches 80 % of VCEV (560 V; it sits within a few volts of that)
    others = set(original.failing) - {"no-start", "no-restart"}
    assert others <= {"core-saturation", "switch-overvoltage"}
    # (nor what a running supply then shows: its output, drive and voltage
    # findings belong to the old revision, not to the open resistor)
    assert {"overload"} | others <= set(result.unfixed)
    assert not set(result.unfixed) & {"no-start", "no-restart"}
    by_code = {}
    for suggestion in result.suggestions:
        assert suggestion.verified and set(suggestion.changes) == {"startup.resistance"}
        by_code.setdefault(suggestion.finding, []).append(suggestion)
    assert set(by_code) == {"no-start", "no-restart"}
    # restart: the base reaches the onset of regeneration V_on only where the
    # start-up current exceeds what the base-emitter resistor bleeds there,
    # (V_bus - V_on)/R_start > V_on/R_be (a voltage divider at the base)  # common practice
    # at the lowest line's rectified peak (a supply that does not run draws
    # nothing) and the report grid's 25 degC; the closest value that clears is
    # the largest E24 value below that bound.  V_on is the base voltage at the
    # collector current where the small-signal network first has a growing
    # mode (rcc.startup.poles.onset_collector_current, itself checked against
    # the eigenvalues of a hand-assembled state matrix in
    # tests/test_startup_poles.py): 0.397 V here, against switch.vbe = 0.7 V
    from rcc.cycle import _onset_base_voltage

    peak = float(rectified_peak(design.input.line_voltages[0], design.input.bridge_drop))
    vbe = float(_onset_base_voltage(design, peak, 298.15, design.switch.hfe_typ,
                                    design.switch.vbe))
    bound = (peak - vbe) * design.drive.base_emitter_resistance / vbe
    (no_restart,) = by_code["no-restart"]
    below = preferred_values("E24", 47e3, bound)
    assert no_restart.changes["startup.resistance"] == pytest.approx(below[-1])
    (no_start,) = by_code["no-start"]
    assert 47e3 <= no_start.changes["startup.resistance"] <= 10e6
    # the best single change replaces the resistor: the supply then starts and runs
    best = result.best_single
    assert best.verified and set(best.changes) == {"startup.resistance"}
    assert not set(best.evaluation.failing) & set(NOT_RUNNING)
    # each suggestion, applied with --set to `rcc check`, clears its finding there
    for suggestion in result.suggestions:
        still = [f for f in _check_with_set(OPEN_RESISTOR_CASE, suggestion.texts)
                 if f["code"] == suggestion.finding and f["severity"] in ("fail", "warn")]
        assert not still, (suggestion.texts, still)


def test_fix_startup_resistor_power_on_the_reversed_feedback_case():
    """A second case with the full check as the model: the start-up resistor of the
    reversed-feedback case dissipates more than half its rating at the highest line.
    The resistor's power is (V_peak - Vbe)^2 / R, allowed up to half its rating
    (resistor derating  # common practice), so the smallest value that clears is the
    first E24 value above (V_peak - Vbe)^2 / (rating / 2)."""
    path = WORKED_CASES / "fault_feedback_reversed.toml"
    design = load_design(path)
    result = suggest_fixes(design, keys=("startup.resistance",))
    assert result.original.severity_of("startup-resistor-power") == "warn"
    # the reversed winding is no value's to fix
    assert "feedback-phase" in result.unfixed
    (suggestion,) = [s for s in result.suggestions if s.finding == "startup-resistor-power"]
    switch, environment = design.switch, design.environment
    # rectified peak of the highest line, less the bridge; Vbe at the coldest
    peak = math.sqrt(2) * design.input.line_voltages[2] - design.input.bridge_drop
    vbe = switch.vbe + switch.vbe_tempco * (environment.temperature_min - 298.15)
    bound = (peak - vbe) ** 2 / (0.5 * design.startup.power_rating)
    expected = preferred_values("E24", bound, 10 * bound)[0]
    assert suggestion.changes == {"startup.resistance": pytest.approx(expected)}
    still = [f for f in _check_with_set(path, suggestion.texts)
             if f["code"] == "startup-resistor-power"]
    assert not still, still


# ------------------------------------------------ every case, every adjustable value
#: A value beyond which a stand-in finding clears: a factor that is no
#: preferred-value ratio, so the search must bisect between ladder steps.
STAND_IN_FACTOR = 1.37
STAND_IN_TURNS = 2.5


def _value(design, key):
    section, name = key.split(".")
    return getattr(getattr(design, section), name)


def _stand_in(design):
    """Per adjustable value of ``design``, a finding that clears only when that
    value moves beyond a threshold (up for every other key, down for the rest),
    and one finding no value clears: the closest clearing preferred value is
    then known in closed form."""
    thresholds = {}
    for index, adjustable in enumerate(a for a in ADJUSTABLE
                                       if _value(design, a.key) is not None):
        value = float(_value(design, adjustable.key))
        up = index % 2 == 0 or (adjustable.series == "integer"
                                and value - STAND_IN_TURNS < 1)
        if adjustable.series == "integer":
            threshold = value + STAND_IN_TURNS if up else value - STAND_IN_TURNS
        else:
            threshold = value * STAND_IN_FACTOR if up else value / STAND_IN_FACTOR
        thresholds[adjustable.key] = (up, threshold)

    def evaluator(changed) -> Evaluation:
        findings = [FindingMargin("stand-in-unfixable", "fail", -0.5)]
        for key, (up, threshold) in thresholds.items():
            value = float(_value(changed, key))
            if not (value > threshold if up else value < threshold):
                findings.append(FindingMargin(f"stand-in:{key}", "fail",
                                              -abs(value - threshold) / threshold))
        return Evaluation("fail", tuple(findings), {}, {})

    return thresholds, evaluator


@pytest.mark.parametrize("path", sorted(WORKED_CASES.glob("*.toml")), ids=lambda p: p.stem)
def test_fix_every_case_every_value_suggestion_applies_with_set(path):
    """The search and the --set path of `rcc fix` on every case and every
    adjustable value, with a stand-in model: for each finding it returns the
    closest preferred value that clears it, and that value, applied with --set as
    printed, gives the design the search verified.  (The same with the full check
    as the model: the open-resistor test above, and the opt-in test below.)"""
    design = load_design(path)
    thresholds, evaluator = _stand_in(design)
    result = suggest_fixes(design, evaluator=evaluator)
    assert set(result.unfixed) == {"stand-in-unfixable"}
    by_key = {}
    for suggestion in result.suggestions:
        assert suggestion.verified
        (key,) = suggestion.changes
        assert suggestion.finding == f"stand-in:{key}"
        by_key[key] = suggestion
    assert set(by_key) == set(thresholds)
    for key, (up, threshold) in thresholds.items():
        adjustable = next(a for a in ADJUSTABLE if a.key == key)
        value = float(_value(design, key))
        if adjustable.series == "integer":
            expected = math.ceil(threshold) if up else math.floor(threshold)
        elif up:
            expected = preferred_values(adjustable.series, threshold, 10 * threshold)[0]
        else:
            expected = preferred_values(adjustable.series, threshold / 10, threshold)[-1]
        suggestion = by_key[key]
        assert suggestion.changes[key] == pytest.approx(expected, rel=1e-12), (key, value)
        # --set as printed: the same value, and the change clears the finding
        applied = load_with_overrides(path, [f"{k}={t}" for k, t in suggestion.texts.items()])
        assert float(_value(applied, key)) == pytest.approx(expected, rel=1e-12)
        assert evaluator(applied) == suggestion.evaluation
        assert evaluator(applied).severity_of(suggestion.finding) is None
    # best single and pair: each clears one stand-in finding, the pair two
    assert len(result.best_single.evaluation.failing) == len(result.original.failing) - 1
    assert len(result.best_pair.evaluation.failing) == len(result.original.failing) - 2


@pytest.mark.skipif(not os.environ.get("RCC_SLOW_TESTS"), reason=(
    "the full check as the model, every adjustable value on every case: one full check "
    "costs 0.3 s to over 200 s of CPU (measured; the cycle model's bus balance at "
    "patterned points), so a case's search takes minutes to hours; set RCC_SLOW_TESTS=1"))
@pytest.mark.parametrize("path", sorted(WORKED_CASES.glob("*.toml")), ids=lambda p: p.stem)
def test_fix_every_case_every_suggestion(path):
    result = suggest_fixes(load_design(path), workers=2)
    for suggestion in result.suggestions:
        assert suggestion.verified
        still = [f for f in _check_with_set(path, suggestion.texts)
                 if f["code"] == suggestion.finding and f["severity"] in ("fail", "warn")]
        assert not still, (suggestion.texts, still)
