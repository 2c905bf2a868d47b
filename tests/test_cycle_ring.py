"""The ring after demagnetization under the drive-capacitor reset clamp.

The cycle model's closed form (``rcc.cycle._Cycle._ring_after_clamp``,
notes/cycle_model.md "The ring under the reset clamp") is checked against
scipy's Runge-Kutta integrator (``scipy.integrate.solve_ivp``, RK45 with
event location; Dormand & Prince, J. Comput. Appl. Math. 6, 1980) on the
same linear circuit: a parallel RLC released from its plateau,
``C x'' + G x' + x / L = V_R / L``, ``x(0) = x'(0) = 0``, with the clamp
conductance ``G`` until ``x`` reaches ``x_r``, free afterwards.
"""

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from rcc.cycle import _Cycle
from rcc.devices import current_gain
from rcc.population import generate_one


def _cycle(index, bus):
    design = generate_one(1, index).design
    temperature = np.array([298.15])
    gain = current_gain(design.switch.hfe_typ, design.switch.hfe_tempco, temperature)
    return _Cycle(design, np.array([bus]), temperature, gain)


def _integrated_amplitude(cycle, vc, winding, vr):
    """Free-ring amplitude about the bus after the clamp lets go, by RK45."""
    lm, capacitance = cycle.lm, cycle.design.node_capacitance
    conductance = cycle.nb**2 / cycle._clamp_resistance()
    drop = cycle.vbe_limiter
    x_release = (vc - (winding + float(drop[0]))) / cycle.nb
    if x_release <= 0.0:
        return vr

    def field(t, y):
        x, v = y
        return [v, ((vr - x) / lm - conductance * v) / capacitance]

    def released(t, y):
        return y[0] - x_release
    released.terminal = True
    released.direction = 1.0
    period = 2.0 * np.pi * np.sqrt(lm * capacitance)
    solution = solve_ivp(field, (0.0, period), [0.0, 0.0], events=released,
                         rtol=1e-11, atol=1e-12 * vr, max_step=period / 400.0)
    if not solution.t_events[0].size:
        return 0.0
    x, v = solution.y_events[0][0]
    return float(np.hypot(x - vr, v * np.sqrt(lm * capacitance)))


@pytest.mark.parametrize("index, bus, winding, vr", [
    (23, 31.5, -2.72, 8.72),     # optocoupler, no clamp: the case the fix came from
    (10, 55.3, -3.07, 9.50),     # 3.3 V feedback-winding design
    (22, 106.2, -7.58, 52.48),   # 5 V feedback-winding design, bursts
])
def test_loaded_ring_matches_integrated_circuit(index, bus, winding, vr):
    cycle = _cycle(index, bus)
    drop = cycle.vbe_limiter
    junction = winding + float(drop[0])
    # from no reset current left to a clamp the swing cannot lift
    for vc in np.linspace(junction - 0.5, junction + 2.5 * cycle.nb * vr, 9):
        closed = float(cycle._ring_after_clamp(np.array([vc]), np.array([winding]),
                                               np.array([vr]))[0])
        integrated = _integrated_amplitude(cycle, vc, winding, vr)
        # 1e-6: the cycle model's well-posedness tolerance (tests/test_well_posed.py);
        # the closed form's Newton is within 1e-10 (rcc._cycle_kernel.RING_ITERATIONS) and
        # RK45 at rtol 1e-11 with event location within about 1e-9 of the swing
        assert closed == pytest.approx(integrated, rel=1e-6, abs=1e-6 * vr), vc


def test_clamped_first_swing_is_the_damped_step_response():
    """With the clamp on for the whole swing the collector falls below the
    bus by V_R exp(-pi zeta / sqrt(1 - zeta^2)), the overshoot of a damped
    second-order step response (Nilsson & Riedel, Electric Circuits, 10th
    ed., 2015, sec. 8.3; Ogata, Modern Control Engineering, 5th ed., 2010,
    the maximum overshoot of sec. 5-3; section numbers # from memory)."""
    cycle = _cycle(23, 31.5)
    zeta = 0.5 * cycle.nb**2 / cycle._clamp_resistance() * cycle.ring_impedance
    vr = 8.72
    overshoot = vr * np.exp(-np.pi * zeta / np.sqrt(1.0 - zeta**2))
    lm, capacitance = cycle.lm, cycle.design.node_capacitance
    conductance = cycle.nb**2 / cycle._clamp_resistance()
    period = 2.0 * np.pi * np.sqrt(lm * capacitance)
    solution = solve_ivp(lambda t, y: [y[1], ((vr - y[0]) / lm - conductance * y[1])
                                       / capacitance],
                         (0.0, period), [0.0, 0.0], rtol=1e-11, atol=1e-12,
                         max_step=period / 2000.0)
    # 1e-4: the maximum is taken over the solver's steps (max_step = period/2000):
    # a sampled crest misses the true one by up to (pi/1000)^2/2 = 5e-6 of V_R,
    # about 2e-5 of the overshoot (V_R / overshoot = 4.3)
    assert np.max(solution.y[0]) - vr == pytest.approx(overshoot, rel=1e-4)
    # a clamp that needs more than the damped swing never lets go: no ring
    winding = -2.72
    drop = cycle.vbe_limiter
    vc_stuck = winding + float(drop[0]) + cycle.nb * (vr + overshoot) * 1.01
    assert cycle._ring_after_clamp(np.array([vc_stuck]), np.array([winding]),
                                   np.array([vr]))[0] == 0.0
