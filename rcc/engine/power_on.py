"""The supply from power-on: the engine from discharged capacitors until it
settles, and the kind of operation it settles into.

:func:`run_from_power_on` switches the bus on at ``t = 0`` with every
capacitor empty (:func:`rcc.engine.simulate.power_on_state`), as a real
supply starts, simulates long enough to settle and classifies the run with
:func:`rcc.operation.classify_operation`: regular switching, bursts,
irregular switching, lock-up far below the regulated output, or no
oscillation.  It answers what the periodic-steady-state solver
(:mod:`rcc.engine.pss`) cannot: which orbit the supply actually reaches from
power-on, and how long it takes.

Duration
--------
The planned duration is the start-up delay (twice the time the start-up
current ``V_bus / R_start`` takes to charge the drive capacitor by ``Vbe``)
plus the longest of
:data:`MIN_DURATION`, :data:`MIN_CYCLES` periods at the expected
boundary-conduction frequency, and :data:`SETTLE_TIME_CONSTANTS` times the
slowest of the output time constant ``C_out V_expected / I_load`` and the
regulation filter's ``C_aux R_series``, capped at ``max_duration``.  After it,
the run is extended by half its length at a time while the last two windows
of :data:`WINDOW_FRACTION` of the elapsed time differ by more than
:data:`SETTLED_DRIFT` of the expected output in mean output, or by more than
:data:`SETTLED_RATE` in turn-on count, up to ``max_duration``; the result
says whether it settled.  The last window is the one classified.

The engine is integrated in chunks; of each chunk only the switching events,
the maximum primary current between candidate turn-ons and the output
voltage averaged over bins of at least two expected periods are kept, so a
long run needs little memory.
"""

from __future__ import annotations

import math
import time as _clock
from dataclasses import dataclass, field

import numpy as np

from rcc.design import Design, Load
from rcc.engine.circuit import SWITCH_STATES, EngineError, build_circuit
from rcc.engine.simulate import power_on_state, simulate, turn_on_indices
from rcc.operation import SETTLING_BAND, Operation, classify_operation, settling_time

__all__ = ["PowerOnRun", "run_from_power_on", "expected_output_voltage", "planned_duration",
           "power_on_bus_voltage",
           "MIN_DURATION", "MIN_CYCLES", "SETTLE_TIME_CONSTANTS", "MAX_DURATION",
           "WINDOW_FRACTION", "SETTLED_DRIFT", "SETTLED_RATE", "ASSUMED_EFFICIENCY"]

#: Shortest planned run [s].
MIN_DURATION = 5e-3
#: Fewest expected switching periods in the planned run [1].
MIN_CYCLES = 500
#: Planned run in units of the slowest output or regulation time constant
#: (the regulation loop settles faster than the open-loop constant; the run
#: is extended while it has not settled) [1].
SETTLE_TIME_CONSTANTS = 1.0
#: Longest run by default [s].
MAX_DURATION = 0.25
#: Settled window as a fraction of the elapsed time [1].
WINDOW_FRACTION = 0.2
#: Settled: largest change of the mean output between the last two windows,
#: relative to the expected output [1].
SETTLED_DRIFT = 0.005
#: Settled: largest relative change of the turn-on count between the last two windows [1].
SETTLED_RATE = 0.1
#: Efficiency assumed for the AC bus estimate (bulk valley at the load power
#: over this) when no bus voltage is given  # common practice
ASSUMED_EFFICIENCY = 0.8
#: Recorded samples per expected switching period (bounds the step) [1].
SAMPLES_PER_PERIOD = 40
#: Output bins: at least this many expected periods each [1].
BIN_PERIODS = 2.0
#: Chunks of the planned run [1].
CHUNKS = 4
_OFF, _ACTIVE = SWITCH_STATES.index("off"), SWITCH_STATES.index("active")


