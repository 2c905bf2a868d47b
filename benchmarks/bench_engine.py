"""Benchmark of the time-domain engine (issue 4, section 5).

Run ``python benchmarks/bench_engine.py``.  Prints details, then as the last
line ``cycles_per_s=<n> ratio_vs_radau=<n> startup_1000_cycles_s=<n>
pss_iterations=<n>``.

* cycles_per_s: switch turn-ons per second of wall time over 10 ms of
  steady switching of the worked case (invented demo data) at 325 V bus and
  40 ohm, after warm-up (compiled kernel, topologies built).
* ratio_vs_radau: wall time of scipy's Radau (rtol 1e-9, atol 1e-12, exact
  constant Jacobian, the same piecewise-linear equations and guards,
  :func:`simulate_reference`) over three full switching cycles in steady
  operation (from the 1000th turn-on after power-on to 10 ns past the
  third turn-on after it), divided by the engine's wall time over the same
  window.  Matched accuracy: the two produce the same event sequence
  (topology codes before and after every switch) and every switching
  instant agrees within ``MATCH_FACTOR * rtol * window`` (200 * 1e-9 *
  26 us, about 5 ps; tests/test_engine_reference.py applies a finer
  per-event bound of the same origin); the benchmark checks this and prints
  the largest difference (a mismatch is printed as a warning).  The
  difference is Radau's error: it shrinks tenfold or more per decade of
  rtol while the engine's instants stay put.
* startup_1000_cycles_s: wall time of a start-up from power-on up to the
  1000th turn-on, fresh circuit (topology building included), kernel
  compiled.
* pss_iterations: Newton iterations of the periodic-steady-state solve
  (:func:`pss_iterations`, supplied by ``rcc.engine.pss``; ``nan`` when that
  module is absent).
* The cold compile time (empty numba cache, in a subprocess) is printed on
  an earlier line.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

from rcc.design import Load, load_design
from rcc.engine import build_circuit, dc_initial_state, simulate
from rcc.engine.simulate import simulate_reference

WORKED = os.path.join(os.path.dirname(__file__), "..", "worked_cases",
                      "standby_12v_universal.toml")
BUS = 325.0
LOAD = Load("resistance", 40.0)
TEMPERATURE = 298.15
#: Radau's relative tolerance; instants must agree within MATCH_FACTOR * RTOL
#: times the window (Radau's global error in units of rtol, measured up to
#: about 130 on this window; see tests/test_engine_reference.py)
RTOL = 1e-9
MATCH_FACTOR = 200.0


def cold_compile_seconds() -> float:
    """Wall time of a first tiny simulation with an empty numba cache [s]."""
    code = ("import time; t=time.perf_counter(); "
            "from rcc.design import load_design, Load; "
            "from rcc.engine import build_circuit, dc_initial_state, simulate; "
            f"d=load_design({WORKED!r}); "
            "c=build_circuit(d, 325.0, Load('resistance', 40.0), 298.15); "
            "simulate(c, dc_initial_state(c), 1e-6, record=False); "
            "print(time.perf_counter()-t)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                             text=True, check=True)
    return float(out.stdout.strip().splitlines()[-1])


def cycles_per_second(design) -> float:
    circuit = build_circuit(design, BUS, LOAD, TEMPERATURE)
    warm = simulate(circuit, dc_initial_state(circuit), 0.03, record=False)
    start = time.perf_counter()
    trace = simulate(circuit, warm.final_state, 0.04, record=False,
                     topology=warm.final_topology, t_start=0.03)
    elapsed = time.perf_counter() - start
    return len(trace.turn_on_times()) / elapsed


#: Window of the Radau comparison: full cycles after this many turn-ons
RADAU_SETTLE_TURN_ONS = 1000
RADAU_CYCLES = 3


def ratio_vs_radau(design) -> tuple[float, float, float, float, bool]:
    """Radau wall time over the engine's on the same multi-cycle window.

    Returns (ratio, engine seconds, Radau seconds, window [s], matched)."""
    import numpy as np

    circuit = build_circuit(design, BUS, LOAD, TEMPERATURE)
    settled = simulate(circuit, dc_initial_state(circuit), 1.0, record=False,
                       stop_on_turn_on=RADAU_SETTLE_TURN_ONS, max_events=10_000_000)
    x0, topology = settled.final_state, settled.final_topology
    cycles = simulate(circuit, x0, 1e-3, record=False, topology=topology,
                      stop_on_turn_on=RADAU_CYCLES)
    window = cycles.final_time + 1e-8
    simulate(circuit, x0, window, record=False, topology=topology)  # topologies built
    repeats = 50
    start = time.perf_counter()
    for _ in range(repeats):
        engine_trace = simulate(circuit, x0, window, record=False, topology=topology)
    engine = (time.perf_counter() - start) / repeats
    start = time.perf_counter()
    reference = simulate_reference(circuit, x0, window, topology=topology, rtol=RTOL,
                                   atol=1e-12)
    radau = time.perf_counter() - start
    matched = (np.array_equal(engine_trace.event_from, reference.event_from)
               and np.array_equal(engine_trace.event_to, reference.event_to))
    if matched:
        difference = np.max(np.abs(engine_trace.event_times - reference.event_times))
        matched = bool(difference <= MATCH_FACTOR * RTOL * window)
        print(f"Radau window: {len(reference.event_times)} events, largest instant "
              f"difference {difference:.2e} s (allowed {MATCH_FACTOR * RTOL * window:.2e} s), "
              f"{reference.steps} Radau steps")
    if not matched:
        print("warning: engine and Radau do not agree on this window; the ratio is not "
              "at matched accuracy")
    return radau / engine, engine, radau, window, matched


def startup_seconds(design, cycles: int = 1000) -> tuple[float, float]:
    circuit = build_circuit(design, BUS, LOAD, TEMPERATURE)
    start = time.perf_counter()
    trace = simulate(circuit, dc_initial_state(circuit), 1.0, record=False,
                     stop_on_turn_on=cycles, max_events=10_000_000)
    return time.perf_counter() - start, trace.final_time


def pss_iterations(design) -> float:
    """Newton iterations of the periodic-steady-state solve after its warm-up
    (``rcc.engine.pss.benchmark_iterations``: nominal line, full load)."""
    from rcc.engine.pss import benchmark_iterations

    result = benchmark_iterations(design)
    if not result["converged"]:
        print(f"pss: did not converge ({result['method']})")
    print(f"pss: {result['iterations']} iterations after {result['warmup_cycles']} warm-up "
          f"cycles, {result['transient_cycles']} extra transient cycles, "
          f"{result['seconds']:.2f} s")
    return float(result["iterations"])


def main() -> None:
    design = load_design(WORKED)
    compile_s = cold_compile_seconds()
    print(f"cold compile (empty cache, first 1 us run): {compile_s:.2f} s")
    # warm the kernel in this process
    circuit = build_circuit(design, BUS, LOAD, TEMPERATURE)
    simulate(circuit, dc_initial_state(circuit), 1e-6, record=False)
    rate = cycles_per_second(design)
    print(f"steady switching: {rate:.0f} cycles/s")
    ratio, engine, radau, window, _ = ratio_vs_radau(design)
    print(f"{RADAU_CYCLES}-cycle window ({window * 1e6:.2f} us): engine "
          f"{engine * 1e3:.3f} ms, Radau {radau:.2f} s")
    startup, reached = startup_seconds(design)
    print(f"1000-cycle start-up: {startup:.3f} s wall, {reached * 1e3:.2f} ms simulated")
    iterations = pss_iterations(design)
    print(f"cycles_per_s={rate:.0f} ratio_vs_radau={ratio:.0f} "
          f"startup_1000_cycles_s={startup:.3f} pss_iterations={iterations:g}")


if __name__ == "__main__":
    main()
