"""`rcc check` solves the operating points the cycle model doubts with the
engine from power-on, as far as its budget of nominal engine time allows (rcc.checks.
solve_doubtful_points), and keeps the cycle model's values for comparison."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from rcc import load_design
from rcc.checks import ENGINE_MODES, check_design, solve_doubtful_points
from rcc.cli import app
from rcc.report import format_check_report
from tests.conftest import WORKED_CASES

STANDBY = WORKED_CASES / "standby_12v_universal.toml"
runner = CliRunner()


@pytest.fixture(scope="module")
def standby_report():
    return check_design(load_design(STANDBY))


@pytest.fixture(scope="module")
def one_point(standby_report):
    # any positive budget starts the first (cheapest) run; its nominal cost (set-up
    # plus planned cycles, never the clock) spends the budget, on every machine
    return solve_doubtful_points(standby_report, budget=1e-3)


def test_the_standby_case_has_doubtful_points(standby_report):
    doubts = [str(d) for d in np.ravel(standby_report.points.doubt)]
    assert sum(bool(d) for d in doubts) >= 2  # else this file tests nothing


def test_a_doubtful_point_is_solved_by_the_engine(standby_report, one_point):
    records = one_point.to_json()["operating_points"]
    model = standby_report.points.records()
    solved = [i for i, r in enumerate(records) if r["source"] == "engine"]
    unsolved = [p for p in one_point.engine_points if not p.solved]
    assert len(solved) == 1 and unsolved  # one run, then the budget is spent
    i = solved[0]
    record, point = records[i], next(p for p in one_point.engine_points if p.solved)
    run = point.run
    assert point.index == i and model[i]["doubt"] == point.doubt != ""
    # the engine's values, the cycle model's kept beside them
    assert record["output_v"] == run.output_voltage
    assert record["frequency_hz"] == run.frequency
    assert record["peak_current_a"] == run.peak_current
    assert record["load_a"] == pytest.approx(model[i]["load_a"])  # a current load
    assert record["mode"] == ENGINE_MODES[run.kind]
    assert record["cycle_model"] == model[i]
    assert record["on_time_s"] is None and record["losses_w"] is None
    assert record["engine"]["kind"] == run.kind
    # same conditions as the grid point: its line, its load, 25 degC, hfe_typ
    assert run.line_voltage == model[i]["line_v"]
    assert run.temperature - 273.15 == pytest.approx(model[i]["temperature_c"])
    assert run.hfe == load_design(STANDBY).switch.hfe_typ
    # the standby supply regulates there from power-on: a physical answer
    assert run.kind in ("regular", "burst") and run.frequency > 0 and run.peak_current > 0
    # 5 %: the regulation band the standby case is designed for (its limits'
    # output tolerance); measured 11.4-12.3 V from power-on at the grid points
    assert abs(run.output_voltage / 12.0 - 1) < 0.05


def test_the_other_points_stay_marked(standby_report, one_point):
    records = one_point.to_json()["operating_points"]
    for record, model in zip(records, standby_report.points.records()):
        if record["source"] == "engine":
            continue
        assert record["source"] == "cycle-model"
        assert record["output_v"] == model["output_v"]
        if model["doubt"]:
            assert record["doubt"] == model["doubt"]
            assert "time budget" in record["engine"]["skipped"]
        else:
            assert "engine" not in record
    json.dumps(one_point.to_json(), allow_nan=False)


def test_text_report_names_the_engine_points(one_point):
    text = format_check_report(one_point.to_json())
    assert "Doubtful points solved by the engine from power-on" in text
    assert "not solved:" in text and "time budget" in text
    table = text.split("Operating points")[1].split("Doubtful points")[0]
    assert sum(" engine" in line for line in table.splitlines()) >= 1


def test_zero_budget_solves_nothing(standby_report):
    report = solve_doubtful_points(standby_report, budget=0.0)
    assert not any(p.solved for p in report.engine_points)
    assert all(r["source"] == "cycle-model" for r in report.to_json()["operating_points"])
    assert report.to_json()["engine_budget_s"] == 0.0


@pytest.mark.parametrize("value, message", [("20", "with its unit"),
                                            ("-1s", "from 0 s to 1 h"),
                                            ("3V", "time")])
def test_engine_budget_option_is_checked(value, message):
    result = runner.invoke(app, ["check", str(STANDBY), "--engine-budget", value])
    assert result.exit_code == 2
    assert "--engine-budget" in result.stderr and message in result.stderr
