"""Stress and limit checks (rcc.checks) and the `check` / `sweep` commands.

Each check is made to fire on a variant of a worked case and shown quiet on
the case itself, so no check is one that cannot fail.  Expected numbers are
recomputed here from the textbook relation named beside them.
"""

from __future__ import annotations

import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from rcc import load_design
from rcc.checks import STORAGE_PERIOD_FRACTION, check_design
from rcc.cli import app

from conftest import shared_check_design

ROOT = Path(__file__).resolve().parent.parent
STANDBY = ROOT / "worked_cases" / "standby_12v_universal.toml"
AUX = ROOT / "worked_cases" / "aux_5v_48v_dc.toml"
LEGACY = ROOT / "worked_cases" / "legacy_24v_substitute.toml"
WORKED = sorted((ROOT / "worked_cases").glob("*.toml"))

runner = CliRunner()


@pytest.fixture(scope="module")
def standby():
    return load_design(STANDBY)


@pytest.fixture(scope="module")
def standby_report(standby):
    return shared_check_design(standby)  # conftest: shared with the check command


def codes(report):
    return {f.code: f for f in report.findings}


# ------------------------------------------------------------ stresses
def test_switch_peak_is_bus_plus_clamp_voltage(standby, standby_report):
    # peak = highest bus + RCD clamp voltage above the bus (Basso 2008, ch. 7)
    s = standby_report.stress
    bus_max = math.sqrt(2) * 265.0 - 1.6  # rectified-mains crest factor
    assert s.switch_peak_v == pytest.approx(bus_max + s.reflected_v + s.spike_v)
    assert s.switch_peak_v > bus_max + s.reflected_v  # the clamp sits above V_R
    assert s.rating_basis == "vcev" and s.switch_rating_v == 700.0


def test_vceo_exceeded_within_vcev_is_reported(standby):
    # the standby case peaks within a few volts of 80 % of its 700 V VCEV (the
    # RCD clamp capacitor's peak at high line): with an 800 V VCEV part the peak
    # is clearly within the derated VCEV and above VCEO = 400 V, a warning of
    # its own
    switch = dataclasses.replace(standby.switch, vcev=800.0)
    found = codes(check_design(dataclasses.replace(standby, switch=switch)))
    assert "switch-vceo-exceeded" in found
    assert "switch-overvoltage" not in found
    assert found["switch-vceo-exceeded"].value > 400.0


def test_standby_switch_voltage_against_the_engine(standby_report):
    """The check's collector peak (bus crest at high line plus the RCD clamp
    capacitor's peak) against the engine's periodic steady state at 265 V,
    full load, which runs at the bulk valley (361.8 V).  Measured 2026-12-03:
    engine 555.5 V; check 548.4 V (bus crest 373 V plus 175 V of clamp: the
    model's strongest burst pulse there is 0.38 A against the engine's
    0.475 A); 538 V before the clamp capacitor was a cycle state, 567 V with it
    before the zener fed the drive reset on the plateau (notes/cycle_model.md).
    Within 3 % of the engine; the 11 V of crest above the valley are not
    enough to make the check the upper bound it should be here."""
    from rcc.engine.pss import periodic_steady_state

    standby = load_design(STANDBY)
    engine = periodic_steady_state(standby, 265.0, standby.output.load_max)
    check = standby_report.stress.switch_peak_v
    assert check == pytest.approx(engine.switch_peak_voltage, rel=0.03), (check, engine)


def test_switch_overvoltage_fires_on_the_substitute(standby):
    substitute = load_design(LEGACY)
    report = shared_check_design(substitute)  # conftest: shared with the check command
    finding = codes(report)["switch-overvoltage"]
    assert finding.severity == "fail"
    assert report.stress.rating_basis == "vceo"
    assert finding.limit == pytest.approx(0.8 * 400.0)
    # no clamp: spike = Ipk sqrt(L_lk / C) (energy balance, Basso 2008 ch. 7)
    tr = substitute.transformer
    spike = report.stress.worst_peak_current_a * math.sqrt(
        tr.leakage_inductance / substitute.node_capacitance)
    assert report.stress.spike_v == pytest.approx(spike)


