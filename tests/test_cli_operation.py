"""`rcc waveforms` says what kind of operation it saw and exits 1 when the
supply does not run (issue 10, section 2)."""

from __future__ import annotations

import importlib.util

import pytest
from typer.testing import CliRunner

from rcc.cli import app

from conftest import WORKED_CASES

runner = CliRunner()
HAVE_CLASSIFIER = importlib.util.find_spec("rcc.operation") is not None


def test_no_oscillation_exits_1():
    result = runner.invoke(app, ["waveforms", str(WORKED_CASES / "fault_feedback_reversed.toml"),
                                 "--time", "1ms"])
    assert result.exit_code == 1, result.output
    assert "NO OSCILLATION" in result.stdout


def test_running_supply_exits_0_and_names_its_operation():
    result = runner.invoke(app, ["waveforms", str(WORKED_CASES / "standby_12v_universal.toml"),
                                 "--time", "3ms", "--line", "85V"])
    assert result.exit_code == 0, result.output
    line = next(l for l in result.stdout.splitlines() if l.strip().startswith("operation"))
    assert "kHz" in line or "still starting up" in line


@pytest.mark.skipif(not HAVE_CLASSIFIER, reason="rcc.operation not installed")
def test_lockup_exits_1():
    # the 5 V case cannot start into its full load (README, startup-lockup)
    result = runner.invoke(app, ["waveforms", str(WORKED_CASES / "aux_5v_48v_dc.toml"),
                                 "--time", "10ms", "--load", "1A"])
    assert result.exit_code == 1, result.output
    assert "LOCK-UP" in result.stdout


@pytest.mark.skipif(not HAVE_CLASSIFIER, reason="rcc.operation not installed")
def test_burst_reports_its_period_and_pulses():
    result = runner.invoke(app, ["waveforms", str(WORKED_CASES / "standby_12v_universal.toml"),
                                 "--time", "20ms"])
    assert result.exit_code == 0, result.output
    assert "burst:" in result.stdout and "pulses every" in result.stdout
