"""Compiled timing of one switching cycle (internal to :mod:`rcc.cycle`).

The cycle model's map (the state at one turn-on to the state at the next)
is evaluated thousands of times per operating point: inside Newton's method
for its fixed point, inside the scan and the balance of the output, inside
the balance of the bulk capacitor.  Written with numpy, one evaluation of a
handful of points is dominated by the per-call cost of some 300 small array
operations.  The timing part of the map (on-time decision, storage, turn-off,
drive-capacitor reset, ring, off-time, next state) is therefore one scalar
loop compiled with numba; the energy bookkeeping, which calls the device and
stress formulas of :mod:`rcc.devices` and :mod:`rcc.stress`, stays in numpy
in :meth:`rcc.cycle._Cycle.evaluate`.

The physics and its sources are documented at the call site
(:meth:`rcc.cycle._Cycle.evaluate`, the methods of :class:`rcc.cycle._Cycle`
and ``notes/cycle_model.md``); each function here names the method whose
equations it evaluates.  Every quantity is in SI units.  Arithmetic follows
numpy's rules (``error_model="numpy"``: a division by zero gives inf or nan,
never an exception), as the vectorized code it replaces did.
"""

from __future__ import annotations

import numpy as np

from rcc._numba_cache import configure as _configure_numba_cache

_configure_numba_cache()  # per-user kernel cache (before numba loads)

from numba import njit  # noqa: E402

#: Safeguarded Newton steps for the instant the loaded ring frees the base
#: (quadratic convergence: within 1e-10 of the swing on the population) [1].
RING_ITERATIONS = 10
#: Relative tolerance of the storage time and of the steal's onset
#: (safeguarded Newton, bracketed) [1].
STORAGE_TOLERANCE = 1e-13
STORAGE_ITERATIONS = 100
#: Grid steps over the on-time on which the limiter's windows are located [1].
STEAL_GRID = 8
#: Where the ramp's asymptote lies below the drive's start, the decision is
#: sought within this many of the larger of the drive's and the loop's time
#: constants [1].
DRIVE_DECAYS = 50.0
#: Least distance of ``1 - lambda tau`` from zero (the drive capacitor's and
#: the primary loop's time constants equal, where the drive's two exponentials
#: merge): closer, the drive's coefficients take it at that distance, sign
#: kept; the drive then differs from the exact one by about 1e-6 relative of
#: its ramp-following part [1].
RESONANCE_GUARD = 1e-6
#: Relative tolerance of the on-time decision (safeguarded Newton) [1].
DECISION_TOLERANCE = 1e-13
DECISION_ITERATIONS = 100

# ---- per-point inputs (columns of ``points``)
POINT_NAMES = (
    "vr", "plateau_aux", "ireg0", "vc0", "i0", "va0", "bus", "hfe", "steal_gain", "slope",
    "v_on", "startup_current", "bleed", "thermal_voltage", "vbe_limiter", "v_threshold",
    "aux_floor", "aux_hold", "output_reflected", "output_rate",
)
# ---- design constants (entries of ``constants``)
CONSTANT_NAMES = (
    "rb", "rlb", "rs", "tau", "aux_tau", "storage_constant", "node", "nb", "lm", "vebo",
    "inverse_gain", "clamp_resistance", "cb", "tau_slow", "rbe", "omega", "ring_impedance",
    "ring_damping", "limiter_gain", "zener_resistance", "filter_capacitance", "aux_state",
    "linear_slow", "output_resistance", "output_capacitance", "rb_on", "tau_on",
    "transit_time", "loop_rate", "drive_sag",
)
# ---- outputs (columns of the result)
OUTPUT_NAMES = (
    "ireg", "itrip", "peak", "t_on", "t_off", "t_rise", "on_end", "off_end", "mode",
    "vc_next", "va_next", "residual", "restarts", "drive_capability", "crossing", "left",
    "vc_end", "vc_demag", "ccm", "t_cross", "t_demag", "aux_charge", "phase", "ring_on",
    "charge_base", "limit_plateau", "vr_start",
)

# column indices of ``points`` (numba reads module globals as constants)
(P_VR, P_PLATEAU_AUX, P_IREG0, P_VC0, P_I0, P_VA0, P_BUS, P_HFE, P_STEAL_GAIN, P_SLOPE,
 P_V_ON, P_STARTUP_CURRENT, P_BLEED, P_THERMAL_VOLTAGE, P_VBE_LIMITER, P_V_THRESHOLD,
 P_AUX_FLOOR, P_AUX_HOLD, P_OUTPUT_REFLECTED, P_OUTPUT_RATE) = range(20)
# columns of the result read back by cycle_timing
O_T_ON, O_T_OFF, O_VR_START = OUTPUT_NAMES.index("t_on"), OUTPUT_NAMES.index("t_off"), \
    OUTPUT_NAMES.index("vr_start")
# column indices of ``constants`` (numba reads module globals as constants)
(C_RB, C_RLB, C_RS, C_TAU, C_AUX_TAU, C_STORAGE_CONSTANT, C_NODE, C_NB, C_LM, C_VEBO,
 C_INVERSE_GAIN, C_CLAMP_RESISTANCE, C_CB, C_TAU_SLOW, C_RBE, C_OMEGA,
 C_RING_IMPEDANCE, C_RING_DAMPING, C_LIMITER_GAIN, C_ZENER_RESISTANCE,
 C_FILTER_CAPACITANCE, C_AUX_STATE, C_LINEAR_SLOW, C_OUTPUT_RESISTANCE, C_OUTPUT_CAPACITANCE,
 C_RB_ON,
 C_TAU_ON, C_TRANSIT_TIME, C_LOOP_RATE, C_DRIVE_SAG) = range(30)