def test_core_flux_is_faraday_at_worst_peak(standby, standby_report):
    # B = L I / (N Ae), McLyman 2004 ch. 1; worst I = Vbe(cold)/Rs + Vin ts / L
    tr, lim = standby.transformer, standby.limiter
    cold_vbe = lim.vbe + lim.vbe_tempco * (standby.environment.temperature_min - 298.15)
    bus_max = math.sqrt(2) * 265.0 - 1.6
    current = cold_vbe / lim.sense_resistance + bus_max * standby.switch.storage_time / (
        tr.magnetizing_inductance + tr.leakage_inductance)
    flux = tr.magnetizing_inductance * current / (tr.primary_turns * tr.core_area)
    assert standby_report.stress.worst_peak_current_a == pytest.approx(current)
    assert standby_report.stress.core_peak_flux_t == pytest.approx(flux)
    assert "core-saturation" not in codes(standby_report)
    smaller_core = standby.with_values({"transformer.core_area": "15 mm^2"})
    finding = codes(check_design(smaller_core))["core-saturation"]
    assert finding.severity == "fail" and finding.value > finding.limit


def test_overload_fires_when_the_limit_is_too_low(standby, standby_report):
    assert "overload" not in codes(standby_report)
    from rcc.cycle import limit_power_capability

    env = standby.environment
    capability = float(limit_power_capability(
        standby, standby.input.line_voltages[0],
        max(env.temperature_min, env.temperature_max)))
    target = standby.output.voltage_target
    # a heaviest load that leaves about 6 % reserve: a warning
    tight = codes(check_design(standby.with_values(
        {"output.load_max": f"{capability / 1.06 / target:.6g} A"})))
    assert tight["overload"].severity == "warn"
    # and one 20 % beyond the limit's capability: a failure
    report = check_design(standby.with_values(
        {"output.load_max": f"{capability * 1.2 / target:.6g} A"}))
    finding = codes(report)["overload"]
    assert finding.severity == "fail" and finding.limit < finding.value


@pytest.mark.parametrize("name", ["standby_12v_universal", "fault_startup_resistor_open"])
def test_overload_capability_sits_on_its_own_bus_valley(name):
    """The current-limit capability P is delivered on the bulk valley at its own
    input power: P = P_limit(V_valley(1.25 P)) (the capability is computed with
    the input power taken as 1.25 P).  The same design fed from a DC bus at that
    valley must deliver the same power.  (Three fixed passes of the bus iteration
    oscillated about the balance: 8.92 W for 7.12 W on the standby case.)"""
    from rcc.cycle import limit_power_capability
    from rcc.design import design_from_dict
    from rcc.mains import bus_voltage

    design = load_design(ROOT / "worked_cases" / f"{name}.toml")
    env = design.environment
    hottest = max(env.temperature_min, env.temperature_max)
    line = design.input.line_voltages[0]
    capability = float(limit_power_capability(design, line, hottest))
    assert capability > 0
    valley = float(bus_voltage(design, line, 1.25 * capability))
    data = design.to_dict()
    data["input"] = {"dc_min": valley, "dc_nominal": 1.1 * valley, "dc_max": 1.2 * valley}
    on_valley = float(limit_power_capability(design_from_dict(data), valley, hottest))
    # the balance is solved to 1e-9 relative (rcc.cycle._BUS_TOLERANCE); the
    # delivered power moves by a few times that through its slope in the bus, so
    # 1e-6 leaves three decades of room and still fails the old fixed passes (45 %)
    assert on_valley == pytest.approx(capability, rel=1e-6)


def test_weak_drive_fires_with_a_large_drive_resistor(standby, standby_report):
    # the demo case's drive is adequate: at most a warning (it was just under the
    # 1.25 warning level before the limiter's inverse-mode reset of the drive
    # capacitor, notes/cycle_model.md, and is above it since)
    assert codes(standby_report).get("weak-drive") is None \
        or codes(standby_report)["weak-drive"].severity == "warn"
    weak = standby.with_values({"drive.resistance": "1 kohm"})
    finding = codes(check_design(weak))["weak-drive"]
    assert finding.severity == "fail" and finding.value < 1.0


