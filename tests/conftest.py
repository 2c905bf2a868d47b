"""Shared fixtures: paths of the worked cases and a minimal valid design.

The minimal design is an invented example of our own (not a product): it
holds only the required keys of every section, so each bad-input test can
break exactly one thing and check the one line reported about it.
"""

from __future__ import annotations

import copy
import functools
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


@functools.lru_cache(maxsize=1)
def _regulating_designs() -> dict:
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


def regulating_designs() -> dict:
    """Worked cases whose steady state is a regulated supply (computed once per
    process; see :func:`_regulating_designs`), as a new dict."""
    return dict(_regulating_designs())


# ------------------------------------------------------- shared results
# Several tests assert on the same expensive result: the full check of a worked
# case (the cycle model on 63 points and the start-up analysis, up to a minute of
# CPU on the fault cases) is asserted on by tests/test_checks.py (the check
# command), tests/test_findings.py and tests/test_worked_cases.py.  Each is
# computed once per test process and shared; every caller gets its own deep copy,
# so no test can change what another sees.  The functions are pure (same design
# in, same report out), so a shared result is the result each test would compute.
# Tests that check determinism or worker independence (tests/test_spread.py) do
# not use this.  Under pytest-xdist the files that share results run on one
# worker (``SHARED_GROUPS`` below), so they still compute each result once.

_SHARED: dict = {}
_ORIGINALS: dict = {}


def _original(module_name: str, name: str):
    """The library function before any test replaced it."""
    import importlib

    key = (module_name, name)
    if key not in _ORIGINALS:
        _ORIGINALS[key] = getattr(importlib.import_module(module_name), name)
    return _ORIGINALS[key]


def _shared_call(function, *args, **keywords):
    key = (function.__module__, function.__qualname__, args, tuple(sorted(keywords.items())))
    try:
        if key not in _SHARED:
            _SHARED[key] = function(*args, **keywords)
    except TypeError:  # an unhashable argument: nothing to share
        return function(*args, **keywords)
    return copy.deepcopy(_SHARED[key])


def shared_check_design(design):
    """:func:`rcc.checks.check_design`, computed once per design and process."""
    return _shared_call(_original("rcc.checks", "check_design"), design)


def _full_check_sharing_its_parts(design, startup_engine: bool = False):
    # the full check with its cycle-model part shared with shared_check_design
    import rcc.analysis

    saved = rcc.analysis.check_design
    rcc.analysis.check_design = shared_check_design
    try:
        return _original("rcc.analysis", "full_check")(design, startup_engine=startup_engine,
                                                       progress=_PROGRESS.get("now"))
    finally:
        rcc.analysis.check_design = saved


_PROGRESS: dict = {}


def shared_full_check(design, startup_engine: bool = False, progress=None):
    """:func:`rcc.analysis.full_check`, computed once per design and process
    (``progress`` is called only when it is computed)."""
    _PROGRESS["now"] = progress
    try:
        return _shared_call(_full_check_sharing_its_parts, design, startup_engine=startup_engine)
    finally:
        _PROGRESS.pop("now", None)


@pytest.fixture
def shared_results(monkeypatch):
    """Let the commands a test runs (``rcc check``) use the shared full check."""
    import rcc.analysis
    import rcc.checks

    _original("rcc.checks", "check_design")
    _original("rcc.analysis", "full_check")
    monkeypatch.setattr(rcc.checks, "check_design", shared_check_design)
    monkeypatch.setattr(rcc.analysis, "check_design", shared_check_design)
    monkeypatch.setattr(rcc.analysis, "full_check", shared_full_check)


#: Test files that share results run on the same pytest-xdist worker.
SHARED_GROUPS = {"test_checks": "worked-case checks", "test_findings": "worked-case checks",
                 "test_worked_cases": "worked-case checks"}


def _uses_a_shared_fixture(item) -> bool:
    """Whether the test uses a fixture of the test suite (not of a plugin) that
    is computed once for several tests (module, class, package or session scope)."""
    info = getattr(item, "_fixtureinfo", None)
    definitions = info.name2fixturedefs.values() if info is not None else ()
    return any(d.scope != "function" and d.baseid for defs in definitions for d in defs)


@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(config, items):
    """How ``--dist loadgroup`` (with ``-n``) shares the tests out: the files of
    :data:`SHARED_GROUPS` on one worker; a test that uses a fixture computed once
    for its file (module scope) with the rest of its file, so the fixture is
    computed once; every other test on its own, so a long file of independent
    tests (the hypothesis properties) spreads over the workers."""
    for item in items:
        if item.get_closest_marker("xdist_group") is not None:
            continue
        stem = item.path.stem
        if stem in SHARED_GROUPS:
            item.add_marker(pytest.mark.xdist_group(SHARED_GROUPS[stem]))
        elif _uses_a_shared_fixture(item):
            item.add_marker(pytest.mark.xdist_group(stem))
