"""The compiled cycle timing (``rcc._cycle_kernel``) against the library's formulas.

The kernel evaluates, point by point, formulas that also exist vectorized in
the library; where it carries its own copy of one, the copy is checked here
against the library function (which is itself checked against its published
source in ``tests/test_reference_formulas.py``).
"""

import numpy as np
import pytest

from rcc import _cycle_kernel as kernel
from rcc import devices


def test_storage_time_is_the_library_charge_control_formula():
    """``storage_time_rising`` is :func:`rcc.devices.storage_time_rising_current`
    (charge control, Moll 1954; Sparkes 1960) for one point."""
    rng = np.random.default_rng(7)
    for _ in range(300):
        tau = 10 ** rng.uniform(-7.5, -5.5)
        base = 10 ** rng.uniform(-4, -0.5)
        collector = 10 ** rng.uniform(-3, 0.5)
        slope = 10 ** rng.uniform(3, 6)
        gain = rng.uniform(5, 80)
        expected = float(devices.storage_time_rising_current(tau, base, base, collector,
                                                             slope, gain))
        got = kernel.storage_time_rising(tau, base, base, collector, slope, gain)
        # same Newton steps in the same order: equal to rounding (measured: at most
        # 6.7e-16 relative over these 300 draws, numba's exp against numpy's)
        assert got == pytest.approx(expected, rel=1e-12, abs=1e-18)


def test_demagnetization_time_is_the_library_formula():
    """``demagnetization_time`` and ``demagnetizing_current`` are
    :func:`rcc.flyback.demagnetization_time` and
    :func:`rcc.flyback.demagnetizing_current` for one point, across the
    resistance- and capacitance-free limits, over- and underdamped plateaus."""
    from rcc import flyback

    rng = np.random.default_rng(11)
    for _ in range(300):
        inductance, peak = 10 ** rng.uniform(-4, -2), 10 ** rng.uniform(-2, 1)
        voltage = 10 ** rng.uniform(0, 2.5)
        resistance = 0.0 if rng.uniform() < 0.2 else 10 ** rng.uniform(-4, 3)
        capacitance = np.inf if rng.uniform() < 0.2 else 10 ** rng.uniform(-8, -2)
        expected = float(flyback.demagnetization_time(inductance, peak, voltage, resistance,
                                                      capacitance))
        got = kernel.demagnetization_time(inductance, resistance, capacitance, peak, voltage)
        # same formula in the same order: equal to rounding
        assert got == pytest.approx(expected, rel=1e-13)
        half = float(flyback.demagnetizing_current(inductance, peak, voltage, expected / 2,
                                                   resistance, capacitance))
        assert kernel.demagnetizing_current(inductance, resistance, capacitance, peak, voltage,
                                            expected / 2) == pytest.approx(half, rel=1e-12)


def test_tables_of_names_match_the_indices():
    """The column tables and the index constants the kernel reads agree."""
    for prefix, names in (("P_", kernel.POINT_NAMES), ("C_", kernel.CONSTANT_NAMES)):
        for index, name in enumerate(names):
            assert getattr(kernel, prefix + name.upper()) == index


