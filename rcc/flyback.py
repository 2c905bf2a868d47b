"""Flyback energy-transfer relations: boundary and discontinuous conduction.

Closed-form relations of the ideal flyback cell that the cycle model
(:mod:`rcc.cycle`) is assembled from.  All functions are vectorized and
work in SI units.

References
----------
.. [1] J. Irving and M. M. Jovanović, "Analysis and design of
   self-oscillating flyback converter", Proc. IEEE APEC 2002, pp. 897-903,
   doi:10.1109/APEC.2002.989351.
.. [2] R. W. Erickson and D. Maksimović, *Fundamentals of Power
   Electronics*, 2nd ed., Kluwer, 2001, ch. 5 (discontinuous conduction
   mode) and ch. 6 (the flyback converter).
.. [3] J. Millman and H. Taub, *Pulse and Digital Circuits*, McGraw-Hill,
   1956, blocking-oscillator chapter.
.. [4] W. H. Hayt and J. E. Kemmerly, *Engineering Circuit Analysis*,
   McGraw-Hill, the driven RL circuit (chapter on first-order circuits)
   # from memory
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "reflected_voltage",
    "bcm_peak_current",
    "bcm_frequency",
    "bcm_duty",
    "dcm_conversion_ratio",
    "demagnetization_time",
    "esr_share",
    "ramp_time",
    "resonant_delay",
    "blocking_oscillator_on_time",
]


def _as(x):
    return np.asarray(x, dtype=float)


def reflected_voltage(output_voltage, rectifier_drop, primary_turns, output_turns):
    """Output voltage reflected to the primary during the flyback interval.

    Parameters
    ----------
    output_voltage : float or array_like
        Output voltage [V].
    rectifier_drop : float or array_like
        Output rectifier forward drop [V].
    primary_turns : float or array_like
        Primary turns [1].
    output_turns : float or array_like
        Output winding turns [1].

    Returns
    -------
    ndarray
        Reflected voltage V_R [V].

    Notes
    -----
    ``V_R = (Np / Ns) (Vo + Vf)``: ideal-transformer voltage ratio, [2]_ ch. 6.
    """
    return _as(primary_turns) / _as(output_turns) * (_as(output_voltage) + _as(rectifier_drop))


def bcm_peak_current(input_power, bus_voltage, reflected_voltage):
    """Peak primary current in boundary conduction.

    Parameters
    ----------
    input_power : float or array_like
        Power drawn from the bus [W].
    bus_voltage : float or array_like
        Bus voltage across the primary during the on-time [V].
    reflected_voltage : float or array_like
        Reflected voltage during the off-time [V].

    Returns
    -------
    ndarray
        Peak primary current [A].

    Notes
    -----
    ``Ipk = 2 Pin (1/Vin + 1/V_R)``: the triangular input current of
    boundary conduction averaged over the period, [1]_ (the operating-point
    relations of the self-oscillating flyback).
    """
    return 2.0 * _as(input_power) * (1.0 / _as(bus_voltage) + 1.0 / _as(reflected_voltage))


def bcm_frequency(input_power, bus_voltage, reflected_voltage, magnetizing_inductance):
    """Switching frequency in boundary conduction (no resonant delay).

    Parameters
    ----------
    input_power : float or array_like
        Power drawn from the bus [W].
    bus_voltage : float or array_like
        Bus voltage [V].
    reflected_voltage : float or array_like
        Reflected voltage [V].
    magnetizing_inductance : float or array_like
        Primary magnetizing inductance [H].

    Returns
    -------
    ndarray
        Switching frequency [Hz].

    Notes
    -----
    ``f = Vin^2 V_R^2 / (2 Lp Pin (Vin + V_R)^2)`` from ``Pin = Lp Ipk^2 f / 2``
    with ``Ipk`` of :func:`bcm_peak_current`, [1]_.  Frequency is inversely
    proportional to power and rises with line.
    """
    vin, vr = _as(bus_voltage), _as(reflected_voltage)
    return vin**2 * vr**2 / (
        2.0 * _as(magnetizing_inductance) * _as(input_power) * (vin + vr) ** 2)


def bcm_duty(bus_voltage, reflected_voltage):
    """Duty cycle in boundary conduction.

    Parameters
    ----------
    bus_voltage : float or array_like
        Bus voltage [V].
    reflected_voltage : float or array_like
        Reflected voltage [V].

    Returns
    -------
    ndarray
        Duty cycle [1].

    Notes
    -----
    Volt-second balance of the magnetizing inductance with no dead time:
    ``D = V_R / (Vin + V_R)``, [1]_, [2]_ ch. 6.
    """
    vr = _as(reflected_voltage)
    return vr / (_as(bus_voltage) + vr)


def dcm_conversion_ratio(duty, magnetizing_inductance, load_resistance, switching_period):
    """Conversion ratio of the flyback in discontinuous conduction.

    Parameters
    ----------
    duty : float or array_like
        Duty cycle [1].
    magnetizing_inductance : float or array_like
        Magnetizing inductance referred to the primary [H].
    load_resistance : float or array_like
        Load resistance referred to the primary [ohm].
    switching_period : float or array_like
        Switching period [s].

    Returns
    -------
    ndarray
        ``M = V / Vg`` referred to the primary [1].

    Notes
    -----
    ``M = D / sqrt(K)`` with ``K = 2 L / (R Ts)``: [2]_ ch. 5 and 6
    (Table 5.2 analogue for the buck-boost/flyback family).
    """
    k = 2.0 * _as(magnetizing_inductance) / (_as(load_resistance) * _as(switching_period))
    return _as(duty) / np.sqrt(k)


def demagnetization_time(magnetizing_inductance, peak_current, reflected_voltage,
                         output_resistance=0.0):
    """Time for the reflected voltage to reset the magnetizing current.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Magnetizing current at the start of the off-time [A].
    reflected_voltage : float or array_like
        Reflected voltage with no current in the output path, ``V_R`` [V].
    output_resistance : float or array_like, optional
        Resistance in the output path referred to the primary, ``R'`` (the
        output capacitor's ESR times ``(Np/Ns)^2``) [ohm]; default 0.

    Returns
    -------
    ndarray
        Demagnetization time [s].

    Notes
    -----
    ``t = Lp Ipk / V_R`` (constant voltage across the inductance), [1]_.
    With ``R'`` the plateau is ``V_R + R' i``: ``L di/dt = -(V_R + R' i)``
    gives ``t = (L / R') ln(1 + x)``, ``x = R' Ipk / V_R`` (the driven
    first-order RL response, [4]_), ``Lp Ipk / V_R`` as ``x -> 0``.
    """
    base = _as(magnetizing_inductance) * _as(peak_current) / _as(reflected_voltage)
    x = np.maximum(_as(output_resistance) * _as(peak_current) / _as(reflected_voltage), 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(x > 1e-12, np.log1p(x) / np.where(x > 1e-12, x, 1.0), 1.0)
    return base * factor


def esr_share(drop_ratio):
    """Output's share of the flyback energy with a resistive drop, relative
    to the drop-free share ``V_o / (V_o + V_f)``.

    Parameters
    ----------
    drop_ratio : float or array_like
        ``x = R' I_pk / V_R``: the resistive drop at the plateau's start
        (``R'`` the output capacitor's ESR referred to the primary) over the
        drop-free reflected voltage [1].

    Returns
    -------
    ndarray
        ``g(x) = 2 (1 - ln(1 + x) / x) / x`` [1]; 1 at ``x = 0``, falling
        towards ``2 / x`` for a large drop.

    Notes
    -----
    On the plateau ``L di/dt = -(V_R + R' i)`` the current falls from
    ``I_pk`` to zero in ``(L / R') ln(1 + x)`` and carries the charge ``Q =
    (L I_pk / R') (1 - ln(1 + x) / x)`` (the driven first-order RL response,
    [4]_), of which each volt of ``V_R`` takes ``Q`` joules per volt out of
    ``L I_pk^2 / 2``; the ratio to the drop-free ``I_pk L / (2 V_R)`` is
    ``g(x)``.  Below ``x = 1e-2`` the series ``sum_k 2 (-x)^(k-1) / (k+1)``
    (nine terms, truncation below 1e-19) avoids the cancellation; the two
    meet within 1e-13.
    """
    x = np.maximum(_as(drop_ratio), 0.0)
    series = np.zeros_like(x)
    for k in range(9, 0, -1):           # Horner, terms k = 1 .. 9
        series = 2.0 * (-1.0) ** (k + 1) / (k + 1) + x * series
    with np.errstate(divide="ignore", invalid="ignore"):
        exact = 2.0 * (1.0 - np.log1p(x) / x) / x
    return np.where(x < 1e-2, series, exact)


def ramp_time(magnetizing_inductance, peak_current, bus_voltage):
    """Time for the primary current to ramp from zero to ``peak_current``.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Current reached [A].
    bus_voltage : float or array_like
        Voltage across the inductance during the ramp [V].

    Returns
    -------
    ndarray
        Ramp time [s].

    Notes
    -----
    ``t = Lp Ipk / V`` (``v = L di/dt`` at constant voltage).
    """
    return _as(magnetizing_inductance) * _as(peak_current) / _as(bus_voltage)


def resonant_delay(magnetizing_inductance, node_capacitance):
    """Delay from the end of demagnetization to the ring valley.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    node_capacitance : float or array_like
        Capacitance across the primary at the switch node [F].

    Returns
    -------
    ndarray
        Half a ring period, ``pi sqrt(Lp C)`` [s].

    Notes
    -----
    After demagnetization the switch-node voltage rings about the bus with
    the magnetizing inductance and the node capacitance; the valley, where
    the free-running circuit turns on again, comes half a period later
    (quasi-resonant turn-on)  # common practice
    """
    return np.pi * np.sqrt(_as(magnetizing_inductance) * _as(node_capacitance))


def blocking_oscillator_on_time(feedback_ratio, magnetizing_inductance, current_gain,
                                drive_resistance):
    """Base-timed pulse width of a transistor blocking oscillator.

    Parameters
    ----------
    feedback_ratio : float or array_like
        Feedback-to-primary turns ratio Nf/Np [1].
    magnetizing_inductance : float or array_like
        Primary magnetizing inductance [H].
    current_gain : float or array_like
        Switch current gain [1].
    drive_resistance : float or array_like
        Base drive resistance [ohm].

    Returns
    -------
    ndarray
        On-time [s].

    Notes
    -----
    The switch leaves saturation when ``Vin t / Lp = hFE n Vin / R``, so
    ``t = n Lp hFE / R`` independent of the supply (Vbe neglected, drive
    capacitor large), [3]_  # from memory (equation form)
    """
    return (_as(feedback_ratio) * _as(magnetizing_inductance) * _as(current_gain)
            / _as(drive_resistance))
