"""Event-driven exact integration of the piecewise-linear circuit.

Inside one topology the state obeys ``dx/dt = A x + b`` and its exact
solution over a step ``h`` is one matrix-vector product with the
exponential of the augmented matrix ``[[A, b], [0, 0]] h`` (Van Loan 1978;
Moler & Van Loan 2003, method 2 with the "augmented" form).  For every
topology the engine precomputes these exponentials for a dyadic ladder of
step lengths ``h_top, h_top/2, ..., >= MIN_STEP``; any instant in a step is
then reached exactly by a product of ladder matrices, so a switching
instant is found by bisection on the exact segment solution, never by a
low-order interpolation.  ``h_top`` resolves every lightly damped
oscillation of the topology (at most half of a half period), and a cubic
Hermite test on guard values and slopes refines the step where a guard dips
between samples, so a guard cannot cross and recross unseen.

Pitfalls and how they are handled:

* *root finder just before a crossing*: the bisection keeps a bracket and
  commits to its upper end, the exact state just past the crossing (within
  ``MIN_STEP``);
* *fast transients right after a switch*: the first step after a switch is
  half the fastest time constant of the new topology and the step doubles
  after each accepted step up to ``h_top``, so a guard that dips through
  zero for a nanosecond after a switch is seen;
* *zero-length segments*: after every switch all guards of the new topology
  are checked at the same instant (value and slope) and further switches
  are applied before time advances; more than ``MAX_CHAIN`` in a row is an
  error (no consistent topology);
* *event storms / Zeno behaviour*: more than ``STORM_EVENTS`` events within
  ``STORM_WINDOW`` raise :class:`EngineError`, as does exceeding
  ``max_events``.

The hot loop is compiled with numba (``cache=True``).

References
----------
.. [1] C. F. Van Loan, "Computing integrals involving the matrix
   exponential", IEEE Trans. Automatic Control 23(3), 395-404, 1978.
.. [2] C. Moler, C. Van Loan, "Nineteen dubious ways to compute the
   exponential of a matrix, twenty-five years later", SIAM Review 45(1),
   3-49, 2003.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from numba import njit

from rcc.engine.circuit import (
    SIGNAL_NAMES,
    SWITCH_STATES,
    Circuit,
    EngineError,
    Topology,
    state_kind,
)

__all__ = [
    "Trace",
    "CycleResult",
    "Segment",
    "EventData",
    "simulate",
    "dc_initial_state",
    "advance_cycle",
    "power_on_state",
    "segment_energy",
    "cycle_power",
    "CyclePower",
    "segment_state_integral",
    "simulate_reference",
    "ReferenceTrace",
    "expm_flushed",
    "turn_on_indices",
    "MIN_STEP",
]

#: Finest step of the ladder: resolution of switching instants [s].
MIN_STEP = 1e-15
#: Longest step relative to the half period of a lightly damped ring (the
#: cubic Hermite test on guard values and slopes covers dips between samples).
RING_SAMPLING = 0.5
#: Longest step in any topology [s].
MAX_STEP = 1e-4
#: Most ladder levels.
MAX_LEVELS = 40
#: Event-storm guard: this many events within STORM_WINDOW is an error.
STORM_EVENTS = 200
STORM_WINDOW = 1e-9
#: Most switches at one instant (zero-length segments in a row).
MAX_CHAIN = 64

#: A run is complete when less than this is left (finest ladder step) [s].
_END_SLACK = 2.0 * MIN_STEP

# kernel status codes
_DONE, _NEED, _FULL, _STOP, _STORM, _CHAIN, _EVENTS = 0, 1, 2, 3, 4, 5, 6
# switch states used by the turn-on rule (see turn_on_indices)
_SWITCH_OFF = SWITCH_STATES.index("off")
_SWITCH_ACTIVE = SWITCH_STATES.index("active")
_SWITCH_SATURATED = SWITCH_STATES.index("saturated")


# ---------------------------------------------------------------- results
@dataclass(frozen=True)
class Trace:
    """Simulated waveforms.

    Attributes
    ----------
    times : ndarray, shape (k,)
        Sample instants [s]; an event appears twice (before and after the
        switch, same instant).
    states : ndarray, shape (k, n)
        State vector at each sample (order: ``circuit.state_names``).
    topologies : ndarray of int, shape (k,)
        Topology code at each sample.
    signals : dict of str to ndarray
        Named signals (:data:`rcc.engine.circuit.SIGNAL_NAMES`): collector
        voltage [V], primary current [A], base current [A], limiter
        collector current [A], feedback winding voltage [V], output voltage
        [V], switch collector current [A], emitter voltage [V], base
        voltage [V], output rectifier current [A], clamp current [A], bus
        current [A].
    event_times : ndarray, shape (m,)
        Switching instants [s].
    event_from, event_to : ndarray of int, shape (m,)
        Topology codes before and after each switch.
    event_devices : ndarray of int, shape (m,)
        Device that switched (index into ``circuit.device_names``).
    final_state : ndarray, shape (n,)
        State at the end [state units].
    final_topology : int
        Topology code at the end.
    final_time : float
        Time reached [s]: the requested end within ``MIN_STEP`` (the state
        is exact at this time), or the stop event.
    stopped : bool
        True if the run ended on a requested stop event.
    state_names, device_names : tuple of str
        Copied from the circuit.
    topology_weights, topology_radices : tuple of int
        Mixed-radix layout of the topology codes (device ``d`` is in state
        ``(code // weights[d]) % radices[d]``).
    switch_kinds : tuple of int
        Kind of every switch state (index into
        :data:`rcc.engine.circuit.SWITCH_STATES`).
    device_state_names : tuple of tuple of str
        Copied from the circuit.
    """

    times: np.ndarray
    states: np.ndarray
    topologies: np.ndarray
    signals: dict
    event_times: np.ndarray
    event_from: np.ndarray
    event_to: np.ndarray
    event_devices: np.ndarray
    final_state: np.ndarray
    final_topology: int
    final_time: float
    stopped: bool
    state_names: tuple = ()
    device_names: tuple = ()
    topology_weights: tuple = ()
    topology_radices: tuple = ()
    switch_kinds: tuple = ()
    device_state_names: tuple = ()

    def __getitem__(self, name: str) -> np.ndarray:
        return self.signals[name]

    def device_transitions(self, device: str, before, after) -> np.ndarray:
        """Instants where ``device`` switched from state ``before`` to
        ``after`` [s]: state indices, or state kinds (names without the
        junction chord, :func:`rcc.engine.circuit.state_kind`; a move between
        chords of one kind is not a transition of that kind)."""
        if device not in self.device_names:
            return np.empty(0)
        d = self.device_names.index(device)
        weight, radix = self.topology_weights[d], self.topology_radices[d]
        old = (self.event_from // weight) % radix
        new = (self.event_to // weight) % radix
        if isinstance(before, str) or isinstance(after, str):
            kinds = np.array([state_kind(name) for name in self.device_state_names[d]])
            old, new = kinds[old], kinds[new]
        mask = (self.event_devices == d) & (old == before) & (new == after)
        return self.event_times[mask]

    def turn_on_times(self) -> np.ndarray:
        """Instants of the switch turn-ons [s].

        A turn-on is a switch from cut-off to the active region that starts
        an on-time: the switch saturates before it is cut off again
        (:func:`turn_on_indices`).  A brief active excursion while the
        collector is still rising at turn-off (the collector-base
        capacitance feeding the edge into the base) is not one.  A trace
        that stopped on a turn-on (``stopped``) ends at a confirmed one; a
        trace that ends by time between a candidate and its outcome does not
        count that candidate.
        """
        if "switch" not in self.device_names:
            return np.empty(0)
        d = self.device_names.index("switch")
        indices = turn_on_indices(self.event_devices, self.event_from, self.event_to, d,
                                  self.topology_weights[d], self.topology_radices[d],
                                  self.stopped, self.switch_kinds or None)
        return self.event_times[indices]


def turn_on_indices(event_devices, event_from, event_to, switch: int, weight: int, radix: int,
                    stopped: bool = False, kinds=None) -> np.ndarray:
    """Indices of the switch turn-ons in an event list.

    Parameters
    ----------
    event_devices, event_from, event_to : array_like of int, shape (m,)
        Device and topology codes before and after every switching event
        (as in :class:`Trace`).
    switch : int
        Index of the switch device.
    weight, radix : int
        Mixed-radix weight and number of states of the switch in the
        topology codes.
    stopped : bool
        The list ends at a turn-on confirmed by the engine
        (``simulate(..., stop_on_turn_on=k)``): its last candidate counts.
    kinds : array_like of int, shape (radix,), optional
        Kind of every switch state as an index into
        :data:`rcc.engine.circuit.SWITCH_STATES` (the junction chords of the
        active and saturated regions are states of one kind); default: the
        state index itself, for a switch with exactly those four states.

    Returns
    -------
    ndarray of int
        Event indices, in time order.

    Notes
    -----
    The rule, the same one the engine stops on: a *candidate* is a switch of
    the switch from cut-off (``off``) to ``active``; it is a turn-on when
    the switch next leaves the active region into saturation, and it is
    dropped when the switch leaves the active region back to cut-off first.
    A turn-on that starts an on-time drives the collector down to
    saturation by the regenerative feedback winding; with the collector-base
    capacitance fed back into the base (``rcc.engine.circuit``), the fast
    collector rise at turn-off can lift the base into the active region for
    a few nanoseconds while the collector is still hundreds of volts up
    (the Miller effect), and the switch is cut off again without
    saturating.  A candidate with no outcome in the list is counted only
    when ``stopped``.
    """
    devices = np.asarray(event_devices)
    if kinds is None:
        if radix != len(SWITCH_STATES):
            raise ValueError(f"radix = {radix}: a switch with junction chords has more states "
                             f"than {SWITCH_STATES}; pass kinds (Circuit.state_kinds)")
        kinds = np.arange(radix)
    kinds = np.asarray(kinds)
    old = kinds[(np.asarray(event_from) // weight) % radix]
    new = kinds[(np.asarray(event_to) // weight) % radix]
    found, candidate = [], -1
    for k in np.flatnonzero(devices == switch):
        if old[k] == _SWITCH_OFF and new[k] == _SWITCH_ACTIVE:
            candidate = int(k)
        elif old[k] == _SWITCH_ACTIVE and candidate >= 0 and new[k] != _SWITCH_ACTIVE:
            if new[k] == _SWITCH_SATURATED:
                found.append(candidate)
            candidate = -1
    if stopped and candidate >= 0:
        found.append(candidate)
    return np.array(found, dtype=np.int64)


def _switch_kinds(circuit: Circuit) -> np.ndarray:
    """Kind of every switch state as an index into ``SWITCH_STATES`` (one
    state of kind ``off`` when the circuit has no switch)."""
    if "switch" not in circuit.device_names:
        return np.zeros(1, dtype=np.int64)
    return np.array([SWITCH_STATES.index(kind) for kind in circuit.state_kinds("switch")],
                    dtype=np.int64)


@dataclass(frozen=True)
class Segment:
    """One smooth piece of a trajectory (one topology).

    Attributes
    ----------
    topology : int
        Topology code.
    start, duration : float
        Start time and length [s] (length may be zero).
    start_state : ndarray, shape (n,)
        State at the start.
    transition : ndarray, shape (n, n)
        Exact state-transition matrix ``expm(A * duration)`` [1].
    """

    topology: int
    start: float
    duration: float
    start_state: np.ndarray
    transition: np.ndarray


@dataclass(frozen=True)
class EventData:
    """One switching event, with what a saltation matrix needs.

    Attributes
    ----------
    time : float
        Instant [s].
    state : ndarray, shape (n,)
        State at the event (continuous across it).
    topology_before, topology_after : int
        Codes before and after.
    device : int
        Switching device index.
    guard_gradient : ndarray, shape (n,)
        Gradient of the guard function that fired (in the topology before).
    field_before, field_after : ndarray, shape (n,)
        Vector fields ``A x + b`` before and after [state unit / s].
    saltation : ndarray, shape (n, n)
        ``I + (f+ - f-) grad^T / (grad . f-)`` (di Bernardo et al. 2008,
        eq. 2.32 form for a state-independent jump map); identity when the
        guard is crossed tangentially.
    """

    time: float
    state: np.ndarray
    topology_before: int
    topology_after: int
    device: int
    guard_gradient: np.ndarray
    field_before: np.ndarray
    field_after: np.ndarray
    saltation: np.ndarray


@dataclass(frozen=True)
class CycleResult:
    """One switching cycle from a switch turn-on to the next.

    Attributes
    ----------
    start_state, end_state : ndarray, shape (n,)
        State at the two turn-on events (the Poincare section).
    start_topology, end_topology : int
        Topology codes just after the turn-ons.
    period : float
        Time between the turn-ons [s].
    segments : tuple of Segment
    events : tuple of EventData
        Events inside the cycle in time order, including the closing
        turn-on (the opening one is not included).
    monodromy : ndarray, shape (n, n)
        Product of segment transitions and saltation matrices in time
        order: the Jacobian of the flow from just after the opening
        turn-on to just after the closing one, with the closing event time
        free (before the Poincare-section projection).
    """

    start_state: np.ndarray
    end_state: np.ndarray
    start_topology: int
    end_topology: int
    period: float
    segments: tuple
    events: tuple
    monodromy: np.ndarray


# ---------------------------------------------------------------- kernel
@njit(cache=True)
def _guards_violated(gc, gd, gt, ng, x0, x, n):
    """A guard crossed below minus its tolerance between x0 and x, having
    started above it, or (a gated guard kept below it while rising) fell
    below its starting value."""
    for g in range(ng):
        tol = abs(gt[g])
        value = gd[g]
        start = gd[g]
        for j in range(n):
            value += gc[g, j] * x[j]
            start += gc[g, j] * x0[j]
        if value < -tol and (start >= -tol or value < start):
            return True
    return False


@njit(cache=True)
def _propagate(phi, x, out, n):
    for i in range(n):
        acc = phi[i, n]
        for j in range(n):
            acc += phi[i, j] * x[j]
        out[i] = acc


@njit(cache=True)
def _field(A, b, x, out, n):
    for i in range(n):
        acc = b[i]
        for j in range(n):
            acc += A[i, j] * x[j]
        out[i] = acc


@njit(cache=True)
def _find_slot(keys, values, code):
    """Slot of a topology code in the open-addressing table (``-1``: not
    built yet)."""
    mask = keys.shape[0] - 1
    h = code & mask
    while True:
        key = keys[h]
        if key == code:
            return values[h]
        if key < 0:
            return -1
        h = (h + 1) & mask


@njit(cache=True)
def _kernel(x, t, slot, t_end, max_step,
            table_keys, table_values, code_of_slot, weights, radices,
            ladder, steps, top_level, nlevels, A, b,
            gc, gd, gt, gdeep, gdev, gtarget, ng,
            rec_t, rec_x, rec_code, rec_n, record,
            ev_t, ev_from, ev_to, ev_dev, ev_guard, ev_n, max_events,
            stop_dev, stop_kinds, stop_after,
            storm, storm_pos, pending, pending_x, pending_storm, ev_base, rec_base):
    """Advance until t_end, a stop event, a missing topology or a full buffer.

    The stop event is a *confirmed* turn-on of device ``stop_dev`` (state
    kinds ``stop_kinds``, indices into ``SWITCH_STATES``): a switch from
    kind ``off`` to ``active`` after ``stop_after`` is remembered
    (``pending``: flag, time, slot, event and record counts including the
    flushed ones from ``ev_base`` and ``rec_base``, storm position; the state
    in ``pending_x``, the storm buffer in ``pending_storm``) and confirmed
    when the device next switches from ``active`` to ``saturated``; any
    other switch of the device out of the active kind drops it (moves
    between junction chords of the active region do not).  On confirmation
    the run is put back exactly at the remembered event (state, time, slot,
    storm buffer) and ``_STOP`` is returned; the caller discards the events
    and samples after it (``pending[3]``, ``pending[4]``).  The pending
    record lives in the arrays, so it survives the returns for a missing
    topology or a full buffer.

    Returns (status, slot, t, missing_code, rec_n, ev_n, storm_pos).
    """
    n = x.shape[0]
    grow = top_level[slot]
    x1 = np.empty(n)
    xm = np.empty(n)
    lo = np.empty(n)
    f0 = np.empty(n)
    f1 = np.empty(n)
    cap_rec = rec_t.shape[0]
    cap_ev = ev_t.shape[0]
    while True:
        # ---- consistency: switch while some guard is violated at x
        switched = False
        for chain in range(MAX_CHAIN + 1):
            if chain == MAX_CHAIN:
                return _CHAIN, slot, t, -1, rec_n, ev_n, storm_pos
            _field(A[slot], b[slot], x, f0, n)
            fired = -1
            for g in range(ng[slot]):
                value = gd[slot, g]
                slope = 0.0
                for j in range(n):
                    value += gc[slot, g, j] * x[j]
                    slope += gc[slot, g, j] * f0[j]
                tol = abs(gt[slot, g])
                if (value <= 0.0 and slope < 0.0) or \
                        (value < -tol and (gt[slot, g] > 0.0 or value < -gdeep[slot, g])):
                    fired = g
                    break
            if fired < 0:
                # one sample in the settled topology (zero-length
                # intermediate topologies are not recorded)
                if switched:
                    grow = top_level[slot]
                    if record:
                        rec_t[rec_n] = t
                        rec_x[rec_n, :] = x
                        rec_code[rec_n] = code_of_slot[slot]
                        rec_n += 1
                break
            dev = gdev[slot, fired]
            code = code_of_slot[slot]
            current = (code // weights[dev]) % radices[dev]
            new_code = code + (gtarget[slot, fired] - current) * weights[dev]
            new_slot = _find_slot(table_keys, table_values, new_code)
            if new_slot < 0:
                return _NEED, slot, t, new_code, rec_n, ev_n, storm_pos
            if ev_n >= cap_ev or (record and rec_n + 2 >= cap_rec):
                return _FULL, slot, t, -1, rec_n, ev_n, storm_pos
            if ev_n >= max_events:
                return _EVENTS, slot, t, -1, rec_n, ev_n, storm_pos
            ev_t[ev_n] = t
            ev_from[ev_n] = code
            ev_to[ev_n] = new_code
            ev_dev[ev_n] = dev
            ev_guard[ev_n] = fired
            ev_n += 1
            # storm guard: ring buffer of recent event times
            oldest = storm[storm_pos]
            storm[storm_pos] = t
            storm_pos = (storm_pos + 1) % storm.shape[0]
            if t - oldest < STORM_WINDOW:
                return _STORM, new_slot, t, -1, rec_n, ev_n, storm_pos
            target = gtarget[slot, fired]
            slot = new_slot
            switched = True
            if dev == stop_dev:
                kind_from = stop_kinds[current]
                kind_to = stop_kinds[target]
                if kind_from == 0 and kind_to == 1:
                    # a candidate turn-on: remember it, decide later
                    if t > stop_after:
                        pending[0] = 1.0
                        pending[1] = t
                        pending[2] = slot
                        pending[3] = ev_base + ev_n
                        pending[4] = rec_base + rec_n
                        pending[5] = storm_pos
                        for j in range(n):
                            pending_x[j] = x[j]
                        for j in range(storm.shape[0]):
                            pending_storm[j] = storm[j]
                elif kind_from == 1 and kind_to != 1 and pending[0] > 0.0:
                    if kind_to == 2:
                        # confirmed: back to the turn-on event
                        pending[0] = 0.0
                        for j in range(n):
                            x[j] = pending_x[j]
                        for j in range(storm.shape[0]):
                            storm[j] = pending_storm[j]
                        return _STOP, int(pending[2]), pending[1], -1, rec_n, ev_n, \
                            int(pending[5])
                    pending[0] = 0.0
        # ---- one step (or a bisection to the next event)
        if t >= t_end:
            return _DONE, slot, t, -1, rec_n, ev_n, storm_pos
        if record and rec_n + 2 >= cap_rec:
            return _FULL, slot, t, -1, rec_n, ev_n, storm_pos
        # steps grow geometrically after a switch, from the fastest time
        # constant up to the top step, so that a fast transient of a guard
        # right after a switch is sampled
        level = grow
        last = nlevels[slot] - 1
        remaining = min(t_end - t, max_step)
        while level < last and steps[slot, level] > remaining:
            level += 1
        if steps[slot, level] > t_end - t:
            # less than the finest step left: stop here (within MIN_STEP)
            return _DONE, slot, t, -1, rec_n, ev_n, storm_pos
        refinements = 0
        while True:
            _propagate(ladder[slot, level], x, x1, n)
            if _guards_violated(gc[slot], gd[slot], gt[slot], ng[slot], x, x1, n):
                break
            # Hermite test for a guard dipping below zero inside the step
            dip = False
            if refinements < 12 and level < last:
                _field(A[slot], b[slot], x, f0, n)
                _field(A[slot], b[slot], x1, f1, n)
                h = steps[slot, level]
                for g in range(ng[slot]):
                    v0 = gd[slot, g]
                    v1 = gd[slot, g]
                    s0 = 0.0
                    s1 = 0.0
                    for j in range(n):
                        v0 += gc[slot, g, j] * x[j]
                        v1 += gc[slot, g, j] * x1[j]
                        s0 += gc[slot, g, j] * f0[j]
                        s1 += gc[slot, g, j] * f1[j]
                    if s0 < 0.0 and s1 > 0.0:
                        for k in range(1, 4):
                            u = 0.25 * k
                            h00 = 2 * u ** 3 - 3 * u ** 2 + 1
                            h10 = u ** 3 - 2 * u ** 2 + u
                            h01 = -2 * u ** 3 + 3 * u ** 2
                            h11 = u ** 3 - u ** 2
                            value = h00 * v0 + h10 * h * s0 + h01 * v1 + h11 * h * s1
                            if value < -abs(gt[slot, g]):
                                dip = True
                if dip:
                    level += 1
                    refinements += 1
                    continue
            break
        if _guards_violated(gc[slot], gd[slot], gt[slot], ng[slot], x, x1, n):
            # bisection on the exact solution: bracket [lo, x1]
            for j in range(n):
                lo[j] = x[j]
            t_lo = t
            t_hi = t + steps[slot, level]
            for m in range(level + 1, nlevels[slot]):
                _propagate(ladder[slot, m], lo, xm, n)
                if _guards_violated(gc[slot], gd[slot], gt[slot], ng[slot], x, xm, n):
                    for j in range(n):
                        x1[j] = xm[j]
                    t_hi = t_lo + steps[slot, m]
                else:
                    for j in range(n):
                        lo[j] = xm[j]
                    t_lo = t_lo + steps[slot, m]
            for j in range(n):
                x[j] = x1[j]
            t = t_hi
        else:
            for j in range(n):
                x[j] = x1[j]
            t = t + steps[slot, level]
            if grow > 0:
                grow = min(grow, level) - 1
                if grow < 0:
                    grow = 0
        if record:
            rec_t[rec_n] = t
            rec_x[rec_n, :] = x
            rec_code[rec_n] = code_of_slot[slot]
            rec_n += 1


# ------------------------------------------------------------ topology store
class _Store:
    """Arrays of all topologies built so far, in the layout the kernel reads."""

    def __init__(self, circuit: Circuit, capacity: int = 32):
        self.circuit = circuit
        n = circuit.n_states
        self.n = n
        self.capacity = capacity
        self.count = 0
        self.max_guards = max(1, circuit.max_guards)
        # open-addressing table code -> slot (the code space of a circuit
        # with junction chords is far too large for a dense array)
        self.table_keys = np.full(1024, -1, dtype=np.int64)
        self.table_values = np.full(1024, -1, dtype=np.int64)
        self.switch_kinds = _switch_kinds(circuit)
        self.code_of_slot = np.zeros(capacity, dtype=np.int64)
        self.weights = np.array(circuit.weights, dtype=np.int64)
        self.radices = np.array(circuit.radices, dtype=np.int64)
        self.ladder = np.zeros((capacity, MAX_LEVELS, n + 1, n + 1))
        self.steps = np.zeros((capacity, MAX_LEVELS))
        self.top_level = np.zeros(capacity, dtype=np.int64)
        self.nlevels = np.zeros(capacity, dtype=np.int64)
        self.A = np.zeros((capacity, n, n))
        self.b = np.zeros((capacity, n))
        self.gc = np.zeros((capacity, self.max_guards, n))
        self.gd = np.zeros((capacity, self.max_guards))
        self.gt = np.zeros((capacity, self.max_guards))
        self.gdeep = np.zeros((capacity, self.max_guards))
        self.gdev = np.zeros((capacity, self.max_guards), dtype=np.int64)
        self.gtarget = np.zeros((capacity, self.max_guards), dtype=np.int64)
        self.ng = np.zeros(capacity, dtype=np.int64)

    def _grow(self):
        new = 2 * self.capacity
        for name in ("code_of_slot", "ladder", "steps", "top_level", "nlevels", "A", "b",
                     "gc", "gd", "gt", "gdeep", "gdev", "gtarget", "ng"):
            old = getattr(self, name)
            grown = np.zeros((new,) + old.shape[1:], dtype=old.dtype)
            grown[: self.capacity] = old
            setattr(self, name, grown)
        self.capacity = new

    def slot_of(self, code: int) -> int:
        """Slot of a topology code, -1 when it is not built yet."""
        return int(_find_slot(self.table_keys, self.table_values, np.int64(code)))

    def _insert(self, code: int, slot: int) -> None:
        if 2 * (self.count + 1) > self.table_keys.shape[0]:
            keys, values = self.table_keys, self.table_values
            self.table_keys = np.full(2 * keys.shape[0], -1, dtype=np.int64)
            self.table_values = np.full(2 * keys.shape[0], -1, dtype=np.int64)
            for key, value in zip(keys, values):
                if key >= 0:
                    self._place(int(key), int(value))
        self._place(code, slot)

    def _place(self, code: int, slot: int) -> None:
        mask = self.table_keys.shape[0] - 1
        h = code & mask
        while self.table_keys[h] >= 0:
            h = (h + 1) & mask
        self.table_keys[h], self.table_values[h] = code, slot

    def ensure(self, code: int) -> int:
        slot = self.slot_of(code)
        if slot >= 0:
            return slot
        if self.count == self.capacity:
            self._grow()
        slot = self.count
        topology = self.circuit.topology(code)
        n = self.n
        ng = len(topology.guard_offsets)
        if ng > self.max_guards:  # pragma: no cover - sized above
            raise EngineError("too many guards in one topology")
        self.A[slot], self.b[slot] = topology.A, topology.b
        self.gc[slot, :ng] = topology.guard_gradients
        self.gd[slot, :ng] = topology.guard_offsets
        self.gt[slot, :ng] = np.where(topology.guard_gated, -1.0, 1.0) * \
            topology.guard_tolerances
        self.gdeep[slot, :ng] = topology.guard_deep
        self.gdev[slot, :ng] = topology.guard_devices
        self.gtarget[slot, :ng] = topology.guard_targets
        self.ng[slot] = ng
        h_top = _top_step(topology.A)
        levels = min(MAX_LEVELS, max(2, int(math.ceil(math.log2(h_top / MIN_STEP))) + 1))
        augmented = np.zeros((n + 1, n + 1))
        augmented[:n, :n] = topology.A
        augmented[:n, n] = topology.b
        self.ladder[slot, :levels] = _ladder(augmented, h_top, levels)
        self.steps[slot, :levels] = h_top * 2.0 ** (-np.arange(levels))
        self.nlevels[slot] = levels
        self.top_level[slot] = _start_level(topology.A, h_top, levels)
        if not np.all(np.isfinite(self.ladder[slot, :levels])):
            raise EngineError(f"non-finite matrix exponential in topology "
                              f"{self.circuit.label(code)}")
        self.code_of_slot[slot] = code
        self._insert(code, slot)
        self.count += 1
        return slot


def _ladder(augmented: np.ndarray, h_top: float, levels: int) -> np.ndarray:
    """``expm(augmented * h_top * 2**-j)`` for ``j = 0 .. levels-1``.

    Levels where the scaled matrix has 1-norm at most 1/2 use the Taylor
    series (truncated when a term falls below 1e-18 of the sum; the remainder
    is then below that bound because the norm is below 1/2); each coarser
    level is the square of the next finer one, the squaring phase of scaling
    and squaring (Moler & Van Loan 2003, method 3; Higham 2005).  Entries
    below 1e-100 are flushed to zero so that decayed stiff modes leave no
    subnormal numbers behind (they make matrix products very slow).
    """
    out = np.empty((levels,) + augmented.shape)
    augmented, scale = _balance(augmented)
    norm = np.abs(augmented).sum(axis=0).max()
    size = augmented.shape[0]
    steps = h_top * 2.0 ** (-np.arange(levels))
    # the Taylor levels (all of them at once, as a stack) ...
    taylor = np.flatnonzero((norm * steps <= 0.5) | (np.arange(levels) == levels - 1))
    scaled = augmented[None, :, :] * steps[taylor, None, None]
    scaled[np.abs(scaled) < 1e-100] = 0.0
    total = np.broadcast_to(np.eye(size), scaled.shape).copy()
    term = total.copy()
    for k in range(1, 60):
        term = term @ scaled / k
        term[np.abs(term) < 1e-100] = 0.0
        total += term
        if np.all(np.abs(term).max(axis=(1, 2)) <= 1e-18 * np.abs(total).max(axis=(1, 2))):
            break
    out[taylor] = total
    # ... and the coarser ones by squaring
    for level in range(int(taylor[0]) - 1, -1, -1):
        finer = out[level + 1].copy()
        finer[np.abs(finer) < 1e-100] = 0.0
        out[level] = finer @ finer
    return out * scale[:, None] / scale[None, :]


def _balance(matrix: np.ndarray):
    """Diagonal balancing ``matrix = D B D^-1`` by powers of two (Parlett &
    Reinsch 1969, via ``scipy.linalg.matrix_balance``): states of very
    different scales (coulombs next to volts) otherwise inflate the norm and
    the number of squarings, and with them the rounding error."""
    balanced, transform = scipy.linalg.matrix_balance(matrix, permute=False)
    return balanced, np.diag(transform).copy()


def _start_level(A: np.ndarray, h_top: float, levels: int) -> int:
    """Ladder level of the first step after a switch: a step of half the
    fastest time constant ``1 / max |lambda|`` of the topology."""
    fastest = float(np.max(np.abs(np.linalg.eigvals(A)), initial=0.0))
    if fastest <= 0:
        return 0
    ratio = h_top * fastest / 0.5
    return int(min(levels - 1, max(0, math.ceil(math.log2(ratio))))) if ratio > 1 else 0


def _top_step(A: np.ndarray) -> float:
    """Longest ladder step for a state matrix: a quarter of the period of its
    fastest lightly damped oscillation, half the time constant of its
    fastest growing mode, at most MAX_STEP [s]."""
    eigenvalues = np.linalg.eigvals(A)
    h = MAX_STEP
    for value in eigenvalues:
        omega = abs(value.imag)
        if omega > 0 and abs(value.real) < 2.0 * omega:
            h = min(h, RING_SAMPLING * math.pi / omega)
        if value.real > 0:
            h = min(h, 0.5 / value.real)
    return h


def _store(circuit: Circuit) -> _Store:
    store = circuit._cache.get("__store__")
    if store is None:
        store = _Store(circuit)
        circuit._cache["__store__"] = store
    return store


# ------------------------------------------------------------ public API
def power_on_state(circuit: Circuit) -> np.ndarray:
    """State at switch-on: every capacitor discharged, no current, no charge.

    Parameters
    ----------
    circuit : Circuit

    Returns
    -------
    ndarray, shape (n,)
        Zero state (the bus is switched on at t = 0), except the states the
        circuit starts elsewhere (``parameters["initial_state"]``: with the
        bulk-capacitor bus, the line at its crest and the bulk capacitor
        charged to it) [state units].
    """
    x = np.zeros(circuit.n_states)
    for name, value in circuit.parameters.get("initial_state", {}).items():
        x[circuit.state_index(name)] = value
    return x


def dc_initial_state(circuit: Circuit, from_dc_point: bool = False):
    """Initial state of a run: power-on, or the DC operating point.

    Parameters
    ----------
    circuit : Circuit
    from_dc_point : bool
        False: all capacitors discharged (power-on).  True: the equilibrium
        ``A x + b = 0`` of the topology the circuit settles in when
        switching is suppressed, found by iterating topology and
        equilibrium until the guards agree.

    Returns
    -------
    ndarray, shape (n,)
        The state [state units].

    Raises
    ------
    EngineError
        If no consistent DC point is found in 50 iterations.
    """
    x = power_on_state(circuit)
    if not from_dc_point:
        return x
    # states held at their power-on values (the line and the bulk capacitor):
    # the equilibrium of the others with these as inputs
    held = np.zeros(circuit.n_states, dtype=bool)
    for name in circuit.parameters.get("held_states", ()):
        held[circuit.state_index(name)] = True
    free = ~held
    code = settle_topology(circuit, x, 0)
    for _ in range(50):
        topology = circuit.topology(code)
        a = topology.A[np.ix_(free, free)]
        rhs = -(topology.b[free] + topology.A[np.ix_(free, held)] @ x[held])
        try:
            x[free] = np.linalg.solve(a, rhs)
        except np.linalg.LinAlgError:
            x[free] = np.linalg.lstsq(a, rhs, rcond=None)[0]
        values = topology.guard_gradients @ x + topology.guard_offsets
        violated = values < -topology.guard_tolerances
        if not violated.any():
            return x
        # switch the most violated device only (relative to its tolerance),
        # then recompute the equilibrium
        g = int(np.argmin(np.where(violated, values / topology.guard_tolerances, np.inf)))
        states = list(circuit.decode(code))
        states[int(topology.guard_devices[g])] = int(topology.guard_targets[g])
        code = circuit.encode(states)
    raise EngineError("no consistent DC operating point found in 50 iterations")


def settle_topology(circuit: Circuit, x, code: int = 0, slopes: bool = True) -> int:
    """The topology consistent with state ``x``, starting from ``code``.

    Applies violated guards one at a time (value below minus its tolerance,
    or at zero and falling when ``slopes``) until none is violated.

    Returns
    -------
    int
        Topology code.
    """
    x = np.asarray(x, dtype=float)
    for _ in range(MAX_CHAIN):
        topology = circuit.topology(code)
        values = topology.guard_gradients @ x + topology.guard_offsets
        field = topology.vector_field(x)
        rates = topology.guard_gradients @ field
        tol = topology.guard_tolerances
        bad = (values < -tol) & (~topology.guard_gated | (values < -topology.guard_deep))
        if slopes:
            bad |= (values <= 0) & (rates < 0)
        else:
            bad |= (values < -tol) & topology.guard_gated
        if not bad.any():
            return code
        g = int(np.argmax(bad))
        dev = int(topology.guard_devices[g])
        states = list(circuit.decode(code))
        states[dev] = int(topology.guard_targets[g])
        code = circuit.encode(states)
    raise EngineError(f"no consistent topology at the given state (last: {circuit.label(code)})")


def simulate(circuit: Circuit, x0, t_end: float, max_events: int = 2_000_000,
             record: bool = True, topology: int | None = None, max_step: float | None = None,
             progress=None, stop_on_turn_on: int = 0, stop_after: float = 0.0,
             t_start: float = 0.0) -> Trace:
    """Integrate the circuit exactly from ``x0`` over ``[t_start, t_end]``.

    Parameters
    ----------
    circuit : Circuit
    x0 : array_like, shape (n,)
        Initial state (order ``circuit.state_names``) [state units].
    t_end : float
        End time [s].
    max_events : int
        Most switching events; more raise :class:`EngineError` (a Zeno or
        runaway guard).
    record : bool
        Keep every step (True) or only the events and the final state.
    topology : int, optional
        Initial topology code; default: settled from ``x0``.
    max_step : float, optional
        Longest step (finer waveforms for plots) [s].
    progress : callable, optional
        Called as ``progress(t, t_end)`` about a hundred times.
    stop_on_turn_on : int
        Stop at this many switch turn-ons after ``stop_after`` (a switch
        from cut-off to the active region that reaches saturation before it
        is cut off again, :func:`turn_on_indices`); the run ends exactly at
        the last turn-on event, not at the saturation that confirmed it;
        0 runs to ``t_end``.
    stop_after : float
        Turn-ons at or before this time are not counted [s].
    t_start : float
        Initial time [s].

    Returns
    -------
    Trace

    Raises
    ------
    EngineError
        On an event storm, too many events, or no consistent topology.
    """
    x = np.array(x0, dtype=float).copy()
    if x.shape != (circuit.n_states,) or not np.all(np.isfinite(x)):
        raise ValueError(f"x0: expected {circuit.n_states} finite numbers, got {x0!r}")
    if not t_end > t_start:
        raise ValueError(f"t_end = {t_end!r}: expected a time after t_start = {t_start!r} [s]")
    store = _store(circuit)
    code = settle_topology(circuit, x, 0 if topology is None else int(topology))
    slot = store.ensure(code)
    step_cap = math.inf if max_step is None else float(max_step)
    capacity = 65536 if record else 16
    rec_t = np.empty(capacity)
    rec_x = np.empty((capacity, circuit.n_states))
    rec_code = np.empty(capacity, dtype=np.int64)
    ev_cap = 65536
    ev_t = np.empty(ev_cap)
    ev_from = np.empty(ev_cap, dtype=np.int64)
    ev_to = np.empty(ev_cap, dtype=np.int64)
    ev_dev = np.empty(ev_cap, dtype=np.int64)
    ev_guard = np.empty(ev_cap, dtype=np.int64)
    chunks_t, chunks_x, chunks_c = [], [], []
    events = ([], [], [], [])
    total_events = 0
    storm = np.full(STORM_EVENTS, -np.inf)
    storm_pos = 0
    rec_n = ev_n = 0
    t = float(t_start)
    if record:
        rec_t[0], rec_x[0], rec_code[0] = t, x, code
        rec_n = 1
    switch = circuit.device_index("switch") if "switch" in circuit.device_names else -1
    stop_dev = switch if stop_on_turn_on > 0 else -1
    # a candidate turn-on waiting for the switch to saturate (see _kernel)
    pending = np.zeros(6)
    pending_x = np.empty(circuit.n_states)
    pending_storm = np.empty(STORM_EVENTS)
    total_records = 0
    turn_ons = 0
    stopped = False
    settle_only = False
    span = t_end - t_start
    chunk_end = t_end if progress is None else t_start + span / 100.0
    while True:
        end = t if settle_only else min(chunk_end, t_end)
        status, slot, t, missing, rec_n, ev_n, storm_pos = _kernel(
            x, t, slot, end, step_cap,
            store.table_keys, store.table_values, store.code_of_slot, store.weights,
            store.radices,
            store.ladder, store.steps, store.top_level, store.nlevels, store.A, store.b,
            store.gc, store.gd, store.gt, store.gdeep, store.gdev, store.gtarget, store.ng,
            rec_t, rec_x, rec_code, rec_n, record,
            ev_t, ev_from, ev_to, ev_dev, ev_guard, ev_n, max_events - total_events,
            -1 if settle_only else stop_dev, store.switch_kinds, stop_after,
            storm, storm_pos, pending, pending_x, pending_storm, total_events, total_records)
        if status == _NEED:
            store.ensure(int(missing))
            continue
        if status == _STORM:
            raise EngineError(
                f"event storm: {STORM_EVENTS} switching events within {STORM_WINDOW:g} s "
                f"at t = {t:.9g} s (topology {circuit.label(int(store.code_of_slot[slot]))}); "
                "the circuit chatters between topologies (undamped ringing or a "
                "marginal device): add damping or check the design")
        if status == _CHAIN:
            raise _with_state(EngineError(
                f"no consistent topology at t = {t:.9g} s after {MAX_CHAIN} switches at "
                "one instant ("
                f"{_describe_switches(circuit, ev_from[:ev_n][-4:], ev_to[:ev_n][-4:])}; "
                f"last: {circuit.label(int(store.code_of_slot[slot]))})"), x, t,
                int(store.code_of_slot[slot]))
        if status == _EVENTS:
            raise EngineError(
                f"more than {max_events} switching events before t = {t:.9g} s; "
                "raise max_events or shorten the run")
        # flush the buffers
        chunks_t.append(rec_t[:rec_n].copy())
        chunks_x.append(rec_x[:rec_n].copy())
        chunks_c.append(rec_code[:rec_n].copy())
        for target, array in zip(events, (ev_t, ev_from, ev_to, ev_dev)):
            target.append(array[:ev_n].copy())
        total_events += ev_n
        total_records += rec_n
        rec_n = ev_n = 0
        if status == _FULL:
            continue
        if status == _STOP:
            # back at the confirmed turn-on: drop what was simulated after it
            kept_events, kept_records = int(pending[3]), int(pending[4])
            for chunks in (chunks_t, chunks_x, chunks_c):
                _truncate(chunks, kept_records, total_records)
            for target in events:
                _truncate(target, kept_events, total_events)
            total_events, total_records = kept_events, kept_records
            if record:
                chunks_t.append(np.array([t]))
                chunks_x.append(x.copy()[None, :])
                chunks_c.append(np.array([store.code_of_slot[slot]], dtype=np.int64))
                total_records += 1
            turn_ons += 1
            if turn_ons >= stop_on_turn_on:
                stopped = settle_only = True
            continue
        if not np.all(np.isfinite(x)):
            raise EngineError(f"non-finite state at t = {t:.9g} s")
        if settle_only or t >= t_end - _END_SLACK:
            break
        if progress is not None:
            progress(t, t_end)
        chunk_end = min(t_end, max(chunk_end, t) + span / 100.0)
    if progress is not None:
        progress(t, t_end)
    times = np.concatenate(chunks_t)
    states = np.concatenate(chunks_x)
    codes = np.concatenate(chunks_c)
    return Trace(
        times=times, states=states, topologies=codes,
        signals=_signals(circuit, states, codes),
        event_times=np.concatenate(events[0]), event_from=np.concatenate(events[1]),
        event_to=np.concatenate(events[2]), event_devices=np.concatenate(events[3]),
        final_state=x.copy(), final_topology=int(store.code_of_slot[slot]),
        final_time=float(t), stopped=stopped,
        state_names=circuit.state_names, device_names=circuit.device_names,
        topology_weights=circuit.weights, topology_radices=circuit.radices,
        switch_kinds=tuple(int(k) for k in _switch_kinds(circuit)),
        device_state_names=circuit.device_state_names,
    )


def _truncate(chunks: list, length: int, total: int) -> None:
    """Cut a list of array chunks holding ``total`` rows to ``length`` rows
    (in place), working back from the end: only the last few rows go."""
    while chunks and total - len(chunks[-1]) >= length:
        total -= len(chunks.pop())
    if chunks and total > length:
        chunks[-1] = chunks[-1][:len(chunks[-1]) - (total - length)]


def _with_state(error: EngineError, x, t, code) -> EngineError:
    """Attach the state, time and topology where the engine stopped."""
    error.state = np.array(x, dtype=float)
    error.time = float(t)
    error.topology = int(code)
    return error


def _describe_switches(circuit: Circuit, before, after) -> str:
    """'device: a -> b' for a list of switching events."""
    parts = []
    for code_from, code_to in zip(before, after):
        old, new = circuit.decode(int(code_from)), circuit.decode(int(code_to))
        for d, (a, b) in enumerate(zip(old, new)):
            if a != b:
                names = circuit.device_state_names[d]
                parts.append(f"{circuit.device_names[d]}: {names[a]} -> {names[b]}")
    return ", ".join(parts) if parts else "no switch recorded"


def _signals(circuit: Circuit, states: np.ndarray, codes: np.ndarray) -> dict:
    """The recorded signals of every sample, topology by topology (the samples
    grouped by one stable sort, so the cost grows with the samples, not with
    samples times topologies)."""
    out = np.empty((len(codes), len(SIGNAL_NAMES)))
    order = np.argsort(codes, kind="stable")
    sorted_codes = codes[order]
    starts = np.flatnonzero(np.r_[len(codes) > 0, sorted_codes[1:] != sorted_codes[:-1]])
    ends = np.r_[starts[1:], len(codes)]
    for start, end in zip(starts, ends):
        rows = order[start:end]
        out[rows] = circuit.topology(int(sorted_codes[start])).signals(states[rows])
    columns = np.ascontiguousarray(out.T)
    return {name: columns[k] for k, name in enumerate(SIGNAL_NAMES)}


def advance_cycle(circuit: Circuit, x0, topology: int, max_time: float = 1e-2) -> CycleResult:
    """Advance exactly one switching cycle, turn-on to turn-on.

    Parameters
    ----------
    circuit : Circuit
    x0 : array_like, shape (n,)
        State at a switch turn-on event [state units].
    topology : int
        Topology code just after that turn-on (the active-region switch).
    max_time : float
        Longest cycle allowed [s]; a cycle without a new turn-on inside it
        raises :class:`EngineError`.

    Returns
    -------
    CycleResult
        End state at the next turn-on, segments with exact transition
        matrices, events with vector fields, guard gradients and saltation
        matrices, and their product (the monodromy before projection).

    Notes
    -----
    Saltation matrix at a switch from field ``f-`` to ``f+`` across the
    guard ``h(x) = grad . x + c = 0`` with no state jump:
    ``S = I + (f+ - f-) grad^T / (grad . f-)`` (Aizerman & Gantmacher 1958;
    di Bernardo, Budd, Champneys & Kowalczyk, *Piecewise-smooth Dynamical
    Systems*, Springer 2008, ch. 2).  Events that happen at the same instant
    are composed in order.
    """
    x0 = np.array(x0, dtype=float)
    trace = simulate(circuit, x0, max_time, record=False, topology=topology,
                     stop_on_turn_on=1, stop_after=0.0)
    if not trace.stopped:
        raise EngineError(f"no switch turn-on within {max_time:g} s: the circuit "
                          "does not oscillate from this state")
    # replay the segments exactly (events carry times and topologies)
    n = circuit.n_states
    segments, events = [], []
    x = x0.copy()
    code = settle_topology(circuit, x0, int(topology))
    t = 0.0
    monodromy = np.eye(n)
    for k in range(len(trace.event_times)):
        t_event = float(trace.event_times[k])
        top = circuit.topology(code)
        duration = t_event - t
        phi, x_next = _transition(top, x, duration)
        segments.append(Segment(code, t, duration, x.copy(), phi))
        x = x_next
        monodromy = phi @ monodromy
        after = int(trace.event_to[k])
        top_after = circuit.topology(after)
        guard = _fired_guard(circuit, top, code, after)
        f_minus, f_plus = top.vector_field(x), top_after.vector_field(x)
        denominator = float(guard @ f_minus)
        if abs(denominator) > 0.0:
            saltation = np.eye(n) + np.outer(f_plus - f_minus, guard) / denominator
        else:
            saltation = np.eye(n)
        monodromy = saltation @ monodromy
        events.append(EventData(t_event, x.copy(), code, after, int(trace.event_devices[k]),
                                guard, f_minus, f_plus, saltation))
        code, t = after, t_event
    return CycleResult(
        start_state=x0, end_state=trace.final_state.copy(),
        start_topology=settle_topology(circuit, x0, int(topology)),
        end_topology=trace.final_topology, period=trace.final_time,
        segments=tuple(segments), events=tuple(events), monodromy=monodromy)


def _transition(top: Topology, x, duration):
    """Exact transition matrix and end state of one segment."""
    n = len(x)
    if duration <= 0:
        return np.eye(n), np.array(x, dtype=float)
    augmented = np.zeros((n + 1, n + 1))
    augmented[:n, :n] = top.A
    augmented[:n, n] = top.b
    phi = expm_flushed(augmented * duration)
    return phi[:n, :n].copy(), phi[:n, :n] @ x + phi[:n, n]


def _fired_guard(circuit: Circuit, top: Topology, before: int, after: int):
    """Gradient of the guard of ``top`` whose firing leads to ``after``."""
    states_before, states_after = circuit.decode(before), circuit.decode(after)
    for g in range(len(top.guard_offsets)):
        dev = int(top.guard_devices[g])
        if states_before[dev] != states_after[dev] and \
                int(top.guard_targets[g]) == states_after[dev]:
            return top.guard_gradients[g].copy()
    raise EngineError("event without a matching guard")  # pragma: no cover


def _taylor(scaled: np.ndarray) -> np.ndarray:
    """Taylor series of the exponential of a matrix of 1-norm <= 1/2,
    flushing entries below 1e-100 (no subnormal numbers)."""
    size = scaled.shape[0]
    scaled = scaled.copy()
    scaled[np.abs(scaled) < 1e-100] = 0.0
    total = np.eye(size)
    term = np.eye(size)
    for k in range(1, 60):
        term = term @ scaled / k
        term[np.abs(term) < 1e-100] = 0.0
        total += term
        if np.abs(term).max() <= 1e-18 * np.abs(total).max():
            break
    return total


def _squarings(matrix: np.ndarray) -> int:
    norm = np.abs(matrix).sum(axis=0).max()
    return 0 if norm <= 0.5 else int(math.ceil(math.log2(norm / 0.5)))


def expm_flushed(matrix: np.ndarray) -> np.ndarray:
    """Matrix exponential by scaling and squaring of a Taylor series.

    Parameters
    ----------
    matrix : ndarray, shape (k, k)

    Returns
    -------
    ndarray, shape (k, k)

    Notes
    -----
    Balance (diagonal similarity), scale by ``2**-s`` until the 1-norm is
    at most 1/2, sum the Taylor
    series, square ``s`` times (Moler & Van Loan 2003, method 3), flushing
    entries below 1e-100 to zero: stiff decayed modes otherwise leave
    subnormal numbers that make every product very slow.
    """
    matrix, scale = _balance(matrix)
    s = _squarings(matrix)
    result = _taylor(matrix * 2.0 ** (-s))
    for _ in range(s):
        result[np.abs(result) < 1e-100] = 0.0
        result = result @ result
    return result * scale[:, None] / scale[None, :]


def segment_energy(topology: Topology, x0, duration: float) -> dict:
    """Exact energy integrals over one segment (Van Loan 1978).

    Parameters
    ----------
    topology : Topology
    x0 : array_like, shape (n,)
        State at the segment start [state units].
    duration : float
        Segment length [s].

    Returns
    -------
    dict of str to float
        ``input``, ``output``, ``loss``, ``stored``: integrals of the
        powers of :attr:`Topology.power_forms` over the segment [J].

    Notes
    -----
    Each power is a quadratic form ``z^T Q z`` in ``z = [x, 1]``, so its
    integral is ``sum(Q * X)`` with the state integral ``X`` of
    :func:`segment_state_integral`.
    """
    return _form_integrals(topology.power_forms,
                           segment_state_integral(topology, x0, duration))


def _form_integrals(forms: dict, integral: np.ndarray) -> dict:
    """Integrals ``sum(Q * X)`` of quadratic forms over a segment with state
    integral ``X`` [J]."""
    return {key: float(np.sum(form * integral)) for key, form in forms.items()}


@dataclass(frozen=True)
class CyclePower:
    """Mean powers over one switching cycle, exact for the piecewise-linear circuit.

    Attributes
    ----------
    input : float
        Power delivered by the bus [W].
    output : float
        Power taken by the load [W].
    losses : dict of str to float
        Power dissipated in each element or device (keys of
        :attr:`rcc.engine.circuit.Topology.loss_forms`), largest first [W].
    stored : float
        Mean rate of change of the stored energy (zero on a periodic orbit) [W].
    """

    input: float
    output: float
    losses: dict
    stored: float

    @property
    def loss(self) -> float:
        """Total dissipation [W]."""
        return float(sum(self.losses.values()))


def cycle_power(circuit: Circuit, cycle: CycleResult) -> CyclePower:
    """Exact mean powers over a cycle from :func:`advance_cycle`.

    Parameters
    ----------
    circuit : Circuit
    cycle : CycleResult

    Returns
    -------
    CyclePower

    Notes
    -----
    Integrates the quadratic power forms of every segment with
    :func:`segment_state_integral` (Van Loan 1978); by Tellegen's theorem
    ``input = output + sum(losses) + stored`` holds to rounding.
    """
    if not cycle.period > 0:
        raise EngineError("cycle_power: the cycle has no duration")
    totals: dict = {}
    losses: dict = {}
    for segment in cycle.segments:
        topology = circuit.topology(segment.topology)
        integral = segment_state_integral(topology, segment.start_state, segment.duration)
        for target, forms in ((totals, topology.power_forms), (losses, topology.loss_forms)):
            for key, energy in _form_integrals(forms, integral).items():
                target[key] = target.get(key, 0.0) + energy
    rate = 1.0 / cycle.period
    ordered = dict(sorted(((key, value * rate) for key, value in losses.items()),
                          key=lambda item: -item[1]))
    return CyclePower(input=totals.get("input", 0.0) * rate,
                      output=totals.get("output", 0.0) * rate,
                      losses=ordered, stored=totals.get("stored", 0.0) * rate)


def segment_state_integral(topology: Topology, x0, duration: float) -> np.ndarray:
    """``X = int_0^T z(s) z(s)^T ds`` along the exact segment solution.

    Parameters
    ----------
    topology : Topology
    x0 : array_like, shape (n,)
        State at the segment start [state units].
    duration : float
        Segment length ``T`` [s].

    Returns
    -------
    ndarray, shape (n+1, n+1)
        With ``z = [x, 1]`` and ``dz/dt = M z`` [state units squared x s].

    Notes
    -----
    ``X = int_0^T e^{M s} z0 z0^T e^{M^T s} ds`` is ``F22^T F12`` of the
    blocks of ``expm([[-M, z0 z0^T], [0, M^T]] T)`` (Van Loan 1978,
    Theorem 1, with ``A = M^T``).  That block exponential overflows for
    stiff ``M`` and long ``T``, so it is used only on a step
    ``h = T / 2**s`` with ``||M h|| <= 1/2``, and the doubling
    ``X(2h) = X(h) + e^{M h} X(h) e^{M^T h}`` extends it exactly to ``T``.

    References
    ----------
    .. [1] C. F. Van Loan, "Computing integrals involving the matrix
       exponential", IEEE Trans. Automatic Control 23(3), 395-404, 1978.
    """
    n = len(topology.b)
    M = np.zeros((n + 1, n + 1))
    M[:n, :n] = topology.A
    M[:n, n] = topology.b
    z0 = np.append(np.asarray(x0, dtype=float), 1.0)
    if duration <= 0:
        return np.zeros((n + 1, n + 1))
    # balanced coordinates z = D w (Parlett & Reinsch): M -> D^-1 M D
    M, scale = _balance(M)
    w0 = z0 / scale
    s = _squarings(M * duration)
    h = duration * 2.0 ** (-s)
    block = np.zeros((2 * (n + 1), 2 * (n + 1)))
    block[: n + 1, : n + 1] = -M
    block[: n + 1, n + 1:] = np.outer(w0, w0)
    block[n + 1:, n + 1:] = M.T
    F = _taylor(block * h) if _squarings(block * h) == 0 else expm_flushed(block * h)
    phi = F[n + 1:, n + 1:]          # e^{M^T h}
    integral = phi.T @ F[: n + 1, n + 1:]
    for _ in range(s):
        integral = integral + phi.T @ integral @ phi
        phi[np.abs(phi) < 1e-100] = 0.0
        phi = phi @ phi
    return integral * scale[:, None] * scale[None, :]


@dataclass(frozen=True)
class ReferenceTrace:
    """Result of :func:`simulate_reference`.

    Attributes
    ----------
    event_times : ndarray, shape (m,)
        Switching instants [s] (a chain of switches at one instant repeats
        the instant).
    event_from, event_to : ndarray of int, shape (m,)
        Topology codes before and after each single-device switch.
    final_state : ndarray, shape (n,)
        State at ``final_time`` (order ``circuit.state_names``).
    final_topology : int
        Topology code at the end.
    final_time : float
        Time reached [s].
    steps : int
        Integrator steps over all segments [1].
    function_evaluations : int
        Right-hand-side evaluations over all segments [1].
    """

    event_times: np.ndarray
    event_from: np.ndarray
    event_to: np.ndarray
    final_state: np.ndarray
    final_topology: int
    final_time: float
    steps: int
    function_evaluations: int


def simulate_reference(circuit: Circuit, x0, t_end: float, topology: int | None = None,
                       rtol: float = 1e-9, atol: float = 1e-12, method: str = "Radau",
                       max_events: int = 100_000) -> ReferenceTrace:
    """The same piecewise-linear equations integrated by scipy's ``solve_ivp``.

    For validation and benchmarks only: each topology is integrated with a
    general-purpose implicit integrator (Radau IIA of order 5 by default,
    with the exact constant Jacobian ``A``), switching instants are located
    by ``solve_ivp``'s event detection on the same guard functions, and the
    next topology is settled exactly as the engine does.

    Parameters
    ----------
    circuit : Circuit
    x0 : array_like, shape (n,)
    t_end : float
        End time [s].
    topology : int, optional
        Initial topology code (default: settled from ``x0``).
    rtol, atol : float
        Integrator tolerances [1], [state units].
    method : str
        ``solve_ivp`` method.
    max_events : int
        Most switching events.

    Returns
    -------
    ReferenceTrace
        Event times [s] and codes, final state, time and topology, work
        counters.

    Raises
    ------
    EngineError
        If the integrator fails or events repeat without a switch.

    Notes
    -----
    The engine's switching rules, mirrored event by event:

    * a guard that starts a segment at or above minus its tolerance fires
      when it falls below minus its tolerance (the engine's bisection
      target);
    * a gated guard that starts a segment below minus its tolerance (kept
      because it was rising) fires when it starts falling: the engine
      checks "at or below zero and falling" before every step, so in the
      limit of small steps it fires where the guard's rate crosses zero
      downwards; here the rate ``grad . (A x + b)`` is the event function;
    * ``solve_ivp`` locates a root to about ``4 eps`` in time, which leaves
      the state up to ``|slope| * 4 eps * t`` on the wrong side of the
      threshold: far more than the charge tolerance of the switch guard
      (about 4e-20 C) at collector-charge slopes of 1e-2 C/s.  The state
      handed to the topology settlement was therefore often still "before"
      the crossing, nothing switched, and the next call found the same root
      at the same instant again, for ever.  As the engine does (it commits
      to the upper end of its bisection bracket), the state is now taken
      just past the crossing: the event function is evaluated on the last
      step's dense output at ``t_e + MIN_STEP * 2**k`` until it is negative,
      then bisected to ``MIN_STEP``;
    * after each event the topology is settled with the engine's rule
      (:func:`settle_topology`: value below minus the tolerance and not
      gated, below minus the deep threshold, or at or below zero and
      falling), one device at a time in guard order; an event that
      switches nothing (a guard touching its threshold tangentially) only
      restarts the integration.  Switches of several devices at one instant
      (zero-length segments) are recorded one by one, as the engine records
      them.

    Two guards that cross within about ``tol / slope`` (well under 1e-12 s)
    of each other may be applied at one instant by one integrator and at
    two instants by the other; the order of the recorded switches is the
    same, so event sequences still compare one to one.

    References
    ----------
    .. [1] E. Hairer, G. Wanner, *Solving Ordinary Differential Equations
       II: Stiff and Differential-Algebraic Problems*, Springer, 1996
       (Radau IIA).
    .. [2] L. F. Shampine, S. Thompson, "Event location for ordinary
       differential equations", Computers & Mathematics with Applications
       39(5-6), 43-54, 2000.
    """
    from scipy.integrate import solve_ivp

    x = np.array(x0, dtype=float)
    code = settle_topology(circuit, x, 0 if topology is None else int(topology))
    t = 0.0
    times, before, after = [], [], []
    steps = evaluations = 0
    idle = 0
    while t < t_end - _END_SLACK and len(times) < max_events:
        top = circuit.topology(code)
        A, b = top.A, top.b
        events = _reference_events(top, x)
        solution = solve_ivp(lambda _t, y, A=A, b=b: A @ y + b, (t, t_end), x, method=method,
                             jac=A, events=events, rtol=rtol, atol=atol, dense_output=True)
        if solution.status == -1:
            raise EngineError(f"reference integrator failed: {solution.message}")
        steps += len(solution.t) - 1
        evaluations += int(solution.nfev)
        if solution.status != 1:
            x = solution.y[:, -1].copy()
            t = float(solution.t[-1])
            break
        fired = next(k for k, found in enumerate(solution.t_events) if len(found))
        t, x = _past_crossing(solution, events[fired], float(solution.t_events[fired][0]))
        new_code = settle_topology(circuit, x, code)
        if new_code == code:
            idle += 1
            if idle > MAX_CHAIN:
                raise EngineError(f"reference integrator: {MAX_CHAIN} events without a "
                                  f"switch before t = {t:.9g} s")
            continue
        idle = 0
        for c_from, c_to in _chain(circuit, code, new_code, x):
            times.append(t)
            before.append(c_from)
            after.append(c_to)
        code = new_code
    return ReferenceTrace(
        event_times=np.array(times, dtype=float),
        event_from=np.array(before, dtype=np.int64), event_to=np.array(after, dtype=np.int64),
        final_state=x, final_topology=int(code), final_time=float(t), steps=steps,
        function_evaluations=evaluations)


def _reference_events(top: Topology, x) -> list:
    """Terminal, falling event functions of the guards of ``top`` from ``x``
    (see the Notes of :func:`simulate_reference`)."""
    gradients, offsets, tolerances = top.guard_gradients, top.guard_offsets, top.guard_tolerances
    start = gradients @ x + offsets
    rate_gradients = gradients @ top.A
    rate_offsets = gradients @ top.b
    events = []
    for g in range(len(offsets)):
        if start[g] >= -tolerances[g]:
            def event(_t, y, g=g):
                return gradients[g] @ y + offsets[g] + tolerances[g]
        else:
            def event(_t, y, g=g):
                return rate_gradients[g] @ y + rate_offsets[g]
        event.terminal = True
        event.direction = -1
        events.append(event)
    return events


def _past_crossing(solution, event, t_event: float):
    """Time and state just past a located root of ``event`` (where it is
    negative), within ``MIN_STEP``, on the last step's dense output."""
    dense = solution.sol.interpolants[-1]
    t_last = float(dense.t)
    if event(t_event, dense(t_event)) < 0.0:
        return t_event, dense(t_event)
    low, delta, high = t_event, MIN_STEP, t_last
    while t_event + delta < t_last:
        if event(t_event + delta, dense(t_event + delta)) < 0.0:
            high = t_event + delta
            break
        low = t_event + delta
        delta *= 2.0
    while high - low > MIN_STEP:
        middle = 0.5 * (low + high)
        if event(middle, dense(middle)) < 0.0:
            high = middle
        else:
            low = middle
    return high, dense(high)


def _chain(circuit: Circuit, start: int, end: int, x):
    """The single-device switches settle_topology applied from start to end."""
    steps = []
    code = start
    for _ in range(MAX_CHAIN):
        if code == end:
            break
        nxt = _one_switch(circuit, code, x)
        steps.append((code, nxt))
        code = nxt
    return steps


def _one_switch(circuit: Circuit, code: int, x) -> int:
    topology = circuit.topology(code)
    values = topology.guard_gradients @ x + topology.guard_offsets
    rates = topology.guard_gradients @ topology.vector_field(x)
    tol = topology.guard_tolerances
    bad = ((values < -tol) & (~topology.guard_gated | (values < -topology.guard_deep))) | \
        ((values <= 0) & (rates < 0))
    g = int(np.argmax(bad))
    states = list(circuit.decode(code))
    states[int(topology.guard_devices[g])] = int(topology.guard_targets[g])
    return circuit.encode(states)
