"""The lowest line at which the supply starts into its full load
(rcc.startup.start_line): the bisection's bookkeeping on a stand-in run, the
line of the power-on bus against the hold-up relation, and on a worked case a
bracket checked with the engine from power-on."""

from __future__ import annotations

import json
import math
from types import SimpleNamespace

import pytest

from rcc.design import load_design
from rcc.startup import start_line
from rcc.startup.start_line import (INTO_LOAD_DURATION, START_LINE_RESOLUTION,
                                    power_on_line_for_bus, reaches_operating_point,
                                    search_start_line)
from tests.conftest import WORKED_CASES

STANDBY = WORKED_CASES / "standby_12v_universal.toml"
AUX = WORKED_CASES / "aux_5v_48v_dc.toml"


@pytest.fixture(scope="module")
def standby():
    return load_design(STANDBY)


def _stand_in(threshold, fail_at=None):
    """A run that reaches its operating point above ``threshold`` volts of
    line (regular switching at the expected output) and locks up below; the
    engine 'fails' at ``fail_at``."""
    calls = []

    def run(design, line=None):
        line = float(design.input.line_voltages[0] if line is None else line)
        calls.append(line)
        kind = "failed" if fail_at is not None and abs(line - fail_at) < 1e-9 else (
            "regular" if line >= threshold else "lockup")
        return SimpleNamespace(kind=kind, line_voltage=line, bus_voltage=line,
                               output_voltage=5.0 if kind == "regular" else 0.4,
                               expected_output=5.0, settled=True, duration=0.01,
                               wall_time=0.0, message="stand-in stopped")
    return run, calls


@pytest.fixture()
def aux():
    return load_design(AUX)  # DC input 36..60 V: the power-on bus is the input


@pytest.mark.parametrize("threshold", [20.0, 37.3, 47.0, 59.9])
def test_bisection_brackets_the_threshold(aux, monkeypatch, threshold):
    run, calls = _stand_in(threshold)
    monkeypatch.setattr(start_line, "run_into_load", run)
    lowest, highest = aux.input.line_voltages[0], aux.input.line_voltages[2]
    search = search_start_line(aux, oscillation_bus_voltage=10.0, runs=12)
    assert search.failing_line_voltage < threshold <= search.line_voltage
    assert search.resolution == pytest.approx(search.line_voltage
                                              - search.failing_line_voltage)
    assert search.resolution <= START_LINE_RESOLUTION * lowest
    if threshold <= lowest:
        # the bracket starts at the oscillation threshold: no run below it
        assert min(calls) > 10.0 and highest not in calls
    else:
        assert search.failing_basis == "engine" and highest in calls
    assert len(search.runs) == len(calls)
    json.dumps(search.to_json(), allow_nan=False)


def test_few_runs_leave_a_wider_bracket_and_say_so(aux, monkeypatch):
    run, calls = _stand_in(47.0)
    monkeypatch.setattr(start_line, "run_into_load", run)
    search = search_start_line(aux, oscillation_bus_voltage=10.0, runs=2)
    # the run at the lowest line is not counted: the highest line and one bisection
    assert len(calls) == 3
    assert search.line_voltage == 48.0 and search.failing_line_voltage == 36.0
    assert search.resolution == 12.0 and search.failing_basis == "engine"


def test_no_line_of_the_design_starts(aux, monkeypatch):
    run, calls = _stand_in(1e6)
    monkeypatch.setattr(start_line, "run_into_load", run)
    search = search_start_line(aux, oscillation_bus_voltage=10.0)
    assert search.line_voltage is None and search.resolution is None
    assert search.failing_line_voltage == aux.input.line_voltages[2]
    assert calls == [aux.input.line_voltages[0], aux.input.line_voltages[2]]


def test_below_the_oscillation_threshold_no_engine_run(aux, monkeypatch):
    run, calls = _stand_in(0.0)
    monkeypatch.setattr(start_line, "run_into_load", run)
    # oscillation cannot begin at any line (threshold above the highest, or none)
    for threshold in (None, 100.0):
        search = search_start_line(aux, oscillation_bus_voltage=threshold)
        assert search.line_voltage is None and search.failing_basis == "small-signal"
    assert calls == []


def test_an_engine_failure_stops_the_search_with_a_note(aux, monkeypatch):
    run, calls = _stand_in(30.0, fail_at=0.5 * (20.0 + 36.0))
    monkeypatch.setattr(start_line, "run_into_load", run)
    search = search_start_line(aux, oscillation_bus_voltage=20.0)
    assert "stand-in stopped" in search.note
    assert search.line_voltage == 36.0 and search.failing_line_voltage == 20.0


