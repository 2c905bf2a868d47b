"""Rectified-mains bus: peak, bulk-capacitor valley and the design's bus range."""

from __future__ import annotations

import numpy as np

__all__ = ["rectified_peak", "bulk_valley", "bus_voltage", "bus_voltage_range"]


def rectified_peak(line_rms, bridge_drop=0.0):
    """Peak of a full-wave rectified sine line.

    Parameters
    ----------
    line_rms : float or array_like
        RMS line voltage [V].
    bridge_drop : float or array_like, default 0
        Forward drop of the two conducting bridge diodes together [V].

    Returns
    -------
    ndarray
        Peak bus voltage [V].

    Notes
    -----
    ``V_pk = sqrt(2) * V_rms - V_bridge`` (sine wave crest factor sqrt(2)).
    """
    return np.sqrt(2.0) * np.asarray(line_rms, dtype=float) - np.asarray(bridge_drop, dtype=float)


def bulk_valley(peak_voltage, input_power, bulk_capacitance, line_frequency):
    """Valley of the bulk-capacitor voltage, full-wave rectification.

    Parameters
    ----------
    peak_voltage : float or array_like
        Rectified peak [V].
    input_power : float or array_like
        Power drawn from the bulk capacitor [W].
    bulk_capacitance : float or array_like
        Bulk capacitance [F].
    line_frequency : float or array_like
        Line frequency [Hz]; the capacitor recharges at twice it.

    Returns
    -------
    ndarray
        Valley voltage [V], zero when the capacitor would discharge fully.

    Notes
    -----
    Energy balance over one half line cycle with the diode conduction time
    neglected: ``C (V_pk^2 - V_min^2) / 2 = P / (2 f_line)``, hence
    ``V_min = sqrt(V_pk^2 - P / (C f_line))``  # common practice
    (the standard hold-up estimate; conservative because the capacitor is
    recharged during the conduction angle).
    """
    peak = np.asarray(peak_voltage, dtype=float)
    drop = np.asarray(input_power, dtype=float) / (
        np.asarray(bulk_capacitance, dtype=float) * np.asarray(line_frequency, dtype=float))
    return np.sqrt(np.maximum(peak * peak - drop, 0.0))


def bus_voltage(design, line_voltage, input_power=0.0):
    """Bus voltage for a line voltage and input power.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float or array_like
        RMS line voltage (AC input) or DC voltage (DC input) [V].
    input_power : float or array_like, default 0
        Power drawn from the bulk capacitor [W].

    Returns
    -------
    ndarray
        Bulk-capacitor valley (AC input) or the DC voltage [V].

    Notes
    -----
    AC input: :func:`rcc.mains.rectified_peak` then
    :func:`rcc.mains.bulk_valley` (energy balance over a half line cycle).
    """
    line_voltage = np.asarray(line_voltage, dtype=float)
    if not design.input.is_ac:
        return line_voltage + 0.0 * np.asarray(input_power, dtype=float)
    peak = rectified_peak(line_voltage, design.input.bridge_drop)
    return bulk_valley(peak, input_power, design.input.bulk_capacitance,
                       design.input.line_frequency)


def bus_voltage_range(design):
    """Bus voltage at no load for the design's min, nominal and max line.

    Parameters
    ----------
    design : rcc.design.Design
        The design.

    Returns
    -------
    ndarray, shape (3,)
        Rectified peak for AC input, the DC value for DC input [V].
    """
    return bus_voltage(design, design.input.line_voltages)
