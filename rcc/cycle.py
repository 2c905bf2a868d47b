"""Steady-state cycle model of the free-running flyback (numeric layer).

For each operating point (line or bus voltage, load, temperature, current
gain) the model finds the switching cycle the circuit of
``notes/circuit.md`` settles into: what ends the on-time (the switch
leaving saturation, the current limit, or the regulation path), what ends
the off-time (demagnetization and the resonant ring, or the drive
capacitor's timing), the conduction mode, the peak current, the frequency
and the output voltage that balances the delivered power against the load.

Inputs broadcast against each other and every solve runs on all points at
once: the timing of one switching cycle is a loop over the points compiled
with numba (:mod:`rcc._cycle_kernel`), the rest is numpy.  The map from the
states at one turn-on (drive capacitor, turn-on current, auxiliary
capacitor) to those at the next is solved for its fixed point (or its
repeating pattern) at each output voltage; the output voltage is the root
of the power balance, reached from power-on (see :func:`_solve_output`).

References
----------
.. [1] J. Irving and M. M. Jovanović, "Analysis and design of
   self-oscillating flyback converter", Proc. IEEE APEC 2002, pp. 897-903,
   doi:10.1109/APEC.2002.989351 (boundary-conduction operation, the on-time
   ended by the limiter, the off-time by demagnetization).
.. [2] R. W. Erickson and D. Maksimović, *Fundamentals of Power
   Electronics*, 2nd ed., Kluwer, 2001, ch. 5-6 (energy balance of the
   discontinuous and boundary flyback).
.. [3] J. Millman and H. Taub, *Pulse and Digital Circuits*, McGraw-Hill,
   1956, blocking-oscillator chapter (on-time ended when the collector
   current reaches hFE times the decaying base current).
.. [4] J. L. Moll, "Large-signal transient response of junction
   transistors", Proc. IRE 42 (1954) 1773-1784 (storage time).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from rcc.design import Design, Load
from rcc.devices import (OUTPUT_RECTIFIER_RESISTANCE, REFERENCE_TEMPERATURE,
                          SWITCH_BASE_RESISTANCE, SWITCH_SATURATION_RESISTANCE,
                          base_emitter_voltage, current_gain,
                          fall_time_charge_control, thermal_voltage, turn_off_energy,
                          zener_voltage)
from rcc.stress import (clamp_power, leakage_energy_rate, leakage_spike, rcd_clamp_cycle,
                         rcd_clamp_periodic)
from rcc.limiter import (LIMITER_REVERSE_GAIN, auxiliary_voltage, regulation_current,
                         trip_current)
from rcc.mains import bus_voltage
from rcc.operation import LOCKUP_FRACTION
from rcc.flyback import output_energy_share, reflected_voltage
from rcc import _cycle_kernel as kernel

__all__ = [
    "OperatingPoints",
    "Losses",
    "MODES",
    "ON_END",
    "OFF_END",
    "operating_points",
    "reference_temperature",
    "hold_output_voltage",
    "limit_power_capability",
    "operating_points_batch",
]

#: Kinds of operation.  ``bcm``: turn-on in the ring after demagnetization;
#: ``dcm``: a dead time after demagnetization (drive-capacitor timing, or the
#: regulation path holding the limiter on until the auxiliary capacitor has
#: drained); ``ccm``: turn-on before demagnetization ends.  ``burst``: no
#: steady period-1 cycle: a repeating pattern of several different cycles
#: (``pulses_per_pattern``), or the output loop hunting around its balance
#: (``output_multiplier`` below -1), or the regulation path holding the
#: limiter on even at zero current; frequency, powers and times are averages
#: and the peak current is that of the strongest pulse.  ``irregular``: the
#: cycle states never repeat (averages over 24 cycles).  ``lockup``: from
#: power-on the output stops below ``rcc.operation.LOCKUP_FRACTION`` of its
#: regulation level (a start-up barrier, or a load no cycle can carry; values
#: are those of the low state it sits in).  ``off``: the switch cannot turn on again
#: (see ``OperatingPoints.running``).
MODES = ("dcm", "bcm", "ccm", "burst", "irregular", "lockup", "off")
#: What ended the on-time.
ON_END = ("drive", "limit", "regulation")
#: What ended the off-time.
OFF_END = ("demagnetization", "drive-timing", "regulation-hold")

_SCAN_POINTS = 8


@dataclass(frozen=True)
class Losses:
    """Loss breakdown of an operating point, every field in [W].

    Attributes
    ----------
    switch_conduction : ndarray
        ``Vce_sat`` times the average collector current [W].
    resistive : ndarray
        Sense resistor and primary winding resistance [W].
    core : ndarray
        Core-loss resistance during on- and off-time [W].
    clamp : ndarray
        Clamp dissipation: the leakage energy times ``Vc / (Vc - V_R)``
        (:func:`rcc.stress.clamp_power`; the part above the leakage energy
        comes out of the magnetizing energy); with no clamp, the leakage
        energy rung out in the node [W].
    turn_off : ndarray
        Switch turn-off, first part: after storage the collector current
        follows the limiter's hold point while the collector rises to the
        bus (fed by the bus; notes/cycle_model.md) [W].
    turn_off_flyback : ndarray
        Switch turn-off, second part: the rest of the current falls into the
        node capacitance above the bus (:func:`rcc.devices.turn_off_energy`;
        taken from the magnetizing energy) [W].
    capacitive : ndarray
        Node-capacitance energy dissipated at turn-on, at the collector
        voltage where the ring lifts the base [W].
    rectifier : ndarray
        Output rectifier forward drop and the output capacitor's ESR [W].
    drive : ndarray
        Base-drive energy taken from the feedback winding during the on-time [W].
    reset : ndarray
        Drive-capacitor reset during the flyback: the reversed feedback
        winding drives the capacitor's charge back through the base clamps
        and, with zener regulation, the limiter's collector-base junction
        also draws the zener current from the auxiliary capacitor; taken
        from the magnetizing energy [W].
    startup : ndarray
        Start-up resistor [W].
    regulation : ndarray
        Regulation path fed from the feedback winding [W].
    """

    switch_conduction: np.ndarray
    resistive: np.ndarray
    core: np.ndarray
    clamp: np.ndarray
    turn_off: np.ndarray
    turn_off_flyback: np.ndarray
    capacitive: np.ndarray
    rectifier: np.ndarray
    drive: np.ndarray
    reset: np.ndarray
    startup: np.ndarray
    regulation: np.ndarray

    @property
    def total(self) -> np.ndarray:
        """Sum of all losses [W]."""
        return sum(getattr(self, item.name) for item in fields(self))


@dataclass(frozen=True)
class OperatingPoints:
    """Steady-state operating points (arrays broadcast to one shape).

    Attributes
    ----------
    line_voltage : ndarray
        RMS line voltage (AC input) or DC input voltage [V].
    bus_voltage : ndarray
        Bus voltage the cycle is computed at: the bulk-capacitor valley for
        AC input, the input voltage for DC input [V].
    load_current : ndarray
        Load current at the computed output voltage [A].
    temperature : ndarray
        Temperature [K].
    current_gain : ndarray
        Switch current gain at that temperature [1].
    output_voltage : ndarray
        Output voltage, its mean over the cycle (at a lock-up, the mean of
        the sawtooth each pulse charges and the load drains) [V].
    frequency : ndarray
        Switching frequency (average over bursts) [Hz].
    on_time : ndarray
        On-time, turn-on to the collector reaching the bus at turn-off:
        the current ramp from ``start_current``, the storage time and the
        turn-off transition [s].
    off_time : ndarray
        Off-time [s].
    duty : ndarray
        Duty cycle [1].
    peak_current : ndarray
        Peak primary current, including the storage overshoot and the rise
        during the turn-off transition [A].
    start_current : ndarray
        Primary current at turn-on: negative on the ring (the magnetizing
        current that discharges the node capacitance), the residual current
        in CCM [A].
    turn_off_time : ndarray
        Turn-off transition after storage, until the collector reaches the
        bus (included in ``on_time``) [s].
    trip_current : ndarray
        Current at which the limiter (with the regulation current) acts [A].
    drive_capability : ndarray
        hFE times the base current at the end of the on-time [A].
    reflected_voltage : ndarray
        Reflected output voltage [V].
    clamp_voltage : ndarray
        Highest collector voltage above the bus after turn-off: the RCD clamp
        capacitor's peak (the highest over a pattern's cycles, the capacitor
        carried through them), the zener clamp voltage, or with no clamp the
        reflected voltage plus the leakage spike into the node capacitance [V].
    regulation_current : ndarray
        Regulation current injected into the limiter base [A].
    mode : ndarray of str
        One of :data:`MODES`.
    on_end : ndarray of str
        One of :data:`ON_END`.
    off_end : ndarray of str
        One of :data:`OFF_END`.
    settled : ndarray of bool
        False where the drive-capacitor voltage does not settle from cycle to
        cycle (it ratchets up while the reset in the off-time is too weak, then
        a long drive-timed off-time resets it: squegging); the values are
        those of one cycle of that pattern.
    startup_lockup : ndarray of bool
        True where the output cannot rise from zero to this operating point
        at this load: below it lies an output range where the supply
        delivers less than the load takes (the reflected voltage is too low
        to reset the drive capacitor, cycles are drive-timed), so from
        power-on it stays at a low output and hiccups.  Found on a 13-point
        scan of the output range; a narrower deficit can be missed.
    running : ndarray of bool
        False where the switch cannot turn on again after the first cycle
        (the base is held off for good), or the feedback winding is
        degenerative; all rates are zero there.
    pulses_per_pattern : ndarray of int
        Cycles in the repeating pattern the cycle states settle into at the
        operating output: 1 for a steady cycle, more for a pattern of
        different pulses (mode ``burst``), 0 where nothing repeats (mode
        ``irregular``) [1].
    output_multiplier : ndarray
        Multiplier of the output voltage from one cycle to the next at the
        balance, ``1 + T dS/dVo / (Co Vo)``; below -1 the output hunts
        around the balance (mode ``burst``) [1].
    doubt : ndarray of str
        Empty where the point is a settled, steady cycle the population
        study shows the cycle model accurate for; otherwise why its numbers
        are to be confirmed with the time-domain engine: ``pattern`` (burst or
        irregular: averages of a pattern), ``lockup``, ``regime-boundary``
        (the power balance sits on a jump between two cycle regimes),
        ``held-ring`` (the regulation hold keeps the switch off through a ring
        that reaches its threshold; the model does not weigh the ring's drive
        against what the held limiter sinks), ``unsettled``, or
        ``invariant: ...`` (a physical invariant failed; such a point must not
        be reported as a number).
    energy_per_cycle : ndarray
        Magnetizing energy transferred per pulse, ``Lm (Ipk^2 - I0^2) / 2``,
        the mean over the pulses of a pattern; times ``frequency`` it is the
        power that the output, the rectifier, the regulation path, the
        flyback core loss, the clamp (above the leakage energy), the turn-off
        above the bus and the drive reset take [J].
    input_power : ndarray
        Power drawn from the bus [W].
    output_power : ndarray
        Power delivered to the load [W].
    losses : Losses
        Loss breakdown [W]; ``input_power = output_power + losses.total``.
    """

    line_voltage: np.ndarray
    bus_voltage: np.ndarray
    load_current: np.ndarray
    temperature: np.ndarray
    current_gain: np.ndarray
    output_voltage: np.ndarray
    frequency: np.ndarray
    on_time: np.ndarray
    off_time: np.ndarray
    duty: np.ndarray
    peak_current: np.ndarray
    start_current: np.ndarray
    turn_off_time: np.ndarray
    trip_current: np.ndarray
    drive_capability: np.ndarray
    reflected_voltage: np.ndarray
    clamp_voltage: np.ndarray
    regulation_current: np.ndarray
    mode: np.ndarray
    on_end: np.ndarray
    off_end: np.ndarray
    settled: np.ndarray
    startup_lockup: np.ndarray
    running: np.ndarray
    pulses_per_pattern: np.ndarray
    output_multiplier: np.ndarray
    doubt: np.ndarray
    energy_per_cycle: np.ndarray
    input_power: np.ndarray
    output_power: np.ndarray
    losses: Losses

    @property
    def shape(self) -> tuple[int, ...]:
        return self.frequency.shape

    def records(self) -> list[dict]:
        """One JSON-ready dict per point (SI units, temperature in degC)."""
        flat = {name: np.ravel(getattr(self, name)) for name in (
            "line_voltage", "bus_voltage", "load_current", "temperature", "output_voltage",
            "frequency", "on_time", "off_time", "duty", "peak_current", "mode", "on_end",
            "off_end", "input_power", "doubt", "pulses_per_pattern")}
        losses = {item.name: np.ravel(np.broadcast_to(getattr(self.losses, item.name),
                                                      self.shape))
                  for item in fields(Losses)}
        rows = []
        for i in range(flat["frequency"].size):
            rows.append({
                "line_v": float(flat["line_voltage"][i]),
                "bus_v": float(flat["bus_voltage"][i]),
                "load_a": float(flat["load_current"][i]),
                "temperature_c": float(flat["temperature"][i] - 273.15),
                "output_v": float(flat["output_voltage"][i]),
                "frequency_hz": float(flat["frequency"][i]),
                "on_time_s": float(flat["on_time"][i]),
                "off_time_s": float(flat["off_time"][i]),
                "duty": float(flat["duty"][i]),
                "peak_current_a": float(flat["peak_current"][i]),
                "mode": str(flat["mode"][i]),
                "on_end": str(flat["on_end"][i]),
                "off_end": str(flat["off_end"][i]),
                "input_power_w": float(flat["input_power"][i]),
                "losses_w": {name: float(values[i]) for name, values in losses.items()},
                "pulses_per_pattern": int(flat["pulses_per_pattern"][i]),
                "source": "cycle-model",
                "doubt": str(flat["doubt"][i]),
            })
        return rows


def reference_temperature(design: Design) -> float:
    """25 degC clipped into the design's temperature range.

    Parameters
    ----------
    design : Design
        The design; its ``environment`` range is used [K].

    Returns
    -------
    float
        Reference temperature [K].
    """
    return float(np.clip(REFERENCE_TEMPERATURE, design.environment.temperature_min,
                         design.environment.temperature_max))


def hold_output_voltage(design: Design, temperature):
    """Output voltage at which the regulation path alone turns the limiter on.

    Parameters
    ----------
    design : Design
        The design.
    temperature : float or array_like
        Temperature [K].

    Returns
    -------
    ndarray or None
        Output voltage [V] above which the on-time shrinks to the storage
        time (burst operation); ``None`` for ``regulation.method = "none"``.

    Notes
    -----
    Solves ``I_reg R_lb = Vbe`` of the regulation law in ``notes/circuit.md``.
    """
    from rcc.devices import zener_voltage

    regulation, limiter = design.regulation, design.limiter
    vbe = base_emitter_voltage(limiter.vbe, limiter.vbe_tempco, temperature)
    needed = vbe / limiter.base_resistance
    if regulation.method == "feedback-winding":
        zener = zener_voltage(regulation.zener_voltage, regulation.zener_tempco, temperature)
        aux = zener + vbe + needed * regulation.series_resistance
        return ((aux + regulation.rectifier_drop) * design.transformer.output_turns
                / design.transformer.feedback_turns - design.output.rectifier_drop)
    if regulation.method == "optocoupler":
        led_current = needed / regulation.ctr
        return (regulation.reference_voltage + regulation.led_drop
                + led_current * regulation.series_resistance)
    return None


def expected_output_voltage(design: Design, temperature) -> float:
    """Output voltage the supply is meant to hold: the target, else the
    regulation hold point, else 12 V (an unregulated design without a target:
    used for load breakpoints only) [V]."""
    if design.output.voltage_target is not None:
        return float(design.output.voltage_target)
    hold = hold_output_voltage(design, temperature)
    if hold is not None:
        return float(np.max(hold))
    return 12.0  # common practice


#: No load takes its rated current or power at a collapsed output (an
#: electronic load, a downstream converter or a regulator's bias falls to a
#: resistance there).  A constant-current load takes its current above this
#: fraction of the expected output voltage and is a resistance through the
#: origin below it; a constant-power load takes its power between the
#: fractions of :data:`POWER_LOAD_RANGE`, is a resistance through the origin
#: below and a constant current above.  The time-domain engine uses the same
#: law (rcc.engine.circuit)  # common practice
LOAD_KNEE_FRACTION = 0.2
POWER_LOAD_RANGE = (0.25, 2.0)


@dataclass(frozen=True)
class _LoadLaw:
    """The load seen by the output balance, values broadcast to the points.

    ``kind`` ``current``, ``resistance`` or ``power``, ``value`` in [A],
    [ohm] or [W], ``expected`` the expected output voltage [V]: the law of
    :data:`LOAD_KNEE_FRACTION` and :data:`POWER_LOAD_RANGE`, the one the
    engine uses (without its secant segments for constant power).
    """

    kind: str
    value: np.ndarray
    expected: float

    def take(self, index) -> "_LoadLaw":
        return _LoadLaw(self.kind, np.reshape(self.value, -1)[index], self.expected)

    def current(self, output_voltage):
        voltage = np.asarray(output_voltage, dtype=float)
        if self.kind == "current":
            knee = LOAD_KNEE_FRACTION * self.expected
            return self.value * np.minimum(voltage / knee, 1.0)
        if self.kind == "resistance":
            return voltage / self.value
        low, high = (fraction * self.expected for fraction in POWER_LOAD_RANGE)
        return np.where(voltage < low, self.value * voltage / low**2,
                        np.where(voltage > high, self.value / high,
                                 self.value / np.maximum(voltage, 1e-300)))

    def power(self, output_voltage):
        return np.asarray(output_voltage, dtype=float) * self.current(output_voltage)

    def voltage_for_power(self, power, fallback):
        """Output voltage below the expected output at which the load takes
        ``power`` (``fallback`` where none) [V]."""
        power = np.asarray(power, dtype=float)
        if self.kind == "resistance":
            return np.sqrt(np.maximum(power, 0.0) * self.value)
        # below the knee (current) or the range (power) a resistance
        # through the origin that takes knee_power at the knee: v^2 / R = P
        if self.kind == "current":
            knee = LOAD_KNEE_FRACTION * self.expected
            knee_power = self.value * knee
            above = power / np.maximum(self.value, 1e-300)
        else:
            knee = POWER_LOAD_RANGE[0] * self.expected
            knee_power = self.value
            above = fallback
        below = knee * np.sqrt(np.maximum(power, 0.0) / np.maximum(knee_power, 1e-300))
        return np.where(self.value > 0, np.where(power < knee_power, below, above), fallback)


def _onset_base_voltage(design: Design, bus, temperature, hfe, vbe):
    """Base-emitter voltage at which a switch held off by its drive network
    turns on by regeneration [V].

    The small-signal network of ``rcc.startup`` (limiter off) first has a
    growing mode at the collector current
    :func:`rcc.startup.poles.onset_collector_current`; on the Shockley law
    with ``I_S`` from ``switch.vbe`` at the limiter's nominal trip current
    (as the start-up analysis and the engine take it) that current sits at
    ``Vbe(T) + V_T ln(I_onset / I_ref)``.  Where the network does not
    regenerate at any current up to the trip, ``Vbe(T)``.  The onset does not
    depend on the bus (no element of the network does), so it is computed
    once per design, temperature and gain and kept (:data:`_ONSET_LIFTS`).
    Shockley law: W. Shockley, Bell Syst. Tech. J. 28, 1949 (the ideal-diode law).
    """
    from rcc.startup.dcpoint import circuit_values
    from rcc.startup.poles import onset_collector_current

    bus, temperature, hfe, vbe = np.broadcast_arrays(
        *(np.asarray(value, dtype=float) for value in (bus, temperature, hfe, vbe)))
    pairs, inverse = np.unique(np.stack([temperature.ravel(), hfe.ravel()], axis=1),
                               axis=0, return_inverse=True)
    keys = [(design, float(t), float(h)) for t, h in pairs]
    missing = [k for k, key in enumerate(keys) if key not in _ONSET_LIFTS]
    if missing:
        if len(_ONSET_LIFTS) > _ONSET_CACHE_SIZE:
            _ONSET_LIFTS.clear()
        new = pairs[missing]
        circuit = circuit_values(design, np.ones(len(new)), new[:, 0]).replace(hfe=new[:, 1])
        onset = onset_collector_current(circuit)
        with np.errstate(divide="ignore"):
            lift = thermal_voltage(new[:, 0]) * np.log(onset / circuit.switch_reference_current)
        for k, value in zip(missing, np.where(np.isfinite(onset), lift, 0.0)):
            _ONSET_LIFTS[keys[k]] = float(value)
    lift = np.array([_ONSET_LIFTS[key] for key in keys])
    return vbe + lift[np.ravel(inverse)].reshape(bus.shape)


#: Regeneration-onset base-voltage lifts already computed, by (design,
#: temperature, gain) [V]; cleared when it outgrows :data:`_ONSET_CACHE_SIZE`
_ONSET_LIFTS: dict = {}
_ONSET_CACHE_SIZE = 200_000


def _load_power(load, output_voltage):
    return load.power(output_voltage)


def _voltage_for_power(load, power, fallback):
    """Output voltage at which ``load`` takes ``power`` [V]."""
    return load.voltage_for_power(power, fallback)


def _first_crossing(function, low, high, tolerance=1e-15, iterations=200, jump=None):
    """Root of an increasing-through-zero function on a bracket, to tolerance.

    ``function(x, index)`` returns the function at ``x`` for the flat point
    indices ``index`` (the points still iterating: converged points are not
    evaluated again).  ``function(low) < 0 <= function(high)`` is expected;
    where already ``function(low) >= 0`` the result is ``low``.  Regula falsi
    with the Illinois modification (Dowell & Jarratt, BIT 11 (1971) 168-174):
    the bracket always holds the sign change and shrinks superlinearly; the
    loop stops when every bracket is narrower than ``tolerance`` relative (or
    the residual is exactly zero), never after a fixed count of steps, so the
    result does not move when an input moves by one part in 10^12.
    """
    low, high = np.broadcast_arrays(np.asarray(low, float), np.asarray(high, float))
    shape = low.shape
    low, high = low.astype(float).reshape(-1), high.astype(float).reshape(-1)
    everything = np.arange(low.size)
    f_low = np.asarray(function(low, everything), dtype=float) * np.ones_like(low)
    f_high = np.asarray(function(high, everything), dtype=float) * np.ones_like(low)
    result = np.where(f_low >= 0.0, low, high)
    active = np.flatnonzero(~((f_low >= 0.0) | (high <= low)))
    side = np.zeros(low.shape, dtype=int)
    if jump is not None:
        jump = np.reshape(np.broadcast_to(jump, shape), -1)
    for _ in range(iterations):
        if active.size == 0:
            break
        lo, hi, fl, fh = low[active], high[active], f_low[active], f_high[active]
        with np.errstate(divide="ignore", invalid="ignore"):
            trial = hi - fh * (hi - lo) / (fh - fl)
        bad = ~np.isfinite(trial) | (trial <= lo) | (trial >= hi)
        trial = np.where(bad, 0.5 * (lo + hi), trial)
        f_trial = np.asarray(function(trial, active), dtype=float) * np.ones_like(trial)
        positive = f_trial >= 0.0
        # Illinois: halve the stale end's value when the same end is kept twice
        s = side[active]
        fl = np.where(positive & (s == -1), 0.5 * fl, fl)
        fh = np.where(~positive & (s == 1), 0.5 * fh, fh)
        hi, fh = np.where(positive, trial, hi), np.where(positive, f_trial, fh)
        lo, fl = np.where(positive, lo, trial), np.where(positive, fl, f_trial)
        low[active], high[active], f_low[active], f_high[active] = lo, hi, fl, fh
        side[active] = np.where(positive, -1, 1)
        width = hi - lo
        converged = (width <= tolerance * np.maximum(np.abs(hi), 1e-300)) | (f_trial == 0.0)
        if jump is not None:
            # a jump of the function across zero (no root): located to 1e-6
            converged |= (width <= 1e-6 * np.abs(hi)) & (np.minimum(
                np.abs(fl), np.abs(fh)) > jump[active])
        result[active] = hi
        active = active[~converged]
    return result.reshape(shape)


#: Per-point attributes of :class:`_Cycle` the compiled timing reads
#: (columns of :data:`rcc._cycle_kernel.POINT_NAMES`).
_POINT_ATTRIBUTES = ("bus", "hfe", "steal_gain", "slope", "v_on", "startup_current", "bleed",
                     "thermal_voltage", "vbe_limiter", "v_threshold", "aux_floor", "aux_hold")


class _Cycle:
    """Cycle evaluation at given output voltages (internal, vectorized)."""

    def __init__(self, design: Design, bus, temperature, hfe, load=None):
        tr, sw, dr, lim = design.transformer, design.switch, design.drive, design.limiter
        self.design = design
        #: the load (a :class:`_LoadLaw` with a value per point) whose drain
        #: sets the output's ripple between plateaus; None: no ripple
        self.load = load
        self.bus = bus
        self.temperature = temperature
        self.hfe = hfe
        self.lm = tr.magnetizing_inductance
        self.lt = tr.magnetizing_inductance + tr.leakage_inductance
        self.nb = tr.feedback_turns / tr.primary_turns
        self.vbe = base_emitter_voltage(sw.vbe, sw.vbe_tempco, temperature)
        self.vbe_limiter = base_emitter_voltage(lim.vbe, lim.vbe_tempco, temperature)
        self.startup_current = np.maximum(bus - self.vbe, 0.0) / design.startup.resistance
        rbe = dr.base_emitter_resistance
        self.rbe = np.inf if rbe is None else rbe
        self.bleed = 0.0 if rbe is None else self.vbe / rbe
        self.slope = np.maximum(bus - sw.vce_sat, 1e-3) / self.lt
        self.winding_on = self.nb * (bus - sw.vce_sat) * self.lm / self.lt
        self.v_on = self.winding_on - self.vbe
        self.tau = dr.resistance * dr.capacitance
        #: the drive path of the on-time and the turn-off: R_b and the switch's
        #: base spreading resistance [ohm], and its R C [s]
        self.rb_on = dr.resistance + SWITCH_BASE_RESISTANCE
        self.tau_on = self.rb_on * dr.capacitance
        # the primary loop of the on-time (winding, saturated switch, sense
        # resistor) [ohm]: the ramp is an R L rise at ``loop_rate = R / L_t``
        # [1/s], and the base loop loses the feedback winding's share of the
        # loop's drop and the emitter's rise, ``drive_sag`` volts per ampere
        loop = tr.primary_resistance + SWITCH_SATURATION_RESISTANCE + lim.sense_resistance
        self.loop_rate = loop / self.lt
        self.drive_sag = lim.sense_resistance + self.nb * self.lm / self.lt * loop
        # storage-time constant from the datasheet storage time, measured with
        # I_B1 = I_B2 and hard overdrive: t_s = tau_S ln 2 (charge control)
        self.storage_constant = sw.storage_time / np.log(2.0)
        self.transit_time = 1.0 / (2.0 * np.pi * sw.transition_frequency)
        # limiter transconductance: limiter collector current per ampere of
        # switch current through the sense resistor
        self.limiter_gain = lim.hfe * lim.sense_resistance / lim.base_resistance
        # limiter stealing drive: with the limiter's base at its threshold,
        # each ampere of switch current above the ideal trip current gives the
        # limiter R_s / R_lb amperes of base current, hfe_lim times that of
        # collector current taken from the switch's base (G = hFE hfe_lim R_s / R_lb)
        self.steal_gain = hfe * lim.hfe * lim.sense_resistance / lim.base_resistance
        self.thermal_voltage = thermal_voltage(temperature)
        regulation = design.regulation
        self.aux_state = regulation.method == "feedback-winding"
        if self.aux_state:
            series = regulation.series_resistance
            self.zener_share = lim.base_resistance / (lim.base_resistance + series)
            self.zener_resistance = series
            zener = zener_voltage(regulation.zener_voltage, regulation.zener_tempco,
                                  temperature)
            # the zener path drains the auxiliary capacitor towards Vz + Vbe_lim
            self.aux_floor = zener + self.vbe_limiter
            self.aux_tau = series * regulation.filter_capacitance
            # the limiter holds the switch off while the zener current exceeds
            # what R_lb takes at Vbe_lim plus the base current it needs to sink
            # the start-up current
            self.aux_hold = self.aux_floor + series * (
                self.vbe_limiter / lim.base_resistance + self.startup_current / lim.hfe)
        else:
            self.zener_share = 0.0
            self.aux_tau = np.inf
        # base threshold: the drive-capacitor voltage at which the base reaches
        # the onset of regeneration (the switch then turns on by itself)
        rb = dr.resistance
        self.vbe_onset = _onset_base_voltage(design, bus, temperature, hfe, self.vbe)
        if rbe is None:
            self.v_threshold = self.startup_current * rb - self.vbe_onset
        else:
            self.v_threshold = self.startup_current * rb - self.vbe_onset * (rb + rbe) / rbe
        self._tau_slow = np.inf if rbe is None else (rb + rbe) * dr.capacitance
        #: the output path's resistance (the output capacitor's ESR and the
        #: rectifier's series resistance) referred to the primary [ohm]
        self.output_resistance = (design.output.esr + OUTPUT_RECTIFIER_RESISTANCE) \
            * (tr.primary_turns / tr.output_turns)**2
        #: the output capacitance referred to the primary: it charges during
        #: the plateau (at a lock-up by as much as the output sits at) [F]
        self.output_capacitance = design.output.capacitance \
            * (tr.output_turns / tr.primary_turns)**2
        self.omega = 1.0 / np.sqrt(self.lm * design.node_capacitance)
        self.ring_impedance = np.sqrt(self.lm / design.node_capacitance)
        quality = tr.core_loss_resistance * np.sqrt(design.node_capacitance / self.lm)
        self.ring_damping = np.exp(-np.pi / (2.0 * quality))
        constants = dict(
            rb=rb, rlb=lim.base_resistance, rs=lim.sense_resistance, tau=self.tau,
            aux_tau=self.aux_tau, storage_constant=self.storage_constant,
            node=design.node_capacitance, nb=self.nb, lm=self.lm, vebo=sw.vebo,
            inverse_gain=1.0 + LIMITER_REVERSE_GAIN, clamp_resistance=self._clamp_resistance(),
            cb=dr.capacitance, tau_slow=self._tau_slow, rbe=self.rbe, omega=self.omega,
            ring_impedance=self.ring_impedance, ring_damping=self.ring_damping,
            limiter_gain=self.limiter_gain,
            zener_resistance=self.zener_resistance if self.aux_state else np.inf,
            filter_capacitance=regulation.filter_capacitance if self.aux_state else 0.0,
            aux_state=float(self.aux_state), linear_slow=float(np.isinf(self._tau_slow)),
            output_resistance=self.output_resistance,
            output_capacitance=self.output_capacitance, rb_on=self.rb_on, tau_on=self.tau_on,
            transit_time=self.transit_time, loop_rate=self.loop_rate,
            drive_sag=self.drive_sag)
        #: design constants of the compiled cycle timing (never subset)
        self.constants = np.array([float(constants[name])
                                   for name in kernel.CONSTANT_NAMES])

    def subset(self, index):
        """The same cycle for a flat selection of the points [-]."""
        import copy

        shape = np.shape(self.bus)
        part = copy.copy(self)
        for name, value in vars(self).items():
            # (with a single point, numpy scalars are per-point values too)
            if name != "constants" and isinstance(value, (np.ndarray, np.generic)) \
                    and np.shape(value) == shape:
                setattr(part, name, value.reshape(-1)[index])
        if self.load is not None:
            part.load = self.load.take(index)
        return part

    def auxiliary_plateau(self, output_voltage):
        """Auxiliary-capacitor voltage the flyback plateau charges to [V]."""
        d = self.design
        return np.maximum(auxiliary_voltage(output_voltage, d.output.rectifier_drop,
                                            d.transformer.feedback_turns,
                                            d.transformer.output_turns,
                                            d.regulation.rectifier_drop), 0.0)

    def evaluate(self, output_voltage, vc0, i0, va0=None, losses=False, energy=True,
                 clamp0=None):
        """One switching cycle from the states at a turn-on (vectorized).

        The timing (on-time decision, storage, turn-off, drive-capacitor
        reset, ring, off-time, the states at the next turn-on) runs in the
        compiled loop of :mod:`rcc._cycle_kernel`, which evaluates, point by
        point, the equations described here and in the methods below:

        - on-time: the switch leaves saturation when the ramp reaches the
          collector current the base can hold, with the limiter stealing
          drive (finite gain, ``notes/cycle_model.md``); to divert the drive
          the limiter's collector carries about the whole base current
          ``I_B``, so its junction sits ``V_T ln(I_B / 1 mA)`` above the Vbe
          given at 1 mA (Ebers & Moll 1954, exponential law);
        - storage by charge control (Moll 1954): the excess charge the base
          current has left in the saturated switch since the turn-on (the
          drive, less what the limiter takes once the emitter current reaches
          its threshold) drains while the base current falls on after the
          decision and the collector current keeps rising; storage ends when
          it is gone (``rcc._cycle_kernel.storage_time``,
          ``notes/cycle_model.md``);
        - turn-off transition after storage: the collector current follows the
          limiter's hold point (or, when the drive ends the on-time, the
          switch's own gain) while the collector rises and the feedback
          winding loses voltage, ``dI_C/dv = -m``; the node capacitance takes
          the rest of the still rising primary current, so the collector
          reaches the bus after ``t_rise = (C/m) ln(1 + m^2 V_bus / (s C))``;
        - flyback plateau: the base is pulled negative and the drive
          capacitor is reset through the base clamps (the stages below); with
          feedback-winding regulation the auxiliary capacitor drains through
          the zener path in the on-time and recharges to the plateau, and the
          limiter holds the switch off until it has drained to the hold level
          (regulation by dead time);
        - after demagnetization the ring, loaded by the reset clamp until it
          lets go (:meth:`_ring_after_clamp`), turns the switch on where the
          winding lifts the base over Vbe; while the regulation path holds the
          limiter on, the limiter clamps the base (saturated on the positive
          swing, inverse mode on the negative one), so the ring decays with
          ``zeta_hold = n_b^2 Z_0 (1/R_b + 1/R_cb) / 4`` on top of the core
          loss and the switch turns on at the release if the decayed ring
          still lifts the base; otherwise the drive capacitor's slow path
          times the restart; while the ring's negative swing still reaches
          the limiter's collector-base junction, the limiter's base falls to
          about the emitter for half of each period and the zener path
          drains the auxiliary capacitor towards ``Vz`` instead of
          ``Vz + Vbe_lim`` then (``notes/cycle_model.md``, the hold's
          drain); a drive timer shorter than demagnetization turns the switch
          on during the plateau (CCM);
        - the turn-on current is what is left in CCM, and on the ring the
          negative magnetizing current ``-(V_R / Z_0) sin(phase)``, damped.

        The RCD clamp capacitor is a slow state of its own that does not act
        on the timing: ``clamp0`` is its voltage above the bus at this
        turn-off (default: the steady cycle's, :func:`rcc.stress.rcd_clamp_periodic`);
        it takes this turn-off's leakage energy and what the magnetizing
        current gives while it conducts (:func:`rcc.stress.rcd_clamp_cycle`),
        and ``clamp_next`` is its voltage at the next turn-off.

        Returns a dict of arrays; with ``energy=False`` only the states at the
        next turn-on (``vc_next``, ``residual``, ``va_next``) and the peak
        current and cycle times, with ``losses=True`` also the :class:`Losses`.
        """
        d = self.design
        tr, sw, dr, lim = d.transformer, d.switch, d.drive, d.limiter
        vr = reflected_voltage(output_voltage, d.output.rectifier_drop, tr.primary_turns,
                               tr.output_turns)
        vr = np.maximum(vr, 1e-3)
        # ---- regulation current into the limiter base during the on-time
        plateau_aux = self.auxiliary_plateau(output_voltage)
        if self.aux_state:
            # the auxiliary capacitor drains through the zener path; its
            # voltage at turn-on is a cycle-to-cycle state
            va0 = plateau_aux if va0 is None else va0
            ireg0 = np.maximum(va0 - self.aux_floor, 0.0) / self.zener_resistance
        else:
            va0 = 0.0
            ireg0 = regulation_current(d, output_voltage, self.temperature)
        # the load drains the output between plateaus at the relative rate
        # I_o / (V_o C_o): the kernel starts the plateau from the bottom of
        # that ripple (the mean output is the balance's unknown)
        output = np.maximum(np.asarray(output_voltage, dtype=float), 1e-9)
        ratio = tr.primary_turns / tr.output_turns
        rate = 0.0 if self.load is None else \
            self.load.current(output) / (output * d.output.capacitance)
        columns = {"vr": vr, "plateau_aux": plateau_aux, "ireg0": ireg0, "vc0": vc0,
                   "i0": i0, "va0": va0, "output_reflected": ratio * output,
                   "output_rate": rate}
        columns.update((name, getattr(self, name, 0.0)) for name in _POINT_ATTRIBUTES)
        shape = np.broadcast_shapes(*(np.shape(value) for value in columns.values()))
        points = np.empty(shape + (len(kernel.POINT_NAMES),))
        for index, name in enumerate(kernel.POINT_NAMES):
            points[..., index] = columns[name]
        timing = kernel.cycle_timing(points.reshape(-1, len(kernel.POINT_NAMES)),
                                     self.constants)
        out = {name: timing[:, index].reshape(shape)
               for index, name in enumerate(kernel.OUTPUT_NAMES)}
        if not energy:
            quick = {name: out[name] for name in ("vc_next", "residual", "va_next", "peak",
                                                  "t_on", "t_off")}
            quick["vr"] = out["vr_start"]
            return quick
        (ireg, itrip, peak, t_on, t_off, t_rise, vc_next, va_next, residual,
         drive_capability, crossing, left, vc_end, vc_demag, t_cross, t_demag, aux_charge,
         phase, charge_base, limit_plateau) = (out[name] for name in (
             "ireg", "itrip", "peak", "t_on", "t_off", "t_rise", "vc_next", "va_next",
             "residual", "drive_capability", "crossing", "left", "vc_end", "vc_demag",
             "t_cross", "t_demag", "aux_charge", "phase", "charge_base", "limit_plateau"))
        on_end, off_end, mode = (out[name].astype(int) for name in ("on_end", "off_end",
                                                                     "mode"))
        ccm, ring_on, restarts = (out[name] > 0.5 for name in ("ccm", "ring_on", "restarts"))
        # the plateau the cycle saw (from the bottom of the output's ripple)
        vr, i0 = out["vr_start"], np.broadcast_to(i0, shape)
        aux = np.broadcast_to(plateau_aux, shape)
        # the plateau's mean over demagnetization (the ESR lifts its start)
        vr_mean = np.where(t_demag > 0, self.lm * peak / np.maximum(t_demag, 1e-300), vr)
        node = d.node_capacitance
        frequency = 1.0 / (t_on + t_off)
        # ---- energy per cycle
        transferred = 0.5 * self.lm * (peak**2 - residual**2)
        t_flyback = np.where(ccm, t_cross, t_demag)
        core_off = vr**2 / tr.core_loss_resistance * t_flyback
        # the clamp takes the leakage energy and, while the leakage current
        # falls, part of the magnetizing energy
        leakage_rate = leakage_energy_rate(tr.leakage_inductance, peak, frequency)
        if d.clamp.type == "rcd":
            clamp = self.clamp_cycle(vr, peak, t_on + t_off, clamp0)
            clamp_level = 0.5 * (clamp.start + clamp.end)
            clamp_rate = clamp.energy * frequency
            clamp_next, clamp_peak = clamp.following, clamp.end
        else:
            clamp_level = self._clamp_level(vr, peak, frequency)
            clamp_rate = leakage_rate if d.clamp.type == "none" else clamp_power(
                vr, clamp_level, tr.leakage_inductance, peak, frequency)
            clamp_next, clamp_peak = np.zeros_like(peak), clamp_level
        # turn-off, second part: above the bus the reversed winding, in series
        # with the drive capacitor charged during the on-time, pulls the rest
        # of the forward charge out through R_b while the junction still sits
        # at Vbe; taken from the magnetizing energy, while the first part
        # (below the bus) is fed by the bus
        reverse_base = (self.nb * (vr + self.output_resistance * peak) + np.maximum(vc_end, 0.0)
                        + self.vbe) / self.rb_on
        fall = fall_time_charge_control(self.transit_time, left, reverse_base)
        reversal = (turn_off_energy(left, fall, node, clamp_level)
                    + 0.5 * self.bus * left * fall)
        # drive reset during the plateau: the reversed feedback winding drives
        # the drive capacitor's charge back through the base clamps; with
        # zener regulation the limiter's collector-base junction also pulls
        # the regulation zener's current from the auxiliary capacitor
        # (Thevenin share R_lb || R_z / R_z of the junction charge)
        reset_charge = dr.capacitance * np.maximum(
            vc_end - np.where(ccm, limit_plateau, vc_demag), 0.0)
        reset_energy = self.nb * vr_mean * reset_charge + aux * self.zener_share * reset_charge
        # the auxiliary winding's charge per cycle comes from the magnetizing
        # energy at the plateau voltage (feedback-winding regulation)
        aux_energy = aux_charge * (aux + d.regulation.rectifier_drop) if self.aux_state \
            else np.zeros_like(vr)
        secondary = (transferred - core_off - (clamp_rate - leakage_rate) / frequency
                     - reversal - reset_energy - aux_energy)
        # what the losses fed by the magnetizing energy would take beyond it
        # (an invariant breach, flagged by _doubts)
        shortfall = np.maximum(-secondary, 0.0)
        secondary = np.maximum(secondary, 0.0)
        # of the energy the secondary current carries, the output takes V_o
        # per coulomb (a charge balance at the mean output, exact for a linear
        # load whatever the ripple: flyback.output_energy_share); the
        # rectifier's V_f, the path's resistance and the ripple the rest
        share_out = output_energy_share(
            self.lm, peak, vr, ratio * output_voltage / vr, self.output_resistance,
            self.output_capacitance,
            np.maximum(1.0 - ratio * d.output.rectifier_drop / vr, 0.0))
        if self.aux_state:
            regulation_power = aux_energy * frequency
            delivered = secondary * share_out * frequency
        else:
            regulation_power = np.where(ireg > 0.0, output_voltage * ireg
                                        / np.maximum(d.regulation.ctr, 1e-300)
                                        if d.regulation.method == "optocoupler"
                                        else 0.0, 0.0)
            delivered = secondary * share_out * frequency - regulation_power
        # a cycle after which the switch cannot turn on again delivers once,
        # not at a rate
        delivered = np.where(restarts, delivered, 0.0)
        state = dict(
            vr=vr, ireg=ireg, itrip=itrip, peak=peak, t_on=t_on, t_off=t_off,
            start=np.broadcast_to(i0, np.shape(peak)), t_turn_off=t_rise,
            frequency=frequency, delivered=delivered, on_end=on_end, off_end=off_end,
            mode=mode, vc_next=vc_next, va_next=va_next, residual=residual,
            restarts=restarts, drive_capability=drive_capability,
            transferred=transferred, shortfall=shortfall, clamp_next=clamp_next,
            # the ring reached the switch's threshold but the regulation hold
            # kept it off: whether the ring's drive beats what the held
            # limiter sinks is not weighed (notes/cycle_model.md)
            ring_held=ring_on & ~ccm & (mode == 0),
            clamp_peak=np.broadcast_to(clamp_peak, np.shape(peak)),
        )
        if not losses:
            return state
        # collector voltage at turn-on: on the ring where the winding lifts
        # the base (not necessarily the valley), on the plateau in CCM
        ring_turn_on = self.bus + vr * np.cos(phase) * self.ring_damping ** (phase / np.pi)
        turn_on_voltage = np.where(ring_on & ~ccm, np.maximum(ring_turn_on, 0.0),
                                   np.where(ccm, self.bus + vr, self.bus))
        mean_current = 0.5 * (peak + i0)
        square_current = (peak**2 + peak * i0 + i0**2) / 3.0
        state["losses"] = Losses(
            switch_conduction=(sw.vce_sat * mean_current
                               + SWITCH_SATURATION_RESISTANCE * square_current) * t_on * frequency,
            resistive=(lim.sense_resistance + tr.primary_resistance) * square_current * t_on
            * frequency,
            core=(self.bus**2 * t_on + vr**2 * t_flyback) / tr.core_loss_resistance * frequency,
            clamp=clamp_rate,
            turn_off=crossing * frequency,
            turn_off_flyback=reversal * frequency,
            capacitive=0.5 * d.node_capacitance * turn_on_voltage**2 * frequency,
            rectifier=secondary * (1.0 - share_out) * frequency,
            drive=self.winding_on * charge_base * frequency,
            reset=reset_energy * frequency,
            startup=self.bus * self.startup_current,
            regulation=regulation_power,
        )
        return state

    def _clamp_level(self, vr, peak, frequency):
        """Collector voltage above the bus while a zener clamp conducts, or
        the leakage spike's peak with no clamp [V]."""
        d = self.design
        if d.clamp.type == "zener":
            return np.broadcast_to(d.clamp.voltage, np.shape(vr)).astype(float)
        return vr + leakage_spike(peak, d.transformer.leakage_inductance, d.node_capacitance)

    def clamp_cycle(self, vr, peak, cycle_time, clamp0=None):
        """The RCD clamp capacitor through one cycle from ``clamp0`` (default
        the steady cycle's level) (:class:`rcc.stress.RcdClampCycle`)."""
        d = self.design
        arguments = (d.transformer.leakage_inductance, peak, d.clamp.capacitance,
                     d.clamp.resistance, cycle_time)
        if clamp0 is None:
            clamp0 = rcd_clamp_periodic(vr, *arguments)
        return rcd_clamp_cycle(clamp0, vr, *arguments)

    # ------------------------------------------------ drive-capacitor reset
    # While the feedback winding holds the base negative, three paths reset
    # the drive capacitor (voltage v_C, winding side positive):
    #   1. base-emitter breakdown clamps the base at -VEBO: v_C relaxes
    #      towards w + VEBO through R_b (tau_fast = R_b C_b);
    #   2. the limiter conducts in inverse mode once the base is below -V_d
    #      (V_d its junction drop): its base current I_B through R_lb from the
    #      sense node at ground, plus the inverse transport current
    #      beta_R I_B from its emitter (Ebers & Moll 1954), so the base node
    #      sees R_lb / (1 + beta_R): v_C relaxes towards w + V_d with
    #      tau_cb = R_cb C_b, R_cb = R_b + R_lb / (1 + beta_R); on the flyback
    #      plateau with zener regulation the zener path (from V_ap - Vz
    #      through R_z) feeds the limiter's base too: R_lb becomes
    #      R_lb || R_z and the asymptote w + V_d - V_th, V_th = (V_ap - Vz)
    #      R_lb / (R_lb + R_z) (notes/cycle_model.md);
    #   3. the slow path: base-emitter resistor and start-up current.
    # Breakdown (1) stops carrying current at v_C* = w + VEBO + R_b (VEBO -
    # V_d)(1 + beta_R)/R_lb, where path 2 alone holds the base at -VEBO.
    # Paths 2 and 3 then act in parallel (one linear RC towards the weighted
    # asymptote) until v_C reaches w + V_d, where path 2's current ends; path
    # 3 alone takes it on from there (notes/cycle_model.md, "the junction
    # path's end").  The compiled timing evaluates these stages
    # (rcc._cycle_kernel.reset, reset_cross).

    def _clamp_resistance(self):
        """Resistance of the inverse-mode limiter reset path, ``R_b + R_lb /
        (1 + beta_R)`` [ohm]."""
        return (self.design.drive.resistance
                + self.design.limiter.base_resistance / (1.0 + LIMITER_REVERSE_GAIN))

    def _ring_after_clamp(self, vc, winding, vr):
        """Amplitude [V, primary] of the free ring once the base clamps let go.

        At the end of demagnetization the drive-capacitor reset current
        ``i = (v_C - v_j)/R`` (``v_j`` the clamp asymptote, ``R`` the inverse-mode
        limiter path of :meth:`_clamp_resistance`) still flows through the limiter: the
        feedback winding is loaded by ``R`` and the node sees the parallel
        conductance ``G = n_b^2 / R``.  With ``x`` the fall of the collector
        from its plateau, ``C x'' + G x' + x / L_m = V_R / L_m`` from
        ``x = x' = 0``: a ring damped by ``zeta = G Z_0 / 2``.  The clamp lets
        go where the winding has risen by ``v_C - v_j`` (``x_r = (v_C - v_j) /
        n_b``); from there the ring is free, with amplitude
        ``sqrt((x_r - V_R)^2 + (x'_r / omega_0)^2)`` about the bus.  If the
        damped swing never reaches ``x_r`` the base stays clamped: amplitude 0
        (the switch waits for the slow path).  With no reset current left the
        amplitude is ``V_R``.  Parallel RLC step response: Nilsson & Riedel,
        Electric Circuits, 10th ed., 2015, sec. 8.3.
        """
        vc, winding, vr, drop = (np.ravel(value) for value in np.broadcast_arrays(
            *(np.asarray(value, dtype=float) for value in (vc, winding, vr,
                                                           self.vbe_limiter))))
        return kernel.ring_after_clamp_many(self.constants, drop, vc, winding, vr)


def operating_points(design: Design, line_voltage, load, temperature=None, hfe=None):
    """Steady-state operating points of the free-running flyback.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float or array_like
        RMS line voltage for AC input, DC input voltage otherwise [V].
    load : Load, float or array_like
        A :class:`rcc.design.Load`, or load currents [A].
    temperature : float or array_like, optional
        Temperature [K]; default 25 degC clipped into the design's range.
    hfe : float or array_like, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.

    Returns
    -------
    OperatingPoints
        Arrays broadcast over the inputs.

    Notes
    -----
    On-time: the collector current rises as the R L step of the primary loop
    (``(V_bus - Vce_sat) / (Lm + L_lk)`` at zero current, less the drop across
    the winding, the saturated switch and the sense resistor) until the first
    of (a) ``hFE I_B(t)``, the base current decaying as the drive capacitor
    charges (blocking-oscillator timing [3]_), or (b) the trip current of the
    limiter with the regulation current (``notes/circuit.md``).  The switch
    then stays saturated for the storage time of the charge-control model
    [4]_: the excess charge the base current has left since the turn-on (the
    drive, less what the limiter takes once the emitter current passes its
    threshold) drains while the base current falls on after the decision;
    ``tau_S = storage_time / ln 2`` (the datasheet storage time taken at
    ``I_B1 = I_B2`` and hard overdrive; ``notes/cycle_model.md``).
    After storage the limiter holds the collector current while the collector
    rises to the bus (turn-off transition, included in the on-time; derived in
    ``notes/cycle_model.md``, charge control after Beaufoy & Sparkes 1957);
    the ramp starts at the negative ring current of the previous off-time.

    Off-time: demagnetization ``Lm Ipk / V_R`` [1]_, then the ring of ``Lm``
    with the node capacitance turns the switch on as soon as the feedback
    winding lifts the base over Vbe (at most half a ring period, the valley).
    If the drive capacitor still holds the base off, the off-time is set by
    the capacitor discharging through ``R_be`` or the start-up current
    (drive timing, DCM); if the timer expires before demagnetization the
    switch turns on early (CCM).  During the plateau the base is clamped at
    ``-switch.vebo`` where the winding drives it below that.

    The output voltage balances ``E f - P_reg`` (energy per cycle less core,
    rectifier and regulation losses, the clamp's share above the leakage
    energy, the turn-off above the bus and the drive reset in the flyback)
    against the load power [2]_.  When even
    the storage-time-limited minimum energy per cycle exceeds the load, the
    supply bursts at the output where the regulation path holds the limiter
    on (mode ``burst``); the reported frequency is the average.

    Simplifications: the leakage ring on the feedback winding, the sense
    voltage in the base loop and the switch's turn-on transition are
    neglected; the output is taken ripple-free.  The periodic-steady-state
    engine (``rcc cycle``) checks these (``notes/periodic_steady_state.md``).
    """
    if temperature is None:
        temperature = reference_temperature(design)
    if hfe is None:
        hfe = design.switch.hfe_typ
    load_values = np.asarray(load.value if isinstance(load, Load) else load, dtype=float)
    line, temp, hfe25, _ = np.broadcast_arrays(
        np.asarray(line_voltage, dtype=float), np.asarray(temperature, dtype=float),
        np.asarray(hfe, dtype=float), load_values)
    line, temp, hfe25 = (np.array(a, dtype=float) for a in (line, temp, hfe25))
    load = _LoadLaw(load.kind if isinstance(load, Load) else "current",
                    np.broadcast_to(load_values, line.shape).astype(float),
                    expected_output_voltage(design, reference_temperature(design)))
    gain = current_gain(hfe25, design.switch.hfe_tempco, temp)

    if design.input.is_ac:
        bus, result = _bus_balance(design, line, temp, gain, load)
    else:
        bus = np.maximum(line, 1.0)
        result = _solve_output(design, bus, temp, gain, load)
    return _assemble(design, line, bus, temp, gain, load, result)


#: Relative distance of the start-up bias ``I_start R_be`` from ``Vbe`` within
#: which a point is reported on the regime boundary of the drive-timed restart
_START_BIAS_BOUNDARY = 1e-4

#: Relative tolerance of the bulk valley against the input power it feeds
_BUS_TOLERANCE = 1e-9


def _bus_balance(design: Design, line, temperature, gain, load):
    """Bulk-capacitor valley consistent with the power the supply draws.

    The valley ``V(P)`` (:func:`rcc.mains.bulk_valley`) falls as the input
    power ``P`` rises, and ``P`` depends on the bus through the operating
    point; the bus is the root of ``h(V) = V - V(P(V))``.  ``h`` is
    non-negative at the rectified peak (zero power); stepping down by
    ``V <- V(P(V))`` brackets the root, which regula falsi (Illinois; see
    :func:`_first_crossing`) then refines until ``|h|`` or the bracket is
    below :data:`_BUS_TOLERANCE` relative.  Only the points not yet converged
    are solved again.  (In overload the input power falls steeply with the
    bus, so a fixed number of passes leaves the output far from its
    balance.)
    """
    shape = line.shape
    size = int(np.prod(shape)) if shape else 1
    flat = lambda value: np.reshape(value, (size,)).astype(float)  # noqa: E731
    line, temperature, gain = flat(line), flat(temperature), flat(gain)
    load = load.take(slice(None))

    def solve(bus, index):
        part = _solve_output(design, bus, temperature[index], gain[index], load.take(index))
        valley = np.maximum(bus_voltage(design, line[index], part["input_power"]), 1.0)
        return part, bus - valley

    everything = np.arange(size)
    high = np.maximum(bus_voltage(design, line, 0.0), 1.0)
    result, h_high = solve(high, everything)
    bus = high.copy()
    tolerance = _BUS_TOLERANCE * high
    done = np.abs(h_high) <= tolerance
    low, h_low = high - h_high, np.zeros(size)
    # step down until h changes sign (h is non-positive at the 1 V floor)
    pending = ~done
    for _ in range(60):
        index = np.flatnonzero(pending)
        if index.size == 0:
            break
        part, h_part = solve(low[index], index)
        result = _put_state(result, part, index, size)
        bus[index], h_low[index] = low[index], h_part
        converged = np.abs(h_part) <= tolerance[index]
        done[index] |= converged
        below = (h_part < 0.0) & ~converged
        above = ~below & ~converged
        high[index[above]], h_high[index[above]] = low[index[above]], h_part[above]
        low[index[above]] = np.maximum(low[index[above]] - h_part[above], 1.0)
        pending[index[below | converged]] = False
    # regula falsi, Illinois modification, on the bracket [low, high]
    side = np.zeros(size, dtype=int)
    for _ in range(200):
        index = np.flatnonzero(~done)
        if index.size == 0:
            break
        lo, hi, f_lo, f_hi = low[index], high[index], h_low[index], h_high[index]
        with np.errstate(divide="ignore", invalid="ignore"):
            trial = hi - f_hi * (hi - lo) / (f_hi - f_lo)
        bad = ~np.isfinite(trial) | (trial <= lo) | (trial >= hi)
        trial = np.where(bad, 0.5 * (lo + hi), trial)
        part, h_trial = solve(trial, index)
        result = _put_state(result, part, index, size)
        bus[index] = trial
        upper = h_trial >= 0.0
        s = side[index]
        h_low[index] = np.where(~upper, h_trial, np.where(s == -1, 0.5 * f_lo, f_lo))
        low[index] = np.where(~upper, trial, lo)
        h_high[index] = np.where(upper, h_trial, np.where(s == 1, 0.5 * f_hi, f_hi))
        high[index] = np.where(upper, trial, hi)
        side[index] = np.where(upper, -1, 1)
        done[index] = (np.abs(h_trial) <= tolerance[index]) \
            | (high[index] - low[index] <= tolerance[index])
    # a bus not converged within the iteration caps: the point is unsettled
    result["settled"] = result["settled"] & done
    return bus.reshape(shape), {key: _unflatten(value, shape, size)
                                for key, value in result.items()}


def operating_points_batch(design: Design, requests):
    """Several :func:`operating_points` requests solved in one vectorized call.

    Parameters
    ----------
    design : Design
        The design.
    requests : sequence of tuple
        ``(line_voltage, load, temperature, hfe)`` per request, as the
        arguments of :func:`operating_points` (``load`` a :class:`Load`;
        ``temperature`` and ``hfe`` may be None for the defaults) [V, -, K, 1].

    Returns
    -------
    list of OperatingPoints
        One per request, shaped as that request's broadcast inputs.

    Notes
    -----
    The cycle model's cost is set by the number of its vectorized passes,
    not by the number of points, so requests with loads of the same kind are
    flattened into one call (the load values become an array) and the results
    split again.  Each point is solved independently: the results equal those
    of separate calls.
    """
    results = [None] * len(requests)
    groups: dict = {}
    for index, (line, load, temperature, hfe) in enumerate(requests):
        if temperature is None:
            temperature = reference_temperature(design)
        if hfe is None:
            hfe = design.switch.hfe_typ
        value = load.value if isinstance(load, Load) else load
        kind = load.kind if isinstance(load, Load) else "current"
        arrays = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                       for a in (line, temperature, hfe, value)))
        groups.setdefault(kind, []).append((index, arrays))
    for kind, members in groups.items():
        flat = [np.concatenate([np.ravel(arrays[i]) for _, arrays in members])
                for i in range(4)]
        points = operating_points(design, flat[0], Load(kind, flat[3]), flat[1], flat[2])
        start = 0
        for index, arrays in members:
            shape = arrays[0].shape
            size = int(np.prod(shape, dtype=int))
            results[index] = _slice_points(points, slice(start, start + size), shape)
            start += size
    return results