@njit(cache=True, error_model="numpy")
def _ramp(p, c, t):
    """Primary current of the on-time at ``t`` and its rate [A, A/s].

    The primary loop (winding, saturated switch, sense resistor: ``R`` in
    all) makes the ramp an R L rise from ``i0``: ``i = i0 + s0 (1 -
    e^(-lambda t)) / lambda``, ``lambda = R / L_t``, ``s0 = s - lambda i0``
    with ``s = (V_bus - Vce,sat) / L_t`` the rate at zero current.
    """
    rate = c[C_LOOP_RATE]
    s0 = p[P_SLOPE] - rate * p[P_I0]
    return p[P_I0] - s0 * np.expm1(-rate * t) / rate, s0 * np.exp(-rate * t)


@njit(cache=True, error_model="numpy")
def _ramp_time(p, c, current):
    """Instant the ramp reaches ``current`` (inf where it never does) [s]."""
    rate = c[C_LOOP_RATE]
    s0 = p[P_SLOPE] - rate * p[P_I0]
    u = (current - p[P_I0]) * rate / s0
    if not u > 0.0:
        return 0.0
    if u >= 1.0:
        return np.inf
    return -np.log1p(-u) / rate


@njit(cache=True, error_model="numpy")
def _drive(c, first, second, offset, t):
    """Base-drive current ``A1 e^(-t/tau) + A2 e^(-lambda t) + I_off`` and its
    rate [A, A/s] (``_point``: the drive capacitor charged through ``R_b``
    while the loop's drop takes the winding's and the emitter's share)."""
    tau, rate = c[C_TAU_ON], c[C_LOOP_RATE]
    e1 = first * np.exp(-t / tau)
    e2 = second * np.exp(-rate * t)
    return e1 + e2 + offset, -e1 / tau - rate * e2


@njit(cache=True, error_model="numpy")
def _window(a, b, end, tau_s, mu):
    """``integral over [a, b] of e^(-mu t) e^(-(end - t)/tau_s) dt`` [s]."""
    rate = 1.0 / tau_s - mu
    x = rate * (b - a)
    first = np.exp(-(end - a) / tau_s - mu * a)
    if abs(x) < 0.5:
        return first * (b - a) if x == 0.0 else first * np.expm1(x) / rate
    return (np.exp(-(end - b) / tau_s - mu * b) - first) / rate


@njit(cache=True, error_model="numpy")
def _steal_excess(p, c, first, second, offset, ideal, t):
    """``i_C + I_d - ideal`` (the emitter current the limiter would see with
    the whole drive in the base, less its threshold) and its rate."""
    ramp, ramp_rate = _ramp(p, c, t)
    drive, drive_rate = _drive(c, first, second, offset, t)
    return ramp + drive - ideal, ramp_rate + drive_rate


@njit(cache=True, error_model="numpy")
def _steal_root(p, c, first, second, offset, ideal, low, high):
    """Root of :func:`_steal_excess` between ``low`` and ``high``, where it has
    opposite signs (bracketed Newton) [s]."""
    f_high, _ = _steal_excess(p, c, first, second, offset, ideal, high)
    rising = f_high >= 0.0
    width = high - low
    t = high if rising else low
    for _ in range(STORAGE_ITERATIONS):
        f, df = _steal_excess(p, c, first, second, offset, ideal, t)
        if f == 0.0:
            return t
        if (f >= 0.0) == rising:
            high = t
        else:
            low = t
        step = t - f / df
        new = step if (np.isfinite(step) and low < step < high) else 0.5 * (low + high)
        if abs(new - t) <= STORAGE_TOLERANCE * max(width, 1e-300):
            return new
        t = new
    return 0.5 * (low + high)


@njit(cache=True, error_model="numpy")
def _steal_windows(p, c, first, second, offset, ideal, t_decision):
    """Where the limiter takes drive before the decision (``i_C + I_d`` above
    ``ideal``): an interval from the turn-on and one up to the decision,
    located on a grid of :data:`STEAL_GRID` steps and refined; returns ``(end
    of the first, start of the second)`` [s] (``(0, t_decision)``: none;
    ``(0, 0)``: throughout)."""
    values = np.empty(STEAL_GRID + 1)
    for j in range(STEAL_GRID + 1):
        values[j], _ = _steal_excess(p, c, first, second, offset, ideal,
                                     t_decision * j / STEAL_GRID)
    if values.min() > 0.0:
        return 0.0, 0.0
    first_end = 0.0
    if values[0] > 0.0:
        j = 1
        while values[j] > 0.0:
            j += 1
        first_end = _steal_root(p, c, first, second, offset, ideal,
                                t_decision * (j - 1) / STEAL_GRID, t_decision * j / STEAL_GRID)
    second_start = t_decision
    if values[STEAL_GRID] > 0.0:
        j = STEAL_GRID - 1
        while values[j] > 0.0:
            j -= 1
        second_start = _steal_root(p, c, first, second, offset, ideal,
                                   t_decision * j / STEAL_GRID,
                                   t_decision * (j + 1) / STEAL_GRID)
    return first_end, second_start


