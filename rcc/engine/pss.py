"""Periodic steady state of a design's free-running oscillation: the circuit
engine's turn-on Poincaré map solved by Newton's method, the cycle's figures,
one period of its waveforms and its Floquet multipliers.

:func:`periodic_steady_state` builds the circuit of a design with the
time-domain engine, warms up with a transient from power-on, finds the fixed
point of the turn-on return map (:func:`rcc.engine.shooting.find_periodic_orbit`
on :class:`rcc.engine.cycle_map.CircuitCycleMap`) and returns a
:class:`PeriodicSteadyState`; :func:`poincare_map` gives the return map at
such a result.

The rest of the periodic-steady-state code lives in:

- :mod:`rcc.engine.shooting`: Newton and Newton-Picard on any cycle map,
  the transient fall-back (:func:`find_periodic_orbit`,
  :func:`newton_picard_step`, :class:`PeriodicOrbit`, the errors);
- :mod:`rcc.engine.cycle_map`: the engine as a cycle map (chained events,
  restart nudge, re-triggers);
- :mod:`rcc.engine.plotting`: :func:`plot_periodic_steady_state`;
- :mod:`rcc.engine.comparison`: the cycle model checked by the engine
  (:func:`verify_operating_points`) and :func:`benchmark_iterations`.

Their public names are importable from here as well.

Notes
-----
The oscillator is autonomous, so its period is unknown; the Poincaré
section at the turn-on event removes the period and the phase, and a
periodic steady state is a fixed point ``P(x*) = x*`` of the return map
(shooting method of Aprille & Trick 1972 with the section of Parker & Chua
1989, sec. 3.3).  ``DP`` comes from the segment exponentials and the
saltation matrices at the switching events (di Bernardo et al. 2008, ch. 2;
for power converters El Aroudi et al. 2015); its eigenvalues on the
section's tangent space are the non-trivial Floquet multipliers.

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

import numpy as np

from rcc.design import Load
from rcc.engine.circuit import SIGNAL_NAMES, EngineError, build_circuit
from rcc.engine.comparison import VerifiedPoint, benchmark_iterations, verify_operating_points
from rcc.engine.cycle_map import CircuitCycleMap, affine_flow
from rcc.engine.floquet import CycleError
from rcc.engine.plotting import plot_periodic_steady_state
from rcc.engine.shooting import (FallbackWarning, PeriodicOrbit, PeriodicSteadyStateError,
                                 find_periodic_orbit, newton_picard_step)
from rcc.engine.simulate import CyclePower, cycle_power, power_on_state, simulate

__all__ = [
    "CycleWaveform",
    "PeriodicSteadyState",
    "periodic_steady_state",
    "parse_load",
    "poincare_map",
    # re-exported from rcc.engine.shooting, rcc.engine.plotting, rcc.engine.comparison
    "FallbackWarning",
    "PeriodicOrbit",
    "PeriodicSteadyStateError",
    "find_periodic_orbit",
    "newton_picard_step",
    "plot_periodic_steady_state",
    "VerifiedPoint",
    "verify_operating_points",
    "benchmark_iterations",
]

#: Signals kept in the one-period waveform of a :class:`PeriodicSteadyState`.
WAVEFORM_SIGNALS = ("collector_voltage", "primary_current", "base_current",
                    "limiter_current", "feedback_voltage", "output_voltage",
                    "output_rectifier_current", "clamp_current")
#: Samples per period of the stored waveform (at least, events added) [1].
WAVEFORM_SAMPLES = 2000
#: Switching cycles of the warm-up transient before Newton's method [1].
WARMUP_CYCLES = 1000
#: Convergence tolerance on the scaled Poincaré-map residual [1]: the engine
#: locates switching instants to about 1e-15 s, so the map is smooth to
#: about 1e-12 of the state scale; 1e-9 leaves margin.
CIRCUIT_TOLERANCE = 1e-9
#: Multipliers below this modulus are left to simple iteration in the
#: circuit's solve (Newton-Picard, :func:`newton_picard_step`; 0 would give
#: plain Newton on every direction) [1].
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
    output_rectifier_current : ndarray
        Output rectifier (secondary) current [A].
    clamp_current : ndarray
        Clamp current [A] (zero without a clamp).
    """

    time: np.ndarray
    collector_voltage: np.ndarray
    primary_current: np.ndarray
    base_current: np.ndarray
    limiter_current: np.ndarray
    feedback_voltage: np.ndarray
    output_voltage: np.ndarray
    output_rectifier_current: np.ndarray
    clamp_current: np.ndarray


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
            "stored_power_w": self.power.stored,
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


def _default_line(design, line_voltage):
    if line_voltage is None:
        return float(design.input.line_voltages[1])
    line_voltage = float(line_voltage)
    if not (np.isfinite(line_voltage) and line_voltage > 0):
        raise ValueError(f"line_voltage = {line_voltage!r}: expected a positive voltage [V]")
    return line_voltage


