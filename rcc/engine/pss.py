"""Periodic steady state of the free-running oscillator: Newton's method on
the Poincaré map at the turn-on event, Floquet multipliers, and a long
transient as fall-back.

Two levels:

- :func:`find_periodic_orbit` works on any cycle map ``x0 -> CycleData``
  (:mod:`rcc.engine.floquet`): the reduced piecewise-affine oscillators of
  the tests, or the circuit engine.
- :func:`periodic_steady_state` builds the circuit of a design with the
  time-domain engine, warms up with a transient from power-on and returns a
  :class:`PeriodicSteadyState` with the cycle's figures and its waveform.

Notes
-----
The oscillator is autonomous, so its period is unknown.  Taking the
Poincaré section at the turn-on event removes both the unknown period and
the phase: the return map ``P`` takes the state at one turn-on to the state
at the next, and a periodic steady state is a fixed point ``P(x*) = x*``.
Newton's method solves ``(DP - I) dx = -(P(x) - x)``, with ``DP`` built
from the segment exponentials and the saltation matrices at the switching
events (shooting method of Aprille & Trick 1972, with the period made
implicit by the section as in Parker & Chua 1989, sec. 3.3; saltation
matrices: di Bernardo et al. 2008, ch. 2).  The non-trivial Floquet
multipliers are the eigenvalues of ``DP`` on the section's tangent space;
the cycle is asymptotically stable when all lie inside the unit circle.

References
----------
.. [1] T. J. Aprille, T. N. Trick, "Steady-state analysis of nonlinear
   circuits with periodic inputs", Proc. IEEE 60(1), 1972, pp. 108-114.
.. [2] T. S. Parker, L. O. Chua, *Practical Numerical Algorithms for
   Chaotic Systems*, Springer, 1989, sec. 3.3.
.. [3] M. di Bernardo, C. J. Budd, A. R. Champneys, P. Kowalczyk,
   *Piecewise-smooth Dynamical Systems*, Springer, 2008.
.. [4] A. El Aroudi, D. Giaouris, H. H.-C. Iu, I. A. Hiskens, IEEE JETCAS
   5(3), 2015, pp. 302-315.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Callable

import numpy as np

from rcc.engine.floquet import (
    CycleData,
    CycleError,
    MultiplierReport,
    classify_multipliers,
    poincare_jacobian,
    section_multipliers,
)

__all__ = [
    "FallbackWarning",
    "PeriodicOrbit",
    "PeriodicSteadyStateError",
    "find_periodic_orbit",
]


class FallbackWarning(UserWarning):
    """Newton's method did not converge and the long transient was used."""


class PeriodicSteadyStateError(RuntimeError):
    """No periodic steady state found (the cycle map fails, or neither
    Newton's method nor the long transient settles)."""


@dataclass(frozen=True)
class PeriodicOrbit:
    """A periodic orbit of a cycle map, with its stability.

    Attributes
    ----------
    state : ndarray, shape (n,)
        State at the section (turn-on) event on the orbit [state units].
    period : float
        Period [s].
    cycle : CycleData
        The cycle from ``state`` (segments and events).
    jacobian : ndarray, shape (n, n)
        Poincaré-map Jacobian at ``state`` [1].
    multipliers : ndarray of complex
        Non-trivial Floquet multipliers, by decreasing modulus [1].
    report : MultiplierReport
        Stability and bifurcation flags.
    iterations : int
        Newton iterations (Jacobian solves) or, for the fall-back, cycles
        simulated [1].
    method : str
        ``"newton"`` or ``"transient-fallback"``.
    residual : float
        Scaled ``max |P(x) - x| / scale`` at the returned state [1].
    converged : bool
        ``residual`` below the tolerance.
    residual_history : tuple of float
        Scaled residual before each Newton step [1].
    """

    state: np.ndarray
    period: float
    cycle: CycleData
    jacobian: np.ndarray
    multipliers: np.ndarray
    report: MultiplierReport
    iterations: int
    method: str
    residual: float
    converged: bool
    residual_history: tuple


def _scaled(residual, scale) -> float:
    return float(np.max(np.abs(residual) / scale)) if residual.size else 0.0