def test_light_load_frequency_limit_from_storage_time(standby, standby_report):
    # a slow switch (3 us storage) caps the frequency below what the light load asks
    slow = standby.with_values({"switch.storage_time": "3 us"})
    finding = codes(check_design(slow))["light-load-frequency"]
    assert finding.limit == pytest.approx(STORAGE_PERIOD_FRACTION / 3e-6)
    fast = standby.with_values({"switch.storage_time": "50 ns"})
    assert "light-load-frequency" not in codes(check_design(fast))


def test_startup_resistor_dissipation(standby, standby_report):
    # P = (V_bus,max - Vbe)^2 / R  (Ohm's law)
    finding = codes(standby_report)["startup-resistor-power"]
    bus_max = math.sqrt(2) * 265.0 - 1.6
    vbe = 0.7 - 2e-3 * (273.15 - 298.15)
    assert finding.value == pytest.approx((bus_max - vbe) ** 2 / 680e3)
    rated = standby.with_values({"startup.power_rating": "1 W"})
    assert "startup-resistor-power" not in codes(check_design(rated))


def test_output_off_target(standby, standby_report):
    assert "output-off-target" not in codes(standby_report)
    # nominal within the tolerance, a corner outside it: a warning
    corner = standby.with_values({"output.voltage_target": "12.6 V"})
    assert codes(check_design(corner))["output-off-target"].severity == "warn"
    shifted = standby.with_values({"output.voltage_target": "15 V"})
    assert codes(check_design(shifted))["output-off-target"].severity == "fail"


def test_findings_are_sorted_and_finite(standby_report):
    order = {"fail": 0, "warn": 1, "info": 2}
    ranks = [order[f.severity] for f in standby_report.findings]
    assert ranks == sorted(ranks)
    for finding in standby_report.findings:
        for number in (finding.value, finding.limit):
            assert number is None or math.isfinite(number)
        assert finding.message and (finding.advice or finding.severity == "info")


def test_report_json_has_the_documented_keys(standby_report):
    data = standby_report.to_json()
    assert {"title", "verdict", "findings", "operating_points", "stress", "caution"} <= set(data)
    assert len(data["operating_points"]) == 9
    assert set(data["operating_points"][0]) == {
        "line_v", "bus_v", "load_a", "temperature_c", "output_v", "frequency_hz",
        "on_time_s", "off_time_s", "duty", "peak_current_a", "mode", "on_end", "off_end",
        "input_power_w", "losses_w", "pulses_per_pattern", "source", "doubt"}
    # the losses and the load make up the input power (energy balance)
    point = data["operating_points"][0]
    output_power = point["output_v"] * point["load_a"]
    assert point["input_power_w"] == pytest.approx(
        output_power + sum(point["losses_w"].values()), rel=1e-9)
    assert {"switch_peak_v", "switch_rating_v", "rating_basis", "core_peak_flux_t",
            "core_limit_t"} <= set(data["stress"])
    json.dumps(data, allow_nan=False)


# --------------------------------------------------------------- CLI
@pytest.mark.parametrize("path", WORKED, ids=lambda p: p.stem)
def test_check_runs_on_every_worked_case(path, shared_results):
    # no engine runs at the doubtful points here (tests/test_check_engine_points.py)
    result = runner.invoke(app, ["check", str(path), "--json", "--engine-budget", "0s"])
    assert result.exit_code in (0, 1), result.output
    data = json.loads(result.stdout)
    assert result.exit_code == (1 if data["verdict"] == "fail" else 0)
    assert "startup" in data and isinstance(data["startup"]["starts"], bool)
    json.dumps(data, allow_nan=False)


def test_check_text_report_carries_the_caution(shared_results):
    result = runner.invoke(app, ["check", str(STANDBY)])
    text = " ".join(result.stdout.split())
    assert "lethal voltages" in text and "not a safety evaluation" in text
    # the steady state only warns; the first cycles from power-on (engine) saturate
    # the core: the stress table includes start-up (issue 10)
    assert result.exit_code == 1, result.output
    assert "Findings: verdict FAIL" in result.stdout
    assert "start-up peak flux density" in result.stdout
    assert "[FAIL] core-saturation" in result.stdout and "from power-on" in text


