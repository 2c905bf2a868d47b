"""Throughput of the steady-state cycle model.

Run ``python benchmarks/bench_steady_state.py``.  Evaluates the cycle model
on at least 10^6 operating points (random line, load and temperature over a
worked case's ranges) and compares with the same model called point by
point in a Python loop on a subset.  Last line:
``points_per_s=<number> ratio_vs_loop=<number>``.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from rcc import load_design
from rcc.cycle import operating_points

CASE = Path(__file__).resolve().parent.parent / "worked_cases" / "standby_12v_universal.toml"
POINTS = 1_000_000
CHUNK = 100_000
LOOP_POINTS = 200


def main() -> None:
    design = load_design(CASE)
    rng = np.random.default_rng(1)
    low, _, high = design.input.line_voltages
    line = rng.uniform(low, high, POINTS)
    load = rng.uniform(0.1, 1.0, POINTS) * design.output.load_max.value
    temperature = rng.uniform(design.environment.temperature_min,
                              design.environment.temperature_max, POINTS)
    operating_points(design, line[:10], load[:10], temperature[:10])  # warm-up
    start = time.perf_counter()
    for i in range(0, POINTS, CHUNK):
        part = slice(i, i + CHUNK)
        operating_points(design, line[part], load[part], temperature[part])
    vector_rate = POINTS / (time.perf_counter() - start)
    start = time.perf_counter()
    for i in range(LOOP_POINTS):
        operating_points(design, line[i], load[i], temperature[i])
    loop_rate = LOOP_POINTS / (time.perf_counter() - start)
    print(f"vectorized: {POINTS} points, loop: {LOOP_POINTS} points")
    print(f"points_per_s={vector_rate:.0f} ratio_vs_loop={vector_rate / loop_rate:.1f}")


if __name__ == "__main__":
    main()
