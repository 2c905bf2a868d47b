"""The design-file schema: every section and key, its dimension, default and meaning.

This table is the single source of truth for the loader (:mod:`rcc.design`),
the README's design-file reference (``python -m rcc.schema`` prints it) and
the error messages.  Adding a key means adding a row here and a field in the
matching dataclass of :mod:`rcc.design`.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Key", "KEYS", "SECTIONS", "TOP_LEVEL", "keys_of", "markdown_reference",
           "TOLERANCE_SECTION", "TOLERANCE_FIELDS", "TOLERANCE_EXCLUDED_SECTIONS"]


@dataclass(frozen=True)
class Key:
    """One design-file key.

    Attributes
    ----------
    section : str
        Section name (``""`` for top-level keys).
    name : str
        Key name inside its section.
    kind : str
        ``"quantity"`` (number with a unit of ``dimension``), ``"load"``
        (current, resistance or power, the unit decides), ``"choice"``,
        ``"string"``.
    dimension : str
        Dimension name from :data:`rcc.units.DIMENSIONS` for quantities.
    required : bool
        Whether the key must be present (conditional requirements, such as
        the AC-or-DC input group, are checked by the loader).
    default : object
        Default value in SI units (``None``: absent / not used).
    constraint : str
        ``"positive"``, ``"nonnegative"``, ``"unit-interval"`` (0 < x <= 1),
        ``"fraction"`` (0 < x < 1) or ``"any"``.
    description : str
        Meaning, shown in the reference and in messages.
    choices : tuple of str
        Allowed values of a choice key.
    bounds : tuple of float or None
        Range of magnitudes ``(low, high)`` [SI] the models are built for; a
        value outside it (other than an allowed zero) is refused with the range
        in the message.  ``None``: the dimension's range in :data:`PLAUSIBLE`.
    """

    section: str
    name: str
    kind: str
    dimension: str
    required: bool
    default: object
    constraint: str
    description: str
    choices: tuple[str, ...] = ()
    bounds: tuple[float, float] | None = None

    @property
    def path(self) -> str:
        return f"{self.section}.{self.name}" if self.section else self.name

    @property
    def plausible(self) -> tuple[float, float] | None:
        """Range of magnitudes the models are built for [SI] (see ``bounds``)."""
        if self.bounds is not None:
            return self.bounds
        return PLAUSIBLE.get(self.dimension)


#: Magnitudes [SI] a value of each dimension may take in a design file: wide
#: enough for any small free-running supply (and a 1 Tohm "open" resistor), narrow
#: enough that no model meets an overflow, a denormal or a negative gain.  Values
#: outside are refused up front with the range instead of failing deep inside.
#: The lower bound applies to non-zero values; zero is governed by the key's
#: constraint.  Temperatures: -100 degC to +250 degC.
PLAUSIBLE: dict[str, tuple[float, float]] = {
    "voltage": (1e-3, 1e5),
    "current": (1e-9, 1e4),
    "resistance": (1e-6, 1e15),
    "capacitance": (1e-15, 10.0),
    "inductance": (1e-10, 100.0),
    "time": (1e-12, 3600.0),
    "frequency": (1e-3, 1e12),
    "area": (1e-10, 1.0),
    "flux density": (1e-3, 10.0),
    "temperature": (173.15, 523.15),
    "power": (1e-9, 1e5),
    "voltage per kelvin": (0.0, 0.1),
    "fraction per kelvin": (0.0, 0.1),
    "dimensionless": (1e-6, 1e6),
}

#: Turn counts: a fraction of a turn up to a hundred thousand.
TURNS = (0.5, 1e5)
#: DC current gains: one to a hundred thousand.
GAINS = (1.0, 1e5)


def _q(section, name, dimension, description, *, required=True, default=None,
       constraint="positive", bounds=None):
    return Key(section, name, "quantity", dimension, required, default, constraint,
               description, bounds=bounds)


def _c(section, name, choices, description, *, required=False, default=None):
    return Key(section, name, "choice", "", required, default, "any", description,
               tuple(choices))


TOP_LEVEL = (
    Key("", "title", "string", "", True, None, "any", "Name of the design."),
    Key("", "description", "string", "", False, "", "any",
        "Free text: origin of the data, scenario, revision."),
)

KEYS: tuple[Key, ...] = TOP_LEVEL + (
    # ------------------------------------------------------------- input
    _q("input", "ac_min", "voltage", "Lowest RMS line voltage.", required=False),
    _q("input", "ac_nominal", "voltage", "Nominal RMS line voltage.", required=False),
    _q("input", "ac_max", "voltage", "Highest RMS line voltage.", required=False),
    _q("input", "line_frequency", "frequency",
       "Line frequency (AC input); the bulk capacitor recharges at twice it.",
       required=False, default=50.0),
    _q("input", "bulk_capacitance", "capacitance",
       "Bulk (reservoir) capacitor after the bridge (AC input).", required=False),
    _q("input", "bridge_drop", "voltage",
       "Forward drop of the two conducting bridge diodes together.",
       required=False, default=1.6, constraint="nonnegative"),  # 2 x 0.8 V, common practice
    _q("input", "dc_min", "voltage", "Lowest DC bus voltage (DC input).", required=False),
    _q("input", "dc_nominal", "voltage", "Nominal DC bus voltage (DC input).",
       required=False),
    _q("input", "dc_max", "voltage", "Highest DC bus voltage (DC input).", required=False),
    # ------------------------------------------------------------- switch
    _c("switch", "type", ("npn", "nmos"),
       "Switch technology. Only 'npn' is modelled in this version.", default="npn"),
    _q("switch", "hfe_min", "dimensionless", "Lowest DC current gain at 25 degC.",
       bounds=GAINS),
    _q("switch", "hfe_typ", "dimensionless", "Typical DC current gain at 25 degC.",
       bounds=GAINS),
    _q("switch", "hfe_max", "dimensionless", "Highest DC current gain at 25 degC.",
       bounds=GAINS),
    _q("switch", "vbe", "voltage", "Base-emitter on voltage at 25 degC.",
       required=False, default=0.7),  # silicon junction, common practice
    _q("switch", "vbe_tempco", "voltage per kelvin",
       "Temperature coefficient of the base-emitter voltage.",
       required=False, default=-2e-3, constraint="any"),
    _q("switch", "hfe_tempco", "fraction per kelvin",
       "Relative temperature coefficient of the current gain.",
       required=False, default=0.005, constraint="any"),
    _q("switch", "vce_sat", "voltage", "Collector-emitter saturation voltage.",
       required=False, default=0.3, constraint="nonnegative"),
    _q("switch", "storage_time", "time", "Storage time at the turn-off drive of the circuit."),
    _q("switch", "transition_frequency", "frequency", "Transition frequency fT."),
    _q("switch", "output_capacitance", "capacitance",
       "Collector (output) capacitance, taken as the collector-base capacitance."),
    _q("switch", "vceo", "voltage", "Collector-emitter rating, base open."),
    _q("switch", "vcev", "voltage",
       "Collector-emitter rating with the base reverse-biased (VCEV / VCEX).",
       required=False),
    _q("switch", "vcbo", "voltage", "Collector-base rating, emitter open.", required=False),
    _q("switch", "vebo", "voltage",
       "Emitter-base breakdown voltage; the base is clamped at minus this value "
       "when the feedback winding drives it hard negative.",
       required=False, default=7.0),  # VEBO of HV switching transistors 5-9 V, from memory
    _q("switch", "ic_max", "current", "Collector current rating."),
    # -------------------------------------------------------- transformer
    _q("transformer", "primary_turns", "dimensionless", "Primary turns.",
       bounds=TURNS),
    _q("transformer", "output_turns", "dimensionless", "Output (secondary) turns.",
       bounds=TURNS),
    _q("transformer", "feedback_turns", "dimensionless", "Feedback (base-drive) turns.",
       bounds=TURNS),
    _c("transformer", "feedback_phase", ("regenerative", "degenerative"),
       "Phasing of the feedback winding; 'degenerative' is a winding connected "
       "the wrong way round.", default="regenerative"),
    _q("transformer", "magnetizing_inductance", "inductance",
       "Primary magnetizing inductance."),
    _q("transformer", "coupling", "dimensionless",
       "Coupling coefficient k in (0, 1]; leakage = (1 - k^2) * magnetizing / k^2. "
       "Give this or leakage_inductance.", required=False, constraint="unit-interval",
       bounds=(0.1, 1.0)),
    _q("transformer", "leakage_inductance", "inductance",
       "Primary leakage inductance. Give this or coupling.", required=False,
       constraint="nonnegative"),
    _q("transformer", "winding_capacitance", "capacitance",
       "Primary self-capacitance (lumped across the primary).",
       required=False, default=20e-12, constraint="nonnegative"),  # small flyback, from memory
    _q("transformer", "core_area", "area", "Effective core cross-section Ae."),
    _q("transformer", "saturation_flux_density", "flux density",
       "Saturation flux density of the core material at the highest temperature.",
       required=False, default=0.39),  # MnZn power ferrite near 100 degC, from memory
    _q("transformer", "primary_resistance", "resistance",
       "Primary winding DC resistance.", required=False, default=0.0,
       constraint="nonnegative"),
    _q("transformer", "core_loss_resistance", "resistance",
       "Equivalent parallel resistance of the magnetizing branch (core loss). "
       "Default: the value giving a ring quality factor of 20 with the node "
       "capacitance, Q * sqrt(Lm / C_node).", required=False),
    _q("transformer", "leakage_ring_quality", "dimensionless",
       "Quality factor of the ring of the leakage inductance with the node "
       "capacitance after the clamp lets go (winding AC resistance and core loss at "
       "megahertz); the time-domain engine puts Q * sqrt(L_lk / C_node) across the "
       "leakage inductance.", required=False, default=4.0),
    # rings of wound flyback transformers die within a few periods, common practice
    # ------------------------------------------------------------ startup
    _q("startup", "resistance", "resistance",
       "Start-up resistor from the bus to the switch base."),
    _q("startup", "power_rating", "power",
       "Power rating of the start-up resistor (the check allows half of it).",
       required=False, default=0.25),  # a 1/4 W part, common practice
    # -------------------------------------------------------------- drive
    _q("drive", "resistance", "resistance",
       "Series resistor from the feedback winding to the base."),
    _q("drive", "capacitance", "capacitance",
       "Series capacitor from the feedback winding to the base."),
    _q("drive", "base_emitter_resistance", "resistance",
       "Resistor from base to emitter (absent if not given).", required=False),
    # ------------------------------------------------------------ limiter
    _q("limiter", "sense_resistance", "resistance", "Emitter (current-sense) resistor."),
    _q("limiter", "vbe", "voltage", "Limiter transistor base-emitter on voltage at 25 degC.",
       required=False, default=0.6),  # about 0.6 V over the sense resistor, common practice
    _q("limiter", "vbe_tempco", "voltage per kelvin",
       "Temperature coefficient of the limiter base-emitter voltage.",
       required=False, default=-2e-3, constraint="any"),
    _q("limiter", "base_resistance", "resistance",
       "Resistor from the sense resistor to the limiter base."),
    _q("limiter", "hfe", "dimensionless", "Limiter transistor current gain.",
       bounds=GAINS,
       required=False, default=100.0),  # small-signal NPN, common practice
    # --------------------------------------------------------- regulation
    _c("regulation", "method", ("feedback-winding", "optocoupler", "none"),
       "Regulation path.", default="none"),
    _q("regulation", "zener_voltage", "voltage",
       "Zener voltage at 25 degC (feedback-winding method).", required=False),
    _q("regulation", "zener_tempco", "fraction per kelvin",
       "Relative zener temperature coefficient. Default from the zener voltage "
       "(about -0.09 %/K at 3 V through 0 near 5 V to +0.11 %/K above 20 V).",
       required=False, constraint="any"),
    _q("regulation", "series_resistance", "resistance",
       "Resistor in series with the zener (feedback-winding) or the LED "
       "(optocoupler).", required=False),
    _q("regulation", "rectifier_drop", "voltage",
       "Drop of the diode rectifying the feedback winding.", required=False,
       default=0.7, constraint="nonnegative"),  # silicon diode, common practice
    _q("regulation", "filter_capacitance", "capacitance",
       "Capacitor the feedback winding is rectified onto.", required=False),
    _q("regulation", "reference_voltage", "voltage",
       "Secondary reference voltage (optocoupler method).", required=False),
    _q("regulation", "ctr", "dimensionless",
       "Optocoupler current transfer ratio.", required=False),
    _q("regulation", "led_drop", "voltage", "Optocoupler LED forward drop.",
       required=False, default=1.1, constraint="nonnegative"),  # infrared LED, from memory
    # ------------------------------------------------------------- output
    _q("output", "voltage_target", "voltage", "Intended output voltage.", required=False),
    _q("output", "rectifier_drop", "voltage", "Output rectifier forward drop.",
       required=False, default=0.7, constraint="nonnegative"),  # common practice
    _q("output", "capacitance", "capacitance", "Output capacitor."),
    _q("output", "esr", "resistance", "Output capacitor ESR.", required=False,
       default=0.0, constraint="nonnegative"),
    Key("output", "load_min", "load", "", True, None, "nonnegative",
        "Lightest load: a current [A], a resistance [ohm] or a power [W]."),
    Key("output", "load_nominal", "load", "", True, None, "nonnegative",
        "Nominal load: a current [A], a resistance [ohm] or a power [W]."),
    Key("output", "load_max", "load", "", True, None, "nonnegative",
        "Heaviest load: a current [A], a resistance [ohm] or a power [W]."),
    # -------------------------------------------------------------- clamp
    _c("clamp", "type", ("zener", "rcd", "none"), "Primary clamp.", default="none"),
    _q("clamp", "voltage", "voltage",
       "Clamp voltage above the bus (zener clamp).", required=False),
    _q("clamp", "resistance", "resistance", "RCD clamp resistor.", required=False),
    _q("clamp", "capacitance", "capacitance", "RCD clamp capacitor.", required=False),
    # -------------------------------------------------------- environment
    _q("environment", "temperature_min", "temperature", "Lowest ambient temperature.",
       required=False, default=298.15),
    _q("environment", "temperature_max", "temperature", "Highest ambient temperature.",
       required=False, default=298.15),
    # ------------------------------------------------------------- limits
    _q("limits", "voltage_derating", "dimensionless",
       "Fraction of the switch voltage rating allowed (0.8: ECSS-Q-ST-30-11C "
       "about 80 %; NASA EEE-INST-002 about 75 % for bipolar transistors).",
       required=False, default=0.8, constraint="unit-interval"),  # both sources from memory
    _q("limits", "flux_margin", "dimensionless",
       "Fraction of the saturation flux density allowed at the worst-case peak "
       "current (0.8 leaves 20 % for inductance and core-area tolerance).",
       required=False, default=0.8, constraint="unit-interval"),
    _q("limits", "output_tolerance", "dimensionless",
       "Allowed relative deviation of the output from voltage_target.",
       required=False, default=0.05, constraint="unit-interval"),
    _q("limits", "start_time_max", "time",
       "Longest acceptable start-up time from switch-on.",
       required=False, default=2.0),
)

SECTIONS: tuple[str, ...] = tuple(
    dict.fromkeys(key.section for key in KEYS if key.section)
)

#: The ``[tolerances]`` section: per design key a tolerance string or a table of
#: these fields (validated by :mod:`rcc.tolerance`).
TOLERANCE_SECTION = "tolerances"
TOLERANCE_FIELDS = {
    "tolerance": "relative ('10%') or absolute ('0.05 V') half-width about the design value",
    "min": "lowest value (with max: explicit bounds instead of a tolerance)",
    "max": "highest value (with min)",
    "distribution": "'uniform' (default) or 'normal' (the tolerance is 3 sigma, "
                    "truncated there)",
    "drift": "ageing drift, relative ('+2%') or absolute, shifting the whole band",
}
#: Sections whose values are operating conditions or acceptance limits, not part
#: values: the check covers their whole ranges, so they take no tolerance.
TOLERANCE_EXCLUDED_SECTIONS = ("input", "environment", "limits")

_BY_SECTION: dict[str, dict[str, Key]] = {}
for _key in KEYS:
    _BY_SECTION.setdefault(_key.section, {})[_key.name] = _key


def keys_of(section: str) -> dict[str, Key]:
    """Keys of one section.

    Parameters
    ----------
    section : str
        Section name, ``""`` for the top level [-].

    Returns
    -------
    dict of str to Key
        The section's keys by name.
    """
    return _BY_SECTION.get(section, {})


def markdown_reference() -> str:
    """The design-file reference as Markdown tables (used in the README)."""
    from rcc.units import DIMENSIONS, format_si

    lines = []
    for section in ("",) + SECTIONS:
        heading = f"`[{section}]`" if section else "top level"
        lines += [f"#### {heading}", "", "| key | unit | default | meaning |",
                  "|---|---|---|---|"]
        for key in keys_of(section).values():
            if key.kind == "quantity":
                unit = DIMENSIONS[key.dimension].unit or "1"
            elif key.kind == "load":
                unit = "A, ohm or W"
            elif key.kind == "choice":
                unit = " / ".join(f"`{c}`" for c in key.choices)
            else:
                unit = "text"
            if key.required:
                default = "required"
            elif key.default is None:
                default = "-"
            elif key.kind == "quantity" and key.dimension == "temperature":
                default = f"{key.default - 273.15:g} degC"
            elif key.kind == "quantity":
                default = format_si(key.default, DIMENSIONS[key.dimension].unit)
            else:
                default = f"`{key.default}`" if key.default != "" else "empty"
            lines.append(f"| `{key.name}` | {unit} | {default} | {key.description} |")
        lines.append("")
    lines += _ranges_reference()
    return "\n".join(lines)


def _ranges_reference() -> list[str]:
    """The ranges of :data:`PLAUSIBLE` and the keys with their own, as Markdown."""
    from rcc.units import format_quantity

    def span(dimension, bounds):
        low, high = bounds
        if low == 0:
            return f"magnitude up to {format_quantity(high, dimension)}"
        return f"{format_quantity(low, dimension)} to {format_quantity(high, dimension)}"

    lines = ["#### Value ranges", "",
             "Values outside these ranges (zero aside, where a key allows it) are refused "
             "with the range in the message: the models are not built for them.", "",
             "| values | range |", "|---|---|"]
    lines += [f"| {dimension} | {span(dimension, bounds)} |"
              for dimension, bounds in PLAUSIBLE.items()]
    lines += [f"| `{key.path}` | {span(key.dimension, key.bounds)} |"
              for key in KEYS if key.bounds is not None]
    lines += ["| loads | current up to 10 kA, resistance 1 uohm to 1 Pohm, power up "
              "to 100 kW |", ""]
    return lines


if __name__ == "__main__":  # pragma: no cover - documentation helper
    print(markdown_reference())