def _slice_points(points: OperatingPoints, part: slice, shape) -> OperatingPoints:
    def cut(value):
        return np.reshape(np.broadcast_to(value, points.shape)[part], shape)

    values = {}
    for item in fields(OperatingPoints):
        value = getattr(points, item.name)
        if item.name == "losses":
            values[item.name] = Losses(**{loss.name: cut(getattr(value, loss.name))
                                          for loss in fields(Losses)})
        else:
            values[item.name] = cut(value)
    return OperatingPoints(**values)


def _upper_output(design: Design, temperature, bus):
    """Top of the output range the power balance is searched in [V].

    Optocoupler (or no regulation at all): the output at which the regulation
    current alone turns the limiter on (above it the supply can only burst).
    Feedback-winding regulation: the auxiliary capacitor lets the output rise
    above that level with a dead time growing with it, so the search extends
    to twice the hold output (at least 10 V above it).  Capped by the output
    at which the reflected voltage reaches the clamp level (or twice the bus).
    """
    tr = design.transformer
    if design.clamp.type == "zener":
        reflected_max = design.clamp.voltage
    else:
        reflected_max = 2.0 * bus
    cap = np.maximum(reflected_max * tr.output_turns / tr.primary_turns
                     - design.output.rectifier_drop, 1e-3)
    hold = hold_output_voltage(design, temperature)
    if hold is None:
        return cap + np.zeros_like(bus)
    hold = np.maximum(hold, 1e-3) + np.zeros_like(bus)
    if design.regulation.method == "feedback-winding":
        return np.minimum(np.maximum(2.0 * hold, hold + 10.0), np.maximum(cap, hold))
    return hold


