"""Periodic steady state of the worked cases through the time-domain engine.

Checks (issue 4, section 4):

- the Newton fixed point equals the state a long brute-force transient of
  the same engine settles to (shooting vs transient, Aprille & Trick, Proc.
  IEEE 1972: both find the same periodic solution);
- the largest Floquet multiplier equals the measured per-cycle decay of a
  perturbation (definition of the multiplier as the eigenvalue of the
  return-map Jacobian, Parker & Chua 1989, sec. 3.3);
- the saltation-based Jacobian (di Bernardo et al. 2008, eq. 2.49) equals
  central finite differences of the engine's return map;
- the cycle model (``rcc.cycle``) agrees with the periodic steady state on
  frequency (5 %), output voltage (2 %) and peak current (5 %) over 10 % and
  100 % load at minimum, nominal and maximum line; where not, the case is an
  explicit xfail with the measured gap and its reason
  (notes/periodic_steady_state.md);
- the command through typer's CliRunner.

The worked cases are invented demo designs.
"""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import rcc
from rcc.cli import app
from rcc.design import Load
from rcc.engine.floquet import finite_difference_jacobian
from rcc.engine.pss import (FallbackWarning, periodic_steady_state, poincare_map,
                            verify_operating_points)

CASES = Path(__file__).resolve().parents[1] / "worked_cases"
LEGACY = CASES / "legacy_24v_substitute.toml"
STANDBY = CASES / "standby_12v_universal.toml"


@pytest.fixture(scope="module")
def legacy():
    design = rcc.load_design(LEGACY)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FallbackWarning)
        result = periodic_steady_state(design, 230.0, "12 W")
    return design, result


def _scaled_difference(a, b, scale):
    return float(np.max(np.abs((np.asarray(a) - np.asarray(b)) / scale)))


def test_newton_converges_and_figures_are_consistent(legacy):
    """Newton converges; period = on + off; the JSON has no NaN."""
    _, result = legacy
    assert result.converged and result.method == "newton"
    assert result.residual < 1e-8
    assert result.period == pytest.approx(result.on_time + result.off_time, rel=1e-12)
    assert result.frequency == pytest.approx(1.0 / result.period, rel=1e-12)
    assert 0.0 < result.on_time < result.period
    text = json.dumps(result.to_json(), allow_nan=False)
    assert "frequency_hz" in text
    # the closing event is the turn-on into the first chord of the active
    # region's junction law
    assert result.event_sequence[-1] == "switch:active/1"


def test_fixed_point_matches_long_transient(legacy):
    """The engine run for 4000 more cycles from the warm-up start settles to
    the Newton fixed point (1e-6 of each state's scale)."""
    from rcc.engine import build_circuit, simulate

    design, result = legacy
    circuit = build_circuit(design, result.bus_voltage, result.load, result.temperature,
                            result.hfe)
    start = np.zeros(circuit.n_states)
    names = circuit.state_names
    start[names.index("v_output_capacitor")] = result.output_voltage
    run = simulate(circuit, start, 0.5, record=False, stop_on_turn_on=5000)
    assert run.stopped
    assert _scaled_difference(run.final_state, result.state, result.scale) < 1e-6


def _turn_on_states(design, result, state, cycles):
    """States at consecutive turn-ons from ``state`` (brute-force map
    iteration through the engine)."""
    step = poincare_map(design, result)
    states = []
    for _ in range(cycles):
        state = step(state).end_state
        states.append(state)
    return np.array(states)


def test_largest_multiplier_matches_perturbation_decay(legacy):
    """Perturb along the dominant eigenvector; the deviation shrinks by the
    largest multiplier per cycle (within 1 %)."""
    design, result = legacy
    values, vectors = np.linalg.eig(result.jacobian)
    dominant = int(np.argmax(np.abs(values)))
    assert abs(values[dominant]) == pytest.approx(abs(result.multipliers[0]), rel=1e-9)
    direction = np.real(vectors[:, dominant])
    direction = direction / np.max(np.abs(direction / result.scale))
    start = result.state + 1e-3 * direction
    states = _turn_on_states(design, result, start, 40)
    deviation = np.max(np.abs((states - result.state) / result.scale), axis=1)
    ratio = (deviation[-1] / deviation[9]) ** (1.0 / 30.0)
    assert ratio == pytest.approx(abs(result.multipliers[0]), rel=1e-2)


