"""Comparison, candidates files and the audit ranking (rcc.compare), and the
--set / --set-each / --candidates command-line options."""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from rcc.cli import app
from rcc.compare import audit, compare, load_candidates, variants_from_settings
from rcc.design import DesignError, load_design

runner = CliRunner()

CANDIDATES = """
title = "test candidates (invented)"

[[candidate]]
name = "under-rated"
description = "an obviously under-rated switch"
[candidate.set]
switch.vceo = "250 V"
switch.vcev = "350 V"

[[candidate]]
name = "better"
description = "same gain and speed, far higher ratings"
[candidate.set]
switch.vceo = "700 V"
switch.vcev = "1200 V"
switch.ic_max = "3 A"
"""


@pytest.fixture(scope="module")
def standby_audit():
    from tests.conftest import STANDBY_CASE

    # with an 800 V VCEV switch: the standby case itself peaks within a few
    # volts of 80 % of its 700 V part, and the reference here must pass clearly
    import dataclasses

    design = load_design(STANDBY_CASE)
    return dataclasses.replace(design, switch=dataclasses.replace(design.switch, vcev=800.0))


def test_audit_ranks_underrated_below_and_better_above(standby_audit, tmp_path):
    path = tmp_path / "candidates.toml"
    path.write_text(CANDIDATES, encoding="utf-8")
    candidates = load_candidates(path, standby_audit)
    result = audit(standby_audit, candidates, samples=0)
    order = [c.variant.name for c in result.ranking]
    assert order.index("better") < order.index("reference") < order.index("under-rated")
    worst = result.ranking[-1]
    assert "switch-overvoltage" in worst.evaluation.failing
    assert "fails the check: " in worst.reason and "switch-overvoltage" in worst.reason
    # the under-rated switch is worse than the reference in verdict and switch voltage
    quantities = {w.quantity for w in result.comparison.worse if w.design == "under-rated"}
    assert {"verdict", "switch-voltage", "switch-overvoltage"} <= quantities
    assert not any(w.quantity == "switch-voltage" for w in result.comparison.worse
                   if w.design == "better")


def test_candidates_file_errors_name_file_candidate_and_key(standby_audit, tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('[[candidate]]\nname = "x"\n[candidate.set]\nswitch.vcoe = "300 V"\n'
                    '[[candidate]]\nname = "y"\n[candidate.set]\nstartup.resistance = "abc"\n',
                    encoding="utf-8")
    with pytest.raises(DesignError) as error:
        load_candidates(path, standby_audit)
    lines = error.value.problems
    assert any("bad.toml: candidate 'x'" in line and "switch.vcoe" in line
               and "did you mean 'vceo'" in line for line in lines)
    assert any("candidate 'y'" in line and "startup.resistance = 'abc'" in line
               for line in lines)


def test_compare_marks_best_and_worse(standby_audit):
    variants = variants_from_settings(standby_audit, [{"startup.resistance": 2.2e6}])
    from rcc.compare import Variant

    result = compare([Variant("base", standby_audit, {})] + variants)
    rows = {row.quantity: row for row in result.rows}
    assert rows["min_start_line_v"].best == (0,)
    assert any(w.quantity == "min_start_line_v" for w in result.worse)
    # same line/load grid for both
    assert [p["line_v"] for p in result.grid[0]] == [p["line_v"] for p in result.grid[1]]


def test_set_overrides_with_file_validation_and_title(standby_case):
    result = runner.invoke(app, ["check", str(standby_case), "--json",
                                 "--set", "switch.vcev=1000 V", "--set", "startup.resistance=1 Mohm"])
    assert result.exit_code in (0, 1), result.output
    data = json.loads(result.stdout)
    assert "[--set switch.vcev=1000 V, startup.resistance=1 Mohm]" in data["title"]
    bad = runner.invoke(app, ["startup", str(standby_case), "--set", "switch.hfe_mn=3"])
    assert bad.exit_code == 2
    assert "switch.hfe_mn = 3: unknown key (did you mean 'hfe_min'?)" in bad.stderr
    malformed = runner.invoke(app, ["sweep", str(standby_case), "--set", "switch.hfe_min"])
    assert malformed.exit_code == 2
    assert "expected section.key=VALUE" in malformed.stderr


@pytest.mark.parametrize("command", ["check", "sweep", "startup", "cycle", "waveforms",
                                     "compare", "audit", "spread", "fix"])
def test_every_command_refuses_a_bad_override(standby_case, command):
    extra = ["--candidates", str(standby_case)] if command == "audit" else []
    result = runner.invoke(app, [command, str(standby_case), *extra,
                                 "--set", "limiter.sense_resistance=-1 ohm"])
    assert result.exit_code == 2
    assert "limiter.sense_resistance = '-1 ohm': expected a positive" in result.stderr


def test_compare_json_shape(standby_case):
    # (the reference with an 800 V VCEV part passes the voltage checks)
    result = runner.invoke(app, ["compare", str(standby_case), "--json",
                                 "--set", "switch.vcev=800 V",
                                 "--set-each", "switch.vceo=250 V,switch.vcev=350 V"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert len(data["designs"]) == 2
    for design in data["designs"]:
        assert {"name", "title", "verdict", "findings", "operating_points", "startup",
                "stress"} <= set(design)
    assert {"design": "switch.vceo=250 V, switch.vcev=350 V", "quantity": "verdict",
            "reference": "warn", "value": "fail"} in data["worse"]
