"""`rcc waveforms` through typer's CliRunner (exit codes, files, messages)."""

import csv

import pytest
from typer.testing import CliRunner

from rcc.cli import app

WORKED = "worked_cases/standby_12v_universal.toml"
runner = CliRunner()


def test_waveforms_writes_plot_and_csv(tmp_path):
    plot, table = tmp_path / "w.png", tmp_path / "w.csv"
    result = runner.invoke(app, ["waveforms", WORKED, "--load", "40 ohm", "--time", "1ms",
                                 "--plot", str(plot), "--csv", str(table)])
    assert result.exit_code == 0, result.output
    assert "switch turn-ons" in result.output
    assert plot.stat().st_size > 10_000
    with table.open() as handle:
        rows = list(csv.reader(handle))
    header = rows[0]
    for name in ("time_s", "collector_voltage_V", "primary_current_A", "base_current_A",
                 "limiter_current_A", "feedback_voltage_V", "output_voltage_V"):
        assert name in header
    assert len(rows) > 100
    times = [float(row[0]) for row in rows[1:]]
    assert times == sorted(times) and times[-1] == pytest.approx(1e-3, abs=1e-12)


def test_waveforms_refuses_to_overwrite(tmp_path):
    plot = tmp_path / "w.png"
    plot.write_bytes(b"keep")
    result = runner.invoke(app, ["waveforms", WORKED, "--time", "0.1ms", "--plot", str(plot)])
    assert result.exit_code == 2
    assert "--force" in result.output
    assert plot.read_bytes() == b"keep"


@pytest.mark.parametrize("options, words", [
    (["--load", "0.3"], "give the unit"),
    (["--load", "3 kg"], "current, resistance or power"),
    (["--line", "-5 V"], "positive voltage"),
    (["--time", "2 A"], "--time"),
    (["--plot", "w"], ".png"),
])
def test_waveforms_bad_options_exit_2(options, words):
    result = runner.invoke(app, ["waveforms", WORKED] + options)
    assert result.exit_code == 2
    assert words in result.output


def test_waveforms_from_dc_point_and_dc_line(tmp_path):
    result = runner.invoke(app, ["waveforms", WORKED, "--line", "120 V", "--load", "4 W",
                                 "--time", "0.5ms", "--from-dc-point"])
    assert result.exit_code == 0, result.output
    assert "120 V" in result.output
