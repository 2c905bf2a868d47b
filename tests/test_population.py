"""Tests of rcc.population: deterministic for a seed, every design valid and
plausible (the designer's invariants hold), and the documented ranges spanned."""

import math

import numpy as np
import pytest

from rcc.design import Design
from rcc.flyback import bcm_peak_current
from rcc.mains import bus_voltage_range, bulk_valley, rectified_peak
from rcc.population import (GeneratedDesign, MAX_TURNS, OUTPUT_VOLTAGES, VOLTAGE_DERATING,
                            family, generate, generate_one)
from rcc.stress import leakage_spike, peak_flux_density

COUNT = 200


@pytest.fixture(scope="module")
def population():
    return generate(COUNT, seed=7)


def _bus_min(g: GeneratedDesign) -> float:
    d = g.design
    if not d.input.is_ac:
        return d.input.dc_min
    return float(bulk_valley(rectified_peak(d.input.ac_min, d.input.bridge_drop),
                             g.choices["input_power"], d.input.bulk_capacitance,
                             d.input.line_frequency))


def test_deterministic_for_a_seed(population):
    again = generate(20, seed=7)
    for a, b in zip(population[:20], again):
        assert a.name == b.name and a.data == b.data and a.design == b.design
    # any one design rebuilds from its seed and index alone
    one = generate_one(7, 13)
    assert one.data == population[13].data
    # another seed gives other designs
    other = generate(5, seed=8)
    assert all(o.data != p.data for o, p in zip(other, population[:5]))


def test_every_design_validates_and_is_named(population):
    names = {g.name for g in population}
    assert len(names) == COUNT
    for g in population:
        assert isinstance(g.design, Design)
        assert g.design.source == g.name
        assert g.seed == 7
        assert "invented" in g.design.title
        # the raw dict validates to the same design
        from rcc import design_from_dict
        assert design_from_dict(g.data, source=g.name) == g.design


def test_reflected_voltage_below_the_minimum_bus(population):
    for g in population:
        d = g.design
        reflected = d.output_turns_ratio * (d.output.voltage_target + d.output.rectifier_drop)
        assert reflected < _bus_min(g), g.name


def test_flux_under_saturation_at_the_nominal_peak(population):
    # boundary-conduction peak at the minimum bus and full load (Irving &
    # Jovanovic 2002) and the trip current plus the storage overshoot at the
    # highest bus, both under the saturation flux density (McLyman 2004,
    # B = L I / (N Ae))
    for g in population:
        d, tr = g.design, g.design.transformer
        reflected = d.output_turns_ratio * (d.output.voltage_target + d.output.rectifier_drop)
        nominal_peak = float(bcm_peak_current(g.choices["input_power"], _bus_min(g), reflected))
        trip = d.limiter.vbe / d.limiter.sense_resistance
        worst = trip + bus_voltage_range(d)[2] * d.switch.storage_time / tr.magnetizing_inductance
        for current in (nominal_peak, worst):
            flux = float(peak_flux_density(tr.magnetizing_inductance, current,
                                           tr.primary_turns, tr.core_area))
            assert flux < tr.saturation_flux_density, g.name
        assert nominal_peak < trip, g.name       # the limit sits above the design peak


def test_startup_resistor_dissipation_under_half_its_rating(population):
    for g in population:
        d = g.design
        worst = bus_voltage_range(d)[2] ** 2 / d.startup.resistance
        assert worst <= 0.5 * d.startup.power_rating * (1 + 1e-12), g.name
        # a fraction of a mA at the lowest bus
        assert 0.02e-3 < bus_voltage_range(d)[0] / d.startup.resistance < 1e-3, g.name


def test_switch_rated_over_its_stress(population):
    for g in population:
        d = g.design
        bus_max = bus_voltage_range(d)[2]
        reflected = d.output_turns_ratio * (d.output.voltage_target + d.output.rectifier_drop)
        if d.clamp.type == "zener":
            peak = bus_max + d.clamp.voltage
        elif d.clamp.type == "none":
            spike = leakage_spike(g.choices["worst_peak_current"],
                                  d.transformer.leakage_inductance, d.node_capacitance)
            peak = bus_max + reflected + float(spike)
        else:
            peak = g.choices["switch_stress"]
        assert peak <= VOLTAGE_DERATING * d.switch.vcev * (1 + 1e-9), g.name
        assert d.switch.ic_max >= 1.5 * g.choices["worst_peak_current"], g.name


def test_base_drive_holds_the_trip_current_at_hfe_min(population):
    for g in population:
        d = g.design
        drive = d.feedback_turns_ratio * _bus_min(g)
        base_current = (drive - d.switch.vbe - d.limiter.vbe) / d.drive.resistance
        trip = d.limiter.vbe / d.limiter.sense_resistance
        assert d.switch.hfe_min * base_current > 1.3 * trip, g.name
        assert max(d.transformer.primary_turns, d.transformer.output_turns,
                   d.transformer.feedback_turns) <= MAX_TURNS


def test_regulation_aims_at_the_target(population):
    # the zener (or the reference) was chosen for the target output: at the
    # target the regulation current is positive and below the current that
    # holds the limiter on by itself
    from rcc.limiter import regulation_current
    for g in population:
        d = g.design
        current = float(regulation_current(d, d.output.voltage_target, 298.15))
        hold = d.limiter.vbe / d.limiter.base_resistance
        assert 0.0 < current < hold, g.name


def test_documented_ranges_are_spanned(population):
    designs = [g.design for g in population]
    buses = np.array([bus_voltage_range(d) for d in designs])
    assert buses[:, 0].min() < 20 and buses[:, 2].max() > 360         # 12-400 V bus
    powers = np.array([g.choices["output_power"] for g in population])
    assert powers.min() < 1.5 and powers.max() > 30                   # about 1-60 W
    outputs = {d.output.voltage_target for d in designs}
    assert outputs == set(OUTPUT_VOLTAGES)                             # 3.3-48 V
    families = {tuple(family(d).values()) for d in designs}
    for regulation in ("feedback-winding", "optocoupler"):
        for clamp in ("none", "zener", "rcd"):
            for kind in ("ac", "dc"):
                assert (regulation, clamp, kind) in families
    classes = {g.choices["input_class"] for g in population}
    assert classes == {"universal", "100-120V", "230V", "dc"}
    filters = [d.regulation.filter_capacitance for d in designs
               if d.regulation.method == "feedback-winding"]
    assert min(filters) < 100e-9 and max(filters) > 10e-6            # tens of nF to tens of uF
    with_rbe = [d.drive.base_emitter_resistance is not None for d in designs]
    assert any(with_rbe) and not all(with_rbe)
    hfe = np.array([d.switch.hfe_min for d in designs])
    assert hfe.min() < 10 and max(d.switch.hfe_max for d in designs) > 60   # hFE 8-100
    assert max(d.switch.hfe_max for d in designs) <= 100
    storage = np.array([d.switch.storage_time for d in designs])
    assert storage.min() < 0.3e-6 and storage.max() > 2.5e-6       # 0.2-4 us
    assert np.all((storage >= 0.2e-6) & (storage <= 4e-6))


def test_bad_count_refused():
    with pytest.raises(ValueError, match="count"):
        generate(-1, seed=1)
    assert generate(0, seed=1) == []
    assert math.isfinite(generate_one(1, 0).design.transformer.magnetizing_inductance)
