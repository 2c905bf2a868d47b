"""Periodic steady state of the free-running oscillator: Newton's method on
the Poincaré map at the turn-on event, Floquet multipliers, and a long
transient as fall-back.

Two levels:

- :func:`find_periodic_orbit` works on any cycle map ``x0 -> CycleData``
  (:mod:`rcc.engine.floquet`): the reduced piecewise-affine oscillators of
  the tests, or the circuit engine.
- :func:`periodic_steady_state` builds the circuit of a design with the
  time-domain engine, warms up with a transient from power-on and returns a
  :class:`PeriodicSteadyState` with the cycle's figures and its waveform.

Notes
-----
The oscillator is autonomous, so its period is unknown.  Taking the
Poincaré section at the turn-on event removes both the unknown period and
the phase: the return map ``P`` takes the state at one turn-on to the state
at the next, and a periodic steady state is a fixed point ``P(x*) = x*``.
Newton's method solves ``(DP - I) dx = -(P(x) - x)``, with ``DP`` built
from the segment exponentials and the saltation matrices at the switching
events (shooting method of Aprille & Trick 1972, with the period made
implicit by the section as in Parker & Chua 1989, sec. 3.3; saltation
matrices: di Bernardo et al. 2008, ch. 2).  The non-trivial Floquet
multipliers are the eigenvalues of ``DP`` on the section's tangent space;
the cycle is asymptotically stable when all lie inside the unit circle.

References
----------
.. [1] T. J. Aprille, T. N. Trick, "Steady-state analysis of nonlinear
   circuits with periodic inputs", Proc. IEEE 60(1), 1972, pp. 108-114.
.. [2] T. S. Parker, L. O. Chua, *Practical Numerical Algorithms for
   Chaotic Systems*, Springer, 1989, sec. 3.3.
.. [3] M. di Bernardo, C. J. Budd, A. R. Champneys, P. Kowalczyk,
   *Piecewise-smooth Dynamical Systems*, Springer, 2008.
.. [4] A. El Aroudi, D. Giaouris, H. H.-C. Iu, I. A. Hiskens, IEEE JETCAS
   5(3), 2015, pp. 302-315.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Callable

import numpy as np

from rcc.design import Load
from rcc.engine.circuit import EngineError
from rcc.engine.simulate import CyclePower, cycle_power
from rcc.engine.floquet import (
    CycleData,
    CycleError,
    MultiplierReport,
    classify_multipliers,
    poincare_jacobian,
    section_multipliers,
)

__all__ = [
    "FallbackWarning",
    "PeriodicOrbit",
    "PeriodicSteadyStateError",
    "find_periodic_orbit",
    "newton_picard_step",
    "CycleWaveform",
    "PeriodicSteadyState",
    "periodic_steady_state",
    "parse_load",
    "plot_periodic_steady_state",
    "VerifiedPoint",
    "verify_operating_points",
    "benchmark_iterations",
    "poincare_map",
]


class FallbackWarning(UserWarning):
    """Newton's method did not converge and the long transient was used."""


class PeriodicSteadyStateError(RuntimeError):
    """No periodic steady state found (the cycle map fails, or neither
    Newton's method nor the long transient settles)."""


@dataclass(frozen=True)
class PeriodicOrbit:
    """A periodic orbit of a cycle map, with its stability.

    Attributes
    ----------
    state : ndarray, shape (n,)
        State at the section (turn-on) event on the orbit [state units].
    period : float
        Period [s].
    cycle : CycleData
        The cycle from ``state`` (segments and events).
    jacobian : ndarray, shape (n, n)
        Poincaré-map Jacobian at ``state`` [1].
    multipliers : ndarray of complex
        Non-trivial Floquet multipliers, by decreasing modulus [1].
    report : MultiplierReport
        Stability and bifurcation flags.
    iterations : int
        Newton iterations (Jacobian solves) or, for the fall-back, cycles
        simulated [1].
    method : str
        ``"newton"`` or ``"transient-fallback"``.
    residual : float
        Scaled ``max |P(x) - x| / scale`` at the returned state [1].
    converged : bool
        ``residual`` below the tolerance.
    residual_history : tuple of float
        Scaled residual before each Newton step of the last Newton run [1].
    transient_cycles : int
        Cycles of transient simulated after the first Newton run failed
        (0 when it converged at once) [1].
    """

    state: np.ndarray
    period: float
    cycle: CycleData
    jacobian: np.ndarray
    multipliers: np.ndarray
    report: MultiplierReport
    iterations: int
    method: str
    residual: float
    converged: bool
    residual_history: tuple
    transient_cycles: int = 0


def _scaled(residual, scale) -> float:
    return float(np.max(np.abs(residual) / scale)) if residual.size else 0.0


def newton_picard_step(jacobian, residual, scale, threshold: float = 0.0) -> np.ndarray:
    """Newton step on the dominant subspace of the Poincaré map, fixed-point
    iteration on the rest (Newton-Picard).

    Parameters
    ----------
    jacobian : array_like, shape (n, n)
        Poincaré-map Jacobian ``DP`` [1].
    residual : array_like, shape (n,)
        ``P(x) - x`` [state units].
    scale : array_like, shape (n,)
        Typical magnitude of each component (the inner product of the
        subspace split is taken in scaled units) [state units].
    threshold : float, default 0
        Multipliers of modulus at least ``threshold`` span the Newton
        subspace; 0 gives the plain Newton step ``-(DP - I)^-1 (P(x) - x)``
        [1].

    Returns
    -------
    ndarray, shape (n,)
        Step to add to ``x`` [state units].

    Notes
    -----
    With the real Schur form ``DP = Z T Z^T`` ordered so that the first
    columns ``V`` of ``Z`` span the multipliers of modulus ``>= threshold``
    and ``W`` the rest, the step is ``V dp + W W^T r`` with
    ``(V^T DP V - I) dp = -V^T r - V^T DP W W^T r`` (Lust, Roose, Spence &
    Champneys 1998, eqs. 3.4-3.6).  Near the fixed point the error along
    ``W`` shrinks by the small multipliers each step and the error along
    ``V`` is removed, so the method converges even where the Jacobian's
    fast block is blurred by the event-location resolution of the engine;
    it needs no solve with the fast block at all.

    References
    ----------
    .. [1] K. Lust, D. Roose, A. Spence, A. R. Champneys, "An adaptive
       Newton-Picard algorithm with subspace iteration for computing
       periodic solutions", SIAM J. Scientific Computing 19(4), 1998,
       pp. 1188-1209.
    """
    from scipy.linalg import schur

    jacobian = np.asarray(jacobian, dtype=float)
    residual = np.asarray(residual, dtype=float)
    scale = np.asarray(scale, dtype=float)
    n = residual.size
    if threshold <= 0.0:
        return np.linalg.solve(jacobian - np.eye(n), -residual)
    scaled_jacobian = jacobian * scale[None, :] / scale[:, None]
    r = residual / scale
    limit = float(threshold) ** 2
    T, Z, dominant = schur(scaled_jacobian, output="real",
                           sort=lambda re, im: re * re + im * im >= limit)
    V, W = Z[:, :dominant], Z[:, dominant:]
    picard = W @ (W.T @ r)
    if dominant:
        reduced = V.T @ scaled_jacobian @ V - np.eye(dominant)
        newton = np.linalg.solve(reduced, -(V.T @ r) - V.T @ scaled_jacobian @ picard)
        step = V @ newton + picard
    else:
        step = picard
    return step * scale


