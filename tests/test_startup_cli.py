"""`rcc startup` through typer's CliRunner: exit codes, JSON keys, the
derivation, the plot file and the overwrite guard."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from rcc.cli import app
from tests.conftest import WORKED_CASES

runner = CliRunner()
# the standby case starts into its load from power-on (the 5 V case does not:
# its engine run locks up, issue 8)
HEALTHY = str(WORKED_CASES / "standby_12v_universal.toml")
STALL = str(WORKED_CASES / "fault_limiter_stall.toml")


def test_healthy_design_exits_zero_and_prints_the_verdict():
    result = runner.invoke(app, ["startup", HEALTHY])
    assert result.exit_code == 0, result.output
    assert "verdict      starts into its load" in result.output
    assert "oscillation begins from" in result.output and "start time" in result.output


def test_stalled_design_exits_one_with_the_finding():
    result = runner.invoke(app, ["startup", STALL])
    assert result.exit_code == 1
    assert "held by: limiter" in result.output
    assert "FAIL dc-stall" in result.output


def test_json_keys():
    result = runner.invoke(app, ["startup", STALL, "--json"])
    assert result.exit_code == 1
    data = json.loads(result.output)
    assert set(data) == {"design", "startup", "findings"}
    assert set(data["startup"]) == {
        "starts", "growth_rate_per_s", "growth_frequency_hz", "min_start_bus_v",
        "min_start_line_v", "start_time_s", "holding_element", "dc_point", "poles",
        "oscillation_begins", "reaches_operating_point", "time_to_regulation_s", "power_on",
        "ac_input", "min_start_basis", "min_start_line_resolution_v", "min_start_search",
        "min_oscillation_bus_v", "min_oscillation_line_v"}
    assert data["startup"]["starts"] is False
    assert data["startup"]["dc_point"]["limiter_active"] is True
    assert [f["code"] for f in data["findings"]] == ["dc-stall"]


def test_derivation_plain_and_latex():
    plain = runner.invoke(app, ["startup", HEALTHY, "--derivation"])
    assert plain.exit_code == 0
    assert "Loop gain, opened at the switch collector current source" in plain.output
    assert "g_m" in plain.output and "verdict" in plain.output
    # --latex FILE writes a document; the JSON carries the plain derivation
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as folder:
        target = Path(folder) / "startup.tex"
        latex = runner.invoke(app, ["startup", HEALTHY, "--latex", str(target),
                                    "--derivation", "--json"])
        assert latex.exit_code == 0, latex.output
        assert "\\frac" in target.read_text()
    assert "Routh first column" in json.loads(latex.output)["derivation"]


def test_plot_written_and_not_overwritten(tmp_path):
    target = tmp_path / "loop.png"
    result = runner.invoke(app, ["startup", HEALTHY, "--plot", str(target)])
    assert result.exit_code == 0, result.output
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    again = runner.invoke(app, ["startup", HEALTHY, "--plot", str(target)])
    assert again.exit_code == 2 and "--force" in again.output
    forced = runner.invoke(app, ["startup", HEALTHY, "--plot", str(target), "--force"])
    assert forced.exit_code == 0


def test_bad_input_exits_two(tmp_path):
    missing = runner.invoke(app, ["startup", str(tmp_path / "nope.toml")])
    assert missing.exit_code == 2 and "does not exist" in missing.output
    bad = tmp_path / "bad.toml"
    bad.write_text((WORKED_CASES / "aux_5v_48v_dc.toml").read_text().replace(
        'resistance = "47 kohm"', 'resistance = "0 ohm"'))
    result = runner.invoke(app, ["startup", str(bad)])
    assert result.exit_code == 2 and "startup.resistance" in result.output
    wrong_folder = runner.invoke(app, ["startup", HEALTHY, "--plot",
                                       str(tmp_path / "no" / "x.png")])
    assert wrong_folder.exit_code == 2
    wrong_suffix = runner.invoke(app, ["startup", HEALTHY, "--plot", str(tmp_path / "x.txt")])
    assert wrong_suffix.exit_code == 2 and ".png" in wrong_suffix.output
