"""The engine's junctions: chords of the exponential laws against the laws.

Sources: the ideal-diode law I = I_S (exp(V_j / (n V_T)) - 1) of
W. Shockley, "The theory of p-n junctions in semiconductors and p-n junction
transistors", Bell Syst. Tech. J. 28, 1949, eq. 4.23 (Sze & Ng, *Physics of
Semiconductor Devices*, 3rd ed., Wiley, 2007, eq. 2.48), with an ohmic
series resistance; the zener knee of about 60 mV per decade of current
(Sze & Ng sec. 2.4.2 for the breakdown law; the slope  # common practice).
"""

import math

import numpy as np
import pytest
from scipy import constants

from rcc.design import Load, load_design
from rcc.engine import build_circuit
from rcc.engine.circuit import (
    COARSE_SEGMENTS_PER_DECADE,
    SEGMENTS_PER_DECADE,
    JunctionLaw,
    chord_error_bound,
    junction_segments,
    junction_worst_error,
    leakage_damping_resistance,
)

WORKED = "worked_cases/standby_12v_universal.toml"
#: kT/q at 25 degC from CODATA constants [V]
THERMAL_VOLTAGE_25C = constants.k * 298.15 / constants.e


def shockley_current(junction_voltage, saturation_current, emission_voltage):
    """Shockley 1949, eq. 4.23: I = I_S (exp(V / (n V_T)) - 1) [A]."""
    return saturation_current * (np.exp(junction_voltage / emission_voltage) - 1.0)


def test_breakpoints_lie_on_the_shockley_law():
    """Every breakpoint of the table satisfies the Shockley law with series
    resistance, written independently here; the table is continuous
    (neighbouring chords meet at the breakpoints)."""
    law = JunctionLaw.through(0.7 + 2.0 * 1e-2, 1e-2, THERMAL_VOLTAGE_25C, 2.0)
    table = junction_segments(law, 1e-6, 1.0, SEGMENTS_PER_DECADE)
    currents, voltages = table.currents, table.voltages
    junction = voltages - law.series_resistance * currents
    np.testing.assert_allclose(
        shockley_current(junction, law.saturation_current, THERMAL_VOLTAGE_25C), currents,
        rtol=1e-12)
    # the reference point: 0.7 V across the junction at 10 mA
    np.testing.assert_allclose(law.voltage(1e-2), 0.72, rtol=1e-14)
    # continuity at the inner breakpoints, and the chords' conductance rises
    left = table.drops[:-1] + table.resistances[:-1] * currents[1:-1]
    right = table.drops[1:] + table.resistances[1:] * currents[1:-1]
    np.testing.assert_allclose(left, right, rtol=1e-13)
    assert np.all(np.diff(table.resistances) < 0)
    # the piecewise-linear current round-trips the breakpoints
    np.testing.assert_allclose(table.current(voltages), currents, rtol=1e-9)
    assert table.current(table.threshold - 1e-3) == 0.0


@pytest.mark.parametrize("per_decade", [1.0, 2.0, 3.0])
def test_worst_error_against_the_exponential_law_meets_the_stated_bound(per_decade):
    """The chord of ``n V_T ln I`` over a current ratio r lies below the law
    by at most ``n V_T (ln((r-1)/ln r) - 1 + ln r/(r-1))`` (the
    tangent-parallel point); a dense grid finds that gap, and the docstring's
    figures (0.619 n V_T for one chord per decade, 0.163 n V_T = 4.2 mV for
    two) follow."""
    law = JunctionLaw.through(0.6 + 10.0 * 1e-5, 1e-5, THERMAL_VOLTAGE_25C, 10.0)
    table = junction_segments(law, 1e-7, 1e-1, per_decade)
    ratio = 10.0 ** (1.0 / per_decade)
    bound = chord_error_bound(ratio, THERMAL_VOLTAGE_25C)
    worst = junction_worst_error(table)
    assert worst <= bound * (1.0 + 1e-6)
    assert worst >= 0.99 * bound   # the grid finds the gap: the bound is tight
    # the bound itself, by a direct maximisation of ln(I) - chord on [1, r]
    grid = np.linspace(1.0, ratio, 200001)
    gap = np.log(grid) - np.log(ratio) * (grid - 1.0) / (ratio - 1.0)
    assert bound == pytest.approx(THERMAL_VOLTAGE_25C * gap.max(), rel=1e-8)
    stated = {1.0: 0.619, 2.0: 0.163}
    if per_decade in stated:
        assert bound / THERMAL_VOLTAGE_25C == pytest.approx(stated[per_decade], abs=5e-4)


