"""Steady-state cycle model of the free-running flyback (numeric layer).

For each operating point (line or bus voltage, load, temperature, current
gain) the model finds the switching cycle the circuit of
``notes/circuit.md`` settles into: what ends the on-time (the switch
leaving saturation, the current limit, or the regulation path), what ends
the off-time (demagnetization and the resonant ring, or the drive
capacitor's timing), the conduction mode, the peak current, the frequency
and the output voltage that balances the delivered power against the load.

Everything is vectorized with numpy: inputs broadcast against each other
and no Python loop runs per point.  The output voltage is found by
bisection on the power balance; the drive-capacitor state is carried from
one bisection step to the next, which is the cycle-to-cycle map of the
drive capacitor iterated to its fixed point.

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
from rcc.devices import (REFERENCE_TEMPERATURE, base_emitter_voltage, current_gain,
                          fall_time_charge_control, storage_time_rising_current,
                          turn_off_energy)
from rcc.stress import clamp_power, leakage_energy_rate, leakage_spike, rcd_clamp_voltage
from rcc.limiter import (auxiliary_voltage, regulation_current, trip_current)
from rcc.mains import bus_voltage
from rcc.flyback import reflected_voltage

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
]

#: Conduction modes.  ``burst``: the regulation path holds the limiter on
#: even at zero current, so the supply delivers its minimum energy per
#: cycle in bursts; the frequency reported is the average.  ``off``: the
#: switch cannot turn on again (see ``OperatingPoints.running``).
MODES = ("dcm", "bcm", "ccm", "burst", "off")
#: What ended the on-time.
ON_END = ("drive", "limit", "regulation")
#: What ended the off-time.
OFF_END = ("demagnetization", "drive-timing")

_BISECTION_STEPS = 26
_NEWTON_STEPS = 12
_SCAN_POINTS = 12
_SETTLE_STEPS = 2
#: A junction reset path is taken as finished this close to its asymptote [V].
_JUNCTION_END = 0.05


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
        Output rectifier forward drop [W].
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
        Output voltage [V].
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
    regulation_current: np.ndarray
    mode: np.ndarray
    on_end: np.ndarray
    off_end: np.ndarray
    settled: np.ndarray
    startup_lockup: np.ndarray
    running: np.ndarray
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
            "off_end", "input_power")}
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


def _load_power(load, output_voltage):
    if isinstance(load, Load):
        return load.power(output_voltage)
    return np.asarray(load, dtype=float) * output_voltage


def _voltage_for_power(load, power, fallback):
    """Output voltage at which ``load`` takes ``power`` [V]."""
    if isinstance(load, Load):
        if load.kind == "current":
            value = np.asarray(load.value, dtype=float)
            return np.where(value > 0, power / np.maximum(value, 1e-300), fallback)
        if load.kind == "resistance":
            return np.sqrt(power * load.value)
        return fallback
    current = np.asarray(load, dtype=float)
    return np.where(current > 0, power / np.maximum(current, 1e-300), fallback)


def _solve_rising(slope, gain, amplitude, offset, tau, initial, horizon):
    """Time the switch leaves saturation, if before ``horizon``.

    Smallest ``t >= 0`` with ``initial + slope t = gain (amplitude e^(-t/tau)
    + offset)``.  The left side rises and the right side falls (amplitude
    >= 0), so the root is unique; Newton from ``t = 0`` approaches it from
    below because the difference is concave.  Only points whose drive runs
    out before ``horizon`` (the limiter's trip time) are solved; the others
    return ``horizon``.  Returns 0 where the drive is already short at t = 0.
    """
    at_horizon = np.atleast_1d(initial + slope * horizon - gain * (
        amplitude * np.exp(-horizon / tau) + offset))
    t = np.array(np.broadcast_to(horizon, at_horizon.shape), dtype=float)
    short = np.nonzero(at_horizon > 0.0)
    if short[0].size:
        def pick(values):
            return np.broadcast_to(np.asarray(values, dtype=float), t.shape)[short]

        slope_s, gain_s = pick(slope), pick(gain)
        amplitude_s, offset_s = pick(amplitude), pick(offset)
        initial_s, tau_s = pick(initial), pick(tau)
        ts = np.zeros(short[0].size)
        for _ in range(_NEWTON_STEPS):
            decay = np.exp(-ts / tau_s)
            residual = initial_s + slope_s * ts - gain_s * (amplitude_s * decay + offset_s)
            derivative = slope_s + gain_s * amplitude_s * decay / tau_s
            ts = np.maximum(ts - residual / derivative, 0.0)
        t[short] = ts
    return t.reshape(np.shape(initial + slope * horizon + gain * amplitude))


class _Cycle:
    """Cycle evaluation at given output voltages (internal, vectorized)."""

    def __init__(self, design: Design, bus, temperature, hfe):
        tr, sw, dr, lim = design.transformer, design.switch, design.drive, design.limiter
        self.design = design
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
        # storage-time constant from the datasheet storage time, measured with
        # I_B1 = I_B2 and hard overdrive: t_s = tau_S ln 2 (charge control)
        self.storage_constant = sw.storage_time / np.log(2.0)
        self.transit_time = 1.0 / (2.0 * np.pi * sw.transition_frequency)
        # limiter transconductance: limiter collector current per ampere of
        # switch current through the sense resistor
        self.limiter_gain = lim.hfe * lim.sense_resistance / lim.base_resistance
        if design.regulation.method == "feedback-winding":
            series = design.regulation.series_resistance
            self.zener_share = lim.base_resistance / (lim.base_resistance + series)
        else:
            self.zener_share = 0.0
        # base threshold: the drive-capacitor voltage at which the base reaches Vbe
        rb = dr.resistance
        if rbe is None:
            self.v_threshold = self.startup_current * rb - self.vbe
        else:
            self.v_threshold = self.startup_current * rb - self.vbe * (rb + rbe) / rbe
        self._tau_slow = np.inf if rbe is None else (rb + rbe) * dr.capacitance
        self.omega = 1.0 / np.sqrt(self.lm * design.node_capacitance)
        self.ring_impedance = np.sqrt(self.lm / design.node_capacitance)
        quality = tr.core_loss_resistance * np.sqrt(design.node_capacitance / self.lm)
        self.ring_damping = np.exp(-np.pi / (2.0 * quality))

    def evaluate(self, output_voltage, vc0, i0, losses=False):
        d = self.design
        tr, sw, dr, lim = d.transformer, d.switch, d.drive, d.limiter
        vr = reflected_voltage(output_voltage, d.output.rectifier_drop, tr.primary_turns,
                               tr.output_turns)
        vr = np.maximum(vr, 1e-3)
        ireg = regulation_current(d, output_voltage, self.temperature)
        itrip = trip_current(self.vbe_limiter, ireg, lim.base_resistance,
                             lim.sense_resistance)
        rb, tau = dr.resistance, self.tau
        # ---- on-time: drive-limited decision (switch leaves saturation)
        amplitude = np.maximum(self.v_on - vc0, 0.0) / rb
        offset = self.startup_current - self.bleed
        t_trip = np.maximum(itrip - i0, 0.0) / self.slope
        t_drive = _solve_rising(self.slope, self.hfe, amplitude, offset, tau, i0, t_trip)
        i_drive = i0 + self.slope * t_drive
        drive_ends = i_drive < np.maximum(itrip, i0) * (1.0 - 1e-12)
        i_decision = np.where(drive_ends, i_drive, np.maximum(itrip, i0))
        # storage time by charge control: the base current at the decision
        # (I_B1) sets the excess charge; the limiter diverts the drive, so only
        # the base-emitter resistor pulls charge out (I_B2)
        # the collector current keeps rising during storage, so storage ends
        # when the decaying excess charge meets the rising charge needed:
        # hFE ((I_B1 + I_B2) e^(-t/tau_S) - I_B2) = I_dec + s t.  The limiter
        # saturates across the base while the emitter sits at I Rs, so it pulls
        # the base negative with a current of the order of the drive: I_B2 = I_B1
        t_decision = (i_decision - i0) / self.slope
        base_decision = np.maximum(amplitude * np.exp(-t_decision / tau) + offset, 0.0)
        storage = storage_time_rising_current(self.storage_constant, base_decision,
                                              base_decision, i_decision, self.slope, self.hfe)
        overshoot = np.where(drive_ends, 0.0, self.slope * storage)
        peak = i_decision + overshoot
        # turn-off transition after storage (notes/cycle_model.md): the
        # collector current follows the limiter's hold point (or, when the
        # drive ends the on-time, the switch's own gain) while the collector
        # rises and the feedback winding loses voltage, dI_C/dv = -m; the node
        # capacitance takes the rest of the still rising primary current, so
        # the collector reaches the bus, where the winding reverses, after
        # t_rise = (C/m) ln(1 + m^2 V_bus / (s C))
        node = d.node_capacitance
        droop = np.where(drive_ends, self.hfe, 1.0 / self.limiter_gain) * self.nb / rb
        rise = node / droop
        t_rise = rise * np.log1p(droop**2 * self.bus / (self.slope * node))
        v_reverse = np.minimum(self.bus, peak / droop)
        crossing = rise * (peak * v_reverse - 0.5 * droop * v_reverse**2)
        left = np.maximum(peak - droop * self.bus, 0.0)
        # the drive has to hold the switch up to the end of storage only
        t_switch = (peak - i0) / self.slope
        base_end = amplitude * np.exp(-t_switch / tau) + offset
        drive_capability = self.hfe * np.maximum(base_end, 0.0)
        peak = peak + self.slope * np.maximum(t_rise - rise, 0.0)
        t_on = t_switch + t_rise
        on_end = np.where(drive_ends, 0, np.where(ireg > 0.0, 2, 1))
        vc_end = self.v_on + (vc0 - self.v_on) * np.exp(-t_on / tau)
        charge_base = amplitude * tau * (1.0 - np.exp(-t_on / tau)) + offset * t_on
        # ---- off-time: flyback plateau
        t_demag = self.lm * peak / vr
        winding_plateau = -self.nb * vr
        # plateau: the base is pulled negative; the drive capacitor is reset
        # through the clamps of the base node (see _reset)
        vc_demag = self._reset(vc_end, winding_plateau, t_demag)
        # turn-on during the plateau (drive timer shorter than demagnetization)
        limit_plateau = self.v_threshold + winding_plateau
        t_cross = self._reset_cross(vc_end, winding_plateau, limit_plateau)
        ccm = t_cross < t_demag
        # ---- ring after demagnetization
        need = vc_demag - self.v_threshold
        ring_amplitude = self.nb * vr
        ring_peak = self.nb * np.minimum(vr * self.ring_damping, self.bus)
        ring_on = need <= ring_peak
        phase = np.arccos(np.clip(-need / ring_amplitude, -1.0, 1.0))
        t_ring = phase / self.omega
        # ---- waiting for the slow path (drive-capacitor timing)
        t_wait = self._reset_cross(vc_demag, 0.0, self.v_threshold)
        restarts = ccm | ring_on | np.isfinite(t_wait)
        t_wait = np.where(np.isfinite(t_wait), t_wait, 0.0)
        t_off = np.where(ccm, t_cross, np.where(ring_on, t_demag + t_ring, t_demag + t_wait))
        # current at the next turn-on: what is left in CCM; on the ring the
        # magnetizing current is negative (it discharges the node
        # capacitance), -(V_R / Z0) sin(phase) with Z0 = sqrt(Lm / C), damped
        ring_current = vr / self.ring_impedance * np.sin(phase) \
            * self.ring_damping ** (phase / np.pi)
        residual = np.where(ccm, np.maximum(peak - vr * t_cross / self.lm, 0.0),
                            np.where(ring_on, -ring_current, 0.0))
        vc_next = np.where(ccm, limit_plateau, np.where(ring_on, vc_demag, self.v_threshold))
        mode = np.where(ccm, 2, np.where(ring_on, 1, 0))
        off_end = np.where(ring_on & ~ccm, 0, 1)
        period = t_on + t_off
        frequency = 1.0 / period
        # ---- energy per cycle
        aux = np.maximum(auxiliary_voltage(output_voltage, d.output.rectifier_drop,
                                           tr.feedback_turns, tr.output_turns,
                                           d.regulation.rectifier_drop), 0.0)
        transferred = 0.5 * self.lm * (peak**2 - residual**2)
        t_flyback = np.where(ccm, t_cross, t_demag)
        core_off = vr**2 / tr.core_loss_resistance * t_flyback
        # the clamp takes the leakage energy and, while the leakage current
        # falls, part of the magnetizing energy
        leakage_rate = leakage_energy_rate(tr.leakage_inductance, peak, frequency)
        clamp_level = self._clamp_level(vr, peak, frequency)
        clamp_rate = np.where(d.clamp.type == "none", leakage_rate,
                              clamp_power(vr, clamp_level, tr.leakage_inductance, peak,
                                          frequency))
        # turn-off, second part: above the bus the reversed winding, in series
        # with the drive capacitor charged during the on-time, pulls the rest
        # of the forward charge out through R_b while the junction still sits
        # at Vbe; taken from the magnetizing energy, while the first part
        # (below the bus) is fed by the bus
        reverse_base = (self.nb * vr + np.maximum(vc_end, 0.0) + self.vbe) / rb
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
        reset_energy = self.nb * vr * reset_charge + aux * self.zener_share * reset_charge
        secondary = np.maximum(
            transferred - core_off - (clamp_rate - leakage_rate) / frequency - reversal
            - reset_energy, 0.0)
        share_out = output_voltage / (output_voltage + d.output.rectifier_drop)
        regulation_power = np.where(ireg > 0.0, aux * ireg, 0.0)
        delivered = secondary * share_out * frequency - regulation_power
        state = dict(
            vr=vr, ireg=ireg, itrip=itrip, peak=peak, t_on=t_on, t_off=t_off,
            start=np.broadcast_to(i0, np.shape(peak)), t_turn_off=t_rise,
            frequency=frequency, delivered=delivered, on_end=on_end, off_end=off_end,
            mode=mode, vc_next=vc_next, residual=residual, restarts=restarts,
            drive_capability=drive_capability,
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
            switch_conduction=sw.vce_sat * mean_current * t_on * frequency,
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
        """Collector voltage above the bus while the clamp conducts [V]."""
        d = self.design
        tr, clamp = d.transformer, d.clamp
        if clamp.type == "zener":
            return np.broadcast_to(clamp.voltage, np.shape(vr)).astype(float)
        if clamp.type == "rcd":
            return rcd_clamp_voltage(vr, tr.leakage_inductance, peak, frequency,
                                     clamp.resistance)
        return vr + leakage_spike(peak, tr.leakage_inductance, d.node_capacitance)

    # ------------------------------------------------ drive-capacitor reset
    # While the feedback winding holds the base negative, three paths reset
    # the drive capacitor (voltage v_C, winding side positive):
    #   1. base-emitter breakdown clamps the base at -VEBO: v_C relaxes
    #      towards w + VEBO through R_b (tau_fast = R_b C_b);
    #   2. the limiter's collector-base junction conducts once the base is
    #      below -V_d (V_d its junction drop), through R_lb from the sense
    #      node at ground: v_C relaxes towards w + V_d (tau_cb = (R_b + R_lb) C_b);
    #   3. the slow path: base-emitter resistor and start-up current.
    # Breakdown (1) stops carrying current at v_C* = w + VEBO + R_b (VEBO -
    # V_d)/R_lb, where path 2 alone holds the base at -VEBO; path 2 is taken
    # as finished within _JUNCTION_END of its asymptote.

    def _reset_constants(self, winding):
        dr, lim, sw = self.design.drive, self.design.limiter, self.design.switch
        drop = self.vbe_limiter
        knee = winding + sw.vebo + dr.resistance * np.maximum(sw.vebo - drop, 0.0) \
            / lim.base_resistance
        tau_cb = (dr.resistance + lim.base_resistance) * dr.capacitance
        return drop, knee, tau_cb

    def _reset(self, vc, winding, duration):
        """Drive-capacitor voltage after ``duration`` with the winding at ``winding``."""
        sw = self.design.switch
        drop, knee, tau_cb = self._reset_constants(winding)
        floor = winding + sw.vebo
        # stage 1: breakdown clamp down to the knee
        t1 = np.where(vc > knee, self.tau * np.log(np.maximum(
            (vc - floor) / np.maximum(knee - floor, 1e-300), 1.0)), 0.0)
        in_stage1 = duration < t1
        v1 = floor + (vc - floor) * np.exp(-np.minimum(duration, t1) / self.tau)
        start2 = np.where(vc > knee, knee, vc)
        left = np.maximum(duration - t1, 0.0)
        # stage 2: collector-base junction of the limiter
        junction = winding + drop
        above = start2 > junction
        v2 = np.where(above, junction + (start2 - junction) * np.exp(-left / tau_cb), start2)
        t2 = np.where(above, tau_cb * np.log(np.maximum(
            (start2 - junction) / _JUNCTION_END, 1.0)), 0.0)
        # stage 3: slow path for what is left
        left3 = np.maximum(left - t2, 0.0)
        v3 = self._slow(v2, winding, left3)
        return np.where(in_stage1, v1, np.where(left < t2, v2, v3))

    def _reset_cross(self, vc, winding, level):
        """Time for the drive capacitor to fall to ``level`` (inf if never)."""
        sw = self.design.switch
        drop, knee, tau_cb = self._reset_constants(winding)
        floor = winding + sw.vebo
        junction = winding + drop
        with np.errstate(divide="ignore", invalid="ignore"):
            # stage 1 reaches down to the knee
            t_knee = np.where(vc > knee, self.tau * np.log(
                (vc - floor) / np.maximum(knee - floor, 1e-300)), 0.0)
            t_in1 = self.tau * np.log((vc - floor) / np.maximum(level - floor, 1e-300))
            start2 = np.minimum(vc, knee)
            # stage 2 down to the junction asymptote
            t_in2 = tau_cb * np.log((start2 - junction) / np.maximum(level - junction, 1e-300))
            t_end2 = np.where(start2 > junction, tau_cb * np.log(np.maximum(
                (start2 - junction) / _JUNCTION_END, 1.0)), 0.0)
            start3 = np.minimum(start2, junction + _JUNCTION_END)
            t_in3 = self._slow_cross(np.maximum(start3, level), winding, level)
        t = np.where(
            vc <= level, 0.0,
            np.where(level >= knee, t_in1,
                     np.where(level > junction + _JUNCTION_END, t_knee + t_in2,
                              t_knee + t_end2 + t_in3)))
        return np.where(np.isnan(t), np.inf, t)

    def _slow(self, vc, winding, duration):
        """Drive capacitor on the slow path (base-emitter resistor and
        start-up current) after ``duration``."""
        if np.isinf(self._tau_slow):
            current = self.startup_current
            return vc - current * duration / self.design.drive.capacitance
        target = winding - self.startup_current * self.rbe
        return target + (vc - target) * np.exp(-duration / self._tau_slow)

    def _slow_cross(self, vc, winding, level):
        """Time for the drive capacitor to fall to ``level`` on the slow path."""
        cb = self.design.drive.capacitance
        tau_slow = self._tau_slow
        if np.isinf(tau_slow):
            # start-up resistor current only: linear discharge
            current = np.maximum(self.startup_current, 1e-30)
            t = cb * (vc - level) / current
            return np.where(vc <= level, 0.0, t)
        target = winding - self.startup_current * self.rbe
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = (vc - target) / (level - target)
            t = tau_slow * np.log(ratio)
        reachable = level > target
        return np.where(vc <= level, 0.0, np.where(reachable & (ratio > 0), t, np.inf))


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
    On-time: the collector current ramps at ``(V_bus - Vce_sat) / (Lm + L_lk)``
    until the first of (a) ``hFE I_B(t)``, the base current decaying as the
    drive capacitor charges (``I_B = (V_on - v_C0)/R_b e^(-t/(R_b C_b)) +
    I_start - Vbe/R_be``; blocking-oscillator timing [3]_), or (b) the trip
    current of the limiter with the regulation current (``notes/circuit.md``).
    A limiter-ended on-time continues for the storage time of the charge-control
    model [4]_: the excess charge ``tau_S ((I_B1 + I_B2) e^(-t/tau_S) - I_B2)``
    decays until it equals the charge ``tau_S I_C(t) / hFE`` the still-rising
    collector current needs (with constant ``I_C`` this is the classic
    ``tau_S ln((I_B1 + I_B2)/(I_C/hFE + I_B2))``).  ``tau_S = storage_time /
    ln 2`` (the datasheet storage time taken at ``I_B1 = I_B2`` and hard
    overdrive), ``I_B1`` the base current at the decision and ``I_B2 = I_B1``
    (the saturated limiter pulls the base below the emitter, which sits at
    the sense voltage): the storage time approaches the datasheet value under
    hard overdrive and shortens where the drive barely holds the current.
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
    if not isinstance(load, Load):
        load = np.broadcast_to(load_values, line.shape).astype(float)
    gain = current_gain(hfe25, design.switch.hfe_tempco, temp)

    # AC input: the bus is the bulk valley, which depends on the input power
    input_power_estimate = np.zeros_like(line)
    result = None
    for _ in range(2 if design.input.is_ac else 1):
        bus = bus_voltage(design, line, input_power_estimate)
        bus = np.maximum(bus, 1.0)
        result = _solve_output(design, bus, temp, gain, load)
        input_power_estimate = result["input_power"]
    return _assemble(design, line, bus, temp, gain, load, result)


def _upper_output(design: Design, temperature, bus):
    hold = hold_output_voltage(design, temperature)
    if hold is not None:
        return np.maximum(hold, 1e-3) + np.zeros_like(bus)
    tr = design.transformer
    if design.clamp.type == "zener":
        reflected_max = design.clamp.voltage
    else:
        reflected_max = 2.0 * bus
    return np.maximum(reflected_max * tr.output_turns / tr.primary_turns
                      - design.output.rectifier_drop, 1e-3)


def _solve_output(design: Design, bus, temperature, gain, load):
    """Output voltage of the stable power balance, with the cycle state there.

    The delivered power is not monotonic in the output voltage: at a low
    output the reflected voltage cannot reset the drive capacitor and the
    supply idles in drive-timed cycles.  The stable operating point is the
    highest output where the surplus ``P_delivered - P_load`` changes from
    positive to negative, so a coarse scan from the top brackets it and
    bisection refines it.
    """
    cycle = _Cycle(design, bus, temperature, gain)
    top = _upper_output(design, temperature, bus)
    vc = np.minimum(cycle.v_threshold, 0.0) + np.zeros_like(bus)
    i0 = np.zeros_like(bus)
    fractions = np.linspace(1.0, 0.0, _SCAN_POINTS + 1)[:-1]
    fractions = np.append(fractions, 1e-4)
    scan_voltage = np.empty((fractions.size,) + bus.shape)
    scan_surplus = np.empty_like(scan_voltage)
    scan_vc = np.empty_like(scan_voltage)
    scan_i0 = np.empty_like(scan_voltage)
    for index, fraction in enumerate(fractions):
        voltage = top * fraction
        for _ in range(_SETTLE_STEPS if index else 2 * _SETTLE_STEPS):
            state = cycle.evaluate(voltage, vc, i0)
            vc, i0 = state["vc_next"], state["residual"]
        scan_voltage[index] = voltage
        scan_surplus[index] = state["delivered"] - _load_power(load, voltage)
        scan_vc[index], scan_i0[index] = vc, i0
    positive = scan_surplus > 0.0
    regulated = design.regulation.method != "none"
    burst = positive[0] & regulated
    first = np.argmax(positive, axis=0)          # highest voltage with a surplus
    any_positive = positive.any(axis=0)
    first = np.where(any_positive, first, fractions.size - 1)
    # from power-on the output rises from zero and stops at the *lowest*
    # balance; a deficit anywhere below the operating point blocks the way up
    # (a deficit of less than 0.1 % of the full load power, as at the
    # near-zero end of the scan where both powers vanish, is no barrier)
    below = np.arange(fractions.size).reshape((-1,) + (1,) * bus.ndim) > first[None]
    deficit = scan_surplus < -1e-3 * _load_power(load, top)
    lockup = any_positive & np.any(below & deficit, axis=0)
    take = lambda array, idx: np.take_along_axis(array, idx[None], axis=0)[0]  # noqa: E731
    low = take(scan_voltage, first)
    high = take(scan_voltage, np.maximum(first - 1, 0))
    vc, i0 = take(scan_vc, first), take(scan_i0, first)
    for _ in range(_BISECTION_STEPS):
        middle = 0.5 * (low + high)
        state = cycle.evaluate(middle, vc, i0)
        vc, i0 = state["vc_next"], state["residual"]
        surplus = state["delivered"] - _load_power(load, middle) > 0.0
        low = np.where(surplus, middle, low)
        high = np.where(surplus, high, middle)
    # the surplus side of the bracket: where the surplus function jumps (the
    # drive-capacitor regime changes) there is no exact root and the circuit
    # mixes the two cycles; scaling the frequency below covers both cases
    output = np.where(positive[0], top, low)
    for _ in range(_SETTLE_STEPS):
        state = cycle.evaluate(output, vc, i0)
        vc, i0 = state["vc_next"], state["residual"]
    state = cycle.evaluate(output, vc, i0, losses=True)
    # the drive-capacitor map must have reached its fixed point; where it
    # ratchets (charge in per on-time exceeds the reset per off-time) the
    # circuit alternates between ring- and drive-timed cycles
    settled = np.abs(state["vc_next"] - vc) <= 1e-3 * (1.0 + np.abs(vc))
    state["output"] = output
    state["burst"] = burst
    load_power = _load_power(load, output)
    running = state["restarts"] & (design.transformer.feedback_phase == "regenerative")
    # burst (and a mix of two cycle regimes at a jump of the surplus): the
    # supply delivers only what the load takes; the average frequency scales
    # down so that the energy per cycle times the frequency balances the load
    scale = np.where(state["delivered"] > 0,
                     np.clip(load_power / np.maximum(state["delivered"], 1e-300), 0.0, 1.0),
                     1.0)
    settled = settled & ((scale > 0.999) | burst)
    scale = np.where(running, scale, 0.0)
    losses = state["losses"]
    scaled = Losses(**{
        item.name: getattr(losses, item.name) * (running if item.name == "startup" else scale)
        for item in fields(Losses)})
    # collapsed output (no surplus even at the lowest output): the load gets
    # what the cycle delivers, at the voltage where it takes just that
    collapsed = ~any_positive & (state["delivered"] < load_power)
    delivered = np.maximum(state["delivered"], 0.0)
    load_power = np.where(collapsed, delivered, load_power)
    state["output"] = np.where(collapsed, _voltage_for_power(load, delivered, output), output)
    output_power = np.where(running, load_power, 0.0)
    state.update(scale=scale, running=running, settled=settled, lockup=lockup & running,
                 losses=scaled, output_power=output_power,
                 input_power=output_power + scaled.total)
    return state


def _assemble(design, line, bus, temperature, gain, load, state) -> OperatingPoints:
    running = state["running"]
    scale = state["scale"]
    frequency = np.where(running, state["frequency"] * scale, 0.0)
    output = np.where(running, state["output"], 0.0)
    if isinstance(load, Load):
        load_current = load.current(output)
    else:
        load_current = np.where(running, load, 0.0)
    t_on, t_off = state["t_on"], state["t_off"]
    mode_names = np.array(["dcm", "bcm", "ccm"])[state["mode"]]
    # a mix of ring- and drive-timed cycles (frequency scaled below the
    # ring-timed cycle) has drive-timed dead time on average
    mixed = running & ~state["burst"] & (scale < 0.999)
    mode_names = np.where(mixed, "dcm", mode_names)
    mode_names = np.where(state["burst"], "burst", mode_names)
    mode_names = np.where(running, mode_names, "off")
    period = np.where(frequency > 0, 1.0 / np.maximum(frequency, 1e-300), 0.0)
    off_time = np.where(running, np.maximum(period - t_on, t_off), 0.0)
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
        duty=np.where(running & (period > 0), t_on / np.maximum(period, 1e-300), 0.0),
        peak_current=np.where(running, state["peak"], 0.0),
        start_current=np.where(running, state["start"], 0.0),
        turn_off_time=np.where(running, state["t_turn_off"], 0.0),
        trip_current=state["itrip"],
        drive_capability=state["drive_capability"],
        reflected_voltage=state["vr"],
        regulation_current=state["ireg"],
        mode=mode_names,
        on_end=np.array(ON_END)[state["on_end"]],
        off_end=np.where(mixed, "drive-timing", np.array(OFF_END)[state["off_end"]]),
        settled=state["settled"],
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
    voltage the design is meant to hold, on the bulk valley at that power.
    Above it the output must fall (overload).
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
    power = np.zeros_like(output)
    for _ in range(3 if design.input.is_ac else 1):
        bus = np.maximum(bus_voltage(design, line_voltage, power * 1.25), 1.0)
        cycle = _Cycle(unregulated, bus, temperature, gain)
        vc = np.minimum(cycle.v_threshold, 0.0) + np.zeros_like(bus)
        i0 = np.zeros_like(bus)
        for _ in range(12):
            state = cycle.evaluate(output, vc, i0)
            vc, i0 = state["vc_next"], state["residual"]
        power = np.where(state["restarts"], np.maximum(state["delivered"], 0.0), 0.0)
    return power