def test_reaching_the_operating_point_needs_the_output_in_band():
    run = SimpleNamespace(kind="regular", output_voltage=11.3, expected_output=12.0)
    assert reaches_operating_point(run, 0.05) is False      # 5.8 % short
    assert reaches_operating_point(run, 0.06) is True
    assert reaches_operating_point(SimpleNamespace(kind="lockup", output_voltage=12.0,
                                                   expected_output=12.0), 0.05) is False
    assert reaches_operating_point(SimpleNamespace(kind="failed"), 0.05) is None


def test_power_on_line_inverts_the_bulk_valley(standby):
    """The line at which the full-load bulk valley is a given bus, against the
    hold-up energy balance solved for the peak, ``V_pk = sqrt(V_min^2 + P/(C
    f_line))``, and the rectified peak ``V_pk = sqrt(2) V_rms - V_bridge``
    (DOMAIN.md, bulk ripple and mains  # common practice)."""
    from rcc.engine.power_on import ASSUMED_EFFICIENCY

    inp, out = standby.input, standby.output
    power = out.load_max.power(out.voltage_target) / ASSUMED_EFFICIENCY
    for bus in (14.76, 60.0, 300.0):
        peak = math.sqrt(bus**2 + power / (inp.bulk_capacitance * inp.line_frequency))
        expected = (peak + inp.bridge_drop) / math.sqrt(2.0)
        assert power_on_line_for_bus(standby, bus) == pytest.approx(expected, rel=1e-8)


def test_min_start_line_is_bracketed_by_the_engine(standby):
    """On the standby case the search's line starts into the full load and the
    line one resolution below does not, each checked with its own engine run
    from power-on (coldest, hfe_min, full load); the small-signal threshold of
    oscillation lies below."""
    from rcc.engine.power_on import run_from_power_on
    from rcc.startup import startup_report

    report = startup_report(standby, engine=True)
    search = report.start_line
    lowest = standby.input.line_voltages[0]
    assert report.starts and search.line_voltage is not None
    assert search.failing_basis == "engine"
    assert 0 < search.resolution <= START_LINE_RESOLUTION * lowest
    assert search.line_voltage <= lowest
    tolerance = standby.limits.output_tolerance

    def run(line):
        return run_from_power_on(standby, line, standby.output.load_max,
                                 temperature=standby.environment.temperature_min,
                                 hfe=standby.switch.hfe_min, max_duration=INTO_LOAD_DURATION)

    found, below = run(search.line_voltage), run(search.line_voltage - search.resolution)
    assert reaches_operating_point(found, tolerance) is True
    assert reaches_operating_point(below, tolerance) is False
    assert found.output_voltage >= (1 - tolerance) * standby.output.voltage_target
    # the small-signal bound lies below the start line, in bus and in line
    assert report.oscillation_bus_voltage <= search.bus_voltage
    assert report.oscillation_line_voltage <= search.oscillation_line_voltage \
        <= search.line_voltage
    data = report.to_json()
    assert data["min_start_basis"] == "engine"
    assert data["min_start_line_v"] == search.line_voltage
    assert data["min_start_bus_v"] == search.bus_voltage
    assert data["min_start_line_resolution_v"] == search.resolution
    assert data["min_oscillation_bus_v"] == report.oscillation_bus_voltage
    json.dumps(data, allow_nan=False)


def test_a_bulk_capacitor_that_cannot_carry_the_load_at_the_lowest_line(standby,
                                                                        monkeypatch):
    """8 uF at 85 V and 7.5 W: the hold-up estimate puts the valley at zero, so
    there is no bus for the engine at the lowest line; the report says the
    supply does not start into its load there instead of failing."""
    from rcc.startup import analysis, startup_findings, startup_report

    small = standby.with_values({"input.bulk_capacitance": "8 uF"})
    run, calls = _stand_in(110.0)
    monkeypatch.setattr(start_line, "run_into_load", run)
    monkeypatch.setattr(analysis, "run_into_load", run)
    report = startup_report(small, engine=True)
    assert report.oscillation_begins and report.into_load is None
    assert report.reaches_operating_point is False and not report.starts
    assert small.input.line_voltages[0] not in calls
    assert report.start_line.line_voltage >= 110.0
    lockup = [f for f in startup_findings(small, report) if f.code == "startup-lockup"]
    assert len(lockup) == 1 and "bulk capacitor cannot carry" in lockup[0].message
    json.dumps(report.to_json(), allow_nan=False)
