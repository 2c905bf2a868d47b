"""Seeded fuzz test of the whole input path and the models' invariants
(issue 10, "Done when").

Deterministic (fixed seeds); what runs on what, honestly:

1. Malformed input, all 450 cases: the worked cases' files mutated the way
   files break in practice (truncated, bytes flipped, values of the wrong type
   or unit, huge, tiny, negative or non-finite numbers, unknown keys and units,
   nesting, empty sections).  Loading either gives a design or a
   :class:`rcc.design.DesignError` with one line per problem; every sixth
   refused file also through ``rcc check``: exit 2, never a traceback.
2. Generated designs, all of them (at least 200: 120 plausible designs of
   :mod:`rcc.population` and 140 random perturbations of the worked cases,
   every value scaled log-uniformly, orderings kept, phases and clamps
   switched): validation, the bus range, and the small-signal start-up
   analysis at every corner (power-on DC point, linearization, poles, loop
   gain: :func:`rcc.startup.analysis.analyze_startup`) and the drive-capacitor
   cycle after start-up (:func:`rcc.startup.analysis.drive_cycle`).  Every
   number finite, no negative current, frequency or time.
3. A seeded sample of :data:`MODEL_SAMPLE` of those designs (drawn with
   :data:`SAMPLE_SEED`): the whole start-up report (threshold bisection,
   start-up time) and the cycle model at its line x load corners; strict JSON,
   no negative time, current or frequency, duty in [0, 1], the bus within its
   physical range.  One of them through everything ``rcc check`` runs.  The
   cycle model costs seconds per design (it solves its fixed points and
   patterns to tolerance), which is why it sees a sample in CI; with
   ``RCC_SLOW_TESTS=1`` every generated design goes through it (minutes).
"""

from __future__ import annotations

import copy
import json
import math
import random
import tomllib
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from rcc.cli import app
from rcc.cli.outputs import strict_json
from rcc.design import DesignError, Load, design_from_dict, load_design
from rcc.schema import KEYS

ROOT = Path(__file__).resolve().parent.parent
CASES = sorted((ROOT / "worked_cases").glob("*.toml"))
#: Generated designs that must run through the models (the issue asks for 200).
GENERATED = 200
#: Designs taken from :func:`rcc.population.generate` when it exists [1].
POPULATION = 120
runner = CliRunner()


# ------------------------------------------------------------ malformed input
def _text_mutations(text: str, rng: random.Random) -> list[tuple[str, str]]:
    lines = text.splitlines()
    value_lines = [i for i, line in enumerate(lines) if " = " in line and not
                   line.lstrip().startswith("#")]

    def replace_value(new):
        i = rng.choice(value_lines)
        key = lines[i].split(" = ", 1)[0]
        changed = list(lines)
        changed[i] = f"{key} = {new}"
        return "\n".join(changed)

    cut = rng.randrange(1, len(text))
    flipped = bytearray(text.encode())
    for _ in range(3):
        flipped[rng.randrange(len(flipped))] = rng.randrange(256)
    return [
        ("truncated", text[:cut]),
        ("bytes flipped", flipped.decode("utf-8", errors="replace")),
        ("string", replace_value('"abc"')),
        ("wrong unit", replace_value('"3 kg"')),
        ("unknown unit", replace_value('"3 furlong"')),
        ("bare huge integer", replace_value("9" * rng.randrange(20, 400))),
        ("huge with unit", replace_value(f'"1e{rng.randrange(30, 400)} V"')),
        ("tiny", replace_value(f'"1e-{rng.randrange(30, 330)}"')),
        ("negative", replace_value('"-1"')),
        ("nan", replace_value("nan")),
        ("inf", replace_value("-inf")),
        ("nan string", replace_value('"NaN A"')),
        ("list", replace_value("[1, 2, 3]")),
        ("table", replace_value("{ a = 1 }")),
        ("boolean", replace_value("true")),
        ("date", replace_value("1979-05-27")),
        ("empty string", replace_value('""')),
        ("unicode", replace_value('"4,7 \u00b5F\u2126"')),
        ("unknown key", text + "\n[switch.extra]\nx = 1\n"),
        ("unknown section", text + "\n[mystery]\nx = 1\n"),
        ("duplicate key", text + "\n[switch]\nhfe_min = 3\n"),
        ("empty section", "title = 'x'\n[input]\n"),
        ("nested", "title = " + "[" * 3000 + "]" * 3000),
        ("bom", "\ufeff" + text),
        ("only comments", "# nothing here\n"),
    ]


