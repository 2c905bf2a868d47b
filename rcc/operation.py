"""Kind of operation of a time-domain run: regular, burst, irregular, lock-up or none.

Any time-domain model of the supply (the piecewise-linear engine, a smooth
reference, a measurement) yields the same record: the switch turn-on
instants, the peak primary current of every cycle and the output-voltage
series.  :func:`classify_operation` reads the kind of operation from that
record over a settled window, with the figures that describe it, and
:func:`settling_time` gives the time the output needs to stay within a band
of its final value.  Both are pure functions of arrays and import nothing
of the models, so every model's run is judged by one rule.

Rules (over the window ``[window_start, end_time]``):

``none``
    Fewer than :data:`MIN_TURN_ONS` turn-ons in the whole record: the circuit
    never oscillated.
``lockup``
    It oscillated at some time, but the mean output over the window is below
    :data:`LOCKUP_FRACTION` of the output the design regulates to
    (``expected_output``): the supply switches (or idles after a few cycles)
    far below regulation, as when the current limiter or an unreset drive
    capacitor holds it at a low output.  Checked first, whatever the
    switching pattern.  Its rate and mean output are taken over whole
    restart periods: between the first and the last restart in the window (a
    restart is a turn-on after a pause longer than :data:`BURST_GAP` times the
    shortest interval in the window, or every turn-on where they are evenly
    spaced), or over the record's last period if the window holds one.
``regular``
    Period-1 switching: every turn-on interval in the window within
    :data:`REGULAR_SPREAD` of their median.
``burst``
    Groups of pulses separated by pauses: at least :data:`MIN_BURSTS`
    intervals between turn-ons longer than :data:`BURST_GAP` times the median
    interval inside the groups; or a repeating pattern of
    ``k`` intervals (``2 <= k <= MAX_PATTERN``, every interval within
    :data:`PATTERN_TOLERANCE` of the one ``k`` earlier), a group of ``k``
    pulses.
``irregular``
    Anything else that switches.

The thresholds are choices of this module, not published values; they are
wide enough that the engine's numerical noise (switching instants to about
1e-15 s) cannot move a verdict, and narrow enough to separate the patterns
the issue tracker describes (boundary conduction, bursts of about 25 pulses
with pauses 50 times a pulse interval, period-2)  # common practice
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "KINDS",
    "Operation",
    "classify_operation",
    "settling_time",
    "window_mean",
    "MIN_TURN_ONS",
    "LOCKUP_FRACTION",
    "REGULAR_SPREAD",
    "BURST_GAP",
    "MIN_BURSTS",
    "MAX_PATTERN",
    "PATTERN_TOLERANCE",
    "SETTLING_BAND",
]

#: Kinds of operation, in the order the rules are tried (``failed`` is for a
#: run that could not be completed, set by the caller, never by the classifier).
KINDS = ("none", "lockup", "regular", "burst", "irregular", "failed")
#: Fewest turn-ons in a record for the circuit to count as oscillating [1].
MIN_TURN_ONS = 3
#: Lock-up: mean output in the window below this fraction of the expected output [1].
LOCKUP_FRACTION = 0.5
#: Regular: largest relative deviation of a turn-on interval from the median [1].
REGULAR_SPREAD = 0.05
#: Burst: a pause is an interval longer than this many median intervals [1].
BURST_GAP = 3.0
#: Burst: fewest pauses between turn-ons in the window (two give one burst period) [1].
MIN_BURSTS = 2
#: Longest repeating interval pattern counted as a burst [intervals].
MAX_PATTERN = 8
#: Repeating pattern: largest relative difference of an interval from the one
#: a pattern length earlier [1].
PATTERN_TOLERANCE = 0.02
#: Settling: band around the final output, relative to it [1].
SETTLING_BAND = 0.02


@dataclass(frozen=True)
class Operation:
    """Kind of operation of a run over its settled window, with its figures.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS` except ``failed``.
    frequency : float
        Mean pulse rate over the window: ``1 / median interval`` for regular
        switching, pulses per burst over the burst period for bursts, turn-ons
        per unit time otherwise; 0 when nothing switches in the window [Hz].
    peak_current : float
        Mean of the per-cycle peak primary currents in the window; 0 when
        nothing switches in the window [A].
    strongest_peak : float
        Largest per-cycle peak primary current in the window (the stress a
        burst or a lock-up puts on the switch); 0 when nothing switches in
        the window [A].
    output_voltage : float
        Time-weighted mean output voltage over the window [V].
    burst_period : float
        Time from the start of one burst to the next (mean); 0 unless
        ``kind == "burst"`` [s].
    pulses_per_burst : float
        Mean number of pulses in one burst; 0 unless ``kind == "burst"`` [1].
    pulse_interval : float
        Median interval between consecutive turn-ons in the window (inside
        bursts for a burst); 0 with fewer than two turn-ons [s].
    interval_spread : float
        Largest relative deviation of a turn-on interval in the window from
        the median; 0 with fewer than two intervals [1].
    turn_ons : int
        Turn-ons in the window [1].
    total_turn_ons : int
        Turn-ons in the whole record [1].
    window_start : float
        Start of the window [s].
    window_end : float
        End of the record [s].
    expected_output : float
        Output voltage the design regulates to, the lock-up reference; 0 if
        none was given (lock-up then not assessed) [V].
    """

    kind: str
    frequency: float
    peak_current: float
    strongest_peak: float
    output_voltage: float
    burst_period: float
    pulses_per_burst: float
    pulse_interval: float
    interval_spread: float
    turn_ons: int
    total_turn_ons: int
    window_start: float
    window_end: float
    expected_output: float

    def to_json(self) -> dict:
        """JSON-ready dict (SI units; field names with unit suffixes)."""
        return {
            "kind": self.kind, "frequency_hz": self.frequency,
            "peak_current_a": self.peak_current, "strongest_peak_a": self.strongest_peak,
            "output_v": self.output_voltage,
            "burst_period_s": self.burst_period, "pulses_per_burst": self.pulses_per_burst,
            "pulse_interval_s": self.pulse_interval, "interval_spread": self.interval_spread,
            "turn_ons": self.turn_ons, "total_turn_ons": self.total_turn_ons,
            "window_start_s": self.window_start, "window_end_s": self.window_end,
            "expected_output_v": self.expected_output,
        }


def window_mean(time, values, start: float, end: float | None = None) -> float:
    """Time-weighted mean of a sampled signal over ``[start, end]``.

    Parameters
    ----------
    time : array_like, shape (k,)
        Non-decreasing sample instants; repeated instants (a value before and
        after an event) are allowed [s].
    values : array_like, shape (k,)
        Samples [any unit].
    start : float
        Start of the window [s].
    end : float, optional
        End of the window [s]; default the last sample.

    Returns
    -------
    float
        Trapezoidal mean over the window [unit of ``values``]; the sample
        nearest to ``start`` if the window holds no interval.
    """
    time = np.asarray(time, dtype=float)
    values = np.asarray(values, dtype=float)
    if time.size == 0:
        raise ValueError("time: expected at least one sample")
    end = float(time[-1]) if end is None else float(end)
    span = end - start
    if not span > 0:
        return float(np.interp(start, time, values))
    # the samples strictly inside plus the interpolated ends; a repeated
    # instant (values before and after an event) adds a zero-width step
    inside = (time > start) & (time < end)
    grid_t = np.concatenate(([start], time[inside], [end]))
    grid_v = np.concatenate(([np.interp(start, time, values)], values[inside],
                             [np.interp(end, time, values)]))
    return float(np.trapezoid(grid_v, grid_t) / span)


def settling_time(time, values, *, band: float = SETTLING_BAND, final_value=None,
                  absolute_band: float = 0.0) -> float | None:
    """Time to regulation: the first instant after which the signal stays within
    a band of its final value.

    Parameters
    ----------
    time : array_like, shape (k,)
        Non-decreasing sample instants [s].
    values : array_like, shape (k,)
        Samples, e.g. the output voltage [V].
    band : float
        Half-width of the band relative to ``|final_value|`` [1].
    final_value : float, optional
        Final value [unit of ``values``]; default the time-weighted mean over
        the last 10 % of the record.
    absolute_band : float
        Floor of the half-width [unit of ``values``] (for a final value near 0).

    Returns
    -------
    float or None
        Settling time [s] (``time[0]`` if the signal starts inside the band);
        ``None`` if the last sample is outside the band.

    Notes
    -----
    The usual step-response settling time (e.g. K. Ogata, *Modern Control
    Engineering*, 5th ed., 2010, sec. 5-3, with a 2 % criterion), taken on the
    samples as they are: switching ripple larger than the band keeps the
    signal from settling, which is the honest answer for that band.
    """
    time = np.asarray(time, dtype=float)
    values = np.asarray(values, dtype=float)
    if time.shape != values.shape or time.size == 0:
        raise ValueError("time, values: expected two non-empty arrays of the same shape")
    if final_value is None:
        final_value = window_mean(time, values, time[0] + 0.9 * (time[-1] - time[0]))
    half = max(band * abs(float(final_value)), float(absolute_band))
    outside = np.flatnonzero(np.abs(values - final_value) > half)
    if outside.size == 0:
        return float(time[0])
    last = int(outside[-1])
    if last == time.size - 1:
        return None
    return float(time[last + 1])


def classify_operation(turn_on_times, peak_currents, time, output_voltage, *,
                       expected_output: float | None = None,
                       window_start: float | None = None,
                       end_time: float | None = None) -> Operation:
    """Classify a time-domain run: regular, burst, irregular, lock-up or none.

    Parameters
    ----------
    turn_on_times : array_like, shape (m,)
        Switch turn-on instants, increasing [s].
    peak_currents : array_like, shape (m,)
        Peak primary current of the cycle that starts at each turn-on [A].
    time : array_like, shape (k,)
        Sample instants of the output voltage, non-decreasing [s].
    output_voltage : array_like, shape (k,)
        Output voltage at the load [V].
    expected_output : float, optional
        Output the design regulates to (its target) [V]; without it lock-up
        is not assessed.
    window_start : float, optional
        Start of the settled window [s]; default the last quarter of the record.
    end_time : float, optional
        End of the record [s]; default the last output sample.

    Returns
    -------
    Operation

    Notes
    -----
    The rules and thresholds are in the module docstring.  The window should
    hold several burst periods for a burst to be recognised; with a single
    pause in it the run is reported as ``irregular``.
    """
    turn_ons = np.asarray(turn_on_times, dtype=float).ravel()
    peaks = np.asarray(peak_currents, dtype=float).ravel()
    if turn_ons.shape != peaks.shape:
        raise ValueError(f"turn_on_times and peak_currents: expected the same length, got "
                         f"{turn_ons.size} and {peaks.size}")
    if turn_ons.size > 1 and np.any(np.diff(turn_ons) <= 0):
        raise ValueError("turn_on_times: expected strictly increasing instants")
    time = np.asarray(time, dtype=float).ravel()
    output = np.asarray(output_voltage, dtype=float).ravel()
    if time.size == 0 or time.shape != output.shape:
        raise ValueError("time and output_voltage: expected non-empty arrays of one length")
    end = float(time[-1]) if end_time is None else float(end_time)
    start = float(time[0] + 0.75 * (end - time[0])) if window_start is None else float(
        window_start)
    if not start < end:
        raise ValueError(f"window_start = {start!r}: expected a time before the end {end!r} [s]")
    expected = 0.0 if expected_output is None else float(expected_output)

    mean_output = window_mean(time, output, start, end)
    in_window = (turn_ons >= start) & (turn_ons <= end)
    times_w, peaks_w = turn_ons[in_window], peaks[in_window]
    count = int(times_w.size)
    intervals = np.diff(times_w)
    median = float(np.median(intervals)) if intervals.size else 0.0
    spread = float(np.max(np.abs(intervals - median)) / median) if intervals.size else 0.0
    peak = float(np.mean(peaks_w)) if count else 0.0
    base = dict(peak_current=peak, strongest_peak=float(np.max(peaks_w)) if count else 0.0,
                output_voltage=mean_output, pulse_interval=median,
                interval_spread=spread, turn_ons=count, total_turn_ons=int(turn_ons.size),
                window_start=start, window_end=end, expected_output=expected)
    quiet = dict(frequency=0.0, burst_period=0.0, pulses_per_burst=0.0)

    if turn_ons.size < MIN_TURN_ONS:
        return Operation(kind="none", **quiet, **base)
    rate = count / (end - start)
    if expected > 0 and mean_output < LOCKUP_FRACTION * expected:
        # restarts tens of milliseconds apart leave a handful of turn-ons in
        # the window, and count / window is off by up to one restart: the
        # rate and the mean output are taken over whole restart periods
        span = _restart_span(turn_ons[turn_ons <= end], start) if count else None
        if span is not None:
            first, last, pulses = span
            rate = pulses / (last - first)
            base["output_voltage"] = window_mean(time, output, first, last)
        return Operation(kind="lockup", frequency=rate, burst_period=0.0,
                         pulses_per_burst=0.0, **base)
    if count < 2:
        # switching stopped although the output holds: a pause longer than the window
        return Operation(kind="irregular", frequency=rate, burst_period=0.0,
                         pulses_per_burst=0.0, **base)
    tail = end - times_w[-1]
    if spread <= REGULAR_SPREAD and tail <= (1.0 + REGULAR_SPREAD) * median:
        return Operation(kind="regular", frequency=1.0 / median, burst_period=0.0,
                         pulses_per_burst=0.0, **base)
    burst = _bursts(times_w, intervals)
    if burst is None:
        burst = _pattern(intervals)
    if burst is not None:
        period, pulses, inner = burst
        base["pulse_interval"] = inner
        return Operation(kind="burst", frequency=pulses / period, burst_period=period,
                         pulses_per_burst=pulses, **base)
    return Operation(kind="irregular", frequency=rate, burst_period=0.0,
                     pulses_per_burst=0.0, **base)


def _restart_span(times, start):
    """Whole restart periods of a lock-up: ``(first, last, pulses)``, the
    restarts that bound them and the turn-ons from ``first`` up to ``last``;
    None with fewer than two restarts in the record.

    A restart is a turn-on after a pause longer than BURST_GAP times the
    shortest interval ending in the window (every turn-on where they are
    evenly spaced); the restarts from ``start`` on, or the record's last two
    where the window holds fewer.
    """
    if times.size < 2:
        return None
    intervals = np.diff(times)
    recent = intervals[times[1:] >= start]
    inner = float(np.min(recent if recent.size else intervals[-1:]))
    pause = np.concatenate(([True], intervals > BURST_GAP * inner))
    restarts = times[pause] if np.count_nonzero(pause) > 1 else times
    chosen = restarts[restarts >= start]
    if chosen.size < 2:
        chosen = restarts[-2:]
    if chosen.size < 2:
        return None
    first, last = float(chosen[0]), float(chosen[-1])
    pulses = int(np.count_nonzero((times >= first) & (times < last)))
    return first, last, pulses


def _bursts(times, intervals):
    """Burst period, pulses per burst and the median interval inside bursts,
    from pauses longer than BURST_GAP intervals; None without enough pauses."""
    if intervals.size < 2:
        return None
    # the typical interval inside a burst: the median of the short intervals
    inner = float(np.median(intervals))
    short = intervals[intervals <= BURST_GAP * inner]
    if short.size:
        inner = float(np.median(short))
    gaps = intervals > BURST_GAP * inner
    if int(gaps.sum()) < MIN_BURSTS:
        return None
    starts = times[1:][gaps]            # first turn-on after each pause
    period = float(np.mean(np.diff(starts)))
    pulses = float(np.count_nonzero((times >= starts[0]) & (times < starts[-1]))
                   / (starts.size - 1))
    return period, pulses, inner


def _pattern(intervals):
    """Period, pulses and median interval of a repeating interval pattern of
    length 2..MAX_PATTERN (period-k switching); None if there is none."""
    for k in range(2, MAX_PATTERN + 1):
        if intervals.size < 3 * k:
            return None
        a, b = intervals[k:], intervals[:-k]
        if np.all(np.abs(a - b) <= PATTERN_TOLERANCE * np.maximum(a, b)):
            period = float(np.mean([intervals[i:i + k].sum()
                                    for i in range(0, intervals.size - k + 1, k)]))
            return period, float(k), float(np.median(intervals))
    return None

