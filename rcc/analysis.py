"""Everything `rcc check` runs, in one call: the cycle-model checks plus the
analyses that other modules provide (start-up), merged into one report."""

from __future__ import annotations

from dataclasses import replace

from rcc.checks import CheckReport, check_design
from rcc.design import Design
from rcc.findings import sorted_findings
from rcc.startup import startup_findings, startup_report

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
        With the start-up findings merged in (a code may appear twice when
        both analyses raise it, e.g. ``weak-drive`` in steady state and right
        after start-up) and a ``"startup"`` section in ``extra``.
    """
    report = check_design(design)
    startup = startup_report(design)
    findings = sorted_findings(report.findings + tuple(startup_findings(design, startup)))
    return replace(report, findings=findings, extra={**report.extra,
                                                     "startup": startup.to_json()})