def find_periodic_orbit(advance_cycle: Callable[[np.ndarray], CycleData], initial_state,
                        *, scale=None, tolerance: float = 1e-10, max_iterations: int = 12,
                        fallback_cycles: int = 5000, fixed=None,
                        multiplier_margin: float = 0.05,
                        picard_threshold: float = 0.0, transient=None,
                        transient_chunk: int = 100,
                        retry_newton: bool = True) -> PeriodicOrbit:
    """Fixed point of the Poincaré map by Newton's method, transient fall-back.

    Parameters
    ----------
    advance_cycle : callable
        ``x0 -> CycleData``: one cycle from a state just after the section
        event to the next section event.
    initial_state : array_like, shape (n,)
        Starting guess, e.g. the state at a turn-on after a warm-up
        transient [state units].
    scale : array_like, shape (n,), optional
        Typical magnitude of each state component, for the convergence test
        [state units].  Default: ``max(|x0|, 1e-6 max|x0|)``.
    tolerance : float, default 1e-10
        Convergence when ``max |P(x) - x| / scale`` and the scaled Newton step
        fall below it [1].
    max_iterations : int, default 12
        Newton iterations before falling back to the transient.
    fallback_cycles : int, default 5000
        Longest fall-back transient [cycles].
    fixed : array_like of bool, optional
        Components held fixed by the cycle map (excluded from the
        multipliers).
    multiplier_margin : float, default 0.05
        Margin for the bifurcation flags, see
        :func:`rcc.engine.floquet.classify_multipliers` [1].
    picard_threshold : float, default 0
        Multipliers of modulus below this are left to simple iteration
        (Newton-Picard, see :func:`newton_picard_step`); 0 gives Newton's
        method on every direction [1].
    transient : callable, optional
        ``(x, k) -> x_k``: the state at the ``k``-th section event from
        ``x``, by a fast simulation without sensitivities; the fall-back
        then runs ``transient_chunk`` cycles at a time between residual
        checks.  Default: iterate ``advance_cycle``.
    transient_chunk : int, default 100
        Cycles per fall-back chunk [1].
    retry_newton : bool, default True
        With ``transient``: try Newton again after chunks 1, 4, 16, ...,
        from the state the transient reached.

    Returns
    -------
    PeriodicOrbit

    Raises
    ------
    PeriodicSteadyStateError
        If the cycle map fails at the starting guess.

    Notes
    -----
    Newton step ``(DP - I) dx = -(P(x) - x)`` (Aprille & Trick 1972, eq. 12,
    with the Poincaré section replacing the fixed period); a step that makes
    the cycle map fail, the residual grow or the period jump by more than a
    factor of two (another branch of the map, e.g. a re-trigger of the
    turn-on) is halved up to four times.  When Newton does not converge, the
    map is iterated from the starting guess (a long transient), which
    converges whenever the orbit is stable; a warning says so.  With a fast
    ``transient``, Newton is tried again after chunks 1, 4, 16, ... (the switching
    map is only piecewise smooth: Newton converges once the event sequence
    of the iterate is that of the orbit).
    """
    x = np.asarray(initial_state, dtype=float).copy()
    if scale is None:
        scale = np.maximum(np.abs(x), 1e-6 * max(float(np.max(np.abs(x))), 1e-300))
    scale = np.asarray(scale, dtype=float)
    try:
        cycle = advance_cycle(x)
    except CycleError as error:
        raise PeriodicSteadyStateError(f"no switching cycle from the starting state: {error}") from None
    start, start_cycle = x.copy(), cycle

    def newton(x, cycle, limit):
        history, iterations = [], 0
        for _ in range(limit + 1):
            residual_vector = cycle.end_state - x
            residual = _scaled(residual_vector, scale)
            history.append(residual)
            if residual < tolerance:
                return True, x, cycle, iterations, history
            if iterations == limit:
                break
            try:
                jacobian = poincare_jacobian(cycle)
                step = newton_picard_step(jacobian, residual_vector, scale, picard_threshold)
            except (CycleError, np.linalg.LinAlgError, ValueError):
                break
            iterations += 1
            accepted = False
            fraction = 1.0
            for _halving in range(5):
                candidate = x + fraction * step
                try:
                    trial = advance_cycle(candidate)
                except CycleError:
                    fraction *= 0.5
                    continue
                same_branch = 0.5 * cycle.period < trial.period < 2.0 * cycle.period
                if same_branch and (_scaled(trial.end_state - candidate, scale)
                                    < max(residual, tolerance)):
                    accepted = True
                    break
                fraction *= 0.5
            if not accepted:
                break
            x, cycle = candidate, trial
            if _scaled(fraction * step, scale) < tolerance * 1e-2:
                residual = _scaled(cycle.end_state - x, scale)
                history.append(residual)
                return residual < max(tolerance, 1e3 * np.finfo(float).eps), x, cycle, \
                    iterations, history
        return False, x, cycle, iterations, history

    converged, x, cycle, iterations, history = newton(start, start_cycle, max_iterations)
    method = "newton"
    transient_cycles = 0
    if not converged:
        warnings.warn("Newton's method on the Poincaré map did not converge from the "
                      "starting state; continuing the transient", FallbackWarning, stacklevel=2)
        x, cycle = start, start_cycle
        chunks = 0
        while transient_cycles < fallback_cycles:
            x = cycle.end_state
            try:
                if transient is not None:
                    chunk = max(1, min(transient_chunk, fallback_cycles - transient_cycles - 1))
                    x = transient(x, chunk)
                    transient_cycles += chunk
                cycle = advance_cycle(x)
            except CycleError as error:
                raise PeriodicSteadyStateError(
                    f"the transient fall-back lost the oscillation: {error}") from None
            transient_cycles += 1
            residual = _scaled(cycle.end_state - x, scale)
            if residual < tolerance:
                converged, method, iterations = True, "transient-fallback", transient_cycles
                history.append(residual)
                break
            chunks += 1
            if transient is not None and retry_newton and chunks & (chunks - 1) == 0 \
                    and chunks.bit_length() % 2 == 1:  # chunks 1, 4, 16, 64, ...
                # closer now: Newton again, from the transient's state
                ok, x_n, cycle_n, it_n, hist_n = newton(x, cycle, max_iterations)
                if ok:
                    converged, x, cycle, iterations, history = ok, x_n, cycle_n, it_n, hist_n
                    break
        else:
            method, iterations = "transient-fallback", transient_cycles
    jacobian = poincare_jacobian(cycle)
    gradient = cycle.events[-1].gradient
    multipliers = section_multipliers(jacobian, gradient, fixed)
    report = classify_multipliers(multipliers, multiplier_margin)
    return PeriodicOrbit(
        state=x,
        period=float(cycle.period),
        cycle=cycle,
        jacobian=jacobian,
        multipliers=multipliers,
        report=report,
        iterations=iterations,
        method=method,
        residual=_scaled(cycle.end_state - x, scale),
        converged=converged,
        residual_history=tuple(history),
        transient_cycles=transient_cycles,
    )