@njit(cache=True, error_model="numpy")
def storage_time(p, c, first, second, offset, ideal, t_decision):
    """Storage time after the on-time decision, from the excess charge the
    base current has left in the saturated switch (charge control) [s].

    With ``E`` the excess stored charge (``q - tau_F i_C``) and ``H = hFE i_B -
    i_C - hFE tau_F di_C/dt``, charge control gives ``hFE dE/dt = H - hFE E /
    tau_S`` (Moll 1954; the engine's saturated law).  From the turn-on
    (``E = 0``) to the decision, ``hFE E_d`` is ``H`` convolved with
    ``e^(-t/tau_S)`` (closed form: ``H`` is a sum of a constant and the
    exponentials of the drive, :func:`_drive`, and of the ramp, :func:`_ramp`):
    the drive into the base less, where ``i_C + I_d`` is above ``ideal``
    (:func:`_steal_windows`), what the limiter takes, ``hFE I_lim = kappa
    (i_C + I_d - ideal)``, ``kappa = G / (1 + G/hFE)`` (the sense resistor
    carries ``i_C + i_B``).  After the decision ``H`` falls on at the rate it
    has there, ``r``, and storage ends when ``E`` is gone: ``tau_S (H_d + r u)
    - r tau_S^2 + B e^(-u/tau_S) = 0`` with ``B = hFE E_d - tau_S H_d + r
    tau_S^2`` (bracketed Newton).
    """
    tau_s, tau, rate = c[C_STORAGE_CONSTANT], c[C_TAU_ON], c[C_LOOP_RATE]
    hfe, gain, i0 = p[P_HFE], p[P_STEAL_GAIN], p[P_I0]
    s0 = p[P_SLOPE] - rate * i0
    transit = hfe * c[C_TRANSIT_TIME]
    t_d = t_decision
    kappa = gain / (1.0 + gain / hfe)
    first_end, second_start = _steal_windows(p, c, first, second, offset, ideal, t_d)
    excess = 0.0
    for a, b, steal in ((0.0, first_end, True), (first_end, second_start, False),
                        (second_start, t_d, True)):
        if not b > a:
            continue
        k = kappa if steal else 0.0
        # H = c_1 + c_tau e^(-t/tau) + c_lambda e^(-lambda t)
        c_one = (hfe - k) * offset - (1.0 + k) * (i0 + s0 / rate) + k * ideal
        c_tau = (hfe - k) * first
        c_lambda = (hfe - k) * second + (1.0 + k) * s0 / rate - transit * s0
        excess += (c_one * _window(a, b, t_d, tau_s, 0.0)
                   + c_tau * _window(a, b, t_d, tau_s, 1.0 / tau)
                   + c_lambda * _window(a, b, t_d, tau_s, rate))
    k = kappa if second_start < t_d else 0.0
    drive, drive_rate = _drive(c, first, second, offset, t_d)
    ramp, ramp_rate = _ramp(p, c, t_d)
    held = (hfe - k) * drive - (1.0 + k) * ramp + k * ideal - transit * ramp_rate
    rate = (hfe - k) * drive_rate - (1.0 + k - transit * rate) * ramp_rate
    if not excess > 0.0 or not rate < 0.0:
        return 0.0
    start = excess - tau_s * held + rate * tau_s * tau_s
    low = 0.0
    high = max(excess / (-tau_s * rate), tau_s - held / rate, 0.0)
    u = high if start < 0.0 else 0.0
    for _ in range(STORAGE_ITERATIONS):
        memory = start * np.exp(-u / tau_s)
        value = tau_s * (held + rate * u) - rate * tau_s * tau_s + memory
        if value == 0.0:
            return u
        if value > 0.0:
            low = u
        else:
            high = u
        step = u - value / (tau_s * rate - memory / tau_s)
        new = step if (np.isfinite(step) and low < step < high) else 0.5 * (low + high)
        if abs(new - u) <= STORAGE_TOLERANCE * max(high, 1e-300):
            return new
        u = new
    return u


@njit(cache=True, error_model="numpy")
def _plateau_constants(lm, resistance, capacitance, peak, vr):
    """``alpha``, ``beta^2`` and ``a`` of the plateau's series RLC
    (:func:`rcc.flyback.demagnetization_time`)."""
    alpha = resistance / (2.0 * lm)
    return alpha, alpha * alpha - 1.0 / (lm * capacitance), vr / lm + alpha * peak


@njit(cache=True, error_model="numpy")
def demagnetization_time(lm, resistance, capacitance, peak, vr):
    """:func:`rcc.flyback.demagnetization_time` with the output path's
    resistance and capacitance for one point [s]."""
    alpha, beta_squared, a = _plateau_constants(lm, resistance, capacitance, peak, vr)
    y = peak / a
    z = beta_squared * y * y
    if z > 1e-6:
        root = np.sqrt(z)
        ratio = np.arctanh(min(root, 1.0)) / root
    elif z < -1e-6:
        root = np.sqrt(-z)
        ratio = np.arctan(root) / root
    else:
        ratio = 1.0 + z / 3.0 + z * z / 5.0 + z * z * z / 7.0
    return y * ratio


