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


def _storage_by_integration(hfe, gain, tau_s, transit_time, ramp, drive, ideal, t_decision):
    """The storage time by integrating charge control with scipy's Radau:
    ``dY/dt = H(t) - Y / tau_S`` (``Y = hFE E``) from the turn-on, with the
    limiter's linear steal wherever ``i_C + I_d`` is above ``ideal``, and after
    the decision ``H`` continued along its tangent there (the kernel's stated
    linearization); the end of storage is the first ``Y = 0`` after it.
    ``ramp(t)`` gives the collector current and its rate (the R L rise,
    checked in ``test_ramp_is_the_rl_rise``), ``drive(t)`` the drive current."""
    from scipy.integrate import solve_ivp

    kappa = gain / (1.0 + gain / hfe)
    step = 1e-5 * t_decision

    def held(t):
        (collector, slope), current = ramp(t), drive(t)
        return (hfe * current - max(kappa * (collector + current - ideal), 0.0) - collector
                - hfe * transit_time * slope)

    rate = (held(t_decision + step) - held(t_decision - step)) / (2 * step)

    def rhs(t, y):
        h = held(t) if t <= t_decision else held(t_decision) + rate * (t - t_decision)
        return [h - y[0] / tau_s]

    # tight solver tolerances (the charge Y is of order 1e-8 A s): the
    # integration's own error stays two orders under the assertion's 1e-8
    before = solve_ivp(rhs, (0.0, t_decision), [0.0], method="Radau", rtol=1e-11,
                       atol=1e-18)
    start = before.y[0, -1]
    if start <= 0.0:
        return 0.0
    gone = lambda t, y: y[0]  # noqa: E731
    gone.terminal, gone.direction = True, -1
    after = solve_ivp(rhs, (t_decision, t_decision + 200 * tau_s), [start], method="Radau",
                      rtol=1e-11, atol=1e-18, events=gone)
    return float(after.t_events[0][0]) - t_decision


def _storage_cases(stolen):
    """Random on-times: (point row, constants, first, second, offset, ideal,
    t_decision) with the decision ``hFE i_B = i_C`` at ``t_decision``."""
    rng = np.random.default_rng(7 + stolen)
    cases = []
    while len(cases) < 12:
        hfe, gain = rng.uniform(8, 60), rng.uniform(1, 40)
        tau_s, tau = 10 ** rng.uniform(-6.8, -5.5), 10 ** rng.uniform(-5.5, -3.5)
        slope, i0 = 10 ** rng.uniform(4, 6), rng.uniform(-0.05, 0.1)
        loop_rate = 10 ** rng.uniform(1, 4.5)
        t_decision = 10 ** rng.uniform(-6, -4.7)
        # the drive of _point: I_0 e^(-t/tau) - C_b rho s0 (e^(-lambda t) -
        # e^(-t/tau)) / (1 - lambda tau), rho the volts the base loop loses per
        # ampere of ramp
        opened, capacitance, sag = (10 ** rng.uniform(-2.5, -0.5), 10 ** rng.uniform(-8, -6),
                                    10 ** rng.uniform(0, 1.3))
        second = -capacitance * sag * (slope - loop_rate * i0) / (1.0 - loop_rate * tau)
        first = opened - second
        offset = rng.uniform(-1e-3, 1e-3)
        p = np.zeros(len(kernel.POINT_NAMES))
        c = np.zeros(len(kernel.CONSTANT_NAMES))
        p[kernel.P_HFE], p[kernel.P_SLOPE], p[kernel.P_I0] = hfe, slope, i0
        p[kernel.P_STEAL_GAIN] = gain
        c[kernel.C_STORAGE_CONSTANT], c[kernel.C_TAU_ON] = tau_s, tau
        c[kernel.C_TRANSIT_TIME], c[kernel.C_LOOP_RATE] = 1e-8, loop_rate
        collector, _ = kernel._ramp(p, c, t_decision)
        drive, _ = kernel._drive(c, first, second, offset, t_decision)
        if stolen:
            kappa = gain / (1.0 + gain / hfe)
            ideal = ((1.0 + kappa) * collector - (hfe - kappa) * drive) / kappa
            if not collector + drive > ideal:
                continue
        else:
            ideal = 10.0 * (collector + drive)
        cases.append((p, c, first, second, offset, ideal, t_decision))
    return cases