# =====================================================================
# The circuit: periodic steady state of a design
# =====================================================================
#: Signals kept in the one-period waveform of a :class:`PeriodicSteadyState`.
WAVEFORM_SIGNALS = ("collector_voltage", "primary_current", "base_current",
                    "limiter_current", "feedback_voltage", "output_voltage")
#: Samples per period of the stored waveform (at least, events added) [1].
WAVEFORM_SAMPLES = 2000
#: Switching cycles of the warm-up transient before Newton's method [1].
WARMUP_CYCLES = 1000
#: Convergence tolerance on the scaled Poincaré-map residual [1]: the engine
#: locates switching instants to about 1e-15 s, so the map is smooth to
#: about 1e-12 of the state scale; 1e-9 leaves margin.
CIRCUIT_TOLERANCE = 1e-9
#: Multipliers below this modulus are left to simple iteration in the
#: circuit's solve [1]; 0: plain Newton, which measured best on the worked
#: cases (the Jacobian's fast block is accurate enough near the orbit).
PICARD_THRESHOLD = 0.5


@dataclass(frozen=True)
class CycleWaveform:
    """One period of the steady state, from turn-on to turn-on.

    Attributes
    ----------
    time : ndarray
        Time from the turn-on [s]; an event instant appears twice.
    collector_voltage : ndarray
        Collector (switch) voltage [V].
    primary_current : ndarray
        Primary (leakage-inductance) current [A].
    base_current : ndarray
        Switch base current [A].
    limiter_current : ndarray
        Limiter collector current [A].
    feedback_voltage : ndarray
        Feedback winding voltage [V].
    output_voltage : ndarray
        Output voltage at the load [V].
    """

    time: np.ndarray
    collector_voltage: np.ndarray
    primary_current: np.ndarray
    base_current: np.ndarray
    limiter_current: np.ndarray
    feedback_voltage: np.ndarray
    output_voltage: np.ndarray


@dataclass(frozen=True)
class PeriodicSteadyState:
    """The periodic steady state of the free-running supply at one operating point.

    Attributes
    ----------
    line_voltage : float
        RMS line voltage (AC input) or DC input voltage [V].
    bus_voltage : float
        DC bus voltage the cycle runs at (the bulk-capacitor valley for AC
        input) [V].
    load : Load
        The load.
    temperature : float
        Temperature of all devices [K].
    hfe : float
        Switch current gain at 25 degC [1].
    frequency : float
        Switching frequency ``1/period`` [Hz].
    period : float
        Time between turn-ons [s].
    on_time : float
        Turn-on to the end of collector conduction (storage included) [s].
    off_time : float
        ``period - on_time`` [s].
    peak_current : float
        Peak primary current over the cycle [A].
    output_voltage : float
        Mean output voltage at the load over the cycle [V].
    output_ripple : float
        Peak-to-peak output voltage over the cycle (ESR step included) [V].
    switch_peak_voltage : float
        Peak collector voltage (leakage spike and clamp included) [V].
    multipliers : tuple of complex
        Non-trivial Floquet multipliers, by decreasing modulus [1].
    stable : bool
        All multipliers inside the unit circle.
    flags : tuple of str
        Period doubling, quasi-periodic drift, weakly damped modes, method
        fall-back, non-convergence.
    iterations : int
        Newton iterations (or fall-back cycles) [1].
    method : str
        ``"newton"`` or ``"transient-fallback"``.
    converged : bool
        The scaled residual ``|P(x) - x|`` reached the tolerance.
    residual : float
        Scaled residual at the returned state [1].
    event_sequence : tuple of str
        ``device:new-state`` for every switching event in the cycle, the
        closing turn-on last.
    state : ndarray
        State at the turn-on (order of ``state_names``) [state units].
    state_names : tuple of str
        Names of the state variables.
    waveform : CycleWaveform
        One period of the main waveforms.
    jacobian : ndarray
        Poincaré-map Jacobian at ``state`` (saltation-based) [1, mixed units].
    turn_on_topology : int
        Engine topology code just after the turn-on (with ``state``, a
        restart point for :func:`poincare_map`).
    scale : ndarray
        Typical magnitude of each state variable used for the residual
        [state units].
    power : CyclePower
        Exact power balance of the cycle: bus input, load output and the
        loss in every element [W].
    """

    line_voltage: float
    bus_voltage: float
    load: Load
    temperature: float
    hfe: float
    frequency: float
    period: float
    on_time: float
    off_time: float
    peak_current: float
    output_voltage: float
    output_ripple: float
    switch_peak_voltage: float
    multipliers: tuple
    stable: bool
    flags: tuple
    iterations: int
    method: str
    converged: bool
    residual: float
    event_sequence: tuple
    state: np.ndarray
    state_names: tuple
    waveform: CycleWaveform
    jacobian: np.ndarray
    turn_on_topology: int
    scale: np.ndarray
    power: CyclePower

    def to_json(self) -> dict:
        """JSON-ready summary (SI units, temperature in degC, no NaN)."""
        from scipy.constants import zero_Celsius

        return {
            "line_v": self.line_voltage,
            "bus_v": self.bus_voltage,
            "load": self.load.text(),
            "temperature_c": self.temperature - zero_Celsius,
            "hfe": self.hfe,
            "frequency_hz": self.frequency,
            "period_s": self.period,
            "on_time_s": self.on_time,
            "off_time_s": self.off_time,
            "peak_current_a": self.peak_current,
            "output_v": self.output_voltage,
            "output_ripple_v": self.output_ripple,
            "switch_peak_v": self.switch_peak_voltage,
            "multipliers": [[float(m.real), float(m.imag)] for m in self.multipliers],
            "stable": bool(self.stable),
            "flags": list(self.flags),
            "method": self.method,
            "iterations": int(self.iterations),
            "converged": bool(self.converged),
            "residual": float(self.residual),
            "input_power_w": self.power.input,
            "output_power_w": self.power.output,
            "losses_w": dict(self.power.losses),
            "event_sequence": list(self.event_sequence),
            "state_at_turn_on": {name: float(v) for name, v in zip(self.state_names, self.state)},
        }


