"""Progress displays of the long commands: what the library reports and how
the command line shows it (only on a terminal, never with --quiet)."""

from __future__ import annotations

import numpy as np
import pytest
from typer.testing import CliRunner

import rcc.cli.progress as progress_module
from rcc.cli import app
from rcc.cli.progress import Status

runner = CliRunner()


def test_newton_reports_every_iteration_with_its_residual():
    """The periodic-orbit solver (rcc cycle) reports each Newton iteration;
    on the relaxation oscillator of tests/test_pss_reduced.py."""
    from test_pss_reduced import LOW, SUPPLY, _advance, relaxation_oscillator

    from rcc.engine.shooting import find_periodic_orbit

    calls = []
    orbit = find_periodic_orbit(_advance(relaxation_oscillator()), np.array([LOW, 5.0]),
                                scale=np.array([SUPPLY, SUPPLY]), tolerance=1e-12,
                                progress=lambda *args: calls.append(args))
    assert orbit.converged
    assert [done for _, done, _ in calls] == list(range(len(calls)))
    assert all(total == 12 for _, _, total in calls)
    assert all(text.startswith("Newton on the cycle: iteration") for text, _, _ in calls)
    residuals = [float(text.split("residual ")[1].split(" ")[0]) for text, _, _ in calls]
    assert residuals[-1] < 1e-12 < residuals[0]


def test_full_check_reports_its_stages(monkeypatch):
    import rcc.analysis as analysis

    stages = []

    class Stop(Exception):
        pass

    def stop(*args, **kwargs):
        raise Stop

    monkeypatch.setattr(analysis, "check_design", lambda design: stages.append("ran"))
    monkeypatch.setattr(analysis, "startup_report", stop)
    with pytest.raises(Stop):
        analysis.full_check(None, startup_engine=True, progress=stages.append)
    assert stages == ["cycle model over line, load, temperature and gain corners", "ran",
                      "start-up analysis; if it starts, the engine from power-on into the load"]


def test_status_is_off_without_a_terminal_and_with_quiet(monkeypatch):
    assert not Status().enabled            # pytest's streams are not terminals
    monkeypatch.setattr(progress_module, "_interactive", lambda: True)
    assert not Status(quiet=True).enabled
    with Status() as status:
        assert status.enabled
        status("phase one", 0, 4)
        first = status._task
        status("phase one", 2, 4)          # same phase: an update
        assert status._task == first
        assert status._progress.tasks[-1].completed == 2
        status("phase two")                # a new phase: a spinner
        assert status._task != first and status._progress.tasks[-1].total is None


@pytest.mark.parametrize("command", ["check", "sweep", "cycle", "waveforms", "startup",
                                     "compare", "audit", "spread", "fix"])
def test_every_long_command_takes_quiet(command):
    result = runner.invoke(app, [command, "--help"], env={"COLUMNS": "200"})
    assert result.exit_code == 0
    assert "--quiet" in result.output


def test_progress_line_is_the_same_display_without_a_thread(monkeypatch):
    import threading

    from rcc.cli.progress_line import Progress

    assert not Progress("spread").enabled          # not a terminal
    monkeypatch.setattr(progress_module, "_interactive", lambda: True)
    assert not Progress("spread", quiet=True).enabled
    before = threading.active_count()
    monkeypatch.setattr(progress_module, "ESTIMATE_AFTER", 0.0)
    line = Progress("spread (3 parameters)")
    try:
        assert line.enabled
        line(1, 4)
        line(2, 4)
        task = line._status._progress.tasks[-1]
        assert task.description == "spread (3 parameters)" and task.completed == 2
        assert task.fields["percent"].startswith(" 50 %, about")
        assert threading.active_count() == before  # nothing redraws in the background
    finally:
        line.close()
