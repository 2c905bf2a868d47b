"""Findings: what a check concluded, in a form both people and programs read.

Every check in the package (stress checks, start-up analysis, cycle
verification) reports :class:`Finding` objects; :func:`verdict` folds them
into ``pass`` / ``warn`` / ``fail``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["Finding", "SEVERITIES", "verdict", "sorted_findings"]

#: Severities from worst to mildest.
SEVERITIES = ("fail", "warn", "info")


@dataclass(frozen=True)
class Finding:
    """One conclusion of a check.

    Attributes
    ----------
    code : str
        Stable identifier, e.g. ``"switch-overvoltage"``.
    severity : str
        ``"fail"``, ``"warn"`` or ``"info"``.
    message : str
        What was computed and what it means, in plain words.
    value : float or None
        The computed quantity, in SI units given by ``unit``.
    limit : float or None
        The limit it is compared with, same unit.
    unit : str
        SI unit symbol of ``value`` and ``limit`` (``""`` if dimensionless).
    advice : str
        What to change.
    """

    code: str
    severity: str
    message: str
    value: float | None = None
    limit: float | None = None
    unit: str = ""
    advice: str = ""

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")
        for name in ("value", "limit"):
            number = getattr(self, name)
            if number is not None and not math.isfinite(number):
                raise ValueError(f"finding {self.code}: {name} must be finite, got {number}")

    @property
    def margin(self) -> float | None:
        """Relative margin ``(limit - value) / limit`` [1]; negative when
        the value is beyond the limit (for upper limits)."""
        if self.value is None or self.limit is None or self.limit == 0:
            return None
        return (self.limit - self.value) / abs(self.limit)

    def to_json(self) -> dict:
        return asdict(self)


def verdict(findings) -> str:
    """Fold findings into one verdict.

    Parameters
    ----------
    findings : iterable of Finding
        The findings (severity only is used) [-].

    Returns
    -------
    str
        ``"fail"`` if any finding fails, else ``"warn"`` if any warns, else
        ``"pass"``.
    """
    severities = {finding.severity for finding in findings}
    if "fail" in severities:
        return "fail"
    if "warn" in severities:
        return "warn"
    return "pass"


def sorted_findings(findings) -> tuple[Finding, ...]:
    """Findings worst first (fail, warn, info), stable within a severity.

    Parameters
    ----------
    findings : iterable of Finding
        The findings [-].

    Returns
    -------
    tuple of Finding
        Sorted by severity.
    """
    return tuple(sorted(findings, key=lambda finding: SEVERITIES.index(finding.severity)))