def _model_point(design, line, load, temperature, hfe):
    """The cycle model's operating point (:func:`rcc.cycle.operating_points`)
    at one line, load, temperature and gain: the bus voltage and the
    warm-start values here, the reference of :func:`verify_operating_points`."""
    from rcc.cycle import operating_points

    # one-element arrays: the vectorized model is exercised on arrays
    return operating_points(design, np.atleast_1d(float(line)), load,
                            np.atleast_1d(float(temperature)), np.atleast_1d(float(hfe)))


def periodic_steady_state(design, line_voltage=None, load=None, temperature=None, hfe=None,
                          *, bus_voltage=None, warmup_cycles: int = WARMUP_CYCLES,
                          max_iterations: int = 12, fallback_cycles: int = 5000,
                          tolerance: float = CIRCUIT_TOLERANCE,
                          initial_state=None, initial_topology=None,
                          progress=None) -> PeriodicSteadyState:
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
    progress : callable, optional
        Called as ``progress(description, done, total)`` at each phase
        (cycle model, warm-up, every Newton iteration, the fall-back
        transient, the final cycle) for a progress display [-].

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
    event (Aprille & Trick 1972) then converges quadratically; a turn-on is
    a switch from cut-off to the active region that then saturates
    (:func:`rcc.engine.simulate.turn_on_indices`); see
    :func:`find_periodic_orbit`.  The bus is held constant (DC), so for AC
    input the line ripple is not in the cycle.

    The engine's cycle data is adapted before the saltation product:
    switches chained at one instant are merged into one jump timed by the
    first guard, a state on the turn-on surface is carried 1 ns along the
    on-topology's flow before the engine restarts from it, and a re-trigger
    (a turn-on within 10 % of the previous period) is joined to the cycle
    (:class:`rcc.engine.cycle_map.CircuitCycleMap`,
    ``notes/periodic_steady_state.md``).
    """
    try:
        return _periodic_steady_state(
            design, line_voltage, load, temperature, hfe, bus_voltage=bus_voltage,
            warmup_cycles=warmup_cycles, max_iterations=max_iterations,
            fallback_cycles=fallback_cycles, tolerance=tolerance,
            initial_state=initial_state, initial_topology=initial_topology,
            progress=progress or (lambda description, done=None, total=None: None))
    except (CycleError, EngineError) as error:
        # numerical trouble inside the engine is a clear error, never a traceback
        raise PeriodicSteadyStateError(
            f"the engine stopped: {error}") from error


def _periodic_steady_state(design, line_voltage, load, temperature, hfe, *, bus_voltage,
                           warmup_cycles, max_iterations, fallback_cycles, tolerance,
                           initial_state, initial_topology, progress) -> PeriodicSteadyState:
    from rcc.cycle import reference_temperature

    line = _default_line(design, line_voltage)
    load = parse_load(design, load)
    if temperature is None:
        temperature = reference_temperature(design)
    hfe_value = design.switch.hfe_typ if hfe is None else float(hfe)
    progress("cycle model: bus and warm-start values")
    point = _model_point(design, line, load, temperature, hfe_value)
    if bus_voltage is None:
        # the bus the cycle model computed this point at (the bulk valley for
        # AC input), so that the two models are compared on the same bus
        bus_voltage = float(np.ravel(point.bus_voltage)[0])
    circuit = build_circuit(design, float(bus_voltage), load, float(temperature), hfe_value)
    try:
        if initial_state is None:
            progress(f"engine: warm-up, {warmup_cycles} switching cycles from power-on")
            x, topology = _warm_up(design, circuit, point, warmup_cycles, bus_voltage, load)
        else:
            x, topology = np.asarray(initial_state, dtype=float), int(initial_topology)
        first = CircuitCycleMap(circuit, topology, 0.1).advance(x)
    except (EngineError, CycleError) as error:
        raise PeriodicSteadyStateError(f"the engine failed during the warm-up: {error}") from None
    scale = _state_scale(circuit, first)
    cycle_map = CircuitCycleMap(circuit, topology, max(0.02, 100.0 * first.period), state=x,
                                scale=scale, reference_period=first.period)
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always", FallbackWarning)
        orbit = find_periodic_orbit(cycle_map, x, scale=scale, tolerance=tolerance,
                                    max_iterations=max_iterations,
                                    fallback_cycles=fallback_cycles,
                                    picard_threshold=PICARD_THRESHOLD,
                                    transient=cycle_map.transient, progress=progress)
    progress("the cycle at the solution: multipliers, losses")
    flags = _solve_flags(circuit, cycle_map, orbit)
    # the cycle at the solution, with its full event list, for the figures
    try:
        final = cycle_map.advance(orbit.state)
    except CycleError as error:
        raise PeriodicSteadyStateError(f"the engine failed on the final cycle: {error}") from None
    return _summarise(circuit, line, float(bus_voltage), load, float(temperature),
                      hfe_value, orbit, final, tuple(flags), cycle_map.topology_for(orbit.state),
                      scale)


def _warm_up(design, circuit, point, warmup_cycles, bus_voltage, load):
    """State and topology at a turn-on after ``warmup_cycles`` cycles from
    power-on, the output and regulation capacitors precharged to the cycle
    model's output voltage when it runs (``notes/circuit.md``)."""
    names = circuit.state_names
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
    return warm.final_state, warm.final_topology