def test_check_exit_1_on_fail(shared_results):
    result = runner.invoke(app, ["check", str(LEGACY), "--engine-budget", "0s"])
    assert result.exit_code == 1
    assert "[FAIL] switch-overvoltage" in result.stdout


def test_sweep_csv_plot_and_overwrite_guard(tmp_path):
    csv_file, png_file = tmp_path / "s.csv", tmp_path / "s.png"
    args = ["sweep", str(STANDBY), "--line", "85V:265V:3", "--load", "0.1A:0.5A:4",
            "--csv", str(csv_file), "--plot", str(png_file)]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    lines = csv_file.read_text().splitlines()
    assert len(lines) == 1 + 3 * 4 and lines[0].startswith("line_v,bus_v,load_a")
    assert png_file.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    again = runner.invoke(app, args)
    assert again.exit_code == 2 and "--force" in again.output
    assert runner.invoke(app, args + ["--force"]).exit_code == 0


def test_sweep_json_power_load_and_temperature():
    result = runner.invoke(app, ["sweep", str(AUX), "--line", "48V", "--load", "1W:5W:3",
                                 "--temperature", "-20degC:70degC:2", "--json"])
    # exit 1 exactly when points do not run or lock up from power-on, and
    # those are listed
    data = json.loads(result.stdout)
    assert result.exit_code == (1 if data["not_running"] else 0), result.output
    assert data["load_kind"] == "power" and len(data["operating_points"]) == 6
    for index, row in enumerate(data["operating_points"]):
        # a power load is met, P = V I, at an output within 0.25-2 times the
        # target; at a collapsed output it is a resistance (rcc.cycle.POWER_LOAD_RANGE)
        power = [1.0, 3.0, 5.0][index % 3]
        if row["output_v"] >= 0.25 * 5.0:
            assert row["output_v"] * row["load_a"] == pytest.approx(power, rel=1e-9)
        else:
            assert row["load_a"] == pytest.approx(power * row["output_v"] / 1.25**2,
                                                  rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("option, value, message", [
    ("--line", "85V:x", "START:STOP:COUNT"),
    ("--line", "85V:265V:0", "count from 1 to 1000"),
    ("--load", "3 H:4 H:2", "currents"),
    ("--temperature", "hot", "temperature"),
])
def test_sweep_bad_options_exit_2(option, value, message):
    result = runner.invoke(app, ["sweep", str(STANDBY), option, value])
    assert result.exit_code == 2
    assert message in result.output


def test_sweep_matches_operating_points(standby):
    from rcc.cycle import operating_points
    from rcc.design import Load
    from rcc.sweep import sweep

    result = sweep(standby, [85.0, 265.0], Load("current", np.array([0.1, 0.4])))
    direct = operating_points(standby, 265.0, 0.4)
    assert result.points.frequency[0, 1, 1] == pytest.approx(float(direct.frequency))
    assert result.points.output_voltage[0, 1, 1] == pytest.approx(float(direct.output_voltage))


def test_sweep_verify_compares_with_the_periodic_steady_state():
    # one converged point: the standby case at 30 % load, lowest line (the
    # engine settles to a period-1 orbit there; notes/periodic_steady_state.md)
    result = runner.invoke(app, ["sweep", str(STANDBY), "--line", "85V", "--load", "0.15A",
                                 "--verify", "--json"])
    assert result.exit_code == 0, result.output
    (row,) = json.loads(result.stdout)["verification"]
    assert row["engine_converged"] is True and row["error"] == ""
    assert row["frequency_diff"] == pytest.approx(
        row["engine_frequency_hz"] / row["model_frequency_hz"] - 1, rel=1e-9)
    # both models balance the same output power: the outputs agree within 3 %
    # (measured +2.4 %: the engine's limiter trips at its exponential
    # junction's voltage at the base drive it sinks, about 0.1 V above
    # limiter.vbe; notes/periodic_steady_state.md)
    assert abs(row["output_diff"]) < 0.03


def test_readme_design_file_reference_matches_the_schema():
    # the README's key tables are generated by rcc.schema.markdown_reference();
    # regenerate them when a key changes (python -m rcc.schema)
    from rcc.schema import markdown_reference

    assert markdown_reference() in (ROOT / "README.md").read_text(encoding="utf-8")