@njit(cache=True, error_model="numpy")
def demagnetizing_current(lm, resistance, capacitance, peak, vr, t):
    """:func:`rcc.flyback.demagnetizing_current` for one point [A]."""
    alpha, beta_squared, a = _plateau_constants(lm, resistance, capacitance, peak, vr)
    u = beta_squared * t * t
    if u > 1e-8:
        root = np.sqrt(u)
        first, second = np.cosh(root), t * np.sinh(root) / root
    elif u < -1e-8:
        root = np.sqrt(-u)
        first, second = np.cos(root), t * np.sin(root) / root
    else:
        first, second = 1.0 + u / 2.0 + u * u / 24.0, t * (1.0 + u / 6.0 + u * u / 120.0)
    return np.exp(-alpha * t) * (peak * first - a * second)


@njit(cache=True, error_model="numpy")
def _slow(c, startup_current, vc, winding, duration):
    """``_Cycle._slow``: the drive capacitor on the slow path after ``duration`` [V]."""
    if c[C_LINEAR_SLOW] > 0.0:
        return vc - startup_current * duration / c[C_CB]
    target = winding - startup_current * c[C_RBE]
    return target + (vc - target) * np.exp(-duration / c[C_TAU_SLOW])


@njit(cache=True, error_model="numpy")
def _slow_cross(c, startup_current, vc, winding, level):
    """``_Cycle._slow_cross``: time to fall to ``level`` on the slow path [s]."""
    if c[C_LINEAR_SLOW] > 0.0:
        current = max(startup_current, 1e-30)
        return 0.0 if vc <= level else c[C_CB] * (vc - level) / current
    target = winding - startup_current * c[C_RBE]
    ratio = (vc - target) / (level - target)
    if vc <= level:
        return 0.0
    if level > target and ratio > 0.0:
        return c[C_TAU_SLOW] * np.log(ratio)
    return np.inf


@njit(cache=True, error_model="numpy")
def _knee(c, drop, winding):
    """Drive-capacitor voltage where base-emitter breakdown stops conducting [V]."""
    return winding + c[C_VEBO] + c[C_RB] * max(c[C_VEBO] - drop, 0.0) \
        * c[C_INVERSE_GAIN] / c[C_RLB]


@njit(cache=True, error_model="numpy")
def _junction_stage(c, drop, startup_current, winding):
    """The junction path (2) with the slow path (3) in parallel: asymptote
    [V] and time constant [s] of the drive capacitor while ``v_C`` is above the
    junction's asymptote ``winding + drop``."""
    g_junction = 1.0 / c[C_CLAMP_RESISTANCE]
    junction = winding + drop
    if c[C_LINEAR_SLOW] > 0.0:
        # the slow path is the start-up current alone
        return junction - startup_current / g_junction, c[C_CB] / g_junction
    g_slow = c[C_CB] / c[C_TAU_SLOW]
    target = winding - startup_current * c[C_RBE]
    return ((junction * g_junction + target * g_slow) / (g_junction + g_slow),
            c[C_CB] / (g_junction + g_slow))


@njit(cache=True, error_model="numpy")
def _junction_end(asymptote, tau2, start, junction):
    """Time for the junction stage to bring ``v_C`` from ``start`` down to the
    junction's asymptote, where its current ends (inf if it never does) [s]."""
    if start <= junction:
        return 0.0
    if asymptote >= junction:
        return np.inf
    return tau2 * np.log((start - asymptote) / (junction - asymptote))


@njit(cache=True, error_model="numpy")
def reset(c, drop, startup_current, vc, winding, duration):
    """``_Cycle._reset``: the drive capacitor after ``duration`` with the winding at
    ``winding`` [V]."""
    knee = _knee(c, drop, winding)
    floor = winding + c[C_VEBO]
    t1 = c[C_TAU] * np.log(max((vc - floor) / max(knee - floor, 1e-300), 1.0)) \
        if vc > knee else 0.0
    if duration < t1:
        return floor + (vc - floor) * np.exp(-min(duration, t1) / c[C_TAU])
    start2 = knee if vc > knee else vc
    left = max(duration - t1, 0.0)
    junction = winding + drop
    asymptote, tau2 = _junction_stage(c, drop, startup_current, winding)
    t2 = _junction_end(asymptote, tau2, start2, junction)
    if left < t2:
        return asymptote + (start2 - asymptote) * np.exp(-left / tau2)
    return _slow(c, startup_current, min(start2, junction), winding, left - t2)


@njit(cache=True, error_model="numpy")
def reset_cross(c, drop, startup_current, vc, winding, level):
    """``_Cycle._reset_cross``: time for the drive capacitor to fall to ``level``
    (inf if never) [s]."""
    if vc <= level:
        return 0.0
    knee = _knee(c, drop, winding)
    floor = winding + c[C_VEBO]
    junction = winding + drop
    if level >= knee:
        t = c[C_TAU] * np.log((vc - floor) / max(level - floor, 1e-300))
    else:
        t_knee = c[C_TAU] * np.log((vc - floor) / max(knee - floor, 1e-300)) \
            if vc > knee else 0.0
        start2 = min(vc, knee)
        asymptote, tau2 = _junction_stage(c, drop, startup_current, winding)
        if level >= junction:
            t = t_knee + (tau2 * np.log((start2 - asymptote) / (level - asymptote))
                          if level > asymptote else np.inf)
        else:
            t = t_knee + _junction_end(asymptote, tau2, start2, junction) \
                + _slow_cross(c, startup_current, min(start2, junction), winding, level)
    return np.inf if np.isnan(t) else t


