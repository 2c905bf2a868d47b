"""The engine (``rcc.engine``) against the independent smooth-device reference
(``tests/smooth_reference.py``: Ebers-Moll transistors with charge control,
Shockley diodes, zeners with a 60 mV/decade knee, scipy's Radau IIA; no
code shared with the engine).

Sources: the reference itself (its own checks against closed forms are in
``tests/test_smooth_reference.py``); the parallel RLC ring (Alexander &
Sadiku, *Fundamentals of Electric Circuits*, 5th ed., 2013, sec. 8.5) and
the RL ramp ``di/dt = V / L`` (Faraday's law) as closed forms both must
meet; the behaviour issue 8 quotes from a general-purpose simulation with
physical device models (bursts at 230 V, lock-up of the 48 V case).  The
worked cases are invented demo data.  The standby comparisons start both
models from one common state, taken from the engine in the middle of an
off-time after a 1500-cycle warm-up from power-on (about 20-27 ms), where
every junction is off and the fast nodes follow the slow ones; disagreements
and their measured causes are in ``notes/smooth_reference.md``.
"""

import math

import numpy as np
import pytest

from rcc.design import Load, load_design
from rcc.engine import build_circuit, power_on_state, simulate
from rcc.engine.circuit import SWITCH_STATES
from smooth_reference import simulate_smooth

STANDBY = "worked_cases/standby_12v_universal.toml"
TEMPERATURE = 298.15
LOAD = Load("current", 0.3)
#: Engine turn-ons from power-on before the common state is taken
WARM_UP_TURN_ONS = 1500


# ---------------------------------------------- reduced circuit: the ring
def _held_off():
    return load_design(STANDBY).with_values({
        "drive.base_emitter_resistance": "1 ohm", "drive.capacitance": "1 pF"})


def _ring(time, voltage):
    """Mean period [s] and decay rate [1/s] of a ring about zero."""
    crossings = [time[k] - voltage[k] * (time[k + 1] - time[k]) / (voltage[k + 1] - voltage[k])
                 for k in range(len(time) - 1) if voltage[k] < 0 <= voltage[k + 1]]
    period = float(np.mean(np.diff(crossings)))
    troughs = [voltage[(time >= a) & (time < b)].min()
               for a, b in zip(crossings[:-1], crossings[1:])]
    return period, math.log(troughs[0] / troughs[-1]) / (period * (len(troughs) - 1))


def test_power_on_ring_of_the_held_off_switch_matches():
    # switch held off (base tied to the emitter by 1 ohm, 1 pF drive
    # capacitor), rectified capacitors precharged so no diode conducts: a
    # 60 V bus step rings as a parallel RLC (L_lk + L_m, node capacitance,
    # core loss across L_m) in both models (closed form in
    # test_smooth_reference.py); they agree to 0.5 % in period and 3 % in
    # decay (the engine's junction and leak conductances)
    design, bus = _held_off(), 60.0
    load = Load("resistance", 1e6)
    precharge = {"v_output_capacitor": 50.0, "v_aux": 11.5, "v_clamp": 300.0}
    circuit = build_circuit(design, bus, load, TEMPERATURE)
    x0 = power_on_state(circuit)
    for name, value in precharge.items():
        x0[circuit.state_index(name)] = value
    engine = simulate(circuit, x0, 12e-6, max_step=5e-9)
    reference = simulate_smooth(design, bus, load, duration=12e-6, rtol=1e-8, max_step=5e-9,
                                initial=dict(precharge, v_output=50.0))
    period_e, decay_e = _ring(engine.times, engine["collector_voltage"] - bus)
    period_r, decay_r = _ring(reference.time, reference.signals["collector_voltage"] - bus)
    assert period_e == pytest.approx(period_r, rel=5e-3)
    assert decay_e == pytest.approx(decay_r, rel=0.03)


