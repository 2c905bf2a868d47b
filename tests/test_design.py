"""The design model (rcc.design, rcc.schema): loading, defaults, derived
values, validation of every section, and ``with_values`` variants."""

from __future__ import annotations

import dataclasses
import math

import pytest
from scipy.constants import zero_Celsius

from rcc.design import (
    DEFAULT_RING_QUALITY,
    Design,
    DesignError,
    Load,
    default_zener_tempco,
    design_from_dict,
    load_design,
)
from rcc.schema import KEYS, SECTIONS, keys_of, markdown_reference
from rcc.units import DIMENSIONS


def problems_of(data) -> list[str]:
    with pytest.raises(DesignError) as info:
        design_from_dict(data)
    return info.value.problems


# ------------------------------------------------------------------ loading
def test_worked_cases_load(worked_cases):
    for path in worked_cases:
        design = load_design(path)
        assert isinstance(design, Design)
        assert design.title
        assert design.source == str(path)


#: SI prefixes (BIPM, *The International System of Units*, 9th ed., 2019,
#: table 7) and the units the worked cases use, for an independent reading
#: of the raw TOML text.
_SI_PREFIX = {"T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "µ": 1e-6,
              "n": 1e-9, "p": 1e-12}
_UNITS = ("ohm", "Hz", "V", "A", "F", "H", "s", "T", "W")


def _independent_si(text):
    """'22 uF' -> 2.2e-5, '23 mm^2' -> 2.3e-5, '0 degC' -> 273.15."""
    if not isinstance(text, str):
        return float(text)
    number, unit = text.split()
    if unit == "degC":
        return float(number) + 273.15  # SI brochure sec. 2.3.1
    if unit.endswith("m^2"):
        return float(number) * _SI_PREFIX[unit[:-3]] ** 2
    for base in _UNITS:
        if unit.endswith(base) and unit[: -len(base)] in _SI_PREFIX:
            return float(number) * _SI_PREFIX[unit[: -len(base)]]
    raise AssertionError(f"reference reader does not know {text!r}")


def test_worked_case_values_in_si(worked_cases):
    """Every quantity in every worked case reads to the value an independent
    prefix table gives (the two readers must agree)."""
    import tomllib

    from rcc.schema import keys_of

    for path in worked_cases:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
        design = load_design(path)
        checked = 0
        for section in SECTIONS:
            for name, value in raw.get(section, {}).items():
                key = keys_of(section)[name]
                if key.kind != "quantity":
                    continue
                assert getattr(getattr(design, section), name) == pytest.approx(
                    _independent_si(value), rel=1e-12, abs=1e-12), (path.name, section, name)
                checked += 1
        assert checked > 30, path.name


def test_design_from_dict_minimal(minimal_design_dict):
    design = design_from_dict(minimal_design_dict)
    assert design.source == "<dict>"
    assert design.switch.type == "npn"
    assert design.regulation.method == "none"
    assert design.clamp.type == "none"
    assert design.transformer.feedback_phase == "regenerative"


def test_design_is_frozen(minimal_design_dict):
    design = design_from_dict(minimal_design_dict)
    with pytest.raises(dataclasses.FrozenInstanceError):
        design.title = "other"
    with pytest.raises(dataclasses.FrozenInstanceError):
        design.switch.hfe_min = 1.0


def test_defaults_follow_schema(minimal_design_dict):
    """Every optional key left out takes the default the schema documents."""
    design = design_from_dict(minimal_design_dict)
    for key in KEYS:
        if key.required or not key.section or key.default is None:
            continue
        spec = getattr(design, key.section)
        if not hasattr(spec, key.name):
            continue
        assert getattr(spec, key.name) == key.default, key.path


def test_schema_keys_match_dataclass_fields(minimal_design_dict):
    """Schema rows and design fields are the same set (schema.py says so)."""
    design = design_from_dict(minimal_design_dict)
    for section in SECTIONS:
        spec = getattr(design, section)
        field_names = {f.name for f in dataclasses.fields(spec)}
        assert set(keys_of(section)) == field_names, section


def test_schema_reference_lists_every_key():
    text = markdown_reference()
    for key in KEYS:
        assert f"`{key.name}`" in text, key.path
    for key in KEYS:
        if key.kind == "quantity":
            assert key.dimension in DIMENSIONS, key.path


