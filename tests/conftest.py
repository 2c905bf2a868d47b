"""Shared fixtures: paths of the worked cases and a minimal valid design.

The minimal design is an invented example of our own (not a product): it
holds only the required keys of every section, so each bad-input test can
break exactly one thing and check the one line reported about it.
"""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
WORKED_CASES = REPO / "worked_cases"
STANDBY_CASE = WORKED_CASES / "standby_12v_universal.toml"

#: Required keys only (invented values); numbers in SI units or strings with units.
MINIMAL_DESIGN = {
    "title": "minimal test design (invented)",
    "input": {
        "ac_min": "85 V",
        "ac_nominal": "230 V",
        "ac_max": "265 V",
        "bulk_capacitance": "22 uF",
    },
    "switch": {
        "hfe_min": 20,
        "hfe_typ": 30,
        "hfe_max": 45,
        "storage_time": "1 us",
        "transition_frequency": "4 MHz",
        "output_capacitance": "20 pF",
        "vceo": "400 V",
        "ic_max": "1.5 A",
    },
    "transformer": {
        "primary_turns": 80,
        "output_turns": 10,
        "feedback_turns": 8,
        "magnetizing_inductance": "1.5 mH",
        "coupling": 0.99,
        "core_area": "19.3 mm^2",
    },
    "startup": {"resistance": "680 kohm"},
    "drive": {"resistance": "150 ohm", "capacitance": "47 nF"},
    "limiter": {"sense_resistance": "1.5 ohm", "base_resistance": "1 kohm"},
    "output": {
        "capacitance": "470 uF",
        "load_min": "0.05 A",
        "load_nominal": "0.3 A",
        "load_max": "0.5 A",
    },
}


def _toml_value(value) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if value != value:
            return "nan"
        if value in (float("inf"), float("-inf")):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    return str(value)


def to_toml(data: dict) -> str:
    """Write a design dictionary (top-level scalars, one table per section) as TOML."""
    lines = [f"{k} = {_toml_value(v)}" for k, v in data.items() if not isinstance(v, dict)]
    for section, table in data.items():
        if isinstance(table, dict):
            lines.append(f"\n[{section}]")
            lines += [f"{k} = {_toml_value(v)}" for k, v in table.items()]
    text = "\n".join(lines) + "\n"
    tomllib.loads(text)  # the helper itself must write valid TOML
    return text


@pytest.fixture
def minimal_design_dict() -> dict:
    """A fresh deep copy of :data:`MINIMAL_DESIGN` the test may modify."""
    return copy.deepcopy(MINIMAL_DESIGN)


@pytest.fixture
def standby_case() -> Path:
    """Path of the bundled worked case (invented 12 V standby supply)."""
    assert STANDBY_CASE.is_file()
    return STANDBY_CASE


@pytest.fixture
def worked_cases() -> list[Path]:
    """Every bundled worked case."""
    cases = sorted(WORKED_CASES.glob("*.toml"))
    assert cases
    return cases


@pytest.fixture
def write_design(tmp_path):
    """Write a design dictionary (or raw text) to a TOML file and return its path."""

    def write(data, name: str = "design.toml") -> Path:
        path = tmp_path / name
        path.write_text(data if isinstance(data, str) else to_toml(data), encoding="utf-8")
        return path

    return write


def regulating_designs() -> dict:
    """Worked cases whose steady state is a regulated supply: at the lowest
    line and nominal load the cycle model runs (boundary conduction or a dead time
    after demagnetization, no lock-up or burst) and the regulation path ends
    the on-time.  Fault cases (deliberately broken designs for the start-up
    analysis) drop out by this physical test, not by their file names."""
    from rcc.cycle import operating_points
    from rcc.design import load_design

    selected = {}
    for path in sorted(WORKED_CASES.glob("*.toml")):
        design = load_design(path)
        voltage = design.output.voltage_target or 12.0
        nominal = operating_points(design, design.input.line_voltages[0],
                                   float(design.output.load_nominal.current(voltage)))
        if (bool(nominal.running) and str(nominal.on_end) == "regulation"
                and str(nominal.mode) in ("bcm", "dcm")):
            selected[path.stem] = design
    assert "standby_12v_universal" in selected
    return selected