#: Relative tolerance of the cycle-to-cycle fixed point of the cycle states.
_FIXED_POINT_TOLERANCE = 1e-10
_NEWTON_ITERATIONS = 16
#: Plain map steps before Newton's method starts.
_PLAIN_STEPS = 1
#: Longest repeating pattern of cycles recognised as such [cycles].
_MAX_PERIOD = 6
_PATTERN_CYCLES = 64
_IRREGULAR_WINDOW = 24


_STATE_KEYS = ("vc", "i0", "va")
#: Scales of the states (drive capacitor, turn-on current, auxiliary capacitor)
#: for tolerances and finite-difference steps [V, A, V].
_STATE_SCALES = (1.0, 1e-3, 1.0)


def _map(cycle: "_Cycle", voltage, states, losses=False, energy=True, clamp=None):
    """One cycle from the states ``(vc, i0, va)`` at a turn-on: the cycle's
    quantities and the states at the next turn-on (without ``energy``, the
    states only: what the fixed-point and pattern searches need).  ``clamp``
    is the RCD clamp capacitor's voltage (default: the steady cycle's)."""
    state = cycle.evaluate(voltage, states[..., 0], states[..., 1], states[..., 2],
                           losses=losses, energy=energy, clamp0=clamp)
    image = np.stack([state["vc_next"], state["residual"],
                      np.broadcast_to(state["va_next"], np.shape(state["vc_next"]))], axis=-1)
    return state, image