@pytest.mark.parametrize("stolen", [False, True])
def test_storage_time_is_charge_control_integrated(stolen):
    """``storage_time``: the excess charge the base current leaves over the
    on-time (closed-form convolution with ``e^(-t/tau_S)``) and its drain after
    the decision (bracketed root) against scipy's Radau integration of the
    same charge-control law (Moll 1954; Hairer & Wanner, *Solving Ordinary
    Differential Equations II*, 1996, sec. IV.8), on an R L ramp and a drive
    of two exponentials."""
    for p, c, first, second, offset, ideal, t_decision in _storage_cases(stolen):
        got = kernel.storage_time(p, c, first, second, offset, ideal, t_decision)
        want = _storage_by_integration(
            p[kernel.P_HFE], p[kernel.P_STEAL_GAIN], c[kernel.C_STORAGE_CONSTANT],
            c[kernel.C_TRANSIT_TIME], lambda t: kernel._ramp(p, c, t),
            lambda t: kernel._drive(c, first, second, offset, t)[0], ideal, t_decision)
        # measured: within 5.3e-10 relative of the integration (its tolerance and
        # the finite-difference tangent)
        assert got == pytest.approx(want, rel=1e-8, abs=0), (got, want)


def test_ramp_is_the_rl_rise():
    """``_ramp``: the R L rise ``i0 + (s - lambda i0)(1 - e^(-lambda t))/lambda``
    solves ``L di/dt = V - R i`` (Nilsson & Riedel, *Electric Circuits*, 10th
    ed., 2015, sec. 7.1, the step response of an R L circuit); ``_ramp_time``
    inverts it and is infinite beyond the asymptote ``V / R``."""
    inductance, resistance, voltage, start = 2e-3, 6.5, 120.0, 0.05
    p = np.zeros(len(kernel.POINT_NAMES))
    c = np.zeros(len(kernel.CONSTANT_NAMES))
    p[kernel.P_SLOPE], p[kernel.P_I0] = voltage / inductance, start
    c[kernel.C_LOOP_RATE] = resistance / inductance
    for t in (1e-7, 3e-6, 4e-5, 1e-3):
        current, rate = kernel._ramp(p, c, t)
        exact = voltage / resistance - (voltage / resistance - start) * np.exp(
            -resistance * t / inductance)
        # measured: the current within 2.4e-14 relative (the expm1 form against
        # the difference of exponentials), the rate and the inverse within 2.2e-16
        assert current == pytest.approx(exact, rel=1e-13, abs=0)
        assert rate == pytest.approx((voltage - resistance * current) / inductance, rel=1e-14,
                                     abs=0)
        assert kernel._ramp_time(p, c, current) == pytest.approx(t, rel=1e-13, abs=0)
    assert kernel._ramp_time(p, c, 1.0001 * voltage / resistance) == np.inf


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
        # same formula in the same order: equal to rounding (measured over these
        # 300 draws: 1.3e-15 relative for the time, 9.0e-16 for the current)
        assert got == pytest.approx(expected, rel=1e-13, abs=0.0)
        half = float(flyback.demagnetizing_current(inductance, peak, voltage, expected / 2,
                                                   resistance, capacitance))
        assert kernel.demagnetizing_current(inductance, resistance, capacitance, peak, voltage,
                                            expected / 2) == pytest.approx(half, rel=1e-12,
                                                                           abs=0.0)


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
    # measured (abs=0: the times are microseconds, where pytest's default
    # absolute 1e-12 would be a loose relative tolerance): the end time within
    # 1.1e-11 relative of the integration's event (the worst at the stiff
    # overdamped case 40 / 20 nF, where the event is located on the solver's
    # interpolant; under 1.7e-14 without C'), the current at half of it within
    # 1.1e-13, the charge and the share within 8.3e-14; 1e-10 and 1e-11 leave
    # room for another scipy's step control
    assert kernel.demagnetization_time(inductance, resistance, capacitance, peak, voltage) \
        == pytest.approx(t_end, rel=1e-10, abs=0.0)
    assert kernel.demagnetizing_current(inductance, resistance, capacitance, peak, voltage,
                                        t_end / 2) \
        == pytest.approx(solution.sol(t_end / 2)[0], rel=1e-11, abs=0.0)
    assert float(flyback.plateau_charge(*arguments)) == pytest.approx(charge, rel=1e-11,
                                                                      abs=0.0)
    share = float(flyback.output_energy_share(inductance, peak, voltage, 1.0, resistance,
                                              capacitance))
    assert share == pytest.approx(voltage * charge / (0.5 * inductance * peak**2), rel=1e-11,
                                  abs=0.0)
    if np.isinf(capacitance) and drop_ratio > 0:
        x = drop_ratio
        # measured: 2.2e-10 relative at x = 1e-6, the closed form's own
        # cancellation in 1 - ln(1 + x)/x (the quadrature agrees with the
        # integration to 8e-14 there); 4e-16 to 3e-14 at the larger drops
        assert share == pytest.approx(2 * (1 - np.log1p(x) / x) / x, rel=1e-9, abs=0.0)


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


