"""Accuracy over a population of designs nobody tuned.

Run ``python benchmarks/bench_accuracy.py [--designs 100] [--seed 1]
[--reference-points 20] [--workers 2] [--json FILE]``.

Each design of :func:`rcc.population.generate` is taken at two points, the
lowest and the highest line at its nominal load, 25 degC and ``hfe_typ``,
through

* the cycle model (:func:`rcc.cycle.operating_points`),
* the engine from power-on with discharged capacitors
  (:func:`rcc.engine.power_on.run_from_power_on`), on the bus the cycle model
  computed the point at (the bulk-capacitor valley for AC input), so both
  describe the same operating condition,
* for ``--reference-points`` of those points, the independent smooth-device
  reference (``tests/smooth_reference.py``, :func:`simulate_smooth`), started
  from the engine's settled state (capacitors, inductor currents; the
  reference's own node voltages at rest) and run for
  :data:`REFERENCE_CYCLES` engine periods (at least three burst periods for
  a burst), between :data:`REFERENCE_MIN` and :data:`REFERENCE_MAX`
  (:data:`LOCKUP_PULSES` engine pulses up to :data:`LOCKUP_MAX` at a lock-up
  or no oscillation); its second half is classified.  The reference thus checks that the engine's
  settled orbit is the reference's (it is not an independent power-on: a
  full power-on with the smooth solver costs minutes per millisecond).

Every run is classified by :func:`rcc.operation.classify_operation`; the
cycle model's modes map to kinds by :data:`CYCLE_KINDS`.  Points are split
between ``--workers`` processes; results come back in a fixed order, so the
figures depend only on ``--designs``, ``--seed`` and ``--reference-points``.

The last line::

    points=<n> reference_points=<m> engine_vs_reference=<pct> cycle_vs_engine=<pct> mode_agreement=<pct>

``engine_vs_reference``: share of completed reference points where the
engine is within 5 % of the reference in frequency and peak current and 2 %
in output; ``cycle_vs_engine``: share of points (engine completed) where the
cycle model is within 10 %, 10 % and 3 % of the engine (the peak current of a
burst, irregular pattern or lock-up is the strongest pulse in both, the cycle
model's definition; else the mean per-cycle peak); ``mode_agreement``:
share of those points where the cycle model and the engine report the same
kind (regular / burst / irregular / lock-up / none; a cycle-model lock-up
whose slow restarts give fewer than ``MIN_TURN_ONS`` pulses over the engine's
run is ``none``, the rule that classified the engine).  A relative difference
is taken against the engine (or the reference); two zeros agree.  Before it,
a table per family (regulation method, clamp, AC/DC input, the engine's
kind) says where the models disagree.  A share with nothing to compare
(no completed reference point) prints as ``n/a``.  ``--json`` writes one
record per point.
"""

from __future__ import annotations

import argparse
import json
import math
import multiprocessing
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from rcc.operation import MIN_TURN_ONS, classify_operation  # noqa: E402
from rcc.population import family, generate_one  # noqa: E402

#: Cycle-model mode -> kind of operation.
CYCLE_KINDS = {"bcm": "regular", "dcm": "regular", "ccm": "regular", "burst": "burst",
               "irregular": "irregular", "lockup": "lockup", "off": "none"}
#: Tolerances of the issue: engine against the reference, cycle model against the engine.
ENGINE_TOLERANCE = {"frequency": 0.05, "peak_current": 0.05, "output_voltage": 0.02}
CYCLE_TOLERANCE = {"frequency": 0.10, "peak_current": 0.10, "output_voltage": 0.03}
#: Reference run: engine periods, and its shortest and longest duration [s].
REFERENCE_CYCLES = 40
REFERENCE_MIN = 0.3e-3
REFERENCE_MAX = 3e-3
#: Reference run at a lock-up: engine pulses, and its longest duration [s].
LOCKUP_PULSES = 4
LOCKUP_MAX = 50e-3
#: Temperature of every point [K] (25 degC).
TEMPERATURE = 298.15
#: Engine state names carried into the reference (engine name -> reference name).
SHARED_STATES = {"i_leakage": "i_leakage", "i_magnetizing": "i_magnetizing",
                 "v_node": "v_collector", "v_drive": "v_drive",
                 "v_output_capacitor": "v_output_capacitor", "v_aux": "v_aux",
                 "v_clamp": "v_clamp"}


# ------------------------------------------------------------------ points
def point_list(designs: int, seed: int) -> list[tuple[int, int, str]]:
    """(seed, index, 'low'|'high') for every point, in order."""
    return [(seed, i, side) for i in range(designs) for side in ("low", "high")]


def _line(design, side: str) -> float:
    low, _, high = design.input.line_voltages
    return float(low if side == "low" else high)