def _malformed_cases():
    rng = random.Random(20261202)
    cases = []
    for path in CASES:
        text = path.read_text(encoding="utf-8")
        for _ in range(2):
            cases += [(f"{path.stem}: {name}", mutated)
                      for name, mutated in _text_mutations(text, rng)]
    return cases


MALFORMED = _malformed_cases()


def test_malformed_inputs_give_a_design_or_one_line_per_problem(tmp_path):
    assert len(MALFORMED) >= 400
    loaded = refused = 0
    for number, (name, text) in enumerate(MALFORMED):
        path = tmp_path / f"case{number}.toml"
        path.write_text(text, encoding="utf-8", errors="surrogateescape")
        try:
            load_design(path)
        except DesignError as error:
            refused += 1
            assert error.problems, name
            for line in error.problems:
                assert line.startswith(f"{path}:"), (name, line)
                assert "\n" not in line and len(line) < 400, (name, line)
        else:
            loaded += 1
    assert refused > loaded > 0


def test_malformed_inputs_through_the_command_line(tmp_path):
    """The refused files through ``rcc check``: exit 2, one line each, no
    traceback (the loadable ones run through the models below)."""
    for number, (name, text) in enumerate(MALFORMED[::6]):
        path = tmp_path / f"case{number}.toml"
        path.write_text(text, encoding="utf-8", errors="surrogateescape")
        try:
            load_design(path)
            continue
        except DesignError:
            pass
        result = runner.invoke(app, ["check", str(path), "--json"])
        assert result.exit_code == 2, (name, result.output)
        assert isinstance(result.exception, SystemExit), (name, result.exception)
        assert "Traceback" not in result.output and result.stdout == "", name


# ------------------------------------------------------------ generated designs
#: Keys scaled together so that the file's orderings hold.
_TOGETHER = (("input", ("ac_min", "ac_nominal", "ac_max")),
             ("input", ("dc_min", "dc_nominal", "dc_max")),
             ("switch", ("hfe_min", "hfe_typ", "hfe_max")),
             ("output", ("load_min", "load_nominal", "load_max")),
             ("environment", ("temperature_min", "temperature_max")))
_QUANTITIES = {(key.section, key.name): key for key in KEYS if key.kind == "quantity"}
#: Kept as in the file: fractions and limits, whose scaling says nothing about
#: the circuit, and temperatures (moved by an offset below instead).
_FIXED = {("limits", "voltage_derating"), ("limits", "flux_margin"),
          ("limits", "output_tolerance"), ("transformer", "coupling"),
          ("environment", "temperature_min"), ("environment", "temperature_max")}


#: Junction voltages and drops: silicon keeps them within about 15 %.
_JUNCTIONS = {("switch", "vbe"), ("switch", "vce_sat"), ("limiter", "vbe"),
              ("regulation", "rectifier_drop"), ("regulation", "led_drop"),
              ("output", "rectifier_drop"), ("input", "bridge_drop")}


def _scaled(value, factor):
    """A design-file value (number or string with a unit) times ``factor``."""
    if isinstance(value, str):
        number, _, unit = value.strip().partition(" ")
        return f"{float(number) * factor!r} {unit}".strip()
    return float(value) * factor


def _perturbed(data: dict, rng: random.Random) -> dict:
    data = copy.deepcopy(data)
    for section, names in _TOGETHER:
        table = data.get(section, {})
        if all(name in table for name in names) and section != "environment":
            factor = math.exp(rng.uniform(-0.7, 0.7))
            if section == "output" and any(str(table[n]).endswith("ohm") for n in names):
                factor = 1.0 / factor  # a heavier load is a smaller resistance
            for name in names:
                table[name] = _scaled(table[name], factor)
    grouped = {(section, name) for section, names in _TOGETHER for name in names}
    for section, table in data.items():
        if not isinstance(table, dict):
            continue
        for name, value in list(table.items()):
            key = (section, name)
            if key in grouped or key in _FIXED or key not in _QUANTITIES:
                continue
            if isinstance(value, (int, float, str)) and not isinstance(value, bool) \
                    and rng.random() < 0.4:
                spread = 0.15 if key in _JUNCTIONS else 1.1
                try:
                    table[name] = _scaled(value, math.exp(rng.uniform(-spread, spread)))
                except ValueError:  # a value with a unit this helper does not split
                    pass
    if "environment" in data and rng.random() < 0.5:
        shift = rng.uniform(-30.0, 30.0)
        for name in ("temperature_min", "temperature_max"):
            value = data["environment"].get(name)
            if isinstance(value, str) and value.endswith("degC"):
                data["environment"][name] = f"{float(value.split()[0]) + shift!r} degC"
    if rng.random() < 0.1:
        data["transformer"]["feedback_phase"] = "degenerative"
    if rng.random() < 0.15:
        data["clamp"] = {"type": "none"}
    return data


