"""Design model: the frozen description of one free-running flyback supply.

:func:`load_design` reads a TOML design file, :func:`design_from_dict` takes
the same content as a dictionary (for notebooks and tests).  Both validate
every key against :mod:`rcc.schema` and collect *all* problems before
raising one :class:`DesignError` whose lines each name the file, the
``section.key``, the value given and what was expected.

Inside the package every value is a float in SI base units (temperatures in
kelvin).  :meth:`Design.with_values` returns a modified copy, validated the
same way, so tolerance and substitution studies cannot build an invalid
design.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from rcc.schema import PLAUSIBLE, SECTIONS, TOLERANCE_SECTION, Key, keys_of
from rcc.tolerance import Tolerances, read_tolerances
from rcc.units import DIMENSIONS, UnitError, format_si as _si, parse_quantity

__all__ = [
    "Design",
    "DesignError",
    "Load",
    "InputSpec",
    "SwitchSpec",
    "TransformerSpec",
    "StartupSpec",
    "DriveSpec",
    "LimiterSpec",
    "RegulationSpec",
    "OutputSpec",
    "ClampSpec",
    "EnvironmentSpec",
    "LimitsSpec",
    "load_design",
    "design_from_dict",
    "parse_load",
    "LOAD_KINDS",
    "default_zener_tempco",
    "DEFAULT_RING_QUALITY",
]

#: Quality factor of the magnetizing ring assumed when no core-loss resistance
#: is given.  Ferrite-cored flyback primaries ring with Q of roughly 10 to 50
#: at their self-resonance  # from memory
DEFAULT_RING_QUALITY = 20.0


#: Load kinds, each recognised by the dimension of its unit.
LOAD_KINDS = ("current", "resistance", "power")


class DesignError(ValueError):
    """A design file or dictionary is invalid.

    Attributes
    ----------
    problems : list of str
        One line per problem: ``file: section.key = value: expected ...``.
    """

    def __init__(self, problems: list[str]):
        self.problems = list(problems)
        super().__init__("\n".join(self.problems))


@dataclass(frozen=True)
class Load:
    """A load given as a current, a resistance or a power.

    Attributes
    ----------
    kind : str
        ``"current"``, ``"resistance"`` or ``"power"``.
    value : float
        Value in [A], [ohm] or [W] according to ``kind``.
    """

    kind: str
    value: float

    def current(self, output_voltage):
        """Load current at ``output_voltage`` [V] -> [A]."""
        output_voltage = np.asarray(output_voltage, dtype=float)
        if self.kind == "current":
            return np.full_like(output_voltage, self.value)
        if self.kind == "resistance":
            return output_voltage / self.value
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(output_voltage > 0, self.value / np.maximum(output_voltage, 1e-300), 0.0)

    def power(self, output_voltage):
        """Load power at ``output_voltage`` [V] -> [W]."""
        output_voltage = np.asarray(output_voltage, dtype=float)
        if self.kind == "power":
            return np.full_like(output_voltage, self.value)
        return output_voltage * self.current(output_voltage)

    def text(self) -> str:
        unit = {"current": "A", "resistance": "ohm", "power": "W"}[self.kind]
        return f"{self.value:.6g} {unit}"


@dataclass(frozen=True)
class InputSpec:
    """Line or bus input.  AC fields are ``None`` for a DC-fed design and
    vice versa.  Voltages [V] (RMS for AC), frequency [Hz], capacitance [F]."""

    ac_min: float | None
    ac_nominal: float | None
    ac_max: float | None
    line_frequency: float
    bulk_capacitance: float | None
    bridge_drop: float
    dc_min: float | None
    dc_nominal: float | None
    dc_max: float | None

    @property
    def is_ac(self) -> bool:
        return self.ac_min is not None

    @property
    def line_voltages(self) -> tuple[float, float, float]:
        """(min, nominal, max) line voltage: RMS for AC input, DC otherwise [V]."""
        if self.is_ac:
            return (self.ac_min, self.ac_nominal, self.ac_max)
        return (self.dc_min, self.dc_nominal, self.dc_max)


@dataclass(frozen=True)
class SwitchSpec:
    """Switching transistor.  Gains at 25 degC [1], voltages [V], times [s],
    frequency [Hz], capacitance [F], current [A], tempcos [V/K] and [1/K]."""

    type: str
    hfe_min: float
    hfe_typ: float
    hfe_max: float
    vbe: float
    vbe_tempco: float
    hfe_tempco: float
    vce_sat: float
    storage_time: float
    transition_frequency: float
    output_capacitance: float
    vceo: float
    vcev: float | None
    vcbo: float | None
    vebo: float
    ic_max: float


@dataclass(frozen=True)
class TransformerSpec:
    """Flyback transformer.  Turns [1], inductances [H], capacitance [F],
    area [m^2], flux density [T], resistances [ohm]."""

    primary_turns: float
    output_turns: float
    feedback_turns: float
    feedback_phase: str
    magnetizing_inductance: float
    coupling: float | None
    leakage_inductance: float
    winding_capacitance: float
    core_area: float
    saturation_flux_density: float
    primary_resistance: float
    core_loss_resistance: float
    leakage_ring_quality: float


@dataclass(frozen=True)
class StartupSpec:
    """Start-up resistor [ohm] and its power rating [W]."""

    resistance: float
    power_rating: float


@dataclass(frozen=True)
class DriveSpec:
    """Base drive: series resistor [ohm] and capacitor [F] from the feedback
    winding, optional base-emitter resistor [ohm] (``None``: absent)."""

    resistance: float
    capacitance: float
    base_emitter_resistance: float | None


@dataclass(frozen=True)
class LimiterSpec:
    """Current-limit transistor: sense resistor [ohm], Vbe at 25 degC [V],
    its tempco [V/K], base resistor [ohm], gain [1]."""

    sense_resistance: float
    vbe: float
    vbe_tempco: float
    base_resistance: float
    hfe: float


@dataclass(frozen=True)
class RegulationSpec:
    """Regulation path.  Voltages [V], resistances [ohm], capacitance [F],
    ratio [1], tempco [1/K].  Unused fields are ``None``."""

    method: str
    zener_voltage: float | None
    zener_tempco: float | None
    series_resistance: float | None
    rectifier_drop: float
    filter_capacitance: float | None
    reference_voltage: float | None
    ctr: float | None
    led_drop: float


@dataclass(frozen=True)
class OutputSpec:
    """Output: target voltage [V] (``None`` if not given), rectifier drop [V],
    capacitor [F] and ESR [ohm], loads."""

    voltage_target: float | None
    rectifier_drop: float
    capacitance: float
    esr: float
    load_min: Load
    load_nominal: Load
    load_max: Load


@dataclass(frozen=True)
class ClampSpec:
    """Primary clamp: type, clamp voltage above the bus [V] (zener),
    resistor [ohm] and capacitor [F] (RCD)."""

    type: str
    voltage: float | None
    resistance: float | None
    capacitance: float | None


@dataclass(frozen=True)
class EnvironmentSpec:
    """Ambient temperature range [K]."""

    temperature_min: float
    temperature_max: float


@dataclass(frozen=True)
class LimitsSpec:
    """Acceptance limits: fractions [1] and the longest start-up time [s]."""

    voltage_derating: float
    flux_margin: float
    output_tolerance: float
    start_time_max: float


_SECTION_CLASSES = {
    "input": InputSpec,
    "switch": SwitchSpec,
    "transformer": TransformerSpec,
    "startup": StartupSpec,
    "drive": DriveSpec,
    "limiter": LimiterSpec,
    "regulation": RegulationSpec,
    "output": OutputSpec,
    "clamp": ClampSpec,
    "environment": EnvironmentSpec,
    "limits": LimitsSpec,
}


@dataclass(frozen=True)
class Design:
    """One free-running flyback design, validated, in SI units.

    Build it with :func:`load_design` or :func:`design_from_dict`; derive
    variants with :meth:`with_values`.
    """

    title: str
    description: str
    input: InputSpec
    switch: SwitchSpec
    transformer: TransformerSpec
    startup: StartupSpec
    drive: DriveSpec
    limiter: LimiterSpec
    regulation: RegulationSpec
    output: OutputSpec
    clamp: ClampSpec
    environment: EnvironmentSpec
    limits: LimitsSpec
    source: str = field(default="<dict>", compare=False)
    tolerances: Tolerances = field(default=Tolerances(), compare=False)

    # ------------------------------------------------------------ derived
    @property
    def node_capacitance(self) -> float:
        """Capacitance across the primary at the collector node [F]:
        winding self-capacitance plus switch output capacitance."""
        return self.transformer.winding_capacitance + self.switch.output_capacitance

    @property
    def output_turns_ratio(self) -> float:
        """Primary-to-output turns ratio Np/Ns [1]."""
        return self.transformer.primary_turns / self.transformer.output_turns

    @property
    def feedback_turns_ratio(self) -> float:
        """Feedback-to-primary turns ratio Nf/Np [1]."""
        return self.transformer.feedback_turns / self.transformer.primary_turns

    def to_dict(self) -> dict[str, Any]:
        """The design as a dictionary that :func:`design_from_dict` accepts
        (SI numbers, loads as strings with units)."""
        result: dict[str, Any] = {"title": self.title, "description": self.description}
        for section in SECTIONS:
            spec = getattr(self, section)
            entries = {}
            for item in fields(spec):
                value = getattr(spec, item.name)
                if value is None:
                    continue
                if isinstance(value, Load):
                    value = value.text()
                entries[item.name] = value
            if section == "transformer":
                # leakage is derived when coupling is given: keep one of them
                if entries.get("coupling") is not None:
                    entries.pop("leakage_inductance", None)
            result[section] = entries
        if self.tolerances:
            result[TOLERANCE_SECTION] = self.tolerances.to_dict()
        return result

    def with_values(self, values: Mapping[str, Any]) -> "Design":
        """Copy with some keys replaced, validated like a file.

        Parameters
        ----------
        values : mapping
            ``{"section.key": value}``; values as in a design file
            (numbers in SI units or strings with units).

        Returns
        -------
        Design
            The modified design.

        Raises
        ------
        DesignError
            If a key is unknown or the result is invalid.
        """
        data = self.to_dict()
        # values the loader derived (not given in the file) follow their inputs, as
        # they would in a file with the new values: drop them to derive them again
        regulation, tr = self.regulation, self.transformer
        if (regulation.zener_voltage is not None and regulation.zener_tempco
                == float(default_zener_tempco(regulation.zener_voltage))):
            data["regulation"].pop("zener_tempco", None)
        if tr.core_loss_resistance == DEFAULT_RING_QUALITY * math.sqrt(
                tr.magnetizing_inductance / self.node_capacitance):
            data["transformer"].pop("core_loss_resistance", None)
        for path, value in values.items():
            section, _, name = path.rpartition(".")
            target = data.setdefault(section, {}) if section else data
            if section == "transformer" and name in ("coupling", "leakage_inductance"):
                target.pop("coupling", None)
                target.pop("leakage_inductance", None)
            if section == "transformer" and name == "core_loss_resistance" and value is None:
                target.pop(name, None)
                continue
            target[name] = value
        return design_from_dict(data, source=self.source)


def parse_load(value) -> Load:
    """Read a load; its unit decides whether it is a current, resistance or power.

    Parameters
    ----------
    value : str or Load
        E.g. ``"0.3 A"``, ``"40 ohm"``, ``"4 W"`` [A], [ohm] or [W]; a
        :class:`Load` is returned as it is.

    Returns
    -------
    Load

    Raises
    ------
    ValueError
        A bare number (the kind would be ambiguous), a negative value, a
        zero resistance or another unit; the message starts with "expected".
    """
    if isinstance(value, Load):
        return value
    bare = isinstance(value, (int, float)) and not isinstance(value, bool)
    if isinstance(value, str):
        try:
            float(value)
            bare = True
        except ValueError:
            pass
    if bare:
        raise ValueError("expected a load with its unit (give the unit: it decides the "
                         "kind): a current ('0.5 A'), a resistance ('24 ohm') or a power "
                         "('6 W')")
    for kind in LOAD_KINDS:
        try:
            number = parse_quantity(value, kind)
        except UnitError:
            continue
        if number < 0 or (kind == "resistance" and number == 0):
            raise ValueError("expected a non-negative load (a resistance must be positive)")
        if not _plausible(number, PLAUSIBLE[kind]):
            low, high = PLAUSIBLE[kind]
            unit = DIMENSIONS[kind].unit
            span = (f"from {_si(low, unit)} to {_si(high, unit)}" if kind == "resistance"
                    else f"up to {_si(high, unit)}")
            raise ValueError(f"expected a {kind} load {span} (the range the models are "
                             "built for)")
        return Load(kind, number)
    raise ValueError("expected a current ('0.5 A'), a resistance ('24 ohm') or a power "
                     "('6 W')")


def default_zener_tempco(zener_voltage):
    """Relative temperature coefficient of a zener diode from its voltage.

    Parameters
    ----------
    zener_voltage : float or array_like
        Zener voltage at 25 degC [V].

    Returns
    -------
    float or ndarray
        Relative tempco [1/K].

    Notes
    -----
    Piecewise-linear interpolation through about -0.09 %/K at 3.3 V, 0 near
    5.1 V, +0.05 %/K at 7.5 V and +0.1 %/K from 20 V up; the shape of the
    curves in small-signal zener datasheets  # common practice
    """
    voltage = np.asarray(zener_voltage, dtype=float)
    table_v = np.array([2.4, 3.3, 5.1, 7.5, 12.0, 20.0, 100.0])
    table_c = np.array([-0.0009, -0.0008, 0.0, 0.0005, 0.0008, 0.001, 0.0011])
    return np.interp(voltage, table_v, table_c)


# ------------------------------------------------------------------ loading
def load_design(path, overrides: Mapping[str, Any] | None = None) -> Design:
    """Read and validate a TOML design file.

    Parameters
    ----------
    path : str or Path
        The design file.
    overrides : mapping, optional
        ``{"section.key": value}`` applied before validation.

    Returns
    -------
    Design

    Raises
    ------
    DesignError
        With one line per problem (missing or unreadable file, TOML syntax,
        unknown or missing keys, wrong dimensions, out-of-range values).
    """
    path = Path(path)
    name = str(path)
    text = _read_design_text(path, name)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise DesignError([f"{name}: not valid TOML ({error})"]) from None
    except RecursionError:
        raise DesignError([f"{name}: not valid TOML for a design (arrays or tables nested "
                           "too deeply)"]) from None
    if overrides:
        for dotted, value in overrides.items():
            # nested tables by the dotted path ("tolerances.startup.resistance")
            *parents, key = dotted.split(".")
            target = data
            for part in parents:
                if not isinstance(target.get(part), dict):
                    target[part] = {}
                target = target[part]
            target[key] = value
    return design_from_dict(data, source=name)


#: Largest design file read [bytes]: a design is a few kilobytes; anything far
#: larger is the wrong file.
MAX_DESIGN_BYTES = 1_000_000


def _read_design_text(path: Path, name: str) -> str:
    """The text of a design file: a regular file below the size limit, UTF-8
    with or without a byte-order mark."""
    import stat

    try:
        info = path.stat()
    except FileNotFoundError:
        raise DesignError([f"{name}: file does not exist"]) from None
    except OSError as error:
        raise DesignError([f"{name}: cannot read the file ({error.strerror})"]) from None
    if stat.S_ISDIR(info.st_mode):
        raise DesignError([f"{name}: is a directory, expected a TOML design file"])
    if not stat.S_ISREG(info.st_mode):
        raise DesignError([f"{name}: is not a regular file (a device, pipe or socket); "
                           "expected a TOML design file"])
    if info.st_size > MAX_DESIGN_BYTES:
        raise DesignError([f"{name}: {info.st_size} bytes, larger than the "
                           f"{MAX_DESIGN_BYTES} bytes a design file may have"])
    try:
        with open(path, "rb") as handle:
            raw = handle.read(MAX_DESIGN_BYTES + 1)
    except OSError as error:
        raise DesignError([f"{name}: cannot read the file ({error.strerror})"]) from None
    if len(raw) > MAX_DESIGN_BYTES:
        raise DesignError([f"{name}: larger than the {MAX_DESIGN_BYTES} bytes a design "
                           "file may have"])
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark from some editors is fine
    except UnicodeDecodeError as error:
        raise DesignError([f"{name}: not UTF-8 text (byte {error.start}); expected a "
                           "TOML design file"]) from None
    if not text.strip():
        raise DesignError([f"{name}: the file is empty, expected a TOML design file"])
    return text


def design_from_dict(data: Mapping[str, Any], source: str = "<dict>") -> Design:
    """Validate a design given as a dictionary (same layout as the file).

    Parameters
    ----------
    data : mapping
        Top-level keys and one mapping per section.
    source : str
        Name used in messages (the file name when called by
        :func:`load_design`).

    Returns
    -------
    Design

    Raises
    ------
    DesignError
        With one line per problem.
    """
    return _Validator(data, source).run()


class _Validator:
    def __init__(self, data: Mapping[str, Any], source: str):
        self.data = data
        self.source = source
        self.problems: list[str] = []

    # -------------------------------------------------------------- report
    def problem(self, path: str, value: Any, expected: str) -> None:
        if value is _MISSING:
            self.problems.append(f"{self.source}: {path}: missing; expected {expected}")
        else:
            self.problems.append(f"{self.source}: {path} = {_shown(value)}: expected {expected}")

    # ---------------------------------------------------------------- run
    def run(self) -> Design:
        if not isinstance(self.data, Mapping):
            raise DesignError([f"{self.source}: expected a table of sections"])
        self.check_unknown()
        values: dict[str, dict[str, Any]] = {}
        for section in ("",) + SECTIONS:
            raw = self.data.get(section, {}) if section else self.data
            if not isinstance(raw, Mapping):
                self.problem(section, raw, "a table [" + section + "]")
                raw = {}
            values[section] = {
                key.name: self.read(key, raw) for key in keys_of(section).values()
            }
        self.check_groups(values)
        tolerances = read_tolerances(self.data.get(TOLERANCE_SECTION), values, self.source,
                                     self.problems)
        if self.problems:
            raise DesignError(self.problems)
        return replace(self.build(values), tolerances=tolerances)

    def check_unknown(self) -> None:
        known_top = set(keys_of("")) | set(SECTIONS) | {TOLERANCE_SECTION}
        for name, value in self.data.items():
            if name not in known_top:
                hint = _closest(name, known_top)
                if isinstance(value, Mapping):
                    self.problems.append(f"{self.source}: [{name}]: unknown section{hint}")
                else:
                    self.problems.append(
                        f"{self.source}: {name} = {_shown(value)}: unknown key{hint}")
            elif name in SECTIONS and isinstance(value, Mapping):
                known = keys_of(name)
                for key, given in value.items():
                    if key not in known:
                        hint = _closest(key, known)
                        self.problems.append(
                            f"{self.source}: {name}.{key} = {_shown(given)}: unknown key{hint}"
                        )

    def read(self, key: Key, raw: Mapping[str, Any]):
        value = raw.get(key.name, _MISSING)
        if value is _MISSING:
            if key.required:
                self.problem(key.path, _MISSING, _describe(key))
            return key.default
        if key.kind == "string":
            if not isinstance(value, str):
                self.problem(key.path, value, "a text string")
                return None
            return value
        if key.kind == "choice":
            if value not in key.choices:
                self.problem(key.path, value, "one of " + ", ".join(map(repr, key.choices)))
                return None
            return value
        if key.kind == "load":
            return self.read_load(key, value)
        try:
            number = parse_quantity(value, key.dimension)
        except UnitError as error:
            self.problem(key.path, value, str(error).removeprefix("expected "))
            return None
        if key.dimension == "temperature" and number <= 0:
            self.problem(key.path, value, "a temperature above absolute zero "
                         "(plain numbers are kelvin; write e.g. '-10 degC')")
            return None
        if not _satisfies(number, key.constraint):
            self.problem(key.path, value, _constraint_phrase(key))
            return None
        if not _plausible(number, key.plausible):
            self.problem(key.path, value, _range_phrase(key))
            return None
        return number

    def read_load(self, key: Key, value) -> Load | None:
        try:
            return parse_load(value)
        except ValueError as error:
            self.problem(key.path, value, str(error).removeprefix("expected "))
            return None

    def check_groups(self, values: dict[str, dict[str, Any]]) -> None:
        raw_input = self.data.get("input", {}) if isinstance(self.data.get("input", {}), Mapping) else {}
        ac_keys = ("ac_min", "ac_nominal", "ac_max", "bulk_capacitance")
        dc_keys = ("dc_min", "dc_nominal", "dc_max")
        has_ac = any(k in raw_input for k in ac_keys)
        has_dc = any(k in raw_input for k in dc_keys)
        if has_ac and has_dc:
            self.problems.append(
                f"{self.source}: input: give either ac_min/ac_nominal/ac_max/"
                "bulk_capacitance (AC input) or dc_min/dc_nominal/dc_max (DC input), not both"
            )
        elif not has_ac and not has_dc:
            self.problem("input.ac_min", _MISSING, "the AC keys ac_min, ac_nominal, "
                         "ac_max, bulk_capacitance or the DC keys dc_min, dc_nominal, dc_max")
        else:
            group = ac_keys if has_ac else dc_keys
            for name in group:
                if name not in raw_input:
                    self.problem(f"input.{name}", _MISSING, _describe(keys_of("input")[name]))
            triple = group[:3]
            self._check_order(values["input"], "input", triple)
            low, drop = values["input"].get("ac_min"), values["input"].get("bridge_drop")
            if has_ac and low is not None and drop is not None and \
                    math.sqrt(2.0) * low <= drop:
                self.problems.append(
                    f"{self.source}: input.ac_min = {low:g}: its peak {math.sqrt(2) * low:.3g} V "
                    f"does not exceed input.bridge_drop = {drop:g} V: no bus voltage; "
                    "expected a higher line voltage (RMS) or a smaller bridge drop")
        self._check_order(values["switch"], "switch", ("hfe_min", "hfe_typ", "hfe_max"))
        self._check_order(values["environment"], "environment",
                          ("temperature_min", "temperature_max"))
        self._check_load_order(values["output"])
        self._check_temperature_laws(values)
        if values["switch"]["type"] == "nmos":
            self.problem("switch.type", "nmos", "'npn': MOSFET switches are not "
                         "modelled in this version")

        raw_tr = self.data.get("transformer", {})
        if isinstance(raw_tr, Mapping):
            if "coupling" in raw_tr and "leakage_inductance" in raw_tr:
                self.problems.append(f"{self.source}: transformer: give coupling or "
                                     "leakage_inductance, not both")
            elif "coupling" not in raw_tr and "leakage_inductance" not in raw_tr:
                self.problem("transformer.coupling", _MISSING,
                             "a coupling in (0, 1] or a transformer.leakage_inductance")

        regulation = values["regulation"]
        method = regulation["method"]
        needed = {
            "feedback-winding": ("zener_voltage", "series_resistance", "filter_capacitance"),
            "optocoupler": ("reference_voltage", "ctr", "series_resistance"),
            "none": (),
        }.get(method, ())
        raw_reg = self.data.get("regulation", {})
        for name in needed:
            if not isinstance(raw_reg, Mapping) or name not in raw_reg:
                self.problem(f"regulation.{name}", _MISSING,
                             f"{_describe(keys_of('regulation')[name])} "
                             f"(needed by method {method!r})")
        clamp = values["clamp"]
        raw_clamp = self.data.get("clamp", {})
        clamp_needed = {"zener": ("voltage",), "rcd": ("resistance", "capacitance")}.get(
            clamp["type"], ())
        for name in clamp_needed:
            if not isinstance(raw_clamp, Mapping) or name not in raw_clamp:
                self.problem(f"clamp.{name}", _MISSING,
                             f"{_describe(keys_of('clamp')[name])} (needed by "
                             f"clamp type {clamp['type']!r})")

    def _check_order(self, section_values, section, names) -> None:
        numbers = [section_values.get(n) for n in names]
        if any(v is None for v in numbers):
            return
        for low, high, low_name, high_name in zip(numbers, numbers[1:], names, names[1:]):
            if low > high:
                self.problems.append(
                    f"{self.source}: {section}.{low_name} = {low:g} is above "
                    f"{section}.{high_name} = {high:g}: expected "
                    f"{' <= '.join(names)} (SI units)"
                )

    def _check_load_order(self, output) -> None:
        """load_min no heavier than load_nominal no heavier than load_max, compared
        as currents at the target output (or directly when all have one kind)."""
        names = ("load_min", "load_nominal", "load_max")
        loads = [output.get(name) for name in names]
        if any(load is None for load in loads):
            return
        kinds = {load.kind for load in loads}
        target = output.get("voltage_target")
        if len(kinds) == 1:
            heaviness = [(1.0 / load.value if load.kind == "resistance" else load.value)
                         for load in loads]
        elif target:
            heaviness = [float(load.current(target)) for load in loads]
        else:
            return
        for (a, b), (name_a, name_b) in zip(zip(heaviness, heaviness[1:]),
                                            zip(names, names[1:])):
            if a > b * (1 + 1e-12):
                low, high = loads[names.index(name_a)], loads[names.index(name_b)]
                self.problems.append(
                    f"{self.source}: output.{name_a} = {low.text()!r} is a heavier load than "
                    f"output.{name_b} = {high.text()!r}: expected load_min <= load_nominal "
                    "<= load_max (a heavier load draws more current: a higher current or "
                    "power, a lower resistance)")

    def _check_temperature_laws(self, values) -> None:
        """The linear temperature laws must keep hFE and Vbe positive over the range."""
        env = values["environment"]
        if env.get("temperature_min") is None or env.get("temperature_max") is None:
            return
        for section, vbe_key in (("switch", "vbe"), ("limiter", "vbe")):
            vbe, tempco = values[section].get(vbe_key), values[section].get("vbe_tempco")
            if vbe is None or tempco is None:
                continue
            for name in ("temperature_min", "temperature_max"):
                at = vbe + tempco * (env[name] - 298.15)
                if at <= 0.05:
                    self.problems.append(
                        f"{self.source}: {section}.vbe_tempco = {tempco:g}: the "
                        f"base-emitter voltage would fall to {at:.3g} V at "
                        f"environment.{name} = {env[name] - 273.15:g} degC; expected a "
                        "tempco that keeps it above 50 mV (about -2 mV/K is usual)")
                    break
        switch = values["switch"]
        hfe, tempco = switch.get("hfe_min"), switch.get("hfe_tempco")
        if hfe is not None and tempco is not None:
            for name in ("temperature_min", "temperature_max"):
                factor = 1.0 + tempco * (env[name] - 298.15)
                if factor <= 0.05:
                    self.problems.append(
                        f"{self.source}: switch.hfe_tempco = {tempco:g}: the current gain "
                        f"would fall to {factor:.3g} times its 25 degC value at "
                        f"environment.{name} = {env[name] - 273.15:g} degC; expected a "
                        "tempco that keeps it positive (about +0.5 %/K is usual)")
                    break

    # -------------------------------------------------------------- build
    def build(self, values: dict[str, dict[str, Any]]) -> Design:
        tr = dict(values["transformer"])
        magnetizing = tr["magnetizing_inductance"]
        if tr.get("coupling") is not None:
            k = tr["coupling"]
            tr["leakage_inductance"] = magnetizing * (1.0 - k * k) / (k * k)
        switch = SwitchSpec(**values["switch"])
        node_capacitance = tr["winding_capacitance"] + switch.output_capacitance
        if tr.get("core_loss_resistance") is None:
            tr["core_loss_resistance"] = DEFAULT_RING_QUALITY * math.sqrt(
                magnetizing / node_capacitance)
        regulation = dict(values["regulation"])
        if regulation["method"] == "feedback-winding" and regulation["zener_tempco"] is None:
            regulation["zener_tempco"] = float(default_zener_tempco(regulation["zener_voltage"]))
        return Design(
            title=values[""]["title"],
            description=values[""]["description"],
            input=InputSpec(**values["input"]),
            switch=switch,
            transformer=TransformerSpec(**tr),
            startup=StartupSpec(**values["startup"]),
            drive=DriveSpec(**values["drive"]),
            limiter=LimiterSpec(**values["limiter"]),
            regulation=RegulationSpec(**regulation),
            output=OutputSpec(**values["output"]),
            clamp=ClampSpec(**values["clamp"]),
            environment=EnvironmentSpec(**values["environment"]),
            limits=LimitsSpec(**values["limits"]),
            source=self.source,
        )


_MISSING = object()

#: Longest value repeated verbatim in a message [characters].
_SHOWN_LENGTH = 40


def _shown(value) -> str:
    """The value as given, shortened when it is too long to read in one line."""
    text = repr(value)
    if len(text) <= _SHOWN_LENGTH:
        return text
    return f"{text[:_SHOWN_LENGTH - 12]}... ({len(text)} characters)"

_CONSTRAINT_TEXT = {
    "positive": "a positive",
    "nonnegative": "a non-negative",
    "unit-interval": "a value in (0, 1] of",
    "fraction": "a value in (0, 1) of",
    "any": "a",
}


def _satisfies(number: float, constraint: str) -> bool:
    if constraint == "positive":
        return number > 0
    if constraint == "nonnegative":
        return number >= 0
    if constraint == "unit-interval":
        return 0 < number <= 1
    if constraint == "fraction":
        return 0 < number < 1
    return True


def _plausible(number: float, bounds) -> bool:
    """Whether a non-zero magnitude lies in ``bounds`` (zero is the constraint's business)."""
    if bounds is None or number == 0:
        return True
    low, high = bounds
    return low <= abs(number) <= high


def _range_phrase(key: Key) -> str:
    """'an inductance from 100 pH to 100 H (the range the models are built for)'."""
    from rcc.units import format_quantity

    low, high = key.plausible
    if low == 0:
        span = f"of magnitude up to {format_quantity(high, key.dimension)}"
    else:
        span = (f"from {format_quantity(low, key.dimension)} to "
                f"{format_quantity(high, key.dimension)}")
    what = "a number" if key.dimension == "dimensionless" else \
        f"{_article(DIMENSIONS[key.dimension].name)} {DIMENSIONS[key.dimension].name}"
    return f"{what} {span} (the range the models are built for)"


def _article(word: str) -> str:
    return "an" if word[:1] in "aeiou" else "a"


def _constraint_phrase(key: Key) -> str:
    dimension = DIMENSIONS[key.dimension]
    if key.dimension == "dimensionless":
        text = {"positive": "a positive number", "nonnegative": "a non-negative number",
                "unit-interval": "a number in (0, 1]", "fraction": "a number in (0, 1)",
                "any": "a number"}[key.constraint]
    else:
        text = f"{_CONSTRAINT_TEXT[key.constraint]} {dimension.name}"
    return text + (f" [{dimension.unit}]" if dimension.unit else "")


def _describe(key: Key) -> str:
    if key.kind == "quantity":
        return f"{_constraint_phrase(key)}: {key.description}"
    if key.kind == "choice":
        return "one of " + ", ".join(map(repr, key.choices))
    if key.kind == "load":
        return "a load: a current [A], a resistance [ohm] or a power [W]"
    return "a text string"


def _closest(name: str, candidates) -> str:
    """Suggestion for a misspelt key: difflib's close matches, ties broken by
    the optimal-string-alignment (Damerau-Levenshtein) distance so that a
    pair of swapped letters points at the intended key."""
    matches = difflib.get_close_matches(name, list(candidates), n=5, cutoff=0.6)
    if not matches:
        return ""
    best = min(matches, key=lambda candidate: _alignment_distance(name, candidate))
    return f" (did you mean {best!r}?)"


def _alignment_distance(a: str, b: str) -> int:
    """Optimal string alignment distance (Damerau 1964; edits, swaps count 1)."""
    rows = [[0] * (len(b) + 1) for _ in range(len(a) + 1)]
    for i in range(len(a) + 1):
        rows[i][0] = i
    for j in range(len(b) + 1):
        rows[0][j] = j
    for i in range(1, len(a) + 1):
        for j in range(1, len(b) + 1):
            cost = 0 if a[i - 1] == b[j - 1] else 1
            rows[i][j] = min(rows[i - 1][j] + 1, rows[i][j - 1] + 1, rows[i - 1][j - 1] + cost)
            if i > 1 and j > 1 and a[i - 1] == b[j - 2] and a[i - 2] == b[j - 1]:
                rows[i][j] = min(rows[i][j], rows[i - 2][j - 2] + 1)
    return rows[len(a)][len(b)]
