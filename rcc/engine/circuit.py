"""Piecewise-linear model of the free-running flyback, built by modified nodal analysis.

The circuit of ``notes/circuit.md`` is written once as an element list
(resistors, capacitors, inductors, resistive voltage sources, current
sources, an ideal multi-winding transformer) plus a set of *devices* whose
state (cut-off / active / saturated transistor, conducting or blocking
diode, load region) switches elements in and out.  For every combination of
device states (a *topology*) the resistive network that remains after
replacing each capacitor by a voltage source of its state voltage and each
inductor by a current source of its state current is solved by modified
nodal analysis; the capacitor currents and inductor voltages then give the
affine state equation ``dx/dt = A x + b`` of that topology.  Topologies are
built lazily, when the engine first visits them, and cached.

State vector order (see :attr:`Circuit.state_names`)::

    0  i_leakage            primary current, bus -> primary (leakage inductance) [A]
    1  i_magnetizing        magnetizing current referred to the primary [A]
    2  v_node               collector-node capacitor voltage, collector to ground [V]
    3  v_drive              drive capacitor voltage, feedback winding side minus base side [V]
    4  q_base               stored base charge of the switch [C]
    5  v_output_capacitor   output capacitor voltage (behind its ESR) [V]
    6  v_aux                regulation filter capacitor (feedback-winding method only) [V]
    6/7 v_clamp             RCD clamp capacitor, clamp node minus bus (RCD clamp only) [V]
    then, with ``bus_model="bulk"`` only:
        v_bulk              bulk capacitor, bus to ground [V]
        v_line_phase        line phase oscillator: the line is crest x this [1 V]
        i_line_phase        its quadrature state [A]

Device models
-------------
*Switch* (NPN): charge-control model with one state, the stored base charge
``q`` (Moll 1954; Beaufoy & Sparkes 1957).  Cut-off: no junction current,
``dq/dt = -q / tau_BF``.  Active: the base-emitter junction voltage follows
the stored charge, ``Vbe = V_T ln(1 + q / (tau_F I_S))`` (the collector
current ``q / tau_F`` on the Shockley law, ``I_S`` from ``switch.vbe`` at the
trip current ``limiter.vbe / limiter.sense_resistance`` as in the start-up
analysis; the junction of the Gummel-Poon charge-control model [7]_), as
chords in ``q`` (see *Junction laws* below), plus the base spreading
resistance ``SWITCH_BASE_RESISTANCE``; so the base looks like ``r_pi`` in
parallel with the diffusion capacitance ``C_pi = tau_BF / r_pi`` of the
hybrid-pi model, the junction voltage falls along the law while a reverse
base current draws the charge out, and cut-off comes when the charge is
gone.  Collector current ``q / tau_F`` with ``tau_F = 1 / (2 pi fT)``
and ``dq/dt = i_B - q / tau_BF``, ``tau_BF = hFE tau_F`` (so ``i_C = hFE i_B``
in steady state).  Saturated: collector-emitter ``Vce,sat`` plus a
resistance, ``dq/dt = i_B - i_C / hFE - (q - tau_F i_C) / tau_S``; the
transistor leaves saturation when the excess charge ``q - tau_F i_C`` is
gone, which puts the storage time in the model.  ``tau_S`` is chosen so
that the storage time at the datasheet drive ``I_B1 = I_B2`` with hard
overdrive equals ``switch.storage_time``: ``tau_S = t_s / ln 2``.  In
saturation the junction follows the whole stored charge, excess included,
so it sits ``V_T ln(q / (tau_F i_C))`` above the active-region law (about
18 mV at twofold overdrive).  Base-emitter reverse breakdown at
``switch.vebo``.

*Switch collector-base capacitance* (Miller feedback): the switch's
``output_capacitance`` is the datasheet Cob, measured common-base with the
emitter open, i.e. the collector-base capacitance ``C_mu`` of the
hybrid-pi model [4]_, [5]_; the start-up analysis places it between
collector and base (``notes/circuit.md``).  Here it stays part of the
collector-node capacitor ``C_node`` (with the winding capacitance), and in
every switch state a current-controlled source takes its share
``C_mu / C_node`` of the node-capacitor current out of ground and injects it
into the base: the collector swing fed back into the base, against the
feedback winding.  This takes the base as quiet against the collector (the
injected current is ``C_mu dv_c/dt`` instead of ``C_mu d(v_c - v_b)/dt``:
the base moves by junction voltages, or by the feedback-winding share
``Nf/Np`` of the collector swing, while the collector swings by hundreds of
volts), the Miller approximation [6]_, [5]_, and keeps the state vector
unchanged.  A separate collector-base capacitor state (measured on the
worked cases as they were when the feedback was added) gives the same
dominant pole at the DC point within 0.1 % and the same periodic steady
state of the standby case at full load (frequency and peak current within
0.1 %), but adds a mode of about -2e10 1/s and runs several times slower.
Without the feedback (``C_mu`` lumped to ground) the engine's
regenerative pole at the DC point of the standby worked case (325 V bus,
hFE 30, 25 degC) comes out 29 % faster than the start-up analysis's (1.70e7
against 1.32e7 1/s); with it they agree within 0.5 % (measured 0.4 %,
``tests/test_engine_startup.py``).  The feedback also lifts the base into
the active region for some 100 ns when the collector rises fast at
turn-off without a clamp (a real effect); such an excursion ends in
cut-off without saturating and is not counted as a turn-on
(:func:`rcc.engine.simulate.turn_on_indices`).  The source belongs to the
switch, so its power is booked in the switch's loss (``loss_forms``); the
energy balance still closes (Tellegen), but a real ``C_mu`` is lossless and
the source's cycle average ``-C_mu <v_b dv_c/dt>`` is the approximation's
error there: -4 mW and -12 mW against 0.89 W and 1.29 W of switch loss on
the standby and legacy worked cases at 325 V (under 1 %).  The remaining
difference at the DC point is the chord of the junction law in place of
its tangent, the incremental ``r_pi = hFE V_T / I_C`` [5]_: the
DC-point pole of the standby case is within 0.5 % of the start-up
analysis's, and within -1.0 to +1.7 % at the hFE and temperature corners
at low line (with the former fixed 2 ohm junction: 1-4 %).

*Limiter* (NPN): base-emitter junction as chords of the Shockley law
through ``limiter.vbe`` at 1 mA of collector current (as in the start-up
analysis) with ``LIMITER_BASE_RESISTANCE`` in series, in every conducting
state: cut-off, active (``i_C = hFE i_B``), saturated, and a
"collector-open" state when its collector is pulled below the saturation
voltage with the base driven (no forward collector current; the
inverse-mode current flows once the collector-base junction below
conducts); no charge storage (a small-signal transistor, much faster than
the switch).

*Diodes and zeners*: chords of their exponential laws with series
resistance, blocking below the first chord's zero-current voltage.  The
output rectifier and the clamp diode have their datasheet drop
(``output.rectifier_drop``, ``CLAMP_DIODE_DROP``) across the junction at
1 A, the auxiliary rectifier (``regulation.rectifier_drop``) at 10 mA; the
regulation zener has ``Vz(T)`` at its 5 mA test current and a knee of
60 mV per decade of current (Sze & Ng [8]_, sec. 2.4.2; the slope  # common
practice), with ``regulation.series_resistance`` plus
``REGULATION_ZENER_RESISTANCE`` in series.  The limiter's collector-base
junction is a diode too (from its base into the switch base; the inverse
Ebers-Moll diode with reverse gain 1, 1 mA at ``limiter.vbe``), and in that
inverse-active mode the limiter's emitter carries ``LIMITER_REVERSE_GAIN``
times the junction current into the switch base as well (Ebers & Moll,
Proc. IRE 42, 1954): together they reset the drive capacitor while the
feedback winding holds the switch base negative.
The zener clamp and the optocoupler LED keep a single threshold with a
resistance.

*Junction laws* (:class:`JunctionLaw`, :class:`JunctionSegments`): chords
of ``V(I) = offset + n V_T ln(1 + I / I_S) + R I`` (Shockley [7]_ with
series resistance; emission coefficient 1) between geometric breakpoints:
two chords per decade (``SEGMENTS_PER_DECADE``) where the threshold sets
what the circuit does (start-up, trip, regulation), so every chord lies
below the law by at most ``0.163 n V_T`` (4.2 mV at 25 degC), one per decade
(``COARSE_SEGMENTS_PER_DECADE``) where only a drop in series with volts
does, at most ``0.619 n V_T`` (16 mV); the closed form is in
:class:`JunctionSegments`, the test ``tests/test_engine_junctions.py``
computes the error of every table.  Ranges (first to last breakpoint; the
first chord continues to zero current, where the junction starts or stops
conducting with no jump, the last continues above): fine, switch collector
current 10 uA-10 A (12 chords, in stored charge), limiter base current
100 nA-100 mA (12; collector 10 uA-10 A at hFE 100), zener 10 uA-100 mA
(8), limiter collector-base 10 uA-100 mA (8); coarse, auxiliary rectifier
100 uA-1 A (4), output rectifier and clamp diode 10 mA-10 A (3).  (Two
chords per decade everywhere built about twice as many topologies and ran
a 1000-cycle start-up about 2.5 times slower; one per decade on the
limiter's collector-base junction made the limiter chatter between its
active and saturated states at one instant on the legacy case.)
Below the first breakpoint the current is off by less than that
breakpoint's current.  Every chord is a state of its device (``active/3``,
``on/1``; :func:`state_kind` strips the chord), and moving between chords
is a switching event: it costs events, not accuracy (the field is
continuous across a breakpoint, so its saltation matrix is the identity).
Where thresholds matter this is what a sharp threshold missed: a real
junction conducts microamperes a hundred millivolts and more below its
datasheet voltage, so the regulation zener keeps the limiter on (and the
switch off) after demagnetization until the auxiliary capacitor has drained
further than a threshold model lets it.

*Transformer*: magnetizing inductance (with the core-loss resistance in
parallel) and a leakage inductance in series on the primary side, then an
ideal transformer with the feedback, output and auxiliary windings.  This
magnetizing-plus-leakage form stays well conditioned for coupling near 1.
A resistance ``Q sqrt(L_lk / C_node)`` across the leakage inductance
(:func:`leakage_damping_resistance`, ``Q`` =
``transformer.leakage_ring_quality``, default 4) stands for the loss of
the winding and core at the megahertz of the leakage ring: as an effective
series resistance ``(omega L_lk)^2 / R`` it grows as ``f^2`` like the
proximity-effect loss of a winding (Dowell [9]_), is negligible in the
on-time and the flyback plateau and gives the ring quality factor ``Q``:
it dies within about a microsecond after the clamp lets go, as on a bench,
instead of ringing through the whole flyback (quality factor about 90
before).
The feedback winding sees the magnetizing voltage only (a real winding
couples part of the leakage ring too).  The leakage ring at turn-off still
reaches the base through the switch's collector-base capacitance (above):
on a case without a clamp network the collector rise can lift the base into
the active region for about a hundred nanoseconds, as in a real transistor.  Such an
excursion ends in cut-off without saturating and is not a turn-on
(:func:`rcc.engine.simulate.turn_on_indices`).

*Load*: the project's load law (:data:`rcc.cycle.LOAD_KNEE_FRACTION`,
shared with the cycle model): a resistance; a constant current (below
``LOAD_KNEE_FRACTION`` of the expected output voltage it behaves as a
resistance through the origin, as an electronic load does near zero volts);
a constant power, approximated
by secants of the hyperbola ``i = P / v`` between geometrically spaced
breakpoints (relative current error below ``(r^(1/4) - r^(-1/4))^2`` =
0.43 % for the spacing ``r = 2^(3/16)``), a resistance through the
origin below the first breakpoint and a constant current above the last.

A conductance ``NODE_LEAK_CONDUCTANCE`` from every node to ground keeps the
nodal matrix regular in every topology  # common practice in nodal analysis

References
----------
.. [1] C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal approach
   to network analysis", IEEE Trans. Circuits and Systems 22(6), 1975.
.. [2] J. L. Moll, "Large-signal transient response of junction
   transistors", Proc. IRE 42(12), 1954.
.. [3] R. Beaufoy, J. J. Sparkes, "The junction transistor as a
   charge-controlled device", ATE Journal 13, 1957.
.. [4] L. J. Giacoletto, "Study of p-n-p alloy junction transistor from
   d-c through medium frequencies", RCA Review 15, 1954.
.. [5] P. R. Gray, P. J. Hurst, S. H. Lewis, R. G. Meyer, *Analysis and
   Design of Analog Integrated Circuits*, 5th ed., Wiley, 2009, sec. 1.4
   (hybrid-pi model: ``r_pi = beta_0 / g_m``, ``C_mu`` collector-base) and
   sec. 7.2 (Miller effect).
.. [6] J. M. Miller, "Dependence of the input impedance of a
   three-electrode vacuum tube upon the load in the plate circuit",
   Scientific Papers of the Bureau of Standards 15(351), 1920.
.. [7] W. Shockley, "The theory of p-n junctions in semiconductors and p-n
   junction transistors", Bell Syst. Tech. J. 28(3), 435-489, 1949;
   H. K. Gummel, H. C. Poon, "An integral charge control model of bipolar
   transistors", Bell Syst. Tech. J. 49(5), 827-852, 1970.
.. [8] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed.,
   Wiley, 2007, sec. 2.3 (ideal diode law, eq. 2.48) and sec. 2.4.2
   (junction breakdown).
.. [9] P. L. Dowell, "Effects of eddy currents in transformer windings",
   Proc. IEE 113(8), 1387-1394, 1966.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rcc import devices
from rcc.design import Design, Load
from rcc.limiter import LIMITER_REVERSE_GAIN

__all__ = [
    "build_network",
    "Circuit",
    "Topology",
    "EngineError",
    "build_circuit",
    "SIGNAL_NAMES",
    "SWITCH_STATES",
    "JunctionLaw",
    "JunctionSegments",
    "junction_segments",
    "junction_worst_error",
    "chord_error_bound",
    "state_kind",
    "leakage_damping_resistance",
    "bulk_rectifier",
    "BUS_MODELS",
]

#: Conductance from every node to ground [S]  # common practice (gmin)
NODE_LEAK_CONDUCTANCE = 1e-12
#: Base spreading resistance of the switch [ohm] (shared with the cycle model,
#: :data:`rcc.devices.SWITCH_BASE_RESISTANCE`)
SWITCH_BASE_RESISTANCE = devices.SWITCH_BASE_RESISTANCE
#: Collector-emitter resistance added to Vce,sat in saturation [ohm] (shared
#: with the cycle model, :data:`rcc.devices.SWITCH_SATURATION_RESISTANCE`)
SWITCH_SATURATION_RESISTANCE = devices.SWITCH_SATURATION_RESISTANCE
#: Series resistance of the base-emitter reverse breakdown [ohm]  # common practice
BREAKDOWN_RESISTANCE = 5.0
#: Limiter base resistance, saturation voltage and resistance  # common practice
LIMITER_BASE_RESISTANCE = 10.0
LIMITER_SATURATION_VOLTAGE = 0.1
LIMITER_SATURATION_RESISTANCE = 5.0
#: Diode on-resistances [ohm]  # common practice for small rectifiers (the
#: output rectifier's, shared with the cycle model, in :mod:`rcc.devices`)
OUTPUT_RECTIFIER_RESISTANCE = devices.OUTPUT_RECTIFIER_RESISTANCE
AUX_RECTIFIER_RESISTANCE = 1.0
CLAMP_DIODE_DROP = 1.0
CLAMP_DIODE_RESISTANCE = 1.0
CLAMP_ZENER_RESISTANCE = 2.0
REGULATION_ZENER_RESISTANCE = 10.0
#: Chords per decade of current where a junction's threshold matters (worst
#: error 0.163 n V_T, 4.2 mV at 25 degC: :class:`JunctionSegments`), and where
#: only its drop on volts and more does (0.619 n V_T, 16 mV)
SEGMENTS_PER_DECADE = 2.0
COARSE_SEGMENTS_PER_DECADE = 1.0
#: Breakpoint ranges [A] and chords per decade of the junction tables: the
#: switch collector current (its stored charge), the limiter base current
#: (collector from 10 uA at hFE 100), the regulation zener, the limiter's
#: collector-base junction (fine: they set the start-up, the trip, the
#: regulation and the drive reset), the auxiliary rectifier, and the output
#: rectifier and clamp diode (coarse).  Below the first breakpoint the first chord continues to
#: zero current; above the last the last chord continues.  The switch's table
#: reaches 10 kA: in saturation its junction follows the whole stored charge,
#: and the excess charge over tau_F is hundreds to thousands of amperes
#: (tau_S / tau_F of 10^3 times the excess base current); a table ending at
#: 10 A continued its last chord linearly there and put the junction about
#: 1.1 V too high (pop-1-0011 at 22.3 V, early in a lock-up pulse: the base
#: 2.46 V above the emitter at 0.25 A of base current, 0.49 V of it across
#: the spreading resistance; with the table to 10 kA 1.43 V at 0.29 A, 0.59 V
#: of it across that resistance)
SWITCH_JUNCTION_CURRENTS = (1e-5, 1e4, SEGMENTS_PER_DECADE)
LIMITER_JUNCTION_CURRENTS = (1e-7, 1e-1, SEGMENTS_PER_DECADE)
ZENER_CURRENTS = (1e-5, 1e-1, SEGMENTS_PER_DECADE)
LIMITER_COLLECTOR_BASE_CURRENTS = (1e-5, 1e-1, SEGMENTS_PER_DECADE)
AUX_RECTIFIER_CURRENTS = (1e-4, 1.0, COARSE_SEGMENTS_PER_DECADE)
POWER_RECTIFIER_CURRENTS = (1e-2, 10.0, COARSE_SEGMENTS_PER_DECADE)
#: Collector current at which the limiter's ``vbe`` holds [A] (as in the
#: start-up analysis, :data:`rcc.startup.dcpoint.LIMITER_REFERENCE_CURRENT`)
LIMITER_REFERENCE_CURRENT = 1e-3
#: Currents at which a rectifier's datasheet drop (``output.rectifier_drop``,
#: ``regulation.rectifier_drop``, :data:`CLAMP_DIODE_DROP`) is the junction
#: voltage [A]: power rectifiers quote VF near 1 A, small-signal diodes at
#: 10 mA  # common practice
POWER_RECTIFIER_REFERENCE_CURRENT = 1.0
SIGNAL_RECTIFIER_REFERENCE_CURRENT = 1e-2
#: Regulation zener: ``zener_voltage`` at the test current I_ZT [A] (small
#: zener datasheets quote VZ at 5 mA), knee slope [V/decade], and the current
#: at the foot of the knee where the exponential starts [A]  # common practice
ZENER_REFERENCE_CURRENT = 5e-3
ZENER_KNEE_SLOPE = 0.06
ZENER_KNEE_FOOT_CURRENT = 1e-9
#: Constant-power load: breakpoints from 0.25x to 2x the expected voltage
#: (rcc.cycle.POWER_LOAD_RANGE, the law the cycle model shares)
POWER_LOAD_SEGMENTS = 16
#: Floor on the leakage inductance relative to the magnetizing inductance for
#: a coupling of exactly 1 (no wound transformer comes closer)  # common practice
MIN_LEAKAGE_FRACTION = 1e-4

#: How the bus is modelled (:func:`build_circuit`'s ``bus_model``).
BUS_MODELS = {
    "dc": "an ideal DC source: no line ripple",
    "bulk": "the bulk capacitor charged through the bridge from the sine line: "
            "line-frequency ripple",
}
#: Resistance in series with the conducting bridge: line impedance, bridge
#: diodes' slope and the bulk capacitor's ESR together [ohm]  # common practice
#: (an ohm or two for small supplies without an inrush resistor)
LINE_SOURCE_RESISTANCE = 2.0

#: Guard crossing tolerances: well above the rounding noise of the nodal
#: solution (conductances span about 13 decades), small enough that the
#: switching instant moves by well under a picosecond at the slew rates of
#: this circuit.
VOLTAGE_TOLERANCE = 1e-6
CURRENT_TOLERANCE = 1e-9

#: Named signals every trace carries.
SIGNAL_NAMES = (
    "collector_voltage",
    "primary_current",
    "base_current",
    "limiter_current",
    "feedback_voltage",
    "output_voltage",
    "collector_current",
    "emitter_voltage",
    "base_voltage",
    "output_rectifier_current",
    "clamp_current",
    "bus_current",
    "bus_voltage",
    "line_current",
)

#: States of the switch device, in index order.
SWITCH_STATES = ("off", "active", "saturated", "breakdown")


class EngineError(RuntimeError):
    """The time-domain engine cannot continue (event storm, no consistent
    topology, singular network, step limit)."""


# --------------------------------------------------------------- elements
@dataclass(frozen=True)
class _Element:
    kind: str            # "R", "C", "L", "V", "Istate", "CCCS", "W"
    name: str
    a: str
    b: str
    value: float = 0.0   # R [ohm], C [F], L [H], V0 [V], gain [1], ratio [1]
    resistance: float = 0.0  # series resistance of a V element [ohm]
    state: str = ""      # state variable (C, L, Istate; V: its voltage follows it)
    control: str = ""    # controlling branch (CCCS)
    gain: float = 0.0    # V element with a state: voltage value + gain * state


@dataclass(frozen=True)
class _Guard:
    terms: tuple         # ((kind, key, coefficient), ...)
    target: int
    tolerance: float
    name: str
    gated: bool = True   # fires below zero only while falling (Filippov-style admissibility)
    deep: float = 0.0    # a gated guard below -deep fires anyway (0: 1000 tolerances)


@dataclass(frozen=True)
class _DeviceState:
    name: str
    elements: tuple
    guards: tuple
    charge_law: tuple = ()   # terms of dq/dt (switch only)


@dataclass(frozen=True)
class _Device:
    name: str
    states: tuple


@dataclass(frozen=True)
class Topology:
    """Affine state equation and event guards of one topology.

    Attributes
    ----------
    code : int
        Mixed-radix code of the device states.
    device_states : tuple of int
        State index of every device.
    label : str
        Readable ``device=state`` list.
    A : ndarray, shape (n, n)
        State matrix [1/s].
    b : ndarray, shape (n,)
        Constant input [state unit / s].
    guard_gradients : ndarray, shape (g, n)
        Gradient of every guard function with respect to the state.
    guard_offsets : ndarray, shape (g,)
        Constant of every guard; the topology holds while
        ``guard_gradients @ x + guard_offsets > 0``.
    guard_devices, guard_targets : ndarray of int, shape (g,)
        Device a guard belongs to and the state it switches to.
    guard_tolerances : ndarray, shape (g,)
        Crossing tolerance of every guard (its own unit).
    guard_gated : ndarray of bool, shape (g,)
        Guards that fire only while falling: a topology whose guard is below
        zero but rising at the switching instant is kept (its vector field
        points back into its region, the admissibility rule of Filippov
        systems), which prevents ping-pong between two topologies at one
        instant (a transistor at the edge of saturation, a junction at the
        edge of conduction).  All guards of the flyback are gated.
    guard_deep : ndarray, shape (g,)
        A gated guard below minus this value fires even while rising (a real
        inconsistency, not a bisection overshoot).
    guard_names : tuple of str
    signal_matrix : ndarray, shape (s, n)
    signal_offset : ndarray, shape (s,)
        ``signals = signal_matrix @ x + signal_offset`` in the order of
        :data:`SIGNAL_NAMES`.
    power_forms : dict of str to ndarray, shape (n+1, n+1)
        Symmetric quadratic forms in ``[x, 1]`` of the power delivered by
        the bus (``"input"``), taken by the load (``"output"``), dissipated
        in all other elements (``"loss"``) and flowing into the reactive
        elements (``"stored"``) [W].
    loss_forms : dict of str to ndarray, shape (n+1, n+1)
        The ``"loss"`` form split by element: fixed elements under their own
        name (``"sense"``, ``"drive"``, ``"clamp"``, ...), the elements of a
        device under the device name (``"switch"``, ``"limiter"``,
        ``"clamp_diode"``, ...).  The windings of the ideal transformer
        absorb no net power, so these sum to ``power_forms["loss"]`` [W].
    forms_builder : callable
        Builds ``(power_forms, loss_forms)`` on first use.
    """

    code: int
    device_states: tuple
    label: str
    A: np.ndarray
    b: np.ndarray
    guard_gradients: np.ndarray
    guard_offsets: np.ndarray
    guard_devices: np.ndarray
    guard_targets: np.ndarray
    guard_tolerances: np.ndarray
    guard_gated: np.ndarray
    guard_deep: np.ndarray
    guard_names: tuple
    signal_matrix: np.ndarray
    signal_offset: np.ndarray
    forms_builder: object = field(repr=False, compare=False)
    _forms: dict = field(repr=False, compare=False, default_factory=dict)

    @property
    def power_forms(self) -> dict:
        """See the class attributes (built on first use: only the energy
        integrals need them, not the simulation)."""
        return self._built_forms()["power"]

    @property
    def loss_forms(self) -> dict:
        """See the class attributes (built on first use)."""
        return self._built_forms()["loss"]

    def _built_forms(self) -> dict:
        if not self._forms:
            self._forms["power"], self._forms["loss"] = self.forms_builder()
        return self._forms

    def signals(self, x):
        """Named signals at state(s) ``x`` (shape (n,) or (k, n))."""
        return np.asarray(x) @ self.signal_matrix.T + self.signal_offset

    def vector_field(self, x):
        """``A x + b`` at state ``x`` [state unit / s]."""
        return self.A @ np.asarray(x) + self.b



# -------------------------------------------------------- junction laws
@dataclass(frozen=True)
class JunctionLaw:
    """Exponential law of a junction with series resistance.

    ``V(I) = offset + emission_voltage * ln(1 + I / saturation_current)
    + series_resistance * I`` for a forward current ``I >= 0``: the Shockley
    law ``I = I_S (exp(V_j / (n V_T)) - 1)`` solved for the junction voltage
    ``V_j``, plus the ohmic drop (Shockley 1949 [7]_; Sze & Ng 2007 [8]_,
    eq. 2.48 with series resistance).  A zener in breakdown follows the same
    form above its knee with ``offset`` near the breakdown voltage and an
    emission voltage of about 26 mV (60 mV per decade of current, a
    soft avalanche knee, [8]_ sec. 2.4.2  # common practice for the slope).

    Attributes
    ----------
    saturation_current : float
        ``I_S`` [A].
    emission_voltage : float
        ``n V_T`` [V].
    series_resistance : float
        Ohmic resistance in series [ohm].
    offset : float
        Constant voltage in series (0 for a forward-biased diode; the
        breakdown voltage less the knee for a zener) [V].
    """

    saturation_current: float
    emission_voltage: float
    series_resistance: float
    offset: float = 0.0

    @classmethod
    def through(cls, voltage, current, emission_voltage, series_resistance=0.0,
                saturation_current=None) -> "JunctionLaw":
        """The law through one datasheet point ``(current, voltage)``.

        Parameters
        ----------
        voltage : float
            Terminal voltage at ``current`` [V].
        current : float
            Reference forward current [A].
        emission_voltage : float
            ``n V_T`` [V].
        series_resistance : float
            [ohm].
        saturation_current : float, optional
            Given for a zener (then ``offset`` takes up the rest of the
            voltage); default: from the point with ``offset = 0`` [A].
        """
        junction = voltage - series_resistance * current
        if saturation_current is None:
            if not junction > 0:
                raise ValueError(f"junction voltage {junction!r} at {current!r} A: expected "
                                 "a positive forward voltage [V]")
            return cls(current / math.expm1(junction / emission_voltage), emission_voltage,
                       series_resistance)
        offset = junction - emission_voltage * math.log1p(current / saturation_current)
        return cls(saturation_current, emission_voltage, series_resistance, offset)

    def voltage(self, current):
        """Terminal voltage at forward current(s) ``current`` [A] -> [V]."""
        current = np.asarray(current, dtype=float)
        return (self.offset + self.emission_voltage * np.log1p(current / self.saturation_current)
                + self.series_resistance * current)

    def current(self, voltage):
        """Forward current at terminal voltage(s) ``voltage`` [V] -> [A]
        (Newton on the implicit law; 0 below ``offset``)."""
        voltage = np.asarray(voltage, dtype=float)
        m, i_s, r = self.emission_voltage, self.saturation_current, self.series_resistance
        drive = np.maximum(voltage - self.offset, 0.0)
        i = np.minimum(i_s * np.expm1(np.minimum(drive / m, 700.0)), drive / max(r, 1e-300))
        for _ in range(100):
            f = self.offset + m * np.log1p(i / i_s) + r * i - voltage
            i_new = np.maximum(i - f / (m / (i + i_s) + r), 0.5 * i)
            if np.all(np.abs(i_new - i) <= 1e-14 * np.maximum(i, 1e-300)):
                i = i_new
                break
            i = i_new
        return np.where(voltage > self.offset, i, 0.0)


@dataclass(frozen=True)
class JunctionSegments:
    """Piecewise-linear approximation of a :class:`JunctionLaw`.

    Segment ``k`` is the chord of the law between the breakpoint currents
    ``currents[k]`` and ``currents[k+1]``: a voltage source
    ``drops[k]`` in series with ``resistances[k]``; the last chord
    continues above the last breakpoint, and the first one below the first
    breakpoint down to zero current at ``drops[0]`` (:attr:`threshold`),
    where the junction blocks: below ``currents[0]`` the current is off by
    less than ``currents[0]``, and entering or leaving conduction is
    continuous (zero current on both sides).  The breakpoints are geometric, so every
    chord spans the same current ratio ``r`` and, because ``ln`` is concave,
    lies below the law by at most (tangent-parallel point of the chord)::

        emission_voltage * (ln((r - 1) / ln r) - 1 + ln(r) / (r - 1))

    which is 0.163 ``n V_T`` (4.2 mV at ``n V_T`` = 25.7 mV) for two
    chords per decade and 0.619 ``n V_T`` for one; the series resistance is
    linear and exact.  :func:`junction_worst_error` computes the error on
    a dense grid and the tests check it against this bound.

    Attributes
    ----------
    law : JunctionLaw
    currents : ndarray, shape (k+1,)
        Breakpoint currents, increasing [A].
    voltages : ndarray, shape (k+1,)
        The law at the breakpoints [V].
    drops, resistances : ndarray, shape (k,)
        Chord ``k``: ``V = drops[k] + resistances[k] * I`` [V], [ohm].
    """

    law: JunctionLaw
    currents: np.ndarray
    voltages: np.ndarray
    drops: np.ndarray
    resistances: np.ndarray

    @property
    def threshold(self) -> float:
        """Voltage at which the junction starts conducting: the first chord
        at zero current [V]."""
        return float(self.drops[0])

    def voltage(self, current):
        """Piecewise-linear voltage at forward current(s) ``current >= 0``
        [A] -> [V]."""
        current = np.asarray(current, dtype=float)
        k = np.clip(np.searchsorted(self.currents, current, side="right") - 1, 0,
                    len(self.drops) - 1)
        return self.drops[k] + self.resistances[k] * current

    def current(self, voltage):
        """Piecewise-linear current at voltage(s) ``voltage`` [V] -> [A]
        (0 below the threshold)."""
        voltage = np.asarray(voltage, dtype=float)
        k = np.clip(np.searchsorted(self.voltages, voltage, side="right") - 1, 0,
                    len(self.drops) - 1)
        return np.maximum((voltage - self.drops[k]) / self.resistances[k], 0.0)


def junction_segments(law: JunctionLaw, lowest: float, highest: float,
                      per_decade: float = 2.0) -> JunctionSegments:
    """Chords of a junction law between geometric breakpoints.

    Parameters
    ----------
    law : JunctionLaw
    lowest, highest : float
        First and last breakpoint current [A].
    per_decade : float
        Chords per decade of current [1].

    Returns
    -------
    JunctionSegments
    """
    count = max(1, int(round(per_decade * math.log10(highest / lowest))))
    currents = np.geomspace(lowest, highest, count + 1)
    voltages = law.voltage(currents)
    resistances = np.diff(voltages) / np.diff(currents)
    drops = voltages[:-1] - resistances * currents[:-1]
    return JunctionSegments(law, currents, voltages, drops, resistances)


def junction_worst_error(segments: JunctionSegments, points: int = 20001) -> float:
    """Largest gap between the chords and the exponential law.

    Parameters
    ----------
    segments : JunctionSegments
        The chord table and its law.
    points : int
        Currents of the geometric grid over the breakpoint range [1].

    Returns
    -------
    float
        ``max |V_pwl(I) - V(I)|`` over the grid [V].
    """
    grid = np.geomspace(segments.currents[0], segments.currents[-1], points)
    return float(np.max(np.abs(segments.voltage(grid) - segments.law.voltage(grid))))


def chord_error_bound(ratio: float, emission_voltage: float) -> float:
    """Largest gap between a logarithmic law and its chord.

    Parameters
    ----------
    ratio : float
        Current ratio spanned by the chord [1].
    emission_voltage : float
        ``n V_T`` of the law ``n V_T ln(I)`` [V].

    Returns
    -------
    float
        ``n V_T (ln((r-1)/ln r) - 1 + ln r/(r-1))``, the gap at the point
        where the law's slope equals the chord's (closed form in
        :class:`JunctionSegments`) [V].
    """
    log_ratio = math.log(ratio)
    return emission_voltage * (math.log((ratio - 1.0) / log_ratio) - 1.0
                               + log_ratio / (ratio - 1.0))


# ---------------------------------------------------------------- circuit
@dataclass(frozen=True)
class Circuit:
    """The piecewise-linear circuit of one design at one operating condition.

    Attributes
    ----------
    design : Design
    bus_voltage : float
        DC bus voltage [V].
    load : Load
    temperature : float
        Junction temperature of all devices [K].
    hfe : float
        Switch current gain used (at ``temperature``) [1].
    state_names : tuple of str
        Order of the state vector.
    device_names : tuple of str
    device_state_names : tuple of tuple of str
    parameters : dict
        Device thresholds and time constants in SI units: ``vbe``,
        ``vce_sat``, ``vebo``, ``tau_forward``, ``tau_storage``, ``hfe``,
        ``limiter_vbe``, ``zener_voltage``, ``expected_output_voltage`` ...
    """

    design: Design
    bus_voltage: float
    load: Load
    temperature: float
    hfe: float
    state_names: tuple
    device_names: tuple
    device_state_names: tuple
    parameters: dict
    _elements: tuple = field(repr=False)
    _devices: tuple = field(repr=False)
    _nodes: tuple = field(repr=False)
    _signals: dict = field(repr=False)
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    # -------------------------------------------------------------- codes
    @property
    def n_states(self) -> int:
        """Length of the state vector."""
        return len(self.state_names)

    @property
    def radices(self) -> tuple:
        """Number of states of every device."""
        return tuple(len(device.states) for device in self._devices)

    @property
    def weights(self) -> tuple:
        """Mixed-radix weight of every device in a topology code."""
        weights, running = [], 1
        for radix in self.radices:
            weights.append(running)
            running *= radix
        return tuple(weights)

    @property
    def n_codes(self) -> int:
        """Number of possible topology codes."""
        return int(np.prod(self.radices))

    def encode(self, device_states) -> int:
        """Topology code of a tuple of device state indices."""
        return int(sum(s * w for s, w in zip(device_states, self.weights)))

    def decode(self, code: int) -> tuple:
        """Device state indices of a topology code."""
        return tuple((int(code) // w) % r for w, r in zip(self.weights, self.radices))

    def state_kinds(self, device: str) -> tuple:
        """Kind of every state of ``device`` (:func:`state_kind`: the state
        name without its junction chord), in state-index order."""
        return tuple(state_kind(name)
                     for name in self.device_state_names[self.device_index(device)])

    @property
    def max_guards(self) -> int:
        """Most guards any topology can have (the sum over devices of the
        most guards of one of their states)."""
        return sum(max(len(state.guards) for state in device.states)
                   for device in self._devices)

    def state_index(self, name: str) -> int:
        """Position of a state variable in the state vector."""
        return self.state_names.index(name)

    def device_index(self, name: str) -> int:
        """Position of a device in the device list."""
        return self.device_names.index(name)

    # ----------------------------------------------------------- topology
    def topology(self, code: int) -> Topology:
        """The affine system and guards of one topology (built once, cached)."""
        code = int(code)
        if code not in self._cache:
            self._cache[code] = _build_topology(self, code)
        return self._cache[code]

    def stored_energy(self, x) -> float:
        """Energy in all capacitors and inductors at state ``x`` [J]:
        ``sum C v^2 / 2 + sum L i^2 / 2``."""
        x = np.asarray(x, dtype=float)
        total = 0.0
        for element in self._elements:
            if element.kind in ("C", "L"):
                total += 0.5 * element.value * x[self.state_index(element.state)] ** 2
        return float(total)

    def label(self, code: int) -> str:
        """Readable description of a topology code."""
        states = self.decode(code)
        return ", ".join(f"{device.name}={device.states[s].name}"
                         for device, s in zip(self._devices, states))


#: Public names of the building blocks, for :func:`build_network`.
Element = _Element
Guard = _Guard
DeviceState = _DeviceState
Device = _Device


# ------------------------------------------------------------- the builder
def _expected_output_voltage(design: Design, temperature: float) -> float:
    """Output voltage the regulation aims at, for load breakpoints only [V]
    (:func:`rcc.cycle.expected_output_voltage`, shared with the cycle model's
    load law)."""
    from rcc.cycle import expected_output_voltage

    return expected_output_voltage(design, temperature)


def leakage_damping_resistance(design: Design) -> float:
    """Resistance across the leakage inductance that gives its ring with the
    node capacitance the quality factor ``transformer.leakage_ring_quality``
    [ohm].

    Parameters
    ----------
    design : Design

    Returns
    -------
    float
        ``Q sqrt(L_lk / C_node)`` [ohm].

    Notes
    -----
    The loss of a real winding at the megahertz of the leakage ring (eddy
    and proximity currents in the copper, core and dielectric loss) grows
    with frequency: a resistance ``R_p`` across the leakage inductance is an
    effective series resistance ``(omega L)^2 / R_p``, rising as ``f^2`` (the
    low-frequency proximity-effect law of Dowell 1966 [9]_), negligible in
    the on-time and the flyback plateau, where the leakage carries a slowly
    changing current, and ``sqrt(L/C)/Q`` at the ring.  A parallel RLC with
    ``R_p = Q sqrt(L/C)`` has quality factor ``Q`` (any circuits text, e.g.
    Nilsson & Riedel, *Electric Circuits*, ch. 8 and 9).
    """
    leakage = max(design.transformer.leakage_inductance,
                  MIN_LEAKAGE_FRACTION * design.transformer.magnetizing_inductance)
    return design.transformer.leakage_ring_quality * math.sqrt(
        leakage / design.node_capacitance)


def build_circuit(design: Design, bus_voltage: float, load: Load, temperature: float,
                  hfe: float | None = None, bus_model: str = "dc") -> Circuit:
    """Build the piecewise-linear circuit of a design at one operating condition.

    Parameters
    ----------
    design : Design
        The validated design.
    bus_voltage : float
        DC bus voltage [V]; with ``bus_model="bulk"`` the rectified crest
        ``sqrt(2) V_rms - input.bridge_drop``, where the bulk capacitor starts
        (:func:`rcc.mains.rectified_peak`).
    load : Load
        Output load (current, resistance or power).
    temperature : float
        Junction temperature of all semiconductors [K].
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.  The
        temperature law of :func:`rcc.devices.current_gain` is applied.
    bus_model : {"dc", "bulk"}
        ``"dc"``: the bus is an ideal DC source.  ``"bulk"`` (AC input only):
        the bus is the bulk capacitor ``input.bulk_capacitance``, charged
        from the line ``V_pk cos(2 pi f_line t)`` through a full-wave bridge
        (:data:`BUS_MODELS`).

    Returns
    -------
    Circuit

    Raises
    ------
    ValueError
        On a non-positive bus voltage, an unknown load kind or bus model, or
        ``"bulk"`` for DC input.

    Notes
    -----
    Element values come from the design keys listed in ``notes/circuit.md``;
    temperature laws from :mod:`rcc.devices`.  Model constants not in the
    design file (junction resistances, limiter saturation voltage) are module
    constants, marked as common practice.

    The bulk model is the capacitor-input full-wave rectifier: the bridge
    conducts only near the line crest, while the rectified line exceeds the
    capacitor voltage by the bridge drop, and recharges the capacitor; between
    crests the capacitor alone feeds the converter and discharges (Mohan,
    Undeland & Robbins [2]_, the chapter on diode rectifiers with a
    capacitor on the DC side  # from memory: ch. 5).  The two conducting
    bridge diodes are one diode of drop ``input.bridge_drop`` per half-wave,
    in series with :data:`LINE_SOURCE_RESISTANCE`.  The line is a pure sine
    from an undamped linear oscillator (two states, exact under the
    engine's matrix exponentials); the run starts at the line crest with the
    bulk capacitor charged to it, as after the first half-cycles at power-on
    (inrush is not modelled).  The line sources' power is the input power,
    the bridge's loss is booked under ``bridge_positive`` / ``bridge_negative``.

    References
    ----------
    .. [1] C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal
       approach to network analysis", IEEE Trans. Circuits and Systems 22(6),
       504-509, 1975.
    .. [2] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics:
       Converters, Applications, and Design*, 3rd ed., Wiley, 2003.
    """
    if bus_model not in BUS_MODELS:
        raise ValueError(f"bus_model = {bus_model!r}: expected one of "
                         f"{', '.join(BUS_MODELS)}")
    if bus_model == "bulk" and not design.input.is_ac:
        raise ValueError("bus_model = 'bulk': expected a design with AC input "
                         "(a DC input has no bridge and bulk capacitor)")
    if not (bus_voltage > 0 and math.isfinite(bus_voltage)):
        raise ValueError(f"bus_voltage = {bus_voltage!r}: expected a positive voltage [V]")
    if load.kind not in ("current", "resistance", "power"):
        raise ValueError(f"load kind {load.kind!r}: expected current, resistance or power")
    sw, tr, dr, lim = design.switch, design.transformer, design.drive, design.limiter
    reg, out, clamp = design.regulation, design.output, design.clamp
    hfe25 = sw.hfe_typ if hfe is None else float(hfe)
    gain = float(devices.current_gain(hfe25, sw.hfe_tempco, temperature))
    vbe = float(devices.base_emitter_voltage(sw.vbe, sw.vbe_tempco, temperature))
    limiter_vbe = float(devices.base_emitter_voltage(lim.vbe, lim.vbe_tempco, temperature))
    tau_f = 1.0 / (2.0 * math.pi * sw.transition_frequency)
    tau_bf = gain * tau_f
    tau_s = sw.storage_time / math.log(2.0)
    expected = _expected_output_voltage(design, temperature)
    leakage = max(tr.leakage_inductance, MIN_LEAKAGE_FRACTION * tr.magnetizing_inductance)
    sign = 1.0 if tr.feedback_phase == "regenerative" else -1.0
    np_turns = tr.primary_turns
    has_aux = reg.method == "feedback-winding"
    has_rcd = clamp.type == "rcd"

    states = ["i_leakage", "i_magnetizing", "v_node", "v_drive", "q_base",
              "v_output_capacitor"]
    if has_aux:
        states.append("v_aux")
    if has_rcd:
        states.append("v_clamp")
    bulk = bus_model == "bulk"

    E = _Element
    if bulk:
        bulk_elements, bridge, bulk_states = bulk_rectifier(design, bus_voltage)
        states += bulk_states
        els = list(bulk_elements)
    else:
        els = [E("V", "bus", "bus", "0", bus_voltage)]
    primary_top = "bus"
    if tr.primary_resistance > 0:
        els.append(E("R", "primary_resistance", "bus", "p1", tr.primary_resistance))
        primary_top = "p1"
    els += [
        E("L", "leakage", primary_top, "m", leakage, state="i_leakage"),
        E("R", "leakage_damping", primary_top, "m", leakage_damping_resistance(design)),
        E("L", "magnetizing", "m", "c", tr.magnetizing_inductance, state="i_magnetizing"),
        E("R", "core_loss", "m", "c", tr.core_loss_resistance),
        E("C", "node", "c", "0", design.node_capacitance, state="v_node"),
        E("W", "feedback_winding", "f", "0", sign * tr.feedback_turns / np_turns),
        E("W", "output_winding", "s", "0", -tr.output_turns / np_turns),
        E("R", "startup", "bus", "b", design.startup.resistance),
        E("C", "drive", "f", "d", dr.capacitance, state="v_drive"),
        E("R", "drive", "d", "b", dr.resistance),
        E("R", "sense", "e", "0", lim.sense_resistance),
        E("R", "limiter_base", "e", "l", lim.base_resistance),
    ]
    if dr.base_emitter_resistance is not None:
        els.append(E("R", "base_emitter", "b", "e", dr.base_emitter_resistance))
    output_node = "o"
    if out.esr > 0:
        els.append(E("R", "esr", "o", "oc", out.esr))
        output_node = "oc"
    els.append(E("C", "output", output_node, "0", out.capacitance, state="v_output_capacitor"))
    if has_aux:
        els += [E("W", "aux_winding", "w", "0", -tr.feedback_turns / np_turns),
                E("C", "aux", "a", "0", reg.filter_capacitance, state="v_aux")]
    if has_rcd:
        els += [E("C", "clamp", "k", "bus", clamp.capacitance, state="v_clamp"),
                E("R", "clamp", "k", "bus", clamp.resistance)]
    if load.kind == "resistance":
        els.append(E("R", "load", "o", "0", load.value if load.value > 0 else 1e12))

    G = _Guard
    DS = _DeviceState
    devs = []
    # ----- switch
    # collector-base capacitance: its share of the node-capacitor current,
    # from ground into the base, in every state (Miller feedback, see the
    # module docstring)
    miller = E("CCCS", "q1_collector_base", "0", "b",
               sw.output_capacitance / design.node_capacitance, control="node")
    v_tol, i_tol = VOLTAGE_TOLERANCE, CURRENT_TOLERANCE
    # charge tolerance: the charge of 1 pA of collector current; the guards
    # are gated (a negative charge that is rising again does not switch back:
    # the active region recovers it), and the end of storage fires while
    # rising only beyond the charge of 1 uA
    q_tol = tau_f * 1e-3 * CURRENT_TOLERANCE
    q_deep = tau_f * 1e3 * CURRENT_TOLERANCE   # the charge of 1 uA of collector current
    vbe_open = (("v", "b", 1.0), ("v", "e", -1.0))
    vt = float(devices.thermal_voltage(temperature))
    # base-emitter junction: its voltage follows the stored charge,
    # Vbe = V_T ln(1 + q / (tau_F I_S)) (the collector current q / tau_F on
    # the Shockley law; I_S from switch.vbe at the trip current, as in the
    # start-up analysis), as chords in q, plus the base spreading resistance
    trip = limiter_vbe / lim.sense_resistance
    switch_junction = junction_segments(JunctionLaw.through(vbe, trip, vt),
                                        *SWITCH_JUNCTION_CURRENTS)
    chords = len(switch_junction.drops)
    # state order: off, active/1..K, saturated/1..K, breakdown
    active0, saturated0, breakdown = 1, 1 + chords, 1 + 2 * chords
    collector_active = E("Istate", "q1_collector", "c", "e", 1.0 / tau_f, state="q_base")
    collector_saturated = E("V", "q1_ce", "c", "e", sw.vce_sat, SWITCH_SATURATION_RESISTANCE)
    active_law = (("i", "q1_be", 1.0), ("x", "q_base", -1.0 / tau_bf))
    saturated_law = (("i", "q1_be", 1.0), ("i", "q1_ce", -1.0 / gain),
                     ("x", "q_base", -1.0 / tau_s), ("i", "q1_ce", tau_f / tau_s))

    def charge_guards(k, first):
        """Chord ``k`` of the junction holds for ``q`` between the charges of
        its breakpoint currents; below the first chord the stored charge is
        gone (cut-off)."""
        guards = []
        if k == 0:
            guards.append(G((("x", "q_base", 1.0),), 0, q_tol, "switch stored charge gone",
                            deep=math.inf))
        else:
            low = tau_f * float(switch_junction.currents[k])
            guards.append(G((("x", "q_base", 1.0), ("c", "", -low)), first + k - 1, q_tol,
                            "switch charge below a junction breakpoint"))
        if k + 1 < chords:
            high = tau_f * float(switch_junction.currents[k + 1])
            guards.append(G((("c", "", high), ("x", "q_base", -1.0)), first + k + 1, q_tol,
                            "switch charge above a junction breakpoint"))
        return tuple(guards)

    switch_states = [DS("off", (miller,), (
        G((("c", "", switch_junction.threshold),) + _scale(vbe_open, -1.0), active0,
          v_tol, "switch base reaches its junction threshold"),
        G((("c", "", sw.vebo),) + vbe_open, breakdown, v_tol, "switch base-emitter breakdown"),
    ), (("x", "q_base", -1.0 / tau_bf),))]
    for kind, first in (("active", active0), ("saturated", saturated0)):
        for k in range(chords):
            junction = E("V", "q1_be", "b", "e", float(switch_junction.drops[k]),
                         SWITCH_BASE_RESISTANCE, state="q_base",
                         gain=float(switch_junction.resistances[k]) / tau_f)
            if kind == "active":
                own = (G((("v", "c", 1.0), ("v", "e", -1.0), ("c", "", -sw.vce_sat)),
                         saturated0 + k, v_tol, "switch saturates"),)
                chord = charge_guards(k, first)
                switch_states.append(DS(f"active/{k + 1}", (junction, miller, collector_active),
                                        own + chord, active_law))
            else:
                own = (G((("x", "q_base", 1.0), ("i", "q1_ce", -tau_f)), active0 + k, q_tol,
                         "switch excess charge gone (end of storage)", deep=q_deep),)
                chord = charge_guards(k, first)[1 if k == 0 else 0:]
                switch_states.append(DS(f"saturated/{k + 1}",
                                        (junction, miller, collector_saturated),
                                        own + chord, saturated_law))
    switch_states.append(DS("breakdown", (miller, E("V", "q1_eb", "e", "b", sw.vebo,
                                                    BREAKDOWN_RESISTANCE)), (
        G((("i", "q1_eb", 1.0),), 0, i_tol, "base-emitter breakdown ends"),
    ), (("x", "q_base", -1.0 / tau_bf),)))
    devs.append(_Device("switch", tuple(switch_states)))
    # ----- limiter
    limiter_junction = junction_segments(
        JunctionLaw.through(limiter_vbe + LIMITER_BASE_RESISTANCE * LIMITER_REFERENCE_CURRENT
                            / lim.hfe, LIMITER_REFERENCE_CURRENT / lim.hfe, vt,
                            LIMITER_BASE_RESISTANCE), *LIMITER_JUNCTION_CURRENTS)
    chords2 = len(limiter_junction.drops)
    # state order: off, active/1..K, saturated/1..K, collector-open/1..K
    active2, saturated2, open2 = 1, 1 + chords2, 1 + 2 * chords2
    limiter_states = [DS("off", (), (G((("c", "", limiter_junction.threshold), ("v", "l", -1.0)),
                                       active2, v_tol, "limiter base reaches its threshold"),))]
    for kind, first in (("active", active2), ("saturated", saturated2),
                        ("collector-open", open2)):
        for k in range(chords2):
            q2_be = E("V", "q2_be", "l", "0", float(limiter_junction.drops[k]),
                      float(limiter_junction.resistances[k]))
            chord = _segment_guards("q2_be", limiter_junction, k, first + k - 1 if k else 0,
                                    first + k + 1 if k + 1 < chords2 else None)
            if kind == "active":
                elements = (q2_be, E("CCCS", "q2_collector", "b", "0", lim.hfe,
                                     control="q2_be"))
                own = (G((("v", "b", 1.0), ("c", "", -LIMITER_SATURATION_VOLTAGE)),
                         saturated2 + k, v_tol, "limiter saturates"),)
            elif kind == "saturated":
                elements = (q2_be, E("V", "q2_ce", "b", "0", LIMITER_SATURATION_VOLTAGE,
                                     LIMITER_SATURATION_RESISTANCE))
                own = (G((("i", "q2_be", lim.hfe), ("i", "q2_ce", -1.0)), active2 + k, i_tol,
                         "limiter leaves saturation"),
                       G((("i", "q2_ce", 1.0),), open2 + k, i_tol,
                         "limiter collector current reverses"))
            else:
                elements = (q2_be,)
                own = (G((("c", "", LIMITER_SATURATION_VOLTAGE), ("v", "b", -1.0)),
                         saturated2 + k, v_tol, "limiter collector rises to saturation"),)
            limiter_states.append(DS(f"{kind}/{k + 1}", elements, own + chord))
    devs.append(_Device("limiter", tuple(limiter_states)))
    # the limiter's collector-base junction: conducts from its base into the
    # switch base once the feedback winding pulls that below about -Vbe, and
    # so resets the drive capacitor through R_lb (notes/circuit.md); the
    # inverse Ebers-Moll diode with reverse gain 1 carries the limiter's
    # reference current at its Vbe, and the emitter, now the collector,
    # pulls beta_R times that current from ground into the switch base
    # (inverse-active mode, Ebers & Moll 1954)
    junctions = {"switch": switch_junction, "limiter": limiter_junction}
    junctions["limiter_collector_base"] = junction_segments(
        JunctionLaw.through(limiter_vbe + LIMITER_BASE_RESISTANCE * LIMITER_REFERENCE_CURRENT,
                            LIMITER_REFERENCE_CURRENT, vt, LIMITER_BASE_RESISTANCE),
        *LIMITER_COLLECTOR_BASE_CURRENTS)
    devs.append(_junction("limiter_collector_base", "l", "b",
                          junctions["limiter_collector_base"],
                          extra=(E("CCCS", "limiter_inverse", "0", "b", LIMITER_REVERSE_GAIN,
                                   control="limiter_collector_base"),)))
    junctions["output_rectifier"] = _rectifier_segments(
        out.rectifier_drop, OUTPUT_RECTIFIER_RESISTANCE, POWER_RECTIFIER_REFERENCE_CURRENT,
        POWER_RECTIFIER_CURRENTS, vt)
    devs.append(_junction("output_rectifier", "s", "o", junctions["output_rectifier"]))
    zener_v = None
    if has_aux:
        junctions["aux_rectifier"] = _rectifier_segments(
            reg.rectifier_drop, AUX_RECTIFIER_RESISTANCE, SIGNAL_RECTIFIER_REFERENCE_CURRENT,
            AUX_RECTIFIER_CURRENTS, vt)
        devs.append(_junction("aux_rectifier", "w", "a", junctions["aux_rectifier"]))
        zener_v = float(devices.zener_voltage(reg.zener_voltage, reg.zener_tempco, temperature))
        resistance = reg.series_resistance + REGULATION_ZENER_RESISTANCE
        junctions["regulation_zener"] = junction_segments(
            JunctionLaw.through(zener_v + resistance * ZENER_REFERENCE_CURRENT,
                                ZENER_REFERENCE_CURRENT, ZENER_KNEE_SLOPE / math.log(10.0),
                                resistance, saturation_current=ZENER_KNEE_FOOT_CURRENT),
            *ZENER_CURRENTS)
        devs.append(_junction("regulation_zener", "a", "l", junctions["regulation_zener"]))
    elif reg.method == "optocoupler":
        devs.append(_diode("optocoupler_led", "o", "0", reg.reference_voltage + reg.led_drop,
                           reg.series_resistance,
                           extra=(E("CCCS", "phototransistor", "0", "l", reg.ctr,
                                    control="optocoupler_led"),)))
    if clamp.type == "zener":
        devs.append(_diode("clamp_zener", "c", "bus", clamp.voltage, CLAMP_ZENER_RESISTANCE))
    elif has_rcd:
        junctions["clamp_diode"] = _rectifier_segments(
            CLAMP_DIODE_DROP, CLAMP_DIODE_RESISTANCE, POWER_RECTIFIER_REFERENCE_CURRENT,
            POWER_RECTIFIER_CURRENTS, vt)
        devs.append(_junction("clamp_diode", "c", "k", junctions["clamp_diode"]))
    if load.kind in ("current", "power"):
        devs.append(_load_device(load, expected))
    if bulk:
        devs += bridge

    signals = {
        "collector_voltage": lambda on: (("v", "c", 1.0),),
        "primary_current": lambda on: (("x", "i_leakage", 1.0),),
        "base_current": lambda on: (("i", "q1_be", 1.0), ("i", "q1_eb", -1.0)),
        "limiter_current": lambda on: (
            ("i", "q2_be", lim.hfe) if on["limiter"] == "active" else ("i", "q2_ce", 1.0),),
        "feedback_voltage": lambda on: (("v", "f", 1.0),),
        "output_voltage": lambda on: (("v", "o", 1.0),),
        "collector_current": lambda on: (
            ("x", "q_base", 1.0 / tau_f) if on["switch"] == "active" else ("i", "q1_ce", 1.0),),
        "emitter_voltage": lambda on: (("v", "e", 1.0),),
        "base_voltage": lambda on: (("v", "b", 1.0),),
        "output_rectifier_current": lambda on: (("i", "output_rectifier", 1.0),),
        "clamp_current": lambda on: (("i", "clamp_zener", 1.0), ("i", "clamp_diode", 1.0)),
        "bus_current": lambda on: (
            (("i", "bridge_positive", 1.0), ("i", "bridge_negative", 1.0), ("i", "bulk", -1.0))
            if bulk else (("i", "bus", -1.0),)),
        "bus_voltage": lambda on: (("v", "bus", 1.0),),
        "line_current": lambda on: (("i", "bridge_positive", 1.0),
                                    ("i", "bridge_negative", -1.0)),
    }

    parameters = {
        "vbe": vbe, "vce_sat": sw.vce_sat, "vebo": sw.vebo, "hfe": gain,
        "tau_forward": tau_f, "tau_base": tau_bf, "tau_storage": tau_s,
        "limiter_vbe": limiter_vbe, "limiter_hfe": lim.hfe,
        "zener_voltage": zener_v, "leakage_inductance": leakage,
        "magnetizing_inductance": tr.magnetizing_inductance,
        "node_capacitance": design.node_capacitance,
        "collector_base_capacitance": sw.output_capacitance,
        "expected_output_voltage": expected,
        "feedback_ratio": sign * tr.feedback_turns / np_turns,
        "output_ratio": tr.output_turns / np_turns,
        "junctions": junctions,
        "leakage_damping_resistance": leakage_damping_resistance(design),
        "bus_model": bus_model,
    }
    if bulk:
        parameters.update({
            "line_crest": bus_voltage + design.input.bridge_drop,
            "line_frequency": design.input.line_frequency,
            "bulk_capacitance": design.input.bulk_capacitance,
            # power-on: at the line crest, the bulk capacitor charged to it
            "initial_state": {"v_bulk": bus_voltage, "v_line_phase": 1.0},
            # not solved for at a DC point: the line and the bulk capacitor
            "held_states": ("v_bulk", "v_line_phase", "i_line_phase"),
        })
    return _make_circuit(els, devs, states, signals, parameters, design=design,
                         bus_voltage=float(bus_voltage), load=load,
                         temperature=float(temperature), hfe=gain)


#: Capacitance of the line phase oscillator [F] (its inductance follows from
#: the line frequency; only the product matters).
LINE_PHASE_CAPACITANCE = 1.0


def bulk_rectifier(design: Design, rectified_crest: float):
    """Line, full-wave bridge and bulk capacitor of ``bus_model="bulk"``.

    Parameters
    ----------
    design : Design
        An AC-input design (``input.bulk_capacitance``, ``line_frequency``,
        ``bridge_drop``) [-].
    rectified_crest : float
        Line crest less the bridge drop [V].

    Returns
    -------
    elements : tuple of Element
        The bulk capacitor from node ``bus`` to ground, the line phase
        oscillator and the two line sources [-].
    devices : tuple of Device
        The two halves of the bridge, ``bridge_positive`` and
        ``bridge_negative``, into node ``bus`` [-].
    state_names : list of str
        ``["v_bulk", "v_line_phase", "i_line_phase"]`` [-].

    Notes
    -----
    The line phase is an isolated LC oscillator of unit amplitude at the
    line frequency (``C = 1 F``, ``L = 1 / (omega^2 C)``, start at
    ``v = 1``: ``cos(omega t)``); two voltage sources follow it, ``+V_pk``
    and ``-V_pk`` times its voltage, each feeding the bus through one diode
    of drop ``input.bridge_drop`` (the two conducting diodes of the bridge
    together) and :data:`LINE_SOURCE_RESISTANCE`.
    """
    crest = rectified_crest + design.input.bridge_drop
    omega = 2.0 * math.pi * design.input.line_frequency
    E = _Element
    elements = (
        E("C", "bulk", "bus", "0", design.input.bulk_capacitance, state="v_bulk"),
        E("C", "line_phase", "lt", "0", LINE_PHASE_CAPACITANCE, state="v_line_phase"),
        E("L", "line_phase_inductor", "lt", "0", 1.0 / (omega ** 2 * LINE_PHASE_CAPACITANCE),
          state="i_line_phase"),
        E("V", "line_positive", "lp", "0", 0.0, state="v_line_phase", gain=crest),
        E("V", "line_negative", "ln", "0", 0.0, state="v_line_phase", gain=-crest),
    )
    bridge = tuple(_diode(name, node, "bus", design.input.bridge_drop, LINE_SOURCE_RESISTANCE)
                   for name, node in (("bridge_positive", "lp"), ("bridge_negative", "ln")))
    return elements, bridge, ["v_bulk", "v_line_phase", "i_line_phase"]


#: Elements whose delivered power is the circuit's input power.
INPUT_SOURCES = ("bus", "line_positive", "line_negative")


def build_network(elements, devices_, state_names, signals=None, parameters=None) -> Circuit:
    """A circuit from an explicit element and device list (tests, small studies).

    Parameters
    ----------
    elements : sequence of _Element
        Fixed elements (kinds ``R``, ``C``, ``L``, ``V``, ``I``, ``Istate``,
        ``CCCS``; windings ``W`` refer to primary nodes ``m`` and ``c``).
    devices_ : sequence of _Device
        Switching devices with their states and guards.
    state_names : sequence of str
        State vector order; every capacitor and inductor names its state.
    signals : dict, optional
        Signal name -> callable(device states by name) -> term list.
    parameters : dict, optional
        ``"node_leak_conductance"`` overrides the node-to-ground conductance
        :data:`NODE_LEAK_CONDUCTANCE` [S]
        (0 for closed-form checks on networks without floating nodes).

    Returns
    -------
    Circuit
        With ``design=None`` and no bus or load.
    """
    return _make_circuit(elements, devices_, state_names, signals or {}, parameters or {},
                         design=None, bus_voltage=float("nan"), load=None,
                         temperature=float("nan"), hfe=float("nan"))


def _make_circuit(elements, devices_, state_names, signals, parameters, **condition) -> Circuit:
    """The circuit of an element and device list; its nodes are those the
    elements (fixed or in any device state) connect."""
    nodes = {"0"}
    for element in elements:
        nodes.update((element.a, element.b))
    for device in devices_:
        for state in device.states:
            for element in state.elements:
                nodes.update((element.a, element.b))
    return Circuit(
        state_names=tuple(state_names),
        device_names=tuple(d.name for d in devices_),
        device_state_names=tuple(tuple(s.name for s in d.states) for d in devices_),
        parameters=dict(parameters), _elements=tuple(elements), _devices=tuple(devices_),
        _nodes=("0",) + tuple(sorted(nodes - {"0"})), _signals=dict(signals), **condition)


def _scale(terms, factor):
    return tuple((kind, key, coefficient * factor) for kind, key, coefficient in terms)


def _rectifier_segments(drop, resistance, reference_current, currents, thermal_voltage_):
    """Chords of a rectifier: the Shockley law (emission coefficient 1)
    whose junction voltage is ``drop`` at ``reference_current``, with
    ``resistance`` in series."""
    return junction_segments(
        JunctionLaw.through(drop + resistance * reference_current, reference_current,
                            thermal_voltage_, resistance), *currents)


def _diode(name, anode, cathode, drop, resistance, extra=()):
    """Diode or zener (breakdown direction given as anode -> cathode):
    forward drop plus resistance when conducting, open when blocking."""
    on = _Element("V", name, anode, cathode, drop, resistance)
    return _Device(name, (
        _DeviceState("off", (), (
            _Guard((("c", "", drop), ("v", anode, -1.0), ("v", cathode, 1.0)), 1,
                   VOLTAGE_TOLERANCE, f"{name} starts conducting"),)),
        _DeviceState("on", (on,) + tuple(extra), (
            _Guard((("i", name, 1.0),), 0, CURRENT_TOLERANCE, f"{name} current ends"),)),
    ))


def state_kind(name: str) -> str:
    """Kind of a device state.

    Parameters
    ----------
    name : str
        State name, with the junction chord after a slash [-].

    Returns
    -------
    str
        The name without the chord (``"active/3"`` -> ``"active"``,
        ``"on/1"`` -> ``"on"``, ``"off"`` -> ``"off"``) [-].
    """
    return name.partition("/")[0]


def _segment_guards(branch, segments, index, below, above, scale=1.0):
    """Guards that move a junction from chord ``index`` to its neighbours:
    below ``currents[index]`` (below zero for the first chord) to state
    ``below``, above
    ``currents[index + 1]`` to ``above`` (None: the last chord continues).
    ``scale`` multiplies the branch current (-1 for a branch that carries
    the junction current backwards)."""
    low = float(segments.currents[index]) if index > 0 else 0.0
    guards = [_Guard((("i", branch, scale), ("c", "", -low)), below,
                     CURRENT_TOLERANCE, f"{branch} below {low:.3g} A")]
    if above is not None:
        high = float(segments.currents[index + 1])
        guards.append(_Guard((("c", "", high), ("i", branch, -scale)), above,
                             CURRENT_TOLERANCE, f"{branch} above {high:.3g} A"))
    return tuple(guards)


def _junction(name, anode, cathode, segments: JunctionSegments, extra=()):
    """Diode or zener (breakdown direction given as anode -> cathode) as
    chords of its exponential law (:class:`JunctionSegments`): state
    ``off`` blocks, state ``on/k`` is chord ``k``."""
    count = len(segments.drops)
    threshold = segments.threshold
    states = [_DeviceState("off", (), (
        _Guard((("c", "", threshold), ("v", anode, -1.0), ("v", cathode, 1.0)), 1,
               VOLTAGE_TOLERANCE, f"{name} starts conducting"),))]
    for k in range(count):
        element = _Element("V", name, anode, cathode, float(segments.drops[k]),
                           float(segments.resistances[k]))
        states.append(_DeviceState(f"on/{k + 1}", (element,) + tuple(extra), _segment_guards(
            name, segments, k, k, k + 2 if k + 1 < count else None)))
    return _Device(name, tuple(states))


def _load_device(load: Load, expected: float) -> _Device:
    """Constant-current or constant-power load as piecewise-linear regions."""
    from rcc.cycle import LOAD_KNEE_FRACTION, POWER_LOAD_RANGE

    if load.kind == "current":
        knee = LOAD_KNEE_FRACTION * expected
        current = load.value
        regions = [(current / knee, 0.0), (0.0, current)]
        breaks = [knee]
    else:
        power = load.value
        breaks = list(expected * np.geomspace(*POWER_LOAD_RANGE, POWER_LOAD_SEGMENTS + 1))
        regions = [(power / breaks[0] ** 2, 0.0)]
        for low, high in zip(breaks[:-1], breaks[1:]):
            slope = (power / high - power / low) / (high - low)
            regions.append((slope, power / low - slope * low))
        regions.append((0.0, power / breaks[-1]))
    states = []
    for k, (conductance, current) in enumerate(regions):
        elements = []
        if conductance != 0.0:
            elements.append(_Element("R", f"load_r{k}", "o", "0", 1.0 / conductance)
                            if conductance > 0 else
                            _Element("Rneg", f"load_r{k}", "o", "0", 1.0 / conductance))
        if current != 0.0:
            elements.append(_Element("I", f"load_i{k}", "o", "0", current))
        guards = []
        if k > 0:
            guards.append(_Guard((("v", "o", 1.0), ("c", "", -breaks[k - 1])), k - 1,
                                 VOLTAGE_TOLERANCE, "load region down"))
        if k < len(regions) - 1:
            guards.append(_Guard((("c", "", breaks[k]), ("v", "o", -1.0)), k + 1,
                                 VOLTAGE_TOLERANCE, "load region up"))
        states.append(_DeviceState(f"region{k}", tuple(elements), tuple(guards)))
    return _Device("load", tuple(states))


def _build_topology(circuit: Circuit, code: int) -> Topology:
    """Modified nodal analysis of the resistive network of one topology."""
    device_states = circuit.decode(code)
    elements = list(circuit._elements)
    active = {}
    charge_law = ()
    for device, s in zip(circuit._devices, device_states):
        state = device.states[s]
        active[device.name] = state_kind(state.name)
        elements.extend(state.elements)
        if state.charge_law:
            charge_law = state.charge_law
    nodes = {name: k - 1 for k, name in enumerate(circuit._nodes)}  # ground -> -1
    n_nodes = len(circuit._nodes) - 1
    branches = [el for el in elements if el.kind in ("V", "C", "W")]
    branch_index = {el.name: n_nodes + k for k, el in enumerate(branches)}
    size = n_nodes + len(branches)
    states = circuit.state_names
    n = len(states)
    sidx = {name: k for k, name in enumerate(states)}
    G = np.zeros((size, size))
    Bx = np.zeros((size, n))
    B0 = np.zeros(size)
    G[np.arange(n_nodes), np.arange(n_nodes)] += circuit.parameters.get(
        "node_leak_conductance", NODE_LEAK_CONDUCTANCE)
    primary = ("m", "c")

    def add(row, col, value):
        if row >= 0 and col >= 0:
            G[row, col] += value

    for el in elements:
        a, b = nodes[el.a], nodes[el.b]
        if el.kind in ("R", "Rneg"):
            g = 1.0 / el.value
            add(a, a, g), add(b, b, g), add(a, b, -g), add(b, a, -g)
        elif el.kind in ("V", "C", "W"):
            k = branch_index[el.name]
            add(a, k, 1.0), add(b, k, -1.0), add(k, a, 1.0), add(k, b, -1.0)
            if el.kind == "V":
                G[k, k] -= el.resistance
                B0[k] += el.value
                if el.state:
                    Bx[k, sidx[el.state]] += el.gain
            elif el.kind == "C":
                Bx[k, sidx[el.state]] += 1.0
            else:  # ideal winding: v_a - v_b = ratio * (v_m - v_c)
                p, q = nodes[primary[0]], nodes[primary[1]]
                add(k, p, -el.value), add(k, q, el.value)
                add(p, k, -el.value), add(q, k, el.value)
        elif el.kind == "L":
            s = sidx[el.state]
            if a >= 0:
                Bx[a, s] -= 1.0
            if b >= 0:
                Bx[b, s] += 1.0
        elif el.kind == "Istate":
            s = sidx[el.state]
            if a >= 0:
                Bx[a, s] -= el.value
            if b >= 0:
                Bx[b, s] += el.value
        elif el.kind == "I":
            if a >= 0:
                B0[a] -= el.value
            if b >= 0:
                B0[b] += el.value
        elif el.kind == "CCCS":
            k = branch_index[el.control]
            add(a, k, el.value), add(b, k, -el.value)
        else:  # pragma: no cover - builder bug
            raise AssertionError(el.kind)
    try:
        solution = np.linalg.solve(G, np.column_stack([Bx, B0]))
    except np.linalg.LinAlgError:
        raise EngineError(f"singular network in topology {circuit.label(code)}") from None
    Zx, z0 = solution[:, :n], solution[:, n]

    def linear(terms):
        """Affine function of x for a term list: (gradient, offset)."""
        grad = np.zeros(n)
        offset = 0.0
        for kind, key, coefficient in terms:
            if kind == "v":
                row = nodes[key]
                if row >= 0:
                    grad += coefficient * Zx[row]
                    offset += coefficient * z0[row]
            elif kind == "i":
                if key in branch_index:
                    row = branch_index[key]
                    grad += coefficient * Zx[row]
                    offset += coefficient * z0[row]
            elif kind == "x":
                grad[sidx[key]] += coefficient
            else:
                offset += coefficient
        return grad, offset

    A = np.zeros((n, n))
    bvec = np.zeros(n)
    for el in elements:
        if el.kind == "C":
            grad, offset = linear((("i", el.name, 1.0 / el.value),))
        elif el.kind == "L":
            grad, offset = linear((("v", el.a, 1.0 / el.value), ("v", el.b, -1.0 / el.value)))
        else:
            continue
        A[sidx[el.state]], bvec[sidx[el.state]] = grad, offset
    if "q_base" in sidx:
        grad, offset = linear(charge_law)
        A[sidx["q_base"]], bvec[sidx["q_base"]] = grad, offset

    guards = [(di, guard) for di, (device, s) in enumerate(zip(circuit._devices, device_states))
              for guard in device.states[s].guards]
    gg = np.zeros((len(guards), n))
    go = np.zeros(len(guards))
    for row, (_, guard) in enumerate(guards):
        gg[row], go[row] = linear(guard.terms)
    sm = np.zeros((len(SIGNAL_NAMES), n))
    so = np.zeros(len(SIGNAL_NAMES))
    for row, name in enumerate(SIGNAL_NAMES):
        if name in circuit._signals:
            sm[row], so[row] = linear(circuit._signals[name](active))

    owner = {el.name: device.name for device in circuit._devices for st in device.states
             for el in st.elements}
    return Topology(
        code=code, device_states=device_states, label=circuit.label(code),
        A=A, b=bvec,
        guard_gradients=gg, guard_offsets=go,
        guard_devices=np.array([di for di, _ in guards], dtype=np.int64),
        guard_targets=np.array([g.target for _, g in guards], dtype=np.int64),
        guard_tolerances=np.array([g.tolerance for _, g in guards]),
        guard_gated=np.array([g.gated for _, g in guards], dtype=bool),
        guard_deep=np.array([g.deep if g.deep > 0 else 1000.0 * g.tolerance
                             for _, g in guards]),
        guard_names=tuple(g.name for _, g in guards),
        signal_matrix=sm, signal_offset=so,
        forms_builder=lambda: _power_forms(elements, owner, linear, n),
    )


def _power_forms(elements, owner, linear, n):
    """Quadratic forms in [x, 1] of input, output, loss and stored power,
    and the loss split by element (device elements under ``owner[name]``).

    Every element's absorbed power is (voltage across) x (current through),
    both affine in x; Tellegen's theorem makes their sum zero, so input =
    output + loss + stored holds pointwise and integrates exactly along the
    true trajectory.
    """
    def aug(terms):
        grad, offset = linear(terms)
        return np.append(grad, offset)

    def product(u, w):
        form = np.outer(u, w)
        return 0.5 * (form + form.T)

    forms = {key: np.zeros((n + 1, n + 1)) for key in ("input", "output", "loss", "stored")}
    losses = {}
    for el in elements:
        voltage = aug((("v", el.a, 1.0), ("v", el.b, -1.0)))
        if el.kind in ("R", "Rneg"):
            current = voltage / el.value
        elif el.kind in ("V", "C", "W"):
            current = aug((("i", el.name, 1.0),))
        elif el.kind in ("L",):
            current = aug((("x", el.state, 1.0),))
        elif el.kind == "Istate":
            current = aug((("x", el.state, el.value),))
        elif el.kind == "I":
            current = aug((("c", "", el.value),))
        elif el.kind == "CCCS":
            current = aug((("i", el.control, el.value),))
        else:  # pragma: no cover
            raise AssertionError(el.kind)
        absorbed = product(voltage, current)
        if el.name in INPUT_SOURCES:
            forms["input"] -= absorbed
        elif el.name.startswith("load"):
            forms["output"] += absorbed
        elif el.kind in ("C", "L"):
            forms["stored"] += absorbed
        else:
            forms["loss"] += absorbed
            if el.kind != "W":  # the ideal windings absorb no net power
                key = owner.get(el.name, el.name)
                losses[key] = losses.get(key, 0.0) + absorbed
    # ideal transformer primary (current -sum ratio_k i_k from m to c)
    if not any(el.kind == "W" for el in elements):
        return forms, losses
    primary_voltage = aug((("v", "m", 1.0), ("v", "c", -1.0)))
    current = np.zeros(n + 1)
    for el in elements:
        if el.kind == "W":
            current -= el.value * aug((("i", el.name, 1.0),))
    forms["loss"] += product(primary_voltage, current)
    return forms, losses
