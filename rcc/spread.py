"""Tolerance spread of a design: Monte Carlo yield, worst case by corners and by
root-sum-square, and normalized sensitivities, all from the full check.

Every evaluation is :func:`rcc.margins.evaluate` (the full check: cycle-model
checks over line, load, temperature and the start-up analysis) on the design
with some part values moved inside their tolerance bands
(:mod:`rcc.tolerance`).  There is no second model.

* **Monte Carlo**: independent samples of every toleranced value (and the
  switch gain); yield = fraction of samples with no failing finding, with the
  Wilson (1927) score interval; fail fraction per finding; percentiles of the
  headline quantities.  Samples where the cycle model doubts any point the
  check rests on (:attr:`rcc.cycle.OperatingPoints.doubt`: a pattern, a
  lock-up, a regime boundary, an unsettled cycle, a failed invariant; see
  :func:`rcc.margins.doubts_of`) are not solved by the engine here: they are
  counted as unverified per reason, and the yield is also given over the
  verified samples alone and with every unverified sample counted as failing.
* **Worst case** after the ECSS worst-case analysis handbook
  (ECSS-Q-HB-30-01A, 2011): extreme-value analysis (EVA) at the vertices of
  the tolerance box, and the root-sum-square (RSS) estimate from the
  sensitivities, side by side with the worst Monte Carlo sample.
* **Sensitivities**: one-at-a-time evaluations at each band edge (others at
  the band centre), normalized as (dQ/Q) / (dp/p).

Samples are drawn in the calling process from one seeded generator and
evaluated in order (in worker processes when ``workers > 1``), so results are
identical for any number of workers.
"""

from __future__ import annotations

import itertools
import math
import multiprocessing
import os
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from rcc.design import Design
from rcc.margins import QUANTITIES, Evaluation, describe_doubt, evaluate, quantity_limits
from rcc.tolerance import Tolerance, design_values, hfe_tolerance, sample_uniforms

__all__ = ["wilson_interval", "Proportion", "FindingSpread", "QuantitySpread",
           "WorstCase", "Sensitivity", "SpreadResult", "spread", "parameters_of",
           "evaluate_many", "MAX_FULL_CORNERS", "plot_spread"]

#: Up to this many parameters every vertex of the tolerance box is evaluated;
#: above it, the vertex each sensitivity sign points to, per quantity and extreme.
MAX_FULL_CORNERS = 4


# ---------------------------------------------------------------- statistics
def wilson_interval(successes, trials, confidence: float = 0.95):
    """Wilson score interval of a binomial proportion.

    Parameters
    ----------
    successes : int or array_like
        Number of successes [-].
    trials : int or array_like
        Number of trials, positive [-].
    confidence : float
        Two-sided confidence level [1].

    Returns
    -------
    tuple of (float or ndarray, float or ndarray)
        Lower and upper bounds of the proportion [1].

    Notes
    -----
    With ``p = successes / trials``, ``n = trials`` and ``z`` the
    ``(1 + confidence) / 2`` normal quantile::

        centre = (p + z^2 / (2 n)) / (1 + z^2 / n)
        half   = z / (1 + z^2 / n) * sqrt(p (1 - p) / n + z^2 / (4 n^2))

    Unlike the normal-approximation (Wald) interval it stays inside [0, 1]
    and keeps its coverage near 0 and 1, where yields live.

    References
    ----------
    .. [1] E. B. Wilson, "Probable inference, the law of succession, and
       statistical inference", J. Am. Stat. Assoc. 22 (158), 209-212, 1927.
    .. [2] R. G. Newcombe, "Two-sided confidence intervals for the single
       proportion: comparison of seven methods", Statistics in Medicine 17,
       857-872, 1998 (method 3).
    """
    successes = np.asarray(successes, dtype=float)
    trials = np.asarray(trials, dtype=float)
    from scipy.special import ndtri

    z = float(ndtri(0.5 + 0.5 * confidence))
    p = successes / trials
    denominator = 1.0 + z * z / trials
    centre = (p + z * z / (2 * trials)) / denominator
    half = z / denominator * np.sqrt(p * (1 - p) / trials + z * z / (4 * trials**2))
    low, high = np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)
    if low.ndim == 0:
        return float(low), float(high)
    return low, high