def test_saltation_jacobian_matches_finite_differences(legacy):
    """Saltation Jacobian vs central differences of the engine's return map
    at the fixed point (scaled entries within 2e-3 + 0.5 %).  The stored-charge
    column is left out: the map clamps that charge at zero, so a step across
    zero is one-sided (notes/periodic_steady_state.md)."""
    design, result = legacy
    step = poincare_map(design, result)
    numeric = finite_difference_jacobian(lambda x: step(x).end_state, result.state,
                                         1e-6 * result.scale)
    keep = [k for k, name in enumerate(result.state_names) if name != "q_base"]
    scale = result.scale
    analytic = result.jacobian * scale[None, :] / scale[:, None]
    numeric = numeric * scale[None, :] / scale[:, None]
    np.testing.assert_allclose(analytic[:, keep], numeric[:, keep], rtol=5e-3, atol=2e-3)


def test_power_balance_and_losses_against_sampled_waveforms(legacy):
    """The exact cycle power balance (segment Gramians, Van Loan 1978)
    closes (Tellegen's theorem: input = output + losses on a periodic
    orbit, 1e-6 relative); the load takes its 12 W (constant-power load by
    secants, 0.43 % documented error); and the sense-resistor loss equals the
    trapezoidal quadrature (scipy.integrate.trapezoid) of v_e^2 / R_s on a
    finely sampled engine trace of the same cycle (0.5 %)."""
    from scipy.integrate import trapezoid

    from rcc.engine import build_circuit, simulate

    design, result = legacy
    power = result.power
    assert power.input - power.output - power.loss - power.stored == pytest.approx(
        0.0, abs=1e-6 * power.input)
    assert abs(power.stored) < 1e-6 * power.input
    assert power.output == pytest.approx(12.0, rel=4.3e-3)  # measured +0.35 %
    assert all(watts > -1e-9 for watts in power.losses.values())
    assert list(power.losses.values()) == sorted(power.losses.values(), reverse=True)
    circuit = build_circuit(design, result.bus_voltage, result.load, result.temperature,
                            result.hfe)
    trace = simulate(circuit, result.state, result.period, topology=result.turn_on_topology,
                     max_step=result.period / 20000)
    sampled = trapezoid(trace["emitter_voltage"] ** 2, trace.times) / (
        design.limiter.sense_resistance * result.period)
    assert power.losses["sense"] == pytest.approx(sampled, rel=5e-3)


def test_rcd_clamp_loss_matches_textbook_clamp_formula():
    """The engine's exact RCD-clamp dissipation at the standby case's full-load
    orbit (85 V) vs the textbook clamp balance Vc (Vc - V_R) = R L_lk Ipk^2 f / 2,
    P = Vc^2 / R (Basso, *Switch-Mode Power Supplies*, 2008, ch. 7, RCD clamp;
    rcc.stress.rcd_clamp_voltage), fed with the engine's own peak current,
    frequency and reflected voltage: within 15 % and below it (the formula
    neglects the clamp diode's 1 V and the leakage ring after the clamp lets
    go, which hands part of the energy back)."""
    from rcc.stress import rcd_clamp_voltage

    design = rcc.load_design(STANDBY)
    result = periodic_steady_state(design, 85.0, design.output.load_max)
    assert result.converged
    tr = design.transformer
    reflected = (result.output_voltage + design.output.rectifier_drop) \
        * tr.primary_turns / tr.output_turns
    clamp_voltage = float(rcd_clamp_voltage(reflected, tr.leakage_inductance,
                                            result.peak_current, result.frequency,
                                            design.clamp.resistance))
    textbook = clamp_voltage**2 / design.clamp.resistance
    # measured: engine 11 % below the formula at 85 V (8 % before the leakage
    # ring was damped, 13 % at 230 V, where the engine has no period-1 orbit
    # at full load any more); the formula is the upper bound of a clamp that
    # keeps all the ring energy
    assert result.power.losses["clamp"] == pytest.approx(textbook, rel=0.15)
    assert result.power.losses["clamp"] <= textbook
    # and it is well above the bare leakage energy rate the cycle model books
    # (the clamp also takes magnetizing energy while the leakage current falls)
    leakage_rate = 0.5 * tr.leakage_inductance * result.peak_current**2 * result.frequency
    assert result.power.losses["clamp"] > 2.0 * leakage_rate