def parse_load(design, load, option: str = "load") -> Load:
    """A load from a :class:`rcc.design.Load`, a string with a unit or ``None``.

    Parameters
    ----------
    design : Design
        Supplies the default (``output.load_nominal``).
    load : Load, str or None
        ``"0.3 A"``, ``"40 ohm"``, ``"4 W"`` (a bare number is ambiguous and
        rejected).
    option : str
        Name used in error messages.

    Returns
    -------
    Load

    Raises
    ------
    ValueError
        Naming the option, the value and what was expected.
    """
    from rcc.design import parse_load as read_load

    if load is None:
        return design.output.load_nominal
    try:
        return read_load(load)
    except ValueError as error:
        raise ValueError(f"{option} {load!r}: {error}") from None


def _switch_state_names(circuit):
    return circuit.device_state_names[circuit.device_index("switch")]


def _event_label(circuit, event) -> str:
    device = circuit.device_names[event.device]
    state = circuit.decode(event.topology_after)[event.device]
    return f"{device}:{circuit.device_state_names[event.device][state]}"


def _is_turn_on(circuit, event) -> bool:
    switch = circuit.device_index("switch")
    if event.device != switch:
        return False
    names = _switch_state_names(circuit)
    before = names[circuit.decode(event.topology_before)[switch]]
    after = names[circuit.decode(event.topology_after)[switch]]
    return before in ("off", "breakdown") and after in ("active", "saturated")


def _engine_cycle_data(circuit, result) -> CycleData:
    """Convert the engine's cycle (:class:`rcc.engine.CycleResult`) to
    :class:`CycleData`, ending at the closing turn-on (events at the same
    instant after it only change the topology, not the state)."""
    from rcc.engine.floquet import CycleEvent, CycleSegment

    closing = None
    for k in range(len(result.events) - 1, -1, -1):
        if _is_turn_on(circuit, result.events[k]):
            closing = k
            break
    if closing is None:
        raise CycleError("the engine's cycle has no closing turn-on event")
    segments, events = [], []
    for segment, event in zip(result.segments[:closing + 1], result.events[:closing + 1]):
        label = _event_label(circuit, event)
        if events and segment.duration <= CHAIN_TIME:
            # a switch that follows another at the same instant is a
            # consequence of it (its guard was violated by the new
            # topology), not an independent crossing: the pair is one jump
            # from the first topology to the last, timed by the first guard
            previous = events[-1]
            events[-1] = CycleEvent(previous.label + "+" + label, previous.time,
                                    previous.field_before, event.field_after,
                                    previous.gradient)
            continue
        segments.append(CycleSegment(circuit.label(segment.topology), segment.duration,
                                     segment.transition))
        events.append(CycleEvent(label, event.time, event.field_before,
                                 event.field_after, event.guard_gradient))
    return CycleData(np.asarray(result.start_state, dtype=float),
                     np.asarray(result.events[closing].state, dtype=float),
                     float(result.events[closing].time), tuple(segments), tuple(events))


#: Events closer than this to the previous one form one chained switch [s].
CHAIN_TIME = 0.0


class _CircuitCycleMap:
    """Cycle map of the engine.  Each cycle starts in the topology just after
    the turn-on that closed the previous cycle (the states handed in are
    that cycle's end or points near it)."""

    def __init__(self, circuit, topology: int, max_time: float, state=None, scale=None,
                 reference_period: float = 0.0):
        self.reference = float(reference_period)
        self.circuit = circuit
        self.topology = int(topology)
        self.max_time = max_time
        self.last = None
        self.scale = None if scale is None else np.asarray(scale, dtype=float)
        self.known = [] if state is None else [(np.asarray(state, dtype=float), int(topology))]

    def _topology_for(self, state) -> int:
        """Topology after the turn-on of the known cycle end nearest to ``state``."""
        if not self.known:
            return self.topology
        scale = self.scale if self.scale is not None else np.maximum(
            np.abs(self.known[0][0]), 1e-12)
        distances = [float(np.max(np.abs(state - end) / scale)) for end, _ in self.known]
        return self.known[int(np.argmin(distances))][1]

    def __call__(self, state) -> CycleData:
        result = self.advance(state)
        return _engine_cycle_data(self.circuit, result)

    def prepare(self, state):
        """A clean restart point for the engine from a state at a turn-on:
        ``(state, topology, nudge time, nudge transition)``."""
        from rcc.engine import settle_topology

        state = np.array(state, dtype=float)
        names = self.circuit.state_names
        if "q_base" in names:
            # stored charge cannot be negative; a Newton step may leave a
            # rounding-level negative value at the turn-on, where it is ~0
            k = names.index("q_base")
            state[k] = max(state[k], 0.0)
        topology = settle_topology(self.circuit, state, self._topology_for(state), slopes=False)
        start, duration, transition = _nudge(self.circuit, state, topology)
        return start, topology, duration, transition

    def advance(self, state):
        """The engine's cycle from ``state``, a spurious re-trigger merged.

        A state exactly on the turn-on surface can be read by the engine as
        still off (the stored base charge a rounding error below zero); it
        then turns on again picoseconds later.  That sliver is joined to the
        following full cycle, so the map always spans one real period.
        """
        from rcc.engine import EngineError, advance_cycle

        state = np.array(state, dtype=float)
        try:
            start, topology, duration, transition = self.prepare(state)
            result = advance_cycle(self.circuit, start, topology, max_time=self.max_time)
            for _ in range(MAX_RETRIGGERS):
                if result.period >= max(RETRIGGER_TIME, RETRIGGER_FRACTION * self.reference):
                    break
                rest = advance_cycle(self.circuit, result.end_state, result.end_topology,
                                     max_time=self.max_time)
                result = _join_cycles(result, rest)
            else:
                raise CycleError(f"the switch re-triggers more than {MAX_RETRIGGERS} times "
                                 "after a turn-on")
            result = _prepend_nudge(result, state, duration, transition)
        except EngineError as error:
            raise CycleError(str(error)) from None
        self.last = result
        self.known.append((np.asarray(result.end_state, dtype=float), int(result.end_topology)))
        del self.known[:-64]
        return result