# ------------------------------------------------------------- derived values
def test_leakage_from_coupling(minimal_design_dict):
    # coupled inductors: L_lk = Lm (1 - k^2) / k^2 referred to the primary
    # (leakage of the T-model with Lm = k^2 Lp); notes/circuit.md
    minimal_design_dict["transformer"]["coupling"] = 0.98
    design = design_from_dict(minimal_design_dict)
    lm = 1.5e-3
    assert design.transformer.leakage_inductance == pytest.approx(lm * (1 - 0.98**2) / 0.98**2)


def test_coupling_one_means_no_leakage(minimal_design_dict):
    minimal_design_dict["transformer"]["coupling"] = 1
    design = design_from_dict(minimal_design_dict)
    assert design.transformer.leakage_inductance == 0.0


def test_leakage_given_directly(minimal_design_dict):
    del minimal_design_dict["transformer"]["coupling"]
    minimal_design_dict["transformer"]["leakage_inductance"] = "20 uH"
    design = design_from_dict(minimal_design_dict)
    assert design.transformer.leakage_inductance == pytest.approx(20e-6)
    assert design.transformer.coupling is None


def test_derived_ratios_and_node_capacitance(minimal_design_dict):
    design = design_from_dict(minimal_design_dict)
    assert design.output_turns_ratio == pytest.approx(80 / 10)
    assert design.feedback_turns_ratio == pytest.approx(8 / 80)
    # default winding capacitance 20 pF + switch output capacitance 20 pF
    assert design.node_capacitance == pytest.approx(40e-12)


def test_default_core_loss_resistance_gives_ring_quality(minimal_design_dict):
    # parallel RLC: Q = R sqrt(C / L)  (e.g. Nilsson & Riedel, *Electric
    # Circuits*, parallel resonance)  -> R = Q sqrt(L / C)
    design = design_from_dict(minimal_design_dict)
    r = design.transformer.core_loss_resistance
    q = r * math.sqrt(design.node_capacitance / design.transformer.magnetizing_inductance)
    assert q == pytest.approx(DEFAULT_RING_QUALITY)


@pytest.mark.parametrize("voltage, sign", [(3.3, -1), (5.1, 0), (12.0, 1), (47.0, 1)])
def test_default_zener_tempco_sign(voltage, sign):
    # zener tempco negative below about 5 V, zero near 5 V, positive above
    # common practice (DOMAIN.md temperature section)
    tempco = float(default_zener_tempco(voltage))
    assert math.copysign(1, tempco) == sign or (sign == 0 and tempco == 0)
    assert abs(tempco) <= 0.0012


def test_feedback_regulation_gets_zener_tempco_default(minimal_design_dict):
    minimal_design_dict["regulation"] = {
        "method": "feedback-winding", "zener_voltage": "9.1 V",
        "series_resistance": "470 ohm", "filter_capacitance": "10 uF"}
    design = design_from_dict(minimal_design_dict)
    assert design.regulation.zener_tempco == pytest.approx(float(default_zener_tempco(9.1)))


@pytest.mark.parametrize(
    "text, load",
    [("0.5 A", Load("current", 0.5)), ("24 ohm", Load("resistance", 24.0)),
     ("6 W", Load("power", 6.0)), ("500 mA", Load("current", 0.5)),
     ("1 kohm", Load("resistance", 1000.0)), ("0 A", Load("current", 0.0))],
)
def test_load_kinds_from_unit(minimal_design_dict, text, load):
    for name in ("load_min", "load_nominal", "load_max"):  # equal loads keep the order
        minimal_design_dict["output"][name] = text
    design = design_from_dict(minimal_design_dict)
    assert design.output.load_max == load


def test_load_current_conversion():
    # I = I, I = V / R, I = P / V  (Ohm's law and P = V I)
    assert float(Load("current", 0.5).current(12.0)) == pytest.approx(0.5)
    assert float(Load("resistance", 24.0).current(12.0)) == pytest.approx(0.5)
    assert float(Load("power", 6.0).current(12.0)) == pytest.approx(0.5)
    assert float(Load("power", 6.0).current(0.0)) == 0.0


def test_dc_input_design(minimal_design_dict):
    minimal_design_dict["input"] = {"dc_min": "36 V", "dc_nominal": "48 V", "dc_max": "60 V"}
    design = design_from_dict(minimal_design_dict)
    assert not design.input.is_ac
    assert design.input.line_voltages == (36.0, 48.0, 60.0)