@pytest.mark.parametrize("rbe", [33e3, np.inf])
def test_junction_reset_with_the_slow_path_against_scipy(rbe):
    # below the breakdown knee the drive capacitor discharges through the
    # limiter's junction path (a chord R_cb towards w + V_d, carrying current
    # only above it) and the slow path in parallel (the start-up current, and
    # R_b + R_be towards w where a base-emitter resistor is fitted):
    #   C dv/dt = -max(v - (w + V_d), 0)/R_cb - (v - w + I_s R_be)/(R_b + R_be)
    #   (or - I_s without R_be);
    # integrated by scipy's Radau IIA (Hairer & Wanner, Solving ODEs II, 1996),
    # the kink located as an event.  The kernel's reset and reset_cross are
    # its closed form (values of pop-1-0020 at 61.5 V after a lock-up pulse)
    from scipy.integrate import solve_ivp

    rb, cb, clamp, startup, drop, winding = 33.0, 4.7e-6, 443.0, 1.2934e-4, 0.607, 0.0
    linear = np.isinf(rbe)
    values = dict(rb=rb, cb=cb, clamp_resistance=clamp, tau=rb * cb, vebo=5.0,
                  rlb=820.0, inverse_gain=2.0, rbe=rbe, linear_slow=float(linear),
                  tau_slow=np.inf if linear else (rb + rbe) * cb)
    constants = np.zeros(len(kernel.CONSTANT_NAMES))
    for name, value in values.items():
        constants[kernel.CONSTANT_NAMES.index(name)] = value
    junction = winding + drop

    def slow(v):
        return startup if linear else (v - winding + startup * rbe) / (rb + rbe)

    def rhs(_, y):
        return [-(max(y[0] - junction, 0.0) / clamp + slow(y[0])) / cb]

    def kink(_, y):
        return y[0] - junction
    start = 1.293   # below the knee (breakdown is not part of this check)
    assert start < kernel._knee(constants, drop, winding)
    times = np.array([1e-4, 1e-3, 4e-3, 1e-2, 3e-2])
    solution = solve_ivp(rhs, (0.0, times[-1]), [start], method="Radau", t_eval=times,
                         events=kink, rtol=1e-12, atol=1e-14)
    for t, v in zip(times, solution.y[0]):
        got = kernel.reset(constants, drop, startup, start, winding, t)
        # measured: within 1.4e-12 relative of the integration (the solver's
        # tolerance); 1e-9 leaves room for another scipy's step control
        assert got == pytest.approx(v, rel=1e-9, abs=1e-12)
    t_kink = solution.t_events[0][0]
    assert kernel.reset_cross(constants, drop, startup, start, winding, junction) == \
        pytest.approx(t_kink, rel=1e-9)
    level = float(solution.y[0][-1])
    assert kernel.reset_cross(constants, drop, startup, start, winding, level) == \
        pytest.approx(times[-1], rel=1e-9)


