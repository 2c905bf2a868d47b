"""Everything `rcc check` runs, in one call: the cycle-model checks plus the
analyses that other modules provide (start-up), merged into one report."""

from __future__ import annotations

from dataclasses import replace

from rcc.checks import CheckReport, check_design
from rcc.design import Design

__all__ = ["full_check"]


def full_check(design: Design) -> CheckReport:
    """Cycle-model checks and, when available, the start-up analysis.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    CheckReport
        With the start-up findings merged (duplicate codes keep the worst)
        and a ``"startup"`` section in ``extra``.
    """
    report = check_design(design)
    findings = list(report.findings)
    extra = dict(report.extra)
    try:
        from rcc.startup import startup_findings, startup_report
    except ImportError:  # start-up analysis not installed in this build
        return report
    startup = startup_report(design)
    extra["startup"] = startup.to_json()
    findings += startup_findings(design, startup)
    order = {"fail": 0, "warn": 1, "info": 2}
    best: dict[tuple, object] = {}
    for finding in findings:
        key = (finding.code, finding.message)
        best[key] = finding
    merged = sorted(best.values(), key=lambda f: order[f.severity])
    return replace(report, findings=tuple(merged), extra=extra)