def _generated_designs():
    from dataclasses import replace

    try:
        from rcc.population import generate
    except ImportError:
        population = []
    else:  # plausible designs nobody tuned, and fewer perturbations beside them
        population = [replace(item.design, source=item.name)
                      for item in generate(POPULATION, seed=11)]
    wanted = GENERATED - len(population) // 2
    rng = random.Random(7)
    bases = [tomllib.loads(path.read_text(encoding="utf-8")) for path in CASES]
    designs, refused, attempts = [], 0, 0
    while len(designs) < wanted and attempts < 4 * GENERATED:
        attempts += 1
        try:
            designs.append(design_from_dict(_perturbed(rng.choice(bases), rng),
                                            source=f"<generated {attempts}>"))
        except DesignError:
            refused += 1  # a perturbation outside the ranges: refused, as it should be
    return population + designs, refused


def _walk(value, path=""):
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _walk(item, f"{path}.{key}")
    elif isinstance(value, (list, tuple)):
        for item in value:
            yield from _walk(item, path)
    else:
        yield path, value


#: Largest reverse leakage accepted as a negative base current at cut-off [A].
LEAKAGE = 1e-6


def _assert_sound(data, what):
    """Strict JSON; no negative time, current or frequency."""
    json.loads(strict_json(data), parse_constant=lambda name: pytest.fail(f"{what}: {name}"))
    for path, value in _walk(data):
        if isinstance(value, float):
            assert math.isfinite(value), (what, path, value)
            leaf = path.rsplit(".", 1)[-1]
            if leaf.endswith(("_s", "_hz", "_a")) and leaf not in ("growth_rate_per_s",):
                # the power-on base current of a switch held in cut-off is the
                # junctions' reverse leakage: nanoamperes, either sign
                floor = -LEAKAGE if path.endswith("dc_point.ib_a") else 0.0
                assert value >= floor, (what, path, value)


@pytest.fixture(scope="module")
def generated():
    return _generated_designs()


#: The cycle model's bus for AC input is the bulk-capacitor valley at its own input
#: power (solved against it, rcc/cycle.py ``_bus_balance``); where the input power
#: is more than the bulk capacitor supplies, the valley has no real value and the
#: model floors the bus at 1 V.  Such a point must carry the bus-range invariant
#: (``test_points_with_the_bus_on_the_floor_are_refused``).
BUS_FLOOR = 1.0


def _run(design):
    """Start-up report and cycle-model records at the design's corners, with the
    warnings raised and the points whose bus sits on the model's floor."""
    import warnings

    from rcc.cycle import operating_points, reference_temperature
    from rcc.startup import DcPointError, startup_report

    out = design.output
    lines = np.array(design.input.line_voltages)[[0, 2]][:, None]
    loads = [out.load_min, out.load_max]
    load = Load(loads[0].kind, np.array([loads[0].value, loads[1].value])[None, :]) \
        if loads[0].kind == loads[1].kind else out.load_max
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            startup = startup_report(design)
        except DcPointError:
            startup = None  # a clear error (exit 2 in the command line), not a crash
        records = operating_points(design, lines, load,
                                   reference_temperature(design)).records()
    floored = [row for row in records if row["bus_v"] <= BUS_FLOOR]
    return startup, records, floored, [str(w.message) for w in caught]


#: Generated designs taken through the cycle model and the whole start-up report
#: in CI (every design gets the cheaper analyses), a seeded draw [1].
MODEL_SAMPLE = 6
SAMPLE_SEED = 20261202


