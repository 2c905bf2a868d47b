"""Temperature and bias dependence of the semiconductor parameters.

Small, vectorized device laws shared by every model (cycle model, start-up
analysis, time-domain engine), so a temperature means the same thing
everywhere.  Temperatures in [K]; the reference temperature is 25 degC.
"""

from __future__ import annotations

import numpy as np
from scipy.constants import zero_Celsius

__all__ = [
    "REFERENCE_TEMPERATURE",
    "OUTPUT_RECTIFIER_RESISTANCE",
    "SWITCH_BASE_RESISTANCE",
    "SWITCH_SATURATION_RESISTANCE",
    "base_emitter_voltage",
    "current_gain",
    "zener_voltage",
    "storage_time_charge_control",
    "storage_time_rising_current",
    "fall_time_charge_control",
    "turn_off_energy",
    "thermal_voltage",
]

#: Reference temperature of datasheet values, 25 degC [K].
REFERENCE_TEMPERATURE = zero_Celsius + 25.0

#: Series (bulk and lead) resistance of the output rectifier, in series with
#: its junction whose drop is ``output.rectifier_drop`` at 1 A [ohm].  Every
#: model puts it in the output path: at a lock-up pulse the secondary carries
#: tens of amperes and it sets the plateau more than the output does
#: # common practice: 20-60 mohm for rectifiers of a few amperes
OUTPUT_RECTIFIER_RESISTANCE = 0.05

#: Base spreading resistance of the switch, in series with its base terminal
#: [ohm].  The drive current flows through it during the on-time (at a few
#: hundred milliamperes it adds about half a volt to the base) and the
#: reverse base current at turn-off  # from memory: a few ohms for power BJTs
SWITCH_BASE_RESISTANCE = 2.0

#: Collector-emitter resistance of the saturated switch, in series with its
#: ``vce_sat`` [ohm].  Every model puts it in the primary loop with the
#: winding's and the sense resistor's  # common practice
SWITCH_SATURATION_RESISTANCE = 0.2


def base_emitter_voltage(vbe_reference, tempco, temperature):
    """Base-emitter on voltage at a temperature, linear tempco.

    Parameters
    ----------
    vbe_reference : float or array_like
        Base-emitter voltage at 25 degC [V].
    tempco : float or array_like
        Temperature coefficient [V/K], about -2e-3.
    temperature : float or array_like
        Junction temperature [K].

    Returns
    -------
    ndarray
        Base-emitter voltage [V].

    Notes
    -----
    ``Vbe(T) = Vbe(25 degC) + tempco * (T - 298.15 K)``; about -2 mV/K for
    a silicon junction at constant current  # common practice
    (Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog Integrated
    Circuits*, 5th ed., 2009, sec. 4.4, derive -1.5 to -2.2 mV/K).
    """
    return np.asarray(vbe_reference, dtype=float) + np.asarray(tempco, dtype=float) * (
        np.asarray(temperature, dtype=float) - REFERENCE_TEMPERATURE
    )


def current_gain(hfe_reference, tempco, temperature):
    """DC current gain at a temperature, linear relative tempco.

    Parameters
    ----------
    hfe_reference : float or array_like
        Current gain at 25 degC [1].
    tempco : float or array_like
        Relative temperature coefficient [1/K], about +0.005.
    temperature : float or array_like
        Junction temperature [K].

    Returns
    -------
    ndarray
        Current gain [1], never below 5 % of the 25 degC value.

    Notes
    -----
    ``hFE(T) = hFE(25 degC) * (1 + tempco * (T - 298.15 K))``.  hFE of
    silicon bipolar transistors rises about 0.5 to 0.7 %/K (Gray & Meyer,
    *Analysis and Design of Analog Integrated Circuits*)  # from memory
    The linear law is clamped at 5 % of the reference value so that an
    extreme negative tempco cannot produce a non-physical gain.
    """
    hfe = np.asarray(hfe_reference, dtype=float) * (
        1.0 + np.asarray(tempco, dtype=float)
        * (np.asarray(temperature, dtype=float) - REFERENCE_TEMPERATURE)
    )
    return np.maximum(hfe, 0.05 * np.asarray(hfe_reference, dtype=float))


