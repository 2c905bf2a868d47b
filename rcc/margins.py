"""Margins and headline quantities of one checked design, for comparisons,
candidate audits, tolerance spreads and fix searches.

:func:`evaluate` runs the full check (:func:`rcc.analysis.full_check`: the
cycle-model checks and the start-up analysis) and keeps what those studies
compare: the verdict, the findings with signed margins, continuous margins of
the main checks (which exist whether or not a finding fires, so a margin can
be followed as a part value moves), headline quantities, and the cycle model's
own doubts at the points the check rests on (:attr:`Evaluation.unverified`,
from :attr:`rcc.cycle.OperatingPoints.doubt`).  The result is small and
picklable, so worker processes can return it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rcc.design import Design

__all__ = ["Evaluation", "FindingMargin", "QUANTITIES", "MARGINS", "evaluate",
           "finding_margin", "rank_key", "DOUBTS", "doubts_of", "describe_doubt",
           "quantity_limits"]

#: Headline quantities: name -> (unit, description, which extreme is adverse).
QUANTITIES = {
    "min_start_line_v": ("V", "lowest line (DC: bus) voltage at which oscillation begins, "
                         "worst corner (small-signal bound of the start line)", "max"),
    "start_time_s": ("s", "start-up time at the lowest line", "max"),
    "frequency_min_load_hz": ("Hz", "frequency at nominal line, lightest load", "max"),
    "frequency_max_load_hz": ("Hz", "frequency at nominal line, heaviest load", "min"),
    "output_v": ("V", "output at nominal line and load", "both"),
    "switch_peak_v": ("V", "worst-case switch peak voltage", "max"),
    "core_peak_flux_t": ("T", "worst-case peak flux density", "max"),
    "worst_peak_current_a": ("A", "worst-case peak collector current", "max"),
}

#: Continuous margins, positive when the check passes: name -> description.
MARGINS = {
    "switch-voltage": "1 - switch peak / (rating x derating)",
    "core-flux": "1 - peak flux / (saturation x flux margin)",
    "switch-current": "1 - worst peak current / IC(max)",
    "start-line": "(lowest specified line - lowest start line) / lowest specified line",
    "start-time": "1 - start-up time / limits.start_time_max",
    "output": "1 - |output - target| / (tolerance x target), nominal line and load",
}

#: What each doubt of the cycle model (:attr:`rcc.cycle.OperatingPoints.doubt`)
#: means, for reports; ``invariant: ...`` names the invariant that failed.
DOUBTS = {
    "pattern": "burst or irregular cycles: the values are averages of a pattern",
    "lockup": "from power-on the output stops far below regulation",
    "regime-boundary": "the power balance sits on a jump between two cycle regimes",
    "held-ring": "the regulation hold keeps the switch off through a ring that reaches its "
                 "threshold; the ring's drive against the held limiter is not weighed",
    "unsettled": "the cycle states (or the bus) did not settle",
    "invariant": "a physical invariant failed: the point's numbers are not to be used",
}


@dataclass(frozen=True)
class FindingMargin:
    """One finding, reduced.

    Attributes
    ----------
    code, severity : str
        As in :class:`rcc.findings.Finding`.
    margin : float or None
        ``-|value - limit| / |limit|`` [1]: how far beyond its limit; ``None``
        when the finding has no value and limit.
    value, limit : float or None
        As in the finding [unit].
    unit : str
        SI unit of value and limit.
    """

    code: str
    severity: str
    margin: float | None
    value: float | None = None
    limit: float | None = None
    unit: str = ""


@dataclass(frozen=True)
class Evaluation:
    """What a study keeps of one full check.

    Attributes
    ----------
    verdict : str
        ``pass``, ``warn`` or ``fail``.
    findings : tuple of FindingMargin
        Every finding, worst first.
    margins : dict
        :data:`MARGINS` name -> relative margin [1] (``None`` where undefined:
        no output target, or the supply does not start).
    quantities : dict
        :data:`QUANTITIES` name -> value [SI] (``None`` where undefined).
    unverified : tuple of str
        The cycle model's doubts (:attr:`rcc.cycle.OperatingPoints.doubt`) at
        the points the check rests on, each once (:func:`doubts_of`); empty:
        the model doubts none.
    report : dict or None
        The full ``CheckReport.to_json()`` when asked for.
    """

    verdict: str
    findings: tuple[FindingMargin, ...]
    margins: dict
    quantities: dict
    unverified: tuple[str, ...] = ()
    report: dict | None = field(default=None, compare=False)

    def severity_of(self, code: str) -> str | None:
        """Worst severity of ``code`` among the findings, ``None`` if absent."""
        found = [f.severity for f in self.findings if f.code == code]
        for severity in ("fail", "warn", "info"):
            if severity in found:
                return severity
        return None

    @property
    def failing(self) -> tuple[str, ...]:
        """Codes of failing findings."""
        return tuple(dict.fromkeys(f.code for f in self.findings if f.severity == "fail"))

    @property
    def warning(self) -> tuple[str, ...]:
        """Codes of warnings (that do not also fail)."""
        failing = set(self.failing)
        return tuple(dict.fromkeys(f.code for f in self.findings
                                   if f.severity == "warn" and f.code not in failing))

    @property
    def smallest_margin(self) -> float:
        """Smallest of the continuous margins and the finding margins [1]."""
        values = [m for m in self.margins.values() if m is not None]
        values += [f.margin for f in self.findings
                   if f.margin is not None and f.severity != "info"]
        if "start-line" in self.margins and self.margins["start-line"] is None:
            values.append(-1.0)  # does not start at any line: a full miss
        return float(min(values)) if values else 0.0


def finding_margin(finding) -> float | None:
    """Signed margin of a finding: ``-|value - limit| / |limit|``.

    Parameters
    ----------
    finding : rcc.findings.Finding
        The finding.

    Returns
    -------
    float or None
        The margin [1]; ``None`` without value and limit.

    Notes
    -----
    Every finding with a value and a limit reports a value beyond its limit
    (above an upper limit, below a lower one), so the margin is negative and
    its size says how far beyond, whatever the direction of the limit.
    """
    if finding.value is None or finding.limit is None or finding.limit == 0:
        return None
    return float(-abs(finding.value - finding.limit) / abs(finding.limit))


def rank_key(evaluation: Evaluation) -> tuple:
    """Sort key, best first: fewer failing checks, fewer warnings, larger
    smallest margin.

    Parameters
    ----------
    evaluation : Evaluation
        A full check, reduced.

    Returns
    -------
    tuple
        Compares smaller for the better design.
    """
    return (len(evaluation.failing), len(evaluation.warning), -evaluation.smallest_margin)


def evaluate(design: Design, keep_report: bool = False) -> Evaluation:
    """Full check of one design, reduced to margins and quantities.

    Parameters
    ----------
    design : Design
        The design [-].
    keep_report : bool
        Also keep the whole report as JSON-ready data [-].

    Returns
    -------
    Evaluation
    """
    from rcc.analysis import full_check

    report = full_check(design)
    points, stress, startup = report.points, report.stress, report.extra["startup"]
    nominal_line = 1
    # the studies run the fast analyses only: the small-signal threshold of
    # oscillation, a lower bound of the line the supply starts into its load from
    start_line = startup.get("min_oscillation_line_v") if design.input.is_ac \
        else startup.get("min_oscillation_bus_v")
    running = np.asarray(points.running, dtype=bool)

    def running_value(values, load):
        # a point where the switch does not run has no frequency or output
        return float(values[nominal_line, load]) if running[nominal_line, load] else None

    quantities = {
        "min_start_line_v": start_line,
        "start_time_s": startup.get("start_time_s"),
        "frequency_min_load_hz": running_value(points.frequency, 0),
        "frequency_max_load_hz": running_value(points.frequency, 2),
        "output_v": running_value(points.output_voltage, 1),
        "switch_peak_v": float(stress.switch_peak_v),
        "core_peak_flux_t": float(stress.core_peak_flux_t),
        "worst_peak_current_a": float(stress.worst_peak_current_a),
    }
    limits = design.limits
    allowed = stress.switch_rating_v * limits.voltage_derating
    lowest_line = design.input.line_voltages[0]
    target = design.output.voltage_target
    margins = {
        "switch-voltage": 1.0 - stress.switch_peak_v / allowed,
        "core-flux": 1.0 - stress.core_peak_flux_t / stress.core_limit_t,
        "switch-current": 1.0 - stress.worst_peak_current_a / design.switch.ic_max,
        "start-line": None if start_line is None else (lowest_line - start_line) / lowest_line,
        "start-time": (None if quantities["start_time_s"] is None
                       else 1.0 - quantities["start_time_s"] / limits.start_time_max),
        "output": (None if target is None or quantities["output_v"] is None else
                   1.0 - abs(quantities["output_v"] - target) / (limits.output_tolerance
                                                                 * target)),
    }
    margins = {name: (None if value is None else float(value))
               for name, value in margins.items()}
    findings = tuple(FindingMargin(f.code, f.severity, finding_margin(f), f.value, f.limit,
                                   f.unit) for f in report.findings)
    return Evaluation(report.verdict, findings, margins, quantities, doubts_of(report),
                      report.to_json() if keep_report else None)


def doubts_of(report) -> tuple[str, ...]:
    """The cycle model's doubts at every point a check rests on.

    Parameters
    ----------
    report : rcc.checks.CheckReport
        A check: its report grid and its temperature x gain corners.

    Returns
    -------
    tuple of str
        Each distinct non-empty :attr:`rcc.cycle.OperatingPoints.doubt`, in the
        order met (grid first) [-]; empty where the model doubts no point.
    """
    doubts = [str(d) for points in (report.points,) + tuple(report.corners)
              for d in np.ravel(points.doubt) if str(d)]
    return tuple(dict.fromkeys(doubts))


def describe_doubt(doubt: str) -> str:
    """What a doubt of the cycle model means (:data:`DOUBTS`).

    Parameters
    ----------
    doubt : str
        ``pattern``, ``lockup``, ``regime-boundary``, ``held-ring``, ``unsettled``,
        ``invariant: <name>`` or ``model-error`` [-].

    Returns
    -------
    str
        One phrase [-].
    """
    if doubt == "model-error":
        return "the model raised an error (counted as failing)"
    return DOUBTS.get(doubt.split(":")[0], "doubted by the cycle model")


def quantity_limits(design: Design) -> dict:
    """The acceptance limits of the headline quantities, for figures.

    Parameters
    ----------
    design : Design
        The design [-].

    Returns
    -------
    dict
        Quantity name -> list of limits [SI]: the derated switch rating, the
        allowed flux, IC(max), the lowest specified line, the longest start-up
        time and the output band (when a target is given).
    """
    from rcc.stress import rating_basis

    limits = design.limits
    _, rating = rating_basis(design.switch)
    result = {
        "switch_peak_v": [rating * limits.voltage_derating],
        "core_peak_flux_t": [design.transformer.saturation_flux_density * limits.flux_margin],
        "worst_peak_current_a": [design.switch.ic_max],
        "min_start_line_v": [design.input.line_voltages[0]],
        "start_time_s": [limits.start_time_max],
    }
    target = design.output.voltage_target
    if target is not None:
        result["output_v"] = [target * (1 - limits.output_tolerance),
                              target * (1 + limits.output_tolerance)]
    return result