@dataclass(frozen=True)
class Proportion:
    """A fraction of samples with its 95 % Wilson interval.

    Attributes
    ----------
    count, trials : int
        Samples counted and samples in all [-].
    fraction : float or None
        ``count / trials`` [1] (``None`` without trials).
    interval_95 : tuple of float or None
        Wilson score interval [1].
    """

    count: int
    trials: int

    @property
    def fraction(self) -> float | None:
        return self.count / self.trials if self.trials else None

    @property
    def interval_95(self) -> tuple[float, float] | None:
        return wilson_interval(self.count, self.trials) if self.trials else None

    def to_json(self) -> dict:
        interval = self.interval_95
        return {"fraction": self.fraction, "count": self.count, "trials": self.trials,
                "interval_95": list(interval) if interval else None}


@dataclass(frozen=True)
class FindingSpread:
    """How often one finding fails and warns across the samples.

    Attributes
    ----------
    code : str
        Finding code.
    fail : Proportion
        Samples where it fails.
    warn : Proportion
        Samples where it warns (and does not fail).
    """

    code: str
    fail: Proportion
    warn: Proportion

    def to_json(self) -> dict:
        return {"code": self.code, "fail_fraction": self.fail.fraction,
                "interval_95": list(self.fail.interval_95),
                "warn_fraction": self.warn.fraction}


@dataclass(frozen=True)
class QuantitySpread:
    """Percentiles of one headline quantity over the samples.

    Attributes
    ----------
    name, unit : str
        From :data:`rcc.margins.QUANTITIES`.
    p01, p50, p99 : float or None
        1st, 50th and 99th percentiles over the samples where it is defined [unit].
    undefined : int
        Samples where it is undefined (e.g. no start at any line) [-].
    """

    name: str
    unit: str
    p01: float | None
    p50: float | None
    p99: float | None
    undefined: int

    def to_json(self) -> dict:
        return {"p01": self.p01, "p50": self.p50, "p99": self.p99, "unit": self.unit,
                "undefined_samples": self.undefined}


@dataclass(frozen=True)
class WorstCase:
    """One extreme of a quantity by three methods.

    Attributes
    ----------
    quantity, unit : str
        Which quantity, its unit.
    extreme : str
        ``"max"`` or ``"min"``.
    nominal : float or None
        At the centre of every band [unit].
    value : float or None
        Extreme-value analysis: the extreme over the evaluated vertices [unit].
    corner : dict
        ``{"section.key": value}`` of the vertex giving ``value`` [SI].
    rss : float or None
        Root-sum-square estimate, nominal +/- 3 sigma from the sensitivities [unit].
    monte_carlo : float or None
        The most extreme Monte Carlo sample [unit] (``None`` when undefined
        there, e.g. a sample that does not start).
    """

    quantity: str
    unit: str
    extreme: str
    nominal: float | None
    value: float | None
    corner: dict
    rss: float | None
    monte_carlo: float | None

    def to_json(self) -> dict:
        return {"quantity": self.quantity, "extreme": self.extreme, "value": self.value,
                "unit": self.unit, "corner": self.corner, "nominal": self.nominal,
                "rss": self.rss, "monte_carlo": self.monte_carlo}


@dataclass(frozen=True)
class Sensitivity:
    """Normalized sensitivity (dQ/Q)/(dp/p) of a quantity to a parameter [1]."""

    quantity: str
    parameter: str
    value: float

    def to_json(self) -> dict:
        return {"quantity": self.quantity, "parameter": self.parameter, "value": self.value}