@dataclass(frozen=True)
class PowerOnRun:
    """The engine run from power-on and the operation it settles into.

    Attributes
    ----------
    kind : str
        ``regular``, ``burst``, ``irregular``, ``lockup``, ``none``
        (:data:`rcc.operation.KINDS`) or ``failed`` (the engine stopped;
        ``message`` says why).
    frequency : float
        Mean pulse rate over the settled window [Hz].
    peak_current : float
        Mean per-cycle peak primary current over the window [A].
    output_voltage : float
        Mean output voltage over the window [V].
    burst_period : float
        Burst period (0 unless a burst) [s].
    pulses_per_burst : float
        Mean pulses per burst (0 unless a burst) [1].
    time_to_regulation : float or None
        First instant after which the bin-averaged output stays within
        :data:`rcc.operation.SETTLING_BAND` of its final value (or within its
        own steady ripple, half the peak-to-peak over the settled window,
        where that is wider: bursts); ``None`` when it never does or the
        supply does not regulate (lock-up, none, failed) [s].
    settled : bool
        The last two windows agree (module docstring); False if the run hit
        ``max_duration`` first or failed.
    operation : Operation or None
        The classifier's full result (None if failed).
    line_voltage : float
        RMS line (AC input) or DC input voltage [V].
    bus_voltage : float
        DC bus the engine ran at [V].
    load : Load
        The load.
    temperature : float
        Device temperature [K].
    hfe : float
        Switch current gain at 25 degC [1].
    expected_output : float
        Output the design regulates to (target, else the regulation hold point) [V].
    planned_duration : float
        Duration planned from the time constants [s].
    duration : float
        Simulated time [s].
    events : int
        Switching events simulated [1].
    wall_time : float
        Computing time [s].
    message : str
        The engine's error for a failed run, else empty.
    turn_on_times : ndarray
        All turn-on instants [s].
    peak_currents : ndarray
        Peak primary current of each cycle [A].
    time : ndarray
        Centres of the output bins [s].
    output : ndarray
        Bin-averaged output voltage [V].
    final_state : ndarray
        Engine state at the end (order of ``state_names``; empty if failed)
        [state units].
    state_names : tuple of str
        Names of the engine's state variables.
    """

    kind: str
    frequency: float
    peak_current: float
    output_voltage: float
    burst_period: float
    pulses_per_burst: float
    time_to_regulation: float | None
    settled: bool
    operation: Operation | None
    line_voltage: float
    bus_voltage: float
    load: Load
    temperature: float
    hfe: float
    expected_output: float
    planned_duration: float
    duration: float
    events: int
    wall_time: float
    message: str = ""
    turn_on_times: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    peak_currents: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    time: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    output: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    final_state: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    state_names: tuple = ()

    def to_json(self) -> dict:
        """JSON-ready summary (SI units; no arrays, no NaN)."""
        return {
            "kind": self.kind, "frequency_hz": self.frequency,
            "peak_current_a": self.peak_current,
            "strongest_peak_a": self.operation.strongest_peak if self.operation else 0.0,
            "output_v": self.output_voltage,
            "burst_period_s": self.burst_period, "pulses_per_burst": self.pulses_per_burst,
            "time_to_regulation_s": self.time_to_regulation, "settled": self.settled,
            "line_v": self.line_voltage, "bus_v": self.bus_voltage, "load": self.load.text(),
            "temperature_c": self.temperature - 273.15, "hfe": self.hfe,
            "expected_output_v": self.expected_output,
            "planned_duration_s": self.planned_duration, "duration_s": self.duration,
            "events": self.events, "wall_time_s": self.wall_time, "message": self.message,
        }


def expected_output_voltage(design: Design, temperature: float) -> float:
    """Output voltage the design regulates to [V].

    Parameters
    ----------
    design : Design
    temperature : float
        Temperature [K].

    Returns
    -------
    float
        ``output.voltage_target`` if given, else the output at which the
        regulation path alone holds the limiter on
        (:func:`rcc.cycle.hold_output_voltage`), else 0 (no reference: lock-up
        is not assessed) [V].
    """
    if design.output.voltage_target is not None:
        return float(design.output.voltage_target)
    from rcc.cycle import hold_output_voltage

    hold = hold_output_voltage(design, temperature)
    return 0.0 if hold is None else float(hold)


