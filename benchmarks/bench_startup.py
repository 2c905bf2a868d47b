"""Benchmark of the start-up verdict: DC point, poles and verdict for many
varied designs at once.

Run ``python benchmarks/bench_startup.py [N]``.  Builds N (default 2000)
variants of the worked cases with random element values (validated
designs, built before timing), calls the verdict once to warm up (imports,
the compiled network), then times the full vectorized verdict: element
values collected from the designs, power-on DC point (Newton), small-signal
parameters, characteristic polynomials, batched companion eigenvalues,
Routh counts, verdict and holding element.  The last line is
``designs_per_s=<number>``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from rcc.design import load_design  # noqa: E402
from rcc.mains import bus_voltage_range  # noqa: E402
from rcc.startup import batch_verdict  # noqa: E402
from rcc.startup.dcpoint import circuit_values  # noqa: E402


def varied_designs(count: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    bases = [load_design(p) for p in sorted((ROOT / "worked_cases").glob("*.toml"))]
    designs = []
    for i in range(count):
        base = bases[i % len(bases)]
        factor = lambda: float(10 ** rng.uniform(-0.5, 0.5))  # noqa: E731
        changes = {
            "startup.resistance": base.startup.resistance * factor(),
            "drive.capacitance": base.drive.capacitance * factor(),
            "drive.resistance": base.drive.resistance * factor(),
            "transformer.feedback_turns": max(1.0, round(base.transformer.feedback_turns
                                                         * factor())),
            "limiter.sense_resistance": base.limiter.sense_resistance * factor(),
            "switch.hfe_min": base.switch.hfe_min * 0.5,
        }
        designs.append(base.with_values(changes))
    return designs


def main(count: int = 2000) -> None:
    designs = varied_designs(count)
    bus = np.array([float(bus_voltage_range(d)[0]) for d in designs])
    temperature = np.array([d.environment.temperature_min for d in designs])
    batch_verdict(circuit_values(designs[:10], bus[:10], temperature[:10]))  # warm-up
    repeats = 3
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        verdict = batch_verdict(circuit_values(designs, bus, temperature))
        best = min(best, time.perf_counter() - start)
    starts = int(verdict.poles.starts.sum())
    held = {name: int((verdict.holding_element == name).sum())
            for name in ("startup-resistor", "drive-coupling", "limiter", "feedback-phase")}
    print(f"designs={count} starts={starts} stalls={count - starts} held_by={held}")
    print(f"newton_iterations={verdict.dc.iterations} best_of={repeats} seconds={best:.4f}")
    print(f"designs_per_s={count / best:.0f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 2000)