@njit(cache=True, error_model="numpy")
def ring_after_clamp(c, drop, vc, winding, vr):
    """``_Cycle._ring_after_clamp``: amplitude of the free ring once the base
    clamps let go [V, primary]."""
    nb, omega = c[C_NB], c[C_OMEGA]
    x_release = max(vc - (winding + drop), 0.0) / nb
    if not x_release > 0.0:
        return vr
    zeta = 0.5 * nb**2 / c[C_CLAMP_RESISTANCE] * c[C_RING_IMPEDANCE]
    # (the two real roots merge at zeta = 1: keep off it by 1e-7)
    if abs(zeta - 1.0) < 1e-7:
        zeta = 1.0 + 1e-7
    root = np.sqrt(complex(zeta) ** 2 - 1.0)
    s1, s2 = omega * (-zeta + root), omega * (-zeta - root)
    c1, c2 = -vr * s2 / (s2 - s1), vr * s1 / (s2 - s1)
    if zeta < 1.0:
        t_end = np.pi / (omega * np.sqrt(abs(1.0 - zeta**2)))
    else:
        t_end = 40.0 / (omega * (zeta - np.sqrt(max(zeta**2 - 1.0, 0.0))))
    if not vr + (c1 * np.exp(s1 * t_end) + c2 * np.exp(s2 * t_end)).real >= x_release:
        return 0.0
    low, high = 0.0, t_end
    t = min(max(np.arccos(min(max(1.0 - x_release / vr, -1.0), 1.0)) / omega, 0.0), t_end)
    for _ in range(RING_ITERATIONS):
        e1, e2 = c1 * np.exp(s1 * t), c2 * np.exp(s2 * t)
        gap = vr + (e1 + e2).real - x_release
        if gap < 0.0:
            low = t
        else:
            high = t
        step = t - gap / (s1 * e1 + s2 * e2).real
        t = step if low <= step <= high else 0.5 * (low + high)
    speed = (c1 * s1 * np.exp(s1 * t) + c2 * s2 * np.exp(s2 * t)).real
    return np.hypot(x_release - vr, speed / omega)


@njit(cache=True, error_model="numpy")
def _aux_decay(c, floor, va, duration):
    """``_Cycle._aux_decay``: the auxiliary capacitor drained through the zener
    path for ``duration`` [V]."""
    if c[C_AUX_STATE] > 0.0 and va > floor:
        return floor + (va - floor) * np.exp(-duration / c[C_AUX_TAU])
    return va


@njit(cache=True, error_model="numpy")
def _aux_hold_decay(c, floor, drop, va, t_inverse, duration):
    """The auxiliary capacitor drained for ``duration`` after
    demagnetization: towards ``floor - drop/2`` while the ring still drives
    the limiter's collector-base junction (``t < t_inverse``), towards
    ``floor`` after that [V] (``_Cycle.evaluate``, regulation by dead time)."""
    first = min(duration, t_inverse)
    va = _aux_decay(c, floor - 0.5 * drop, va, first)
    return _aux_decay(c, floor, va, duration - first)


@njit(cache=True, error_model="numpy")
def _hold_release(c, floor, drop, hold, va, t_inverse):
    """Time after demagnetization at which the auxiliary capacitor, drained as
    in :func:`_aux_hold_decay`, reaches the limiter's hold level ``hold``
    (0 if it starts below) [s]."""
    if not va > hold:
        return 0.0
    a_tau = c[C_AUX_TAU]
    low = floor - 0.5 * drop
    t = a_tau * np.log((va - low) / (hold - low))
    if t <= t_inverse:
        return t
    va = _aux_decay(c, low, va, t_inverse)
    return t_inverse + a_tau * np.log(max(va - floor, 1e-300) / (hold - floor))


@njit(cache=True, error_model="numpy")
def _excess(p, c, first, second, offset, reg_drop, t):
    """Ramp minus the current the base can hold at ``t`` [A], and its rate [A/s]."""
    a_tau, rs = c[C_AUX_TAU], c[C_RS]
    gain, hfe, vt = p[P_STEAL_GAIN], p[P_HFE], p[P_THERMAL_VOLTAGE]
    value, value_rate = _drive(c, first, second, offset, t)
    drive = max(value, 1e-12)
    own = hfe * value
    own_rate = hfe * value_rate
    aux_decay = reg_drop * np.exp(-t / a_tau)
    if drive > 1e-3:
        lift = vt * np.log(drive / 1e-3)
        lift_rate = vt * value_rate / drive
    else:
        lift = 0.0
        lift_rate = 0.0
    ideal = (p[P_VBE_LIMITER] + lift) / rs - aux_decay
    # the sense resistor carries the emitter current, I_C (1 + 1/hFE) where
    # the switch leaves saturation (the limiter has taken the rest of the
    # drive): hFE I_B = I_C + G (I_C (1 + 1/hFE) - I_t)
    sensed = 1.0 + gain * (1.0 + 1.0 / hfe)
    shared = (own + gain * ideal) / sensed
    shared_rate = (own_rate + gain * (aux_decay / a_tau + lift_rate / rs)) / sensed
    ramp, ramp_rate = _ramp(p, c, t)
    if shared < own:
        return ramp - shared, ramp_rate - shared_rate
    return ramp - own, ramp_rate - own_rate