#: A turn-on sooner than this after the cycle start is a re-trigger of the
#: same turn-on (the switch drops out and turns on again at once), not a new
#: cycle: an absolute floor [s] and a fraction of the cycle period found by
#: the warm-up [1].  The section is then "a turn-on at least this long after
#: the previous one", still a transversal section of the flow.
RETRIGGER_TIME = 1e-9
RETRIGGER_FRACTION = 0.1
MAX_RETRIGGERS = 20


#: Time the state is carried along the flow after a turn-on before the engine
#: restarts from it [s]: a state exactly on the turn-on surface is ambiguous
#: for the engine's topology check (the stored base charge a rounding error
#: from zero), a state a nanosecond into the on-time is not.
NUDGE_TIME = 1e-9


def _nudge(circuit, state, topology):
    """Carry ``state`` along the flow of ``topology`` for up to NUDGE_TIME,
    staying inside the topology (no guard crossed).  Returns the new state,
    the time and the transition matrix."""
    from scipy.linalg import expm

    top = circuit.topology(topology)
    n = state.size
    augmented = np.zeros((n + 1, n + 1))
    augmented[:n, :n] = top.A
    augmented[:n, n] = top.b
    duration = NUDGE_TIME
    for _ in range(12):
        exponential = expm(augmented * duration)
        moved = exponential[:n, :n] @ state + exponential[:n, n]
        values = top.guard_gradients @ moved + top.guard_offsets
        if np.all(values > 0.0):
            return moved, duration, exponential[:n, :n]
        duration *= 0.25
    return state, 0.0, np.eye(n)


def _prepend_nudge(result, state, duration, transition):
    """The engine's cycle with the nudge segment put back in front."""
    from dataclasses import replace

    if duration == 0.0:
        return replace(result, start_state=np.asarray(state, dtype=float))
    first = result.segments[0]
    segments = (replace(first, start=0.0, duration=first.duration + duration,
                        start_state=np.asarray(state, dtype=float),
                        transition=first.transition @ transition),) + tuple(
        replace(segment, start=segment.start + duration) for segment in result.segments[1:])
    events = tuple(replace(event, time=event.time + duration) for event in result.events)
    return replace(result, start_state=np.asarray(state, dtype=float), period=result.period + duration,
                   segments=segments, events=events, monodromy=result.monodromy @ transition)


def _join_cycles(first, second):
    """One engine cycle result spanning two consecutive ones."""
    from dataclasses import replace

    shift = first.period
    segments = tuple(first.segments) + tuple(
        replace(segment, start=segment.start + shift) for segment in second.segments)
    events = tuple(first.events) + tuple(
        replace(event, time=event.time + shift) for event in second.events)
    return replace(second, start_state=first.start_state, start_topology=first.start_topology,
                   period=first.period + second.period, segments=segments, events=events,
                   monodromy=second.monodromy @ first.monodromy)


def _sample_cycle(circuit, state, cycle_result, samples: int):
    """Signals over one cycle: uniform samples in every segment plus its ends."""
    from scipy.linalg import expm

    period = float(cycle_result.period) if cycle_result.period > 0 else 1.0
    spacing = period / samples
    times, states, codes = [], [], []
    x = np.asarray(state, dtype=float)
    n = x.size
    for segment in cycle_result.segments:
        top = circuit.topology(segment.topology)
        x = np.asarray(segment.start_state, dtype=float)
        count = int(min(max(np.ceil(segment.duration / spacing), 8), 20 * samples))
        if segment.duration <= 0:
            count = 1
        augmented = np.zeros((n + 1, n + 1))
        augmented[:n, :n] = top.A
        augmented[:n, n] = top.b
        step = expm(augmented * (segment.duration / count)) if segment.duration > 0 else None
        local = [x]
        for _ in range(count if step is not None else 0):
            x = step[:n, :n] @ x + step[:n, n]
            local.append(x)
        local_times = segment.start + np.linspace(0.0, segment.duration, len(local))
        times.append(local_times)
        states.append(np.array(local))
        codes.append(np.full(len(local), segment.topology))
    times = np.concatenate(times)
    states = np.concatenate(states)
    codes = np.concatenate(codes)
    signals = {}
    for code in np.unique(codes):
        mask = codes == code
        values = circuit.topology(int(code)).signals(states[mask])
        for k, name in enumerate(_signal_names()):
            signals.setdefault(name, np.empty(len(codes)))[mask] = values[:, k]
    return times, states, codes, signals


def _signal_names():
    from rcc.engine import SIGNAL_NAMES

    return SIGNAL_NAMES


def _default_line(design, line_voltage):
    if line_voltage is None:
        return float(design.input.line_voltages[1])
    line_voltage = float(line_voltage)
    if not (np.isfinite(line_voltage) and line_voltage > 0):
        raise ValueError(f"line_voltage = {line_voltage!r}: expected a positive voltage [V]")
    return line_voltage


def _model_point(design, line, load, temperature, hfe):
    """The cycle model's operating point (bus voltage and warm-start values)."""
    from rcc.cycle import operating_points

    # one-element arrays: the vectorized model is exercised on arrays
    point = operating_points(design, np.atleast_1d(float(line)), load,
                             np.atleast_1d(float(temperature)), np.atleast_1d(float(hfe)))
    return point


