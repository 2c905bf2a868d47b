"""Value changes that clear failing and warning findings, as preferred values.

For every adjustable part value of the design (:data:`ADJUSTABLE`) the search
steps outward from the design value in both directions through the
preferred values of its E-series (IEC 60063; :mod:`rcc.eseries`), or through
whole turns for a winding.  Each step is a full check
(:func:`rcc.margins.evaluate`).  Where a finding disappears between two
steps, bisection over the preferred values in between finds the one closest
to the design value that clears it.  Every suggestion is therefore a value
that was itself checked in full ("verified"), with its effect on every
other margin.  The best single change and the best pair (two values changed
together) are those that let the supply start and keep switching, then with
the fewest failing findings, then the largest smallest margin, then the
fewest warnings.  (A supply that does not start or run has no findings about
its running state, so counting failing findings alone would rank it above
any running design.)
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from rcc.design import Design
from rcc.eseries import preferred_values
from rcc.findings import NOT_STARTING, SEVERITIES
from rcc.margins import Evaluation, evaluate
from rcc.spread import evaluate_many

__all__ = ["Adjustable", "ADJUSTABLE", "Suggestion", "FixResult", "EngineCheck",
           "suggest_fixes", "engine_checks", "SCAN_FACTORS", "RANGE_FACTOR", "NOT_RUNNING"]


@dataclass(frozen=True)
class Adjustable:
    """A part value the search may change.

    Attributes
    ----------
    key : str
        ``"section.key"``.
    series : str
        E-series of its preferred values, or ``"integer"`` (turns).
    unit : str
        SI unit.
    """

    key: str
    series: str
    unit: str
    low: float = 0.0
    high: float = 0.0


#: What `rcc fix` may change, with the range of values usual for the part in
#: these circuits (searched besides a factor :data:`RANGE_FACTOR` either side of
#: the design value, so an open or wrong part is replaced by a usual one).
#: Resistors and zener / clamp voltages in E24 (5 % parts), capacitors in E12
#: (10 % parts)  # common practice
ADJUSTABLE = (
    Adjustable("startup.resistance", "E24", "ohm", 47e3, 10e6),
    Adjustable("drive.resistance", "E24", "ohm", 1.0, 10e3),
    Adjustable("drive.capacitance", "E12", "F", 1e-9, 10e-6),
    Adjustable("drive.base_emitter_resistance", "E24", "ohm", 100.0, 1e6),
    Adjustable("limiter.sense_resistance", "E24", "ohm", 0.1, 47.0),
    Adjustable("regulation.zener_voltage", "E24", "V", 2.4, 75.0),
    Adjustable("clamp.voltage", "E24", "V", 20.0, 400.0),
    Adjustable("clamp.resistance", "E24", "ohm", 1e3, 1e6),
    Adjustable("transformer.feedback_turns", "integer", ""),
)
#: Coarse steps outward from the design value, as factors (both directions);
#: beyond the last, one step per decade to the end of the range.
SCAN_FACTORS = (1.25, 1.6, 2.5, 4.0, 10.0)
#: The search covers at least a factor of this either side of the design value.
RANGE_FACTOR = 10.0
_TURN_STEPS = (1, 2, 4, 8, 16)


@dataclass(frozen=True)
class Suggestion:
    """A verified change.

    Attributes
    ----------
    finding : str
        The finding it clears (``"best-single"`` / ``"best-pair"`` for the
        overall best changes).
    changes : dict
        ``{"section.key": value}`` [SI].
    texts : dict
        ``{"section.key": "value with unit"}`` as a design file (or ``--set``) takes it.
    series : dict
        ``{"section.key": "E24"}``.
    relative_change : float
        Largest ``|ln(new / old)|`` of the changes [1].
    evaluation : Evaluation
        The full check of the changed design.
    verified : bool
        The full check shows the finding cleared (for the best changes: the
        supply starts and runs where the design did not, or fewer failing
        findings than the design, or the same with a larger margin).
    """

    finding: str
    changes: dict
    texts: dict
    series: dict
    relative_change: float
    evaluation: Evaluation
    verified: bool

    def to_json(self) -> dict:
        e = self.evaluation
        return {"finding": self.finding, "changes": self.texts, "series": self.series,
                "verified": self.verified, "verdict": e.verdict,
                "failing": list(e.failing), "warnings": list(e.warning),
                "margins": {**e.margins, **{f.code: f.margin for f in e.findings
                                             if f.margin is not None}}}


@dataclass(frozen=True)
class EngineCheck:
    """What the engine from power-on adds to the fast check of one design.

    The search decides with the fast check (cycle model and small-signal
    start-up); the engine's start-up analysis (start into full load at the
    worst corner) and its start-up stresses (the first cycles at the highest
    line, :func:`rcc.verification.startup_stress`) are run on the design and on
    the best changes only.

    Attributes
    ----------
    label : str
        ``"design"``, ``"best single change"`` or ``"best pair"``.
    changes : dict
        ``{"section.key": "value with unit"}`` (empty for the design).
    verdict : str
        Verdict of the check with the engine.
    failing : tuple of str
        Failing finding codes with the engine.
    added : tuple of dict
        Findings the engine raises or makes worse than the fast check:
        ``{"code", "severity", "value", "limit", "unit", "margin"}`` [SI].
    """

    label: str
    changes: dict
    verdict: str
    failing: tuple
    added: tuple

    def to_json(self) -> dict:
        return {"label": self.label, "changes": self.changes, "verdict": self.verdict,
                "failing": list(self.failing), "added": list(self.added)}


@dataclass(frozen=True)
class FixResult:
    """Result of :func:`suggest_fixes`.

    Attributes
    ----------
    title : str
    original : Evaluation
        The design's own full check.
    suggestions : tuple of Suggestion
        Per finding, the smallest verified change of each adjustable value
        that clears it, closest first.
    unfixed : dict
        Finding -> why no single value clears it within the searched range.
    best_single, best_pair : Suggestion or None
    evaluations : int
        Full checks run [-].
    engine : tuple of EngineCheck
        The design and its best changes checked with the engine from power-on
        (:func:`engine_checks`); empty where not run.
    """

    title: str
    original: Evaluation
    suggestions: tuple[Suggestion, ...]
    unfixed: dict
    best_single: Suggestion | None
    best_pair: Suggestion | None
    evaluations: int
    engine: tuple = ()

    def to_json(self) -> dict:
        return {"title": self.title, "verdict": self.original.verdict,
                "findings": [f.code for f in self.original.findings
                             if f.severity in ("fail", "warn")],
                "suggestions": [s.to_json() for s in self.suggestions],
                "unfixed": self.unfixed,
                "best_single": self.best_single.to_json() if self.best_single else None,
                "best_pair": self.best_pair.to_json() if self.best_pair else None,
                "evaluations": self.evaluations,
                "engine": [check.to_json() for check in self.engine],
                "method": "preferred values of IEC 60063 (E24 resistors and voltages, "
                          "E12 capacitors, whole turns); each change checked in full"}


def _current(design: Design, key: str):
    section, name = key.split(".")
    return getattr(getattr(design, section), name)


def _text(value: float, unit: str) -> str:
    from rcc.units import format_si

    if not unit:
        return f"{value:g}"
    return format_si(value, unit, 3).replace("µ", "u")


def _ladder(adjustable: Adjustable, value: float) -> tuple[list, list]:
    """Candidate values below and above ``value``, nearest first."""
    if adjustable.series == "integer":
        # every whole turn out to the widest step; the coarse scan takes the steps
        steps = range(1, _TURN_STEPS[-1] + 1)
        up = [value + step for step in steps]
        down = [value - step for step in steps if value - step >= 1]
        return down, up
    low = min(value / RANGE_FACTOR, adjustable.low or value)
    high = max(value * RANGE_FACTOR, adjustable.high or value)
    series = preferred_values(adjustable.series, low, high)
    up = [float(v) for v in series if v > value * (1 + 1e-9)]
    down = [float(v) for v in series[::-1] if v < value * (1 - 1e-9)]
    return down, up


def _coarse(ladder: list, value: float, integer: bool) -> list[int]:
    """Indices of the ladder nearest to the coarse factors."""
    if not ladder:
        return []
    if integer:
        return sorted({min(step, len(ladder)) - 1 for step in _TURN_STEPS})
    indices = []
    distances = np.array([abs(math.log(v / value)) for v in ladder])
    factors = list(SCAN_FACTORS)
    while factors[-1] * 10 < math.exp(distances[-1]) * 10:
        factors.append(factors[-1] * 10)
    for factor in factors:
        index = int(np.argmin(np.abs(distances - math.log(factor))))
        if index not in indices:
            indices.append(index)
    if len(ladder) - 1 not in indices:
        indices.append(len(ladder) - 1)
    return sorted(indices)


def _clears(evaluation: Evaluation | None, code: str) -> bool:
    return evaluation is not None and evaluation.severity_of(code) not in ("fail", "warn")


#: Failing findings that mean the supply does not start or does not keep switching.
NOT_RUNNING = NOT_STARTING + ("no-restart",)


def _better_key(evaluation: Evaluation) -> tuple:
    stopped = any(code in NOT_RUNNING for code in evaluation.failing)
    return (stopped, len(evaluation.failing), -round(evaluation.smallest_margin, 3),
            len(evaluation.warning))


def suggest_fixes(design: Design, workers: int = 1,
                  progress: Callable[[int, int], None] | None = None,
                  keys: tuple[str, ...] | None = None,
                  evaluator: Callable[[Design], Evaluation] = evaluate) -> FixResult:
    """Verified value changes that clear each failing or warning finding.

    Parameters
    ----------
    design : Design
        The design [-].
    workers : int
        Worker processes for the full checks [-].
    progress : callable, optional
        ``progress(done, total)``; the total grows as refinements are added [-].
    keys : tuple of str, optional
        Restrict the search to these ``section.key`` (default: every
        :data:`ADJUSTABLE` value the design has) [-].
    evaluator : callable
        ``Design -> Evaluation`` (default: the full check,
        :func:`rcc.margins.evaluate`); a module-level function when
        ``workers > 1`` [-].

    Returns
    -------
    FixResult
    """
    original = evaluator(design)
    codes = [code for code in dict.fromkeys(f.code for f in original.findings
                                            if f.severity in ("fail", "warn"))]
    adjustables = [a for a in ADJUSTABLE if (keys is None or a.key in keys)
                   and _current(design, a.key) is not None]
    evaluated: dict[tuple[str, float], Evaluation | None] = {}
    counter = {"done": 0, "total": 0}

    def run(pairs: list[tuple[str, float]]):
        todo = [p for p in dict.fromkeys(pairs) if p not in evaluated]
        counter["total"] += len(todo)
        results = evaluate_many(design, [{key: value} for key, value in todo], workers,
                                evaluator, progress and (lambda d, t: progress(
                                    counter["done"] + d, counter["total"])))
        counter["done"] += len(todo)
        evaluated.update(zip(todo, results))

    ladders = {}
    coarse = []
    for adjustable in adjustables:
        value = float(_current(design, adjustable.key))
        down, up = _ladder(adjustable, value)
        ladders[adjustable.key] = (value, down, up)
        integer = adjustable.series == "integer"
        for ladder in (down, up):
            coarse += [(adjustable.key, ladder[i]) for i in _coarse(ladder, value, integer)]
    run(coarse)

    # refine: between the last coarse step that keeps a finding and the first that
    # clears it, bisect over the preferred values in between
    for _ in range(8):
        refine = []
        for adjustable in adjustables:
            value, down, up = ladders[adjustable.key]
            for ladder in (down, up):
                for code in codes:
                    bracket = _bracket(ladder, adjustable.key, code, evaluated, original)
                    if bracket is not None:
                        low, high = bracket
                        if high - low > 1:
                            refine.append((adjustable.key, ladder[(low + high) // 2]))
        if not refine:
            break
        run(refine)

    suggestions, unfixed = [], {}
    for code in codes:
        found = []
        for adjustable in adjustables:
            value, down, up = ladders[adjustable.key]
            best = None
            for ladder in (down, up):
                for candidate in ladder:
                    e = evaluated.get((adjustable.key, candidate))
                    if e is not None and _clears(e, code):
                        change = abs(math.log(candidate / value))
                        if best is None or change < best[0]:
                            best = (change, candidate, e)
                        break
            if best is not None:
                change, candidate, e = best
                found.append(_suggestion(code, {adjustable.key: candidate}, design,
                                         adjustables, e, True))
        if found:
            suggestions += sorted(found, key=lambda s: s.relative_change)
        else:
            unfixed[code] = ("no single change of the adjustable values clears it "
                             "within the searched range")

    singles = [(key, value, e) for (key, value), e in evaluated.items() if e is not None]
    best_single = None
    if singles:
        key, value, e = min(singles, key=lambda item: (
            _better_key(item[2]), abs(math.log(item[1] / float(_current(design, item[0]))))))
        best_single = _suggestion("best-single", {key: value}, design, adjustables, e,
                                  _better_key(e) < _better_key(original))
    best_pair = _best_pair(design, adjustables, singles, suggestions, original, workers,
                           progress, counter, evaluator)
    return FixResult(design.title, original, tuple(suggestions), unfixed, best_single,
                     best_pair, counter["total"] + 1)


def _bracket(ladder, key, code, evaluated, original):
    """Indices (kept, cleared) of the innermost evaluated steps around the first
    clearing of ``code`` along ``ladder`` (kept = -1: the design value)."""
    if _clears(original, code):
        return None
    last_kept = -1
    for index, candidate in enumerate(ladder):
        if (key, candidate) not in evaluated:
            continue
        if _clears(evaluated[key, candidate], code):
            return last_kept, index
        last_kept = index
    return None


def _suggestion(code, changes, design, adjustables, evaluation, verified) -> Suggestion:
    units = {a.key: a for a in adjustables}
    texts = {k: _text(v, units[k].unit) for k, v in changes.items()}
    series = {k: units[k].series for k in changes}
    change = max(abs(math.log(v / float(_current(design, k)))) for k, v in changes.items())
    return Suggestion(code, dict(changes), texts, series, change, evaluation, verified)


def _best_pair(design, adjustables, singles, suggestions, original, workers, progress,
               counter, evaluator) -> Suggestion | None:
    """Two values changed together: pairs of the most promising single changes."""
    best_per_key = {}
    for key, value, e in sorted(singles, key=lambda item: _better_key(item[2])):
        best_per_key.setdefault(key, (value, e))
    options = [(key, value) for key, (value, _) in best_per_key.items()]
    for s in suggestions:
        ((key, value),) = s.changes.items()
        options.append((key, value))
    options = list(dict.fromkeys(options))
    ranked = sorted(options, key=lambda kv: _better_key(
        next(e for k, v, e in singles if (k, v) == kv)))[:8]
    pairs = [(a, b) for i, a in enumerate(ranked) for b in ranked[i + 1:] if a[0] != b[0]]
    if not pairs:
        return None
    sets = [dict([a, b]) for a, b in pairs]
    counter["total"] += len(sets)
    results = evaluate_many(design, sets, workers, evaluator, progress and (
        lambda d, t: progress(counter["done"] + d, counter["total"])))
    counter["done"] += len(sets)
    scored = [(changes, e) for changes, e in zip(sets, results) if e is not None]
    if not scored:
        return None
    changes, e = min(scored, key=lambda item: _better_key(item[1]))
    return _suggestion("best-pair", changes, design, adjustables, e,
                       _better_key(e) < _better_key(original))


def engine_checks(design: Design, result: FixResult,
                  progress: Callable[[int, int], None] | None = None
                  ) -> tuple[EngineCheck, ...]:
    """The design and its best single change and pair, checked with the engine
    from power-on (:func:`rcc.analysis.full_check` with ``startup_engine``).

    The search itself runs the fast check; the start-up stresses of the first
    cycles and the start into full load are the engine's and would cost
    seconds per searched value.  This says, for the changes the search
    recommends, what the engine adds: a finding the fast check does not see
    (for example core saturation in the first cycles after power-on) is not
    cleared by a change that was not searched for it.

    Parameters
    ----------
    design : Design
        The design [-].
    result : FixResult
        From :func:`suggest_fixes` on the same design [-].
    progress : callable, optional
        ``progress(done, total)`` after each design [-].

    Returns
    -------
    tuple of EngineCheck
    """
    from rcc.analysis import full_check

    fast = {f.code: f for f in result.original.findings}
    todo = [(label, suggestion) for label, suggestion in (
        ("design", None), ("best single change", result.best_single),
        ("best pair", result.best_pair)) if label == "design" or suggestion is not None]
    checks = []
    for label, suggestion in todo:
        if progress is not None:
            progress(len(checks), len(todo))
        variant = design if suggestion is None else design.with_values(suggestion.changes)
        own = fast if suggestion is None else {f.code: f for f in
                                               suggestion.evaluation.findings}
        report = full_check(variant, startup_engine=True)
        added = []
        for finding in report.findings:
            if finding.severity not in ("fail", "warn"):
                continue
            before = own.get(finding.code)
            # new, more severe (SEVERITIES runs from the worst), or a smaller margin
            worse = before is None or (
                SEVERITIES.index(finding.severity) < SEVERITIES.index(before.severity)) or (
                finding.severity == before.severity and finding.margin is not None
                and before.margin is not None and finding.margin < before.margin - 1e-9)
            if worse:
                added.append({"code": finding.code, "severity": finding.severity,
                              "value": finding.value, "limit": finding.limit,
                              "unit": finding.unit, "margin": finding.margin})
        failing = tuple(f.code for f in report.findings if f.severity == "fail")
        checks.append(EngineCheck(label, {} if suggestion is None else dict(suggestion.texts),
                                  report.verdict, failing, tuple(added)))
    return tuple(checks)
