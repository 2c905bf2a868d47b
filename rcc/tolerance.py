"""Part tolerances: the ``[tolerances]`` section of a design file and sampling from it.

A tolerance says how far a built unit's part value may lie from the design value:

.. code-block:: toml

    [tolerances]
    transformer.magnetizing_inductance = "10%"        # relative, uniform
    limiter.vbe = { tolerance = "0.05 V", distribution = "normal" }
    startup.resistance = { tolerance = "5%", drift = "+10%" }   # ageing drift
    switch.storage_time = { min = "0.8 us", max = "2 us" }     # explicit bounds

Every entry becomes a :class:`Tolerance`: the band ``[low, high]`` a unit's
value lies in (drift shifts the whole band) and the distribution inside it.
The switch current gain always spreads from ``hfe_min`` to ``hfe_max`` (the
datasheet's tested range), log-normally: see :data:`HFE_KEY`.

Line voltage, load, temperature and the acceptance limits take no tolerance:
they are operating conditions, and the check already covers their whole
ranges for every unit (a unit passes only if it passes at every line, load and
temperature of its specification).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from rcc.schema import (SECTIONS, TOLERANCE_EXCLUDED_SECTIONS, TOLERANCE_FIELDS,
                        TOLERANCE_SECTION, keys_of)
from rcc.units import DIMENSIONS, UnitError, parse_quantity

__all__ = ["Tolerance", "Tolerances", "DISTRIBUTIONS", "HFE_KEY", "TRUNCATION_SIGMA",
           "read_tolerances", "hfe_tolerance", "sample_uniforms", "design_values"]

#: Distributions a tolerance may name.
DISTRIBUTIONS = ("uniform", "normal")
#: The spread of the switch current gain, applied as ``hfe_min = hfe_typ = hfe_max``.
HFE_KEY = "switch.hfe"
#: Normal (and log-normal) distributions are truncated at this many standard
#: deviations: the tolerance is the 3-sigma half-width and parts outside it are
#: rejected by the maker's test  # common practice
TRUNCATION_SIGMA = 3.0

_PERCENT = re.compile(r"^\s*(?:±|\+/-)?\s*([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)\s*%\s*$")


@dataclass(frozen=True)
class Tolerance:
    """The spread of one design value.

    Attributes
    ----------
    key : str
        ``"section.key"`` of the design value (``"switch.hfe"`` for the gain).
    nominal : float
        Design value [SI].
    low, high : float
        Band a unit's value lies in, drift included [SI].
    distribution : str
        ``"uniform"``, ``"normal"`` (truncated at 3 sigma = the band edges) or
        ``"lognormal"`` (the gain; truncated likewise in the logarithm).
    unit : str
        SI unit of the values (``""`` if dimensionless).
    text : object
        The entry as written in the file (for :meth:`Tolerances.to_dict`).
    """

    key: str
    nominal: float
    low: float
    high: float
    distribution: str
    unit: str
    text: Any = None

    @property
    def centre(self) -> float:
        """Centre of the band: arithmetic, geometric for ``lognormal`` [SI]."""
        if self.distribution == "lognormal":
            return math.sqrt(self.low * self.high)
        return 0.5 * (self.low + self.high)

    @property
    def standard_deviation(self) -> float:
        """Standard deviation of the value [SI].

        Uniform: width / sqrt(12); normal: width / 6 (the truncation at 3 sigma
        changes it by 1.4 %, neglected); log-normal: centre * ln(high/low) / 6
        (first order)."""
        width = self.high - self.low
        if self.distribution == "uniform":
            return width / math.sqrt(12.0)
        if self.distribution == "normal":
            return width / (2 * TRUNCATION_SIGMA)
        return self.centre * math.log(self.high / self.low) / (2 * TRUNCATION_SIGMA)

    def from_uniform(self, uniform):
        """Values from uniform variates by the inverse distribution function.

        Parameters
        ----------
        uniform : array_like
            Variates in [0, 1) [1].

        Returns
        -------
        ndarray
            Values in ``[low, high]`` [SI].
        """
        uniform = np.asarray(uniform, dtype=float)
        if self.distribution == "uniform":
            return self.low + uniform * (self.high - self.low)
        from scipy.special import ndtr, ndtri

        edge = float(ndtr(-TRUNCATION_SIGMA))
        z = ndtri(edge + uniform * (1.0 - 2.0 * edge))
        unit_offset = z / TRUNCATION_SIGMA          # in [-1, 1]
        if self.distribution == "normal":
            return self.centre + unit_offset * 0.5 * (self.high - self.low)
        half_log = 0.5 * math.log(self.high / self.low)
        return self.centre * np.exp(unit_offset * half_log)


@dataclass(frozen=True)
class Tolerances:
    """All tolerances of a design, in file order.

    Attributes
    ----------
    entries : tuple of Tolerance
        One per ``[tolerances]`` entry (the gain is added by :func:`hfe_tolerance`).
    """

    entries: tuple[Tolerance, ...] = ()

    def __bool__(self) -> bool:
        return bool(self.entries)

    def to_dict(self) -> dict:
        """The section as written, nested by section (for ``Design.to_dict``)."""
        result: dict[str, dict] = {}
        for entry in self.entries:
            section, _, name = entry.key.partition(".")
            result.setdefault(section, {})[name] = entry.text
        return result


def hfe_tolerance(design) -> Tolerance | None:
    """The current-gain spread of a design's switch.

    Parameters
    ----------
    design : rcc.design.Design
        The design.

    Returns
    -------
    Tolerance or None
        Log-normal between ``hfe_min`` and ``hfe_max`` (3 sigma at each end,
        truncated there), ``None`` when they are equal.

    Notes
    -----
    Current gain is set by base width, doping and minority-carrier lifetime,
    which vary multiplicatively across a wafer and between lots, so its spread
    is skewed and its logarithm close to normal; the datasheet's minimum and
    maximum are test limits, so no shipped part lies outside them
    # common practice.  ``hfe_typ`` is not used: the geometric mean of the
    limits is the median.
    """
    switch = design.switch
    if switch.hfe_max <= switch.hfe_min:
        return None
    return Tolerance(HFE_KEY, switch.hfe_typ, switch.hfe_min, switch.hfe_max,
                     "lognormal", "", "hfe_min..hfe_max")


def design_values(tolerance: Tolerance, value: float) -> dict[str, float]:
    """The design keys one sampled value sets.

    Parameters
    ----------
    tolerance : Tolerance
        Which value [-].
    value : float
        The sampled value [SI].

    Returns
    -------
    dict
        ``{"section.key": value}``; the gain sets ``hfe_min``, ``hfe_typ`` and
        ``hfe_max`` of the unit to its one value.
    """
    if tolerance.key == HFE_KEY:
        return {"switch.hfe_min": value, "switch.hfe_typ": value, "switch.hfe_max": value}
    return {tolerance.key: value}


def sample_uniforms(count: int, dimensions: int, seed: int) -> np.ndarray:
    """Independent uniform variates, reproducible by seed.

    Parameters
    ----------
    count : int
        Number of samples [-].
    dimensions : int
        Variates per sample [-].
    seed : int
        Seed of numpy's PCG64 generator [-].

    Returns
    -------
    ndarray, shape (count, dimensions)
        Variates in [0, 1) [1].
    """
    return np.random.default_rng(seed).random((count, dimensions))


# ------------------------------------------------------------------ reading
def read_tolerances(raw: Any, values: Mapping[str, Mapping[str, Any]], source: str,
                    problems: list[str]) -> Tolerances:
    """Validate the ``[tolerances]`` section.

    Parameters
    ----------
    raw : object
        The section as read from TOML (nested tables; quoted dotted keys are
        accepted too) [-].
    values : mapping
        The design's validated values by section and key [SI].
    source : str
        File name for messages [-].
    problems : list of str
        Problems are appended here, one line each, in the design file's style:
        ``file: tolerances.section.key = value: expected ...`` [-].

    Returns
    -------
    Tolerances
        The valid entries.
    """
    if raw is None:
        return Tolerances()
    if not isinstance(raw, Mapping):
        problems.append(f"{source}: {TOLERANCE_SECTION} = {raw!r}: expected a table "
                        "[tolerances] of section.key = tolerance entries")
        return Tolerances()
    entries = []
    for dotted, given in _flatten(raw):
        path = f"{TOLERANCE_SECTION}.{dotted}"
        entry = _read_entry(dotted, given, values, path)
        if isinstance(entry, str):
            problems.append(f"{source}: {path} = {given!r}: expected {entry}")
        else:
            entries.append(entry)
    return Tolerances(tuple(entries))


def _flatten(raw: Mapping, prefix: str = ""):
    for name, value in raw.items():
        dotted = f"{prefix}{name}"
        section = dotted.partition(".")[0]
        if (isinstance(value, Mapping) and "." not in dotted and section in SECTIONS
                and not set(value) & set(TOLERANCE_FIELDS)):
            yield from _flatten(value, dotted + ".")
        else:
            yield dotted, value


def _read_entry(dotted: str, given: Any, values, path: str) -> Tolerance | str:
    section, _, name = dotted.partition(".")
    if section == "switch" and name in ("hfe_min", "hfe_typ", "hfe_max", "hfe"):
        return ("no tolerance here: the current gain spreads from switch.hfe_min to "
                "switch.hfe_max (log-normal); change those keys instead")
    if section not in SECTIONS or name not in keys_of(section):
        from rcc.design import _closest

        known = [f"{s}.{k}" for s in SECTIONS for k in keys_of(s)]
        return ("a section.key of the design, such as transformer.magnetizing_inductance"
                + _closest(dotted, known))
    if section in TOLERANCE_EXCLUDED_SECTIONS:
        return (f"no tolerance on [{section}]: line, temperature and limits are ranges "
                "the check covers for every unit")
    key = keys_of(section)[name]
    if key.kind != "quantity":
        return "a tolerance on a numeric part value (loads and choices take none)"
    nominal = values.get(section, {}).get(name)
    if nominal is None:
        return f"a value of {section}.{name} in the design to apply the tolerance to"
    unit = DIMENSIONS[key.dimension].unit
    fields = dict(given) if isinstance(given, Mapping) else {"tolerance": given}
    unknown = set(fields) - set(TOLERANCE_FIELDS)
    if unknown:
        return ("a tolerance string or a table of " + ", ".join(TOLERANCE_FIELDS)
                + f" (unknown field {sorted(unknown)[0]!r})")
    distribution = fields.get("distribution", "uniform")
    if distribution not in DISTRIBUTIONS:
        return "distribution one of " + ", ".join(map(repr, DISTRIBUTIONS))
    has_bounds = "min" in fields or "max" in fields
    if has_bounds == ("tolerance" in fields):
        return "either tolerance = '10%' (or an absolute value) or both min and max"
    try:
        if has_bounds:
            if "min" not in fields or "max" not in fields:
                return "both min and max"
            low = parse_quantity(fields["min"], key.dimension)
            high = parse_quantity(fields["max"], key.dimension)
            if not low < high:
                return "min below max"
        else:
            half = _amount(fields["tolerance"], nominal, key.dimension)
            if half is None or half <= 0:
                return (f"a positive tolerance: relative ('10%', below 100 %) or absolute "
                        f"in {unit or 'the key unit'}")
            if _is_percent(fields["tolerance"]) and half >= abs(nominal):
                return "a relative tolerance below 100 %"
            low, high = nominal - half, nominal + half
        drift = _amount(fields.get("drift", 0.0), nominal, key.dimension)
        if drift is None:
            return f"drift relative ('+2%') or absolute in {unit or 'the key unit'}"
    except UnitError as error:
        return str(error).removeprefix("expected ")
    low, high = low + drift, high + drift
    from rcc.design import _constraint_phrase, _satisfies

    if not (_satisfies(low, key.constraint) and _satisfies(high, key.constraint)):
        return (f"a band inside the key's range ({_constraint_phrase(key)}); it spans "
                f"{low:.6g} to {high:.6g} {unit}".rstrip())
    return Tolerance(dotted, nominal, low, high, distribution, unit, given)


def _is_percent(text) -> bool:
    return isinstance(text, str) and _PERCENT.match(text) is not None


def _amount(text, nominal: float, dimension: str) -> float | None:
    """A relative ('10%', of |nominal|) or absolute amount in SI units."""
    if isinstance(text, str):
        match = _PERCENT.match(text)
        if match:
            return float(match.group(1)) / 100.0 * abs(nominal)
    if isinstance(text, bool):
        return None
    return parse_quantity(text, dimension)