# -------------------------------------------------------------- validation
def test_design_error_is_value_error():
    assert issubclass(DesignError, ValueError)


def test_design_error_message_is_all_problems(minimal_design_dict):
    del minimal_design_dict["switch"]["vceo"]
    minimal_design_dict["drive"]["resistance"] = "-1 ohm"
    with pytest.raises(DesignError) as info:
        design_from_dict(minimal_design_dict)
    assert len(info.value.problems) == 2
    assert str(info.value) == "\n".join(info.value.problems)


@pytest.mark.parametrize(
    "mutate, pattern",
    [
        (lambda d: d["input"].update(dc_min="300 V"),
         r"^<dict>: input: give either .* not both$"),
        (lambda d: d.__setitem__("input", {"dc_min": "36 V", "dc_max": "60 V"}),
         r"^<dict>: input\.dc_nominal: missing; expected a positive voltage \[V\]"),
        (lambda d: d.__setitem__("input", {}),
         r"^<dict>: input\.ac_min: missing; expected the AC keys"),
        (lambda d: d["input"].pop("bulk_capacitance"),
         r"^<dict>: input\.bulk_capacitance: missing; expected a positive capacitance \[F\]"),
        (lambda d: d["input"].update(ac_min="300 V"),
         r"^<dict>: input\.ac_min = 300 is above input\.ac_nominal = 230"),
        (lambda d: d["switch"].update(hfe_min=50),
         r"^<dict>: switch\.hfe_min = 50 is above switch\.hfe_typ = 30: expected "
         r"hfe_min <= hfe_typ <= hfe_max"),
        (lambda d: d["switch"].update(type="pnp"),
         r"^<dict>: switch\.type = 'pnp': expected one of 'npn', 'nmos'$"),
        (lambda d: d["switch"].update(type="nmos"),
         r"^<dict>: switch\.type = 'nmos': expected 'npn'"),
        (lambda d: d["transformer"].update(leakage_inductance="10 uH"),
         r"^<dict>: transformer: give coupling or leakage_inductance, not both$"),
        (lambda d: d["transformer"].pop("coupling"),
         r"^<dict>: transformer\.coupling: missing; expected a coupling in \(0, 1\]"),
        (lambda d: d["transformer"].update(feedback_phase="backwards"),
         r"^<dict>: transformer\.feedback_phase = 'backwards': expected one of "
         r"'regenerative', 'degenerative'$"),
        (lambda d: d["transformer"].update(leakage_inductance="-1 uH") or
         d["transformer"].pop("coupling"),
         r"^<dict>: transformer\.leakage_inductance = '-1 uH': expected a "
         r"non-negative inductance \[H\]$"),
        (lambda d: d.__setitem__("regulation", {"method": "feedback-winding"}),
         r"^<dict>: regulation\.zener_voltage: missing; .*needed by method "
         r"'feedback-winding'"),
        (lambda d: d.__setitem__("regulation", {"method": "optocoupler"}),
         r"^<dict>: regulation\.reference_voltage: missing; .*needed by method "
         r"'optocoupler'"),
        (lambda d: d.__setitem__("regulation", {"method": "magic"}),
         r"^<dict>: regulation\.method = 'magic': expected one of "
         r"'feedback-winding', 'optocoupler', 'none'$"),
        (lambda d: d.__setitem__("clamp", {"type": "rcd"}),
         r"^<dict>: clamp\.resistance: missing; .*needed by clamp type 'rcd'"),
        (lambda d: d.__setitem__("clamp", {"type": "zener"}),
         r"^<dict>: clamp\.voltage: missing; .*needed by clamp type 'zener'"),
        (lambda d: d["output"].update(load_max=0.5),
         r"^<dict>: output\.load_max = 0\.5: expected a load with its unit"),
        (lambda d: d["output"].update(load_max="5 V"),
         r"^<dict>: output\.load_max = '5 V': expected a current \('0\.5 A'\), a "
         r"resistance \('24 ohm'\) or a power \('6 W'\)$"),
        (lambda d: d["output"].update(load_max="-1 A"),
         r"^<dict>: output\.load_max = '-1 A': expected a non-negative load"),
        (lambda d: d["output"].update(load_max="0 ohm"),
         r"^<dict>: output\.load_max = '0 ohm': expected a non-negative load "
         r"\(a resistance must be positive\)$"),
        (lambda d: d.__setitem__("environment", {"temperature_min": -10}),
         r"^<dict>: environment\.temperature_min = -10: expected a temperature "
         r"above absolute zero"),
        (lambda d: d.__setitem__("environment", {"temperature_min": "60 degC",
                                                 "temperature_max": "0 degC"}),
         r"^<dict>: environment\.temperature_min = 333\.15 is above "
         r"environment\.temperature_max = 273\.15"),
        (lambda d: d.__setitem__("limits", {"voltage_derating": 1.2}),
         r"^<dict>: limits\.voltage_derating = 1\.2: expected a number in \(0, 1\]$"),
        (lambda d: d.__setitem__("limits", {"flux_margin": 0}),
         r"^<dict>: limits\.flux_margin = 0: expected a number in \(0, 1\]$"),
        (lambda d: d.__setitem__("title", 5),
         r"^<dict>: title = 5: expected a text string$"),
        (lambda d: d.pop("title"),
         r"^<dict>: title: missing; expected a text string$"),
        (lambda d: d.__setitem__("switch", "x"),
         r"^<dict>: switch = 'x': expected a table \[switch\]$"),
        (lambda d: d.__setitem__("titel", "x"),
         r"^<dict>: titel = 'x': unknown key \(did you mean 'title'\?\)$"),
    ],
)
def test_invalid_design_dicts(minimal_design_dict, mutate, pattern):
    mutate(minimal_design_dict)
    problems = problems_of(minimal_design_dict)
    assert any(__import__("re").search(pattern, line) for line in problems), problems