@dataclass(frozen=True)
class SpreadResult:
    """Result of :func:`spread`.

    Attributes
    ----------
    title : str
        Design title.
    samples, seed, workers : int
        Monte Carlo samples, generator seed, worker processes.
    parameters : tuple of Tolerance
        What was varied (the switch gain first).
    pass_yield : Proportion
        Samples with no failing finding.
    verified_yield : Proportion
        The same over the verified samples only.
    verified_pass : Proportion
        Samples that are verified and have no failing finding, over all
        samples: the yield with every unverified sample counted as failing.
    unverified : dict
        Doubt of the cycle model (``"pattern"``, ``"invariant: ..."``, or
        ``"model-error"``) -> number of samples with it (a sample may have several).
    unverified_samples : int
        Samples with any reason [-].
    errors : int
        Samples where the model raised an error (counted as failing) [-].
    findings : tuple of FindingSpread
        Per finding code that occurred.
    quantities : tuple of QuantitySpread
    worst_case : tuple of WorstCase
    sensitivities : tuple of Sensitivity
        Ranked by magnitude within each quantity.
    corner_method : str
        ``"all vertices"`` or ``"sensitivity-directed vertices"``.
    corners_evaluated : int
    values : ndarray, shape (samples, parameters)
        The sampled values [SI].
    quantity_samples : dict
        Quantity -> per-sample values, NaN where undefined [unit] (for figures).
    limits : dict
        Quantity -> acceptance limits (:func:`rcc.margins.quantity_limits`) [unit].
    """

    title: str
    samples: int
    seed: int
    workers: int
    parameters: tuple[Tolerance, ...]
    pass_yield: Proportion
    verified_yield: Proportion
    verified_pass: Proportion
    unverified: dict
    unverified_samples: int
    errors: int
    findings: tuple[FindingSpread, ...]
    quantities: tuple[QuantitySpread, ...]
    worst_case: tuple[WorstCase, ...]
    sensitivities: tuple[Sensitivity, ...]
    corner_method: str
    corners_evaluated: int
    values: np.ndarray = field(repr=False)
    quantity_samples: dict = field(repr=False)
    limits: dict = field(default_factory=dict, repr=False)

    def to_json(self) -> dict:
        return {
            "title": self.title,
            "samples": self.samples,
            "seed": self.seed,
            "workers": self.workers,
            "parameters": [{"key": p.key, "nominal": p.nominal, "low": p.low,
                            "high": p.high, "distribution": p.distribution,
                            "unit": p.unit} for p in self.parameters],
            "yield": self.pass_yield.to_json(),
            "verified_yield": self.verified_yield.to_json(),
            "verified_pass": self.verified_pass.to_json(),
            "unverified": {"samples": self.unverified_samples, "reasons": self.unverified,
                           "meaning": {reason: describe_doubt(reason)
                                       for reason in self.unverified},
                           "note": "samples where the cycle model doubts a point the "
                                   "check rests on (its per-point doubt), not solved by "
                                   "the engine: 'yield' includes them, 'verified_yield' "
                                   "leaves them out, 'verified_pass' counts them as "
                                   "failing"},
            "errors": self.errors,
            "findings": [f.to_json() for f in self.findings],
            "quantities": {q.name: q.to_json() for q in self.quantities},
            "worst_case": [w.to_json() for w in self.worst_case],
            "worst_case_method": (f"extreme-value analysis over {self.corner_method} of "
                                  "the tolerance box and root-sum-square (3 sigma), after "
                                  "ECSS-Q-HB-30-01A"),
            "corners_evaluated": self.corners_evaluated,
            "sensitivities": [s.to_json() for s in self.sensitivities],
        }


# ---------------------------------------------------------------- evaluation
_WORKER: dict = {}


def _init_worker(design, evaluator):
    _WORKER["design"], _WORKER["evaluator"] = design, evaluator


def _evaluate_one(values: dict) -> Evaluation | None:
    design = _WORKER["design"].with_values(values) if values else _WORKER["design"]
    try:
        return _WORKER["evaluator"](design)
    except Exception:  # a model error at one sample is counted, not fatal
        return None


