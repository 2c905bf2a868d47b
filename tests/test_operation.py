"""Tests of rcc.operation: the kind of operation of synthetic runs with known answers,
and the settling time of closed-form responses."""

import numpy as np
import pytest

from rcc.operation import (BURST_GAP, LOCKUP_FRACTION, Operation, classify_operation,
                           settling_time, window_mean)


def _run(turn_ons, peaks=None, *, output=12.0, end=None, expected=12.0, window_start=None):
    turn_ons = np.asarray(turn_ons, dtype=float)
    peaks = np.full(turn_ons.shape, 0.4) if peaks is None else np.asarray(peaks, dtype=float)
    end = (turn_ons[-1] if turn_ons.size else 1e-3) + 1e-6 if end is None else end
    time = np.linspace(0.0, end, 2001)
    out = np.full_like(time, output) if np.isscalar(output) else output(time)
    return classify_operation(turn_ons, peaks, time, out, expected_output=expected,
                              window_start=window_start, end_time=end)


def test_regular_switching_frequency_peak_and_output():
    # 50 kHz period-1 switching with a little jitter (1e-9 s) for 10 ms
    rng = np.random.default_rng(0)
    turn_ons = np.arange(500) * 20e-6 + rng.uniform(0, 1e-9, 500)
    peaks = np.full(500, 0.35)
    result = _run(turn_ons, peaks, end=turn_ons[-1] + 10e-6)
    assert isinstance(result, Operation)
    assert result.kind == "regular"
    assert result.frequency == pytest.approx(50e3, rel=1e-3)
    assert result.peak_current == pytest.approx(0.35)
    assert result.output_voltage == pytest.approx(12.0)
    assert result.burst_period == 0.0 and result.pulses_per_burst == 0.0


def test_burst_groups_of_25_pulses_with_pauses():
    # groups of 25 pulses 14 us apart, one group every 1.2 ms (the pattern the
    # issue reports for the standby case at 230 V): mean pulse rate 25/1.2 ms
    groups = [k * 1.2e-3 + np.arange(25) * 14e-6 for k in range(8)]
    turn_ons = np.concatenate(groups)
    peaks = np.concatenate([np.linspace(0.38, 0.44, 25)] * 8)
    result = _run(turn_ons, peaks, end=8 * 1.2e-3, window_start=0.0)
    assert result.kind == "burst"
    assert result.burst_period == pytest.approx(1.2e-3, rel=1e-9)
    assert result.pulses_per_burst == pytest.approx(25.0)
    assert result.frequency == pytest.approx(25 / 1.2e-3, rel=1e-9)
    assert result.pulse_interval == pytest.approx(14e-6)
    assert result.peak_current == pytest.approx(0.41)


def test_period_two_is_a_burst_of_two_pulses():
    # alternating intervals 10 us and 16 us (period doubling)
    intervals = np.tile([10e-6, 16e-6], 100)
    turn_ons = np.concatenate(([0.0], np.cumsum(intervals)))
    result = _run(turn_ons, window_start=0.0)
    assert result.kind == "burst"
    assert result.pulses_per_burst == 2.0
    assert result.burst_period == pytest.approx(26e-6)
    assert result.frequency == pytest.approx(2 / 26e-6)


def test_irregular_intervals():
    rng = np.random.default_rng(3)
    intervals = rng.uniform(10e-6, 25e-6, 300)   # no pause longer than 3x, no pattern
    turn_ons = np.concatenate(([0.0], np.cumsum(intervals)))
    result = _run(turn_ons, window_start=0.0)
    assert result.kind == "irregular"
    assert result.frequency == pytest.approx(result.turn_ons / turn_ons[-1], rel=0.01)


def test_lockup_switching_far_below_the_expected_output():
    # switches steadily but the output sits at 0.5 V of an expected 24 V
    turn_ons = np.arange(200) * 30e-6
    result = _run(turn_ons, output=0.5, expected=24.0)
    assert result.kind == "lockup"
    assert result.output_voltage == pytest.approx(0.5)
    assert result.frequency > 0


@pytest.mark.parametrize("phase", [0.0, 0.3, 0.7])
def test_lockup_rate_and_output_over_whole_restart_periods(phase):
    # hiccup restarts every 37.9 ms with the output decaying between them
    # (tau 10 ms): a window of a quarter of 0.2 s holds one or two of them,
    # and count / window would be 20-40 Hz for the same train.  The rate is
    # the train's and the mean output the exact one over a period,
    # V0 tau / T (1 - exp(-T / tau)) (the source-free RC discharge, e.g.
    # Hayt & Kemmerly, Engineering Circuit Analysis, first-order circuits
    # chapter  # from memory)
    period, tau, peak = 37.9e-3, 10e-3, 2.0
    end = 0.2
    turn_ons = np.arange(phase * period, end, period)

    def output(time):
        since = time - turn_ons[np.maximum(np.searchsorted(turn_ons, time, "right") - 1, 0)]
        return np.where(time >= turn_ons[0], peak * np.exp(-since / tau), 0.0)

    time = np.sort(np.concatenate((np.linspace(0.0, end, 200001), turn_ons)))
    result = classify_operation(turn_ons, np.full(turn_ons.size, 3.5), time, output(time),
                                expected_output=24.0, end_time=end)
    assert result.kind == "lockup"
    assert result.frequency == pytest.approx(1.0 / period, rel=1e-9)
    mean = peak * tau / period * (1.0 - np.exp(-period / tau))
    # measured: 5.0e-5 relative where a restart's step falls in the span (the
    # trapezoid over the 1 us sample before it), 8e-10 otherwise: the test's
    # sampling, not the estimator
    assert result.output_voltage == pytest.approx(mean, rel=1e-4)