def test_multipliers_stable_and_sorted(legacy):
    """A regulated supply at full load: a stable cycle, multipliers by
    decreasing modulus, the trivial one removed (n - 1 of them)."""
    _, result = legacy
    moduli = [abs(m) for m in result.multipliers]
    assert moduli == sorted(moduli, reverse=True)
    assert len(moduli) == len(result.state_names) - 1
    assert result.stable and moduli[0] < 1.0


# ------------------------------------------------- cycle model vs engine
# Measured on this machine (engine and cycle model as committed on the day;
# notes/periodic_steady_state.md has the table).  Every case outside the
# issue's tolerances is listed with its reason: a documented gap between the
# two models, not a silent one.  strict=True: a case that starts to agree
# after a model change fails until its entry (and the note) is updated.
_TURN_ON_REASON = ("high line: the cycle model leaves the turn-on transition out of the "
                   "on-time (the collector falling from the ring while the switch's "
                   "charge builds, 0.2-0.4 us in the engine), so its period is 5-8 % "
                   "short and, with the same power, its peak current up to 9 % low "
                   "(notes/cycle_model.md, limitations)")
_AUX_REASON = ("output 2.4-5.3 % above the cycle model's (measured: standby 85 V 30 % "
               "load +2.4 %, legacy 195 V +4.7 %, 230 V +5.3 %): at the trip the "
               "engine's limiter sinks the whole base drive (150-200 mA) through its "
               "exponential junction, whose voltage is limiter.vbe at 1 mA of collector "
               "current (as in the start-up analysis), so it trips about 0.1 V above "
               "limiter.vbe and the regulation needs correspondingly more auxiliary "
               "voltage (before the junction laws: 10.41 V in the engine against 10.17 V "
               "in the model at 195 V); the cycle model trips at limiter.vbe")
_IRREGULAR_REASON = ("the engine does not settle to a period-1 orbit here (irregular or "
                     "burst switching still after 5000 cycles; the result is the "
                     "transient fall-back, not converged): nothing to compare")
XFAIL = {
    ("legacy_24v_substitute", 0, 0.1): _IRREGULAR_REASON,
    ("legacy_24v_substitute", 0, 1.0): _AUX_REASON,
    ("legacy_24v_substitute", 1, 0.1): _IRREGULAR_REASON,
    ("legacy_24v_substitute", 1, 1.0): _TURN_ON_REASON + "; " + _AUX_REASON,
    ("legacy_24v_substitute", 2, 0.1): _IRREGULAR_REASON,
    ("legacy_24v_substitute", 2, 1.0): _IRREGULAR_REASON,
    ("standby_12v_universal", 0, 0.1): _IRREGULAR_REASON,
    ("standby_12v_universal", 1, 0.1): _IRREGULAR_REASON,
    ("standby_12v_universal", 1, 1.0): _IRREGULAR_REASON,
    ("standby_12v_universal", 2, 0.1): _IRREGULAR_REASON,
    ("standby_12v_universal", 2, 1.0): _IRREGULAR_REASON,
    ("aux_5v_48v_dc", 0, 0.1): _IRREGULAR_REASON,
    # (aux_5v_48v_dc at 36 V / 1 A was xfailed until 2026-12-03 (fourth session): the model
    # reported the supply off; with the output path's resistance and
    # capacitance on the plateau and the junction reset's end it finds the
    # collapsed cycle: frequency -3.7 %, output -0.2 %, peak +3.0 % against
    # the periodic steady state's 5.08 kHz, 0.585 V, 2.46 A)
    # measured 2026-12-03 (fifth session), after the storage from the on-time's
    # history and the R L ramp: peak -0.07 %, but frequency -6.1 % and output
    # -5.5 %: the lock-up restarts come late, the family's remaining bias
    # (notes/accuracy.md: with the peaks right, the model's restart rate is a
    # median 2 % and its charge per pulse 2.5 % low; the model's Vbe stays flat
    # where the engine's junction rises with the stored charge, so its drive
    # capacitor ends the pulse higher and resets longer)
    ("aux_5v_48v_dc", 0, 1.0): "lock-up restart rate 6 % low (notes/accuracy.md)",
    ("aux_5v_48v_dc", 1, 0.1): _IRREGULAR_REASON,
    ("aux_5v_48v_dc", 1, 1.0): _IRREGULAR_REASON,
    ("aux_5v_48v_dc", 2, 0.1): _IRREGULAR_REASON,
    ("aux_5v_48v_dc", 2, 1.0): _IRREGULAR_REASON,
}
COMPARISON = [(case, line, load) for case in ("legacy_24v_substitute", "standby_12v_universal",
                                               "aux_5v_48v_dc")
              for line in (0, 1, 2) for load in (0.1, 1.0)]


