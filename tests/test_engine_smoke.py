"""Smoke checks of the time-domain engine on the worked case (invented demo data)."""

import numpy as np
import pytest
import scipy.linalg

from rcc.design import Load, load_design
from rcc.engine import build_circuit, dc_initial_state, simulate
from rcc.engine.simulate import expm_flushed

WORKED = "worked_cases/standby_12v_universal.toml"


@pytest.fixture(scope="module")
def circuit():
    design = load_design(WORKED)
    return build_circuit(design, 325.0, Load("resistance", 40.0), 298.15)


def test_expm_matches_scipy_on_a_stiff_matrix():
    # reference: scipy.linalg.expm (Al-Mohy & Higham 2009 scaling and squaring)
    rng = np.random.default_rng(1)
    matrix = rng.normal(size=(6, 6)) * 3.0 - np.diag([1e4, 1.0, 2.0, 3.0, 5e2, 0.1])
    for scale in (1e-6, 1e-3, 0.3):
        np.testing.assert_allclose(expm_flushed(matrix * scale),
                                   scipy.linalg.expm(matrix * scale), rtol=1e-11, atol=1e-13)


def test_power_on_run_switches_and_stays_finite(circuit):
    trace = simulate(circuit, dc_initial_state(circuit), 3e-3, record=True)
    assert np.all(np.isfinite(trace.states))
    switch = circuit.device_index("switch")
    kinds = circuit.state_kinds("switch")
    turn_ons = [1 for f, t in zip(trace.event_from, trace.event_to)
                if kinds[circuit.decode(f)[switch]] == "off"
                and kinds[circuit.decode(t)[switch]] == "active"]
    assert len(turn_ons) >= 2  # start-up bursts of the worked case, about 1 ms apart
    # the bus current at the first instant is zero (capacitors discharged)
    assert trace["primary_current"][0] == 0.0


def test_turn_on_rule_on_a_handmade_event_list():
    """turn_on_indices: a cut-off -> active switch counts when saturation
    follows before cut-off (the on-time of the switch; common practice),
    not when the switch drops back to cut-off; an undecided last candidate
    counts only in a run that stopped on it.  Switch states in code order
    off, active, saturated, breakdown (weight 1, radix 4); device 1 is
    another device whose events are ignored."""
    from rcc.engine.simulate import turn_on_indices

    off, active, saturated, breakdown = 0, 1, 2, 3
    steps = [(0, off, active), (1, 0, 1), (0, active, saturated),    # 0: turn-on
             (0, saturated, active), (0, active, off),
             (0, off, active), (0, active, off),                     # 5: excursion
             (0, off, breakdown), (0, breakdown, off),
             (0, off, active), (1, 1, 0), (0, active, saturated),    # 9: turn-on
             (0, saturated, active), (0, active, off),
             (0, off, active)]                                       # 14: undecided
    devices = np.array([d for d, _, _ in steps])
    before = np.array([a if d == 0 else 4 * a for d, a, _ in steps])
    after = np.array([b if d == 0 else 4 * b for d, _, b in steps])
    found = turn_on_indices(devices, before, after, 0, 1, 4)
    np.testing.assert_array_equal(found, [0, 9])
    found = turn_on_indices(devices, before, after, 0, 1, 4, stopped=True)
    np.testing.assert_array_equal(found, [0, 9, 14])


def test_turn_on_rule_ignores_moves_between_junction_chords():
    """The active and saturated regions are split into the chords of the
    base-emitter junction law (rcc.engine.circuit.JunctionSegments): a move
    from one chord to the next is no change of the switch's region.  States
    off, active/1, active/2, saturated/1 with kinds 0, 1, 1, 2."""
    from rcc.engine.simulate import turn_on_indices

    kinds = [0, 1, 1, 2]
    steps = [(0, 1), (1, 2), (2, 3),     # 0: turn-on, chord move, saturation
             (3, 2), (2, 1), (1, 0),     # storage, chord move, cut-off
             (0, 1), (1, 2), (2, 1), (1, 0)]  # 6: excursion through two chords
    devices = np.zeros(len(steps), dtype=int)
    before = np.array([a for a, _ in steps])
    after = np.array([b for _, b in steps])
    found = turn_on_indices(devices, before, after, 0, 1, 4, kinds=kinds)
    np.testing.assert_array_equal(found, [0])