@pytest.mark.parametrize("group", [2, 3])
@pytest.mark.parametrize("phase", [0.0, 0.45, 0.9])
def test_lockup_in_groups_counts_whole_groups(phase, group):
    # restarts every 30 ms, each a group of pulses 40 us apart: group / 30 ms
    # wherever the window (the last 50 ms) cuts the groups
    end = 0.2
    starts = np.arange(phase * 30e-3, end - 1e-3, 30e-3)
    turn_ons = (starts[:, None] + np.arange(group) * 40e-6).ravel()
    result = _run(turn_ons, output=0.5, expected=24.0, end=end)
    assert result.kind == "lockup"
    assert result.frequency == pytest.approx(group / 30e-3, rel=1e-9)


def test_lockup_idling_after_a_few_cycles():
    # a few cycles at power-on, then nothing for 50 ms, output 1.7 V of 5 V
    result = _run([1e-3, 1.02e-3, 1.04e-3, 1.06e-3], output=1.7, expected=5.0, end=50e-3)
    assert result.kind == "lockup"
    assert result.turn_ons == 0 and result.frequency == 0.0 and result.peak_current == 0.0


def test_lockup_threshold_is_a_fraction_of_the_expected_output():
    turn_ons = np.arange(200) * 30e-6
    just_above = _run(turn_ons, output=LOCKUP_FRACTION * 12.0 * 1.01, expected=12.0)
    just_below = _run(turn_ons, output=LOCKUP_FRACTION * 12.0 * 0.99, expected=12.0)
    assert just_above.kind == "regular" and just_below.kind == "lockup"
    # without an expected output lock-up is not assessed
    assert _run(turn_ons, output=0.1, expected=None).kind == "regular"


def test_none_without_oscillation():
    result = _run([], output=0.0, end=20e-3)
    assert result.kind == "none"
    assert result.total_turn_ons == 0 and result.frequency == 0.0
    assert _run([2e-3, 9e-3], output=0.2, end=20e-3).kind == "none"


def test_burst_gap_threshold():
    # pauses of 2.5 and 3.5 intervals: only the second pattern is a burst
    for pause, kind in ((2.5, "irregular"), (BURST_GAP + 0.5, "burst")):
        group = np.arange(10) * 10e-6
        turn_ons = np.concatenate([group + k * (9 + pause) * 10e-6 for k in range(6)])
        assert _run(turn_ons, window_start=0.0).kind == kind


def test_window_excludes_the_start_up_transient():
    # a burst-like start-up, then 40 ms of regular switching
    start = np.concatenate([k * 1e-3 + np.arange(5) * 10e-6 for k in range(10)])
    steady = 10e-3 + np.arange(2000) * 20e-6
    result = _run(np.concatenate((start, steady)), end=steady[-1] + 10e-6)
    assert result.kind == "regular"
    assert result.frequency == pytest.approx(50e3)


def test_bad_input_is_refused():
    with pytest.raises(ValueError, match="same length"):
        classify_operation([0.0, 1.0], [1.0], [0.0, 1.0], [0.0, 0.0])
    with pytest.raises(ValueError, match="strictly increasing"):
        classify_operation([0.0, 0.0, 1.0], [1, 1, 1], [0.0, 1.0], [0.0, 0.0])


def test_window_mean_exact_for_a_ramp_with_repeated_instants():
    # v = t on [0, 1] with a duplicated instant at 0.5 (an event): mean over
    # [0.2, 1] is 0.6 exactly (trapezoid is exact on a piecewise-linear signal)
    time = np.array([0.0, 0.25, 0.5, 0.5, 0.75, 1.0])
    values = time.copy()
    assert window_mean(time, values, 0.2, 1.0) == pytest.approx(0.6, rel=1e-12)


def test_settling_time_of_a_first_order_step():
    # v = 1 - exp(-t/tau) enters the 2 % band at tau ln 50 (first-order step
    # response, Ogata, Modern Control Engineering, 5th ed., sec. 5-2: 4 tau
    # for 2 %, ln 50 = 3.91)
    tau = 1e-3
    time = np.linspace(0.0, 20e-3, 200001)
    values = 1.0 - np.exp(-time / tau)
    settled = settling_time(time, values, band=0.02, final_value=1.0)
    assert settled == pytest.approx(tau * np.log(50.0), abs=2e-7)


def test_settling_time_of_an_underdamped_step_uses_the_last_exit():
    # damped sine around 1: the last exit from the band is after the first entry
    time = np.linspace(0.0, 10.0, 100001)
    values = 1.0 - np.exp(-time) * np.cos(10 * time)
    settled = settling_time(time, values, band=0.02, final_value=1.0)
    envelope_entry = np.log(50.0)          # exp(-t) = 0.02
    assert settled <= envelope_entry + 1e-4
    assert settled > envelope_entry - 2 * np.pi / 10   # within one ring period of it
    assert np.all(np.abs(values[time >= settled] - 1.0) <= 0.02)


def test_settling_time_none_when_the_end_is_outside_the_band():
    time = np.linspace(0.0, 1.0, 11)
    assert settling_time(time, time, final_value=2.0) is None
