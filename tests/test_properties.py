"""Property tests (hypothesis, derandomized) of the steady-state cycle model
``rcc.cycle.operating_points`` on the bundled worked cases.

Invariants and their sources:

* boundary conduction: frequency falls as the load rises and rises with the
  line (Irving & Jovanović, "Analysis and Design of Self-Oscillating
  Flyback Converter", IEEE APEC 2002: ``f = Vin^2 V_R^2 / (2 Lp Pin
  (Vin + V_R)^2)``);
* energy conservation: power drawn = power delivered + losses, every loss
  non-negative; the energy stored per cycle in the magnetizing inductance,
  ``Lm Ipk^2 / 2`` times the frequency, supplies the output, the rectifier,
  the regulation path and the core loss of the flyback interval
  (Erickson & Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
  2001, ch. 5-6, energy balance of the discontinuous/boundary flyback);
* finite results for valid inputs, and broadcasting: one point computed
  alone equals the same point inside an array (STYLE.md).
"""

from __future__ import annotations

from dataclasses import fields
import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from rcc.cycle import MODES, OFF_END, ON_END, OperatingPoints, operating_points
from rcc.design import Load
from rcc.units import celsius_to_kelvin

from conftest import regulating_designs  # noqa: E402

#: The worked cases that regulate (fault cases for the start-up analysis
#: have no regulated steady state and are left out)
DESIGNS = regulating_designs()

PROPERTY = settings(derandomize=True, deadline=None, max_examples=12,
                    suppress_health_check=[HealthCheck.too_slow])

FLOAT_FIELDS = ("line_voltage", "bus_voltage", "load_current", "temperature",
                "output_voltage", "frequency", "on_time", "off_time", "duty",
                "peak_current", "input_power", "output_power")
TEXT_FIELDS = ("mode", "on_end", "off_end")


def load_range(design):
    """Load currents [A] from the lightest to the heaviest design load,
    converted at the target output (12 V if none is given)."""
    voltage = design.output.voltage_target or 12.0
    low = float(design.output.load_min.current(voltage))
    high = float(design.output.load_max.current(voltage))
    return max(low, 0.02 * high), high


@st.composite
def operating_point(draw, design_name=None):
    name = design_name or draw(st.sampled_from(sorted(DESIGNS)))
    design = DESIGNS[name]
    low_line, _, high_line = design.input.line_voltages
    low_load, high_load = load_range(design)
    line = draw(st.floats(low_line, high_line))
    load = draw(st.floats(low_load, high_load))
    temperature = draw(st.floats(design.environment.temperature_min,
                                 design.environment.temperature_max))
    return name, line, load, temperature


def scalar(points: OperatingPoints, name: str):
    value = getattr(points, name)
    assert np.ndim(value) == 0, name
    return value.item() if hasattr(value, "item") else value


