"""Cycle sensitivities of switched piecewise-affine systems: saltation
matrices, monodromy, Poincaré-map Jacobian and Floquet multipliers.

The periodic-steady-state solver (:mod:`rcc.engine.shooting`) sees one switching
cycle through a small, engine-independent description, :class:`CycleData`:
the smooth segments (their state-transition matrices) and the switching
events between them (time, vector fields before and after, gradient of the
event function, optional state reset).  Any simulator that can report that
data, the time-domain engine of :mod:`rcc.engine` or the small reference
:class:`PiecewiseAffineSystem` below, can be put through Newton's method on
its Poincaré map.

Notes
-----
Across a transversal switching event where the state is reset by
``x+ = R(x-)`` and the event surface is ``h(x) = 0``, the first-order
variation of the state is mapped by the *saltation matrix*

    S = R_x + (f+ - R_x f-) (grad h)^T / ((grad h)^T f-)

(di Bernardo, Budd, Champneys & Kowalczyk 2008, eq. 2.49 and sec. 2.5;
Aizerman & Gantmakher 1958).  With ``R = identity`` it reduces to
``S = I + (f+ - f-) (grad h)^T / ((grad h)^T f-)``.  For a segment of an
affine system ``x' = A x + b`` of duration ``tau`` the state-transition
matrix is ``exp(A tau)``.  The monodromy of a cycle is the ordered product
``S_N Phi_N ... S_1 Phi_1`` (El Aroudi, Giaouris, Iu, Hiskens 2015, eq. 9).

Taking the Poincaré section at the event that closes the cycle (the
turn-on event of the switch), the Jacobian of the return map is the
monodromy without the final saltation, projected along the flow onto the
section:

    DP = (I - f- (grad h)^T / ((grad h)^T f-)) Phi_N S_{N-1} ... Phi_1

(Parker & Chua, *Practical Numerical Algorithms for Chaotic Systems*, 1989,
sec. 3.3).  ``(grad h)^T DP = 0``: the direction across the section is
mapped to zero, which replaces the trivial multiplier 1 of the flow; the
remaining ``n - 1`` eigenvalues are the non-trivial Floquet multipliers.

References
----------
.. [1] M. di Bernardo, C. J. Budd, A. R. Champneys, P. Kowalczyk,
   *Piecewise-smooth Dynamical Systems: Theory and Applications*,
   Springer, 2008, ch. 2.
.. [2] A. El Aroudi, D. Giaouris, H. H.-C. Iu, I. A. Hiskens, "A review on
   stability analysis methods for switching mode power converters",
   IEEE J. Emerging and Selected Topics in Circuits and Systems 5(3),
   2015, pp. 302-315.
.. [3] T. S. Parker, L. O. Chua, *Practical Numerical Algorithms for
   Chaotic Systems*, Springer, 1989.
.. [4] C. F. Van Loan, "Computing integrals involving the matrix
   exponential", IEEE Trans. Automatic Control 23(3), 1978, pp. 395-404.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy.linalg import expm, null_space

__all__ = [
    "CycleSegment",
    "CycleEvent",
    "CycleData",
    "CycleError",
    "saltation_matrix",
    "monodromy",
    "poincare_jacobian",
    "section_multipliers",
    "MultiplierReport",
    "classify_multipliers",
    "finite_difference_jacobian",
    "Guard",
    "AffineMode",
    "PiecewiseAffineSystem",
]


class CycleError(RuntimeError):
    """A switching cycle could not be completed (no closing event, too many
    events, or a non-transversal crossing)."""


# --------------------------------------------------------------- cycle data
@dataclass(frozen=True)
class CycleSegment:
    """One smooth piece of a switching cycle.

    Attributes
    ----------
    label : str
        Name of the topology (mode) in force.
    duration : float
        Length of the segment [s].
    transition : ndarray, shape (n, n)
        State-transition matrix ``d x(end) / d x(start)`` at fixed duration
        (``exp(A duration)`` for an affine segment) [1, mixed units].
    """

    label: str
    duration: float
    transition: np.ndarray


@dataclass(frozen=True)
class CycleEvent:
    """A switching event that ends a segment.

    Attributes
    ----------
    label : str
        Name of the event (e.g. ``"turn-off"``).
    time : float
        Time of the event from the start of the cycle [s].
    field_before, field_after : ndarray, shape (n,)
        Vector field just before and just after the event [state units/s].
    gradient : ndarray, shape (n,)
        Gradient of the event function ``h`` (event at ``h = 0``)
        [1/state units].
    reset_jacobian : ndarray, shape (n, n) or None
        Jacobian of the state reset at the event; ``None`` for a continuous
        state (identity) [1].
    """

    label: str
    time: float
    field_before: np.ndarray
    field_after: np.ndarray
    gradient: np.ndarray
    reset_jacobian: np.ndarray | None = None


@dataclass(frozen=True)
class CycleData:
    """One switching cycle from a section event to the next.

    ``len(events) == len(segments)``: event ``k`` ends segment ``k``; the
    last event is the section event that closes the cycle.

    Attributes
    ----------
    start_state : ndarray, shape (n,)
        State at the start of the cycle [state units].
    end_state : ndarray, shape (n,)
        State at the closing section event [state units].
    period : float
        Time from start to the closing event [s].
    segments : tuple of CycleSegment
    events : tuple of CycleEvent
    """

    start_state: np.ndarray
    end_state: np.ndarray
    period: float
    segments: tuple
    events: tuple

    @property
    def event_sequence(self) -> tuple[str, ...]:
        """Labels of the events in order (the last one closes the cycle)."""
        return tuple(event.label for event in self.events)


#: Relative jump of the vector field below which an event is taken as a
#: crossing of a continuous field (no saltation, even when grazing): a genuine
#: switch changes the field by order one, the breakpoint between two chords
#: of a junction law only by the rounding of the nodal solution and the
#: crossing tolerance
CONTINUOUS_FIELD = 1e-6


# ------------------------------------------------------------- sensitivities
def saltation_matrix(field_before, field_after, gradient, reset_jacobian=None):
    """Saltation matrix of a transversal switching event.

    Parameters
    ----------
    field_before, field_after : array_like, shape (n,)
        Vector field just before and just after the event [state units/s].
    gradient : array_like, shape (n,)
        Gradient of the event function [1/state units].
    reset_jacobian : array_like, shape (n, n), optional
        Jacobian of the state reset; identity if omitted [1].

    Returns
    -------
    ndarray, shape (n, n)
        ``S = R + (f+ - R f-) grad^T / (grad^T f-)`` [1].

    Raises
    ------
    CycleError
        If the crossing is not transversal (``grad^T f- = 0``).

    Notes
    -----
    Eq. 2.49 in di Bernardo et al. (2008); see the module notes.
    """
    before = np.asarray(field_before, dtype=float)
    after = np.asarray(field_after, dtype=float)
    normal = np.asarray(gradient, dtype=float)
    n = before.size
    reset = np.eye(n) if reset_jacobian is None else np.asarray(reset_jacobian, dtype=float)
    speed = float(normal @ before)
    scale = float(np.linalg.norm(normal) * np.linalg.norm(before))
    jump = after - reset @ before
    if scale == 0.0 or abs(speed) <= 1e-12 * scale:
        if np.linalg.norm(jump) <= CONTINUOUS_FIELD * np.linalg.norm(before):
            # the field is continuous across the surface (a breakpoint
            # between two chords of one junction law, where both chords give
            # the same currents): the flow crosses it without a jump, so
            # the saltation is the reset alone however flat the crossing
            return reset
        raise CycleError("grazing switching event: the flow is tangent to the "
                         "switching surface, the saltation matrix is undefined")
    return reset + np.outer(jump, normal) / speed


def monodromy(cycle: CycleData, include_section: bool = True) -> np.ndarray:
    """Monodromy matrix of one cycle from segment transitions and saltations.

    Parameters
    ----------
    cycle : CycleData
    include_section : bool, default True
        Apply the saltation matrix of the closing (section) event too; the
        full monodromy then has the trivial multiplier 1 along the flow.

    Returns
    -------
    ndarray, shape (n, n)
        ``S_N Phi_N ... S_1 Phi_1`` [1].

    Notes
    -----
    Eq. 9 in El Aroudi et al. (2015).
    """
    n = np.asarray(cycle.start_state).size
    product = np.eye(n)
    last = len(cycle.segments) - 1
    for k, (segment, event) in enumerate(zip(cycle.segments, cycle.events)):
        product = np.asarray(segment.transition, dtype=float) @ product
        if k < last or include_section:
            product = saltation_matrix(event.field_before, event.field_after,
                                       event.gradient, event.reset_jacobian) @ product
    return product


def poincare_jacobian(cycle: CycleData) -> np.ndarray:
    """Jacobian of the return map to the section at the closing event.

    Parameters
    ----------
    cycle : CycleData

    Returns
    -------
    ndarray, shape (n, n)
        ``DP = (I - f- grad^T / (grad^T f-)) M`` with ``M`` the monodromy up
        to (not including) the closing event [1].

    Notes
    -----
    The time of return depends on the initial state; its derivative
    ``-grad^T M / (grad^T f-)`` gives the projection (Parker & Chua 1989,
    sec. 3.3).
    """
    before = monodromy(cycle, include_section=False)
    closing = cycle.events[-1]
    f_minus = np.asarray(closing.field_before, dtype=float)
    normal = np.asarray(closing.gradient, dtype=float)
    speed = float(normal @ f_minus)
    if speed == 0.0:
        raise CycleError("grazing section event")
    projection = np.eye(f_minus.size) - np.outer(f_minus, normal) / speed
    return projection @ before


def section_multipliers(jacobian, gradient, fixed=None) -> np.ndarray:
    """Non-trivial Floquet multipliers from the Poincaré-map Jacobian.

    Parameters
    ----------
    jacobian : array_like, shape (n, n)
        Poincaré-map Jacobian ``DP`` with ``grad^T DP = 0`` [1].
    gradient : array_like, shape (n,)
        Gradient of the section's event function [1/state units].
    fixed : array_like of bool, shape (n,), optional
        State components that the cycle map holds fixed by construction
        (left out of the multipliers).

    Returns
    -------
    ndarray of complex, shape (n - 1 - fixed,)
        Multipliers sorted by decreasing modulus [1].

    Notes
    -----
    ``DP`` maps the tangent space of the section ``T = {v : grad^T v = 0}``
    into itself; with an orthonormal basis ``Q`` of ``T`` the restriction is
    ``Q^T DP Q`` and its eigenvalues are the multipliers that remain after
    the trivial one along the flow is removed.
    """
    jacobian = np.asarray(jacobian, dtype=float)
    normal = np.asarray(gradient, dtype=float)[None, :]
    if fixed is not None:
        keep = ~np.asarray(fixed, dtype=bool)
        jacobian = jacobian[np.ix_(keep, keep)]
        normal = normal[:, keep]
    basis = null_space(normal)
    if basis.shape[1] == 0:
        return np.zeros(0, dtype=complex)
    reduced = basis.T @ jacobian @ basis
    values = np.linalg.eigvals(reduced).astype(complex)
    return values[np.argsort(-np.abs(values), kind="stable")]


@dataclass(frozen=True)
class MultiplierReport:
    """What the Floquet multipliers say about the cycle.

    Attributes
    ----------
    stable : bool
        All multipliers inside the unit circle.
    largest_modulus : float
        Largest ``|multiplier|`` [1].
    period_doubling : bool
        A real multiplier near -1 (within ``margin``): the cycle is close to
        (or past) a period-doubling (flip) bifurcation.
    quasi_periodic : bool
        A complex pair near the unit circle: close to a Neimark-Sacker
        bifurcation, slow quasi-periodic drift of the cycle.
    saddle_node : bool
        A real multiplier near +1: the cycle is weakly damped along one
        direction (slow regulation or output mode, or a fold).
    flags : tuple of str
        Short texts for the report.
    """

    stable: bool
    largest_modulus: float
    period_doubling: bool
    quasi_periodic: bool
    saddle_node: bool
    flags: tuple = field(default_factory=tuple)


def classify_multipliers(multipliers, margin: float = 0.05) -> MultiplierReport:
    """Classify Floquet multipliers: stability and nearby bifurcations.

    Parameters
    ----------
    multipliers : array_like of complex
        Non-trivial multipliers [1].
    margin : float, default 0.05
        Closeness that raises a flag [1]: a real multiplier within
        ``margin`` of -1 (flip); a complex pair ``r exp(+-i theta)`` whose
        mode keeps more than ``1 - margin`` of its amplitude over one of its
        own oscillations, ``r^(2 pi/theta) > 1 - margin`` (a lightly damped
        slow drift around the cycle); a real multiplier within
        ``margin / 100`` of +1 (a weakly damped mode).

    Returns
    -------
    MultiplierReport

    Notes
    -----
    The three codimension-one bifurcations of a cycle: a multiplier leaving
    the unit circle through -1 (period doubling), through +1 (fold) or as a
    complex pair (Neimark-Sacker, quasi-periodic motion); Kuznetsov,
    *Elements of Applied Bifurcation Theory*, 3rd ed., 2004, sec. 4.5 and
    5.4.  A slow complex pair close to 1 is normal in a supply (the output
    filter with the regulation loop); it is flagged only when it is close
    to the circle *per oscillation of the mode*, i.e. its damping ratio is
    small.
    """
    values = np.asarray(multipliers, dtype=complex).ravel()
    if values.size == 0:
        return MultiplierReport(True, 0.0, False, False, False, ())
    modulus = np.abs(values)
    largest = float(modulus.max())
    angle = np.abs(np.angle(values))
    is_real = (angle <= 1e-9) | (np.abs(angle - np.pi) <= 1e-9)
    flip = bool(np.any(is_real & (values.real < 0) & (np.abs(values.real + 1.0) < margin)))
    flip = flip or bool(np.any(is_real & (values.real < -1.0)))
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        per_oscillation = np.where(~is_real & (modulus > 0),
                                   np.exp(2.0 * np.pi / np.where(is_real, 1.0, angle)
                                          * np.log(np.maximum(modulus, 1e-300))), 0.0)
    pair = bool(np.any(~is_real & (per_oscillation > 1.0 - margin)))
    fold = bool(np.any(is_real & (values.real > 0)
                       & (np.abs(values.real - 1.0) < margin * 1e-2)))
    stable = largest < 1.0
    flags = []
    if not stable:
        flags.append(f"unstable cycle: largest |multiplier| = {largest:.6g} >= 1")
    if flip:
        flags.append("period doubling: a multiplier near -1")
    if pair:
        flags.append("quasi-periodic drift: a lightly damped complex multiplier pair "
                     "near the unit circle")
    if fold:
        flags.append("weakly damped mode: a multiplier within "
                     f"{margin * 1e-2:g} of +1")
    return MultiplierReport(stable, largest, flip, pair, fold, tuple(flags))


def finite_difference_jacobian(return_map: Callable[[np.ndarray], np.ndarray],
                               state, steps) -> np.ndarray:
    """Central-difference Jacobian of a return map (a check on saltation).

    Parameters
    ----------
    return_map : callable
        ``x0 -> x1`` (state at the next section event) [state units].
    state : array_like, shape (n,)
        Point of evaluation [state units].
    steps : array_like, shape (n,) or float
        Difference step per component [state units].

    Returns
    -------
    ndarray, shape (n, n)
        ``d x1 / d x0`` [1].
    """
    state = np.asarray(state, dtype=float)
    steps = np.broadcast_to(np.asarray(steps, dtype=float), state.shape)
    columns = []
    for i in range(state.size):
        delta = np.zeros_like(state)
        delta[i] = steps[i]
        columns.append((np.asarray(return_map(state + delta))
                        - np.asarray(return_map(state - delta))) / (2.0 * steps[i]))
    return np.column_stack(columns)


# ------------------------------------------- reference piecewise-affine system
@dataclass(frozen=True)
class Guard:
    """A switching condition of an affine mode: ``h(x) = gradient . x + offset``
    crossing zero in ``direction`` (+1 rising, -1 falling) switches to mode
    ``target``.

    Attributes
    ----------
    gradient : ndarray, shape (n,)
        [1/state units] (as ``h`` is dimensionless up to scale).
    offset : float
    direction : int
        +1 or -1.
    target : str
        Label of the next mode.
    label : str
        Name of the event.
    """

    gradient: np.ndarray
    offset: float
    direction: int
    target: str
    label: str

    def value(self, state):
        return float(np.asarray(self.gradient) @ state + self.offset) * self.direction


@dataclass(frozen=True)
class AffineMode:
    """One topology: ``x' = A x + b`` with its guards.

    Attributes
    ----------
    matrix : ndarray, shape (n, n)
        ``A`` [1/s].
    forcing : ndarray, shape (n,)
        ``b`` [state units/s].
    guards : tuple of Guard
    """

    matrix: np.ndarray
    forcing: np.ndarray
    guards: tuple


class PiecewiseAffineSystem:
    """A small switched affine system simulated exactly between events.

    A reference implementation of the cycle interface for the tests and for
    reduced models: the solution of each segment is the exact one,
    ``x(t) = e^{At} x0 + (int_0^t e^{As} ds) b``, from the exponential of the
    augmented matrix ``[[A, b], [0, 0]]`` (Van Loan 1978); switching instants
    are bracketed on a time grid of step ``max_step`` and refined by Brent's
    method.

    Parameters
    ----------
    modes : mapping of str to AffineMode
    section_mode : str
        The mode entered at the section event (the cycle starts in it and
        ends when it is entered again).
    max_step : float
        Grid step for bracketing events [s]; must be below the shortest
        time between two crossings of one guard.
    max_events : int, default 1000
        Guard against Zeno loops.
    """

    def __init__(self, modes, section_mode: str, max_step: float, max_events: int = 1000):
        self.modes = dict(modes)
        self.section_mode = section_mode
        self.max_step = float(max_step)
        self.max_events = int(max_events)
        self._step_cache = {}

    def field(self, mode: str, state) -> np.ndarray:
        m = self.modes[mode]
        return np.asarray(m.matrix) @ state + np.asarray(m.forcing)

    def _propagator(self, mode: str, duration: float):
        m = self.modes[mode]
        n = len(m.forcing)
        augmented = np.zeros((n + 1, n + 1))
        augmented[:n, :n] = m.matrix
        augmented[:n, n] = m.forcing
        exponential = expm(augmented * duration)
        return exponential[:n, :n], exponential[:n, n]

    def flow(self, mode: str, state, duration: float) -> np.ndarray:
        """State after ``duration`` [s] in ``mode`` without switching."""
        phi, gamma = self._propagator(mode, duration)
        return phi @ state + gamma

    def _step(self, mode):
        if mode not in self._step_cache:
            self._step_cache[mode] = self._propagator(mode, self.max_step)
        return self._step_cache[mode]

    def next_event(self, mode: str, state, horizon: float):
        """First guard crossing in ``mode`` from ``state`` within ``horizon``.

        Returns ``(time, guard)`` or ``(None, None)``.
        """
        from scipy.optimize import brentq  # scipy.optimize is slow to import

        phi, gamma = self._step(mode)
        guards = self.modes[mode].guards
        x = np.asarray(state, dtype=float)
        t = 0.0
        while t < horizon:
            x_next = phi @ x + gamma
            for guard in guards:
                before, after = guard.value(x), guard.value(x_next)
                if before < 0.0 <= after:
                    base = x.copy()
                    root = brentq(lambda s: guard.value(self.flow(mode, base, s)),
                                  0.0, self.max_step, xtol=1e-15, rtol=4 * np.finfo(float).eps)
                    hits = [(root, guard)]
                    # another guard may cross earlier in the same step
                    for other in guards:
                        if other is guard:
                            continue
                        if other.value(base) < 0.0 <= other.value(self.flow(mode, base, root)):
                            r = brentq(lambda s: other.value(self.flow(mode, base, s)),
                                       0.0, root, xtol=1e-15, rtol=4 * np.finfo(float).eps)
                            hits.append((r, other))
                    root, hit = min(hits, key=lambda item: item[0])
                    return t + root, hit
            x = x_next
            t += self.max_step
        return None, None

    def advance_cycle(self, state, horizon: float = np.inf) -> CycleData:
        """Advance from ``state`` in the section mode to the next entry into it.

        Parameters
        ----------
        state : array_like, shape (n,)
        horizon : float
            Longest allowed cycle [s].

        Returns
        -------
        CycleData

        Raises
        ------
        CycleError
            If no closing event occurs within ``horizon`` or ``max_events``.
        """
        x = np.asarray(state, dtype=float).copy()
        start = x.copy()
        mode = self.section_mode
        elapsed = 0.0
        segments, events = [], []
        for _ in range(self.max_events):
            dt, guard = self.next_event(mode, x, horizon - elapsed)
            if guard is None:
                raise CycleError(f"no switching event in mode {mode!r} within the horizon")
            phi, gamma = self._propagator(mode, dt)
            x = phi @ x + gamma
            elapsed += dt
            segments.append(CycleSegment(mode, dt, phi))
            events.append(CycleEvent(guard.label, elapsed, self.field(mode, x),
                                     self.field(guard.target, x),
                                     np.asarray(guard.gradient, dtype=float)))
            mode = guard.target
            if mode == self.section_mode:
                return CycleData(start, x, elapsed, tuple(segments), tuple(events))
        raise CycleError(f"more than {self.max_events} events without closing the cycle "
                         "(Zeno loop?)")

    def simulate(self, state, mode: str, duration: float, samples_per_step: int = 1):
        """Brute-force transient: trajectory samples and event times.

        Returns ``(times, states, event_times, final_mode)``.
        """
        x = np.asarray(state, dtype=float).copy()
        t = 0.0
        times, states, event_times = [0.0], [x.copy()], []
        while t < duration:
            dt, guard = self.next_event(mode, x, duration - t)
            if guard is None:
                dt = duration - t
            x = self.flow(mode, x, dt)
            t += dt
            times.append(t)
            states.append(x.copy())
            if guard is not None:
                event_times.append((t, guard.label))
                mode = guard.target
            else:
                break
        return np.array(times), np.array(states), event_times, mode