def planned_duration(design: Design, bus_voltage: float, load: Load, expected_output: float,
                     max_duration: float = MAX_DURATION) -> tuple[float, float]:
    """Planned run length and the expected switching frequency.

    Parameters
    ----------
    design : Design
    bus_voltage : float
        Bus voltage [V].
    load : Load
        The load.
    expected_output : float
        Output the design regulates to [V].
    max_duration : float
        Cap [s].

    Returns
    -------
    duration : float
        Planned duration (module docstring) [s].
    frequency : float
        Boundary-conduction frequency at the expected output and load power
        (:func:`rcc.flyback.bcm_frequency`, input power = load power /
        :data:`ASSUMED_EFFICIENCY`), clipped to 1 kHz..1 MHz [Hz].
    """
    from rcc.flyback import bcm_frequency, reflected_voltage

    tr, out = design.transformer, design.output
    vo = expected_output if expected_output > 0 else 1.0
    power = max(float(load.power(vo)), 1e-3 * vo) / ASSUMED_EFFICIENCY
    reflected = float(reflected_voltage(vo, out.rectifier_drop, tr.primary_turns,
                                        tr.output_turns))
    frequency = float(np.clip(bcm_frequency(power, bus_voltage, reflected,
                                            tr.magnetizing_inductance), 1e3, 1e6))
    current = float(load.current(vo))
    tau_out = out.capacitance * vo / current if current > 0 else max_duration
    reg = design.regulation
    tau_aux = (reg.filter_capacitance * reg.series_resistance
               if reg.method == "feedback-winding" else 0.0)
    # the start-up current charging the drive capacitor to about one Vbe, twice
    start_delay = (2.0 * design.drive.capacitance * design.switch.vbe
                   * design.startup.resistance / bus_voltage)
    settle = max(MIN_DURATION, MIN_CYCLES / frequency,
                 SETTLE_TIME_CONSTANTS * max(tau_out, tau_aux))
    return float(min(max_duration, start_delay + settle)), frequency


def power_on_bus_voltage(design: Design, line_voltage: float, load: Load,
                         temperature: float) -> float:
    """Bus the engine from power-on holds by default at a line voltage.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float
        RMS line voltage (AC input) or DC input voltage [V].
    load : Load
        The load (one value).
    temperature : float
        Device temperature [K] (sets the expected output).

    Returns
    -------
    float
        The DC input, or for AC input the bulk-capacitor valley
        (:func:`rcc.mains.bus_voltage`) at the load power at the expected
        output over :data:`ASSUMED_EFFICIENCY`; 0 where the bulk capacitor
        cannot carry that power [V].
    """
    from rcc.mains import bus_voltage as mains_bus

    expected = expected_output_voltage(design, temperature)
    power = float(load.power(expected if expected > 0 else 1.0)) / ASSUMED_EFFICIENCY
    return float(mains_bus(design, float(line_voltage), power))