@njit(cache=True, error_model="numpy")
def _decision(p, c, first, second, offset, reg_drop, high):
    """First root of the excess on ``[0, high]`` by safeguarded Newton [s].

    The excess is negative at 0 and not negative at ``high`` (where it is
    already non-negative at 0 the result is 0).  A Newton step that leaves
    the bracket is replaced by bisection and the bracket shrinks on every
    step, so convergence is guaranteed; the loop stops when a step is below
    :data:`DECISION_TOLERANCE` relative, not after a fixed count.
    """
    low = 0.0
    value, _ = _excess(p, c, first, second, offset, reg_drop, low)
    if value >= 0.0 or not high > low:
        return low if value >= 0.0 else high
    t = high
    for _ in range(DECISION_ITERATIONS):
        f, df = _excess(p, c, first, second, offset, reg_drop, t)
        if f >= 0.0:
            high = t
        else:
            low = t
        step = t - f / df
        new = step if (np.isfinite(step) and low < step < high) else 0.5 * (low + high)
        moved = abs(new - t)
        if f == 0.0:
            return t
        if moved <= DECISION_TOLERANCE * max(abs(new), 1e-300) \
                or high - low <= DECISION_TOLERANCE * abs(high):
            return min(max(new, low), high)
        t = new
    return high


@njit(cache=True, error_model="numpy")
def _plateau_reset(c, p, plateau_aux, drop):
    """Constants and junction drop of the inverse-mode limiter reset path
    while the flyback plateau holds the auxiliary capacitor at
    ``plateau_aux``: the limiter's base is fed by ``R_lb`` from the emitter and
    by the zener path from ``plateau_aux - Vz`` through ``R_z``; their
    Thevenin source ``V_th`` lowers the junction's asymptote by ``V_th`` and
    their parallel resistance ``R_th`` replaces ``R_lb`` (``_Cycle.evaluate``,
    drive-capacitor reset)."""
    rlb, rz = c[C_RLB], c[C_ZENER_RESISTANCE]
    zener = p[P_AUX_FLOOR] - drop
    if not plateau_aux > zener:
        # the zener conducts only while the limiter's base is below
        # V_ap - Vz < 0; near the reset's end that base rises to about the
        # emitter, so the path is taken as off (it is off at the asymptote)
        return c, drop
    source = (plateau_aux - zener) * rlb / (rlb + rz)
    plateau = c.copy()
    plateau[C_RLB] = rlb * rz / (rlb + rz)
    plateau[C_CLAMP_RESISTANCE] = c[C_RB] + plateau[C_RLB] / c[C_INVERSE_GAIN]
    return plateau, drop - source