def zener_voltage(voltage_reference, tempco, temperature):
    """Zener voltage at a temperature.

    Parameters
    ----------
    voltage_reference : float or array_like
        Zener voltage at 25 degC [V].
    tempco : float or array_like
        Relative temperature coefficient [1/K].
    temperature : float or array_like
        Junction temperature [K].

    Returns
    -------
    ndarray
        Zener voltage [V].

    Notes
    -----
    ``Vz(T) = Vz(25 degC) * (1 + tempco * (T - 298.15 K))``  # common practice
    """
    return np.asarray(voltage_reference, dtype=float) * (
        1.0 + np.asarray(tempco, dtype=float)
        * (np.asarray(temperature, dtype=float) - REFERENCE_TEMPERATURE)
    )


def storage_time_charge_control(storage_time_constant, base_current_on,
                                base_current_off, collector_current, current_gain):
    """Storage time of a saturated bipolar transistor (charge-control model).

    Parameters
    ----------
    storage_time_constant : float or array_like
        Storage time constant tau_S [s].
    base_current_on : float or array_like
        Forward base current before turn-off, I_B1 [A].
    base_current_off : float or array_like
        Reverse base current during turn-off, I_B2 [A] (positive number).
    collector_current : float or array_like
        Collector current at turn-off [A].
    current_gain : float or array_like
        Forward current gain [1].

    Returns
    -------
    ndarray
        Storage time [s]; zero when the transistor is not saturated
        (I_B1 <= I_C / beta).

    Notes
    -----
    ``t_s = tau_S * ln((I_B1 + I_B2) / (I_C / beta + I_B2))``: Moll,
    "Large-signal transient response of junction transistors", Proc. IRE
    42, 1954; Sparkes, "A study of the charge control parameters of
    transistors", Proc. IRE 48, 1960  # from memory (equation form)
    """
    ib1 = np.asarray(base_current_on, dtype=float)
    ib2 = np.asarray(base_current_off, dtype=float)
    edge = np.asarray(collector_current, dtype=float) / np.asarray(current_gain, dtype=float)
    ratio = (ib1 + ib2) / np.maximum(edge + ib2, 1e-300)
    return np.asarray(storage_time_constant, dtype=float) * np.log(np.maximum(ratio, 1.0))


def storage_time_rising_current(storage_time_constant, base_current_on, base_current_off,
                                collector_current, collector_slope, current_gain,
                                iterations=12):
    """Storage time of a saturated switch whose collector current keeps rising.

    Parameters
    ----------
    storage_time_constant : float or array_like
        Storage time constant tau_S [s].
    base_current_on : float or array_like
        Forward base current before the turn-off decision, I_B1 [A].
    base_current_off : float or array_like
        Reverse base current during turn-off, I_B2 [A] (positive number).
    collector_current : float or array_like
        Collector current at the turn-off decision [A].
    collector_slope : float or array_like
        Rate of rise of the collector current during storage [A/s].
    current_gain : float or array_like
        Forward current gain [1].
    iterations : int
        Newton steps [1].

    Returns
    -------
    ndarray
        Storage time [s]; zero when not saturated at the decision.

    Notes
    -----
    Charge control (Moll 1954; Sparkes 1960): with the base driven by
    ``-I_B2`` the stored charge decays as ``q = tau_S ((I_B1 + I_B2)
    e^(-t/tau_S) - I_B2)``; storage ends when it equals the charge
    ``tau_S I_C(t) / beta`` that the collector current ``I_C(t) = I_C0 + s t``
    needs.  For ``s = 0`` this is :func:`storage_time_charge_control`.  The
    root is unique (a falling exponential meets a rising line); Newton from
    ``t = 0`` approaches it from below because the difference is concave.
    """
    tau = np.asarray(storage_time_constant, dtype=float)
    drive = np.asarray(current_gain, dtype=float) * (
        np.asarray(base_current_on, dtype=float) + np.asarray(base_current_off, dtype=float))
    hold = np.asarray(current_gain, dtype=float) * np.asarray(base_current_off, dtype=float)
    start = np.asarray(collector_current, dtype=float)
    slope = np.asarray(collector_slope, dtype=float)
    t = np.zeros(np.broadcast(tau, drive, hold, start, slope).shape)
    for _ in range(iterations):
        decay = np.exp(-t / tau)
        residual = start + slope * t - (drive * decay - hold)
        derivative = slope + drive * decay / tau
        t = np.maximum(t - residual / derivative, 0.0)
    return np.where(drive - hold > start, t, 0.0)