def _newton_fixed_point(cycle, voltage, x, iterations):
    """Newton's method on ``F(x) - x`` for a period-1 fixed point of the map.

    A few plain map steps first (the map usually contracts hard: clamped
    states land exactly); then Newton with a forward-difference Jacobian on
    the points still moving, taking the plain map step where a Newton step
    does not reduce the residual (kinks of the piecewise map).  Works on flat
    arrays and evaluates only the points not yet converged.  Returns the
    states and a mask of the points that converged.
    """
    scale = np.asarray(_STATE_SCALES) * np.ones_like(x)
    identity = np.eye(3)
    converged = np.zeros(x.shape[0], dtype=bool)
    active = np.arange(x.shape[0])
    # the image of x where it is already known (an accepted Newton trial)
    known = np.zeros(x.shape[0], dtype=bool)
    known_image = np.empty_like(x)
    for iteration in range(iterations):
        xa, va = x[active], voltage[active]
        image = known_image[active]
        fresh = ~known[active]
        if fresh.any():
            _, image[fresh] = _map(cycle.subset(active[fresh]), va[fresh], xa[fresh],
                                   energy=False)
        known[active] = False
        residual = image - xa
        size = np.max(np.abs(residual) / (np.abs(xa) + scale[active]), axis=-1)
        done = size <= _FIXED_POINT_TOLERANCE
        converged[active[done]] = True
        if iteration < _PLAIN_STEPS:
            x[active[~done]] = image[~done]
            active = active[~done]
        else:
            keep = ~done
            active, xa, image, residual, size, va = (
                active[keep], xa[keep], image[keep], residual[keep], size[keep], va[keep])
            count = active.size
            if count == 0:
                break
            # the three forward differences and the Newton trial are separate
            # evaluations; the first three share one call (elementwise map)
            step = 1e-7 * (np.abs(xa) + scale[active])
            shifted = np.repeat(xa[None], 3, axis=0)
            for column in range(3):
                shifted[column, :, column] += step[:, column]
            _, images = _map(cycle.subset(np.tile(active, 3)), np.tile(va, 3),
                             shifted.reshape(3 * count, 3), energy=False)
            images = images.reshape(3, count, 3)
            jacobian = np.empty(xa.shape + (3,))
            for column in range(3):
                jacobian[:, :, column] = (images[column] - image) / step[:, column, None]
            system = jacobian - identity
            singular = ~(np.abs(np.linalg.det(system)) > 1e-12)
            system = np.where(singular[:, None, None], -identity, system)
            newton = xa - np.linalg.solve(system, residual[..., None])[..., 0]
            _, trial_image = _map(cycle.subset(active), va, newton, energy=False)
            trial_size = np.max(np.abs(trial_image - newton)
                                / (np.abs(newton) + scale[active]), axis=-1)
            better = np.isfinite(trial_size) & (trial_size < size)
            x[active] = np.where(better[:, None], newton, image)
            known[active] = better
            known_image[active] = trial_image
        if active.size == 0:
            break
    return x, converged


