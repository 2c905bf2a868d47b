"""Switch voltage stress and core flux.

References
----------
.. [1] C. Basso, *Switch-Mode Power Supplies*, McGraw-Hill, 2008, ch. 7
   (flyback: leakage spike and RCD clamp).
.. [2] C. W. T. McLyman, *Transformer and Inductor Design Handbook*, 3rd ed.,
   Marcel Dekker, 2004, ch. 1-2 (Faraday's law, ``N Ae B = L I``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "leakage_spike",
    "rcd_clamp_voltage",
    "clamp_power",
    "RcdClampCycle",
    "rcd_clamp_cycle",
    "rcd_clamp_periodic",
    "leakage_energy_rate",
    "peak_flux_density",
    "storage_overshoot",
    "switch_peak_voltage",
    "RATING_BASES",
    "rating_basis",
]

#: Off-state rating bases, in the order they are preferred when the base is
#: reverse-biased by the feedback winding during the off-time.
RATING_BASES = ("vcev", "vcbo", "vceo")


def _as(x):
    return np.asarray(x, dtype=float)


def leakage_spike(peak_current, leakage_inductance, node_capacitance):
    """Voltage overshoot from the leakage energy with no clamp.

    Parameters
    ----------
    peak_current : float or array_like
        Primary current at turn-off [A].
    leakage_inductance : float or array_like
        Primary leakage inductance [H].
    node_capacitance : float or array_like
        Capacitance at the switch node [F].

    Returns
    -------
    ndarray
        Peak overshoot above bus plus reflected voltage [V].

    Notes
    -----
    Energy balance ``L_lk Ipk^2 / 2 = C V^2 / 2``, so
    ``V = Ipk sqrt(L_lk / C)`` (lossless, worst case), [1]_.
    """
    return _as(peak_current) * np.sqrt(_as(leakage_inductance) / _as(node_capacitance))


def rcd_clamp_voltage(reflected_voltage, leakage_inductance, peak_current,
                      switching_frequency, clamp_resistance):
    """Steady voltage of an RCD clamp capacitor above the bus.

    Parameters
    ----------
    reflected_voltage : float or array_like
        Reflected voltage [V].
    leakage_inductance : float or array_like
        Primary leakage inductance [H].
    peak_current : float or array_like
        Primary current at turn-off [A].
    switching_frequency : float or array_like
        Switching frequency [Hz].
    clamp_resistance : float or array_like
        Clamp resistor [ohm].

    Returns
    -------
    ndarray
        Clamp voltage above the bus [V], always above ``reflected_voltage``.

    Notes
    -----
    While the clamp conducts the leakage current falls at ``(Vc - V_R)/L_lk``,
    so the clamp absorbs ``L_lk Ipk^2 f / 2 * Vc / (Vc - V_R)``; equated
    with ``Vc^2 / R``:  ``Vc = V_R/2 + sqrt(V_R^2/4 + R L_lk Ipk^2 f / 2)``,
    [1]_ (RCD clamp design)  # from memory (derivation re-done here)
    """
    vr = _as(reflected_voltage)
    energy_rate = leakage_energy_rate(leakage_inductance, peak_current, switching_frequency)
    return 0.5 * vr + np.sqrt(0.25 * vr * vr + _as(clamp_resistance) * energy_rate)


def leakage_energy_rate(leakage_inductance, peak_current, switching_frequency):
    """Leakage-inductance energy per second released at turn-off.

    Parameters
    ----------
    leakage_inductance : float or array_like
        Primary leakage inductance [H].
    peak_current : float or array_like
        Primary current at turn-off [A].
    switching_frequency : float or array_like
        Switching frequency [Hz].

    Returns
    -------
    ndarray
        ``L_lk Ipk^2 f / 2``, the energy an inductor stores, times the
        switching frequency [W].
    """
    return 0.5 * _as(leakage_inductance) * _as(peak_current) ** 2 * _as(switching_frequency)


def clamp_power(reflected_voltage, clamp_voltage, leakage_inductance, peak_current,
                switching_frequency):
    """Power a clamp absorbs while it holds the collector above the bus.

    Parameters
    ----------
    reflected_voltage : float or array_like
        Reflected voltage V_R [V].
    clamp_voltage : float or array_like
        Clamp level above the bus, above ``reflected_voltage`` [V].
    leakage_inductance : float or array_like
        Primary leakage inductance [H].
    peak_current : float or array_like
        Primary current at turn-off [A].
    switching_frequency : float or array_like
        Switching frequency [Hz].

    Returns
    -------
    ndarray
        Clamp power [W]: the leakage energy rate times ``Vc / (Vc - V_R)``.
        The part above the leakage energy comes out of the magnetizing
        energy before the output winding takes over.

    Notes
    -----
    While the clamp conducts, the leakage current falls at
    ``(Vc - V_R) / L_lk`` and the clamp takes ``Vc`` times that current:
    ``E = L_lk Ipk^2 / 2 * Vc / (Vc - V_R)`` per cycle, [1]_ (clamp
    dissipation)  # from memory (derivation re-done here, as in
    :func:`rcd_clamp_voltage`)
    """
    vr = _as(reflected_voltage)
    vc = np.maximum(_as(clamp_voltage), vr * (1.0 + 1e-9))
    energy_rate = leakage_energy_rate(leakage_inductance, peak_current, switching_frequency)
    return energy_rate * vc / (vc - vr)


@dataclass(frozen=True)
class RcdClampCycle:
    """One turn-off into an RCD clamp capacitor (:func:`rcd_clamp_cycle`).

    Attributes
    ----------
    start : ndarray
        Capacitor voltage above the bus when the leakage current starts to
        fall (at least the reflected voltage) [V].
    end : ndarray
        Capacitor voltage above the bus when the leakage current has fallen
        to zero: the collector's peak above the bus [V].
    energy : ndarray
        Energy into the capacitor in this turn-off: the leakage energy plus
        what the magnetizing current gives while the clamp conducts [J].
    following : ndarray
        Capacitor voltage above the bus at the next turn-off, after the
        resistor has discharged it for one cycle [V].
    """

    start: np.ndarray
    end: np.ndarray
    energy: np.ndarray
    following: np.ndarray


def rcd_clamp_cycle(clamp_voltage, reflected_voltage, leakage_inductance, peak_current,
                    clamp_capacitance, clamp_resistance, cycle_time):
    """An RCD clamp capacitor through one switching cycle.

    Parameters
    ----------
    clamp_voltage : float or array_like
        Capacitor voltage above the bus at turn-off [V].
    reflected_voltage : float or array_like
        Reflected voltage V_R [V].
    leakage_inductance : float or array_like
        Primary leakage inductance L_lk [H].
    peak_current : float or array_like
        Primary current at turn-off [A].
    clamp_capacitance : float or array_like
        Clamp capacitor C [F].
    clamp_resistance : float or array_like
        Clamp resistor R [ohm].
    cycle_time : float or array_like
        Time to the next turn-off [s].

    Returns
    -------
    RcdClampCycle

    Notes
    -----
    Below ``V_R`` the clamp diode conducts first and the whole primary
    current charges the capacitor to ``V_R`` (energy ``C (V_R^2 - v^2)/2``
    from the magnetizing inductance).  From there the output winding holds
    the magnetizing inductance at ``V_R`` and the leakage current ``i``
    charges the capacitor, ``L_lk di/dt = -(v - V_R)``, ``C dv/dt = i``: a
    quarter of an LC oscillation in ``(i, v - V_R)`` that conserves
    ``L_lk i^2/2 + C (v - V_R)^2/2``, so it ends at
    ``v_end = V_R + sqrt((v_0 - V_R)^2 + L_lk Ipk^2 / C)``
    (Nilsson & Riedel, *Electric Circuits*, 10th ed., 2015, sec. 8.1, the
    LC natural response).  The resistor then discharges the capacitor,
    ``v e^(-t/(R C))``, until the next turn-off (the diode blocks below the
    collector voltage).  With ``R C`` much longer than the cycle the steady
    level tends to :func:`rcd_clamp_voltage` ([1]_).
    """
    v, vr = _as(clamp_voltage), _as(reflected_voltage)
    capacitance = _as(clamp_capacitance)
    start = np.maximum(v, vr)
    end = vr + np.sqrt((start - vr) ** 2
                       + _as(leakage_inductance) * _as(peak_current) ** 2 / capacitance)
    energy = 0.5 * capacitance * (end**2 - v**2)
    following = end * np.exp(-_as(cycle_time) / (_as(clamp_resistance) * capacitance))
    return RcdClampCycle(start=start, end=end, energy=energy, following=following)


def rcd_clamp_periodic(reflected_voltage, leakage_inductance, peak_current,
                       clamp_capacitance, clamp_resistance, cycle_time):
    """Capacitor voltage of an RCD clamp at turn-off in a steady cycle.

    Parameters
    ----------
    reflected_voltage : float or array_like
        Reflected voltage V_R [V].
    leakage_inductance : float or array_like
        Primary leakage inductance [H].
    peak_current : float or array_like
        Primary current at turn-off [A].
    clamp_capacitance : float or array_like
        Clamp capacitor C [F].
    clamp_resistance : float or array_like
        Clamp resistor R [ohm].
    cycle_time : float or array_like
        Switching period T [s].

    Returns
    -------
    ndarray
        The fixed point ``v`` of :func:`rcd_clamp_cycle` (``following == v``)
        [V above the bus].

    Notes
    -----
    With ``a = e^(-T/(R C))``, ``b = L_lk Ipk^2 / C`` and ``x = v - V_R >= 0``
    the fixed point ``x + V_R = a (V_R + sqrt(x^2 + b))`` is the root of
    ``(1 + a) x^2 + 2 V_R x + V_R^2 (1 - a) - a^2 b / (1 - a) = 0``:
    ``x = (a sqrt(V_R^2 + b (1 + a)/(1 - a)) - V_R) / (1 + a)``.  Where that
    is negative the capacitor discharges below ``V_R`` every cycle and
    ``v = a (V_R + sqrt(b))``.  (Derived here from :func:`rcd_clamp_cycle`.)
    """
    vr = _as(reflected_voltage)
    ratio = _as(cycle_time) / (_as(clamp_resistance) * _as(clamp_capacitance))
    a = np.exp(-ratio)
    one_minus_a = -np.expm1(-ratio)
    b = _as(leakage_inductance) * _as(peak_current) ** 2 / _as(clamp_capacitance)
    x = (a * np.sqrt(vr**2 + b * (1.0 + a) / one_minus_a) - vr) / (1.0 + a)
    return np.where(x >= 0.0, vr + x, a * (vr + np.sqrt(b)))


def peak_flux_density(magnetizing_inductance, peak_current, primary_turns, core_area):
    """Peak flux density in the core.

    Parameters
    ----------
    magnetizing_inductance : float or array_like
        Primary magnetizing inductance [H].
    peak_current : float or array_like
        Peak magnetizing current [A].
    primary_turns : float or array_like
        Primary turns [1].
    core_area : float or array_like
        Effective core cross-section Ae [m^2].

    Returns
    -------
    ndarray
        Peak flux density [T].

    Notes
    -----
    Flux linkage ``N Phi = L I`` with ``Phi = B Ae``:
    ``B = L Ipk / (N Ae)``, [2]_.
    """
    return _as(magnetizing_inductance) * _as(peak_current) / (_as(primary_turns) * _as(core_area))


def storage_overshoot(bus_voltage, storage_time, magnetizing_inductance):
    """Rise of the primary current during the switch storage time.

    Parameters
    ----------
    bus_voltage : float or array_like
        Bus voltage across the primary [V].
    storage_time : float or array_like
        Switch storage time after the turn-off decision [s].
    magnetizing_inductance : float or array_like
        Magnetizing inductance [H].

    Returns
    -------
    ndarray
        Current overshoot above the decision level [A].

    Notes
    -----
    The collector current keeps ramping at ``Vin / Lp`` while the stored
    base charge is removed: ``dI = Vin t_s / Lp``  # common practice
    """
    return _as(bus_voltage) * _as(storage_time) / _as(magnetizing_inductance)


def switch_peak_voltage(bus_voltage, reflected_voltage, spike):
    """Peak collector voltage: bus plus reflected voltage plus spike.

    Parameters
    ----------
    bus_voltage : float or array_like
        Highest bus voltage [V].
    reflected_voltage : float or array_like
        Reflected voltage [V].
    spike : float or array_like
        Leakage overshoot above ``bus + reflected`` [V].

    Returns
    -------
    ndarray
        Peak collector-emitter voltage [V].

    Notes
    -----
    The flyback switch sees the bus, the reflected output and the leakage
    overshoot in series, [1]_.
    """
    return _as(bus_voltage) + _as(reflected_voltage) + _as(spike)


def rating_basis(switch) -> tuple[str, float]:
    """Off-state voltage rating that applies in a free-running flyback.

    Parameters
    ----------
    switch : rcc.design.SwitchSpec
        The switch; ``vcev``/``vcbo`` may be ``None`` [V].

    Returns
    -------
    tuple of (str, float)
        Basis name (``"vcev"``, ``"vcbo"`` or ``"vceo"``) and the rating [V].

    Notes
    -----
    During the flyback plateau the feedback winding reverse-biases the base,
    so the reverse-biased rating (VCEV/VCEX) applies; VCBO bounds it when
    no VCEV is given; with neither, only VCEO (base open) can be relied on
    # common practice
    """
    for name in RATING_BASES:
        value = getattr(switch, name)
        if value is not None:
            return name, float(value)
    raise AssertionError("vceo is required by the schema")