def _state_scale(circuit, cycle_result):
    """Typical magnitude of each state variable over one cycle, with floors
    of 1 mV and 1 uA, for the scaled residual [state units]."""
    _, sample_states, _ = _sample_cycle(circuit, cycle_result, 200)
    scale = np.max(np.abs(sample_states), axis=0)
    scale = np.maximum(scale, 1e-9 * np.maximum(scale, 1e-300) + 1e-300)
    for k, name in enumerate(circuit.state_names):
        if name.startswith("v_"):
            scale[k] = max(scale[k], 1e-3)
        elif name.startswith("i_"):
            scale[k] = max(scale[k], 1e-6)
    return scale


def _solve_flags(circuit, cycle_map, orbit) -> list:
    """The multiplier flags plus what the solve did (fall-back, extra
    transient, no convergence and the switching pattern seen instead)."""
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
    return flags


#: Cycles observed to describe a switching pattern that is not period-1 [1].
PATTERN_CYCLES = 400


def _switching_pattern(circuit, cycle_map, state) -> str:
    """Describe the switching when no period-1 orbit is found: the spread of
    the turn-on intervals over PATTERN_CYCLES cycles (bursts, period-k,
    irregular).  Empty if the engine cannot run."""
    try:
        run = cycle_map.run(state, PATTERN_CYCLES)
    except (EngineError, CycleError):
        return ""
    turn_ons = run.turn_on_times()   # the engine's turn-on rule (saturation follows)
    if len(turn_ons) < 3:
        return ""
    intervals = np.diff(turn_ons)
    short, long = float(np.min(intervals)), float(np.max(intervals))
    text = (f"switching pattern over {len(intervals)} cycles: turn-on intervals "
            f"{short * 1e6:.4g} to {long * 1e6:.4g} us")
    if long > 5.0 * np.median(intervals):
        text += " (bursts: long pauses between groups of cycles, hiccup or burst mode)"
    elif len(intervals) >= 4 and np.allclose(intervals[2::2],
                                             intervals[:-2:2][:len(intervals[2::2])],
                                             rtol=1e-3) and long > 1.01 * short:
        text += " (period two: alternating intervals)"
    else:
        text += " (irregular)"
    return text


def _summarise(circuit, line, bus, load, temperature, hfe, orbit, final, flags,
               topology, scale):
    times, _, signals = _sample_cycle(circuit, final, WAVEFORM_SAMPLES)
    closing = orbit.cycle.period
    keep = times <= closing
    times = times[keep]
    signals = {name: values[keep] for name, values in signals.items()}
    switch = circuit.device_index("switch")
    switch_names = circuit.state_kinds("switch")
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


def _sample_cycle(circuit, cycle_result, samples: int):
    """States and signals over one engine cycle: uniform samples in every
    segment plus its ends.  Returns ``(times, states, signals)``.

    Zero-length segments are left out: they are the intermediate topologies
    of a chain of switches at one instant (a device's switch violating
    another device's guard, resolved before time advances), not states the
    circuit is in.  Their signals are those of an inconsistent network (for
    example the limiter still saturated while the switch base is already in
    base-emitter breakdown: -650 mA through the limiter and +650 mA into the
    base on the legacy worked case) and drew spikes on the plots that no
    circuit produces.  :func:`rcc.engine.simulate.simulate` records only the
    settled topology at an event for the same reason."""
    period = float(cycle_result.period) if cycle_result.period > 0 else 1.0
    spacing = period / samples
    times, states, codes = [], [], []
    segments = [segment for segment in cycle_result.segments if segment.duration > 0] \
        or list(cycle_result.segments[:1])
    for segment in segments:
        top = circuit.topology(segment.topology)
        x = np.asarray(segment.start_state, dtype=float)
        n = x.size
        count = int(min(max(np.ceil(segment.duration / spacing), 8), 20 * samples))
        if segment.duration <= 0:
            count = 1
        step = affine_flow(top, segment.duration / count) if segment.duration > 0 else None
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
        for k, name in enumerate(SIGNAL_NAMES):
            signals.setdefault(name, np.empty(len(codes)))[mask] = values[:, k]
    return times, states, signals


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
    circuit = build_circuit(design, result.bus_voltage, result.load, result.temperature,
                            result.hfe)
    return CircuitCycleMap(circuit, result.turn_on_topology, max(0.02, 100.0 * result.period),
                           state=result.state, scale=result.scale,
                           reference_period=result.period)