#: Keys of the cycle evaluation averaged over time (powers) when a pattern
#: of several cycles repeats; the others are averaged per cycle.
_POWER_KEYS = ("delivered",)


def _settle(cycle: "_Cycle", voltage, state_in, losses=False):
    """The repeating cycle pattern at a fixed output voltage, and its averages.

    ``state_in`` holds the drive-capacitor voltage ``vc``, the turn-on current
    ``i0`` and the auxiliary-capacitor voltage ``va`` at a turn-on; one
    switching cycle maps them to their values at the next turn-on.  First
    Newton's method looks for a period-1 fixed point (every state to
    ``_FIXED_POINT_TOLERANCE`` relative to its scale).  Where there is none,
    the map is iterated until the states repeat after ``p <= _MAX_PERIOD``
    cycles to the same tolerance (a period-``p`` pattern: for example a full
    pulse that drains the auxiliary capacitor followed by short held pulses);
    where nothing repeats within ``_PATTERN_CYCLES`` cycles the pattern is
    ``irregular`` and the last ``_IRREGULAR_WINDOW`` cycles are averaged.
    Powers are averaged over time, per-cycle quantities over cycles;
    ``frequency`` is the mean switching rate.  Adds ``period_cycles`` (0 for
    irregular) and ``converged`` (a period-1 fixed point).
    """
    shape = np.shape(cycle.bus)
    flat = cycle.subset(slice(None))
    voltage = np.broadcast_to(np.asarray(voltage, dtype=float), shape).reshape(-1)
    x = np.stack([np.broadcast_to(np.asarray(state_in[key], float), shape).reshape(-1)
                  for key in _STATE_KEYS], axis=-1).astype(float)
    x, converged = _newton_fixed_point(flat, voltage, x, _NEWTON_ITERATIONS)
    period = np.where(converged, 1, 0)
    loose = np.flatnonzero(~converged)
    if loose.size:
        scale = np.asarray(_STATE_SCALES)
        sub = flat.subset(loose)
        history = [x[loose]]
        found = np.zeros(loose.size, dtype=int)
        for _ in range(_PATTERN_CYCLES):
            _, x_next = _map(sub, voltage[loose], history[-1], energy=False)
            x_next = np.where((found > 0)[:, None], history[-1], x_next)
            history.append(x_next)
            for lag in range(1, min(_MAX_PERIOD, len(history) - 1) + 1):
                gap = np.max(np.abs(history[-1] - history[-1 - lag])
                             / (np.abs(history[-1]) + scale), axis=-1)
                found = np.where((found == 0) & (gap <= _FIXED_POINT_TOLERANCE), lag, found)
            if (found > 0).all():
                break
        x[loose] = history[-1]
        period[loose] = found
    state, _ = _map(flat, voltage, x, losses)
    patterned = np.flatnonzero(period != 1)
    if patterned.size:
        averaged = _pattern_average(flat.subset(patterned), voltage[patterned],
                                    x[patterned], period[patterned],
                                    _take_state(state, patterned, x.shape[0]), losses)
        state = _put_state(state, averaged, patterned, x.shape[0])
    state["converged"] = converged
    state["period_cycles"] = period
    state = {key: _unflatten(value, shape, x.shape[0]) for key, value in state.items()}
    return state, {key: x[:, i].reshape(shape) for i, key in enumerate(_STATE_KEYS)}