def periodic_steady_state(design, line_voltage=None, load=None, temperature=None, hfe=None,
                          *, bus_voltage=None, warmup_cycles: int = WARMUP_CYCLES,
                          max_iterations: int = 12, fallback_cycles: int = 5000,
                          tolerance: float = CIRCUIT_TOLERANCE,
                          initial_state=None, initial_topology=None) -> PeriodicSteadyState:
    """Periodic steady state of a design's free-running oscillation.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float, optional
        RMS line voltage for AC input, DC input voltage otherwise [V];
        default the nominal line.
    load : Load or str, optional
        A :class:`rcc.design.Load` or a string with a unit (``"0.3 A"``,
        ``"40 ohm"``, ``"4 W"``); default ``output.load_nominal``.
    temperature : float, optional
        Temperature of all devices [K]; default 25 degC clipped into the
        design's range.
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.
    bus_voltage : float, optional
        DC bus voltage [V]; default: the DC input, or for AC input the
        bulk-capacitor valley at the cycle model's input power
        (:func:`rcc.mains.bus_voltage`), the operating point the cycle
        model describes.
    warmup_cycles : int
        Switching cycles of the warm-up transient [1].
    max_iterations : int
        Newton iterations before the transient fall-back [1].
    fallback_cycles : int
        Longest fall-back transient [cycles].
    tolerance : float
        Scaled residual of the Poincaré map at convergence [1].
    initial_state, initial_topology : optional
        Start Newton from this state at a turn-on (and the topology code
        just after it) instead of a warm-up transient; for continuation
        over neighbouring operating points.

    Returns
    -------
    PeriodicSteadyState

    Raises
    ------
    PeriodicSteadyStateError
        If the circuit does not oscillate (no turn-on in the warm-up), or
        the engine fails.
    ValueError
        On a bad line voltage or load.

    Notes
    -----
    Warm start: every capacitor starts discharged except the output and
    regulation filter capacitors, which start at the cycle model's output
    voltage and the matching rectified feedback-winding voltage
    (``notes/circuit.md``); the circuit then runs ``warmup_cycles``
    switching cycles from power-on, so Newton starts inside the basin of
    the steady state.  Newton's method on the Poincaré map at the turn-on
    event (Aprille & Trick 1972) then converges quadratically; see
    :func:`find_periodic_orbit`.  The bus is held constant (DC), so for AC
    input the line ripple is not in the cycle.

    The engine's cycle data is adapted before the saltation product:
    switches chained at one instant are merged into one jump timed by the
    first guard, a state on the turn-on surface is carried 1 ns along the
    on-topology's flow before the engine restarts from it, and a re-trigger
    (a turn-on within 10 % of the previous period) is joined to the cycle;
    see ``notes/periodic_steady_state.md``.
    """
    try:
        return _periodic_steady_state(
            design, line_voltage, load, temperature, hfe, bus_voltage=bus_voltage,
            warmup_cycles=warmup_cycles, max_iterations=max_iterations,
            fallback_cycles=fallback_cycles, tolerance=tolerance,
            initial_state=initial_state, initial_topology=initial_topology)
    except (CycleError, EngineError) as error:
        # numerical trouble inside the engine is a clear error, never a traceback
        raise PeriodicSteadyStateError(
            f"the engine stopped: {error}") from error


def _periodic_steady_state(design, line_voltage=None, load=None, temperature=None, hfe=None,
                           *, bus_voltage=None, warmup_cycles: int = WARMUP_CYCLES,
                           max_iterations: int = 12, fallback_cycles: int = 5000,
                           tolerance: float = CIRCUIT_TOLERANCE,
                           initial_state=None, initial_topology=None) -> PeriodicSteadyState:
    from rcc.cycle import reference_temperature
    from rcc.engine import (EngineError, build_circuit, power_on_state,
                            simulate)

    line = _default_line(design, line_voltage)
    load = parse_load(design, load)
    if temperature is None:
        temperature = reference_temperature(design)
    hfe_value = design.switch.hfe_typ if hfe is None else float(hfe)
    point = _model_point(design, line, load, temperature, hfe_value)
    if bus_voltage is None:
        # the bus the cycle model computed this point at (the bulk valley for
        # AC input), so that the two models are compared on the same bus
        bus_voltage = float(np.ravel(point.bus_voltage)[0])
    circuit = build_circuit(design, float(bus_voltage), load, float(temperature), hfe_value)
    names = circuit.state_names

    try:
        if initial_state is None:
            x = power_on_state(circuit)
            if bool(np.ravel(point.running)[0]):
                vo = float(np.ravel(point.output_voltage)[0])
                x[names.index("v_output_capacitor")] = vo
                if "v_aux" in names:
                    from rcc.limiter import auxiliary_voltage

                    tr = design.transformer
                    x[names.index("v_aux")] = max(0.0, float(auxiliary_voltage(
                        vo, design.output.rectifier_drop, tr.feedback_turns, tr.output_turns,
                        design.regulation.rectifier_drop)))
            horizon = 0.2 + 1e-3 * warmup_cycles
            warm = simulate(circuit, x, horizon, record=False, stop_on_turn_on=warmup_cycles)
            if not warm.stopped:
                raise PeriodicSteadyStateError(
                    f"the circuit did not reach {warmup_cycles} switching cycles in "
                    f"{horizon:g} s from power-on at bus {bus_voltage:.4g} V, load "
                    f"{load.text()}: it does not oscillate there")
            x, topology, warm_time = warm.final_state, warm.final_topology, warm.final_time
        else:
            x = np.asarray(initial_state, dtype=float)
            topology = int(initial_topology)
            warm_time = None
        first = _CircuitCycleMap(circuit, topology, 0.1).advance(x)
    except (EngineError, CycleError) as error:
        raise PeriodicSteadyStateError(f"the engine failed during the warm-up: {error}") from None
    max_time = max(0.02, 100.0 * first.period)
    _, sample_states, _, _ = _sample_cycle(circuit, x, first, 200)
    scale = np.max(np.abs(sample_states), axis=0)
    scale = np.maximum(scale, 1e-9 * np.maximum(scale, 1e-300) + 1e-300)
    for k, name in enumerate(names):
        if name.startswith("v_"):
            scale[k] = max(scale[k], 1e-3)
        elif name.startswith("i_"):
            scale[k] = max(scale[k], 1e-6)
    del warm_time
    cycle_map = _CircuitCycleMap(circuit, topology, max_time, state=x, scale=scale,
                                 reference_period=first.period)

    def transient(state, cycles):
        try:
            start, top, _, _ = cycle_map.prepare(state)
            run = simulate(circuit, start, max_time * cycles, record=False, topology=top,
                           stop_on_turn_on=cycles)
        except EngineError as error:
            raise CycleError(str(error)) from None
        if not run.stopped:
            raise CycleError(f"fewer than {cycles} turn-ons in {max_time * cycles:g} s")
        cycle_map.known.append((run.final_state.copy(), int(run.final_topology)))
        return run.final_state
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FallbackWarning)
        orbit = find_periodic_orbit(cycle_map, x, scale=scale, tolerance=tolerance,
                                    max_iterations=max_iterations,
                                    fallback_cycles=fallback_cycles,
                                    picard_threshold=PICARD_THRESHOLD,
                                    transient=transient)
    flags = list(orbit.report.flags)
    if orbit.method != "newton":
        flags.append("Newton's method did not converge: result of a long transient")
    elif orbit.transient_cycles:
        flags.append(f"Newton converged after {orbit.transient_cycles} more transient cycles")
    if not orbit.converged:
        flags.append(f"not converged: scaled residual {orbit.residual:.3g} after "
                     f"{orbit.iterations} cycles (the oscillation may not be periodic); "
                     "the multipliers are those of the last cycle, not of an orbit")
        pattern = _switching_pattern(circuit, cycle_map, orbit.state)
        if pattern:
            flags.append(pattern)
    del caught
    # the cycle at the solution, with its full event list, for the figures
    try:
        final = cycle_map.advance(orbit.state)
    except CycleError as error:
        raise PeriodicSteadyStateError(f"the engine failed on the final cycle: {error}") from None
    return _summarise(design, circuit, line, float(bus_voltage), load, float(temperature),
                      hfe_value, orbit, final, tuple(flags), cycle_map._topology_for(orbit.state),
                      scale)