def run_from_power_on(design: Design, line_voltage: float, load, *, temperature=None,
                      hfe=None, duration=None, bus_voltage=None,
                      max_duration: float = MAX_DURATION) -> PowerOnRun:
    """Simulate the supply from power-on until it settles, and classify it.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : float
        RMS line voltage (AC input) or DC input voltage [V].
    load : Load or str
        A :class:`rcc.design.Load` or a string with a unit (``"0.3 A"``,
        ``"40 ohm"``, ``"4 W"``).
    temperature : float, optional
        Device temperature [K]; default 25 degC clipped into the design's range.
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.
    duration : float, optional
        Run exactly this long (no extension) [s]; default planned from the
        time constants and extended until settled (module docstring).
    bus_voltage : float, optional
        DC bus the engine runs at [V]; default the DC input, or for AC input
        the bulk-capacitor valley (:func:`rcc.mains.bus_voltage`) at the load
        power at the expected output over :data:`ASSUMED_EFFICIENCY`.  The
        engine holds the bus constant (no line ripple).
    max_duration : float
        Longest run when ``duration`` is not given [s].

    Returns
    -------
    PowerOnRun
        With ``kind == "failed"`` and the engine's message if the engine
        stopped (event storm, inconsistent circuit); never raises for that.

    Raises
    ------
    ValueError
        On a bad line voltage, load, bus or duration.
    """
    from rcc.cycle import reference_temperature
    from rcc.engine.pss import parse_load

    started = _clock.perf_counter()
    line = float(line_voltage)
    if not (math.isfinite(line) and line > 0):
        raise ValueError(f"line_voltage = {line_voltage!r}: expected a positive voltage [V]")
    load = parse_load(design, load)
    temperature = reference_temperature(design) if temperature is None else float(temperature)
    hfe_value = design.switch.hfe_typ if hfe is None else float(hfe)
    expected = expected_output_voltage(design, temperature)
    if bus_voltage is None:
        bus_voltage = power_on_bus_voltage(design, line, load, temperature)
    bus = float(bus_voltage)
    if not (math.isfinite(bus) and bus > 0):
        raise ValueError(f"bus_voltage = {bus_voltage!r}: expected a positive voltage [V]")
    planned, frequency = planned_duration(design, bus, load, expected, max_duration)
    fixed = duration is not None
    if fixed:
        planned = float(duration)
        if not (math.isfinite(planned) and planned > 0):
            raise ValueError(f"duration = {duration!r}: expected a positive time [s]")
    common = dict(line_voltage=line, bus_voltage=bus, load=load, temperature=temperature,
                  hfe=hfe_value, expected_output=expected, planned_duration=planned)
    circuit = build_circuit(design, bus, load, temperature, hfe_value)
    record = _Record(circuit, bin_width=max(BIN_PERIODS / frequency, planned / 20000.0))
    max_step = 1.0 / (SAMPLES_PER_PERIOD * frequency)
    x, code, t = power_on_state(circuit), None, 0.0
    limit = planned if fixed else max(planned, float(max_duration))
    target = planned
    settled = False
    try:
        while True:
            chunk_end = min(target, t + planned / CHUNKS)
            trace = simulate(circuit, x, chunk_end, topology=code, t_start=t,
                             max_step=max_step)
            record.add(trace)
            x, code, t = trace.final_state, trace.final_topology, trace.final_time
            if t < target * (1.0 - 1e-12):
                continue
            settled = bool(record.settled(t, expected))
            if fixed or settled or t >= limit * (1.0 - 1e-12):
                break
            target = min(limit, t + 0.5 * planned)
    except (EngineError, ArithmeticError, np.linalg.LinAlgError) as error:
        return PowerOnRun(kind="failed", frequency=0.0, peak_current=0.0, output_voltage=0.0,
                          burst_period=0.0, pulses_per_burst=0.0, time_to_regulation=None,
                          settled=False, operation=None, duration=t, events=record.events,
                          wall_time=_clock.perf_counter() - started,
                          message=f"{type(error).__name__}: {error}", **common)
    turn_ons, peaks = record.turn_ons(t)
    times, output = record.output_series()
    window_start = t - WINDOW_FRACTION * t
    operation = classify_operation(turn_ons, peaks, times, output, expected_output=expected,
                                   window_start=window_start, end_time=t)
    regulated = operation.kind in ("regular", "burst", "irregular")
    to_regulation = None
    if regulated and times.size:
        # the band is 2 % of the final output or the output's own steady
        # ripple (half its peak-to-peak in the window), whichever is wider
        steady = output[times >= window_start]
        ripple = 0.5 * float(np.ptp(steady)) if steady.size else 0.0
        to_regulation = settling_time(times, output, band=SETTLING_BAND,
                                      final_value=operation.output_voltage,
                                      absolute_band=ripple)
    return PowerOnRun(kind=operation.kind, frequency=operation.frequency,
                      peak_current=operation.peak_current,
                      output_voltage=operation.output_voltage,
                      burst_period=operation.burst_period,
                      pulses_per_burst=operation.pulses_per_burst,
                      time_to_regulation=to_regulation, settled=settled, operation=operation,
                      duration=t, events=record.events,
                      wall_time=_clock.perf_counter() - started, turn_on_times=turn_ons,
                      peak_currents=peaks, time=times, output=output,
                      final_state=np.array(x, dtype=float), state_names=circuit.state_names,
                      **common)


