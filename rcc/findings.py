"""Findings: what a check concluded, in a form both people and programs read.

Every check in the package (stress checks, start-up analysis, cycle
verification) reports :class:`Finding` objects; :func:`verdict` folds them
into ``pass`` / ``warn`` / ``fail``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["Finding", "SEVERITIES", "BOUNDS", "NOT_STARTING", "verdict", "sorted_findings",
           "ordered_findings"]

#: Severities from worst to mildest.
SEVERITIES = ("fail", "warn", "info")
#: How a value is judged against its limit (see :class:`Finding`).
BOUNDS = ("upper", "lower", "")
#: Codes that mean the supply cannot oscillate at all: the cause, listed first;
#: every finding about a running supply then only holds if it ran.
NOT_STARTING = ("feedback-phase", "dc-stall", "no-start")


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
    bound : str
        How ``value`` is judged against ``limit``: ``"upper"`` (the value must
        stay at or below the limit: a voltage, a flux), ``"lower"`` (at or above:
        a drive margin, an output that must reach its target) or ``""`` (the
        limit is a reference, not a bound: no margin).
    scope : str
        ``""``, or ``"if-running"`` for a finding that holds only for a running
        supply when the report also says it cannot start.
    """

    code: str
    severity: str
    message: str
    value: float | None = None
    limit: float | None = None
    unit: str = ""
    advice: str = ""
    bound: str = "upper"
    scope: str = ""

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")
        if self.bound not in BOUNDS:
            raise ValueError(f"bound must be one of {BOUNDS}, got {self.bound!r}")
        for name in ("value", "limit"):
            number = getattr(self, name)
            if number is not None and not math.isfinite(number):
                raise ValueError(f"finding {self.code}: {name} must be finite, got {number}")

    @property
    def margin(self) -> float | None:
        """Relative margin to the limit [1]: ``(limit - value) / |limit|`` for an
        upper bound, ``(value - limit) / |limit|`` for a lower bound; negative
        when the value is on the wrong side.  ``None`` without a value, a
        non-zero limit or a bound."""
        if self.value is None or self.limit is None or self.limit == 0 or not self.bound:
            return None
        excess = self.limit - self.value if self.bound == "upper" else self.value - self.limit
        return excess / abs(self.limit)

    def to_json(self) -> dict:
        return {**asdict(self), "margin": self.margin}


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


def ordered_findings(findings, start_codes=NOT_STARTING) -> tuple[Finding, ...]:
    """Findings in the order to read them: when the supply cannot start, the
    cause first and the rest marked ``scope="if-running"``; then worst first.

    Parameters
    ----------
    findings : iterable of Finding
        The findings of every analysis [-].
    start_codes : sequence of str
        Codes that mean the supply cannot oscillate (:data:`NOT_STARTING`) [-].

    Returns
    -------
    tuple of Finding
        Failing start-up causes first, then by severity (stable within one);
        when a start-up cause fails, every other finding carries
        ``scope="if-running"`` and follows the others of its severity.
    """
    from dataclasses import replace

    findings = list(findings)
    stalled = any(f.code in start_codes and f.severity == "fail" for f in findings)
    if stalled:
        findings = [f if f.code in start_codes or f.scope else replace(f, scope="if-running")
                    for f in findings]

    def rank(finding):
        cause = finding.code in start_codes and finding.severity == "fail"
        return (0 if cause else 1, SEVERITIES.index(finding.severity),
                1 if finding.scope else 0)

    return tuple(sorted(findings, key=rank))
