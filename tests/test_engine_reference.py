"""Engine vs a general-purpose stiff integrator on the same equations, and
the energy balance of a switching cycle.

Sources: scipy's ``solve_ivp`` with the Radau IIA method (Hairer & Wanner,
*Solving Ordinary Differential Equations II*, 1996) at rtol 1e-9 as the
reference; energy conservation (input = output + losses + change in stored
energy) as an exact law of the circuit (Tellegen's theorem; Penfield,
Spence & Duinker, *Tellegen's Theorem and Electrical Networks*, 1970).
The worked case is invented demo data.
"""

import numpy as np
import pytest

from rcc.design import Load, load_design
from rcc.engine import (advance_cycle, build_circuit, dc_initial_state, segment_energy,
                        simulate)
from rcc.engine.simulate import simulate_reference

WORKED = "worked_cases/standby_12v_universal.toml"


@pytest.fixture(scope="module")
def circuit():
    design = load_design(WORKED)
    return build_circuit(design, 325.0, Load("resistance", 40.0), 298.15)


def test_switching_instants_and_states_match_radau(circuit):
    # the power-on kick and the first on-time: turn-on, saturation, a short
    # return to the active region and back, limiter turn-on
    x0 = dc_initial_state(circuit)
    t_end = 3.5e-6
    engine = simulate(circuit, x0, t_end, record=False)
    times, before, after, final = simulate_reference(circuit, x0, t_end, rtol=1e-9,
                                                     atol=1e-12)
    assert len(engine.event_times) >= 3
    assert len(times) == len(engine.event_times)
    np.testing.assert_array_equal(engine.event_from, before)
    np.testing.assert_array_equal(engine.event_to, after)
    # Radau at rtol 1e-9 places events to about 1e-13 s on these
    # microsecond segments; the engine to MIN_STEP (1e-15 s)
    np.testing.assert_allclose(engine.event_times, times, rtol=0, atol=1e-12)
    scale = np.maximum(np.abs(final), np.array([1e-3, 1e-3, 1.0, 1.0, 1e-9, 1.0, 1.0, 1.0]))
    assert np.max(np.abs(engine.final_state - final) / scale) < 1e-6


def test_energy_balance_over_one_cycle(circuit):
    # from the power-on kick: stop at the first turn-on, then one full cycle
    start = simulate(circuit, dc_initial_state(circuit), 0.05, record=False,
                     stop_on_turn_on=1)
    assert start.stopped
    cycle = advance_cycle(circuit, start.final_state, start.final_topology)
    totals = {"input": 0.0, "output": 0.0, "loss": 0.0, "stored": 0.0}
    for segment in cycle.segments:
        energies = segment_energy(circuit.topology(segment.topology), segment.start_state,
                                  segment.duration)
        for key in totals:
            totals[key] += energies[key]
    change = circuit.stored_energy(cycle.end_state) - circuit.stored_energy(cycle.start_state)
    assert totals["input"] > 1e-5  # a real cycle: tens of microjoules
    balance = totals["input"] - totals["output"] - totals["loss"] - change
    assert abs(balance) <= 1e-6 * totals["input"]
    # the integrated reactive power equals the stored-energy change
    assert totals["stored"] == pytest.approx(change, rel=1e-6, abs=1e-6 * totals["input"])
