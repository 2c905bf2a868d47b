"""Everything `rcc check` runs, in one call: the cycle-model checks plus the
analyses that other modules provide (start-up), merged into one report."""

from __future__ import annotations

from dataclasses import replace

from rcc.checks import CheckReport, check_design
from rcc.design import Design
from rcc.findings import ordered_findings
from rcc.startup import startup_findings, startup_report

__all__ = ["full_check"]


def full_check(design: Design, startup_engine: bool = False, progress=None) -> CheckReport:
    """Cycle-model checks and, when available, the start-up analysis.

    Parameters
    ----------
    design : Design
        The design.
    startup_engine : bool
        Also run the time-domain engine from power-on: at the worst start-up
        corner into full load (does it reach its operating point?) and at the
        highest line for the start-up stresses
        (:func:`rcc.checks.with_startup_stress`); seconds.
    progress : callable, optional
        Called as ``progress(description)`` before each stage (a progress
        display) [-].

    Returns
    -------
    CheckReport
        With the start-up findings merged in and a ``"startup"`` section in
        ``extra``.  Where both analyses raise the same code for the same
        quantity (``weak-drive``: the drive margin hFE*Ib/Ic in steady state and
        right after start-up) only the worse is kept.  When the supply cannot
        start, the cause comes first and the findings about a running supply
        are marked ``scope="if-running"`` (:func:`rcc.findings.ordered_findings`).
    """
    def stage(description):
        if progress is not None:
            progress(description)

    stage("cycle model over line, load, temperature and gain corners")
    report = check_design(design)
    stage("start-up analysis" + ("; if it starts, the engine from power-on into the load"
                                  if startup_engine else ""))
    startup = startup_report(design, engine=startup_engine)
    findings = ordered_findings(_one_per_code(
        report.findings + tuple(startup_findings(design, startup)),
        ("weak-drive", "startup-lockup")))
    report = replace(report, findings=findings, extra={**report.extra,
                                                       "startup": startup.to_json()})
    if startup_engine:
        from rcc.checks import with_startup_stress
        from rcc.verification import startup_stress

        time = startup.start_time.total if startup.start_time is not None else None
        stage("engine from power-on at the highest line: start-up stresses")
        report = with_startup_stress(report, startup_stress(design, time))
    return report


def _one_per_code(findings, codes):
    """Keep, for each of ``codes``, only the finding with the worst severity and
    then the lowest margin."""
    from rcc.findings import SEVERITIES

    kept = []
    for finding in findings:
        if finding.code in codes:
            twin = next((k for k in kept if k.code == finding.code), None)
            if twin is not None:
                def badness(f):
                    return (SEVERITIES.index(f.severity),
                            f.margin if f.margin is not None else float("inf"))
                if badness(finding) < badness(twin):
                    kept[kept.index(twin)] = finding
                continue
        kept.append(finding)
    return tuple(kept)