#: Cycles observed to describe a switching pattern that is not period-1 [1].
PATTERN_CYCLES = 400


def _switching_pattern(circuit, cycle_map, state) -> str:
    """Describe the switching when no period-1 orbit is found: the spread of
    the turn-on intervals over PATTERN_CYCLES cycles (bursts, period-k,
    irregular).  Empty if the engine cannot run."""
    from rcc.engine import EngineError, simulate

    try:
        start, topology, _, _ = cycle_map.prepare(state)
        run = simulate(circuit, start, cycle_map.max_time * PATTERN_CYCLES, record=False,
                       topology=topology, stop_on_turn_on=PATTERN_CYCLES)
    except (EngineError, CycleError):
        return ""
    switch = circuit.device_index("switch")
    names = circuit.device_state_names[switch]
    turn_ons = [t for t, before, after, device in zip(run.event_times, run.event_from,
                                                      run.event_to, run.event_devices)
                if device == switch
                and names[circuit.decode(before)[switch]] in ("off", "breakdown")
                and names[circuit.decode(after)[switch]] in ("active", "saturated")]
    if len(turn_ons) < 3:
        return ""
    intervals = np.diff(turn_ons)
    short, long = float(np.min(intervals)), float(np.max(intervals))
    text = (f"switching pattern over {len(intervals)} cycles: turn-on intervals "
            f"{short * 1e6:.4g} to {long * 1e6:.4g} us")
    if long > 5.0 * np.median(intervals):
        text += " (bursts: long pauses between groups of cycles, hiccup or burst mode)"
    elif len(intervals) >= 4 and np.allclose(intervals[2::2], intervals[:-2:2][:len(intervals[2::2])],
                                             rtol=1e-3) and long > 1.01 * short:
        text += " (period two: alternating intervals)"
    else:
        text += " (irregular)"
    return text


def _summarise(design, circuit, line, bus, load, temperature, hfe, orbit, final, flags,
               topology, scale):
    times, states, codes, signals = _sample_cycle(circuit, orbit.state, final, WAVEFORM_SAMPLES)
    closing = orbit.cycle.period
    keep = times <= closing
    times = times[keep]
    signals = {name: values[keep] for name, values in signals.items()}
    switch = circuit.device_index("switch")
    switch_names = _switch_state_names(circuit)
    on_time = closing
    for event in final.events:
        state = switch_names[circuit.decode(event.topology_after)[switch]]
        if event.device == switch and state in ("off", "breakdown"):
            on_time = float(event.time)
            break
    output = signals["output_voltage"]
    # time average of the output voltage (trapezoidal rule over the samples)
    mean_output = float(np.trapezoid(output, times) / closing) if closing > 0 else float(output[0])
    waveform = CycleWaveform(time=times, **{name: signals[name] for name in WAVEFORM_SIGNALS})
    return PeriodicSteadyState(
        line_voltage=line,
        bus_voltage=bus,
        load=load,
        temperature=temperature,
        hfe=hfe,
        frequency=1.0 / closing,
        period=closing,
        on_time=on_time,
        off_time=closing - on_time,
        peak_current=float(np.max(signals["primary_current"])),
        output_voltage=mean_output,
        output_ripple=float(np.max(output) - np.min(output)),
        switch_peak_voltage=float(np.max(signals["collector_voltage"])),
        multipliers=tuple(complex(m) for m in orbit.multipliers),
        stable=bool(orbit.report.stable and orbit.converged),
        flags=flags,
        iterations=int(orbit.iterations),
        method=orbit.method,
        converged=bool(orbit.converged),
        residual=float(orbit.residual),
        event_sequence=orbit.cycle.event_sequence,
        state=np.asarray(orbit.state, dtype=float),
        state_names=tuple(circuit.state_names),
        waveform=waveform,
        jacobian=np.asarray(orbit.jacobian, dtype=float),
        turn_on_topology=int(topology),
        scale=np.asarray(scale, dtype=float),
        power=cycle_power(circuit, final),
    )


