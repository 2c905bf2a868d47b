"""Benchmark of `rcc spread`: Monte Carlo samples of the full check per second.

Run ``python benchmarks/bench_spread.py [N] [WORKERS]``.  Spreads the standby
worked case (its ``[tolerances]`` section and the hFE range) over N samples
(default 40) with WORKERS processes (default 2), Monte Carlo only (no corners
or sensitivities), after one warm-up check; prints the time per sample and, as
the last line, ``samples_per_s=<n> seconds_10k=<s>`` where ``seconds_10k`` is
the projected time of 10,000 samples.  The target is 10,000 samples in under
10 s on the 2-core machine.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from rcc.design import load_design  # noqa: E402
from rcc.margins import evaluate  # noqa: E402
from rcc.spread import spread  # noqa: E402


def main(count: int = 40, workers: int = 2) -> None:
    design = load_design(ROOT / "worked_cases" / "standby_12v_universal.toml")
    start = time.perf_counter()
    evaluate(design)  # warm-up: imports, start-up symbolic network
    single = time.perf_counter() - start
    start = time.perf_counter()
    result = spread(design, samples=count, seed=1, workers=workers, worst_case=False)
    seconds = time.perf_counter() - start
    rate = count / seconds
    print(f"samples={count} workers={workers} seconds={seconds:.2f} "
          f"first_check_s={single:.2f} yield={result.pass_yield.fraction:.3f} "
          f"unverified={result.unverified_samples}")
    print(f"samples_per_s={rate:.3g} seconds_10k={10000 / rate:.4g}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 40,
         int(sys.argv[2]) if len(sys.argv) > 2 else 2)