class _Record:
    """What a long run keeps of its chunks: events, the largest primary
    current between candidate turn-ons, and the bin-averaged output."""

    def __init__(self, circuit, bin_width: float):
        self.switch = circuit.device_index("switch")
        self.weight = circuit.weights[self.switch]
        self.radix = circuit.radices[self.switch]
        # kind of every switch state (the junction chords of one region are
        # several states of one kind)
        self.kinds = np.array([SWITCH_STATES.index(kind)
                               for kind in circuit.state_kinds("switch")], dtype=np.int64)
        self.bin_width = float(bin_width)
        self.event_parts: list = []
        self.candidate_times: list = []
        self.segment_max: list = []          # max current after each candidate
        self.open_max = -math.inf            # before the first candidate, then after the last
        self.bin_sums: list = []
        self.carry = 0.0                     # integral of the unfinished bin so far
        self.bin_start = 0.0
        self.events = 0

    def add(self, trace) -> None:
        self.events += int(trace.event_times.size)
        self.event_parts.append((trace.event_times, trace.event_devices, trace.event_from,
                                 trace.event_to))
        # candidate turn-ons (cut-off -> active) of this chunk
        old = self.kinds[(trace.event_from // self.weight) % self.radix]
        new = self.kinds[(trace.event_to // self.weight) % self.radix]
        mask = (trace.event_devices == self.switch) & (old == _OFF) & (
            new == _ACTIVE)
        candidates = trace.event_times[mask]
        times, current = trace.times, trace["primary_current"]
        cuts = np.searchsorted(times, candidates, side="right")
        pieces = np.split(current, cuts)
        first = pieces[0]
        if first.size:
            self.open_max = max(self.open_max, float(first.max()))
        for piece, when in zip(pieces[1:], candidates):
            if self.candidate_times:
                self.segment_max.append(self.open_max)
            self.candidate_times.append(float(when))
            self.open_max = float(piece.max()) if piece.size else -math.inf
        self._bin(times, trace["output_voltage"])

    def _bin(self, times, values) -> None:
        """Time-weighted bin means of the output, exact for the piecewise-
        linear interpolation of the samples."""
        if times.size < 2:
            return
        cumulative = np.concatenate(([0.0], np.cumsum(0.5 * (values[1:] + values[:-1])
                                                      * np.diff(times))))
        t1 = float(times[-1])
        edges = self.bin_start + self.bin_width * np.arange(
            1, int((t1 - self.bin_start) / self.bin_width) + 1)
        at_edges = np.interp(edges, times, cumulative)
        previous = 0.0
        for value in at_edges:
            self.bin_sums.append((self.carry + value - previous) / self.bin_width)
            self.carry, previous = 0.0, value
        self.carry += float(cumulative[-1]) - previous
        if edges.size:
            self.bin_start = float(edges[-1])

    def output_series(self):
        means = np.asarray(self.bin_sums, dtype=float)
        centres = self.bin_width * (np.arange(means.size) + 0.5)
        return centres, means

    def turn_ons(self, end: float):
        if not self.event_parts:
            return np.empty(0), np.empty(0)
        event_t, devices, old, new = (np.concatenate(p) for p in zip(*self.event_parts))
        indices = turn_on_indices(devices, old, new, self.switch, self.weight, self.radix,
                                  kinds=self.kinds)
        times = event_t[indices]
        candidates = np.asarray(self.candidate_times)
        segment_max = np.asarray(self.segment_max + [self.open_max])
        if times.size == 0:
            return times, np.empty(0)
        starts = np.searchsorted(candidates, times)
        peaks = np.maximum.reduceat(segment_max, starts)
        return times, peaks

    def settled(self, end: float, expected: float) -> bool:
        times, means = self.output_series()
        window = WINDOW_FRACTION * end
        if times.size < 4:
            return False
        last = means[times >= end - window]
        before = means[(times >= end - 2 * window) & (times < end - window)]
        if last.size == 0 or before.size == 0:
            return False
        scale = expected if expected > 0 else max(abs(float(last.mean())), 1e-3)
        if abs(float(last.mean()) - float(before.mean())) > SETTLED_DRIFT * scale:
            return False
        turn_ons, _ = self.turn_ons(end)
        n_last = np.count_nonzero(turn_ons >= end - window)
        n_before = np.count_nonzero((turn_ons >= end - 2 * window) & (turn_ons < end - window))
        if max(n_last, n_before) < 3:
            return True
        return abs(n_last - n_before) <= SETTLED_RATE * max(n_last, n_before)