def plot_periodic_steady_state(result: PeriodicSteadyState, axes=None):
    """Stacked plots of one steady-state period.

    Parameters
    ----------
    result : PeriodicSteadyState
    axes : sequence of 6 matplotlib Axes, optional
        Where to draw; default a new figure with six stacked axes.

    Returns
    -------
    list of matplotlib Axes
        Collector voltage [V], primary current [A], base current [A],
        limiter current [A], feedback winding voltage [V] and output voltage
        [V] against time in [us].
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    wave = result.waveform
    panels = (("collector_voltage", "collector [V]", 1.0),
              ("primary_current", "primary [mA]", 1e3),
              ("base_current", "base [mA]", 1e3),
              ("limiter_current", "limiter [mA]", 1e3),
              ("feedback_voltage", "feedback [V]", 1.0),
              ("output_voltage", "output [V]", 1.0))
    if axes is None:
        figure, axes = plt.subplots(len(panels), 1, sharex=True, figsize=(8, 10))
    axes = list(axes)
    time_us = wave.time * 1e6
    for ax, (name, label, factor) in zip(axes, panels):
        ax.plot(time_us, getattr(wave, name) * factor, linewidth=0.9)
        ax.set_ylabel(label)
        ax.grid(True, alpha=0.3)
    axes[-1].set_xlabel("time from turn-on [us]")
    status = "stable" if result.stable else "UNSTABLE"
    axes[0].set_title(
        f"periodic steady state: {result.frequency / 1e3:.4g} kHz, "
        f"{result.output_voltage:.4g} V out, bus {result.bus_voltage:.4g} V, "
        f"load {result.load.text()} ({result.method}, {status})", fontsize=9)
    axes[0].figure.tight_layout()
    return axes


# ------------------------------------------------------------ verification
@dataclass(frozen=True)
class VerifiedPoint:
    """One operating point by the cycle model and by the periodic steady state.

    Attributes
    ----------
    line_voltage : float
        RMS line (AC input) or DC input voltage [V].
    load : Load
        The load.
    temperature : float
        Temperature [K].
    model_frequency, model_output_voltage, model_peak_current : float
        Cycle model (:func:`rcc.cycle.operating_points`) [Hz], [V], [A].
    model_mode : str
        Cycle model's conduction mode.
    steady_state : PeriodicSteadyState or None
        The engine's periodic steady state; ``None`` if there is none.
    error : str
        Why there is no steady state (empty otherwise).
    frequency_difference, output_voltage_difference, peak_current_difference : float
        ``engine / model - 1``; 0 where either is missing [1].
    event_sequence_changed : bool
        The event sequence differs from the previous point of the list
        (same temperature and line): a change of operating regime between
        neighbouring points.
    """

    line_voltage: float
    load: Load
    temperature: float
    model_frequency: float
    model_output_voltage: float
    model_peak_current: float
    model_mode: str
    steady_state: PeriodicSteadyState | None
    error: str
    frequency_difference: float
    output_voltage_difference: float
    peak_current_difference: float
    event_sequence_changed: bool

    def to_json(self) -> dict:
        """JSON-ready summary (no NaN)."""
        from scipy.constants import zero_Celsius

        data = {
            "line_v": self.line_voltage, "load": self.load.text(),
            "temperature_c": self.temperature - zero_Celsius,
            "model": {"frequency_hz": self.model_frequency,
                      "output_v": self.model_output_voltage,
                      "peak_current_a": self.model_peak_current, "mode": self.model_mode},
            "difference": {"frequency": self.frequency_difference,
                           "output_v": self.output_voltage_difference,
                           "peak_current": self.peak_current_difference},
            "event_sequence_changed": self.event_sequence_changed,
            "error": self.error,
        }
        if self.steady_state is not None:
            summary = self.steady_state.to_json()
            summary.pop("state_at_turn_on", None)
            data["steady_state"] = summary
        return data


def _relative(engine: float, model: float) -> float:
    return engine / model - 1.0 if model != 0.0 else 0.0


def verify_operating_points(design, line_voltages, loads, temperatures=None, hfe=None):
    """The cycle model's operating points checked by the periodic steady state.

    Parameters
    ----------
    design : Design
        The design.
    line_voltages : float or sequence of float
        RMS line (AC input) or DC input voltages [V].
    loads : Load, str or sequence of them
        Loads (a :class:`rcc.design.Load` whose value may be an array is
        expanded).
    temperatures : float or sequence of float, optional
        Temperatures [K]; default 25 degC clipped into the design's range.
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.

    Returns
    -------
    list of VerifiedPoint
        One per (temperature, line, load) combination, in that nesting
        order.

    Notes
    -----
    Each point is solved independently (warm-up from power-on), so one
    failure does not spoil the next; a point without a periodic steady state
    (no oscillation, bursts) carries ``error`` instead of numbers.
    """
    from rcc.cycle import operating_points, reference_temperature

    lines = np.atleast_1d(np.asarray(line_voltages, dtype=float))
    if temperatures is None:
        temperatures = [reference_temperature(design)]
    temps = np.atleast_1d(np.asarray(temperatures, dtype=float))
    if isinstance(loads, Load):
        values = np.atleast_1d(np.asarray(loads.value, dtype=float))
        load_list = [Load(loads.kind, float(v)) for v in values]
    elif isinstance(loads, str):
        load_list = [parse_load(design, loads)]
    else:
        load_list = [parse_load(design, item) for item in loads]
    gain = design.switch.hfe_typ if hfe is None else float(hfe)
    points = []
    for temperature in temps:
        for line in lines:
            previous = None
            for load in load_list:
                model = operating_points(design, np.atleast_1d(line), load,
                                         np.atleast_1d(temperature), np.atleast_1d(gain))
                mf, mv, mi = (float(np.ravel(getattr(model, name))[0]) for name in
                              ("frequency", "output_voltage", "peak_current"))
                mode = str(np.ravel(model.mode)[0])
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore", FallbackWarning)
                        result = periodic_steady_state(design, float(line), load,
                                                       float(temperature), gain)
                    error = ""
                except PeriodicSteadyStateError as failure:
                    result, error = None, str(failure)
                changed = (result is not None and previous is not None
                           and result.event_sequence != previous)
                if result is not None:
                    previous = result.event_sequence
                    diffs = (_relative(result.frequency, mf),
                             _relative(result.output_voltage, mv),
                             _relative(result.peak_current, mi))
                else:
                    diffs = (0.0, 0.0, 0.0)
                points.append(VerifiedPoint(float(line), load, float(temperature), mf, mv, mi,
                                            mode, result, error, *diffs, bool(changed)))
    return points


def benchmark_iterations(design=None) -> dict:
    """Newton iterations of the periodic-steady-state solve, for the benchmark.

    Parameters
    ----------
    design : Design or path, optional
        Default: the worked case ``worked_cases/legacy_24v_substitute.toml``
        at nominal line and full load.

    Returns
    -------
    dict
        ``iterations`` (Newton iterations after the warm-up) [1],
        ``warmup_cycles`` [1], ``transient_cycles`` (extra cycles before
        Newton converged) [1], ``method``, ``converged``, ``seconds`` (wall
        time of the whole solve) [s].
    """
    import time
    from pathlib import Path

    from rcc.design import load_design

    if design is None:
        design = Path(__file__).resolve().parents[2] / "worked_cases" / \
            "legacy_24v_substitute.toml"
    if not hasattr(design, "switch"):
        design = load_design(design)
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FallbackWarning)
        result = periodic_steady_state(design, load=design.output.load_max)
    seconds = time.perf_counter() - start
    extra = 0
    for flag in result.flags:
        if flag.startswith("Newton converged after"):
            extra = int(flag.split()[3])
    return {"iterations": result.iterations, "warmup_cycles": WARMUP_CYCLES,
            "transient_cycles": extra, "method": result.method,
            "converged": result.converged, "seconds": seconds}


def poincare_map(design, result: PeriodicSteadyState):
    """The engine's turn-on return map at the operating point of ``result``.

    Parameters
    ----------
    design : Design
        The design ``result`` was computed for.
    result : PeriodicSteadyState

    Returns
    -------
    callable
        ``x -> CycleData``: one cycle from a state at a turn-on near
        ``result.state`` to the next turn-on (``.end_state`` is ``P(x)``).
    """
    from rcc.engine import build_circuit

    circuit = build_circuit(design, result.bus_voltage, result.load, result.temperature,
                            result.hfe)
    return _CircuitCycleMap(circuit, result.turn_on_topology, max(0.02, 100.0 * result.period),
                            state=result.state, scale=result.scale,
                            reference_period=result.period)