def _model_sample(designs):
    """Every design with ``RCC_SLOW_TESTS=1``, else a seeded draw of
    :data:`MODEL_SAMPLE` (always the same designs)."""
    import os

    if os.environ.get("RCC_SLOW_TESTS"):
        return list(designs)
    chosen = sorted(random.Random(SAMPLE_SEED).sample(range(len(designs)), MODEL_SAMPLE))
    return [designs[i] for i in chosen]


@pytest.fixture(scope="module")
def runs(generated):
    designs, _ = generated
    return [(design, *_run(design)) for design in _model_sample(designs)]


def _assert_finite_fields(value, what, path=""):
    """Every float of a (nested) frozen result is finite; currents (except a
    base current at cut-off: reverse leakage), frequencies and times are not
    negative."""
    import dataclasses

    if dataclasses.is_dataclass(value):
        for item in dataclasses.fields(value):
            _assert_finite_fields(getattr(value, item.name), what, f"{path}.{item.name}")
    elif isinstance(value, (list, tuple)):
        for item in value:
            _assert_finite_fields(item, what, path)
    elif isinstance(value, complex):
        assert math.isfinite(value.real) and math.isfinite(value.imag), (what, path, value)
    elif isinstance(value, float):
        assert math.isfinite(value), (what, path, value)
        leaf = path.rsplit(".", 1)[-1]
        if leaf.endswith(("current", "frequency", "time", "total")):
            floor = -LEAKAGE if leaf == "base_current" else 0.0
            assert value >= floor, (what, path, value)


def test_every_generated_design_through_the_cheaper_analyses(generated):
    """All generated designs: bus range, small-signal start-up at every
    corner and the drive-capacitor cycle, finite and non-negative."""
    import warnings

    from rcc.mains import bus_voltage_range
    from rcc.startup import DcPointError
    from rcc.startup.analysis import analyze_startup, drive_cycle

    designs, _ = generated
    assert len(designs) >= GENERATED
    no_dc_point = starting = 0
    for design in designs:
        what = design.source
        bus = bus_voltage_range(design)
        assert np.all(np.isfinite(bus)) and np.all(bus > 0), (what, bus)
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # an overflow or 0/0 is a defect here
            try:
                result = analyze_startup(design)
            except DcPointError:
                no_dc_point += 1  # a clear error (exit 2 in the command line)
                continue
            _assert_finite_fields(result, what)
            if result.starts:
                starting += 1
                _assert_finite_fields(drive_cycle(design), what)
    # the population is plausible: most designs have a DC point and most start
    assert no_dc_point <= len(designs) // 20, no_dc_point
    assert starting >= len(designs) // 2, starting


def test_generated_designs_run_clean(generated, runs):
    designs, refused = generated
    assert len(designs) >= GENERATED and refused < GENERATED // 10
    no_dc_point = 0
    for design, startup, records, floored, caught in runs:
        what = design.source
        if startup is None:
            no_dc_point += 1
        else:
            _assert_finite_fields(startup, what)  # the raw numbers, before JSON
            _assert_sound(startup.to_json(), what)
        # warnings only where the bus sits on the floor (the known defect below)
        assert not caught or floored, (what, caught[:3])
        sound = [row for row in records if row["bus_v"] > BUS_FLOOR]
        _assert_sound({"operating_points": sound}, what)
        for row in sound:
            assert 0.0 <= row["duty"] <= 1.0, (what, row)
            assert row["output_v"] >= 0.0, (what, row)
            assert row["bus_v"] <= math.sqrt(2) * row["line_v"] + 1e-9 or \
                not design.input.is_ac, (what, row)
    assert no_dc_point <= max(len(runs) // 20, 1), no_dc_point


def test_points_with_the_bus_on_the_floor_are_refused(runs):
    # the cycle model still floors a collapsed bulk valley at 1 V (notes/fuzz.md);
    # such a point breaks the bus-range invariant and must carry it, so that
    # `rcc check` prints it as refused, never as numbers
    for design, _, records, floored, _ in runs:
        for row in floored:
            assert row["doubt"].startswith("invariant"), (design.source, row)


def test_generated_designs_through_check(runs):
    """One design of the sample through everything ``rcc check`` runs (its
    cycle model over the whole temperature and gain range: seconds): strict
    JSON, no negatives."""
    from rcc.analysis import full_check

    clean = [design for design, _, _, floored, _ in runs if not floored]
    report = full_check(clean[0])
    _assert_sound(report.to_json(), clean[0].source)
