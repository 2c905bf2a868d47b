"""Preferred numbers for resistors, capacitors and zener diodes: the E-series of
IEC 60063.

IEC 60063:2015, "Preferred number series for resistors and capacitors", lists
per decade 6 (E6), 12 (E12), 24 (E24), 48 (E48), 96 (E96) and 192 (E192)
values.  E6 to E24 have two significant figures and depart in places from the
geometric sequence ``10**(i/n)`` (e.g. 2.7, 3.0, 3.3, ... 4.7 instead of
2.6, 2.9, 3.2, ... 4.6), so they are tabulated; E48 and E96 have three
significant figures and follow the rounded sequence exactly; E192 too except
that 9.20 replaces 9.19  # from memory
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["SERIES", "series_mantissas", "preferred_values", "nearest_preferred"]

#: E24 mantissas as tabulated in IEC 60063.
_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
        3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)

#: Series names.
SERIES = ("E6", "E12", "E24", "E48", "E96", "E192")


def series_mantissas(series: str) -> tuple[float, ...]:
    """The values of one decade, 1 <= m < 10.

    Parameters
    ----------
    series : str
        One of :data:`SERIES` [-].

    Returns
    -------
    tuple of float
        Mantissas in increasing order [1].

    Raises
    ------
    ValueError
        For an unknown series name (the message lists the valid ones).
    """
    if series not in SERIES:
        raise ValueError(f"unknown E-series {series!r}; expected one of {', '.join(SERIES)}")
    count = int(series[1:])
    if count <= 24:
        return _E24[:: 24 // count]
    values = [round(10 ** (i / count), 2) for i in range(count)]
    if count == 192:
        values[values.index(9.19)] = 9.20
    return tuple(values)


def preferred_values(series: str, low: float, high: float) -> np.ndarray:
    """Every value of a series within ``[low, high]``.

    Parameters
    ----------
    series : str
        One of :data:`SERIES` [-].
    low, high : float
        Positive bounds [any unit].

    Returns
    -------
    ndarray
        Increasing values [same unit].
    """
    if not 0 < low <= high:
        raise ValueError(f"expected 0 < low <= high, got {low}, {high}")
    mantissas = np.array(series_mantissas(series))
    values = []
    for decade in range(math.floor(math.log10(low)) - 1, math.ceil(math.log10(high)) + 1):
        values.extend(np.round(mantissas * 10.0**decade, 12 - decade))
    values = np.array(sorted(set(values)))
    # compare with a relative slack so values equal to the bounds count
    keep = (values >= low * (1 - 1e-12)) & (values <= high * (1 + 1e-12))
    return values[keep]


def nearest_preferred(value: float, series: str) -> float:
    """The series value nearest to ``value`` on a logarithmic scale.

    Parameters
    ----------
    value : float
        Positive value [any unit].
    series : str
        One of :data:`SERIES` [-].

    Returns
    -------
    float
        The preferred value [same unit].
    """
    candidates = preferred_values(series, value / 10, value * 10)
    return float(candidates[np.argmin(np.abs(np.log(candidates / value)))])
