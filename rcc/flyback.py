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
    "demagnetizing_current",
    "plateau_charge",
    "output_energy_share",
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


#: Gauss-Legendre nodes and weights on [-1, 1] for the plateau's charge
#: (twelve points: exact for polynomials of degree 23; on the plateau's
#: exponentials and sinusoids, decaying by at most e^-10 over it, the error
#: is below 1e-12 relative) [1].
_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(12)


def _plateau_constants(magnetizing_inductance, peak_current, reflected_voltage,
                       output_resistance, output_capacitance):
    """``alpha = R'/(2L)`` [1/s], ``beta^2 = alpha^2 - 1/(L C')`` [1/s^2] and
    ``a = V_R/L + alpha I_pk`` [A/s] of the plateau's series RLC."""
    inductance = _as(magnetizing_inductance)
    alpha = _as(output_resistance) / (2.0 * inductance)
    beta_squared = alpha**2 - 1.0 / (inductance * _as(output_capacitance))
    return alpha, beta_squared, _as(reflected_voltage) / inductance + alpha * _as(peak_current)


def _arctanh_ratio(z):
    """``artanh(sqrt z) / sqrt z``, continued as ``arctan(sqrt -z) / sqrt -z``
    below zero (series ``1 + z/3 + z^2/5 + z^3/7`` within 1e-6 of zero,
    truncation below 1e-24) [1]."""
    z = _as(z)
    root = np.sqrt(np.abs(z))
    with np.errstate(divide="ignore", invalid="ignore"):
        over = np.arctanh(np.minimum(root, 1.0)) / root
        under = np.arctan(root) / root
    series = 1.0 + z / 3.0 + z**2 / 5.0 + z**3 / 7.0
    return np.where(z > 1e-6, over, np.where(z < -1e-6, under, series))


def _hyperbolic_pair(beta_squared, time):
    """``cosh(beta t)`` and ``sinh(beta t) / beta`` for ``beta^2`` of either
    sign (``cos`` and ``sin(omega t)/omega`` below zero; series within 1e-8)."""
    time = _as(time)
    u = _as(beta_squared) * time**2
    root = np.sqrt(np.abs(u))
    with np.errstate(divide="ignore", invalid="ignore"):
        cosh_over, sinh_over = np.cosh(root), time * np.sinh(root) / root
        cos_under, sin_under = np.cos(root), time * np.sin(root) / root
    small = np.abs(u) <= 1e-8
    first = np.where(small, 1.0 + u / 2.0 + u**2 / 24.0, np.where(u > 0, cosh_over, cos_under))
    second = np.where(small, time * (1.0 + u / 6.0 + u**2 / 120.0),
                      np.where(u > 0, sinh_over, sin_under))
    return first, second


def demagnetization_time(magnetizing_inductance, peak_current, reflected_voltage,
                         output_resistance=0.0, output_capacitance=np.inf):
    """Time for the reflected voltage to reset the magnetizing current.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Magnetizing current at the start of the off-time [A].
    reflected_voltage : float or array_like
        Reflected voltage with no current in the output path and the output
        capacitor at its voltage at the plateau's start, ``V_R`` [V].
    output_resistance : float or array_like, optional
        Resistance in the output path referred to the primary, ``R'`` (the
        output capacitor's ESR and the rectifier's series resistance times
        ``(Np/Ns)^2``) [ohm]; default 0.
    output_capacitance : float or array_like, optional
        Output capacitance referred to the primary, ``C' = C_o (Ns/Np)^2``
        [F]; default infinite (the output does not move during the plateau).

    Returns
    -------
    ndarray
        Demagnetization time [s].

    Notes
    -----
    ``t = Lp Ipk / V_R`` (constant voltage across the inductance), [1]_.
    With ``R'`` and ``C'`` the plateau is ``V_R + R' i + q / C'`` (``q`` the
    charge the output has taken): the series RLC circuit ``L i'' + R' i' +
    i / C' = 0``, ``i(0) = I_pk``, ``L i'(0) = -(V_R + R' I_pk)`` ([4]_,
    second-order circuits).  With ``alpha = R'/(2L)``, ``beta^2 = alpha^2 -
    1/(L C')`` and ``a = V_R/L + alpha I_pk`` the current is ``e^{-alpha t}
    (I_pk cosh(beta t) - a sinh(beta t)/beta)``, zero at ``t = artanh(beta
    I_pk / a) / beta`` (``arctan`` of ``omega = sqrt(-beta^2)`` when
    underdamped).  Without ``C'`` this is ``(L / R') ln(1 + x)``, ``x = R'
    I_pk / V_R`` (the driven first-order RL response), ``Lp Ipk / V_R`` as
    ``x -> 0``.
    """
    alpha, beta_squared, a = _plateau_constants(
        magnetizing_inductance, peak_current, reflected_voltage, output_resistance,
        output_capacitance)
    y = _as(peak_current) / a
    return y * _arctanh_ratio(beta_squared * y**2)