def test_plateau_starts_at_the_bottom_of_the_ripple_against_scipy():
    # an output capacitor C that each cycle's plateau charges (taken as short)
    # and a resistive load R drains between plateaus: integrated over many
    # cycles by scipy's Radau IIA (Hairer & Wanner, Solving ODEs II, 1996) with
    # the charge q = (V_mean T / R) injected at each cycle start, its steady
    # voltage just before a plateau is where the kernel starts the plateau,
    # V_mean u / (e^u - 1), u = T / (R C) (the RC natural response; Nilsson &
    # Riedel, Electric Circuits, 10th ed., 2015, sec. 7.2).  The kernel's
    # plateau start is read back as V_R - V_R,start = n (V_mean - V_start), on
    # the 5 V worked case at 48 V with its output collapsed to 0.5 V and a
    # 10 ohm load (cycles of 134 us against R C = 10 ms)
    from pathlib import Path

    from scipy.integrate import solve_ivp

    from rcc import cycle
    from rcc.design import load_design

    design = load_design(Path(__file__).resolve().parent.parent / "worked_cases"
                         / "aux_5v_48v_dc.toml")
    resistance, mean = 10.0, 0.5
    load = cycle._LoadLaw("resistance", np.array([resistance]), 5.0)
    one = cycle._Cycle(design, np.array([48.0]), cycle.reference_temperature(design),
                       design.switch.hfe_typ, load)
    state = one.evaluate(np.array([mean]), np.array([one.v_threshold[0] - 0.2]),
                         np.array([0.0]), None, energy=False)
    period = float(state["t_on"][0] + state["t_off"][0])
    ratio = design.transformer.primary_turns / design.transformer.output_turns
    plain = cycle.reflected_voltage(mean, design.output.rectifier_drop,
                                    design.transformer.primary_turns,
                                    design.transformer.output_turns)
    start_kernel = mean - (plain - float(state["vr"][0])) / ratio
    capacitance = design.output.capacitance
    charge = mean * period / resistance
    v = 0.0
    for _ in range(3000):   # 40 R C: the steady sawtooth
        v += charge / capacitance
        v = solve_ivp(lambda _, y: -y / (resistance * capacitance), (0.0, period), [v],
                      method="Radau", rtol=1e-12, atol=1e-15).y[0, -1]
    assert 1e-3 < period / (resistance * capacitance)   # a visible ripple
    # measured: 5.1e-6 relative; the kernel takes T from the cycle before the
    # plateau moved to the ripple's bottom, which moves T by 0.08 % here
    assert start_kernel == pytest.approx(v, rel=1e-5)


def test_drive_capacitor_with_the_emitter_rising_against_scipy(monkeypatch):
    # the on-time drive: C_b dv/dt = (V_on - rho i(t) - v) / (R_b + r_bb), the
    # emitter riding on the sense resistor and the winding losing its share of
    # the primary loop's drop on the R L ramp i(t); the kernel's closed form for the
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
        # the primary loop: winding, saturated switch and sense resistor make
        # the ramp an R L rise (Nilsson & Riedel, Electric Circuits, 10th ed.,
        # 2015, sec. 7.1); the base loop loses the emitter's rise and the
        # feedback winding's share of the loop's drop
        loop = (design.transformer.primary_resistance + devices.SWITCH_SATURATION_RESISTANCE
                + rs)
        total = design.transformer.magnetizing_inductance \
            + design.transformer.leakage_inductance
        assert c[kernel.C_LOOP_RATE] == pytest.approx(loop / total, rel=1e-15)
        turns = design.transformer.feedback_turns / design.transformer.primary_turns
        sag = rs + turns * design.transformer.magnetizing_inductance / total * loop
        assert c[kernel.C_DRIVE_SAG] == pytest.approx(sag, rel=1e-15)
        final = slope * total / loop

        def rhs(t, v):
            current = final - (final - i0) * np.exp(-loop * t / total)
            return [(v_on - sag * current - v[0]) / (rb * cb)]

        solution = solve_ivp(rhs, (0.0, out["t_on"]), [p[kernel.P_VC0]], method="Radau",
                             rtol=1e-12, atol=1e-12)
        # measured: 2.2e-16 relative on both cases; 1e-11 leaves room for
        # another scipy's step control
        assert out["vc_end"] == pytest.approx(solution.y[0, -1], rel=1e-11)


def test_output_share_never_exceeds_what_the_capacitor_receives():
    # on pop-1-0041 at 28.7 V (a lock-up whose output swings over a current
    # load's knee) the charge balance at the mean asked for more energy than
    # the output capacitor receives over the plateau, and the rectifier's loss
    # came out negative (-0.19 mJ per pulse, measured 2026-12-03): energy
    # conservation (the pulse's L I^2/2 is all the output path has) bounds the
    # share, and every loss stays non-negative
    from rcc.cycle import operating_points
    from rcc.design import Load
    from rcc.population import generate_one

    design = generate_one(1, 41).design
    points = operating_points(design, 28.7, Load("current", 0.222664), 298.15)
    for name in ("rectifier", "clamp", "core", "drive", "reset", "turn_off_flyback"):
        assert float(getattr(points.losses, name)) >= 0.0, name
    delivered = float(points.output_power) / float(points.frequency)
    assert delivered <= float(points.energy_per_cycle), (delivered, points.energy_per_cycle)