def fall_time_charge_control(transit_time, collector_current, base_current_off):
    """Collector-current fall time of a bipolar switch leaving the active region.

    Parameters
    ----------
    transit_time : float or array_like
        Forward transit time tau_F = 1 / (2 pi fT) [s].
    collector_current : float or array_like
        Collector current at the end of storage [A].
    base_current_off : float or array_like
        Reverse base current during the fall, I_B2 [A] (positive number).

    Returns
    -------
    ndarray
        Time for the collector current to fall to zero [s].

    Notes
    -----
    Charge control (Beaufoy & Sparkes 1957; Moll 1954): in the active region
    the collector current is ``q / tau_F``; the reverse base current removes
    the charge ``tau_F I_C`` at the rate ``I_B2`` (recombination, slower by
    the factor beta, neglected), so the current falls linearly in
    ``t_f = tau_F I_C / I_B2``.
    """
    return (np.asarray(transit_time, dtype=float) * np.asarray(collector_current, dtype=float)
            / np.maximum(np.asarray(base_current_off, dtype=float), 1e-12))


def turn_off_energy(collector_current, fall_time, node_capacitance, off_voltage):
    """Energy dissipated in a switch whose current falls into a node capacitance.

    Parameters
    ----------
    collector_current : float or array_like
        Current at the start of the fall (an inductor keeps it constant) [A].
    fall_time : float or array_like
        Linear fall time of the switch current [s].
    node_capacitance : float or array_like
        Capacitance at the switch node that takes the current [F].
    off_voltage : float or array_like
        Voltage at which the node is clamped (bus plus reflected or clamp
        voltage) [V].

    Returns
    -------
    ndarray
        Turn-off energy per cycle [J].

    Notes
    -----
    With ``i_sw = I (1 - t/t_f)`` the capacitor takes ``I t / t_f`` and the
    node rises as ``v = I t^2 / (2 C t_f)``.  If it stays below
    ``V_off`` the energy is ``I^2 t_f^2 / (24 C)`` (the capacitive turn-off
    snubber); otherwise it reaches ``V_off`` at ``t_v = sqrt(2 C t_f V_off / I)``
    and the rest of the fall is at ``V_off``:
    ``E = I^2 / (2 C t_f) (t_v^3/3 - t_v^4/(4 t_f)) + V_off I (t_f - t_v)^2 / (2 t_f)``.
    For ``C -> 0`` this is the hard-switching ``V_off I t_f / 2`` (Mohan,
    Undeland & Robbins, *Power Electronics*, 3rd ed., Wiley 2003, sec. 2-3
    and ch. 27 turn-off snubber  # from memory (section numbers)).
    """
    current = np.asarray(collector_current, dtype=float)
    fall = np.maximum(np.asarray(fall_time, dtype=float), 0.0)
    capacitance = np.maximum(np.asarray(node_capacitance, dtype=float), 1e-300)
    voltage = np.asarray(off_voltage, dtype=float)
    reach = np.sqrt(2.0 * capacitance * fall * voltage / np.maximum(current, 1e-300))
    soft = current**2 * fall**2 / (24.0 * capacitance)
    t_v = np.minimum(reach, fall)
    rising = current**2 / (2.0 * capacitance * np.maximum(fall, 1e-300)) * (
        t_v**3 / 3.0 - t_v**4 / (4.0 * np.maximum(fall, 1e-300)))
    held = voltage * current * (fall - t_v) ** 2 / (2.0 * np.maximum(fall, 1e-300))
    return np.where(reach >= fall, soft, rising + held) * (current > 0)


def thermal_voltage(temperature):
    """Thermal voltage kT/q.

    Parameters
    ----------
    temperature : float or array_like
        Junction temperature [K].

    Returns
    -------
    ndarray
        Thermal voltage [V].

    Notes
    -----
    Boltzmann constant and elementary charge from ``scipy.constants`` (CODATA).
    """
    from scipy.constants import Boltzmann, elementary_charge

    return Boltzmann * np.asarray(temperature, dtype=float) / elementary_charge