def test_zener_knee_is_60_mv_per_decade():
    """The regulation zener's law rises 60 mV per decade of current above its
    knee (plus its ohmic drop) and holds its voltage at the 5 mA test current."""
    knee = 0.06 / math.log(10.0)
    law = JunctionLaw.through(11.0 + 160.0 * 5e-3, 5e-3, knee, 160.0, saturation_current=1e-9)
    assert law.voltage(5e-3) == pytest.approx(11.8, rel=1e-14)
    ohmic = 160.0 * (1e-3 - 1e-4)
    assert law.voltage(1e-3) - law.voltage(1e-4) - ohmic == pytest.approx(0.06, rel=1e-3)
    np.testing.assert_allclose(law.current(law.voltage([1e-5, 1e-3, 2e-2])),
                               [1e-5, 1e-3, 2e-2], rtol=1e-10)


def test_every_junction_of_the_worked_case_is_within_its_bound():
    """The circuit's junction tables (switch and limiter base-emitter,
    limiter collector-base, regulation zener, rectifiers, clamp diode) meet
    the chord bound of their emission voltage over their whole range: 4.2 mV
    for the fine tables, 16 mV for the coarse ones (25 degC)."""
    design = load_design(WORKED)
    circuit = build_circuit(design, 325.0, Load("current", 0.3), 298.15)
    tables = circuit.parameters["junctions"]
    assert set(tables) == {"switch", "limiter", "limiter_collector_base", "output_rectifier",
                           "aux_rectifier", "regulation_zener", "clamp_diode"}
    # two chords per decade where the threshold matters, one where only the
    # drop on volts does (module constants of rcc.engine.circuit)
    fine = {"switch", "limiter", "regulation_zener", "limiter_collector_base"}
    for name, table in tables.items():
        ratio = table.currents[1] / table.currents[0]
        per_decade = SEGMENTS_PER_DECADE if name in fine else COARSE_SEGMENTS_PER_DECADE
        assert ratio == pytest.approx(10.0 ** (1.0 / per_decade), rel=1e-12), name
        bound = chord_error_bound(ratio, table.law.emission_voltage)
        assert junction_worst_error(table) <= bound * (1.0 + 1e-3), name
        assert bound <= (4.3e-3 if name in fine else 16.5e-3), name
    # the limiter: 0.6 V at 1 mA of collector current (limiter.vbe), as in
    # the start-up analysis
    limiter = tables["limiter"]
    base_current = 1e-3 / design.limiter.hfe
    assert limiter.law.voltage(base_current) - limiter.law.series_resistance * base_current \
        == pytest.approx(0.6, abs=1e-12)


def test_leakage_ring_damping_resistance_sets_the_quality_factor():
    """A parallel RLC with R = Q sqrt(L/C) has quality factor Q: the
    eigenvalues of the leakage-node ring give Q = |lambda| / (2 |Re lambda|)."""
    design = load_design(WORKED)
    resistance = leakage_damping_resistance(design)
    leakage = design.transformer.leakage_inductance
    capacitance = design.node_capacitance
    # state (i_L, v_C): L di/dt = v, C dv/dt = -i - v/R
    matrix = np.array([[0.0, 1.0 / leakage], [-1.0 / capacitance, -1.0 / (resistance * capacitance)]])
    eigenvalue = np.linalg.eigvals(matrix)[0]
    quality = abs(eigenvalue) / (2.0 * abs(eigenvalue.real))
    assert quality == pytest.approx(design.transformer.leakage_ring_quality, rel=1e-9)