@njit(cache=True, error_model="numpy")
def _point(p, c, out):
    """One switching cycle of one point: ``rcc.cycle._Cycle.evaluate``'s timing."""
    # the base current of the on-time and the turn-off also crosses the
    # switch's base spreading resistance: R_b + r_bb and its R C
    rb, tau, rlb, rs = c[C_RB_ON], c[C_TAU_ON], c[C_RLB], c[C_RS]
    nb, lm, a_tau = c[C_NB], c[C_LM], c[C_AUX_TAU]
    aux_state = c[C_AUX_STATE] > 0.0
    vr, plateau_aux, ireg0 = p[P_VR], p[P_PLATEAU_AUX], p[P_IREG0]
    vc0, i0, va0 = p[P_VC0], p[P_I0], p[P_VA0]
    bus, hfe, slope = p[P_BUS], p[P_HFE], p[P_SLOPE]
    startup, drop, vt = p[P_STARTUP_CURRENT], p[P_VBE_LIMITER], p[P_THERMAL_VOLTAGE]
    v_threshold = p[P_V_THRESHOLD]
    # ---- on-time decision
    # the primary loop's resistance makes the ramp an R L rise (_ramp); the
    # base loop sees the feedback winding less its share of the loop's drop
    # and the emitter on the sense resistor, V_on - rho i(t) (rho =
    # drive_sag), so the drive capacitor charges through R_b towards a target
    # that falls with the ramp: I_d = I_0 e^(-t/tau) - C_b rho s0 (e^(-lambda t)
    # - e^(-t/tau)) / (1 - lambda tau), I_0 = (V_on - rho i0 - v_C0) / R_b
    rate = c[C_LOOP_RATE]
    x = 1.0 - rate * tau
    if abs(x) < RESONANCE_GUARD:
        x = RESONANCE_GUARD if x >= 0.0 else -RESONANCE_GUARD
    s0 = slope - rate * i0
    sag = c[C_DRIVE_SAG]
    second = -c[C_CB] * sag * s0 / x
    open_drive = (p[P_V_ON] - sag * i0 - vc0) / rb
    first = max(open_drive, 0.0) - second
    offset = startup - p[P_BLEED]
    reg_drop = rlb * ireg0 / rs
    # the drive never exceeds its start: the decision comes before the ramp
    # reaches hFE times that (or where the drive has decayed, if the ramp's
    # asymptote lies below it)
    t_high = _ramp_time(p, c, hfe * max(first + second + offset, 0.0))
    if not np.isfinite(t_high):
        t_high = DRIVE_DECAYS * max(tau, 1.0 / rate)
    t_decision = _decision(p, c, first, second, offset, reg_drop, t_high)
    i_decision, _ = _ramp(p, c, t_decision)
    base_now, _ = _drive(c, first, second, offset, t_decision)
    drive = max(base_now, 1e-12)
    lift = vt * np.log(drive / 1e-3) if drive > 1e-3 else 0.0
    ideal = (drop + lift - rlb * ireg0 * np.exp(-t_decision / a_tau)) / rs
    ideal_trip = ideal * hfe / (hfe + 1.0)
    base_decision = max(base_now, 0.0)
    drive_ends = hfe * base_decision <= ideal_trip
    ireg = ireg0 * np.exp(-t_decision / a_tau)
    itrip = max(ideal_trip, 0.0)
    # storage: the excess charge the base current left, drained by the base
    # current falling on after the decision (the limiter's steal grows with
    # the ramp; a drive-ended on-time has only the drive's decay)
    storage = storage_time(p, c, first, second, offset, ideal, t_decision)
    t_switch = t_decision + storage
    peak, slope_end = _ramp(p, c, t_switch)
    # ---- turn-off transition
    node = c[C_NODE]
    droop = (hfe if drive_ends else 1.0 / c[C_LIMITER_GAIN]) * nb / rb
    rise = node / droop
    t_rise = rise * np.log1p(droop**2 * bus / (slope_end * node))
    v_reverse = min(bus, peak / droop)
    crossing = rise * (peak * v_reverse - 0.5 * droop * v_reverse**2)
    left = max(peak - droop * bus, 0.0)
    base_end, _ = _drive(c, first, second, offset, t_switch)
    drive_capability = hfe * max(base_end, 0.0)
    peak = peak + slope_end * max(t_rise - rise, 0.0)
    t_on = t_switch + t_rise
    on_end = 0.0 if drive_ends else (2.0 if ireg > 0.0 else 1.0)
    # the drive capacitor: the target less the drop across R_b (its own
    # current, without the start-up current's offset)
    ramp_end, _ = _ramp(p, c, t_on)
    capacitor, _ = _drive(c, open_drive - second, second, 0.0, t_on)
    vc_end = p[P_V_ON] - sag * ramp_end - rb * capacitor
    charge_base = first * tau * -np.expm1(-t_on / tau) \
        + second * -np.expm1(-rate * t_on) / rate + offset * t_on
    # ---- off-time: flyback plateau
    # while the secondary current flows the output path's resistance and the
    # output capacitor's rise (R' and C' referred to the primary) add R' i +
    # q/C' to the plateau: demagnetization takes demagnetization_time (a
    # series RLC discharge), the drive reset sees the plateau's mean L_m I_pk
    # / t_demag; the ring after it starts from the plateau without current.
    # The auxiliary capacitor keeps the plateau without the drop
    # (notes/cycle_model.md: its rectifier delivers the zener's charge over
    # the plateau, not at its start)
    t_demag = demagnetization_time(lm, c[C_OUTPUT_RESISTANCE], c[C_OUTPUT_CAPACITANCE],
                                   peak, vr)
    winding_plateau = -nb * (lm * peak / t_demag if t_demag > 0.0 else vr)
    winding_end = -nb * vr
    # during the plateau the regulation zener also feeds the limiter's base
    # (the auxiliary rectifier holds C_a at the plateau): the junction reset
    # path sees the Thevenin source of R_lb (to the emitter) and the zener path
    plateau, drop_plateau = _plateau_reset(c, p, plateau_aux, drop) if aux_state else (c, drop)
    vc_demag = reset(plateau, drop_plateau, startup, vc_end, winding_plateau, t_demag)
    if aux_state:
        floor, hold = p[P_AUX_FLOOR], p[P_AUX_HOLD]
        va_on_end = _aux_decay(c, floor, va0, t_on)
        va_plateau = max(plateau_aux, _aux_decay(c, floor, va_on_end, t_demag))
        aux_charge = c[C_FILTER_CAPACITANCE] * max(plateau_aux - va_on_end, 0.0)
        if plateau_aux >= va_on_end:
            aux_charge += max(plateau_aux - floor, 0.0) / c[C_ZENER_RESISTANCE] * t_demag
        held_plateau = plateau_aux > hold
    else:
        floor = 0.0
        hold = 0.0
        va_plateau = 0.0
        aux_charge = 0.0
        held_plateau = False
    limit_plateau = v_threshold + winding_plateau
    t_cross = reset_cross(plateau, drop_plateau, startup, vc_end, winding_plateau,
                          limit_plateau)
    ccm = (t_cross < t_demag) and not held_plateau
    # ---- ring after demagnetization
    need = vc_demag - v_threshold
    free = ring_after_clamp(plateau, drop_plateau, vc_demag, winding_end, vr)
    ring_peak = nb * min(free * c[C_RING_DAMPING], bus)
    ring_on = need <= ring_peak
    phase = np.arccos(min(max(-need / (nb * vr), -1.0), 1.0))
    omega = c[C_OMEGA]
    t_ring = phase / omega
    # the ring while the regulation path holds the limiter on: its amplitude
    # decays at ``decay`` (core loss, ``ring_damping`` per half period, and the
    # limiter's clamps, zeta_hold); while its negative swing pulls the base a
    # junction drop below the emitter (until t_inverse), the limiter's
    # collector-base junction conducts and pulls the limiter's base to about
    # the emitter for half of each period, so the zener path drains the
    # auxiliary capacitor towards Vz (not Vz + Vbe_lim) half of the time
    zeta_hold = 0.25 * nb**2 * c[C_RING_IMPEDANCE] * (1.0 / c[C_RB] + 1.0 / c[C_CLAMP_RESISTANCE])
    decay = zeta_hold * omega - omega / np.pi * np.log(c[C_RING_DAMPING])
    swing = nb * free
    reach = drop - vc_demag
    if not reach > 0.0:
        t_inverse = np.inf
    elif swing > reach:
        t_inverse = np.log(swing / reach) / decay
    else:
        t_inverse = 0.0
    t_release = _hold_release(c, floor, drop, hold, va_plateau, t_inverse) \
        if aux_state else 0.0
    held = t_release > (t_ring if ring_on else 0.0)
    ring_left = swing * np.exp(-decay * t_release)
    on_release = held and need <= min(ring_left, ring_peak)
    # ---- waiting for the slow path (drive-capacitor timing)
    t_wait = reset_cross(c, drop, startup, vc_demag, 0.0, v_threshold)
    restarts = ccm or ring_on or np.isfinite(t_wait) or on_release
    if not np.isfinite(t_wait):
        t_wait = 0.0
    if ring_on and not held:
        t_after = t_ring
    elif on_release:
        t_after = t_release
    else:
        t_after = max(t_wait, t_release)
    t_off = t_cross if ccm else t_demag + t_after
    ring_turn = ring_on and not held and not ccm
    if ccm:
        residual = max(demagnetizing_current(lm, c[C_OUTPUT_RESISTANCE],
                                             c[C_OUTPUT_CAPACITANCE], peak, vr, t_cross), 0.0)
    elif ring_turn:
        residual = -(vr / c[C_RING_IMPEDANCE] * np.sin(phase)
                     * c[C_RING_DAMPING] ** (phase / np.pi))
    else:
        residual = 0.0
    if t_release > t_wait or on_release:
        vc_after = reset(c, drop, startup, vc_demag, 0.0, t_release)
    else:
        vc_after = v_threshold
    if ccm:
        vc_next = limit_plateau
    elif ring_turn:
        vc_next = vc_demag
    else:
        vc_next = min(vc_after, vc_demag)
    va_next = _aux_hold_decay(c, floor, drop, va_plateau, t_inverse, t_after) \
        if aux_state else 0.0
    mode = 2.0 if ccm else (1.0 if ring_turn else 0.0)
    if ccm or ring_turn:
        off_end = 0.0
    elif held and (t_release >= t_wait or on_release):
        off_end = 2.0
    else:
        off_end = 1.0
    values = (ireg, itrip, peak, t_on, t_off, t_rise, on_end, off_end, mode, vc_next,
              va_next, residual, 1.0 if restarts else 0.0, drive_capability, crossing, left, vc_end,
              vc_demag, 1.0 if ccm else 0.0, t_cross, t_demag, aux_charge, phase, 1.0 if ring_on else 0.0,
              charge_base, limit_plateau, vr)
    for k in range(len(values)):
        out[k] = values[k]