def _params():
    out = []
    for case, line, load in COMPARISON:
        reason = XFAIL.get((case, line, load))
        marks = [pytest.mark.xfail(reason=reason, strict=True)] if reason else []
        out.append(pytest.param(case, line, load, marks=marks,
                                id=f"{case}-line{line}-load{int(load * 100)}"))
    return out


@pytest.mark.parametrize("case, line_index, fraction", _params())
def test_cycle_model_agrees_with_periodic_steady_state(case, line_index, fraction):
    """Frequency 5 %, output voltage 2 %, peak current 5 % (issue 4, sec. 4)."""
    design = rcc.load_design(CASES / f"{case}.toml")
    top = design.output.load_max
    load = Load(top.kind, top.value * fraction if top.kind != "resistance"
                else top.value / fraction)
    line = design.input.line_voltages[line_index]
    (point,) = verify_operating_points(design, [line], [load])
    assert point.steady_state is not None, point.error
    assert point.steady_state.converged, point.steady_state.flags
    # None: the cycle model gives zero (off or locked up) where the engine does not
    differences = (point.frequency_difference, point.output_voltage_difference,
                   point.peak_current_difference)
    assert None not in differences, (point.model_mode, point.steady_state.frequency)
    assert abs(point.frequency_difference) < 0.05
    assert abs(point.output_voltage_difference) < 0.02
    assert abs(point.peak_current_difference) < 0.05


@pytest.mark.parametrize("case, line_index, fraction", [
    ("standby_12v_universal", 0, 0.3),
    ("legacy_24v_substitute", 0, 1.0),
    ("legacy_24v_substitute", 1, 1.0),
])
def test_where_the_models_disagree_the_cycle_model_says_so(case, line_index, fraction):
    """Where the engine has a stable period-1 orbit, the cycle model either
    agrees within the issue's tolerances or marks the point as doubtful
    (``doubt`` not empty: it does not claim the number).

    Measured on main at 6e4dd79 (engine minus model, relative to the model):
    standby 85 V, 30 % load: +43 % frequency, +1.5 % output, -11 % peak
    (cycle model: burst on a regime boundary, 99 kHz); legacy 195 V and
    230 V, full load: +134 % and +266 % frequency, +3 % and +5 % output,
    -33 % and -46 % peak (cycle model: bursts of limit-held pulses at
    52-74 kHz; the engine's pre-charged orbit is a regular cycle).  Which of
    the two the circuit runs from power-on is open in issue 8
    (notes/accuracy.md).  Measured 2026-12-03, after the regeneration onset:
    standby 85 V, 30 % load: +29 % frequency, +1.3 % output, -9.7 % peak;
    the cycle model's DCM ended by the regulation hold (110.4 kHz) is
    doubted as ``held-ring`` (the engine's ring turns the switch on through
    the held limiter, notes/cycle_model.md)."""
    from rcc.cycle import operating_points

    design = rcc.load_design(CASES / f"{case}.toml")
    top = design.output.load_max
    line = design.input.line_voltages[line_index]
    load = Load(top.kind, top.value * fraction)
    (point,) = verify_operating_points(design, [line], [load])
    assert point.steady_state is not None and point.steady_state.converged
    assert point.steady_state.stable
    agree = (abs(point.frequency_difference) < 0.05
             and abs(point.output_voltage_difference) < 0.02
             and abs(point.peak_current_difference) < 0.05)
    model = operating_points(design, line, load)
    assert agree or str(model.doubt) != "", (point.frequency_difference,
                                             point.output_voltage_difference,
                                             point.peak_current_difference)


# ----------------------------------------------------------------- command
runner = CliRunner()