def _take_state(state, index, size):
    out = {}
    for key, value in state.items():
        if isinstance(value, Losses):
            out[key] = Losses(**{item.name: np.broadcast_to(getattr(value, item.name),
                                                            (size,))[index]
                                 for item in fields(Losses)})
        elif isinstance(value, np.ndarray) and value.shape == (size,):
            out[key] = value[index]
        else:
            out[key] = value
    return out


def _put_state(state, part, index, size):
    out = {}
    for key, value in state.items():
        if key not in part:
            out[key] = value
        elif isinstance(value, Losses):
            merged = {}
            for item in fields(Losses):
                array = np.array(np.broadcast_to(getattr(value, item.name), (size,)), float)
                array[index] = getattr(part[key], item.name)
                merged[item.name] = array
            out[key] = Losses(**merged)
        elif isinstance(value, np.ndarray) and value.shape == (size,):
            array = value.copy() if value.dtype == np.asarray(part[key]).dtype \
                else value.astype(np.result_type(value, part[key]))
            array[index] = part[key]
            out[key] = array
        else:
            out[key] = value
    for key in part:
        if key not in out:
            array = np.zeros(size, dtype=np.asarray(part[key]).dtype)
            array[index] = part[key]
            out[key] = array
    return out


def _unflatten(value, shape, size):
    if isinstance(value, Losses):
        return Losses(**{item.name: _unflatten(getattr(value, item.name), shape, size)
                         for item in fields(Losses)})
    if isinstance(value, np.ndarray) and value.shape == (size,):
        return value.reshape(shape)
    return value


def _clamp_pattern_start(cycle, voltage, x, length):
    """RCD clamp capacitor voltage at the first turn-off of a repeating
    pattern of ``length`` cycles (per point) from the states ``x`` [V].

    The capacitor is carried through the pattern's cycles
    (:func:`rcc.stress.rcd_clamp_cycle`, the times and peak currents of the
    cycles, which it does not change) and must return to where it started:
    the fixed point of the pattern map ``F``.  ``F`` is increasing and convex
    with slope below ``exp(-T_pattern / (R C)) < 1``, so Newton's method from
    ``v = 0`` (where ``F(v) > v``) climbs monotonically to the root; it stops
    at 1e-12 relative.  An irregular sequence is taken as repeating its
    window.
    """
    shape = np.shape(length)
    count = int(length.max())
    vr, peaks, times = None, [], []
    for _ in range(count):
        quick, x = _map(cycle, voltage, x, energy=False)
        vr = quick["vr"]
        peaks.append(quick["peak"])
        times.append(quick["t_on"] + quick["t_off"])
    start = np.zeros(shape)
    for _ in range(100):
        value, slope = start, np.ones(shape)
        for k in range(count):
            clamp = cycle.clamp_cycle(vr, peaks[k], times[k], value)
            take = k < length
            rising = np.where(value > vr, (clamp.start - vr) / (clamp.end - vr), 0.0)
            slope = np.where(take, slope * rising * clamp.following / clamp.end, slope)
            value = np.where(take, clamp.following, value)
        gap = value - start
        step = gap / (1.0 - slope)
        start = start + step
        if np.all(np.abs(step) <= 1e-12 * np.maximum(start, 1e-3)):
            break
    return start


