"""The [tolerances] section: reading, validation lines, sampling (rcc.tolerance)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from rcc.design import DesignError, design_from_dict, load_design
from rcc.tolerance import (TRUNCATION_SIGMA, Tolerance, hfe_tolerance, sample_uniforms)


def _design(minimal_design_dict, tolerances):
    data = dict(minimal_design_dict, tolerances=tolerances)
    return design_from_dict(data, source="t.toml")


def test_forms_give_their_bands(minimal_design_dict):
    design = _design(minimal_design_dict, {
        "transformer": {"magnetizing_inductance": "10%"},
        "startup": {"resistance": {"tolerance": "5%", "drift": "+10%"}},
        "switch": {"storage_time": {"min": "0.8 us", "max": "2 us"}},
        "limiter": {"vbe": {"tolerance": "0.05 V", "distribution": "normal"}},
        "drive.capacitance": "20%",          # a quoted dotted key works too
    })
    bands = {t.key: (t.low, t.high, t.distribution) for t in design.tolerances.entries}
    assert bands["transformer.magnetizing_inductance"] == pytest.approx((1.35e-3, 1.65e-3, "uniform"))
    # drift shifts the whole band: 680 k * (1 + 0.10 -/+ 0.05)
    assert bands["startup.resistance"][:2] == pytest.approx((714e3, 782e3))
    assert bands["switch.storage_time"][:2] == pytest.approx((0.8e-6, 2e-6))
    assert bands["limiter.vbe"] == pytest.approx((0.55, 0.65, "normal"))
    assert bands["drive.capacitance"][:2] == pytest.approx((37.6e-9, 56.4e-9))


def test_tolerances_survive_with_values(minimal_design_dict):
    design = _design(minimal_design_dict, {"startup": {"resistance": "5%"}})
    changed = design.with_values({"startup.resistance": 1e6})
    (entry,) = changed.tolerances.entries
    assert (entry.low, entry.high) == pytest.approx((0.95e6, 1.05e6))


@pytest.mark.parametrize("entry, expected", [
    ({"transformer": {"magnetizing_inductanc": "10%"}},
     r"tolerances.transformer.magnetizing_inductanc = '10%': expected a section.key"
     r".*did you mean 'transformer.magnetizing_inductance'"),
    ({"limiter": {"vbe": "0.05 A"}}, r"tolerances.limiter.vbe = '0.05 A': expected a voltage"),
    ({"drive": {"capacitance": "120%"}}, r"expected a relative tolerance below 100 %"),
    ({"drive": {"resistance": {"tolerance": "5%", "distribution": "gauss"}}},
     r"expected distribution one of 'uniform', 'normal'"),
    ({"switch": {"storage_time": {"min": "3 us", "max": "2 us"}}}, r"expected min below max"),
    ({"switch": {"storage_time": {"min": "1 us"}}}, r"expected both min and max"),
    ({"startup": {"resistance": {"tolerance": "5%", "min": 1}}},
     r"expected either tolerance = '10%' \(or an absolute value\) or both min and max"),
    ({"switch": {"hfe_min": "10%"}}, r"current gain spreads from switch.hfe_min"),
    ({"input": {"ac_min": "10%"}}, r"no tolerance on \[input\]"),
    ({"output": {"load_max": "10%"}}, r"loads and choices take none"),
    ({"transformer": {"coupling": "2%"}}, r"expected a band inside the key's range"),
    ({"drive": {"base_emitter_resistance": "5%"}}, r"expected a value of "
     r"drive.base_emitter_resistance in the design"),
    ({"drive": {"resistance": {"tolerance": "5%", "spread": 1}}}, r"unknown field 'spread'"),
])
def test_bad_entries_name_the_key(minimal_design_dict, entry, expected):
    with pytest.raises(DesignError, match=expected):
        _design(minimal_design_dict, entry)


def test_bad_entries_are_all_reported_with_the_rest(minimal_design_dict):
    minimal_design_dict["switch"]["vceo"] = "abc"
    with pytest.raises(DesignError) as error:
        _design(minimal_design_dict, {"drive": {"capacitance": "120%"}})
    assert len(error.value.problems) == 2


def test_set_reaches_the_tolerances(standby_case):
    design = load_design(standby_case, overrides={"tolerances.drive.capacitance": "20%"})
    entry = next(t for t in design.tolerances.entries if t.key == "drive.capacitance")
    assert (entry.low, entry.high) == pytest.approx((0.8 * 68e-9, 1.2 * 68e-9))


def test_uniform_and_truncated_normal_inverse_distribution():
    uniform = Tolerance("a.b", 1.0, 0.9, 1.1, "uniform", "")
    normal = Tolerance("a.b", 1.0, 0.9, 1.1, "normal", "")
    u = np.array([0.0, 0.5, 1.0 - 1e-15])
    assert uniform.from_uniform(u) == pytest.approx([0.9, 1.0, 1.1])
    assert normal.from_uniform(u) == pytest.approx([0.9, 1.0, 1.1])
    # inside the band the values follow the normal law with sigma = half-width / 3:
    # P(value < centre + sigma) = (Phi(1) - Phi(-3)) / (Phi(3) - Phi(-3))
    edge = stats.norm.cdf(-TRUNCATION_SIGMA)
    expected = (stats.norm.cdf(1.0) - edge) / (1 - 2 * edge)
    assert normal.from_uniform(expected) == pytest.approx(1.0 + 0.1 / 3)


def test_gain_is_lognormal_between_its_limits(standby_case):
    design = load_design(standby_case)
    gain = hfe_tolerance(design)
    values = gain.from_uniform(sample_uniforms(20000, 1, 3)[:, 0])
    assert values.min() >= 20 and values.max() <= 45
    # the median is the geometric mean of the limits
    assert np.median(values) == pytest.approx(np.sqrt(20 * 45), rel=0.01)
    assert hfe_tolerance(design.with_values({"switch.hfe_min": 30, "switch.hfe_max": 30})) is None


def test_samples_are_reproducible_bit_for_bit():
    first, again = sample_uniforms(100, 4, 7), sample_uniforms(100, 4, 7)
    assert np.array_equal(first, again)
    assert not np.array_equal(first, sample_uniforms(100, 4, 8))


def test_variants_derive_defaults_like_a_file(worked_cases):
    # a value the file leaves to its default (zener tempco from the zener voltage,
    # core-loss resistance from the ring quality) follows a changed input in
    # Design.with_values exactly as in a file loaded with --set
    path = next(p for p in worked_cases if p.name == "fault_hiccup.toml")
    design = load_design(path)
    for key, value in (("regulation.zener_voltage", 5.1),
                       ("transformer.magnetizing_inductance", 3e-3),
                       ("switch.output_capacitance", 40e-12)):
        assert design.with_values({key: value}) == load_design(path, overrides={key: value})
    given = design.with_values({"regulation.zener_tempco": 1e-3})
    assert given.with_values({"regulation.zener_voltage": 5.1}).regulation.zener_tempco == 1e-3