def test_cli_json(tmp_path):
    """`rcc cycle --json` prints the documented keys, finite numbers."""
    out = runner.invoke(app, ["cycle", str(LEGACY), "--line", "230 V", "--load", "12W",
                              "--json"])
    assert out.exit_code == 0, out.output
    data = json.loads(out.output)
    for key in ("frequency_hz", "period_s", "on_time_s", "off_time_s", "peak_current_a",
                "output_v", "output_ripple_v", "switch_peak_v", "multipliers", "stable"):
        assert key in data
    assert all(math.isfinite(data[key]) for key in ("frequency_hz", "output_v"))
    assert all(len(pair) == 2 for pair in data["multipliers"])
    assert data["stable"] is True
    # the power balance (Tellegen): input = output + losses + stored
    assert data["input_power_w"] == pytest.approx(
        data["output_power_w"] + sum(data["losses_w"].values()) + data["stored_power_w"],
        rel=1e-6)


def test_cli_plot_and_overwrite(tmp_path):
    """--plot writes a PNG; an existing file needs --force (exit 2)."""
    target = tmp_path / "cycle.png"
    out = runner.invoke(app, ["cycle", str(LEGACY), "--load", "12 W", "--plot", str(target)])
    assert out.exit_code == 0, out.output
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # what the cycle is, said first; the engine's event names only with --verbose
    assert out.output.splitlines()[1].strip() == "periodic steady state, stable"
    assert "events:" not in out.output
    again = runner.invoke(app, ["cycle", str(LEGACY), "--load", "12 W", "--plot", str(target)])
    assert again.exit_code == 2
    assert "--force" in again.output


@pytest.mark.parametrize("option, value, message", [
    ("--line", "abc", "--line 'abc'"),
    ("--line", "-5 V", "expected a positive voltage"),
    ("--line", "3 A", "--line '3 A'"),
    ("--load", "12", "with its unit"),
    ("--load", "5 s", "--load '5 s'"),
    ("--load", "-1 A", "non-negative"),
])
def test_cli_bad_options_exit_2(option, value, message):
    """Bad options: exit code 2 and a line naming the option and value."""
    out = runner.invoke(app, ["cycle", str(LEGACY), option, value])
    assert out.exit_code == 2
    assert message in out.output


def test_cli_missing_design_exit_2(tmp_path):
    out = runner.invoke(app, ["cycle", str(tmp_path / "nope.toml")])
    assert out.exit_code == 2
    assert "does not exist" in out.output


# --------------------------------------------------------------- library edge
def test_library_rejects_bad_inputs():
    """Clear ValueErrors from the library (no engine run)."""
    from rcc.engine.pss import parse_load

    design = rcc.load_design(LEGACY)
    with pytest.raises(ValueError, match="line_voltage = -5.0"):
        periodic_steady_state(design, -5.0)
    with pytest.raises(ValueError, match="with its unit"):
        parse_load(design, "3")
    assert parse_load(design, "40 ohm") == Load("resistance", 40.0)
    assert parse_load(design, "250 mA") == Load("current", 0.25)
    assert parse_load(design, "6 W") == Load("power", 6.0)
    assert parse_load(design, None) == design.output.load_nominal


def test_cli_engine_trouble_is_a_clear_error_not_a_traceback():
    """A supply the engine cannot run into a cycle (here the fault case with
    the feedback winding reversed, which does not oscillate) ends with a
    one-line reason and exit 1.  (The 5 V case at 36 V and 1 A, used here
    before, bursts with the engine's junction laws.)"""
    out = runner.invoke(app, ["cycle", str(CASES / "fault_feedback_reversed.toml")])
    assert out.exit_code == 1, out.output
    assert "no periodic steady state" in out.output
    assert "Traceback" not in out.output and out.exception is None or \
        isinstance(out.exception, SystemExit)


def test_cycle_status_matches_the_verdict():
    """The text and figure title never call an unstable or unconverged cycle a
    periodic steady state."""
    from types import SimpleNamespace

    from rcc.engine.plotting import cycle_status

    assert cycle_status(SimpleNamespace(converged=True, stable=True)) == \
        "periodic steady state, stable"
    assert "UNSTABLE" in cycle_status(SimpleNamespace(converged=True, stable=False))
    text = cycle_status(SimpleNamespace(converged=False, stable=False))
    assert text.startswith("NOT CONVERGED") and "steady state" not in text
