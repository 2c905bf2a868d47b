"""Poles of the small-signal start-up network and the start/stall verdict.

The element values and the DC point give the parameters of the symbolic
network (:mod:`rcc.startup.symbolic`); the compiled coefficient functions
give the characteristic polynomial of every circuit at once, and its roots
come from batched companion-matrix eigenvalues.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rcc.devices import thermal_voltage
from rcc.startup.dcpoint import CircuitValues, DcPoint
from rcc.startup.network import PARAMETERS, compiled, evaluate

__all__ = [
    "SmallSignal",
    "PoleResult",
    "small_signal_parameters",
    "polynomial_roots",
    "network_poles",
    "HOLDING_ELEMENTS",
    "MINIMUM_LEAKAGE_FRACTION",
    "MINIMUM_WINDING_CAPACITANCE",
    "STARVED_FRACTION",
    "holding_element",
    "onset_collector_current",
]

#: Names of what holds a stalled circuit, in the order they are tested.
HOLDING_ELEMENTS = ("feedback-phase", "limiter", "startup-resistor", "drive-coupling")

#: Floor of the leakage inductance relative to the magnetizing inductance
#: [1]: keeps the polynomial degree fixed for a design that gives zero
#: leakage (coupling 0.9999995; physically every winding pair leaks).
MINIMUM_LEAKAGE_FRACTION = 1e-6

#: Floor of the winding self-capacitance [F] for a design that gives zero.
MINIMUM_WINDING_CAPACITANCE = 0.1e-12

#: Collector current, as a fraction of the current-limit trip current, below
#: which a stalled switch counts as starved by the start-up network [1]
#: (our convention: a start current of 0.1 % of the peak current is
#: leakage-like for a power transistor).
STARVED_FRACTION = 1e-3


@dataclass(frozen=True)
class SmallSignal:
    """Small-signal parameters of the network, one entry per circuit.

    Attributes
    ----------
    values : dict of str to ndarray
        ``{name: array}`` for every name of
        :data:`rcc.startup.symbolic.PARAMETERS` [SI], see
        :data:`rcc.startup.symbolic.SYMBOLS` for meanings and units.
    natural_frequency : ndarray
        ``1/sqrt(L_m (C_w + C_mu))``, the scale used to normalize the
        polynomial before root finding [rad/s].
    """

    values: dict
    natural_frequency: np.ndarray


def small_signal_parameters(circuit: CircuitValues, dc: DcPoint | None,
                            collector_current=None) -> SmallSignal:
    """Hybrid-pi parameters of both transistors and the passive elements.

    Parameters
    ----------
    circuit : CircuitValues
        Element values [SI].
    dc : DcPoint or None
        Power-on DC point; None with ``collector_current`` given: the
        limiter is off (no transconductance, no input conductance).
    collector_current : array_like, optional
        Override the switch collector current [A] (the hybrid-pi values
        then follow ``g_m = I_C/V_T``, ``g_pi = g_m/h_FE``); used to ask
        whether more start current would start a stalled circuit.

    Returns
    -------
    SmallSignal

    Notes
    -----
    Hybrid-pi model (Giacoletto, "Study of p-n-p alloy junction transistor
    from d-c through medium frequencies", RCA Review 15, 1954; Gray, Hurst,
    Lewis & Meyer, 5th ed., 2009, sec. 1.4): ``g_m = dI_C/dV_BE``,
    ``r_pi = 1/g_pi = h_FE/g_m``, ``C_pi + C_mu = g_m / (2 pi f_T)``,
    ``C_mu`` = the switch output capacitance.  ``C_pi`` is not allowed below
    ``C_mu`` (the emitter depletion capacitance, of the same order as the
    collector one, remains at low current  # from memory).  The output
    resistance (Early effect) is not modelled.
    """
    v = circuit
    if collector_current is None:
        gm, gpi = dc.transconductance, dc.input_conductance
    else:
        gm = np.asarray(collector_current, dtype=float) / thermal_voltage(v.temperature)
        gpi = gm / v.hfe
    c_mu = v.output_capacitance
    c_pi = np.maximum(gm / (2.0 * np.pi * v.transition_frequency) - c_mu, c_mu)
    glb = 1.0 / v.limiter_base_resistance
    gm2, gpi2 = (0.0, 0.0) if dc is None else (dc.limiter_transconductance,
                                               dc.limiter_input_conductance)
    divider = glb / (glb + gpi2)
    c_w = np.maximum(v.winding_capacitance, MINIMUM_WINDING_CAPACITANCE)
    values = {
        "L_m": v.magnetizing_inductance,
        "G_core": 1.0 / v.core_loss_resistance,
        "L_lk": np.maximum(v.leakage_inductance,
                           MINIMUM_LEAKAGE_FRACTION * v.magnetizing_inductance),
        "R_p": v.primary_resistance,
        "C_w": c_w,
        "C_mu": c_mu,
        "C_pi": c_pi,
        "g_m": gm,
        "g_pi": gpi,
        "G_e": 1.0 / v.sense_resistance + gpi2 * divider,
        "G_st": v.startup_conductance,
        "G_be": v.base_emitter_conductance,
        "G_d": 1.0 / v.drive_resistance,
        "C_d": v.drive_capacitance,
        "k": v.feedback_ratio,
        "g_x": gm2 * divider,
    }
    values = {name: np.asarray(values[name], dtype=float) for name in PARAMETERS}
    return SmallSignal(values, 1.0 / np.sqrt(v.magnetizing_inductance * (c_w + c_mu)))


def polynomial_roots(coefficients, scale=None) -> np.ndarray:
    """Roots of many polynomials of one degree at once.

    Parameters
    ----------
    coefficients : array_like, shape (n, degree + 1)
        Coefficients, highest power first; leading coefficient non-zero
        [SI units of the polynomial in s, 1/s^k per power].
    scale : array_like, shape (n,), optional
        Frequency scale ``w0`` [rad/s]: roots are found for ``p = s / w0``
        (coefficients ``a_k w0^k``), which keeps the companion matrix well
        balanced, and scaled back.

    Returns
    -------
    ndarray, shape (n, degree), complex
        Roots [rad/s], sorted by decreasing real part.

    Notes
    -----
    Eigenvalues of the companion matrix (Horn & Johnson, *Matrix
    Analysis*, 2nd ed., 2013, sec. 3.3), computed by LAPACK ``geev`` with
    balancing, as numpy.roots does for one polynomial.
    """
    a = np.atleast_2d(np.asarray(coefficients, dtype=float))
    degree = a.shape[1] - 1
    if scale is not None:
        w0 = np.asarray(scale, dtype=float).reshape(-1, 1)
        a = a * w0 ** np.arange(degree, -1, -1)
    monic = a[:, 1:] / a[:, :1]
    companion = np.zeros((a.shape[0], degree, degree))
    companion[:, 0, :] = -monic
    companion[:, np.arange(1, degree), np.arange(degree - 1)] = 1.0
    roots = np.linalg.eigvals(companion)
    if scale is not None:
        roots = roots * w0
    order = np.argsort(-roots.real, axis=1, kind="stable")
    return np.take_along_axis(roots, order, axis=1)


@dataclass(frozen=True)
class PoleResult:
    """Poles and verdict, one row per circuit.

    Attributes
    ----------
    poles : ndarray, shape (n, degree), complex
        Poles sorted by decreasing real part [rad/s].
    coefficients : ndarray, shape (n, degree + 1)
        Characteristic polynomial, highest power first [SI].
    starts : ndarray of bool
        A pole lies in the right half-plane.
    growth_rate : ndarray
        Largest real part [1/s] (negative: decay rate of the slowest mode).
    growth_frequency : ndarray
        Oscillation frequency of that pole, ``|Im s| / 2 pi`` [Hz].
    right_half_plane_roots : ndarray of int
        Sign changes of the Routh first column (``-1`` where an entry is
        zero or not finite, so the count is undecided).
    """

    poles: np.ndarray
    coefficients: np.ndarray
    starts: np.ndarray
    growth_rate: np.ndarray
    growth_frequency: np.ndarray
    right_half_plane_roots: np.ndarray


def network_poles(small_signal: SmallSignal) -> PoleResult:
    """Characteristic polynomial, poles and verdict of every circuit.

    Parameters
    ----------
    small_signal : SmallSignal

    Returns
    -------
    PoleResult

    Notes
    -----
    A pole counts as right-half-plane when its real part exceeds
    ``1e-9 w0`` (round-off of the companion eigenvalues is about
    ``1e-12 w0``).
    """
    coefficients = _characteristic(small_signal)
    w0 = np.atleast_1d(small_signal.natural_frequency)
    poles = polynomial_roots(coefficients, w0)
    growth = poles[:, 0].real
    starts = growth > 1e-9 * w0
    changes = _routh_changes(coefficients, w0)
    return PoleResult(poles, coefficients, starts, growth,
                      np.abs(poles[:, 0].imag) / (2.0 * np.pi), changes)


def _characteristic(small_signal: SmallSignal) -> np.ndarray:
    """Characteristic polynomial of each circuit, highest power first, with a
    positive leading coefficient [SI]."""
    coefficients = np.atleast_2d(evaluate(compiled().polynomial, small_signal.values))
    return coefficients * np.sign(coefficients[:, :1])


def _routh_changes(coefficients, w0) -> np.ndarray:
    """Sign changes of the Routh first column of each polynomial (``-1``
    where an entry is zero or not finite) [1]."""
    network = compiled()
    with np.errstate(all="ignore"):
        scaled = coefficients * w0[:, None] ** np.arange(network.degree, -1, -1)
        scaled = scaled / scaled[:, :1]
        column = np.stack([np.broadcast_to(np.asarray(c, dtype=float), w0.shape)
                           for c in network.routh(*scaled.T)], axis=1)
    bad = ~np.isfinite(column).all(axis=1) | (column == 0).any(axis=1)
    changes = (np.diff(np.sign(column), axis=1) != 0).sum(axis=1)
    return np.where(bad, -1, changes)


#: Collector-current bracket of the regeneration onset [A]: below the lower
#: end no plausible network regenerates, the upper end is the trip current
ONSET_LOWEST_CURRENT = 1e-12
#: Width on ln(I_C) to which the Routh count brackets the onset before the
#: regula falsi [-]
ONSET_BRACKET = 0.1
#: Width of the final bracket on ln(I_C) [-]: 1e-9 relative in the current,
#: 1e-9 V_T (3e-11 V) in the base voltage
ONSET_TOLERANCE = 1e-9
#: Most regula falsi steps (measured: 3-6 from a 0.1 bracket)
ONSET_STEPS = 60


def onset_collector_current(circuit: CircuitValues) -> np.ndarray:
    """Least switch collector current at which the small-signal network with
    the limiter off has a right-half-plane pole: the onset of regeneration
    [A].

    A switch held off by its drive network (after a demagnetized cycle or a
    lock-up pulse, while the start-up current recharges the drive
    capacitor) turns on by regeneration once its base has risen far enough
    that the loop through the transformer's feedback winding has a
    growing mode; that happens at a collector current of micro-amperes,
    far below the datasheet ``switch.vbe`` point.

    Parameters
    ----------
    circuit : CircuitValues

    Returns
    -------
    ndarray
        Onset current [A]; ``inf`` where the network is stable even at the
        trip current (it cannot regenerate at any current in the bracket).

    Notes
    -----
    Hybrid-pi parameters at each trial current (:func:`small_signal_parameters`,
    ``g_m = I_C/V_T``).  Bisection on ``ln I_C`` of the Routh-Hurwitz count
    (Routh, *A Treatise on the Stability of a Given State of Motion*, 1877)
    between ``ONSET_LOWEST_CURRENT`` and the trip current brackets the onset
    to ``ONSET_BRACKET``; there the real part of the crossing complex pair
    (the feedback winding's ring) is smooth in ``ln I_C`` and the Illinois
    variant of regula falsi (Dowell & Jarratt, BIT 11, 1971) finds its zero
    to ``ONSET_TOLERANCE``.  Assumed to cross once over the bracket: more
    transconductance, more loop gain.
    """
    trip = np.atleast_1d(np.asarray(circuit.trip_current, dtype=float))

    def polynomial(log_current):
        small = small_signal_parameters(circuit, None, collector_current=np.exp(log_current))
        return (_characteristic(small),
                np.broadcast_to(np.atleast_1d(small.natural_frequency), trip.shape))

    def unstable(log_current):
        return _routh_changes(*polynomial(log_current)) > 0

    def growth(log_current):
        # real part of the least damped complex pair, over w0
        coefficients, w0 = polynomial(log_current)
        roots = polynomial_roots(coefficients, w0)
        complex_ = np.abs(roots.imag) > 1e-6 * w0[:, None]
        real = np.where(complex_, roots.real, -np.inf).max(axis=1)
        return np.where(np.isfinite(real), real, roots[:, 0].real) / w0

    low = np.full(trip.shape, np.log(ONSET_LOWEST_CURRENT))
    high = np.log(trip)
    regenerates = unstable(high) & ~unstable(low)
    while True:
        open_ = regenerates & (high - low > ONSET_BRACKET)
        if not open_.any():
            break
        middle = np.where(open_, 0.5 * (low + high), high)
        above = unstable(middle)
        high = np.where(open_ & above, middle, high)
        low = np.where(open_ & ~above, middle, low)
    # Illinois: (a, f_a) the end kept, (b, f_b) the latest estimate
    a, f_a = low, np.where(regenerates, growth(low), -1.0)
    b, f_b = high, np.where(regenerates, growth(high), 1.0)
    for _ in range(ONSET_STEPS):
        open_ = regenerates & (np.abs(b - a) > ONSET_TOLERANCE) & (f_b != 0.0) \
            & (f_a * f_b < 0.0)
        if not open_.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            c = b - f_b * (b - a) / (f_b - f_a)
        c = np.where(open_ & np.isfinite(c), np.clip(c, np.minimum(a, b), np.maximum(a, b)), b)
        f_c = np.where(open_, growth(c), f_b)
        crossed = open_ & (f_c * f_b < 0.0)
        a, f_a = np.where(crossed, b, a), np.where(crossed, f_b, np.where(open_, 0.5 * f_a, f_a))
        b, f_b = np.where(open_, c, b), f_c
    # the end of the final bracket on the growing side
    upper = np.where(f_b > 0.0, b, a)
    return np.where(regenerates, np.exp(upper), np.inf)


def holding_element(circuit: CircuitValues, dc: DcPoint, result: PoleResult) -> np.ndarray:
    """Name what holds each stalled circuit (``""`` for those that start).

    Parameters
    ----------
    circuit : CircuitValues
    dc : DcPoint
    result : PoleResult

    Returns
    -------
    ndarray of str
        One of :data:`HOLDING_ELEMENTS` or ``""``.

    Notes
    -----
    Tested in order: a degenerative feedback winding (``feedback-phase``);
    a conducting limiter holding the collector current near ``Vbe/Rs``
    (``limiter``); a switch left (nearly) cut off by the start-up network,
    collector current below :data:`STARVED_FRACTION` of the trip current
    (``startup-resistor``); otherwise the feedback path itself is too weak
    (``drive-coupling``: too few feedback turns, too small a drive
    capacitor, too large a drive resistor or too lossy a tank).
    """
    starved = dc.collector_current < STARVED_FRACTION * circuit.trip_current
    names = np.where(starved, "startup-resistor", "drive-coupling")
    names = np.where(dc.limiter_active, "limiter", names)
    names = np.where(circuit.feedback_ratio < 0, "feedback-phase", names)
    return np.where(result.starts, "", names).astype(object)