def find_periodic_orbit(advance_cycle: Callable[[np.ndarray], CycleData], initial_state,
                        *, scale=None, tolerance: float = 1e-10, max_iterations: int = 12,
                        fallback_cycles: int = 5000, fixed=None,
                        multiplier_margin: float = 0.05) -> PeriodicOrbit:
    """Fixed point of the Poincaré map by Newton's method, transient fall-back.

    Parameters
    ----------
    advance_cycle : callable
        ``x0 -> CycleData``: one cycle from a state just after the section
        event to the next section event.
    initial_state : array_like, shape (n,)
        Starting guess, e.g. the state at a turn-on after a warm-up
        transient [state units].
    scale : array_like, shape (n,), optional
        Typical magnitude of each state component, for the convergence test
        [state units].  Default: ``max(|x0|, 1e-6 max|x0|)``.
    tolerance : float, default 1e-10
        Convergence when ``max |P(x) - x| / scale`` and the scaled Newton step
        fall below it [1].
    max_iterations : int, default 12
        Newton iterations before falling back to the transient.
    fallback_cycles : int, default 5000
        Longest fall-back transient [cycles].
    fixed : array_like of bool, optional
        Components held fixed by the cycle map (excluded from the
        multipliers).
    multiplier_margin : float, default 0.05
        Margin for the bifurcation flags, see
        :func:`rcc.engine.floquet.classify_multipliers` [1].

    Returns
    -------
    PeriodicOrbit

    Raises
    ------
    PeriodicSteadyStateError
        If the cycle map fails at the starting guess.

    Notes
    -----
    Newton step ``(DP - I) dx = -(P(x) - x)`` (Aprille & Trick 1972, eq. 12,
    with the Poincaré section replacing the fixed period); a step that makes
    the cycle map fail or the residual grow is halved up to four times.  When
    Newton does not converge, the map is iterated (a long transient), which
    converges whenever the orbit is stable; a warning says so.
    """
    x = np.asarray(initial_state, dtype=float).copy()
    if scale is None:
        scale = np.maximum(np.abs(x), 1e-6 * max(float(np.max(np.abs(x))), 1e-300))
    scale = np.asarray(scale, dtype=float)
    n = x.size
    try:
        cycle = advance_cycle(x)
    except CycleError as error:
        raise PeriodicSteadyStateError(f"no switching cycle from the starting state: {error}") from None
    history = []
    iterations = 0
    converged = False
    for _ in range(max_iterations + 1):
        residual_vector = cycle.end_state - x
        residual = _scaled(residual_vector, scale)
        history.append(residual)
        if residual < tolerance:
            converged = True
            break
        if iterations == max_iterations:
            break
        try:
            jacobian = poincare_jacobian(cycle)
            step = np.linalg.solve(jacobian - np.eye(n), -residual_vector)
        except (CycleError, np.linalg.LinAlgError):
            break
        iterations += 1
        accepted = False
        fraction = 1.0
        for _halving in range(5):
            candidate = x + fraction * step
            try:
                trial = advance_cycle(candidate)
            except CycleError:
                fraction *= 0.5
                continue
            if _scaled(trial.end_state - candidate, scale) < max(residual, tolerance) \
                    or fraction < 0.1:
                accepted = True
                break
            fraction *= 0.5
        if not accepted:
            break
        x, cycle = candidate, trial
        if _scaled(fraction * step, scale) < tolerance * 1e-2:
            residual_vector = cycle.end_state - x
            residual = _scaled(residual_vector, scale)
            history.append(residual)
            converged = residual < max(tolerance, 1e3 * np.finfo(float).eps)
            break
    method = "newton"
    if not converged:
        warnings.warn("Newton's method on the Poincaré map did not converge; "
                      "falling back to a long transient", FallbackWarning, stacklevel=2)
        method = "transient-fallback"
        iterations = 0
        for _ in range(fallback_cycles):
            x = cycle.end_state
            try:
                cycle = advance_cycle(x)
            except CycleError as error:
                raise PeriodicSteadyStateError(
                    f"the transient fall-back lost the oscillation: {error}") from None
            iterations += 1
            residual = _scaled(cycle.end_state - x, scale)
            if residual < tolerance:
                converged = True
                break
    jacobian = poincare_jacobian(cycle)
    gradient = cycle.events[-1].gradient
    multipliers = section_multipliers(jacobian, gradient, fixed)
    report = classify_multipliers(multipliers, multiplier_margin)
    return PeriodicOrbit(
        state=x,
        period=float(cycle.period),
        cycle=cycle,
        jacobian=jacobian,
        multipliers=multipliers,
        report=report,
        iterations=iterations,
        method=method,
        residual=_scaled(cycle.end_state - x, scale),
        converged=converged,
        residual_history=tuple(history),
    )