def _pattern_average(cycle, voltage, x, period, first, losses=False):
    """Averages over one repetition of a cycle pattern (see :func:`_settle`).

    With an RCD clamp the clamp capacitor is carried through the pattern
    from its periodic start (:func:`_clamp_pattern_start`): a long cycle of a
    burst discharges it and the next turn-offs recharge it.
    """
    length = np.where(period == 0, _IRREGULAR_WINDOW, period)
    count = int(length.max())
    shape = np.shape(period)
    sums, weights = {}, np.zeros(shape)
    cycles = np.zeros(shape)
    peak_max = np.zeros(shape)
    largest = dict(first)
    state = first
    rcd = cycle.design.clamp.type == "rcd"
    clamp = _clamp_pattern_start(cycle, voltage, x, length) if rcd else None
    clamp_peak = np.zeros(shape)
    for k in range(count):
        if k or rcd:
            state, _ = _map(cycle, voltage, x, losses, clamp=clamp)
        if rcd:
            clamp = state["clamp_next"]
        take = k < length
        clamp_peak = np.where(take, np.maximum(clamp_peak, state["clamp_peak"]), clamp_peak)
        duration = state["t_on"] + state["t_off"]
        if losses:
            for item in fields(Losses):
                value = np.broadcast_to(getattr(state["losses"], item.name), shape)
                name = "losses." + item.name
                sums[name] = sums.get(name, 0.0) + np.where(take, value * duration, 0.0)
        for key, value in state.items():
            if not isinstance(value, np.ndarray) or value.dtype.kind not in "fi" \
                    or value.shape != shape or key in ("mode", "on_end", "off_end"):
                continue
            weight = duration if key in _POWER_KEYS else 1.0
            sums[key] = sums.get(key, 0.0) + np.where(take, value * weight, 0.0)
        weights = weights + np.where(take, duration, 0.0)
        cycles = cycles + take
        # the repeating pattern is described by its strongest pulse
        stronger = take & (state["peak"] > peak_max)
        peak_max = np.where(stronger, state["peak"], peak_max)
        for key, value in state.items():
            if isinstance(value, np.ndarray) and value.shape == shape:
                largest[key] = np.where(stronger, value, largest[key])
        x = np.stack([state["vc_next"], state["residual"],
                      np.broadcast_to(state["va_next"], shape)], axis=-1)
    averaged = dict(first)
    multi = period != 1
    for key, total in sums.items():
        if key.startswith("losses."):
            continue
        mean = total / (weights if key in _POWER_KEYS else cycles)
        averaged[key] = np.where(multi, mean, first[key])
    if losses:
        averaged["losses"] = Losses(**{
            item.name: np.where(multi, sums["losses." + item.name] / weights,
                                np.broadcast_to(getattr(first["losses"], item.name), shape))
            for item in fields(Losses)})
    for key in ("mode", "on_end", "off_end", "restarts"):
        averaged[key] = np.where(multi, largest[key], first[key])
    averaged["peak"] = np.where(multi, peak_max, first["peak"])
    averaged["clamp_peak"] = np.where(multi, clamp_peak, first["clamp_peak"])
    averaged["frequency"] = np.where(multi, cycles / weights, first["frequency"])
    averaged["pattern_period"] = np.where(multi, weights, 1.0 / first["frequency"])
    # the states that start the next repetition are those at its start
    averaged["vc_next"], averaged["residual"], averaged["va_next"] = (
        first["vc_next"], first["residual"], first["va_next"])
    return averaged


def _surplus(state, load, voltage):
    return state["delivered"] - _load_power(load, voltage)


def _balance(cycle, load, low, high, seed):
    """Output voltage in ``[low, high]`` where the surplus changes sign.

    The surplus is positive at ``low`` and not positive at ``high``; the
    root is bracketed to ``1e-8`` relative (:func:`_first_crossing`; far
    below the 1e-6 to which results must be well posed, and above the
    surplus's own noise from the settled cycle states; a jump of the surplus
    across zero, where the cycle regime changes, is located to 1e-6).  Every
    trial output
    settles the cycle pattern from the states at the low end of the current
    bracket (at first ``seed``, what the rising output brought along): the
    path of a rising output, as from power-on.
    """
    shape = np.shape(low)
    memory = {key: np.array(np.broadcast_to(value, shape), dtype=float).reshape(-1)
              for key, value in seed.items()}
    memory_voltage = np.array(np.broadcast_to(low, shape), dtype=float).reshape(-1)
    flat_load = load.take(slice(None))

    def deficit(voltage, index):
        part = flat_load.take(index)
        state, settled = _settle(cycle.subset(index), voltage,
                                 {key: value[index] for key, value in memory.items()})
        surplus = _surplus(state, part, voltage)
        lower = (surplus > 0.0) & (voltage >= memory_voltage[index])
        for key in memory:
            memory[key][index] = np.where(lower, settled[key], memory[key][index])
        memory_voltage[index] = np.where(lower, voltage, memory_voltage[index])
        return -surplus

    return _first_crossing(deficit, low, high, tolerance=1e-8,
                           jump=1e-3 * _load_power(load, high))


def _mix_regimes(first, second, share, where):
    """Averages of a supply alternating between two cycle regimes.

    ``share`` is the fraction of time spent in ``first``.  Powers (and the
    loss breakdown) and the switching rate mix by time; per-pulse times by
    pulse count; the peak current is the larger one.  Applied only ``where``.
    """
    f1, f2 = first["frequency"], second["frequency"]
    rate = share * f1 + (1.0 - share) * f2
    pulses = np.where(rate > 0, share * f1 / np.maximum(rate, 1e-300), 0.0)
    mixed = dict(second)
    for key in ("delivered",):
        mixed[key] = np.where(where, share * first[key] + (1.0 - share) * second[key],
                              second[key])
    for key in ("t_on", "t_turn_off", "vr", "ireg", "itrip", "start", "drive_capability",
                "transferred", "shortfall"):
        mixed[key] = np.where(where, pulses * first[key] + (1.0 - pulses) * second[key],
                              second[key])
    mixed["frequency"] = np.where(where, rate, f2)
    mixed["t_off"] = np.where(where, 1.0 / np.maximum(rate, 1e-300) - mixed["t_on"],
                              second["t_off"])
    stronger = first["peak"] > second["peak"]
    for key in ("peak", "mode", "on_end", "off_end", "restarts"):
        mixed[key] = np.where(where & stronger, first[key], second[key])
    mixed["restarts"] = np.where(where, first["restarts"] | second["restarts"],
                                 second["restarts"])
    mixed["clamp_peak"] = np.where(where, np.maximum(first["clamp_peak"], second["clamp_peak"]),
                                   second["clamp_peak"])
    mixed["converged"] = second["converged"] & ~where
    if "losses" in first:
        mixed["losses"] = Losses(**{
            item.name: np.where(where, share * getattr(first["losses"], item.name)
                                + (1.0 - share) * getattr(second["losses"], item.name),
                                getattr(second["losses"], item.name))
            for item in fields(Losses)})
    return mixed


def _regulation_level(design: Design, temperature):
    """Output the design regulates to: its target, else the regulation hold
    point, else None [V]."""
    if design.output.voltage_target is not None:
        return design.output.voltage_target
    return hold_output_voltage(design, temperature)