# ------------------------------------------ full design, common state
def _common_state(bus, design=None, load=LOAD):
    """Engine after its warm-up; the state in the middle of the next
    off-time; the engine's next few cycles from there."""
    design = load_design(STANDBY) if design is None else design
    circuit = build_circuit(design, bus, load, TEMPERATURE)
    warm = simulate(circuit, power_on_state(circuit), 1.0, record=False,
                    stop_on_turn_on=WARM_UP_TURN_ONS)
    t0 = warm.final_time
    ahead = simulate(circuit, warm.final_state, t0 + 2e-3, t_start=t0,
                     topology=warm.final_topology, stop_on_turn_on=4)
    ons = ahead.turn_on_times()
    offs = ahead.device_transitions("switch", SWITCH_STATES.index("active"),
                                    SWITCH_STATES.index("off"))
    t_mid = 0.5 * (offs[offs > ons[0]][0] + ons[1])
    head = simulate(circuit, warm.final_state, t_mid, t_start=t0, topology=warm.final_topology)
    # the engine's states by name (the reference maps v_node and drops the
    # stored base charge, zero with the switch off) and its base and
    # emitter voltages
    common = dict(zip(circuit.state_names, head.final_state),
                  v_base=head["base_voltage"][-1], v_emitter=head["emitter_voltage"][-1])
    assert abs(common["q_base"]) < 1e-15
    engine = simulate(circuit, head.final_state, t_mid + 60e-6, t_start=t_mid,
                      topology=head.final_topology, stop_on_turn_on=3)
    return design, common, engine, t_mid


def _first_cycle(engine, t_mid):
    """Period [s] and primary peak [A] of the engine's first full cycle."""
    ons = engine.turn_on_times() - t_mid
    window = (engine.times >= ons[0] + t_mid) & (engine.times < ons[1] + t_mid)
    return ons[1] - ons[0], engine["primary_current"][window].max()


#: bus voltages: 85 V and 230 V RMS rectified (DOMAIN check values: 120.2 V
#: and 325.3 V peak); reference durations: two cycles at 85 V; at 230 V the
#: first burst (10 pulses from the common state) and 0.6 ms of the pause
#: after it
CASES = {"85V": (120.0, 30e-6), "230V": (325.0, 0.72e-3)}
#: Least pause that makes a burst [s]: far above any switching period here
BURST_PAUSE = 100e-6


@pytest.fixture(scope="module", params=sorted(CASES))
def compared(request):
    bus, duration = CASES[request.param]
    design, common, engine, t_mid = _common_state(bus)
    reference = simulate_smooth(design, bus, LOAD, duration=duration, initial=common)
    engine_ons = engine.turn_on_times() - t_mid
    return bus, design, engine, t_mid, engine_ons, reference


def _longest_quiet(turn_ons, start, end):
    """Longest interval without a turn-on in [start, end] [s]."""
    marks = np.concatenate([[start], turn_ons[(turn_ons > start) & (turn_ons < end)], [end]])
    return float(np.max(np.diff(marks)))


def _ramp_slope(time, current, low, high):
    """di/dt of the first rise from ``low`` to ``high``: least-squares line
    through every sample in between (the leakage ring excited at turn-on
    rides on the ramp) [A/s]."""
    k_low = int(np.argmax(current >= low))
    k_high = k_low + int(np.argmax(current[k_low:] >= high))
    return np.polyfit(time[k_low:k_high + 1], current[k_low:k_high + 1], 1)[0]


@pytest.mark.xfail(strict=True, reason=(
    "first turn-on from the common state: engine 2.44 us / 4.00 us, reference 2.63 us / "
    "4.49 us at 85 V / 230 V (2.0 % and 4.5 % of the period; 0.14 us and 0.01 us before the "
    "engine's limiter carried its inverse-mode current). The two agree through the "
    "plateau and the ring (collector within 1 V at 3.8 us at 230 V); they part where the "
    "ring's drive meets the limiter, saturated in both: the engine's chord-wise "
    "collector-base junction turns off at 3.99 us and its limiter leaves saturation "
    "at once, so the switch base rises to 0.42 V by 4.0 us, while the reference's "
    "exponential junction still conducts (0.13 mA at 0.55 V) and holds the base at 0.13 V "
    "(notes/smooth_reference.md; open, issue 8)"))
def test_first_turn_on_agrees(compared):
    # the off-time from the common state (demagnetization, then the ring
    # turning the switch back on) is shared physics: the first turn-on
    # agrees within 2 % of the engine's period (the reference counts the
    # turn-on at 10 % of the current limit, the engine at the junction
    # threshold)
    bus, design, engine, t_mid, engine_ons, reference = compared
    assert len(reference.turn_on_times) >= 1
    period = engine_ons[1] - engine_ons[0]
    assert reference.turn_on_times[0] == pytest.approx(engine_ons[0], abs=0.02 * period)


