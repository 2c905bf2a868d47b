"""Start-up analysis: power-on DC point, symbolic small-signal network,
poles and verdict, minimum start-up voltage, start-up time, continuation
checks (weak drive, hiccup) and findings.

Public entry points: :func:`analyze_startup`, :func:`startup_report`,
:func:`startup_findings`, :func:`plot_loop_gain`.
"""

from rcc.startup.analysis import (BatchVerdict, DcSummary, DriveCycle, StartTime,
                                  StartupReport, StartupResult, analyze_startup,
                                  batch_verdict, drive_cycle, estimate_start_time,
                                  minimum_start_bus_voltage, startup_findings,
                                  startup_report)
from rcc.startup.dcpoint import DcPointError
from rcc.startup.plotting import plot_loop_gain

__all__ = [
    "BatchVerdict",
    "DcPointError",
    "DcSummary",
    "DriveCycle",
    "StartTime",
    "StartupReport",
    "StartupResult",
    "analyze_startup",
    "batch_verdict",
    "drive_cycle",
    "estimate_start_time",
    "minimum_start_bus_voltage",
    "plot_loop_gain",
    "startup_findings",
    "startup_report",
]