def evaluate_many(design: Design, value_sets: list[dict], workers: int = 1,
                  evaluator: Callable[[Design], Evaluation] = evaluate,
                  progress: Callable[[int, int], None] | None = None,
                  progress_offset: int = 0, progress_total: int | None = None):
    """Evaluate variants of a design, in order, optionally in worker processes.

    Parameters
    ----------
    design : Design
        The base design [-].
    value_sets : list of dict
        ``{"section.key": value}`` per variant [SI].
    workers : int
        Worker processes (1: in this process) [-].
    evaluator : callable
        ``Design -> Evaluation``; a module-level function when ``workers > 1`` [-].
    progress : callable, optional
        Called as ``progress(done, total)`` after each result [-].
    progress_offset, progress_total : int
        For a progress count that spans several calls [-].

    Returns
    -------
    list of Evaluation or None
        One per value set, in order; ``None`` where the model raised.
    """
    total = progress_total or len(value_sets)
    results = []
    if workers <= 1 or len(value_sets) <= 1:
        _init_worker(design, evaluator)
        iterator = map(_evaluate_one, value_sets)
        pool = None
    else:
        methods = multiprocessing.get_all_start_methods()
        context = multiprocessing.get_context("fork" if "fork" in methods else None)
        pool = context.Pool(workers, initializer=_init_worker, initargs=(design, evaluator))
        chunk = max(1, min(8, len(value_sets) // (4 * workers)))
        iterator = pool.imap(_evaluate_one, value_sets, chunksize=chunk)
    try:
        for result in iterator:
            results.append(result)
            if progress is not None:
                progress(progress_offset + len(results), total)
    finally:
        if pool is not None:
            pool.close()
            pool.join()
    return results


def parameters_of(design: Design) -> tuple[Tolerance, ...]:
    """The values a spread varies.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    tuple of Tolerance
        The switch gain (when ``hfe_min < hfe_max``) and every ``[tolerances]`` entry.
    """
    gain = hfe_tolerance(design)
    return ((gain,) if gain else ()) + design.tolerances.entries


def _values(parameters, numbers) -> dict:
    result = {}
    for parameter, number in zip(parameters, numbers):
        result.update(design_values(parameter, float(number)))
    return result


# ---------------------------------------------------------------- the study
def spread(design: Design, samples: int = 10000, seed: int = 1, workers: int = 1,
           evaluator: Callable[[Design], Evaluation] = evaluate,
           progress: Callable[[int, int], None] | None = None,
           worst_case: bool = True) -> SpreadResult:
    """Monte Carlo, corner and RSS worst case, and sensitivities of a design.

    Parameters
    ----------
    design : Design
        With a ``[tolerances]`` section (without one only the switch gain
        spreads) [-].
    samples : int
        Monte Carlo samples, positive [-].
    seed : int
        Seed of the sample generator [-].
    workers : int
        Worker processes; results do not depend on it [-].
    evaluator : callable
        ``Design -> Evaluation`` (default: the full check) [-].
    progress : callable, optional
        ``progress(done, total)`` after each evaluation [-].
    worst_case : bool
        Also the sensitivities and the corner and RSS worst case (``False``:
        the Monte Carlo alone, as the audit uses it) [-].

    Returns
    -------
    SpreadResult

    Notes
    -----
    Normalized sensitivity of quantity Q to parameter p, from the band edges
    with every other parameter at its band centre::

        S = ((Q(p_high) - Q(p_low)) / Q_centre) / ((p_high - p_low) / p_centre)

    RSS: ``Q_centre +/- 3 sqrt(sum_p (dQ/dp * sigma_p)^2)`` with the secant
    ``dQ/dp`` above and ``sigma_p`` the parameter's standard deviation
    (:attr:`rcc.tolerance.Tolerance.standard_deviation`).  EVA: the extreme over
    every vertex of the box when there are at most :data:`MAX_FULL_CORNERS`
    parameters, otherwise over the vertex each quantity's sensitivity signs
    point to (exact for margins monotone in every parameter).

    References
    ----------
    .. [1] ECSS-Q-HB-30-01A, "Space product assurance - Worst case analysis",
       ESA-ESTEC, 2011 (extreme value analysis, root-sum-square, Monte Carlo).
    .. [2] E. B. Wilson, J. Am. Stat. Assoc. 22, 209-212, 1927.
    """
    if samples < 1:
        raise ValueError(f"samples must be positive, got {samples}")
    parameters = parameters_of(design)
    count = len(parameters)
    centre = [p.centre for p in parameters]
    one_at_a_time = []
    for index, parameter in enumerate(parameters if worst_case else ()):
        for edge in (parameter.low, parameter.high):
            numbers = list(centre)
            numbers[index] = edge
            one_at_a_time.append(_values(parameters, numbers))
    uniforms = sample_uniforms(samples, count, seed)
    values = np.column_stack([p.from_uniform(uniforms[:, i]) for i, p in
                              enumerate(parameters)]) if count else np.zeros((samples, 0))
    sample_sets = [_values(parameters, row) for row in values]
    if not worst_case:
        mc = evaluate_many(design, sample_sets, workers, evaluator, progress)
        return _summarize(design, samples, seed, workers, parameters, values, mc, (), (),
                          "none", 0)
    full = count <= MAX_FULL_CORNERS
    vertices = list(itertools.product((0, 1), repeat=count)) if full else []
    expected_corners = len(vertices) if full else 2 * len(QUANTITIES)
    first = [_values(parameters, centre)] + one_at_a_time + sample_sets
    total = len(first) + expected_corners
    results = evaluate_many(design, first, workers, evaluator, progress, 0, total)
    centre_eval, edges, mc = results[0], results[1:1 + 2 * count], results[1 + 2 * count:]

    sensitivities, slopes = _sensitivities(parameters, centre_eval, edges)
    if not full:
        vertices = _directed_vertices(parameters, slopes)
    corners = [{p.key: (p.high if bit else p.low) for p, bit in zip(parameters, vertex)}
               for vertex in vertices]
    corner_evals = evaluate_many(design, [_values(parameters, c.values()) for c in corners],
                                 workers, evaluator, progress, len(first),
                                 len(first) + len(corners))
    worst = _worst_cases(parameters, centre_eval, slopes, corners, corner_evals, mc)
    return _summarize(design, samples, seed, workers, parameters, values, mc, worst,
                      sensitivities, "all vertices" if full else
                      "sensitivity-directed vertices", len(corners))


def _quantity(evaluation, name):
    if evaluation is None:
        return None
    value = evaluation.quantities.get(name)
    return None if value is None else float(value)


def _sensitivities(parameters, centre_eval, edges):
    """Normalized sensitivities (ranked per quantity) and slopes dQ/dp."""
    ranked, slopes = [], {}
    for name in QUANTITIES:
        q_centre = _quantity(centre_eval, name)
        rows = []
        for index, parameter in enumerate(parameters):
            low = _quantity(edges[2 * index], name)
            high = _quantity(edges[2 * index + 1], name)
            if low is None or high is None:
                continue
            slope = (high - low) / (parameter.high - parameter.low)
            slopes[name, index] = slope
            if q_centre:
                rows.append(Sensitivity(name, parameter.key,
                                        slope * parameter.centre / q_centre))
        ranked += sorted(rows, key=lambda s: -abs(s.value))
    return tuple(ranked), slopes


def _directed_vertices(parameters, slopes):
    vertices = []
    for name in QUANTITIES:
        for sign in (1, -1):
            vertex = tuple(int(sign * slopes.get((name, i), 0.0) > 0)
                           for i in range(len(parameters)))
            if vertex not in vertices:
                vertices.append(vertex)
    return vertices


def _worst_cases(parameters, centre_eval, slopes, corner_sets, corner_evals, mc):
    result = []
    for name, (unit, _, adverse) in QUANTITIES.items():
        nominal = _quantity(centre_eval, name)
        variance = sum((slopes[name, i] * p.standard_deviation) ** 2
                       for i, p in enumerate(parameters) if (name, i) in slopes)
        spread3 = 3.0 * math.sqrt(variance)
        corner_values = [(_quantity(e, name), values)
                         for e, values in zip(corner_evals, corner_sets)]
        defined = [(v, c) for v, c in corner_values if v is not None]
        mc_values = [_quantity(e, name) for e in mc]
        mc_defined = [v for v in mc_values if v is not None]
        extremes = ("max", "min") if adverse == "both" else (adverse,)
        for extreme in extremes:
            pick = max if extreme == "max" else min
            value, corner = pick(defined, key=lambda item: item[0]) if defined else (None, {})
            if extreme == "max" and any(v is None for v, _ in corner_values) \
                    and name == "min_start_line_v":
                value, corner = None, next(c for v, c in corner_values if v is None)
            rss = None if nominal is None else nominal + (spread3 if extreme == "max"
                                                          else -spread3)
            if name == "min_start_line_v" and any(v is None for v in mc_values):
                worst_mc = None  # some sample does not start at any line
            else:
                worst_mc = pick(mc_defined) if mc_defined else None
            result.append(WorstCase(name, unit, extreme, nominal, value,
                                    {k: float(v) for k, v in corner.items()}, rss, worst_mc))
    return tuple(result)


def _summarize(design, samples, seed, workers, parameters, values, mc, worst,
               sensitivities, corner_method, corners_evaluated) -> SpreadResult:
    errors = sum(e is None for e in mc)
    passed = sum(e is not None and e.verdict != "fail" for e in mc)
    reasons: dict[str, int] = {}
    verified = [e for e in mc if e is not None and not e.unverified]
    for e in mc:
        for reason in (e.unverified if e is not None else ("model-error",)):
            reasons[reason] = reasons.get(reason, 0) + 1
    unverified_samples = sum(e is None or bool(e.unverified) for e in mc)
    verified_passed = sum(e.verdict != "fail" for e in verified)
    codes = list(dict.fromkeys(f.code for e in mc if e is not None for f in e.findings
                               if f.severity in ("fail", "warn")))
    findings = tuple(FindingSpread(
        code,
        Proportion(sum(e is not None and e.severity_of(code) == "fail" for e in mc), samples),
        Proportion(sum(e is not None and e.severity_of(code) == "warn" for e in mc), samples))
        for code in codes)
    findings = tuple(sorted(findings, key=lambda f: (-f.fail.count, -f.warn.count)))
    quantity_samples, quantities = {}, []
    for name, (unit, _, _) in QUANTITIES.items():
        column = np.array([np.nan if _quantity(e, name) is None else _quantity(e, name)
                           for e in mc])
        quantity_samples[name] = column
        defined = column[np.isfinite(column)]
        if defined.size:
            p01, p50, p99 = (float(x) for x in np.percentile(defined, [1, 50, 99]))
        else:
            p01 = p50 = p99 = None
        quantities.append(QuantitySpread(name, unit, p01, p50, p99,
                                         int(samples - defined.size)))
    return SpreadResult(
        title=design.title, samples=samples, seed=seed, workers=workers,
        parameters=parameters, pass_yield=Proportion(passed, samples),
        verified_yield=Proportion(verified_passed, len(verified)),
        verified_pass=Proportion(verified_passed, samples),
        unverified=reasons, unverified_samples=unverified_samples, errors=errors,
        findings=findings, quantities=tuple(quantities), worst_case=worst,
        sensitivities=sensitivities, corner_method=corner_method,
        corners_evaluated=corners_evaluated, values=values,
        quantity_samples=quantity_samples, limits=quantity_limits(design))


# ---------------------------------------------------------------- figure
def plot_spread(result: SpreadResult, quantities=None, axes=None):
    """Histograms of the Monte Carlo samples beside the ranked sensitivities.

    Parameters
    ----------
    result : SpreadResult
        From :func:`spread` [-].
    quantities : sequence of str, optional
        Which quantities (default: those with samples) [-].
    axes : numpy array of matplotlib.axes.Axes, shape (n, 2), optional
        Where to draw [-].

    Returns
    -------
    numpy array of matplotlib.axes.Axes, shape (n, 2)
        Left: histogram with the corner (EVA) extremes as solid lines, the RSS
        3-sigma bounds dashed, the nominal dotted and the acceptance limit as a
        thick black line; right: normalized sensitivities, largest at the top.
    """
    import matplotlib.pyplot as plt

    names = list(quantities or [n for n, c in result.quantity_samples.items()
                                if np.isfinite(c).any()])
    if axes is None:
        _, axes = plt.subplots(len(names), 2, figsize=(11, 2.3 * len(names) + 0.8),
                               squeeze=False, gridspec_kw={"width_ratios": [1.25, 1]})
    scale = {"V": 1.0, "Hz": 1e-3, "T": 1.0, "A": 1e3, "s": 1e3}
    label = {"V": "V", "Hz": "kHz", "T": "T", "A": "mA", "s": "ms"}
    for row, name in zip(axes, names):
        unit, description, _ = QUANTITIES[name]
        k = scale[unit]
        column = result.quantity_samples[name]
        finite = column[np.isfinite(column)] * k
        ax = row[0]
        ax.hist(finite, bins=min(40, max(8, int(math.sqrt(finite.size)))), color="0.7",
                edgecolor="0.4")
        for worst in (w for w in result.worst_case if w.quantity == name):
            if worst.value is not None:
                ax.axvline(worst.value * k, color="C3", lw=1.5,
                           label=f"corner {worst.extreme}")
            if worst.rss is not None:
                ax.axvline(worst.rss * k, color="C0", lw=1.2, ls="--",
                           label=f"RSS {worst.extreme}")
        nominal = next((w.nominal for w in result.worst_case if w.quantity == name), None)
        if nominal is not None:
            ax.axvline(nominal * k, color="k", lw=0.8, ls=":", label="nominal")
        shown = [v * k for w in result.worst_case if w.quantity == name
                 for v in (w.value, w.rss) if v is not None] + list(finite)
        low, high = (min(shown), max(shown)) if shown else (0.0, 0.0)
        reach = 0.5 * (high - low)
        off_scale = []
        for limit in result.limits.get(name, ()):
            if low - reach <= limit * k <= high + reach:
                ax.axvline(limit * k, color="k", lw=2.5,
                           label=None if off_scale or any(
                               line.get_label() == "limit" for line in ax.lines) else "limit")
            else:
                off_scale.append(f"{limit * k:.4g} {label[unit]}")
        if off_scale:
            ax.text(0.99, 0.03, "limit " + ", ".join(off_scale) + " (off scale)",
                    transform=ax.transAxes, ha="right", va="bottom", fontsize=7)
        undefined = int(np.sum(~np.isfinite(column)))
        extra = f"; {undefined} samples undefined" if undefined else ""
        ax.set_title(f"{description}{extra}", fontsize=9, loc="left")
        ax.set_xlabel(f"{name} [{label[unit]}]", fontsize=8)
        ax.set_ylabel("samples", fontsize=8)
        ax.legend(fontsize=7, loc="best")
        ax.tick_params(labelsize=8)
        bars = [s for s in result.sensitivities if s.quantity == name][:6][::-1]
        ax = row[1]
        if bars:
            ax.barh([s.parameter for s in bars], [s.value for s in bars],
                    color=["C3" if s.value > 0 else "C0" for s in bars])
        ax.axvline(0, color="k", lw=0.6)
        ax.set_title("normalized sensitivity (dQ/Q)/(dp/p)", fontsize=9, loc="left")
        ax.tick_params(labelsize=8)
    fig = axes[0][0].figure
    fig.suptitle(f"{result.title}\n{result.samples} samples, seed {result.seed}; yield "
                 f"{100 * result.pass_yield.fraction:.1f} % "
                 f"(95 % Wilson {100 * result.pass_yield.interval_95[0]:.1f}-"
                 f"{100 * result.pass_yield.interval_95[1]:.1f} %), "
                 f"{result.unverified_samples} unverified", fontsize=10)
    fig.tight_layout(rect=(0, 0, 1, 1 - 0.5 / fig.get_figheight()))
    return axes