def test_on_time_ramp_is_the_rl_ramp(compared):
    # Faraday: the magnetizing current ramps at v_m / L_m with
    # v_m = (V_bus - v_sat - v_sense - R_p i) L_m / (L_lk + L_m); the drops
    # are below 0.6 V (0.5 % of 120 V), so both models lie within 1.5 % of
    # V_bus / (L_lk + L_m), and within 1 % of each other.  (The primary
    # current ramps 2 % slower at 325 V: it carries the reflected base drive
    # r_f i_f, which decays as the drive capacitor charges.)
    bus, design, engine, t_mid, engine_ons, reference = compared
    tr = design.transformer
    expected = bus / (tr.leakage_inductance + tr.magnetizing_inductance)
    mask = engine.times >= engine_ons[0] + t_mid
    magnetizing = engine.states[:, engine.state_names.index("i_magnetizing")]
    slope_e = _ramp_slope(engine.times[mask], magnetizing[mask], 0.07, 0.15)
    after = reference.time >= reference.turn_on_times[0]
    slope_r = _ramp_slope(reference.time[after], reference.states["i_magnetizing"][after],
                          0.07, 0.15)
    assert slope_e == pytest.approx(expected, rel=0.015)
    assert slope_r == pytest.approx(expected, rel=0.015)
    assert slope_e == pytest.approx(slope_r, rel=0.01)


# No regulated cycle is compared from the common state: that state carries
# the engine's regulation equilibrium (auxiliary and output capacitor), which
# is not the reference's.  From it the reference's first cycle at 85 V is
# 37 % longer with a 43 % higher peak, then relaxes over about 2 ms (200
# cycles, 83 s of CPU) to 104.9 kHz, 0.196 A and 12.23 V, where the engine
# runs at 104.4 kHz, 0.194 A and 12.03 V (notes/smooth_reference.md).  The
# limiter law that moves the set point is compared directly below, with the
# regulation taken out.


def test_output_holds_over_the_compared_cycles(compared):
    # over the compared cycles the 470 uF output capacitor moves by tens of
    # millivolts in both: it agrees within 0.5 % at the engine's last
    # turn-on (the common state fixes it; the terminal voltage is not
    # compared: it carries the ESR drop of the rectifier pulse, whose size
    # is the peak current of test_switching_cycle_agrees)
    bus, design, engine, t_mid, engine_ons, reference = compared
    at = engine.times[-1] - t_mid
    capacitor = engine.states[-1, engine.state_names.index("v_output_capacitor")]
    assert np.interp(at, reference.time, reference.states["v_output_capacitor"]) == \
        pytest.approx(capacitor, rel=5e-3)


@pytest.fixture(scope="module")
def bursts(compared):
    bus, design, engine, t_mid, engine_ons, reference = compared
    if bus < 300:
        pytest.skip("regular switching at 85 V: no bursts in either model")
    duration = reference.time[-1]
    circuit = build_circuit(design, bus, LOAD, TEMPERATURE)
    x0 = engine.states[0]
    long_engine = simulate(circuit, x0, t_mid + duration, t_start=t_mid, record=False,
                           topology=int(engine.topologies[0]))
    return (_longest_quiet(reference.turn_on_times, 0.0, duration),
            _longest_quiet(long_engine.turn_on_times() - t_mid, 0.0, duration))


def test_both_burst_at_high_line(bursts):
    # the standby case at 230 V and 0.3 A bursts: the regulation zener's
    # current holds the limiter on after demagnetization until the
    # auxiliary capacitor has drained (DOMAIN "Operation" 5).  The
    # reference's pause after its first burst is 885 us (the general-purpose
    # simulation quoted in issue 8: about 830 us after groups of about 25
    # pulses 11-17 us apart; the reference's next burst, not run here:
    # 30+ pulses 10-16 us apart, peaks 0.30-0.50 A); the engine pauses too
    # (a pause over 300 us is twenty in-burst intervals: bursting, not
    # irregular switching; from the engine's state since its junctions follow
    # their exponential laws the reference's first pause is 496 us, its
    # later ones about 885 us)
    reference_quiet, engine_quiet = bursts
    assert reference_quiet > 3 * BURST_PAUSE
    assert engine_quiet > BURST_PAUSE


