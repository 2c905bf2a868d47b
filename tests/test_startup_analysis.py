"""Start-up analysis of whole designs: facts of the trade, the fault cases,
the minimum start-up voltage, start-up time against an ODE integration, the
drive continuation checks, the JSON object and the findings."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from rcc.design import load_design
from rcc.findings import Finding
from rcc.startup import (analyze_startup, drive_cycle, estimate_start_time,
                         minimum_start_bus_voltage, startup_findings, startup_report)
from tests.conftest import WORKED_CASES

STANDBY = WORKED_CASES / "standby_12v_universal.toml"
HEALTHY = {"drive.base_emitter_resistance": "22 kohm"}

#: Fault worked cases and what must hold them (each file says so).
FAULTS = {
    "fault_startup_resistor_open.toml": ("startup-resistor", "no-start"),
    "fault_feedback_reversed.toml": ("feedback-phase", "feedback-phase"),
    "fault_drive_capacitor_small.toml": ("drive-coupling", "no-start"),
    "fault_feedback_turns.toml": ("drive-coupling", "no-start"),
    "fault_limiter_stall.toml": ("limiter", "dc-stall"),
}

JSON_KEYS = {"starts", "growth_rate_per_s", "growth_frequency_hz", "min_start_bus_v",
             "min_start_line_v", "start_time_s", "holding_element", "dc_point", "poles",
             "oscillation_begins", "reaches_operating_point", "time_to_regulation_s",
             "power_on", "ac_input", "min_start_basis", "min_start_line_resolution_v",
             "min_start_search", "min_oscillation_bus_v", "min_oscillation_line_v"}


@pytest.fixture(scope="module")
def healthy():
    return load_design(STANDBY).with_values(HEALTHY)


@pytest.mark.parametrize("name", sorted(FAULTS))
def test_fault_cases_do_not_start_and_name_the_cause(name):
    design = load_design(WORKED_CASES / name)
    element, code = FAULTS[name]
    report = startup_report(design)
    assert not report.result.starts
    assert report.result.holding_element == element
    assert all(p.real < 0 for p in report.result.poles)
    codes = [f.code for f in startup_findings(design, report)]
    assert codes == [code]


def test_open_startup_resistor_never_starts(healthy):
    """An open start-up resistor leaves the switch cut off at every line
    (a frequent field failure  # common practice)."""
    design = healthy.with_values({"startup.resistance": "1 Tohm"})
    assert minimum_start_bus_voltage(design) is None
    for bus in (120.0, 370.0):
        result = analyze_startup(design, bus)
        assert not result.starts and result.dc.region == "cut-off"


@pytest.mark.parametrize("case", ["aux_5v_48v_dc.toml", "legacy_24v_substitute.toml", None])
def test_reversed_feedback_winding_does_not_start(case, healthy):
    design = healthy if case is None else load_design(WORKED_CASES / case)
    assert analyze_startup(design).starts
    reversed_ = design.with_values({"transformer.feedback_phase": "degenerative"})
    result = analyze_startup(reversed_)
    assert not result.starts and result.holding_element == "feedback-phase"


def test_too_small_drive_capacitor_does_not_start(healthy):
    starts = [analyze_startup(healthy.with_values({"drive.capacitance": c})).starts
              for c in ("100 nF", "10 nF", "1 nF", "100 pF", "10 pF")]
    assert starts[:3] == [True, True, True] and starts[3:] == [False, False]


def test_lossless_tank_is_not_what_starts_it(healthy):
    """Core loss matters: the same single-turn feedback starts with a
    low-loss core and stalls with a lossy one."""
    one_turn = healthy.with_values({"transformer.feedback_turns": 1})
    assert analyze_startup(one_turn.with_values(
        {"transformer.core_loss_resistance": "100 kohm"})).starts
    assert not analyze_startup(one_turn.with_values(
        {"transformer.core_loss_resistance": "2 kohm"})).starts


def test_higher_line_starts_sooner(healthy):
    """Higher line: the bulk capacitor reaches the threshold earlier, the
    start-up resistor charges the base faster and the mode grows faster."""
    times = [estimate_start_time(healthy, line) for line in (90.0, 115.0, 230.0, 265.0)]
    totals = [t.total for t in times]
    assert all(a > b for a, b in zip(totals, totals[1:]))
    assert all(a.base_charge_time > b.base_charge_time for a, b in zip(times, times[1:]))
    growth = [analyze_startup(healthy, t.bus_voltage).growth_rate for t in times]
    assert all(a < b for a, b in zip(growth, growth[1:]))


def test_minimum_start_voltage_is_the_threshold(healthy):
    threshold = minimum_start_bus_voltage(healthy)
    assert threshold is not None
    corners = [(t, h) for t in (healthy.environment.temperature_min,
                                healthy.environment.temperature_max)
               for h in (healthy.switch.hfe_min, healthy.switch.hfe_max)]
    above = [analyze_startup(healthy, threshold * 1.01, t, h).starts for t, h in corners]
    below = [analyze_startup(healthy, threshold * 0.99, t, h).starts for t, h in corners]
    assert all(above) and not all(below)


def test_base_charge_time_against_ode_integration(healthy):
    """Phase 2 of the start-up time against scipy's solve_ivp of
    C dv/dt = (V_th - v) / R until v = V_BE (RC charging)."""
    t = estimate_start_time(healthy, 230.0)
    result = analyze_startup(healthy, t.bus_voltage)
    r_st, r_be = healthy.startup.resistance, healthy.drive.base_emitter_resistance
    source = t.bus_voltage * r_be / (r_st + r_be)
    resistance = r_st * r_be / (r_st + r_be)
    capacitance = healthy.drive.capacitance + 2 * healthy.switch.output_capacitance
    vbe = result.dc.base_emitter_voltage
    event = lambda _t, v: v[0] - vbe  # noqa: E731
    event.terminal = True
    solution = solve_ivp(lambda _t, v: [(source - v[0]) / (resistance * capacitance)],
                         (0, 1.0), [0.0], events=event, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(t.base_charge_time, solution.t_events[0][0], rtol=1e-6)


def test_growth_time_from_shot_noise(healthy):
    """Phase 3: ln(I_trip / i_n) / sigma with i_n = sqrt(2 q I_C sigma/4)
    (Schottky 1918)."""
    from scipy.constants import elementary_charge

    t = estimate_start_time(healthy, 230.0, temperature=298.15, hfe=30.0)
    r = analyze_startup(healthy, t.bus_voltage, 298.15, 30.0)
    noise = math.sqrt(2 * elementary_charge * r.dc.collector_current * r.growth_rate / 4)
    trip = healthy.limiter.vbe / healthy.limiter.sense_resistance
    np.testing.assert_allclose(t.growth_time, math.log(trip / noise) / r.growth_rate,
                               rtol=1e-9)


def test_bulk_charge_time_dc_input_is_zero():
    design = load_design(WORKED_CASES / "aux_5v_48v_dc.toml")
    t = estimate_start_time(design)
    assert t.bulk_charge_time == 0.0 and t.total > 0


def test_drive_cycle_first_on_time_against_ode(healthy):
    """One on-time of the drive capacitor, C dv/dt = (n V - V_BE - v)/R_d,
    against solve_ivp."""
    cycle = drive_cycle(healthy, max_cycles=1)
    # recompute the capacitor voltage after the first on-time from the ODE
    from rcc.devices import base_emitter_voltage

    temperature = healthy.environment.temperature_min
    vbe = float(base_emitter_voltage(healthy.switch.vbe, healthy.switch.vbe_tempco,
                                     temperature))
    bus = cycle.bus_voltage
    n = healthy.feedback_turns_ratio
    t_on = healthy.transformer.magnetizing_inductance * cycle.peak_current / bus
    rc = healthy.drive.resistance * healthy.drive.capacitance
    solution = solve_ivp(lambda _t, v: [(n * bus - vbe - v[0]) / rc], (0, t_on), [-vbe],
                         rtol=1e-10, atol=1e-12)
    v_end = solution.y[0, -1]
    i_end = (n * bus - vbe - v_end) / healthy.drive.resistance
    extra = (bus - vbe) / healthy.startup.resistance - vbe / healthy.drive.base_emitter_resistance
    np.testing.assert_allclose(cycle.base_current_end, i_end + extra, rtol=1e-6)


def test_hiccup_case_and_healthy_case(healthy):
    ok = drive_cycle(healthy)
    assert not ok.hiccup and ok.restart_margin > 0
    bad = load_design(WORKED_CASES / "fault_hiccup.toml")
    report = startup_report(bad)
    assert report.result.starts and report.drive.hiccup
    codes = {f.code for f in startup_findings(bad, report)}
    assert "hiccup" in codes


def test_weak_drive_at_low_gain(healthy):
    weak = healthy.with_values({"switch.hfe_min": 2, "drive.resistance": "2.2 kohm"})
    report = startup_report(weak)
    finding = [f for f in startup_findings(weak, report) if f.code == "weak-drive"]
    assert len(finding) == 1 and finding[0].value < finding[0].limit


def test_slow_start_warns_against_the_limit(healthy):
    slow = healthy.with_values({"limits.start_time_max": "1 us"})
    report = startup_report(slow)
    finding = [f for f in startup_findings(slow, report) if f.code == "slow-start"]
    assert len(finding) == 1 and finding[0].severity == "warn"
    assert finding[0].limit == pytest.approx(1e-6) and finding[0].unit == "s"


@pytest.mark.parametrize("path", sorted(WORKED_CASES.glob("*.toml")), ids=lambda p: p.name)
def test_every_worked_case_gets_a_verdict(path):
    design = load_design(path)
    report = startup_report(design)
    data = report.to_json()
    assert set(data) == JSON_KEYS
    assert set(data["dc_point"]) == {"region", "ic_a", "ib_a", "vbe_v", "limiter_active"}
    json.dumps(data, allow_nan=False)
    assert isinstance(data["starts"], bool)
    assert len(data["poles"]) == 6
    if data["starts"]:
        assert data["growth_rate_per_s"] > 0 and data["holding_element"] is None
    else:
        assert data["holding_element"] in {"startup-resistor", "drive-coupling", "limiter",
                                           "feedback-phase"}
        assert data["start_time_s"] is None
    # without the engine only the small-signal bound is known, and it says so
    assert data["min_start_basis"] == "small-signal-bound"
    assert data["min_start_line_v"] is None and data["min_start_bus_v"] is None
    assert data["min_start_search"] is None
    if not design.input.is_ac:
        assert data["min_oscillation_line_v"] is None
    for finding in startup_findings(design, report):
        assert isinstance(finding, Finding) and finding.message and finding.advice


def test_worst_corner_is_the_slowest(healthy):
    worst = analyze_startup(healthy)
    for t in (healthy.environment.temperature_min, healthy.environment.temperature_max):
        for h in (healthy.switch.hfe_min, healthy.switch.hfe_max):
            assert analyze_startup(healthy, None, t, h).growth_rate >= worst.growth_rate


def test_loop_gain_is_one_at_a_pole(healthy):
    """1 - L(s) = 0 at every pole (P = P0 (1 - L))."""
    result = analyze_startup(healthy)
    for pole in result.poles:
        value = np.polyval(result.loop_numerator, pole) / np.polyval(result.loop_denominator,
                                                                     pole)
        assert abs(1 - value) < 1e-6 * max(1.0, abs(value))


def test_plot_loop_gain(tmp_path, healthy):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from rcc.startup import plot_loop_gain

    fig, ax = plt.subplots(2, 1, sharex=True)
    returned = plot_loop_gain(analyze_startup(healthy), ax=ax)
    assert returned is ax and len(ax[0].lines) >= 1 and len(ax[1].lines) >= 1
    plt.close(fig)