@pytest.mark.parametrize("plateau_aux", [4.0, 10.9, 14.0])
def test_plateau_reset_current_by_nodal_analysis(plateau_aux):
    """The drive-capacitor reset on the flyback plateau with zener regulation
    (``_plateau_reset`` feeding ``reset``) against the circuit solved by nodal
    analysis (Kirchhoff's current law, ``numpy.linalg.solve``): the switch
    base ``b`` joined to the winding ``w`` through ``R_b`` and the drive
    capacitor at ``v_C``; the limiter's collector-base junction (drop ``V_d``)
    from its base ``l`` into ``b``, carrying ``(1 + beta_R)`` times its base
    current (Ebers & Moll 1954, inverse mode); ``l`` fed by ``R_lb`` from the
    emitter at 0 V and, where it conducts (``v_l < V_ap - Vz``), by the zener
    path, ``V_ap - Vz`` behind ``R_z`` (values of pop-1-0012)."""
    rb, rlb, rz, cb, gain = 270.0, 270.0, 220.0, 560e-9, 2.0
    drop, zener, winding, vc = 0.561, 8.2, -11.53, 1.5
    constants = np.zeros(len(kernel.CONSTANT_NAMES))
    values = dict(rb=rb, rlb=rlb, zener_resistance=rz, cb=cb, inverse_gain=gain,
                  clamp_resistance=rb + rlb / gain, tau=rb * cb, vebo=6.9, aux_state=1.0,
                  tau_slow=np.inf, linear_slow=1.0, rbe=np.inf)
    for name, value in values.items():
        constants[kernel.CONSTANT_NAMES.index(name)] = value
    point = np.zeros(len(kernel.POINT_NAMES))
    point[kernel.P_AUX_FLOOR] = zener + drop
    plateau, junction_drop = kernel._plateau_reset(constants, point, plateau_aux, drop)
    # (a step short against R C = 93-130 us: the finite difference's own error,
    # about step / (2 R C), stays below 1e-7)
    step = 1e-11
    after = kernel.reset(plateau, junction_drop, 0.0, vc, winding, step)
    rate = (vc - after) / step
    # nodal analysis: unknowns v_b, v_l, i (from b through R_b to the capacitor)
    # KCL at l: I_B = -v_l/R_lb [+ (source - v_l)/R_z];  junction: v_l - v_b = V_d;
    # at b: i = (1 + beta_R) I_B;  R_b: i = (v_b - w + v_C)/R_b
    source = plateau_aux - zener

    def solve(zener_on):
        g_l = 1.0 / rlb + (1.0 / rz if zener_on else 0.0)
        matrix = np.array([[0.0, gain * g_l, 1.0],
                           [-1.0, 1.0, 0.0],
                           [1.0 / rb, 0.0, -1.0]])
        rhs = np.array([gain * (source / rz if zener_on else 0.0), drop,
                        (winding - vc) / rb])
        return np.linalg.solve(matrix, rhs)

    v_b, v_l, current = solve(False)
    if v_l < source:  # the zener conducts
        v_b, v_l, current = solve(True)
        assert v_l < source
    assert v_b < 0.0 and current > 0.0
    assert rate * cb == pytest.approx(current, rel=1e-6)


# ---- the flyback plateau with the output path's resistance and capacitance
@pytest.mark.parametrize("drop_ratio, capacitance", [
    (1e-6, np.inf), (3e-3, np.inf), (0.05, np.inf), (0.7, np.inf), (4.0, np.inf),
    (0.0, 2e-6), (0.7, 2e-6), (4.0, 2e-6), (4.0, 2e-8), (40.0, 2e-8)])
def test_plateau_against_scipy(drop_ratio, capacitance):
    # L di/dt = -(V + R i + q/C) from I_pk to zero, integrated by scipy's
    # Radau IIA (Hairer & Wanner, Solving ODEs II, 1996) with the charge q' =
    # i: the end time is demagnetization_time, the current at half of it
    # demagnetizing_current, the charge plateau_charge, and the output's share
    # V q / (L I_pk^2 / 2) output_energy_share.  The cases span the RL limit
    # (no capacitance), underdamped (R = 0 and 0.7) and overdamped (4.0 and
    # 40 with 20 nF) plateaus; without C the share is the closed form
    # 2 (1 - ln(1 + x)/x)/x of the driven RL response (Hayt & Kemmerly,
    # Engineering Circuit Analysis, first-order circuits # from memory)
    from scipy.integrate import solve_ivp

    from rcc import flyback

    inductance, peak, voltage = 1.2e-3, 0.8, 150.0
    resistance = drop_ratio * voltage / peak

    def rhs(_, y):
        return [-(voltage + resistance * y[0] + y[1] / capacitance) / inductance, y[0]]

    def empty(_, y):
        return y[0]
    empty.terminal, empty.direction = True, -1
    solution = solve_ivp(rhs, (0.0, 1.0), [peak, 0.0], method="Radau", events=empty,
                         rtol=1e-12, atol=[1e-15, 1e-18], dense_output=True)
    t_end = solution.t_events[0][0]
    charge = solution.y_events[0][0][1]
    arguments = (inductance, peak, voltage, resistance, capacitance)
    # measured: the closed forms within 1.1e-13 relative of the integration
    # (the solver's tolerance), the quadrature within 2e-14; 1e-11 leaves room
    # for another scipy's step control
    assert kernel.demagnetization_time(inductance, resistance, capacitance, peak, voltage) \
        == pytest.approx(t_end, rel=1e-11)
    assert kernel.demagnetizing_current(inductance, resistance, capacitance, peak, voltage,
                                        t_end / 2) \
        == pytest.approx(solution.sol(t_end / 2)[0], rel=1e-11)
    assert float(flyback.plateau_charge(*arguments)) == pytest.approx(charge, rel=1e-11)
    share = float(flyback.output_energy_share(inductance, peak, voltage, 1.0, resistance,
                                              capacitance))
    assert share == pytest.approx(voltage * charge / (0.5 * inductance * peak**2), rel=1e-11)
    if np.isinf(capacitance) and drop_ratio > 0:
        x = drop_ratio
        assert share == pytest.approx(2 * (1 - np.log1p(x) / x) / x, rel=1e-9)