# fixed by the engine's junctions as chords of their exponential laws (was 162 us
# against 885 us with the threshold limiter junction)
def test_burst_pause_agrees(bursts):
    # the pause (dead time of the burst) within 20 %
    reference_quiet, engine_quiet = bursts
    assert engine_quiet == pytest.approx(reference_quiet, rel=0.2)


# ------------------------- another design: the 48 V case from power-on
AUX = "worked_cases/aux_5v_48v_dc.toml"
AUX_BUS, AUX_LOAD, AUX_DURATION = 48.0, Load("current", 0.6), 0.32e-3


def _restarts(turn_ons):
    """Turn-ons after the pulse at switch-on (the reference does not count
    that one: its collector has not been up yet) [s]."""
    return turn_ons[turn_ons > 20e-6]


@pytest.fixture(scope="module")
def aux_power_on():
    design = load_design(AUX)
    circuit = build_circuit(design, AUX_BUS, AUX_LOAD, TEMPERATURE)
    engine = simulate(circuit, power_on_state(circuit), AUX_DURATION)
    reference = simulate_smooth(design, AUX_BUS, AUX_LOAD, duration=AUX_DURATION)
    return engine, reference


def test_aux_case_locks_up_in_both(aux_power_on):
    # issue 8: from power-on at 48 V and 0.6 A the case does not start into
    # its load (the general-purpose simulation quoted there: output near
    # 1.6-1.8 V); in both models one pulse at switch-on, then a hiccup
    # restart after more than 100 us, the 5 V output below 1 V
    engine, reference = aux_power_on
    for restarts in _restarts(engine.turn_on_times()), _restarts(reference.turn_on_times):
        assert len(restarts) >= 1 and restarts[0] > 100e-6
    assert engine["output_voltage"].max() < 1.0
    assert reference.signals["output_voltage"].max() < 1.0


def test_aux_case_restart_agrees(aux_power_on):
    # the first restart after the pulse at switch-on, within 10 % (measured:
    # engine 140 us, reference 151 us; 253 us in the engine before its
    # limiter carried the inverse-mode current beta_R I_BC into the switch
    # base, which ends the drive capacitor's reset higher, as the
    # reference's Ebers-Moll limiter does)
    engine, reference = aux_power_on
    assert _restarts(engine.turn_on_times())[0] == pytest.approx(
        _restarts(reference.turn_on_times)[0], rel=0.1)



# ------------------ the current limit alone: regulation taken out
@pytest.fixture(scope="module")
def current_limited():
    """The standby case without its regulation path (``regulation.method =
    "none"``) into 40 ohm at 85 V: every on-time ends at the current limit,
    so the first cycle from a common state tests the limiter's junction
    directly (the unregulated output, 20.4 V, only sets the off-time)."""
    design = load_design(STANDBY).with_values({"regulation.method": "none"})
    load = Load("resistance", 40.0)
    design, common, engine, t_mid = _common_state(120.0, design, load)
    reference = simulate_smooth(design, 120.0, load, duration=45e-6, initial=common)
    return engine, t_mid, reference


def test_current_limited_turn_on_agrees(current_limited):
    # the off-time from the common state: within 2 % of the period
    # (measured: engine 3.16 us, reference 3.27 us, period 16 us)
    engine, t_mid, reference = current_limited
    period, _ = _first_cycle(engine, t_mid)
    first = engine.turn_on_times()[0] - t_mid
    assert reference.turn_on_times[0] == pytest.approx(first, abs=0.02 * period)


# fixed by the engine's limiter junction as chords of its exponential law (was
# -9 % peak with a threshold at limiter.vbe + 10 ohm)
def test_current_limited_cycle_agrees(current_limited):
    # the first full cycle: period and primary peak within 5 % (issue 8's
    # tolerance for the engine against the reference)
    engine, t_mid, reference = current_limited
    period, peak = _first_cycle(engine, t_mid)
    assert reference.turn_on_times[1] - reference.turn_on_times[0] == pytest.approx(
        period, rel=0.05)
    assert reference.peak_currents[0] == pytest.approx(peak, rel=0.05)