def _solve_output(design: Design, bus, temperature, gain, load):
    """Output voltage of the power balance the supply reaches from power-on.

    From power-on the output rises from zero while the surplus
    ``P_delivered - P_load`` is positive; the cycle states (drive capacitor,
    turn-on current, auxiliary capacitor) follow the rising output, so the
    scan climbs from the bottom of the output range and carries them along
    (where two cycle patterns coexist at one output, the one the rising
    output arrives on is the one taken).  The output stops at the first
    significant deficit: that balance is refined to full precision.  If the
    surplus turns positive again above it (a higher balance the supply would
    hold if it got there, below which the short, low flyback plateaus of a
    low output cannot reset the drive capacitor), and the first balance is
    below 80 % of the output the design is meant to hold (its target, else the
    regulation hold output), the point is a start-up lock-up: mode ``lockup``
    at the output where it sits.
    """
    cycle = _Cycle(design, bus, temperature, gain, load)
    top = _upper_output(design, temperature, bus)
    states = {"vc": np.minimum(cycle.v_threshold, 0.0) + np.zeros_like(bus),
              "i0": np.zeros_like(bus),
              "va": np.zeros_like(bus)}
    fractions = np.append(1e-4, np.linspace(0.0, 1.0, _SCAN_POINTS + 1)[1:])
    shape = (fractions.size,) + bus.shape
    scan_voltage, scan_surplus = np.empty(shape), np.empty(shape)
    scan_states = {key: np.empty(shape) for key in states}
    for index, fraction in enumerate(fractions):
        voltage = top * fraction
        state, states = _settle(cycle, voltage, states)
        scan_voltage[index] = voltage
        scan_surplus[index] = _surplus(state, load, voltage)
        for key in states:
            scan_states[key][index] = states[key]
    positive = scan_surplus > 0.0
    regulated = design.regulation.method != "none"
    any_positive = positive.any(axis=0)
    index = np.arange(fractions.size).reshape((-1,) + (1,) * bus.ndim)
    # a deficit of less than 0.1 % of the full load power (where both powers
    # vanish near zero output) is no barrier
    deficit = scan_surplus < -1e-3 * _load_power(load, top)
    # a deficit below the first surplus is a barrier too: from power-on the
    # output cannot climb through outputs where the cycles (for example ones
    # after which the switch cannot turn on again) deliver less than the load
    barrier_mask = deficit
    has_barrier = barrier_mask.any(axis=0)
    # no surplus anywhere (a collapsed output) the supply sits at the bottom;
    # a surplus up to the top of the range: the regulation path holds there
    barrier = np.where(has_barrier, np.argmax(barrier_mask, axis=0),
                       np.where(any_positive, fractions.size - 1, 0))
    # still a surplus at the top of the range: the regulation path holds the
    # limiter on there and the supply bursts at that output
    burst = ~has_barrier & positive[-1] & regulated
    take = lambda array, idx: np.take_along_axis(array, idx[None], axis=0)[0]  # noqa: E731
    low_index = np.maximum(barrier - 1, 0)
    low, high = take(scan_voltage, low_index), take(scan_voltage, barrier)
    seed = {key: take(scan_states[key], low_index) for key in scan_states}
    refine = has_barrier & take(positive, low_index)
    output = _balance(cycle, load, low, np.where(refine, high, low), seed)
    output = np.where(burst, top, np.where(refine, output, low))
    higher = np.any((index > barrier[None]) & positive, axis=0) & has_barrier
    reference = _regulation_level(design, temperature)
    if reference is None:
        reference = np.max(np.where(positive, scan_voltage, 0.0), axis=0)
    lockup = higher & (output < 0.8 * reference) & any_positive
    sits_at_bottom = has_barrier & ~refine
    seed = {key: np.where(burst, scan_states[key][-1], seed[key]) for key in seed}
    state, states = _settle(cycle, output, seed, losses=True)
    # a jump of the surplus across zero (the drive-capacitor regime changes
    # between neighbouring outputs): no exact root exists and the circuit
    # mixes the two cycles; take the side with the surplus and scale the
    # average frequency so that energy per cycle times frequency balances
    load_power = _load_power(load, output)
    jump = (np.abs(_surplus(state, load, output)) > 1e-6 * np.maximum(load_power, 1e-9)) \
        & ~burst & ~sits_at_bottom & refine
    if jump.any():
        # the balance sits on a jump of the surplus between two cycle
        # regimes: the supply alternates between the regime below the jump
        # (surplus, the output rises) and the one above (deficit, it falls),
        # spending the time fraction a = (P_load - P_above)/(P_below - P_above)
        # in the first: a burst whose averages mix the two regimes
        below_output = output * (1.0 - 2e-6)
        below, _ = _settle(cycle, below_output, seed, losses=True)
        surplus_below = _surplus(below, load, below_output)
        surplus_above = _surplus(state, load, output)
        mixable = jump & (surplus_below > 0.0) & (surplus_above < 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            share = np.clip(-surplus_above / (surplus_below - surplus_above), 0.0, 1.0)
        share = np.where(mixable, share, 0.0)
        state = _mix_regimes(below, state, share, mixable)
        burst = burst | mixable
    settled = state["converged"]
    state["output"] = output
    state["burst"] = burst & ~lockup
    load_power = _load_power(load, output)
    running = state["restarts"] & (design.transformer.feedback_phase == "regenerative")
    # burst at the top of the range (the regulation path holds the limiter
    # on there): the supply delivers only what the load takes; the average
    # frequency scales down so that energy per cycle times frequency balances
    scale = np.where(state["delivered"] > 0,
                     np.clip(load_power / np.maximum(state["delivered"], 1e-300), 0.0, 1.0),
                     1.0)
    scale = np.where(state["burst"], scale, 1.0)
    settled = settled & ~jump
    scale = np.where(running, scale, 0.0)
    losses = state["losses"]
    scaled = Losses(**{
        item.name: getattr(losses, item.name) * (running if item.name == "startup" else scale)
        for item in fields(Losses)})
    # collapsed output (no surplus even at the lowest output): the load gets
    # what the cycle delivers, at the voltage where it takes just that
    collapsed = ~any_positive & (state["delivered"] < load_power)
    delivered = np.maximum(state["delivered"], 0.0)
    load_power = np.where(collapsed | sits_at_bottom, np.minimum(delivered, load_power),
                          load_power)
    state["output"] = np.where(collapsed, _voltage_for_power(load, delivered, output), output)
    output_power = np.where(running, load_power, 0.0)
    # the output loop: one cycle moves the output by the energy surplus per
    # cycle over C_o V_o; at the balance its multiplier is
    # 1 + T dS/dV_o / (C_o V_o) (S the surplus power, T the mean cycle time).
    # Below -1 the balance is unstable by period doubling and the output
    # hunts around it: the supply bursts (the cycle states, settled at each
    # output, are taken as fast against the output: an adiabatic reduction)
    step = 1e-6 * np.maximum(output, 1e-3)
    up, _ = _settle(cycle, output + step, states)
    down, _ = _settle(cycle, np.maximum(output - step, 1e-9), states)
    slope = (_surplus(up, load, output + step)
             - _surplus(down, load, np.maximum(output - step, 1e-9))) / (2.0 * step)
    mean_period = 1.0 / np.maximum(state["frequency"], 1e-300)
    multiplier = 1.0 + mean_period * slope / (design.output.capacitance
                                              * np.maximum(output, 1e-3))
    hunting = refine & ~jump & (multiplier < -1.0) & regulated
    pattern = state["period_cycles"]
    state.update(scale=scale, running=running, settled=settled, lockup=lockup & running,
                 losses=scaled, output_power=output_power, jump=jump,
                 input_power=output_power + scaled.total, output_multiplier=multiplier,
                 hunting=hunting & running, pattern=pattern)
    return state


def _assemble(design, line, bus, temperature, gain, load, state) -> OperatingPoints:
    running = state["running"]
    scale = state["scale"]
    frequency = np.where(running, state["frequency"] * scale, 0.0)
    output = np.where(running, state["output"], 0.0)
    load_current = np.where(running, load.current(output), 0.0)
    t_on, t_off = state["t_on"], state["t_off"]
    mode_names = np.array(["dcm", "bcm", "ccm"])[state["mode"]]
    # a mix of ring- and drive-timed cycles (frequency scaled below the
    # ring-timed cycle) has drive-timed dead time on average
    mixed = running & ~state["burst"] & (scale < 0.999)
    mode_names = np.where(mixed, "dcm", mode_names)
    bursting = state["burst"] | state["hunting"] | (state["pattern"] > 1)
    mode_names = np.where(bursting, "burst", mode_names)
    # an irregular cycle inside a burst (the two regimes the output alternates
    # between, or the hold at the top of the range) is still a burst
    mode_names = np.where((state["pattern"] == 0) & ~state["burst"], "irregular", mode_names)
    mode_names = np.where(state["lockup"], "lockup", mode_names)
    # the rule every time-domain model uses (rcc.operation): an output held
    # below LOCKUP_FRACTION of the level the design regulates to is a lock-up,
    # whatever holds it there (a start-up barrier, or a load the cycles
    # cannot carry at any output)
    level = _regulation_level(design, temperature)
    if level is not None:
        mode_names = np.where(output < LOCKUP_FRACTION * np.asarray(level, dtype=float),
                              "lockup", mode_names)
    mode_names = np.where(running, mode_names, "off")
    period = np.where(frequency > 0, 1.0 / np.maximum(frequency, 1e-300), 0.0)
    off_time = np.where(running, np.maximum(period - t_on, t_off), 0.0)
    doubt = _doubts(design, line, bus, temperature, gain, running, mode_names, state, t_on,
                    off_time, frequency)
    return OperatingPoints(
        line_voltage=line,
        bus_voltage=bus,
        load_current=np.asarray(load_current, dtype=float),
        temperature=temperature,
        current_gain=gain,
        output_voltage=output,
        frequency=frequency,
        on_time=np.where(running, t_on, 0.0),
        off_time=off_time,
        # (clipped: t_on/period rounds to 1 + 2e-16 where the off-time vanishes)
        duty=np.where(running & (period > 0),
                      np.minimum(t_on / np.maximum(period, 1e-300), 1.0), 0.0),
        peak_current=np.where(running, state["peak"], 0.0),
        start_current=np.where(running, state["start"], 0.0),
        turn_off_time=np.where(running, state["t_turn_off"], 0.0),
        trip_current=state["itrip"],
        drive_capability=state["drive_capability"],
        reflected_voltage=state["vr"],
        clamp_voltage=np.where(running, state["clamp_peak"], 0.0),
        regulation_current=state["ireg"],
        mode=mode_names,
        on_end=np.array(ON_END)[state["on_end"]],
        off_end=np.where(mixed, "drive-timing", np.array(OFF_END)[state["off_end"]]),
        settled=state["settled"],
        pulses_per_pattern=np.where(running, state["pattern"], 0),
        output_multiplier=state["output_multiplier"],
        doubt=doubt,
        energy_per_cycle=np.where(running, state["transferred"], 0.0),
        startup_lockup=state["lockup"],
        running=running,
        input_power=state["input_power"],
        output_power=state["output_power"],
        losses=state["losses"],
    )


def limit_power_capability(design: Design, line_voltage, temperature, hfe=None):
    """Output power available at the current limit with no regulation current.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float or array_like
        RMS line voltage (AC) or DC input [V].
    temperature : float or array_like
        Temperature [K].
    hfe : float or array_like, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_min``.

    Returns
    -------
    ndarray
        Output power at the target output voltage (or the regulation hold
        voltage when no target is given) [W].

    Notes
    -----
    Evaluates the cycle with the regulation path removed, at the output
    voltage the design is meant to hold, on the bulk valley at that power
    (input power taken as 1.25 times the output power).  Above it the output
    must fall (overload).

    For AC input the capability ``P`` is the root of
    ``P - P_delivered(V_valley(1.25 P))``, solved on the bracket from zero to
    the power at the rectified peak (the delivered power rises with the bus)
    by regula falsi to :data:`_BUS_TOLERANCE` relative.  (Three fixed passes
    ``P <- P_delivered(V_valley(1.25 P))`` oscillate about the root: on the
    open-start-up-resistor fault case they gave 7.74 W where the balance is
    6.38 W.)
    """
    if hfe is None:
        hfe = design.switch.hfe_min
    unregulated = design.with_values({"regulation.method": "none"})
    line_voltage, temperature = np.broadcast_arrays(np.asarray(line_voltage, float),
                                                    np.asarray(temperature, float))
    target = design.output.voltage_target
    if target is None:
        target = hold_output_voltage(design, temperature)
    output = np.broadcast_to(np.asarray(target, dtype=float), line_voltage.shape)
    gain = current_gain(hfe, design.switch.hfe_tempco, temperature)

    def delivered(power, index=slice(None)):
        line, heat = (np.reshape(value, -1)[index] for value in (line_voltage, temperature))
        bus = np.maximum(bus_voltage(design, line, power * 1.25), 1.0)
        cycle = _Cycle(unregulated, bus, heat, np.reshape(gain, -1)[index])
        start = {"vc": np.minimum(cycle.v_threshold, 0.0) + np.zeros_like(bus),
                 "i0": np.zeros_like(bus), "va": np.zeros_like(bus)}
        state, _ = _settle(cycle, np.reshape(output, -1)[index], start)
        return np.where(state["restarts"], np.maximum(state["delivered"], 0.0), 0.0)

    at_peak = delivered(np.zeros(output.size)).reshape(output.shape)
    if not design.input.is_ac:
        return at_peak
    return _first_crossing(lambda power, index: power - delivered(power, index),
                           np.zeros_like(output), at_peak, tolerance=_BUS_TOLERANCE)


def _doubts(design, line, bus, temperature, gain, running, mode, state, on_time, off_time,
            frequency):
    """Why a point's numbers need the engine (empty: none), and invariants.

    Invariants checked at every running point: positive on-time, off-time,
    frequency and peak current; no negative loss; input power equal to output
    power plus losses within 1 %; the losses fed by the magnetizing energy
    per cycle not above it by more than 1 %; the bus within its physical range (at most
    the rectified line peak for AC input, the input itself for DC).
    """
    doubt = np.full(np.shape(running), "", dtype=object)
    doubt = np.where(np.isin(mode, ("burst", "irregular")), "pattern", doubt)
    doubt = np.where(mode == "lockup", "lockup", doubt)
    doubt = np.where(state["jump"], "regime-boundary", doubt)
    doubt = np.where(running & state["ring_held"] & (doubt == ""), "held-ring", doubt)
    # the start-up current through R_be sits at the base threshold (the
    # onset of regeneration, _onset_base_voltage): there the drive-timed wait
    # diverges as tau ln(1/margin), so the low-output cycles (and whether the
    # supply climbs out of them) change with the last digit of the line;
    # within 1e-4 of it the point is on a true regime boundary
    rbe = design.drive.base_emitter_resistance
    if rbe is not None:
        vbe = base_emitter_voltage(design.switch.vbe, design.switch.vbe_tempco,
                                   temperature)
        startup = np.maximum(bus - vbe, 0.0) / design.startup.resistance
        vbe = _onset_base_voltage(design, bus, temperature, gain, vbe)
        knife = np.abs(startup * rbe - vbe) <= _START_BIAS_BOUNDARY * vbe
        doubt = np.where(knife, "regime-boundary", doubt)
    doubt = np.where(running & ~state["settled"] & (doubt == ""), "unsettled", doubt)
    losses = state["losses"]
    negative_loss = np.zeros(np.shape(running), dtype=bool)
    for item in fields(Losses):
        negative_loss |= np.broadcast_to(getattr(losses, item.name), np.shape(running)) < -1e-12
    balance = np.abs(state["input_power"] - state["output_power"] - losses.total) \
        > 0.01 * np.maximum(state["input_power"], 1e-12)
    # the losses fed by the magnetizing energy must not exceed it
    energy = state["shortfall"] > 0.01 * np.maximum(np.abs(state["transferred"]), 1e-30)
    if design.input.is_ac:
        # the valley search floors a collapsed bulk capacitor at 1 V: no real bus
        bus_bad = (bus <= 1.0) | (bus > np.sqrt(2.0) * line * (1.0 + 1e-9))
    else:
        bus_bad = np.abs(bus - line) > 1e-9 * np.abs(line)
    checks = (("on-time", running & ~(on_time > 0.0)),
              ("off-time", running & ~(off_time > 0.0)),
              ("frequency", running & ~(frequency > 0.0)),
              ("peak current", running & ~(state["peak"] > 0.0)),
              ("negative loss", running & negative_loss),
              ("power balance", running & balance),
              ("energy per cycle", running & energy),
              ("bus range", bus_bad))
    for name, failed in checks:
        doubt = np.where(failed, "invariant: " + name, doubt)
    return doubt.astype(str)