def _finite(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def model_point(task) -> dict:
    """Cycle model and engine from power-on at one point (runs in a worker)."""
    seed, index, side = task
    generated = generate_one(seed, index)
    design = generated.design
    line = _line(design, side)
    load = design.output.load_nominal
    record = {"design": generated.name, "seed": seed, "index": index, "side": side,
              "family": family(design), "line_v": line, "load": load.text(),
              "expected_output_v": design.output.voltage_target}
    cycle_bus = None
    try:
        from rcc.cycle import operating_points

        points = operating_points(design, np.atleast_1d(line), load, np.atleast_1d(TEMPERATURE),
                                  np.atleast_1d(design.switch.hfe_typ))
        mode = str(np.ravel(points.mode)[0])
        cycle_bus = float(np.ravel(points.bus_voltage)[0])
        record["cycle"] = {
            "mode": mode, "kind": CYCLE_KINDS.get(mode, mode),
            "frequency_hz": _finite(np.ravel(points.frequency)[0]),
            "peak_current_a": _finite(np.ravel(points.peak_current)[0]),
            "output_v": _finite(np.ravel(points.output_voltage)[0]),
            "bus_v": cycle_bus,
            "startup_lockup": bool(np.ravel(points.startup_lockup)[0]),
            "settled": bool(np.ravel(points.settled)[0]),
            "on_end": str(np.ravel(points.on_end)[0]),
            "off_end": str(np.ravel(points.off_end)[0]),
        }
    except Exception as error:   # a model that raises is a finding of the benchmark
        record["cycle"] = {"mode": "error", "kind": "error",
                           "message": f"{type(error).__name__}: {error}"}
    from rcc.engine.power_on import run_from_power_on

    if cycle_bus is None or not cycle_bus > 0:
        cycle_bus = None
    run = run_from_power_on(design, line, load, temperature=TEMPERATURE,
                            hfe=design.switch.hfe_typ, bus_voltage=cycle_bus)
    record["bus_v"] = run.bus_voltage
    record["engine"] = run.to_json()
    record["engine_state"] = {name: float(v) for name, v in zip(run.state_names,
                                                                run.final_state)}
    return record


def reference_point(task) -> dict:
    """The smooth reference from the engine's settled state (runs in a worker)."""
    record = task
    from smooth_reference import simulate_smooth

    generated = generate_one(record["seed"], record["index"])
    design = generated.design
    engine = record["engine"]
    period = 1.0 / engine["frequency_hz"] if engine["frequency_hz"] > 0 else REFERENCE_MAX
    duration = REFERENCE_CYCLES * period
    if engine["kind"] == "burst":
        duration = max(duration, 3.0 * engine["burst_period_s"])
    duration = float(np.clip(duration, REFERENCE_MIN, REFERENCE_MAX))
    if engine["kind"] in ("lockup", "none"):
        # a lock-up pulses every few ms and idles in between (cheap for the
        # solver): long enough for LOCKUP_PULSES of the engine's pulses
        duration = float(np.clip(LOCKUP_PULSES * period, REFERENCE_MAX, LOCKUP_MAX))
    initial = {SHARED_STATES[name]: value for name, value in record["engine_state"].items()
               if name in SHARED_STATES}
    started = time.process_time()
    try:
        run = simulate_smooth(design, record["bus_v"], design.output.load_nominal,
                              temperature=TEMPERATURE, hfe=design.switch.hfe_typ,
                              duration=duration, initial=initial)
    except Exception as error:
        return {"kind": "failed", "message": f"{type(error).__name__}: {error}",
                "duration_s": duration, "cpu_s": time.process_time() - started}
    turn_ons = np.asarray(run.turn_on_times, dtype=float)
    peaks = np.asarray(run.peak_currents, dtype=float)
    current = run.signals["primary_current"]
    if turn_ons.size > peaks.size:
        # the reference gives one peak per full cycle: add the open last one
        tail = current[run.time >= turn_ons[-1]]
        peaks = np.append(peaks, tail.max() if tail.size else 0.0)
    operation = classify_operation(turn_ons, peaks, run.time, run.signals["output_voltage"],
                                   expected_output=design.output.voltage_target,
                                   window_start=0.5 * duration, end_time=duration)
    result = operation.to_json()
    result.update({"duration_s": duration, "cpu_s": time.process_time() - started,
                   "solver_steps": int(run.solver_steps)})
    return result


# -------------------------------------------------------------- comparison
def relative_difference(value, reference) -> float:
    """|value - reference| / |reference|; 0 for two zeros, inf for a missing value."""
    if value is None or reference is None:
        return math.inf
    if reference == 0:
        return 0.0 if value == 0 else math.inf
    return abs(value - reference) / abs(reference)


#: Kinds whose cycle-model peak current is that of the strongest pulse
#: (rcc.cycle.MODES): compared with the strongest pulse of the time-domain run
STRONGEST_PULSE_KINDS = ("burst", "irregular", "lockup")


def within(model: dict, truth: dict, tolerance: dict) -> bool:
    pairs = {"frequency": ("frequency_hz", "frequency_hz"),
             "peak_current": ("peak_current_a", _truth_peak_key(model, truth)),
             "output_voltage": ("output_v", "output_v")}
    return all(relative_difference(model.get(key), truth.get(truth_key)) <= tolerance[name]
               for name, (key, truth_key) in pairs.items())


def _truth_peak_key(model: dict, truth: dict) -> str:
    """The cycle model reports the strongest pulse of a burst, an irregular
    pattern or a lock-up: compare it with the run's strongest pulse."""
    if model.get("mode") is not None and model.get("kind") in STRONGEST_PULSE_KINDS \
            and "strongest_peak_a" in truth:
        return "strongest_peak_a"
    return "peak_current_a"


def choose_reference(records: list[dict], count: int, seed: int) -> list[int]:
    """Indices of the points for the reference: round-robin over families
    (regulation, clamp, input, engine kind) in an order shuffled with
    ``seed`` (so that a few points spread over all families), points in
    population order inside a family; failed engine runs are skipped."""
    groups = defaultdict(list)
    for k, record in enumerate(records):
        if record["engine"]["kind"] != "failed":
            groups[_family_key(record)].append(k)
    keys = sorted(groups)
    order = np.random.default_rng(seed).permutation(len(keys))
    chosen, keys = [], [keys[i] for i in order]
    while len(chosen) < count and any(groups[key] for key in keys):
        for key in keys:
            if groups[key] and len(chosen) < count:
                chosen.append(groups[key].pop(0))
    return sorted(chosen)


def _family_key(record) -> tuple:
    f = record["family"]
    return (f["regulation"], f["clamp"], f["input"], record["engine"]["kind"])


def _window_kind(cycle: dict, engine: dict) -> str:
    """The cycle model's kind over the engine's record: a lock-up whose slow
    restarts give fewer than ``MIN_TURN_ONS`` pulses in the engine's run is
    ``none`` by the rule that classified the engine (rcc.operation)."""
    if cycle["kind"] == "lockup" and engine.get("duration_s") \
            and cycle["frequency_hz"] * engine["duration_s"] < MIN_TURN_ONS:
        return "none"
    return cycle["kind"]


def summarise(records: list[dict]) -> dict:
    """The three shares and the per-family table."""
    compared = [r for r in records if r["engine"]["kind"] != "failed"]
    for record in records:
        engine, cycle = record["engine"], record["cycle"]
        record["cycle_within_tolerance"] = (engine["kind"] != "failed" and cycle["kind"] != "error"
                                            and within(cycle, engine, CYCLE_TOLERANCE))
        record["kinds_agree"] = _window_kind(cycle, engine) == engine["kind"]
        reference = record.get("reference")
        if reference is not None and reference["kind"] != "failed":
            record["engine_within_reference"] = within(engine, reference, ENGINE_TOLERANCE)
    with_reference = [r for r in records if "engine_within_reference" in r]
    share = lambda flags: 100.0 * sum(flags) / len(flags) if flags else None  # noqa: E731
    table = defaultdict(lambda: defaultdict(list))
    for record in compared:
        row = table[_family_key(record)]
        row["points"].append(1)
        row["cycle_ok"].append(record["cycle_within_tolerance"])
        row["kind_ok"].append(record["kinds_agree"])
        row["cycle_kinds"].append(_window_kind(record["cycle"], record["engine"]))
        row["lockup_flag"].append(bool(record["cycle"].get("startup_lockup")))
        peak = _truth_peak_key(record["cycle"], record["engine"])
        for name, key, truth in (("df", "frequency_hz", "frequency_hz"),
                                 ("di", "peak_current_a", peak), ("dv", "output_v", "output_v")):
            row[name].append(relative_difference(record["cycle"].get(key),
                                                 record["engine"].get(truth)))
        if "engine_within_reference" in record:
            row["ref_ok"].append(record["engine_within_reference"])
    return {
        "points": len(records),
        "engine_failed": len(records) - len(compared),
        "cycle_errors": sum(r["cycle"]["kind"] == "error" for r in records),
        "reference_points": len(with_reference),
        "reference_failed": sum(1 for r in records if r.get("reference", {}).get("kind")
                                == "failed"),
        "engine_vs_reference": share([r["engine_within_reference"] for r in with_reference]),
        "cycle_vs_engine": share([r["cycle_within_tolerance"] for r in compared]),
        "mode_agreement": share([r["kinds_agree"] for r in compared]),
        "table": table,
    }


def format_table(summary: dict) -> str:
    lines = [f"{'regulation':<17}{'clamp':<6}{'input':<6}{'engine kind':<12}{'pts':>4}"
             f"{'cycle ok':>9}{'kind ok':>8}{'ref ok':>8}{'med df':>8}{'med di':>8}"
             f"{'med dv':>8}{'flag':>6}  cycle kinds"]
    for key in sorted(summary["table"]):
        row = summary["table"][key]
        n = len(row["points"])
        median = lambda name: float(np.median([min(v, 9.99) for v in row[name]]))  # noqa: E731
        ref = f"{sum(row['ref_ok'])}/{len(row['ref_ok'])}" if row["ref_ok"] else "-"
        kinds = ", ".join(f"{k} {row['cycle_kinds'].count(k)}"
                          for k in sorted(set(row["cycle_kinds"])))
        lines.append(f"{key[0]:<17}{key[1]:<6}{key[2]:<6}{key[3]:<12}{n:>4}"
                     f"{sum(row['cycle_ok']):>5}/{n:<3}{sum(row['kind_ok']):>4}/{n:<3}"
                     f"{ref:>8}{100 * median('df'):>7.0f}%{100 * median('di'):>7.0f}%"
                     f"{100 * median('dv'):>7.1f}%{sum(row['lockup_flag']):>6}  {kinds}")
    return "\n".join(lines)


def run(designs: int, seed: int, reference_points: int, workers: int):
    tasks = point_list(designs, seed)
    if reference_points:
        try:
            import smooth_reference  # noqa: F401
        except ImportError:
            print("tests/smooth_reference.py is not available: no reference points")
            reference_points = 0
    started = time.perf_counter()
    context = multiprocessing.get_context("fork")
    with context.Pool(workers) as pool:
        records = list(pool.imap(model_point, tasks, chunksize=1))
        model_seconds = time.perf_counter() - started
        chosen = choose_reference(records, reference_points, seed)
        references = list(pool.imap(reference_point, [records[k] for k in chosen],
                                     chunksize=1))
    for k, reference in zip(chosen, references):
        records[k]["reference"] = reference
    return records, model_seconds, time.perf_counter() - started


def _percent(value) -> str:
    """A share in per cent with one decimal, ``n/a`` with nothing to compare."""
    return "n/a" if value is None else f"{value:.1f}"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--designs", type=int, default=100, help="designs (2 points each)")
    parser.add_argument("--seed", type=int, default=1, help="population seed")
    parser.add_argument("--reference-points", type=int, default=20,
                        help="points also run through the smooth reference")
    parser.add_argument("--workers", type=int, default=2, help="worker processes")
    parser.add_argument("--json", type=Path, default=None, help="write per-point records")
    args = parser.parse_args(argv)
    if args.designs < 1 or args.workers < 1 or args.reference_points < 0:
        parser.error("--designs and --workers must be at least 1, --reference-points at least 0")
    records, model_seconds, total_seconds = run(args.designs, args.seed,
                                                args.reference_points, args.workers)
    summary = summarise(records)
    engine_wall = sum(r["engine"]["wall_time_s"] for r in records)
    reference_cpu = sum(r["reference"].get("cpu_s", 0.0) for r in records if "reference" in r)
    print(f"population seed={args.seed} designs={args.designs} workers={args.workers}: "
          f"cycle model + engine {model_seconds:.0f} s (engine {engine_wall:.0f} s of worker "
          f"time), reference {reference_cpu:.0f} s CPU, total {total_seconds:.0f} s")
    print(f"engine failed at {summary['engine_failed']} points, cycle model raised at "
          f"{summary['cycle_errors']}, reference failed at {summary['reference_failed']}")
    print("where the models disagree, per family (cycle ok: cycle model within 10/10/3 % of "
          "the engine; kind ok: same kind (a cycle-model lock-up with fewer than 3 pulses in the engine's run counts as none); ref ok: engine within 5/5/2 % of the reference; "
          "med: median relative difference cycle vs engine in frequency, peak current, "
          "output, capped at 999 %; flag: points the cycle model marks startup_lockup):")
    print(format_table(summary))
    if args.json is not None:
        with open(args.json, "w", encoding="utf-8") as handle:
            json.dump({"designs": args.designs, "seed": args.seed,
                       "reference_points": args.reference_points,
                       "summary": {k: v for k, v in summary.items() if k != "table"},
                       "points": records}, handle, indent=1, default=str)
    print(f"points={summary['points']} reference_points={summary['reference_points']} "
          f"engine_vs_reference={_percent(summary['engine_vs_reference'])} "
          f"cycle_vs_engine={_percent(summary['cycle_vs_engine'])} "
          f"mode_agreement={_percent(summary['mode_agreement'])}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
