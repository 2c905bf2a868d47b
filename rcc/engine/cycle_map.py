"""The circuit engine as a cycle map: the turn-on return map of a circuit for
the shooting solver.

:class:`CircuitCycleMap` takes a state at a switch turn-on, runs the engine
(:func:`rcc.engine.advance_cycle`) to the next turn-on and hands the cycle to
:func:`rcc.engine.shooting.find_periodic_orbit` as the abstract
:class:`rcc.engine.floquet.CycleData` (segment transition matrices, events
with the vector fields on either side and the guard gradient).

Notes
-----
The engine's cycle is adapted before the saltation product
(``notes/periodic_steady_state.md``, "Engine specifics"):

- switches chained at one instant (one device's switch violates another's
  guard) are merged into one jump from the first topology to the last,
  timed by the first guard; the product of their saltation matrices would
  not be the sensitivity of the chain (di Bernardo et al. 2008, ch. 2);
- a state exactly on the turn-on surface is carried ``NUDGE_TIME`` along the
  flow of the on-topology before the engine restarts from it, and that
  segment is put back in front of the cycle, so the map and its Jacobian
  stay exact;
- a turn-on sooner than ``RETRIGGER_FRACTION`` of the warm-up period after
  the cycle start is a re-trigger of the same turn-on and is joined to the
  following cycle.

The section is the switch's turn-on as the engine defines it
(:func:`rcc.engine.simulate.turn_on_indices`): a switch from cut-off to the
active region that reaches saturation before it is cut off again.  Locally
it is the guard surface "base reaches Vbe" of the off topology; the extra
condition (saturation follows) only picks which crossings of that surface
count, so the saltation product at the closing crossing stays the exact
Jacobian of the return map.  A brief active excursion at turn-off (the
collector rise fed into the base through the collector-base capacitance)
is an ordinary pair of events inside the cycle.

References
----------
.. [1] M. di Bernardo, C. J. Budd, A. R. Champneys, P. Kowalczyk,
   *Piecewise-smooth Dynamical Systems*, Springer, 2008.
.. [2] C. Moler, C. Van Loan, "Nineteen dubious ways to compute the
   exponential of a matrix, twenty-five years later", SIAM Review 45(1),
   2003, pp. 3-49 (the augmented-matrix form of the affine flow).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy.linalg import expm

from rcc.engine.circuit import EngineError
from rcc.engine.floquet import CycleData, CycleError, CycleEvent, CycleSegment
from rcc.engine.simulate import advance_cycle, settle_topology, simulate

__all__ = ["CircuitCycleMap", "is_turn_on", "affine_flow"]

#: Events closer than this to the previous one form one chained switch [s].
CHAIN_TIME = 0.0
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
#: Cycle ends remembered to pick the topology of a restart [1].
KNOWN_ENDS = 64


def affine_flow(topology, duration: float) -> np.ndarray:
    """Exponential of the augmented matrix of one topology's affine flow.

    Parameters
    ----------
    topology : Topology
        Engine topology with ``dx/dt = A x + b``.
    duration : float
        Time to advance [s].

    Returns
    -------
    ndarray, shape (n + 1, n + 1)
        ``expm([[A, b], [0, 0]] duration)``: the state after ``duration`` is
        ``E[:n, :n] @ x + E[:n, n]`` [state units].

    Notes
    -----
    The affine system is made linear by one extra constant state (Moler &
    Van Loan 2003, sec. 10); scipy's ``expm`` evaluates the exponential.
    """
    n = topology.b.size
    augmented = np.zeros((n + 1, n + 1))
    augmented[:n, :n] = topology.A
    augmented[:n, n] = topology.b
    return expm(augmented * duration)


def _switch_state_names(circuit):
    return circuit.state_kinds("switch")


def is_turn_on(circuit, device: int, before: int, after: int) -> bool:
    """Whether a switching event is the switch's turn-on (the section).

    Parameters
    ----------
    circuit : Circuit
        The engine's circuit.
    device : int
        Index of the device that switched.
    before, after : int
        Topology codes before and after the event.

    Returns
    -------
    bool
        The switch went from cut-off (off or breakdown) to conduction
        (active or saturated): a *candidate* turn-on.

    Notes
    -----
    A candidate is a turn-on when the switch then saturates before it is
    cut off again (:func:`rcc.engine.simulate.turn_on_indices`, the rule
    the engine stops on).  On an event list this function alone cannot
    decide that; use :meth:`rcc.engine.Trace.turn_on_times` there.  The
    engine's cycles (:func:`rcc.engine.advance_cycle`) end at a confirmed
    turn-on, so their last candidate is the section crossing.
    """
    switch = circuit.device_index("switch")
    if device != switch:
        return False
    names = _switch_state_names(circuit)
    return (names[circuit.decode(before)[switch]] in ("off", "breakdown")
            and names[circuit.decode(after)[switch]] in ("active", "saturated"))


def _event_label(circuit, event) -> str:
    device = circuit.device_names[event.device]
    state = circuit.decode(event.topology_after)[event.device]
    return f"{device}:{circuit.device_state_names[event.device][state]}"


def _engine_cycle_data(circuit, result) -> CycleData:
    """Convert the engine's cycle (:class:`rcc.engine.CycleResult`) to
    :class:`CycleData`, ending at the closing turn-on (events at the same
    instant after it only change the topology, not the state).  The engine
    stops a cycle at a confirmed turn-on, so the last candidate of the cycle
    is the closing one; earlier candidates (active excursions at turn-off
    that end in cut-off) stay events inside the cycle."""
    closing = None
    for k in range(len(result.events) - 1, -1, -1):
        event = result.events[k]
        if is_turn_on(circuit, event.device, event.topology_before, event.topology_after):
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


class CircuitCycleMap:
    """Turn-on return map of the engine, ``x -> CycleData``.

    Each cycle starts in the topology just after the turn-on that closed the
    previous cycle (the states handed in are that cycle's end or points near
    it).

    Parameters
    ----------
    circuit : Circuit
        The engine's circuit.
    topology : int
        Topology code just after the turn-on of ``state``.
    max_time : float
        Longest cycle the engine may run [s].
    state : array_like, optional
        A known state at a turn-on [state units].
    scale : array_like, optional
        Typical magnitude of each state variable, to find the nearest known
        cycle end [state units].
    reference_period : float, default 0
        Period of a cycle found before (the warm-up); a turn-on sooner than
        ``RETRIGGER_FRACTION`` of it is a re-trigger [s].
    """

    def __init__(self, circuit, topology: int, max_time: float, state=None, scale=None,
                 reference_period: float = 0.0):
        self.reference = float(reference_period)
        self.circuit = circuit
        self.topology = int(topology)
        self.max_time = max_time
        self.scale = None if scale is None else np.asarray(scale, dtype=float)
        self.known = [] if state is None else [(np.asarray(state, dtype=float), int(topology))]

    def topology_for(self, state) -> int:
        """Topology after the turn-on of the known cycle end nearest to ``state``."""
        if not self.known:
            return self.topology
        scale = self.scale if self.scale is not None else np.maximum(
            np.abs(self.known[0][0]), 1e-12)
        distances = [float(np.max(np.abs(state - end) / scale)) for end, _ in self.known]
        return self.known[int(np.argmin(distances))][1]

    def remember(self, state, topology: int) -> None:
        """Record a state at a turn-on and the topology just after it
        (:meth:`advance` keeps the last ``KNOWN_ENDS``)."""
        self.known.append((np.asarray(state, dtype=float).copy(), int(topology)))

    def __call__(self, state) -> CycleData:
        return _engine_cycle_data(self.circuit, self.advance(state))

    def prepare(self, state):
        """A clean restart point for the engine from a state at a turn-on:
        ``(state, topology, nudge time, nudge transition)``."""
        state = np.array(state, dtype=float)
        names = self.circuit.state_names
        if "q_base" in names:
            # stored charge cannot be negative; a Newton step may leave a
            # rounding-level negative value at the turn-on, where it is ~0
            k = names.index("q_base")
            state[k] = max(state[k], 0.0)
        topology = settle_topology(self.circuit, state, self.topology_for(state), slopes=False)
        start, duration, transition = _nudge(self.circuit, state, topology)
        return start, topology, duration, transition

    def run(self, state, cycles: int):
        """The engine's run (:func:`rcc.engine.simulate`, no recording) from a
        state at a turn-on for up to ``cycles`` turn-ons, without sensitivities."""
        start, topology, _, _ = self.prepare(state)
        return simulate(self.circuit, start, self.max_time * cycles, record=False,
                        topology=topology, stop_on_turn_on=cycles)

    def transient(self, state, cycles: int):
        """The state at the ``cycles``-th turn-on from ``state`` (the fast
        fall-back of :func:`rcc.engine.shooting.find_periodic_orbit`)."""
        try:
            run = self.run(state, cycles)
        except EngineError as error:
            raise CycleError(str(error)) from None
        if not run.stopped:
            raise CycleError(f"fewer than {cycles} turn-ons in {self.max_time * cycles:g} s")
        self.remember(run.final_state, run.final_topology)
        return run.final_state

    def advance(self, state):
        """The engine's cycle from ``state``, a spurious re-trigger merged.

        A state exactly on the turn-on surface can be read by the engine as
        still off (the stored base charge a rounding error below zero); it
        then turns on again picoseconds later, and that turn-on saturates
        (it is the same on-time).  That sliver is joined to the following
        full cycle, so the map always spans one real period.  (Active
        excursions at turn-off are not turn-ons at all: the switch is cut
        off again before it saturates, :func:`rcc.engine.simulate.turn_on_indices`.)
        """
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
        self.remember(result.end_state, result.end_topology)
        del self.known[:-KNOWN_ENDS]
        return result


def _nudge(circuit, state, topology):
    """Carry ``state`` along the flow of ``topology`` for up to NUDGE_TIME,
    staying inside the topology (no guard crossed).  Returns the new state,
    the time and the transition matrix."""
    top = circuit.topology(topology)
    n = state.size
    duration = NUDGE_TIME
    for _ in range(12):
        exponential = affine_flow(top, duration)
        moved = exponential[:n, :n] @ state + exponential[:n, n]
        values = top.guard_gradients @ moved + top.guard_offsets
        if np.all(values > 0.0):
            return moved, duration, exponential[:n, :n]
        duration *= 0.25
    return state, 0.0, np.eye(n)


def _prepend_nudge(result, state, duration, transition):
    """The engine's cycle with the nudge segment put back in front."""
    if duration == 0.0:
        return replace(result, start_state=np.asarray(state, dtype=float))
    first = result.segments[0]
    segments = (replace(first, start=0.0, duration=first.duration + duration,
                        start_state=np.asarray(state, dtype=float),
                        transition=first.transition @ transition),) + tuple(
        replace(segment, start=segment.start + duration) for segment in result.segments[1:])
    events = tuple(replace(event, time=event.time + duration) for event in result.events)
    return replace(result, start_state=np.asarray(state, dtype=float),
                   period=result.period + duration, segments=segments, events=events,
                   monodromy=result.monodromy @ transition)


def _join_cycles(first, second):
    """One engine cycle result spanning two consecutive ones."""
    shift = first.period
    segments = tuple(first.segments) + tuple(
        replace(segment, start=segment.start + shift) for segment in second.segments)
    events = tuple(first.events) + tuple(
        replace(event, time=event.time + shift) for event in second.events)
    return replace(second, start_state=first.start_state, start_topology=first.start_topology,
                   period=first.period + second.period, segments=segments, events=events,
                   monodromy=second.monodromy @ first.monodromy)