@njit(cache=True, error_model="numpy")
def cycle_timing(points, constants):
    """Timing of one switching cycle at every point.

    Parameters
    ----------
    points : ndarray, shape (n, len(POINT_NAMES))
        Per-point inputs, columns as :data:`POINT_NAMES` [SI].
    constants : ndarray, shape (len(CONSTANT_NAMES),)
        Design constants, as :data:`CONSTANT_NAMES` [SI].

    Returns
    -------
    ndarray, shape (n, len(OUTPUT_NAMES))
        Outputs, columns as :data:`OUTPUT_NAMES` [SI; flags and codes as 0/1/2].
    """
    out = np.empty((points.shape[0], len(OUTPUT_NAMES)))
    for n in range(points.shape[0]):
        p = points[n]
        _point(p, constants, out[n])
        if p[P_OUTPUT_RATE] > 0.0:
            # the output capacitor at the plateau's start sits below the mean
            # output by the ripple: the sawtooth of a linear load (decay rate
            # k = I_o / (V_o C_o)) over the cycle time T starts at V_o u /
            # (e^u - 1), u = k T; the cycle is taken again from that plateau
            u = p[P_OUTPUT_RATE] * (out[n, O_T_ON] + out[n, O_T_OFF])
            start = u / np.expm1(u) if u < 700.0 else 0.0
            shifted = p.copy()
            shifted[P_VR] = max(p[P_VR] - p[P_OUTPUT_REFLECTED] * (1.0 - start), 1e-3)
            _point(shifted, constants, out[n])
    return out


@njit(cache=True, error_model="numpy")
def ring_after_clamp_many(constants, drop, vc, winding, vr):
    """:func:`ring_after_clamp` over flat arrays of equal length [V]."""
    out = np.empty(vc.shape[0])
    for n in range(vc.shape[0]):
        out[n] = ring_after_clamp(constants, drop[n], vc[n], winding[n], vr[n])
    return out
