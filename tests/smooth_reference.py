"""Independent smooth-device reference of the free-running flyback.

The circuit of ``notes/circuit.md`` written once more, separately from the
engine (:mod:`rcc.engine` is not imported: no topology, device or event
code is shared), as a plain ordinary differential equation with smooth
device laws, integrated by scipy's stiff Radau IIA solver at tight
tolerance.  It is the oracle the engine is tested against
(``tests/test_engine_vs_smooth.py``); the derivation is in
``notes/smooth_reference.md``.  Only the design's data are read from
:mod:`rcc` (:class:`rcc.design.Design`, and the temperature laws of
:mod:`rcc.devices`, which are the design's data, not engine code).

State equations (KCL at every node with a capacitance, KVL round every
inductor; derivation in ``notes/smooth_reference.md``)::

    L_lk di_lk/dt   = V_bus - R_p i_lk - v_m - v_c
    L_m  di_m/dt    = v_m
    M(v) d[v_c, v_b, v_e, v_l, (v_o)]/dt = I(v)            (nodal charge balance)
    C_d  dv_drive/dt = i_f = (r_f v_m - v_drive - v_b) / R_d
    C_out dv_oc/dt  = (v_o - v_oc) / R_esr     (= i_rect - i_load when R_esr = 0)
    C_aux dv_a/dt   = i_aux - i_zener                       (feedback-winding regulation)
    C_k  dv_k/dt    = i_clamp_diode - v_k / R_k             (RCD clamp)

``v_m`` (the magnetizing-branch voltage, node m to the collector) is the one
algebraic unknown: KCL at node m,

    i_lk - i_m - v_m / R_core - sum_k r_k i_k(v_m) = 0,

with ``r_k`` the voltage ratio of winding ``k`` (``r_f = s Nf/Np`` feedback,
``-Ns/Np`` output, ``-Nf/Np`` auxiliary) and ``i_k`` the current it
delivers (the ideal transformer's power balance gives the primary current
``sum_k r_k i_k``).  Every ``i_k`` is non-decreasing in its winding voltage,
so the left side is strictly decreasing in ``v_m``: it has one root, found by
Newton's method safeguarded with bisection inside the RHS (bracket in
``_magnetizing``).  Because KCL at m makes the current into the
collector node equal to ``i_lk``, node c sees ``i_lk`` and the collector
currents of the switch and the clamp.

``M(v)`` is the incremental capacitance matrix of the nodes collector c,
base terminal b, emitter e, limiter base l, internal base b' (and the output
terminal o when the ESR is not zero): the winding capacitance c-ground, the
switch's output capacitance as a real collector-base capacitor ``C_bc``
(c-b'), the switch's diffusion charges ``tau_F I_F`` (b'-e) and ``tau_R I_R``
(b'-c), the limiter's junction
and diffusion charges (l-ground, l-b), and small parasitic capacitors that
make the emitter, base-terminal and output-terminal nodes dynamic: ``C_e`` = 100 pF
emitter-ground (time constant ``R_s C_e`` = 0.16 ns at 1.6 ohm; it takes
``C_e dv_e/dt`` of about 0.2 mA at the fastest emitter slew, against
hundreds of mA through the sense resistor), ``C_b`` = 100 pF base
terminal-ground (``R_B C_b`` = 0.2 ns) and ``C_o`` = 10 nF at the output
terminal, shunted by the ESR (0.1 ohm x 10 nF = 1 ns; against a reflected
leakage of about 1 uH it rings with quality factor ``R_esr sqrt(C_o/L)``
below 0.02, i.e. not at all).  Measured on the standby case at 85 V (two
cycles from a common state): with both at a tenth of these values the
turn-on instants move by 0.2 ns and the peak currents by under 1e-5
relative; so do they between ``rtol`` 1e-5, 1e-6 and 1e-8.

Device laws (every choice and its source)
-----------------------------------------
*Switch Q1*: Ebers-Moll transport model [1]_ with charge control (the
charge formulation of Gummel & Poon [2]_ without base-width modulation or
high injection)::

    I_F = I_S (exp(v_be / V_T) - 1),  I_R = I_S (exp(v_bc / V_T) - 1)
    i_C = I_F - I_R (1 + 1/beta_R),   i_B = I_F/beta_F + I_R/beta_R
    q_BE = tau_F I_F,  q_BC = tau_R I_R  (+ C_bc v_bc depletion)

``beta_F`` is the design's hFE at the temperature (:func:`rcc.devices.current_gain`);
``I_S`` is fixed by ``Vbe(T)`` (:func:`rcc.devices.base_emitter_voltage`)
at the trip current ``limiter.vbe / limiter.sense_resistance``, as
``notes/circuit.md`` states for the start-up analysis; emission coefficient 1
(ideal junction, Shockley [3]_).  ``tau_F = 1 / (2 pi fT)``: Gray et al.
[5]_ sec. 1.4.8 give ``1/(2 pi fT) = tau_F + (C_je + C_mu) / g_m``, whose
second part is negligible at the hundreds of mA of the on-time.
``beta_R`` = 1 (inverse gain of a power transistor, of order 1  # from memory).

Storage: with ``i_C`` held by the circuit and the base pulled at ``-I_B2``,
the Ebers-Moll charge equations give ``dI_R/dt = -(I_B2 + I_C/beta_F + k I_R)
/ (k tau_S)`` with ``k = (1 + 1/beta_R)/beta_F + 1/beta_R`` and the storage
time constant ``tau_S = (tau_F (1 + 1/beta_R) + tau_R) / k``, so the
storage time is ``t_s = tau_S ln((I_B1 + I_B2)/(I_B2 + I_C/beta_F))``, the
charge-control result of Moll [4]_.  ``switch.storage_time`` is read as the
datasheet storage time at ``I_B1 = I_B2`` with hard overdrive, so
``tau_S = t_s / ln 2`` and ``tau_R = k tau_S - tau_F (1 + 1/beta_R)``
(floored at zero).

*Base-emitter reverse breakdown* at ``switch.vebo`` (the datasheet value at
1 mA  # common practice) with a breakdown knee of 60 mV per decade of current
(Sze [6]_ ch. 2: avalanche/zener knees of silicon junctions; 60 mV/decade is a
fair default  # common practice).

*Limiter Q2*: Ebers-Moll as Q1 with ``limiter.hfe``, ``beta_R`` = 1, ``I_S``
from ``limiter.vbe(T)`` at 1 mA (``notes/circuit.md``); ``tau_F`` = 0.5 ns
(a small-signal switching transistor with fT of about 300 MHz  # from memory),
``tau_R`` = 20 ns (storage of about 100-200 ns at 10:1 overdrive in such
parts  # from memory), emitter-base depletion 10 pF, collector-base 4 pF
(# from memory, small-signal switching transistors).  Its collector sits on
the switch base, so its collector-base junction is the reset path 2 of
``notes/circuit.md`` with no extra element.

*Diodes*: Shockley law ``i = I_S (exp(u / (n V_T)) - 1)`` [3]_ in series with
a resistance; ``I_S`` from the design's forward drop at a reference
current.  Rectifiers: ``n`` = 1.5 (between the ideal 1 and the
high-injection 2, Sze [6]_ ch. 2  # from memory).  Output rectifier: drop at 1 A,
50 mohm; auxiliary rectifier: drop at 10 mA, 1 ohm; RCD clamp diode: 1.0 V
at 1 A, 0.5 ohm (# common practice: fast-recovery rectifiers of this class).
The current of a junction in series with a resistance is solved in closed
form with the Lambert W function (:func:`series_junction_current`).

*Zeners*: reverse breakdown ``i = I_zt exp((u - V_z) / V_k)`` with
``V_k ln 10`` = 60 mV per decade (Sze [6]_  # common practice), ``V_z`` the
design's zener voltage at ``I_zt`` = 5 mA (small-signal zener test current
# common practice); regulation zener in series with
``regulation.series_resistance``; clamp zener at ``clamp.voltage`` (at 1 mA)
with 2 ohm (# common practice for transient-voltage suppressors).  The
forward direction of the regulation zener is left out (it could conduct
only while the auxiliary capacitor is below the limiter base, at the very
start, through ``R_series``).

*Optocoupler*: LED as a Shockley diode with ``n`` = 2 (# from memory),
``regulation.led_drop`` at 1 mA, in series with ``regulation.series_resistance``
and an ideal reference ``regulation.reference_voltage``, drawn from the
output terminal; phototransistor an ideal current ``ctr * I_LED`` into the
limiter base (``notes/circuit.md``).

*Loads* (the law every model of the project is given: a load is a
resistance through the origin at a collapsed output): resistance ``v/R``;
constant current ``I u / (1 + u^n)^(1/n)`` with ``u = v/V_k``, ``V_k`` =
20 % of the target output (a resistance below the knee, the current above
it); constant power ``(P/V_p) u / (1 + u^(2n))^(1/n)`` with ``u = v/V_p``,
``V_p`` = 25 % of the target (a resistance below, ``P/v`` above).  ``n`` =
16 rounds the corner: the law is within 4.4 % of the sharp one at the
corner and within 1e-6 beyond a factor 2 from it.

*Base spreading resistance* ``R_B`` = :data:`BASE_SPREADING_RESISTANCE`
between the base terminal (drive, start-up resistor, base-emitter resistor,
limiter collector) and the internal base b' that the junctions, their charges
and the breakdown see (Gummel & Poon [2]_); the terminal carries
:data:`BASE_TERMINAL_CAPACITANCE` to ground so that it is a dynamic node.

Left out, with the reason: the switch's collector spreading
resistance and its emitter-base depletion capacitance (the saturation
voltage of this Ebers-Moll switch is 0.05-0.15 V instead of ``vce_sat``,
which changes ``di/dt`` by under ``0.2 V / V_bus``); the forward recovery
and reverse recovery of the rectifiers.

References
----------
.. [1] J. J. Ebers, J. L. Moll, "Large-signal behavior of junction
   transistors", Proc. IRE 42(12), 1761-1772, 1954.
.. [2] H. K. Gummel, H. C. Poon, "An integral charge control model of
   bipolar transistors", Bell Syst. Tech. J. 49(5), 827-852, 1970.
.. [3] W. Shockley, "The theory of p-n junctions in semiconductors and p-n
   junction transistors", Bell Syst. Tech. J. 28(3), 435-489, 1949.
.. [4] J. L. Moll, "Large-signal transient response of junction
   transistors", Proc. IRE 42(12), 1773-1784, 1954.
.. [5] P. R. Gray, P. J. Hurst, S. H. Lewis, R. G. Meyer, *Analysis and
   Design of Analog Integrated Circuits*, 5th ed., Wiley, 2009.
.. [6] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed.,
   Wiley, 2007, ch. 2 (p-n junction diodes: ideality factor, breakdown).
.. [7] E. Hairer, G. Wanner, *Solving Ordinary Differential Equations II*,
   2nd ed., Springer, 1996, sec. IV.8 (Radau IIA, as in scipy).
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field

import numpy as np
from numba import njit
from scipy.constants import Boltzmann, elementary_charge
from scipy.integrate import BDF, Radau

from rcc import devices
from rcc.design import Design, Load

__all__ = ["SmoothCircuit", "SmoothRun", "CycleSummary", "build_smooth", "simulate_smooth",
           "state_names", "series_junction_current"]

#: Parasitic capacitance emitter-ground [F] (makes the emitter node dynamic; see module doc)
EMITTER_CAPACITANCE = 100e-12
#: Parasitic capacitance at the output terminal, shunted by the ESR [F]
OUTPUT_TERMINAL_CAPACITANCE = 10e-9
#: Base spreading resistance of the switch, between its base terminal and
#: the internal base the junctions see [ohm]: the ``R_B`` of the Gummel-Poon
#: model [2]_; ones of ohms in power transistors of this class  # from memory
#: (the engine takes the same physical value, rcc.devices.SWITCH_BASE_RESISTANCE;
#: no code is shared)
BASE_SPREADING_RESISTANCE = 2.0
#: Parasitic capacitance base terminal-ground [F] (makes the terminal node
#: dynamic, as C_e the emitter: time constant 2 ohm x 100 pF = 0.2 ns)
BASE_TERMINAL_CAPACITANCE = 100e-12
#: Inverse current gain of both transistors  # from memory
REVERSE_GAIN = 1.0
#: Limiter (small-signal) transistor charge and depletion values  # from memory
LIMITER_FORWARD_TRANSIT = 0.5e-9
LIMITER_REVERSE_TRANSIT = 20e-9
LIMITER_EMITTER_CAPACITANCE = 10e-12
LIMITER_COLLECTOR_CAPACITANCE = 4e-12
#: Reference current at which the limiter's Vbe is given (notes/circuit.md)
LIMITER_VBE_CURRENT = 1e-3
#: Breakdown knees: 60 mV per decade  # common practice (Sze ch. 2)
KNEE_PER_DECADE = 0.060
#: Current at which switch.vebo is specified  # common practice
VEBO_CURRENT = 1e-3
#: Regulation zener test current; clamp zener reference current  # common practice
ZENER_TEST_CURRENT = 5e-3
CLAMP_ZENER_CURRENT = 1e-3
CLAMP_ZENER_RESISTANCE = 2.0
#: Rectifiers: emission coefficient, (reference current [A], series resistance [ohm])
RECTIFIER_EMISSION = 1.5
OUTPUT_RECTIFIER = (1.0, 0.05)
AUX_RECTIFIER = (10e-3, 1.0)
CLAMP_DIODE = (1.0, 1.0, 0.5)      # drop [V], at current [A], resistance [ohm]
#: Optocoupler LED: emission coefficient, current at led_drop [A]  # from memory
LED_EMISSION = 2.0
LED_CURRENT = 1e-3
#: Load corner relative to the target output: constant-current and
#: constant-power loads (the project's load law, written again here), and
#: the exponent that rounds the corner (our choice, so the law is smooth for
#: the stiff solver: within 4.4 % of the sharp law at the corner and 1e-6
#: beyond a factor 2 from it, tests/test_smooth_reference.py)
LOAD_KNEE_FRACTION = 0.2
POWER_KNEE_FRACTION = 0.25
LOAD_CORNER_EXPONENT = 16.0
#: Engine state names with another name here, and engine states with no
#: counterpart (see SmoothCircuit.state_from)
ENGINE_ALIASES = {"v_node": "v_collector"}
ENGINE_DROPPED = ("q_base",)

#: Exponent beyond which junction exponentials continue linearly (no
#: overflow at the solver's trial points; far beyond any physical bias)
EXP_LIMIT = 40.0


# ------------------------------------------------------------ the kernel
# Positions in the parameter vector of the compiled kernel.
(P_BUS, P_VT, P_HFE, P_IS1, P_IS2, P_HFE2, P_TAUF, P_TAUR, P_VEBO, P_KNEE, P_CBC, P_CW,
 P_LLK, P_LM, P_RCORE, P_RP, P_RF, P_RO, P_RA, P_RST, P_RD, P_CD, P_GBE, P_RS, P_RLB,
 P_COUT, P_ESR, P_RKNEE, P_OIS, P_OR, P_AIS, P_AR, P_HAS_AUX, P_HAS_OPTO, P_CLAMP,
 P_LOADKIND, P_LOADVAL, P_LOADKNEE, P_CAUX, P_RREG, P_ZIS, P_VREF, P_CTR, P_LEDKNEE,
 P_LEDIS, P_CZIS, P_RCLAMP, P_CCLAMP, P_CDIS, P_IOUT, P_IAUX, P_ICLAMP, P_BR2,
 P_SIZE) = range(54)

#: Named signals, in the order of the kernel's signal vector.
SIGNALS = ("collector_current", "primary_current", "collector_voltage", "base_voltage",
           "emitter_voltage", "output_voltage", "drive_capacitor_voltage",
           "limiter_collector_current", "magnetizing_voltage", "feedback_voltage",
           "base_current", "output_rectifier_current", "clamp_current", "breakdown_current",
           "aux_voltage", "zener_current", "aux_rectifier_current", "led_current",
           "limiter_base_voltage")
#: State positions fixed for every design (optional states follow)
I_LK, I_M, V_C, V_B, V_E, V_L, V_DRIVE, V_OC, V_BI = range(9)


@njit(cache=True)
def _lexp(x):
    """exp(x) continued linearly above EXP_LIMIT: (value, derivative)."""
    if x > EXP_LIMIT:
        e = math.exp(EXP_LIMIT)
        return e * (1.0 + x - EXP_LIMIT), e
    e = math.exp(x)
    return e, e


@njit(cache=True)
def _w_of_exp(x):
    """Lambert W of exp(x): the w > 0 with w + ln w = x, for any real x.

    Newton's method on ``F(t) = e^t + t - x`` with ``t = ln w``: F is convex
    and increasing, and the start ``t0 = ln x`` (x >= 1) or ``x`` (x < 1) lies
    right of the root (``w <= x`` for x >= 1, ``w <= e^x`` always), so the
    iterates fall monotonically to the root, without overflow.
    """
    t = math.log(x) if x >= 1.0 else x
    for _ in range(60):
        et = math.exp(t)
        step = (et + t - x) / (et + 1.0)
        t -= step
        if abs(step) <= 4e-16 * max(1.0, abs(t)):
            break
    return math.exp(t)


@njit(cache=True)
def _series_log(v, log_i0, a, r, i1):
    """Junction ``i = i0 exp((v - i r)/a) - i1`` with series resistance r,
    given ``ln i0`` (a breakdown law at tens of volts has ``i0`` below the
    smallest double): ``i + i1 = (a/r) W((i0 r/a) exp((v + i1 r)/a))``;
    returns (i, di/dv)."""
    x = log_i0 + math.log(r / a) + (v + i1 * r) / a
    w = _w_of_exp(x)
    return w * a / r - i1, w / ((1.0 + w) * r)


@njit(cache=True)
def _series(v, i0, a, r, i1):
    """:func:`_series_log` with the saturation current itself."""
    return _series_log(v, math.log(i0), a, r, i1)


@njit(cache=True)
def _load(v, kind, value, knee):
    if kind == 0.0:
        return v / value
    u = v / knee
    n = LOAD_CORNER_EXPONENT
    if kind == 1.0:
        return value * u / (1.0 + abs(u) ** n) ** (1.0 / n)
    return value / knee * u / (1.0 + abs(u) ** (2.0 * n)) ** (1.0 / n)


@njit(cache=True)
def _magnetizing(p, i_lk, i_m, v_b, v_drive, v_o, v_a, guess):
    """Root v_m of KCL at node m (strictly decreasing residual; Newton's
    method safeguarded by bisection in a bracket that holds the root)."""
    r_f, r_o, r_a = p[P_RF], p[P_RO], p[P_RA]
    g_core, g_drive = 1.0 / p[P_RCORE], 1.0 / p[P_RD]
    base = i_lk - i_m + r_f * g_drive * (v_drive + v_b)
    slope = g_core + r_f * r_f * g_drive
    has_aux = p[P_HAS_AUX] > 0.0
    centre = base / slope
    off = v_o / r_o
    if has_aux:
        off = max(off, v_a / r_a)
    lo = centre - 1.0
    hi = max(centre, off) + 1.0
    v = min(max(guess, lo), hi)
    i_o = 0.0
    i_a = 0.0
    for _ in range(200):
        i_o, g_o = _series(r_o * v - v_o, p[P_OIS], p[P_RKNEE], p[P_OR], p[P_OIS])
        value = base - slope * v - r_o * i_o
        deriv = -slope - r_o * r_o * g_o
        if has_aux:
            i_a, g_a = _series(r_a * v - v_a, p[P_AIS], p[P_RKNEE], p[P_AR], p[P_AIS])
            value -= r_a * i_a
            deriv -= r_a * r_a * g_a
        if value > 0.0:
            lo = v
        else:
            hi = v
        new = v - value / deriv
        if not (lo < new < hi):
            new = 0.5 * (lo + hi)
        if abs(new - v) <= 1e-14 * (1.0 + abs(v)) or hi - lo <= 1e-14 * (1.0 + abs(v)):
            v = new
            break
        v = new
    i_o, _ = _series(r_o * v - v_o, p[P_OIS], p[P_RKNEE], p[P_OR], p[P_OIS])
    if has_aux:
        i_a, _ = _series(r_a * v - v_a, p[P_AIS], p[P_RKNEE], p[P_AR], p[P_AIS])
    i_f = (r_f * v - v_drive - v_b) * g_drive
    return v, i_f, i_o, i_a


@njit(cache=True)
def _bjt(v_be, v_bc, i_s, beta_f, beta_r, tau_f, tau_r, c_je, c_jc, vt):
    """Ebers-Moll transport currents and incremental charges of one NPN:
    (collector, base, C_be, C_bc, I_F)."""
    ef, dfe = _lexp(v_be / vt)
    er, dre = _lexp(v_bc / vt)
    i_f = i_s * (ef - 1.0)
    i_r = i_s * (er - 1.0)
    collector = i_f - i_r * (1.0 + 1.0 / beta_r)
    base = i_f / beta_f + i_r / beta_r
    return collector, base, c_je + tau_f * i_s * dfe / vt, c_jc + tau_r * i_s * dre / vt, i_f


@njit(cache=True)
def _equations(y, p, dy, sig, guess):
    """State derivatives ``dy`` and signals ``sig`` at state ``y``
    (equations: module docstring); ``guess[0]`` carries the last v_m."""
    i_out, i_aux, i_clamp_state = int(p[P_IOUT]), int(p[P_IAUX]), int(p[P_ICLAMP])
    i_lk, i_m = y[I_LK], y[I_M]
    v_c, v_b, v_e, v_l, v_bi = y[V_C], y[V_B], y[V_E], y[V_L], y[V_BI]
    v_drive, v_oc = y[V_DRIVE], y[V_OC]
    v_o = y[i_out] if i_out >= 0 else v_oc
    v_a = y[i_aux] if i_aux >= 0 else 0.0
    bus, vt = p[P_BUS], p[P_VT]
    v_m, i_f, i_o, i_a = _magnetizing(p, i_lk, i_m, v_b, v_drive, v_o, v_a, guess[0])
    guess[0] = v_m
    ic1, ib1, c_be1, c_bc1, i_f1 = _bjt(v_bi - v_e, v_bi - v_c, p[P_IS1], p[P_HFE],
                                       REVERSE_GAIN, p[P_TAUF], p[P_TAUR], 0.0, p[P_CBC], vt)
    ic2, ib2, c_be2, c_bc2, _ = _bjt(v_l, v_l - v_b, p[P_IS2], p[P_HFE2], p[P_BR2],
                                     LIMITER_FORWARD_TRANSIT, LIMITER_REVERSE_TRANSIT,
                                     LIMITER_EMITTER_CAPACITANCE,
                                     LIMITER_COLLECTOR_CAPACITANCE, vt)
    eb, _ = _lexp((v_e - v_bi - p[P_VEBO]) / p[P_KNEE])
    i_bd = VEBO_CURRENT * eb
    i_z = 0.0
    i_led = 0.0
    i_inject = 0.0
    if i_aux >= 0:
        i_z, _ = _series_log(v_a - v_l, p[P_ZIS], p[P_KNEE], p[P_RREG], 0.0)
    elif p[P_HAS_OPTO] > 0.0:
        i_led, _ = _series(v_o - p[P_VREF], p[P_LEDIS], p[P_LEDKNEE], p[P_RREG], p[P_LEDIS])
        i_inject = p[P_CTR] * i_led
    i_cl = 0.0
    if p[P_CLAMP] == 1.0:
        i_cl, _ = _series_log(v_c - bus, p[P_CZIS], p[P_KNEE], CLAMP_ZENER_RESISTANCE, 0.0)
    elif p[P_CLAMP] == 2.0:
        i_cl, _ = _series(v_c - bus - y[i_clamp_state], p[P_CDIS], p[P_RKNEE],
                          CLAMP_DIODE[2], p[P_CDIS])
    i_start = (bus - v_b) / p[P_RST]
    i_be = (v_b - v_e) * p[P_GBE]
    i_sense = v_e / p[P_RS]
    i_lb = (v_e - v_l) / p[P_RLB]
    i_bb = (v_b - v_bi) / BASE_SPREADING_RESISTANCE
    # nodes: 0 collector, 1 base terminal, 2 emitter, 3 limiter base,
    # 4 internal base, 5 output terminal (with an ESR)
    n = 6 if i_out >= 0 else 5
    cur = np.zeros(6)
    cm = np.zeros((6, 6))
    cur[0] = i_lk - ic1 - i_cl
    cur[1] = i_start + i_f - i_be - ic2 - i_bb
    cur[2] = ic1 + ib1 - i_sense + i_be - i_lb - i_bd
    cur[3] = i_lb - ib2 + i_z + i_inject
    cur[4] = i_bb - ib1 + i_bd
    i_load = _load(v_o, p[P_LOADKIND], p[P_LOADVAL], p[P_LOADKNEE]) + i_led
    if i_out >= 0:
        cur[5] = i_o - i_load - (v_o - v_oc) / p[P_ESR]
        cm[5, 5] = OUTPUT_TERMINAL_CAPACITANCE
    cm[0, 0] += p[P_CW] + c_bc1
    cm[4, 4] += c_bc1 + c_be1
    cm[0, 4] -= c_bc1
    cm[4, 0] -= c_bc1
    cm[4, 2] -= c_be1
    cm[2, 4] -= c_be1
    cm[2, 2] += c_be1 + EMITTER_CAPACITANCE
    cm[1, 1] += c_bc2 + BASE_TERMINAL_CAPACITANCE
    cm[3, 3] += c_be2 + c_bc2
    cm[3, 1] -= c_bc2
    cm[1, 3] -= c_bc2
    # Gaussian elimination (the matrix is symmetric positive definite)
    for k in range(n):
        for r in range(k + 1, n):
            f = cm[r, k] / cm[k, k]
            if f != 0.0:
                for c in range(k, n):
                    cm[r, c] -= f * cm[k, c]
                cur[r] -= f * cur[k]
    for k in range(n - 1, -1, -1):
        s = cur[k]
        for c in range(k + 1, n):
            s -= cm[k, c] * cur[c]
        cur[k] = s / cm[k, k]
    dy[I_LK] = (bus - p[P_RP] * i_lk - v_m - v_c) / p[P_LLK]
    dy[I_M] = v_m / p[P_LM]
    dy[V_C] = cur[0]
    dy[V_B] = cur[1]
    dy[V_E] = cur[2]
    dy[V_L] = cur[3]
    dy[V_BI] = cur[4]
    dy[V_DRIVE] = i_f / p[P_CD]
    if i_out >= 0:
        dy[i_out] = cur[5]
        dy[V_OC] = (v_o - v_oc) / p[P_ESR] / p[P_COUT]
    else:
        dy[V_OC] = (i_o - i_load) / p[P_COUT]
    if i_aux >= 0:
        dy[i_aux] = (i_a - i_z) / p[P_CAUX]
    if i_clamp_state >= 0:
        dy[i_clamp_state] = (i_cl - y[i_clamp_state] / p[P_RCLAMP]) / p[P_CCLAMP]
    # collector terminal current without the depletion part of C_bc (what
    # flows through the junctions, transport plus stored-charge current)
    collector = i_lk - i_cl - p[P_CW] * cur[0] - p[P_CBC] * (cur[0] - cur[4])
    sig[0], sig[1], sig[2], sig[3], sig[4] = collector, i_lk, v_c, v_b, v_e
    sig[5], sig[6], sig[7], sig[8], sig[9] = v_o, v_drive, ic2, v_m, p[P_RF] * v_m
    sig[10], sig[11], sig[12], sig[13] = i_bb, i_o, i_cl, i_bd
    sig[14], sig[15], sig[16], sig[17], sig[18] = v_a, i_z, i_a, i_led, v_l


@njit(cache=True)
def _rhs_columns(ys, p, guess):
    """Derivatives of every column of ``ys`` (shape (n, k))."""
    n, k = ys.shape
    out = np.empty((n, k))
    dy = np.empty(n)
    sig = np.empty(len(SIGNALS))
    for j in range(k):
        _equations(ys[:, j].copy(), p, dy, sig, guess)
        out[:, j] = dy
    return out


@njit(cache=True)
def _signals_columns(ys, p, guess):
    """Signals of every column of ``ys`` (shape (n, k)) -> (s, k)."""
    n, k = ys.shape
    out = np.empty((len(SIGNALS), k))
    dy = np.empty(n)
    sig = np.empty(len(SIGNALS))
    for j in range(k):
        _equations(ys[:, j].copy(), p, dy, sig, guess)
        out[:, j] = sig
    return out


@njit(cache=True)
def _jacobian(y, p, guess, scale):
    """Forward-difference Jacobian (step sqrt(eps) x max(|y|, scale))."""
    n = y.shape[0]
    jac = np.empty((n, n))
    f0 = np.empty(n)
    f1 = np.empty(n)
    sig = np.empty(len(SIGNALS))
    start = guess[0]
    _equations(y.copy(), p, f0, sig, guess)
    for j in range(n):
        h = 1.5e-8 * max(abs(y[j]), scale[j])
        yj = y.copy()
        yj[j] += h
        guess[0] = start
        _equations(yj, p, f1, sig, guess)
        for i in range(n):
            jac[i, j] = (f1[i] - f0[i]) / h
    guess[0] = start
    return jac


def series_junction_current(voltage, saturation_current, knee_voltage, resistance,
                            offset_current=None):
    """Current of an exponential junction in series with a resistance.

    Solves ``i = I_0 exp((v - i R) / a) - I_1`` in closed form with the
    Lambert W function: ``i + I_1 = (a / R) W((I_0 R / a) exp((v + I_1 R) / a))``.

    Parameters
    ----------
    voltage : float
        Voltage across junction and resistance [V].
    saturation_current : float
        ``I_0`` [A].
    knee_voltage : float
        ``a = n V_T`` [V].
    resistance : float
        Series resistance ``R`` > 0 [ohm].
    offset_current : float, optional
        ``I_1`` [A]; default ``I_0`` (a Shockley diode); 0 for a breakdown law.

    Returns
    -------
    current, conductance : float
        ``i`` [A] and ``di/dv`` [S].
    """
    i1 = saturation_current if offset_current is None else offset_current
    return _series_log(float(voltage), math.log(saturation_current), knee_voltage,
                       resistance, i1)


# ------------------------------------------------------------------ circuit
@dataclass(frozen=True)
class SmoothCircuit:
    """The smooth circuit of one design at one operating condition.

    Attributes
    ----------
    design : Design
    bus_voltage : float
        DC bus voltage [V].
    load : Load
    temperature : float
        Junction temperature [K].
    hfe : float
        Switch forward gain at the temperature [1].
    state_names : tuple of str
    parameters : dict
        Every derived device constant in SI units (``tau_forward``,
        ``tau_reverse``, ``tau_storage``, saturation currents, ...).
    """

    design: Design
    bus_voltage: float
    load: Load
    temperature: float
    hfe: float
    state_names: tuple
    parameters: dict
    vector: np.ndarray = field(repr=False)
    guess: np.ndarray = field(repr=False, compare=False)

    @property
    def index(self) -> dict:
        """State name -> position."""
        return {name: k for k, name in enumerate(self.state_names)}

    def power_on_state(self) -> np.ndarray:
        """Every capacitor discharged, no current [state units]."""
        return np.zeros(len(self.state_names))

    def state_from(self, values: dict) -> np.ndarray:
        """State vector from named values.

        Missing names take defaults: the limiter base at the emitter
        voltage but at most one limiter junction drop above the base, the
        output terminal at the output capacitor, everything else zero.  The
        engine's names are accepted too (``dict(zip(circuit.state_names,
        x))`` of :mod:`rcc.engine`): ``v_node`` is ``v_collector``; its
        stored base charge ``q_base`` has no state here (the reference's
        charges follow from its junction voltages) and is dropped, so take
        a common state with the switch off and give ``v_base`` and
        ``v_emitter`` (the engine's ``base_voltage`` and ``emitter_voltage``
        signals).  Unknown names raise ValueError.
        """
        values = {ENGINE_ALIASES.get(name, name): value for name, value in values.items()
                  if name not in ENGINE_DROPPED}
        unknown = set(values) - set(self.state_names)
        if unknown:
            raise ValueError(f"unknown state names {sorted(unknown)}; "
                             f"expected some of {self.state_names}")
        x = self.power_on_state()
        idx = self.index
        for name, value in values.items():
            x[idx[name]] = float(value)
        if "v_limiter_base" not in values:
            # tied to the emitter through R_lb, but no more than one junction
            # drop above the base (the limiter's collector-base junction)
            x[idx["v_limiter_base"]] = min(x[idx["v_emitter"]],
                                           x[idx["v_base"]] + self.parameters["limiter_vbe"])
        if "v_base_internal" not in values:
            x[idx["v_base_internal"]] = x[idx["v_base"]]
        if "v_output" in idx and "v_output" not in values:
            x[idx["v_output"]] = x[idx["v_output_capacitor"]]
        return x

    def rhs(self, t, y):
        """Right-hand side for :func:`scipy.integrate.solve_ivp` (vectorized)."""
        y = np.asarray(y, dtype=float)
        if y.ndim == 1:
            return _rhs_columns(y[:, None].copy(), self.vector, self.guess)[:, 0]
        return _rhs_columns(np.ascontiguousarray(y), self.vector, self.guess)

    def jacobian(self, t, y):
        """Forward-difference Jacobian of :meth:`rhs` [1/s and mixed units]."""
        return _jacobian(np.asarray(y, dtype=float), self.vector, self.guess, self._scale)

    @property
    def _scale(self) -> np.ndarray:
        return np.array([1e-3 if name.startswith("i_") else 1.0 for name in self.state_names])

    def signals(self, y) -> dict:
        """Named signals (:data:`SIGNALS`) at states ``y`` (shape (n,) or (n, k))."""
        y = np.asarray(y, dtype=float)
        flat = y.ndim == 1
        values = _signals_columns(np.ascontiguousarray(y[:, None] if flat else y),
                                  self.vector, self.guess)
        out = {name: (values[k, 0] if flat else values[k]) for k, name in enumerate(SIGNALS)}
        if not self.parameters["has_aux"]:
            for name in ("aux_voltage", "zener_current", "aux_rectifier_current"):
                out.pop(name)
        if not self.parameters["has_optocoupler"]:
            out.pop("led_current")
        return out

    def derivatives(self, y) -> np.ndarray:
        """State derivatives at ``y`` [state units / s]."""
        return self.rhs(0.0, y)


def state_names(design: Design) -> tuple:
    """Names of the reference's state vector for a design.

    ``i_leakage``, ``i_magnetizing`` [A]; node voltages to ground
    ``v_collector``, ``v_base`` (the base terminal), ``v_emitter``,
    ``v_limiter_base``, ``v_base_internal`` (behind the base spreading
    resistance, where the junctions are) [V];
    ``v_drive`` (feedback side minus base side) [V]; ``v_output_capacitor``
    [V]; ``v_output`` (output terminal, only with an ESR) [V]; ``v_aux``
    (feedback-winding regulation) [V]; ``v_clamp`` (RCD clamp capacitor,
    clamp node minus bus) [V].  The names shared with the engine
    (``i_leakage``, ``i_magnetizing``, ``v_drive``, ``v_output_capacitor``,
    ``v_aux``, ``v_clamp``) mean the same quantity; the engine's ``v_node``
    is ``v_collector`` here.
    """
    names = ["i_leakage", "i_magnetizing", "v_collector", "v_base", "v_emitter",
             "v_limiter_base", "v_drive", "v_output_capacitor", "v_base_internal"]
    if design.output.esr > 0:
        names.append("v_output")
    if design.regulation.method == "feedback-winding":
        names.append("v_aux")
    if design.clamp.type == "rcd":
        names.append("v_clamp")
    return tuple(names)


def build_smooth(design: Design, bus_voltage: float, load: Load, *, temperature=None,
                 hfe=None, limiter_reverse_gain: float = REVERSE_GAIN,
                 limiter_vbe_current: float = LIMITER_VBE_CURRENT) -> SmoothCircuit:
    """The smooth circuit of a design (device constants: module docstring).

    Parameters
    ----------
    design : Design
    bus_voltage : float
        DC bus voltage [V].
    load : Load
    temperature : float, optional
        Junction temperature [K]; default 25 degC.
    hfe : float, optional
        Switch gain at 25 degC [1]; default ``switch.hfe_typ``.
    limiter_reverse_gain : float
        Inverse current gain of the limiter [1] (default :data:`REVERSE_GAIN`);
        a study parameter: the limiter works inverted while its
        collector-base junction resets the drive capacitor.
    limiter_vbe_current : float
        Collector current at which the limiter's base-emitter voltage is
        ``limiter.vbe`` [A] (default :data:`LIMITER_VBE_CURRENT`, as
        ``notes/circuit.md``); a study parameter.

    Returns
    -------
    SmoothCircuit
    """
    if not (bus_voltage > 0 and math.isfinite(bus_voltage)):
        raise ValueError(f"bus_voltage = {bus_voltage!r}: expected a positive voltage [V]")
    temperature = devices.REFERENCE_TEMPERATURE if temperature is None else float(temperature)
    sw, tr, dr, lim = design.switch, design.transformer, design.drive, design.limiter
    reg, out, clamp = design.regulation, design.output, design.clamp
    vt = Boltzmann * temperature / elementary_charge
    gain = float(devices.current_gain(sw.hfe_typ if hfe is None else hfe, sw.hfe_tempco,
                                      temperature))
    vbe = float(devices.base_emitter_voltage(sw.vbe, sw.vbe_tempco, temperature))
    limiter_vbe = float(devices.base_emitter_voltage(lim.vbe, lim.vbe_tempco, temperature))
    trip = lim.vbe / lim.sense_resistance
    tau_f = 1.0 / (2.0 * math.pi * sw.transition_frequency)
    k = (1.0 + 1.0 / REVERSE_GAIN) / gain + 1.0 / REVERSE_GAIN
    tau_s = sw.storage_time / math.log(2.0)
    tau_r = max(k * tau_s - tau_f * (1.0 + 1.0 / REVERSE_GAIN), 0.0)
    knee = KNEE_PER_DECADE / math.log(10.0)
    rect_knee = RECTIFIER_EMISSION * vt
    sign = 1.0 if tr.feedback_phase == "regenerative" else -1.0
    expected = out.voltage_target if out.voltage_target is not None else 20.0
    p = {
        "thermal_voltage": vt, "hfe": gain, "vbe": vbe, "limiter_vbe": limiter_vbe,
        "switch_saturation_current": trip * math.exp(-vbe / vt),
        "limiter_saturation_current": limiter_vbe_current * math.exp(-limiter_vbe / vt),
        "limiter_hfe": lim.hfe, "tau_forward": tau_f, "tau_reverse": tau_r,
        "tau_storage": tau_s, "vebo": sw.vebo, "knee": knee,
        "collector_base_capacitance": sw.output_capacitance,
        "winding_capacitance": tr.winding_capacitance,
        "leakage_inductance": tr.leakage_inductance,
        "magnetizing_inductance": tr.magnetizing_inductance,
        "core_loss_resistance": tr.core_loss_resistance,
        "primary_resistance": tr.primary_resistance,
        "feedback_ratio": sign * tr.feedback_turns / tr.primary_turns,
        "output_ratio": -tr.output_turns / tr.primary_turns,
        "aux_ratio": -tr.feedback_turns / tr.primary_turns,
        "startup_resistance": design.startup.resistance,
        "drive_resistance": dr.resistance, "drive_capacitance": dr.capacitance,
        "base_emitter_conductance": (0.0 if dr.base_emitter_resistance is None
                                     else 1.0 / dr.base_emitter_resistance),
        "sense_resistance": lim.sense_resistance,
        "limiter_base_resistance": lim.base_resistance,
        "output_capacitance": out.capacitance, "esr": out.esr, "has_esr": out.esr > 0,
        "rectifier_knee": rect_knee,
        "output_rectifier": (OUTPUT_RECTIFIER[0] * math.exp(-out.rectifier_drop / rect_knee),
                             OUTPUT_RECTIFIER[1]),
        "aux_rectifier": (AUX_RECTIFIER[0] * math.exp(-reg.rectifier_drop / rect_knee),
                          AUX_RECTIFIER[1]),
        "has_aux": reg.method == "feedback-winding",
        "has_optocoupler": reg.method == "optocoupler",
        "clamp": clamp.type,
        "load_knee": (LOAD_KNEE_FRACTION if load.kind == "current"
                      else POWER_KNEE_FRACTION) * expected,
    }
    if p["has_aux"]:
        vz = float(devices.zener_voltage(reg.zener_voltage, reg.zener_tempco, temperature))
        p.update(zener_voltage=vz, aux_capacitance=reg.filter_capacitance,
                 regulation_resistance=reg.series_resistance,
                 zener_log_saturation_current=math.log(ZENER_TEST_CURRENT) - vz / knee)
    if p["has_optocoupler"]:
        led_knee = LED_EMISSION * vt
        p.update(reference_voltage=reg.reference_voltage, ctr=reg.ctr, led_knee=led_knee,
                 regulation_resistance=reg.series_resistance,
                 led_saturation_current=LED_CURRENT * math.exp(-reg.led_drop / led_knee))
    if clamp.type == "zener":
        p["clamp_zener_log_saturation"] = math.log(CLAMP_ZENER_CURRENT) - clamp.voltage / knee
    elif clamp.type == "rcd":
        drop, current, _ = CLAMP_DIODE
        p.update(clamp_resistance=clamp.resistance, clamp_capacitance=clamp.capacitance,
                 clamp_diode_saturation=current * math.exp(-drop / rect_knee))
    names = state_names(design)
    v = np.zeros(P_SIZE)
    v[[P_BUS, P_VT, P_HFE, P_IS1, P_IS2, P_HFE2, P_TAUF, P_TAUR, P_VEBO, P_KNEE, P_CBC,
       P_CW, P_LLK, P_LM, P_RCORE, P_RP, P_RF, P_RO, P_RA, P_RST, P_RD, P_CD, P_GBE,
       P_RS, P_RLB, P_COUT, P_ESR, P_RKNEE]] = [
        bus_voltage, vt, gain, p["switch_saturation_current"],
        p["limiter_saturation_current"], lim.hfe, tau_f, tau_r, sw.vebo, knee,
        sw.output_capacitance, tr.winding_capacitance, tr.leakage_inductance,
        tr.magnetizing_inductance, tr.core_loss_resistance, tr.primary_resistance,
        p["feedback_ratio"], p["output_ratio"], p["aux_ratio"], design.startup.resistance,
        dr.resistance, dr.capacitance, p["base_emitter_conductance"], lim.sense_resistance,
        lim.base_resistance, out.capacitance, out.esr, rect_knee]
    v[P_OIS], v[P_OR] = p["output_rectifier"]
    v[P_BR2] = limiter_reverse_gain
    v[P_AIS], v[P_AR] = p["aux_rectifier"]
    v[P_HAS_AUX], v[P_HAS_OPTO] = float(p["has_aux"]), float(p["has_optocoupler"])
    v[P_CLAMP] = {"none": 0.0, "zener": 1.0, "rcd": 2.0}[clamp.type]
    v[P_LOADKIND] = {"resistance": 0.0, "current": 1.0, "power": 2.0}[load.kind]
    v[P_LOADVAL], v[P_LOADKNEE] = load.value, p["load_knee"]
    if p["has_aux"]:
        v[P_CAUX], v[P_RREG], v[P_ZIS] = (reg.filter_capacitance, reg.series_resistance,
                                          p["zener_log_saturation_current"])
    if p["has_optocoupler"]:
        v[P_VREF], v[P_CTR], v[P_LEDKNEE], v[P_LEDIS], v[P_RREG] = (
            reg.reference_voltage, reg.ctr, p["led_knee"], p["led_saturation_current"],
            reg.series_resistance)
    if clamp.type == "zener":
        v[P_CZIS] = p["clamp_zener_log_saturation"]
    elif clamp.type == "rcd":
        v[P_RCLAMP], v[P_CCLAMP], v[P_CDIS] = (clamp.resistance, clamp.capacitance,
                                               p["clamp_diode_saturation"])
    for key, name in ((P_IOUT, "v_output"), (P_IAUX, "v_aux"), (P_ICLAMP, "v_clamp")):
        v[key] = names.index(name) if name in names else -1
    if load.kind == "resistance" and not load.value > 0:
        raise ValueError("load resistance: expected a positive value [ohm]")
    return SmoothCircuit(design=design, bus_voltage=float(bus_voltage), load=load,
                         temperature=temperature, hfe=gain, state_names=names,
                         parameters=p, vector=v, guess=np.zeros(1))


# ------------------------------------------------------------------- runs
@dataclass(frozen=True)
class CycleSummary:
    """Means over the last switching cycles of a run.

    Attributes
    ----------
    cycles : int
        Number of full cycles averaged (turn-on to turn-on).
    frequency : float
        Mean switching frequency, cycles / their total duration [Hz].
    peak_current : float
        Mean primary-current peak of those cycles [A].
    output_voltage : float
        Time average of the output voltage over those cycles [V].
    """

    cycles: int
    frequency: float
    peak_current: float
    output_voltage: float


@dataclass(frozen=True)
class SmoothRun:
    """Waveforms of a smooth-reference run.

    Attributes
    ----------
    time : ndarray, shape (k,)
        Solver step instants [s].
    states : dict of str to ndarray
        Every state (names: :func:`state_names`) [state units].
    signals : dict of str to ndarray
        ``collector_current`` (collector terminal current less the
        displacement current of the depletion capacitance ``C_bc``: the
        Ebers-Moll transport current plus the stored-charge current) [A],
        ``primary_current`` [A], ``collector_voltage``, ``base_voltage``,
        ``emitter_voltage``, ``limiter_base_voltage``, ``output_voltage``
        (terminal), ``drive_capacitor_voltage``, ``feedback_voltage``,
        ``magnetizing_voltage`` [V],
        ``limiter_collector_current``, ``base_current``,
        ``output_rectifier_current``, ``clamp_current``,
        ``breakdown_current`` (base-emitter reverse breakdown) [A]; with
        feedback-winding regulation
        ``aux_voltage`` [V], ``zener_current``, ``aux_rectifier_current`` [A];
        with an optocoupler ``led_current`` [A].
    turn_on_times : ndarray
        Instants the collector current rises through ``turn_on_threshold``
        after a cut-off interval (below half the threshold, with the
        collector above half the bus, for at least ``CUTOFF_INTERVAL``),
        linearly interpolated [s].
    peak_currents : ndarray
        Largest primary current between consecutive turn-ons, one per full
        cycle [A].
    turn_on_threshold : float
        10 % of the current limit ``limiter.vbe / limiter.sense_resistance`` [A].
    final_state : ndarray
        State at the end [state units].
    cpu_seconds : float
        Process CPU time of the integration [s].
    solver_steps : int
        Accepted Radau steps.
    """

    time: np.ndarray
    states: dict
    signals: dict
    turn_on_times: np.ndarray
    peak_currents: np.ndarray
    turn_on_threshold: float
    final_state: np.ndarray
    cpu_seconds: float
    solver_steps: int
    state_names: tuple = ()

    def last_cycles(self, n: int) -> CycleSummary:
        """Means over the last ``n`` full cycles (fewer if the run has fewer).

        Raises
        ------
        ValueError
            If the run holds no full cycle.
        """
        ons = self.turn_on_times
        if len(ons) < 2:
            raise ValueError("the run holds no full switching cycle (fewer than 2 turn-ons)")
        n = min(int(n), len(ons) - 1)
        start, end = ons[-n - 1], ons[-1]
        mask = (self.time >= start) & (self.time <= end)
        t, v = self.time[mask], self.signals["output_voltage"][mask]
        mean_v = float(np.trapezoid(v, t) / (end - start)) if len(t) > 1 else float(v.mean())
        return CycleSummary(cycles=n, frequency=n / (end - start),
                            peak_current=float(np.mean(self.peak_currents[-n:])),
                            output_voltage=mean_v)

    def state_at(self, time: float) -> dict:
        """Named state at an instant (linear interpolation between steps)."""
        return {name: float(np.interp(time, self.time, values))
                for name, values in self.states.items()}


#: Least cut-off interval before a turn-on counts [s]
CUTOFF_INTERVAL = 100e-9
#: The stiff solvers are stable far into the right half plane: with a step
#: ``h`` large against ``1/lambda`` they damp a mode that grows as ``e^(lambda
#: t)`` (Radau IIA's stability function tends to zero as ``lambda h -> +inf``;
#: Hairer & Wanner, *Solving Ordinary Differential Equations II*, 2nd ed.,
#: 1996, sec. IV.3 and IV.5  # from memory), so a rest the circuit leaves by
#: itself (the switch turning on from the start-up current) can look stable.
#: Where the Jacobian has an eigenvalue with positive real part the step is
#: held below ``GROWTH_STEP / Re(lambda)`` [1]; the check runs only for
#: steps above ``GROWTH_CHECK_STEP`` (the fast phases take shorter ones) [s].
GROWTH_STEP = 0.5
GROWTH_CHECK_STEP = 1e-8


def _turn_ons(time, current, threshold, collector_voltage, bus_voltage):
    """Rising crossings of ``threshold`` after a cut-off interval: at least
    CUTOFF_INTERVAL with the current below ``threshold / 2`` and the
    collector above half the bus (so the dip after the node-capacitance
    discharge spike at turn-on, with the collector already down, is not one)."""
    below = (current < 0.5 * threshold) & (collector_voltage > 0.5 * bus_voltage)
    found = []
    last_low_start = time[0] if len(time) and below[0] else None
    armed = False
    for k in range(1, len(time)):
        if below[k] and not below[k - 1]:
            last_low_start = time[k]
        if below[k] and last_low_start is not None and time[k] - last_low_start >= CUTOFF_INTERVAL:
            armed = True
        if armed and current[k - 1] < threshold <= current[k]:
            frac = (threshold - current[k - 1]) / (current[k] - current[k - 1])
            found.append(time[k - 1] + frac * (time[k] - time[k - 1]))
            armed = False
            last_low_start = None
    return np.array(found)


def simulate_smooth(design: Design, bus_voltage: float, load: Load, *, temperature=None,
                    hfe=None, duration: float, initial=None, rtol: float = 1e-6, atol=None,
                    max_step=None, method: str = "Radau",
                    limiter_reverse_gain: float = REVERSE_GAIN,
                    limiter_vbe_current: float = LIMITER_VBE_CURRENT) -> SmoothRun:
    """Integrate the smooth reference circuit.

    Parameters
    ----------
    design : Design
    bus_voltage : float
        DC bus voltage [V].
    load : Load
        Output load (:func:`rcc.design.parse_load`).
    temperature : float, optional
        Junction temperature [K]; default 25 degC.
    hfe : float, optional
        Switch gain at 25 degC [1]; default ``switch.hfe_typ``.
    duration : float
        Simulated time [s].
    initial : dict, optional
        Named initial state (:func:`state_names`); missing names as in
        :meth:`SmoothCircuit.state_from`.  None: power-on (every capacitor
        discharged, no current).
    rtol : float
        Relative tolerance of the solver [1].
    atol : float or array_like, optional
        Absolute tolerance [state units]; default 1e-7 A for currents and
        1e-6 V for voltages.
    max_step : float, optional
        Longest step [s].
    method : str
        ``"Radau"`` or ``"BDF"`` (scipy's stiff solvers).
    limiter_reverse_gain : float
        See :func:`build_smooth` [1].
    limiter_vbe_current : float
        See :func:`build_smooth` [A].

    Returns
    -------
    SmoothRun

    Raises
    ------
    RuntimeError
        If the solver fails.

    Notes
    -----
    The right-hand side and a forward-difference Jacobian are compiled
    (numba); scipy's Radau IIA [7]_ (or BDF) steps it, with the step held
    below :data:`GROWTH_STEP` over the fastest growing mode's rate where the
    Jacobian has one (a rest the circuit leaves by itself, which the solver
    would otherwise damp).
    """
    circuit = build_smooth(design, bus_voltage, load, temperature=temperature, hfe=hfe,
                           limiter_reverse_gain=limiter_reverse_gain,
                           limiter_vbe_current=limiter_vbe_current)
    names = circuit.state_names
    x0 = circuit.power_on_state() if initial is None else circuit.state_from(initial)
    if atol is None:
        atol = np.array([1e-7 if name.startswith("i_") else 1e-6 for name in names])
    start = _time.process_time()
    limit = np.inf if max_step is None else float(max_step)
    solver = {"Radau": Radau, "BDF": BDF}[method](
        circuit.rhs, 0.0, x0, float(duration), rtol=rtol, atol=atol, jac=circuit.jacobian,
        max_step=limit)
    times, values = [0.0], [np.array(x0, dtype=float)]
    while solver.status == "running":
        # a growing mode (a rest the circuit leaves by itself) is kept
        # growing: the step stays below GROWTH_STEP / (its rate)
        solver.max_step = limit
        if solver.h_abs is not None and solver.h_abs > GROWTH_CHECK_STEP:
            rate = float(np.max(np.linalg.eigvals(circuit.jacobian(solver.t, solver.y)).real))
            if rate > 0.0:
                solver.max_step = min(limit, GROWTH_STEP / rate)
        message = solver.step()
        times.append(solver.t)
        values.append(solver.y.copy())
    cpu = _time.process_time() - start
    if solver.status == "failed":
        raise RuntimeError(f"smooth reference: solver failed at t = {solver.t:.6g} s: "
                           f"{message}")
    t, states = np.array(times), np.array(values).T
    signals = circuit.signals(states)
    p = design.limiter
    threshold = 0.1 * p.vbe / p.sense_resistance
    ons = _turn_ons(t, signals["collector_current"], threshold, signals["collector_voltage"],
                    float(bus_voltage))
    peaks = np.array([signals["primary_current"][(t >= a) & (t < b)].max()
                      for a, b in zip(ons[:-1], ons[1:])])
    return SmoothRun(time=t, states={n: states[k] for k, n in enumerate(names)},
                     signals=signals, turn_on_times=ons, peak_currents=peaks,
                     turn_on_threshold=threshold, final_state=states[:, -1].copy(),
                     cpu_seconds=cpu, solver_steps=len(t) - 1, state_names=names)