# ------------------------------------------------------------ monotonicity
@settings(PROPERTY, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(point=operating_point(), ratio=st.floats(1.05, 3.0))
def test_bcm_frequency_falls_as_load_rises(point, ratio):
    name, line, load, temperature = point
    design = DESIGNS[name]
    heavier = min(load * ratio, load_range(design)[1] * 1.2)
    assume(heavier > load * 1.01)
    points = operating_points(design, line, np.array([load, heavier]), temperature)
    assume(np.all(points.mode == "bcm"))
    assert points.frequency[1] < points.frequency[0], (points.frequency, points.on_end)


@settings(PROPERTY, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(point=operating_point(), step=st.floats(5.0, 120.0))
def test_bcm_frequency_rises_with_line(point, step):
    name, line, load, temperature = point
    design = DESIGNS[name]
    higher = min(line + step, design.input.line_voltages[2])
    assume(higher > line + 1.0)
    points = operating_points(design, np.array([line, higher]), load, temperature)
    assume(np.all(points.mode == "bcm"))
    assert points.bus_voltage[1] > points.bus_voltage[0]
    # ideal boundary conduction: f rises with the input voltage at fixed power
    # (Erickson & Maksimovic 2001, ch. 6); the turn-on on the ring and the
    # turn-off transition both lengthen with the bus, and the time-domain
    # engine shows the standby case's frequency almost flat from 230 to
    # 265 V (notes/periodic_steady_state.md), so a 2 % dip is allowed
    assert points.frequency[1] > 0.98 * points.frequency[0], (points.frequency,
                                                               points.on_end)


def test_monotonicity_cases_are_not_vacuous():
    """The two properties above skip points outside boundary conduction;
    make sure a grid over each design does hold boundary-conduction points
    (otherwise the properties would test nothing)."""
    for name, design in DESIGNS.items():
        low_load, high_load = load_range(design)
        line = np.linspace(*design.input.line_voltages[::2], 7)[:, None]
        load = np.linspace(low_load, high_load, 9)[None, :]
        points = operating_points(design, line, load)
        # at high line the supplies regulate by a dead time or burst (the
        # engine agrees), so boundary conduction is found at low line only
        assert np.count_nonzero(points.mode == "bcm") >= 5, name


# ---------------------------------------------------------- energy balance
@PROPERTY
@given(point=operating_point())
def test_input_power_is_output_plus_losses(point):
    name, line, load, temperature = point
    points = operating_points(DESIGNS[name], line, load, temperature)
    losses = points.losses
    total = sum(scalar_array(getattr(losses, f.name)) for f in fields(losses))
    assert float(points.input_power) == pytest.approx(
        float(points.output_power) + total, rel=1e-9, abs=1e-12)
    assert float(losses.total) == pytest.approx(total, rel=1e-12)
    for item in fields(losses):
        assert float(getattr(losses, item.name)) >= 0.0, item.name
    assert 0.0 <= float(points.output_power) <= float(points.input_power)


def scalar_array(value) -> float:
    return float(np.asarray(value))


@PROPERTY
@given(point=operating_point())
def test_output_power_is_load_at_output_voltage(point):
    # P = V I (the load current is reported at the computed output)
    name, line, load, temperature = point
    points = operating_points(DESIGNS[name], line, load, temperature)
    assume(bool(points.running))
    assert float(points.output_power) == pytest.approx(
        float(points.output_voltage * points.load_current), rel=1e-9)


def _taken_from_magnetizing_energy(design, points):
    """Losses fed by the magnetizing energy before the output winding takes
    it: the clamp above the leakage energy (the clamp conducts while the
    leakage current falls), the turn-off above the bus and the drive reset."""
    leakage_rate = (0.5 * design.transformer.leakage_inductance
                    * float(points.peak_current) ** 2 * float(points.frequency))
    return (float(points.losses.clamp) - leakage_rate + float(points.losses.turn_off_flyback)
            + float(points.losses.reset))


def _energy_per_cycle(design, points):
    """Magnetizing energy rate ``Lm (Ipk^2 - I0^2) f / 2``, the core loss of
    the flyback interval (the on-time part has the bus across
    ``core_loss_resistance``), and what the reported fields say the
    magnetizing energy feeds [W]."""
    tr = design.transformer
    frequency = float(points.frequency)
    stored = 0.5 * tr.magnetizing_inductance * (
        float(points.peak_current) ** 2 - float(points.start_current) ** 2) * frequency
    core_on = float(points.bus_voltage) ** 2 * float(points.on_time) * frequency \
        / tr.core_loss_resistance
    core_off = float(points.losses.core) - core_on
    delivered = (float(points.output_power) + float(points.losses.rectifier)
                 + float(points.losses.regulation) + core_off
                 + _taken_from_magnetizing_energy(design, points))
    return stored, core_off, delivered


@PROPERTY
@given(point=operating_point())
def test_energy_per_cycle_feeds_output_and_losses(point):
    """At every running point, the magnetizing energy per pulse times the
    pulse rate = output + rectifier + regulation + core loss of the flyback
    interval + what the clamp, the turn-off and the drive reset take from it
    (energy conservation; Erickson & Maksimović 2001, ch. 5-6).  The core
    loss of the on-time is taken out of the reported core loss with the bus
    voltage across ``core_loss_resistance``.

    For a steady cycle (one pulse per pattern, not mixed across a regime
    boundary) the energy per pulse is also the textbook
    ``Lm (Ipk^2 - I0^2) / 2`` of the reported peak and start currents; for
    patterns the per-pulse peaks differ and only the reported mean
    ``energy_per_cycle`` can be checked (the leakage part of the clamp loss
    is then left in, so the identity becomes an upper bound)."""
    name, line, load, temperature = point
    design = DESIGNS[name]
    points = operating_points(design, line, load, temperature)
    assume(bool(points.running) and str(points.mode) != "lockup")
    stored, core_off, delivered = _energy_per_cycle(design, points)
    assert core_off >= -1e-9 * abs(stored)
    reported = float(points.energy_per_cycle) * float(points.frequency)
    # a point where the model found a cycle whose clamp, turn-off and reset
    # take more than its magnetizing energy is flagged by the model itself and
    # routed to the engine, its numbers never printed (the known RCD-clamp
    # defect pinned by test_rcd_clamp_energy_in_a_burst)
    assume(str(points.doubt) != "invariant: energy per cycle")
    steady = int(points.pulses_per_pattern) == 1 and str(points.doubt) != "regime-boundary"
    if steady:
        assert reported == pytest.approx(stored, rel=1e-9)
        # 1 %: the invariant the model asserts where it builds results
        assert stored == pytest.approx(delivered, rel=1e-2)
    else:
        leakage_rate = (0.5 * design.transformer.leakage_inductance
                        * float(points.peak_current) ** 2 * float(points.frequency))
        assert reported > 0.0
        assert delivered - leakage_rate <= reported * (1 + 1e-2)
        assert reported <= delivered + leakage_rate


def test_rcd_clamp_energy_in_a_burst():
    """Energy conservation at a burst point of the standby case (RCD clamp) at
    low line and light load, cold: the magnetizing energy per pulse times the
    pulse rate bounds what the output and the losses fed by it take
    (Erickson & Maksimović 2001, ch. 5-6).  The pattern has a long
    drive-timed cycle (about 1.5 kHz): a steady RCD formula from that
    cycle's own rate put the clamp level next to V_R and charged the clamp
    about six times the pulse's magnetizing energy (a breach the model
    flagged); the clamp capacitor carried through the pattern as a state
    keeps the balance, and the point carries no invariant doubt."""
    design = DESIGNS["standby_12v_universal"]
    points = operating_points(design, 85.0, 0.0546875, 274.0)
    assert bool(points.running)
    stored, _, delivered = _energy_per_cycle(design, points)
    leakage_rate = (0.5 * design.transformer.leakage_inductance
                    * float(points.peak_current) ** 2 * float(points.frequency))
    reported = float(points.energy_per_cycle) * float(points.frequency)
    assert delivered - leakage_rate <= reported * (1 + 1e-2)
    assert not str(points.doubt).startswith("invariant"), str(points.doubt)


def test_energy_per_cycle_in_overload():
    design = DESIGNS["standby_12v_universal"]
    points = operating_points(design, 85.0, 0.7, celsius_to_kelvin(0.0))
    assert str(points.on_end) in ("limit", "drive")  # overload: not regulated
    stored, _, delivered = _energy_per_cycle(design, points)
    assert stored == pytest.approx(delivered, rel=1e-2)


# ------------------------------------------------------------- finiteness
@PROPERTY
@given(point=operating_point())
def test_no_nan_for_valid_inputs(point):
    name, line, load, temperature = point
    points = operating_points(DESIGNS[name], line, load, temperature)
    for name_ in FLOAT_FIELDS:
        value = np.asarray(getattr(points, name_), dtype=float)
        assert np.all(np.isfinite(value)), name_
    assert str(points.mode) in MODES
    assert str(points.on_end) in ON_END
    assert str(points.off_end) in OFF_END
    if bool(points.running):
        assert float(points.frequency) > 0.0
        assert 0.0 < float(points.duty) < 1.0
        assert float(points.peak_current) > 0.0
        # period = on-time + off-time (burst: average period)
        assert float(points.on_time + points.off_time) == pytest.approx(
            1.0 / float(points.frequency), rel=1e-9)


def test_no_nan_on_a_wide_grid():
    for name, design in DESIGNS.items():
        low_load, high_load = load_range(design)
        line = np.linspace(*design.input.line_voltages[::2], 6)[:, None, None]
        load = np.linspace(0.0, 1.5 * high_load, 8)[None, :, None]
        temperature = np.array([design.environment.temperature_min,
                                design.environment.temperature_max])[None, None, :]
        points = operating_points(design, line, load, temperature)
        assert points.frequency.shape == (6, 8, 2), name
        for field_name in FLOAT_FIELDS:
            value = np.asarray(getattr(points, field_name), dtype=float)
            assert value.shape == (6, 8, 2), (name, field_name)
            assert np.all(np.isfinite(value)), (name, field_name)


# ------------------------------------------------------------ broadcasting
@settings(derandomize=True, deadline=None, max_examples=6,
          suppress_health_check=[HealthCheck.too_slow])
@given(points=st.lists(operating_point(design_name=sorted(DESIGNS)[0]),
                       min_size=2, max_size=5))
def test_scalar_and_array_inputs_agree(points):
    name = points[0][0]
    design = DESIGNS[name]
    line = np.array([p[1] for p in points])
    load = np.array([p[2] for p in points])
    temperature = np.array([p[3] for p in points])
    together = operating_points(design, line, load, temperature)
    for index, (_, one_line, one_load, one_temperature) in enumerate(points):
        alone = operating_points(design, one_line, one_load, one_temperature)
        for field_name in FLOAT_FIELDS:
            np.testing.assert_allclose(
                np.asarray(getattr(alone, field_name), dtype=float),
                np.asarray(getattr(together, field_name), dtype=float)[index],
                rtol=1e-12, atol=0.0, err_msg=field_name)
        for field_name in TEXT_FIELDS:
            assert str(getattr(alone, field_name)) == str(
                getattr(together, field_name)[index]), field_name


def test_grid_broadcasting_shapes_and_values():
    design = DESIGNS[sorted(DESIGNS)[0]]
    low_load, high_load = load_range(design)
    line = np.array(design.input.line_voltages)[:, None]
    load = np.linspace(low_load, high_load, 4)[None, :]
    grid = operating_points(design, line, load, design.environment.temperature_max)
    assert grid.frequency.shape == (3, 4)
    for field_name in FLOAT_FIELDS + TEXT_FIELDS:
        assert np.shape(getattr(grid, field_name)) == (3, 4), field_name
    one = operating_points(design, line[2, 0], load[0, 3], design.environment.temperature_max)
    assert float(one.frequency) == pytest.approx(float(grid.frequency[2, 3]), rel=1e-12)


def test_load_object_equals_current_array():
    design = DESIGNS[sorted(DESIGNS)[0]]
    _, high = load_range(design)
    as_load = operating_points(design, 230.0 if design.input.is_ac
                               else design.input.line_voltages[1], Load("current", high))
    as_array = operating_points(design, 230.0 if design.input.is_ac
                                else design.input.line_voltages[1], high)
    for field_name in FLOAT_FIELDS:
        np.testing.assert_allclose(np.asarray(getattr(as_load, field_name), float),
                                   np.asarray(getattr(as_array, field_name), float),
                                   rtol=1e-12, err_msg=field_name)


def test_power_and_resistance_loads_are_met():
    # a power load takes P at the output, a resistive one V^2/R (Ohm's law)
    design = DESIGNS[sorted(DESIGNS)[0]]
    line = design.input.line_voltages[1]
    _, high = load_range(design)
    voltage = design.output.voltage_target or 12.0
    power = operating_points(design, line, Load("power", 0.5 * high * voltage))
    assert float(power.output_power) == pytest.approx(0.5 * high * voltage, rel=1e-9)
    resistance = voltage / (0.5 * high)
    resistive = operating_points(design, line, Load("resistance", resistance))
    assert float(resistive.load_current) == pytest.approx(
        float(resistive.output_voltage) / resistance, rel=1e-9)


def test_result_is_frozen():
    import dataclasses

    design = DESIGNS[sorted(DESIGNS)[0]]
    points = operating_points(design, design.input.line_voltages[1], 0.1)
    with pytest.raises(dataclasses.FrozenInstanceError):
        points.frequency = np.zeros(())
