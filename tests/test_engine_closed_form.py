"""Engine vs closed-form solutions of linear circuits.

Sources: the undamped LC circuit ``v(t) = V0 cos(t / sqrt(LC))`` and the RL
step response ``i(t) = V/R (1 - exp(-t R / L))`` (Nilsson & Riedel,
*Electric Circuits*, 10th ed., 2015, ch. 7 and 8).
"""

import math

import numpy as np
import pytest

from rcc.engine import simulate
from rcc.engine.circuit import Device, DeviceState, Element, Guard, build_network


def comparator(name, terms, threshold, tolerance):
    """A device with no electrical effect that flips when an affine signal
    crosses ``threshold`` (two states: above, below)."""
    above = tuple(terms) + (("c", "", -threshold),)
    below = tuple((k, key, -c) for k, key, c in terms) + (("c", "", threshold),)
    return Device(name, (
        DeviceState("above", (), (Guard(above, 1, tolerance, "falls below"),)),
        DeviceState("below", (), (Guard(below, 0, tolerance, "rises above"),)),
    ))


def test_lc_ring_zero_crossings_at_known_times():
    # LC tank: v(0) = 1 V, i(0) = 0 -> zero crossings at (k + 1/2) pi sqrt(LC)
    inductance, capacitance = 1e-3, 1e-9
    network = build_network(
        [Element("C", "c1", "n", "0", capacitance, state="v"),
         Element("L", "l1", "n", "0", inductance, state="i")],
        [comparator("sign", (("v", "n", 1.0),), 0.0, 1e-12)],
        ("v", "i"), parameters={"node_leak_conductance": 0.0})
    omega = 1.0 / math.sqrt(inductance * capacitance)
    trace = simulate(network, [1.0, 0.0], 10.2 * math.pi / omega, record=False)
    expected = (np.arange(10) + 0.5) * math.pi / omega
    assert len(trace.event_times) == 10
    # resolution: crossing tolerance 1e-12 V over slope omega*1 V -> 1e-18 s,
    # ladder floor MIN_STEP = 1e-15 s
    np.testing.assert_allclose(trace.event_times, expected, rtol=0, atol=3e-15)
    # energy of the lossless tank is conserved: C v^2 / 2 + L i^2 / 2
    v, i = trace.final_state
    energy = 0.5 * capacitance * v * v + 0.5 * inductance * i * i
    assert energy == pytest.approx(0.5 * capacitance, rel=1e-12, abs=0)
    # the final state is the closed form at the end time
    t_end = trace.final_time
    assert v == pytest.approx(math.cos(omega * t_end), abs=1e-11)
    assert i == pytest.approx(math.sin(omega * t_end) * math.sqrt(capacitance / inductance),
                              abs=1e-11)


def test_rl_ramp_reaches_threshold_at_closed_form_time():
    voltage, resistance, inductance, threshold = 10.0, 5.0, 2e-3, 1.5
    network = build_network(
        [Element("V", "source", "a", "0", voltage),
         Element("R", "r1", "a", "b", resistance),
         Element("L", "l1", "b", "0", inductance, state="i")],
        [comparator("trip", (("x", "i", -1.0),), -threshold, 1e-12)],
        ("i",), parameters={"node_leak_conductance": 0.0})
    trace = simulate(network, [0.0], 1e-3, record=True)
    # the engine switches once the guard is below minus its tolerance
    # (1e-12 A here): the closed-form instant of i = threshold + 1e-12 A
    crossing = threshold + 1e-12
    expected = -inductance / resistance * math.log(1.0 - crossing * resistance / voltage)
    assert len(trace.event_times) == 1
    assert trace.event_times[0] == pytest.approx(expected, rel=1e-12, abs=0)
    # committed just past the crossing: the current is the threshold
    at_event = trace.states[trace.times == trace.event_times[0]][0, 0]
    assert at_event == pytest.approx(threshold, rel=1e-11, abs=0)
    assert at_event >= threshold
    # samples follow the closed form exactly
    closed = voltage / resistance * (1.0 - np.exp(-trace.times * resistance / inductance))
    np.testing.assert_allclose(trace.states[:, 0], closed, rtol=1e-12, atol=1e-14)