@pytest.mark.parametrize("near", [1e-6, -1e-6, 1e-8, -1e-8])
def test_plateau_is_smooth_where_the_series_hand_over(near):
    # the series near beta^2 = 0 (critical damping) and the closed forms on
    # either side meet without a jump that a 1e-12 change of an input could
    # expose (well-posedness): the capacitance that puts z or u at the switch
    from rcc import flyback

    inductance, peak, voltage, resistance = 1e-3, 2.0, 20.0, 3.0
    alpha = resistance / (2 * inductance)
    a = voltage / inductance + alpha * peak
    y = peak / a
    # z = beta^2 y^2 = near (the time's series) at this capacitance
    capacitance = 1.0 / (inductance * (alpha**2 - near / y**2))
    values = [float(flyback.demagnetization_time(inductance, peak, voltage, resistance, c))
              for c in (capacitance * (1 - 1e-12), capacitance, capacitance * (1 + 1e-12))]
    assert max(values) - min(values) < 1e-9 * values[1]
    # and u = beta^2 t^2 = near (the current's series) at t = y
    currents = [float(flyback.demagnetizing_current(inductance, peak, voltage, t, resistance,
                                                    capacitance))
                for t in (y * (1 - 1e-12), y)]
    assert abs(currents[1] - currents[0]) < 1e-9 * peak


def test_drive_capacitor_with_the_emitter_rising_against_scipy(monkeypatch):
    # the on-time drive: C_b dv/dt = (V_on - R_s (i0 + s t) - v) / (R_b + r_bb), the
    # emitter riding on the sense resistor; the kernel's closed form for the
    # capacitor at turn-off against scipy's Radau IIA on the standby case at
    # 85 V and on a lock-up pulse of the 5 V case at 48 V (where R_s I_pk is a
    # tenth of the drive)
    from pathlib import Path

    from scipy.integrate import solve_ivp

    from rcc import cycle
    from rcc.design import load_design

    captured = {}
    timing = kernel.cycle_timing

    def spy(points, constants):
        out = timing(points, constants)
        captured.update(points=points.copy(), constants=constants.copy(), out=out.copy())
        return out

    monkeypatch.setattr(cycle.kernel, "cycle_timing", spy)
    root = Path(__file__).resolve().parent.parent / "worked_cases"
    for name, bus, output in (("standby_12v_universal", 120.0, 12.0),
                              ("aux_5v_48v_dc", 48.0, 0.5)):
        design = load_design(root / f"{name}.toml")
        one = cycle._Cycle(design, np.array([bus]), cycle.reference_temperature(design),
                           design.switch.hfe_typ)
        one.evaluate(np.array([output]), np.array([one.v_threshold[0] - 0.2]),
                     np.array([0.0]), None)
        p, c = captured["points"][0], captured["constants"]
        out = dict(zip(kernel.OUTPUT_NAMES, captured["out"][0]))
        # the drive path: R_b and the switch's base spreading resistance
        rs, rb, cb = c[kernel.C_RS], c[kernel.C_RB_ON], c[kernel.C_CB]
        assert rb == design.drive.resistance + devices.SWITCH_BASE_RESISTANCE
        slope, i0, v_on = p[kernel.P_SLOPE], p[kernel.P_I0], p[kernel.P_V_ON]

        def rhs(t, v):
            return [(v_on - rs * (i0 + slope * t) - v[0]) / (rb * cb)]

        solution = solve_ivp(rhs, (0.0, out["t_on"]), [p[kernel.P_VC0]], method="Radau",
                             rtol=1e-12, atol=1e-12)
        # measured: 2.2e-16 relative on both cases; 1e-11 leaves room for
        # another scipy's step control
        assert out["vc_end"] == pytest.approx(solution.y[0, -1], rel=1e-11)