def test_not_a_mapping():
    with pytest.raises(DesignError, match="expected a table of sections"):
        design_from_dict(["not", "a", "table"])


# ------------------------------------------------------------- with_values
def test_with_values_changes_only_the_named_key(standby_case):
    design = load_design(standby_case)
    before = design.switch.hfe_min
    assert before != 10.0
    variant = design.with_values({"switch.hfe_min": 10})
    assert variant.switch.hfe_min == 10.0
    assert variant.switch == dataclasses.replace(design.switch, hfe_min=10.0)
    for section in SECTIONS:
        if section != "switch":
            assert getattr(variant, section) == getattr(design, section), section
    assert design.switch.hfe_min == before  # the original is untouched


def test_with_values_accepts_unit_strings(standby_case):
    design = load_design(standby_case)
    variant = design.with_values({"transformer.magnetizing_inductance": "2 mH",
                                  "environment.temperature_max": "85 degC"})
    assert variant.transformer.magnetizing_inductance == pytest.approx(2e-3)
    assert variant.environment.temperature_max == pytest.approx(zero_Celsius + 85)


def test_with_values_empty_round_trips(worked_cases, minimal_design_dict):
    designs = [load_design(p) for p in worked_cases] + [design_from_dict(minimal_design_dict)]
    for design in designs:
        assert design.with_values({}) == design
        assert design_from_dict(design.to_dict()) == design


def test_with_values_coupling_replaces_leakage(standby_case):
    design = load_design(standby_case)
    variant = design.with_values({"transformer.leakage_inductance": "5 uH"})
    assert variant.transformer.leakage_inductance == pytest.approx(5e-6)
    assert variant.transformer.coupling is None
    back = variant.with_values({"transformer.coupling": 0.99})
    assert back.transformer.leakage_inductance == pytest.approx(
        design.transformer.leakage_inductance)


def test_with_values_validates(standby_case):
    design = load_design(standby_case)
    with pytest.raises(DesignError, match=r"switch\.hfe_min = -1: expected a positive number"):
        design.with_values({"switch.hfe_min": -1})
    with pytest.raises(DesignError, match=r"switch\.hfe_mni = 10: unknown key \(did you mean 'hfe_min'\?\)"):
        design.with_values({"switch.hfe_mni": 10})
    with pytest.raises(DesignError, match=r"transformer\.magnetizing_inductance = '10 mF'"):
        design.with_values({"transformer.magnetizing_inductance": "10 mF"})


def test_load_design_overrides(standby_case):
    design = load_design(standby_case, overrides={"switch.hfe_min": 12})
    assert design.switch.hfe_min == 12.0


def test_top_level_api_exports():
    import rcc

    assert rcc.load_design is load_design
    assert rcc.design_from_dict is design_from_dict
    assert rcc.DesignError is DesignError
