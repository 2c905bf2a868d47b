"""Well-posedness of the cycle model (issue 8): a relative change of 1e-12
in an input moves no reported value by more than 1e-6 relative and changes
no mode, except at points the model itself reports as sitting on a regime
boundary (``doubt == "regime-boundary"``: the power balance lies on a jump
of the delivered power between two cycle regimes, where the circuit mixes
them and an arbitrarily small change may move the mix).

The checked inputs are the line voltage, the load current, the temperature
(vectorized in one call with the unperturbed points) and the magnetizing
inductance (a second design).  The requirement is the project's own
(issue 8, "Results are well posed"); the tolerance follows from the
solvers' stated tolerances (fixed points to 1e-10, balances to 1e-8, the
bulk valley to 1e-9), far below 1e-6.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import rcc
from rcc.cycle import operating_points
from rcc.units import celsius_to_kelvin

from conftest import WORKED_CASES

#: Reported values compared between the unperturbed and the perturbed point
FIELDS = ("output_voltage", "frequency", "peak_current", "on_time", "off_time",
          "input_power", "energy_per_cycle")
PERTURBATION = 1e-12
TOLERANCE = 1e-6
CASES = ("standby_12v_universal", "aux_5v_48v_dc", "legacy_24v_substitute",
         "fault_startup_resistor_open")


def _grid(design):
    """Lowest, nominal and highest line at 10 %, 50 % and 100 % load, 25 degC
    [V, A, K]."""
    voltage = design.output.voltage_target or 12.0
    full = float(design.output.load_max.current(voltage))
    lines, loads = np.meshgrid(np.asarray(design.input.line_voltages, dtype=float),
                               np.array([0.1, 0.5, 1.0]) * full, indexing="ij")
    line, load = lines.ravel(), loads.ravel()
    return line, load, np.full(line.size, celsius_to_kelvin(25.0))


def _assert_close(base, moved, index_base, index_moved, what):
    """Compare; returns how many pairs were compared (not on a boundary)."""
    compared = 0
    for b, m in zip(index_base, index_moved):
        if base.doubt[b] == "regime-boundary" or moved.doubt[m] == "regime-boundary":
            continue
        compared += 1
        assert base.mode[b] == moved.mode[m], (what, b, base.mode[b], moved.mode[m])
        for name in FIELDS:
            x, y = float(getattr(base, name)[b]), float(getattr(moved, name)[m])
            assert abs(y - x) <= TOLERANCE * max(abs(x), 1e-12), (what, b, name, x, y)
    return compared


@pytest.mark.parametrize("case", CASES)
def test_one_part_in_1e12_moves_nothing(case):
    design = rcc.load_design(WORKED_CASES / f"{case}.toml")
    line, load, temperature = _grid(design)
    up = 1.0 + PERTURBATION
    lines = np.concatenate([line, line * up, line, line])
    loads = np.concatenate([load, load, load * up, load])
    temperatures = np.concatenate([temperature, temperature, temperature, temperature * up])
    points = operating_points(design, lines, loads, temperatures)
    count = line.size
    base = np.arange(count)
    compared = 0
    for block, what in enumerate(("line", "load", "temperature"), start=1):
        compared += _assert_close(points, points, base, base + count * block, what)
    transformer = dataclasses.replace(
        design.transformer, magnetizing_inductance=design.transformer.magnetizing_inductance * up)
    moved = operating_points(dataclasses.replace(design, transformer=transformer),
                             line, load, temperature)
    compared += _assert_close(points, moved, base, base, "magnetizing inductance")
    # the exception for regime boundaries must stay an exception: at least a
    # quarter of the 4 x 9 pairs compared (measured 2026-12-03: the standby
    # case keeps 16 of 36, its bursts at 85 V/10 % and 230-265 V/50-100 %
    # load sit on a jump between two cycle regimes)
    assert compared >= count, compared


#: Seeded population the well-posedness sweep covers (rcc.population, seed 1:
#: the first 25 designs, the same ones as the reduced accuracy run in
#: notes/accuracy.md); designs nobody tuned
POPULATION_SEED = 1
POPULATION_DESIGNS = 25


@pytest.mark.parametrize("index", range(POPULATION_DESIGNS))
def test_population_one_part_in_1e12_moves_nothing(index):
    """The same sweep on generated designs: lowest, nominal and highest line
    at 10/50/100 % of the design's largest load, line and load each moved by
    one part in 10^12 (one vectorized call).

    Points the model reports on a regime boundary are excused as in the
    worked cases; on these 25 designs that is 38 of 225 points (17 %, the
    mixed-regime bursts; measured 2026-12-03), so the check asserts only that
    each design keeps some compared points."""
    from rcc.population import generate_one

    design = generate_one(POPULATION_SEED, index).design
    line, load, temperature = _grid(design)
    up = 1.0 + PERTURBATION
    points = operating_points(design, np.concatenate([line, line * up, line]),
                              np.concatenate([load, load, load * up]),
                              np.concatenate([temperature] * 3))
    count = line.size
    base = np.arange(count)
    compared = sum(_assert_close(points, points, base, base + count * block, what)
                   for block, what in enumerate(("line", "load"), start=1))
    assert compared > 0, compared


def test_population_irregular_pattern_point():
    """pop-1-0022 at 90 V, 0.408848 A settles into an irregular pattern.  With
    the RCD clamp level of each cycle taken from that cycle's own rate, the
    pattern's long drive-timed cycle broke the energy-per-cycle invariant and
    a change of the line by one part in 10^12 flipped the point between
    ``burst`` at 37.5 kHz and ``irregular`` at 17.2 kHz; with the clamp
    capacitor carried through the pattern the balance is the same on both
    sides (``irregular``, a mixed-regime point; notes/accuracy.md).  After the
    zener-fed reset it flipped again (``irregular`` 30.5 kHz against ``dcm``
    33.4 kHz, a strict xfail); since the output path's resistance and
    capacitance on the plateau (2026-12-03) it is ``dcm`` 52.6 kHz, 5.797 V,
    ``held-ring``, on both sides to 3e-11."""
    from rcc.population import generate_one

    design = generate_one(POPULATION_SEED, 22).design
    line = np.array([90.0, 90.0 * (1.0 + PERTURBATION)])
    points = operating_points(design, line, np.full(2, 0.408848), np.full(2, 298.15))
    # both sides are routed to the engine (a doubt), whatever the mode
    assert points.doubt[0] and points.doubt[1], tuple(points.doubt)
    assert points.mode[0] == points.mode[1], tuple(points.mode)
    for name in FIELDS:
        x, y = (float(value) for value in getattr(points, name))
        assert abs(y - x) <= TOLERANCE * abs(x), (name, x, y)
