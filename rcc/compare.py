"""Designs side by side, and the audit of repair or redesign candidates.

:func:`compare` runs the full check on several designs (or one design and
named variants of it), puts verdicts, finding margins, continuous margins,
start-up, stresses and the operating points on one line/load grid side by
side, and says for each row which design is best and where a design is worse
than the first (the reference).

:func:`audit` does the same for the candidates of a candidates file
(:func:`load_candidates`), adds each candidate's tolerance spread
(:func:`rcc.spread.spread`) and ranks them: candidates that fail the check
sit below those that pass, then those with failing spread samples; then the
larger smallest margin (to 0.1 %), the higher yield and fewer warnings come first.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from rcc.design import Design, DesignError
from rcc.margins import MARGINS, QUANTITIES, Evaluation, evaluate

__all__ = ["Variant", "Row", "Worse", "Comparison", "CandidateResult", "Audit",
           "load_candidates", "variants_from_settings", "compare", "audit", "ROWS"]

#: Directional rows besides the margins: name -> (unit, "lower" or "higher" is better).
ROWS = {
    "min_start_line_v": ("V", "lower"),
    "start_time_s": ("s", "lower"),
    "switch_peak_v": ("V", "lower"),
    "core_peak_flux_t": ("T", "lower"),
    "worst_peak_current_a": ("A", "lower"),
}
#: Relative change below which two values count as equal (model round-off).
EQUAL_TOLERANCE = 1e-9
#: A design is "worse" than the reference on a row only beyond this change:
#: relative for quantities, absolute (one percentage point) for margins.
WORSE_THRESHOLD = 0.01


@dataclass(frozen=True)
class Variant:
    """A named design: a file, or a base design with some values overridden.

    Attributes
    ----------
    name : str
        Short name shown in tables.
    design : Design
    overrides : dict
        ``{"section.key": value}`` applied to the base design (empty for a file).
    description : str
        Free text (candidates file).
    """

    name: str
    design: Design
    overrides: dict
    description: str = ""


@dataclass(frozen=True)
class Row:
    """One compared quantity.

    Attributes
    ----------
    quantity : str
        Name (a margin name, finding code, or quantity name).
    kind : str
        ``"verdict"``, ``"margin"``, ``"finding"``, ``"startup"`` or ``"stress"``.
    unit : str
    values : tuple
        One per design (``None`` where undefined; a finding row holds
        ``(severity, margin)`` or ``None`` when the finding does not occur).
    better : str or None
        ``"higher"``, ``"lower"`` or ``None`` (no order).
    best : tuple of int
        Indices of the best designs (empty without an order).
    """

    quantity: str
    kind: str
    unit: str
    values: tuple
    better: str | None
    best: tuple[int, ...]


@dataclass(frozen=True)
class Worse:
    """A design worse than the reference on one row (JSON ``worse`` entry)."""

    design: str
    quantity: str
    reference: Any
    value: Any

    def to_json(self) -> dict:
        return {"design": self.design, "quantity": self.quantity,
                "reference": _jsonable(self.reference), "value": _jsonable(self.value)}


@dataclass(frozen=True)
class Comparison:
    """Result of :func:`compare`.

    Attributes
    ----------
    variants : tuple of Variant
    evaluations : tuple of Evaluation
        Full check of each, with the report kept.
    rows : tuple of Row
    worse : tuple of Worse
        Every row where a design is worse than the first.
    grid : tuple of list
        Operating points of each design on the first design's line x load grid
        (``OperatingPoints.records()``).
    """

    variants: tuple[Variant, ...]
    evaluations: tuple[Evaluation, ...]
    rows: tuple[Row, ...]
    worse: tuple[Worse, ...]
    grid: tuple[list, ...]

    def to_json(self) -> dict:
        designs = []
        for variant, evaluation, points in zip(self.variants, self.evaluations, self.grid):
            report = evaluation.report
            designs.append({
                "name": variant.name, "title": variant.design.title,
                "overrides": {k: _jsonable(v) for k, v in variant.overrides.items()},
                "verdict": evaluation.verdict,
                "findings": [dict(f.__dict__) for f in evaluation.findings],
                "margins": evaluation.margins,
                "operating_points": points,
                "startup": report.get("startup"),
                "stress": report.get("stress"),
                "unverified": list(evaluation.unverified),
            })
        return {"designs": designs, "worse": [w.to_json() for w in self.worse]}


def _jsonable(value):
    if isinstance(value, tuple):
        return list(value)
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    return value


# ---------------------------------------------------------------- variants
def _flatten(table: Mapping, prefix: str = "") -> dict:
    flat = {}
    for key, value in table.items():
        dotted = f"{prefix}{key}"
        if isinstance(value, Mapping) and "." not in prefix + key:
            flat.update(_flatten(value, dotted + "."))
        else:
            flat[dotted] = value
    return flat


def _variant(design: Design, name: str, overrides: dict, where: str,
             description: str = "") -> Variant:
    try:
        changed = design.with_values(overrides)
    except DesignError as error:
        raise DesignError([f"{where}: {line}" for line in error.problems]) from None
    return Variant(name, replace(changed, title=f"{design.title} [{name}]"), dict(overrides),
                   description)


def load_candidates(path, design: Design) -> list[Variant]:
    """Read a candidates file: named substitutions applied to ``design``.

    Parameters
    ----------
    path : str or Path
        TOML file with ``[[candidate]]`` tables, each with ``name``, an optional
        ``description`` and a ``[candidate.set]`` table of design keys
        (``switch.vceo = "450 V"``), as in the design file [-].
    design : Design
        The design the candidates modify [-].

    Returns
    -------
    list of Variant
        In file order.

    Raises
    ------
    DesignError
        One line per problem, naming the candidates file, the candidate and
        the key (the design file's validation and messages).
    """
    path = Path(path)
    if not path.is_file():
        raise DesignError([f"{path}: no such candidates file"])
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as error:
        raise DesignError([f"{path}: not a readable TOML file ({error})"]) from None
    entries = data.get("candidate")
    if not isinstance(entries, list) or not entries:
        from rcc.schema import SECTIONS

        hint = " (this looks like a design file)" if set(data) & set(SECTIONS) else ""
        raise DesignError([f"{path}: candidate: missing; expected one or more [[candidate]] "
                           f"tables with name and [candidate.set]{hint}"])
    problems = [f"{path}: {key}: unknown key; expected title, description and "
                "[[candidate]] tables" for key in data if key not in
                ("title", "description", "candidate")]
    variants, names = [], set()
    for number, entry in enumerate(entries, 1):
        where = f"{path}: candidate {number}"
        if not isinstance(entry, Mapping):
            problems.append(f"{where}: expected a table")
            continue
        name = entry.get("name")
        if not isinstance(name, str) or not name.strip():
            problems.append(f"{where}: name: missing; expected a text name")
            continue
        where = f"{path}: candidate {name!r}"
        if name in names:
            problems.append(f"{where}: name used twice; expected unique names")
        names.add(name)
        unknown = set(entry) - {"name", "description", "set"}
        for key in sorted(unknown):
            problems.append(f"{where}: {key}: unknown key; expected name, description, set")
        settings = entry.get("set", {})
        if not isinstance(settings, Mapping):
            problems.append(f"{where}: set: expected a table of section.key = value")
            continue
        try:
            variants.append(_variant(design, name, _flatten(settings), where,
                                     str(entry.get("description", ""))))
        except DesignError as error:
            problems += error.problems
    if problems:
        raise DesignError(problems)
    return variants


def variants_from_settings(design: Design, settings: list[dict]) -> list[Variant]:
    """Named variants from override sets (``rcc compare --set-each``).

    Parameters
    ----------
    design : Design
        Base design [-].
    settings : list of dict
        ``{"section.key": value}`` per variant [-].

    Returns
    -------
    list of Variant
        Named by their overrides.
    """
    return [_variant(design, ", ".join(f"{k}={v}" for k, v in values.items()), values,
                     f"--set-each {i}") for i, values in enumerate(settings, 1)]


# ---------------------------------------------------------------- compare
def _grid(design: Design, reference: Design, evaluation: Evaluation) -> list:
    from rcc import cycle

    same = (design.input.line_voltages == reference.input.line_voltages
            and (design.output.load_min, design.output.load_nominal, design.output.load_max)
            == (reference.output.load_min, reference.output.load_nominal,
                reference.output.load_max))
    if same:
        return evaluation.report["operating_points"]
    lines = np.array(reference.input.line_voltages, dtype=float)
    out = reference.output
    columns = [cycle.operating_points(design, lines, load).records()
               for load in (out.load_min, out.load_nominal, out.load_max)]
    return [columns[j][i] for i in range(len(lines)) for j in range(3)]


def _best(values, better):
    defined = [(i, v) for i, v in enumerate(values) if v is not None]
    if better is None or not defined:
        return ()
    pick = max if better == "higher" else min
    target = pick(v for _, v in defined)
    return tuple(i for i, v in defined if _same(v, target))


def _same(a, b) -> bool:
    return abs(a - b) <= EQUAL_TOLERANCE * max(abs(a), abs(b), 1e-30)


def _is_worse(value, reference, better, relative: bool) -> bool:
    if better is None or reference is None:
        return False
    if value is None:
        return True  # e.g. no longer starts at any line
    change = value - reference if better == "higher" else reference - value
    scale = abs(reference) if relative else 1.0
    return change < -WORSE_THRESHOLD * scale


_SEVERITY_RANK = {None: 0, "info": 0, "warn": 1, "fail": 2}
_VERDICT_RANK = {"pass": 0, "warn": 1, "fail": 2}


def compare(variants: list[Variant], evaluations: list[Evaluation] | None = None
            ) -> Comparison:
    """Full check of each design and the side-by-side rows.

    Parameters
    ----------
    variants : list of Variant
        The first is the reference [-].
    evaluations : list of Evaluation, optional
        Already computed (with reports); computed here otherwise [-].

    Returns
    -------
    Comparison
    """
    if evaluations is None:
        evaluations = [evaluate(v.design, keep_report=True) for v in variants]
    names = [v.name for v in variants]
    rows: list[Row] = []
    worse: list[Worse] = []

    def add(quantity, kind, unit, values, better):
        rows.append(Row(quantity, kind, unit, tuple(values), better, _best(values, better)))
        for name, value in zip(names[1:], values[1:]):
            if _is_worse(value, values[0], better, relative=kind != "margin"):
                worse.append(Worse(name, quantity, values[0], value))

    def add_ranked(quantity, kind, cells, ranks):
        """A row of categories: lower rank (a tuple; a margin second) is better."""
        best = min(ranks)
        rows.append(Row(quantity, kind, "", tuple(cells), "lower",
                        tuple(i for i, r in enumerate(ranks) if r == best)))
        for name, rank, cell in zip(names[1:], ranks[1:], cells[1:]):
            if rank[0] > ranks[0][0] or (rank[0] == ranks[0][0]
                                         and rank[1] > ranks[0][1] + WORSE_THRESHOLD):
                worse.append(Worse(name, quantity, cells[0], cell))

    verdicts = [e.verdict for e in evaluations]
    add_ranked("verdict", "verdict", verdicts, [(_VERDICT_RANK[v], 0.0) for v in verdicts])
    for name in MARGINS:
        add(name, "margin", "", [e.margins.get(name) for e in evaluations], "higher")
    codes = dict.fromkeys(f.code for e in evaluations for f in e.findings)
    for code in codes:
        cells = []
        for e in evaluations:
            found = [f for f in e.findings if f.code == code]
            if not found:
                cells.append(None)
                continue
            worst = max(found, key=lambda f: (_SEVERITY_RANK[f.severity],
                                              -(f.margin if f.margin is not None else 0)))
            cells.append((worst.severity, worst.margin))
        add_ranked(code, "finding", cells,
                   [(_SEVERITY_RANK[c[0]], -(c[1] or 0.0)) if c else (0, 0.0)
                    for c in cells])
    for name, (unit, better) in ROWS.items():
        kind = "startup" if name.startswith(("min_start", "start_")) else "stress"
        add(name, kind, unit, [e.quantities.get(name) for e in evaluations], better)
    grid = tuple(_grid(v.design, variants[0].design, e) for v, e in zip(variants, evaluations))
    worse.sort(key=lambda w: names.index(w.design))
    return Comparison(tuple(variants), tuple(evaluations), tuple(rows), tuple(worse), grid)


# ---------------------------------------------------------------- audit
@dataclass(frozen=True)
class CandidateResult:
    """One audited candidate.

    Attributes
    ----------
    variant : Variant
    evaluation : Evaluation
    spread : rcc.spread.SpreadResult or None
        Its tolerance spread (``None`` when no samples were asked for).
    rank : int
        1 is best.
    reason : str
        Why it ranks where it does, in one sentence.
    """

    variant: Variant
    evaluation: Evaluation
    spread: Any
    rank: int
    reason: str

    def to_json(self) -> dict:
        e = self.evaluation
        result = {"rank": self.rank, "name": self.variant.name,
                  "description": self.variant.description,
                  "overrides": {k: _jsonable(v) for k, v in self.variant.overrides.items()},
                  "verdict": e.verdict, "failing": list(e.failing),
                  "warnings": list(e.warning), "smallest_margin": e.smallest_margin,
                  "unverified": list(e.unverified), "reason": self.reason}
        if self.spread is not None:
            result["yield"] = self.spread.pass_yield.to_json()
            result["unverified_samples"] = self.spread.unverified_samples
        return result


@dataclass(frozen=True)
class Audit:
    """Result of :func:`audit`: the comparison and the ranked candidates
    (the reference design, named ``reference``, is ranked with them)."""

    comparison: Comparison
    ranking: tuple[CandidateResult, ...]

    def to_json(self) -> dict:
        data = self.comparison.to_json()
        data["ranking"] = [c.to_json() for c in self.ranking]
        return data


def _audit_key(evaluation: Evaluation, spread_result) -> tuple:
    fail_fraction = 0.0
    yield_fraction = 1.0
    if spread_result is not None:
        yield_fraction = spread_result.pass_yield.fraction
        fail_fraction = 1.0 - yield_fraction
    return (bool(evaluation.failing), fail_fraction > 0, len(evaluation.failing),
            -round(evaluation.smallest_margin, 3), -yield_fraction, len(evaluation.warning))


def _reason(evaluation: Evaluation, spread_result, worse: list[Worse]) -> str:
    margin = evaluation.smallest_margin
    if evaluation.failing:
        text = "fails the check: " + ", ".join(evaluation.failing)
    elif evaluation.warning:
        text = (f"passes with {len(evaluation.warning)} warning(s) "
                f"({', '.join(evaluation.warning)})")
    else:
        text = "passes without warnings"
    text += f"; smallest margin {margin:+.1%}"
    if spread_result is not None:
        p = spread_result.pass_yield
        low, high = p.interval_95
        text += (f"; yield {p.fraction:.1%} of {p.trials} samples (95 % {low:.1%} to "
                 f"{high:.1%})")
        if spread_result.unverified_samples:
            text += f", {spread_result.unverified_samples} unverified"
    if worse:
        text += "; worse than the reference in " + ", ".join(
            dict.fromkeys(w.quantity for w in worse))
    if evaluation.unverified:
        text += "; fast model not trusted at some points (" + ", ".join(
            evaluation.unverified) + ")"
    return text + "."


def audit(design: Design, candidates: list[Variant], samples: int = 0, seed: int = 1,
          workers: int = 1, progress=None) -> Audit:
    """Check and rank repair or redesign candidates against the design.

    Parameters
    ----------
    design : Design
        The reference (ranked too, as ``reference``) [-].
    candidates : list of Variant
        From :func:`load_candidates` [-].
    samples : int
        Monte Carlo samples of each candidate's tolerance spread (0: none) [-].
    seed : int
        Seed of every spread (the same samples for every candidate) [-].
    workers : int
        Worker processes for the spreads [-].
    progress : callable, optional
        ``progress(done, total)`` [-].

    Returns
    -------
    Audit
    """
    from rcc.spread import spread

    variants = [Variant("reference", design, {}, "the design as given")] + list(candidates)
    evaluations = [evaluate(v.design, keep_report=True) for v in variants]
    comparison = compare(variants, evaluations)
    spreads = []
    total = len(variants) * (samples or 1)
    for index, variant in enumerate(variants):
        if samples:
            def step(done, _total, offset=index * samples):
                if progress is not None:
                    progress(offset + min(done, samples), total)
            spreads.append(spread(variant.design, samples, seed, workers, progress=step,
                                  worst_case=False))
        else:
            spreads.append(None)
            if progress is not None:
                progress(index + 1, total)
    order = sorted(range(len(variants)),
                   key=lambda i: _audit_key(evaluations[i], spreads[i]))
    ranking = []
    for rank, i in enumerate(order, 1):
        worse = [w for w in comparison.worse if w.design == variants[i].name]
        ranking.append(CandidateResult(variants[i], evaluations[i], spreads[i], rank,
                                       _reason(evaluations[i], spreads[i], worse)))
    return Audit(comparison, tuple(ranking))