def demagnetizing_current(magnetizing_inductance, peak_current, reflected_voltage, time,
                          output_resistance=0.0, output_capacitance=np.inf):
    """Magnetizing current ``time`` after the flyback plateau began.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Magnetizing current at the start of the off-time [A].
    reflected_voltage : float or array_like
        Reflected voltage with no current in the output path, ``V_R`` [V].
    time : float or array_like
        Time since the plateau began, up to the demagnetization time [s].
    output_resistance : float or array_like, optional
        Output path's resistance referred to the primary, ``R'`` [ohm];
        default 0.
    output_capacitance : float or array_like, optional
        Output capacitance referred to the primary, ``C'`` [F]; default
        infinite.

    Returns
    -------
    ndarray
        ``e^{-alpha t} (I_pk cosh(beta t) - a sinh(beta t) / beta)`` [A]
        (:func:`demagnetization_time`, Notes).
    """
    alpha, beta_squared, a = _plateau_constants(
        magnetizing_inductance, peak_current, reflected_voltage, output_resistance,
        output_capacitance)
    first, second = _hyperbolic_pair(beta_squared, time)
    return np.exp(-alpha * _as(time)) * (_as(peak_current) * first - a * second)


def plateau_charge(magnetizing_inductance, peak_current, reflected_voltage,
                   output_resistance=0.0, output_capacitance=np.inf):
    """Charge the flyback plateau delivers, referred to the primary.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Magnetizing current at the start of the off-time [A].
    reflected_voltage : float or array_like
        Reflected voltage with no current in the output path, ``V_R`` [V].
    output_resistance : float or array_like, optional
        Output path's resistance referred to the primary, ``R'`` [ohm];
        default 0.
    output_capacitance : float or array_like, optional
        Output capacitance referred to the primary, ``C'`` [F]; default
        infinite.

    Returns
    -------
    ndarray
        ``q = integral of i dt`` over the demagnetization [C]; times
        ``Np/Ns`` it is the charge into the output.

    Notes
    -----
    Twelve-point Gauss-Legendre quadrature (Abramowitz & Stegun, *Handbook
    of Mathematical Functions*, 1964, 25.4.29) of
    :func:`demagnetizing_current`.  Without ``C'`` the closed form is ``(L
    I_pk / R') (1 - ln(1 + x) / x)``; with ``R' = 0`` and no ``C'``, ``L
    I_pk^2 / (2 V_R)``.
    """
    duration = demagnetization_time(magnetizing_inductance, peak_current, reflected_voltage,
                                    output_resistance, output_capacitance)
    duration = _as(duration)[..., None]
    times = 0.5 * duration * (_GAUSS_NODES + 1.0)
    currents = demagnetizing_current(*(_as(v)[..., None] for v in (
        magnetizing_inductance, peak_current, reflected_voltage)), times,
        _as(output_resistance)[..., None], _as(output_capacitance)[..., None])
    return 0.5 * duration[..., 0] * np.sum(_GAUSS_WEIGHTS * currents, axis=-1)


def output_energy_share(magnetizing_inductance, peak_current, reflected_voltage,
                        output_fraction, output_resistance=0.0, output_capacitance=np.inf,
                        start_fraction=None):
    """Share of the flyback energy ``L I_pk^2 / 2`` the output takes at its
    mean voltage.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].
    peak_current : float or array_like
        Magnetizing current at the start of the off-time [A].
    reflected_voltage : float or array_like
        Reflected voltage with no current in the output path, ``V_R`` [V].
    output_fraction : float or array_like
        The output's part of ``V_R``, ``V_o / (V_o + V_f)`` [1].
    output_resistance : float or array_like, optional
        Output path's resistance referred to the primary, ``R'`` [ohm];
        default 0.
    output_capacitance : float or array_like, optional
        Output capacitance referred to the primary, ``C'`` [F]; default
        infinite.
    start_fraction : float or array_like, optional
        The output capacitor's part of ``V_R`` where the plateau starts,
        ``V_start / (V_start + V_f)`` [1]; default ``output_fraction``.

    Returns
    -------
    ndarray
        ``f V_R q / (L I_pk^2 / 2)`` [1] (``q`` of :func:`plateau_charge`),
        at most the energy the capacitor receives, ``(f_s V_R q + q^2 /
        (2 C')) / (L I_pk^2 / 2)``; ``f`` with no ``R'`` or ``C'``, and where
        ``I_pk`` is zero.

    Notes
    -----
    The output takes ``V_o`` per coulomb of the plateau's charge: with the
    output at its mean ``V_o`` the load's mean current is the mean charge
    rate (the capacitor's mean current is zero), so a balance of this power
    against the load's at ``V_o`` is the charge balance, exact for a linear
    load whatever the ripple.  The energy the capacitor's rise during the
    plateau stores above ``V_o`` (``q^2/(2 C')``, the ripple's share) and
    the rectifier's drop and the path's resistance take the rest.  Where the
    load is not linear over a large swing the charge balance at the mean can
    ask for more than the capacitor receives, ``V_start q + q^2/(2 C')``; the
    share is held to that (energy is conserved, no loss turns negative).
    """
    charge = plateau_charge(magnetizing_inductance, peak_current, reflected_voltage,
                            output_resistance, output_capacitance)
    energy = 0.5 * _as(magnetizing_inductance) * _as(peak_current)**2
    fraction = _as(output_fraction)
    start = fraction if start_fraction is None else _as(start_fraction)
    # (no current: the limit of a vanishing pulse, with no drop, is f)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = fraction * _as(reflected_voltage) * charge / energy
        received = (start * _as(reflected_voltage) * charge
                    + charge**2 / (2.0 * _as(output_capacitance))) / energy
    return np.where(energy > 0.0, np.minimum(share, received), fraction)


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
