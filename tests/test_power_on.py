"""Tests of rcc.engine.power_on on the standby worked case (invented demo data):
a short run from power-on, its bookkeeping against a plain engine trace, and
an engine failure reported as a result."""

import numpy as np
import pytest

from rcc.design import Load, load_design
from rcc.engine import EngineError, build_circuit, power_on_state, simulate
from rcc.engine import power_on as power_on_module
from rcc.engine.power_on import PowerOnRun, planned_duration, run_from_power_on

WORKED = "worked_cases/standby_12v_universal.toml"
DURATION = 3e-3


@pytest.fixture(scope="module")
def design():
    return load_design(WORKED)


@pytest.fixture(scope="module")
def short_run(design):
    return run_from_power_on(design, 85.0, "0.3 A", duration=DURATION)


def test_short_run_from_power_on(short_run):
    run = short_run
    assert isinstance(run, PowerOnRun)
    assert run.kind in ("regular", "burst", "irregular", "lockup")
    assert run.message == ""
    assert run.duration == pytest.approx(DURATION, abs=1e-12)
    assert run.turn_on_times.size > 10
    assert np.all(np.diff(run.turn_on_times) > 0)
    assert run.peak_currents.shape == run.turn_on_times.shape
    assert np.all(run.peak_currents > 0)
    # the output rises from zero (discharged capacitors) and stays physical
    assert run.output[0] < 1.0
    assert np.all(run.output > -1.0) and np.all(run.output < 20.0)
    assert run.bus_voltage < np.sqrt(2) * 85.0      # the bulk valley, below the peak
    json = run.to_json()
    assert json["kind"] == run.kind and json["duration_s"] == run.duration


def test_bookkeeping_matches_a_plain_trace(design, short_run):
    # the same run as one engine trace: the chunked record keeps the same
    # turn-ons, and each cycle's peak is the trace's largest primary current
    # between consecutive turn-ons (sampled at the same step bound)
    run = short_run
    circuit = build_circuit(design, run.bus_voltage, Load("current", 0.3), run.temperature,
                            run.hfe)
    _, frequency = planned_duration(design, run.bus_voltage, Load("current", 0.3),
                                    run.expected_output)
    trace = simulate(circuit, power_on_state(circuit), DURATION,
                     max_step=1.0 / (power_on_module.SAMPLES_PER_PERIOD * frequency))
    turn_ons = trace.turn_on_times()
    np.testing.assert_allclose(run.turn_on_times, turn_ons, rtol=0, atol=1e-12)
    edges = np.append(turn_ons, trace.times[-1] + 1.0)
    current = trace["primary_current"]
    expected = [current[(trace.times >= a) & (trace.times < b)].max()
                for a, b in zip(edges[:-1], edges[1:])]
    np.testing.assert_allclose(run.peak_currents, expected, rtol=2e-3)
    # the output bins average the trace
    inside = (trace.times >= run.time[3] - 0.5 * (run.time[1] - run.time[0])) & (
        trace.times <= run.time[3] + 0.5 * (run.time[1] - run.time[0]))
    assert run.output[3] == pytest.approx(np.mean(trace["output_voltage"][inside]), rel=0.02,
                                          abs=0.02)


def test_engine_failure_is_a_result(design, monkeypatch):
    def broken(*args, **kwargs):
        raise EngineError("event storm: made up for the test")

    monkeypatch.setattr(power_on_module, "simulate", broken)
    run = run_from_power_on(design, 230.0, Load("current", 0.3), duration=1e-3)
    assert run.kind == "failed"
    assert "event storm" in run.message
    assert run.operation is None and run.time_to_regulation is None


def test_bad_input_raises(design):
    with pytest.raises(ValueError, match="line_voltage"):
        run_from_power_on(design, -1.0, "0.3 A")
    with pytest.raises(ValueError, match="duration"):
        run_from_power_on(design, 85.0, "0.3 A", duration=0.0)


def test_planned_duration_follows_the_output_time_constant(design):
    load = Load("current", 0.3)
    duration, frequency = planned_duration(design, 300.0, load, 12.0)
    tau = design.output.capacitance * 12.0 / 0.3
    assert duration >= tau
    assert 1e3 <= frequency <= 1e6
    assert planned_duration(design, 300.0, load, 12.0, max_duration=1e-3)[0] == 1e-3
