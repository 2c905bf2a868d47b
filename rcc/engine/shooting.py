"""Shooting on a Poincaré map: the fixed point of a cycle map by Newton's
method (or Newton-Picard), with a long transient as fall-back, and the
orbit's Floquet multipliers.

:func:`find_periodic_orbit` works on any cycle map ``x0 -> CycleData``
(:mod:`rcc.engine.floquet`): the reduced piecewise-affine oscillators of the
tests or the circuit engine (:mod:`rcc.engine.cycle_map`, used by
:func:`rcc.engine.pss.periodic_steady_state`).  Nothing here knows about
circuits.

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
.. [4] K. Lust, D. Roose, A. Spence, A. R. Champneys, "An adaptive
   Newton-Picard algorithm with subspace iteration for computing periodic
   solutions", SIAM J. Scientific Computing 19(4), 1998, pp. 1188-1209.
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
    "newton_picard_step",
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
        Scaled residual before each Newton step of the last Newton run [1].
    transient_cycles : int
        Cycles of transient simulated after the first Newton run failed
        (0 when it converged at once) [1].
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
    transient_cycles: int = 0


def _scaled(residual, scale) -> float:
    return float(np.max(np.abs(residual) / scale)) if residual.size else 0.0


def newton_picard_step(jacobian, residual, scale, threshold: float = 0.0) -> np.ndarray:
    """Newton step on the dominant subspace of the Poincaré map, fixed-point
    iteration on the rest (Newton-Picard).

    Parameters
    ----------
    jacobian : array_like, shape (n, n)
        Poincaré-map Jacobian ``DP`` [1].
    residual : array_like, shape (n,)
        ``P(x) - x`` [state units].
    scale : array_like, shape (n,)
        Typical magnitude of each component (the inner product of the
        subspace split is taken in scaled units) [state units].
    threshold : float, default 0
        Multipliers of modulus at least ``threshold`` span the Newton
        subspace; 0 gives the plain Newton step ``-(DP - I)^-1 (P(x) - x)``
        [1].

    Returns
    -------
    ndarray, shape (n,)
        Step to add to ``x`` [state units].

    Notes
    -----
    With the real Schur form ``DP = Z T Z^T`` ordered so that the first
    columns ``V`` of ``Z`` span the multipliers of modulus ``>= threshold``
    and ``W`` the rest, the step is ``V dp + W W^T r`` with
    ``(V^T DP V - I) dp = -V^T r - V^T DP W W^T r`` (Lust, Roose, Spence &
    Champneys 1998, eqs. 3.4-3.6).  Near the fixed point the error along
    ``W`` shrinks by the small multipliers each step and the error along
    ``V`` is removed, so the method converges even where the Jacobian's
    fast block is blurred by the event-location resolution of the engine;
    it needs no solve with the fast block at all.

    References
    ----------
    .. [1] K. Lust, D. Roose, A. Spence, A. R. Champneys, "An adaptive
       Newton-Picard algorithm with subspace iteration for computing
       periodic solutions", SIAM J. Scientific Computing 19(4), 1998,
       pp. 1188-1209.
    """
    from scipy.linalg import schur

    jacobian = np.asarray(jacobian, dtype=float)
    residual = np.asarray(residual, dtype=float)
    scale = np.asarray(scale, dtype=float)
    n = residual.size
    if threshold <= 0.0:
        return np.linalg.solve(jacobian - np.eye(n), -residual)
    scaled_jacobian = jacobian * scale[None, :] / scale[:, None]
    r = residual / scale
    limit = float(threshold) ** 2
    T, Z, dominant = schur(scaled_jacobian, output="real",
                           sort=lambda re, im: re * re + im * im >= limit)
    V, W = Z[:, :dominant], Z[:, dominant:]
    picard = W @ (W.T @ r)
    if dominant:
        reduced = V.T @ scaled_jacobian @ V - np.eye(dominant)
        newton = np.linalg.solve(reduced, -(V.T @ r) - V.T @ scaled_jacobian @ picard)
        step = V @ newton + picard
    else:
        step = picard
    return step * scale


def find_periodic_orbit(advance_cycle: Callable[[np.ndarray], CycleData], initial_state,
                        *, scale=None, tolerance: float = 1e-10, max_iterations: int = 12,
                        fallback_cycles: int = 5000, fixed=None,
                        multiplier_margin: float = 0.05,
                        picard_threshold: float = 0.0, transient=None,
                        transient_chunk: int = 100,
                        retry_newton: bool = True, progress=None) -> PeriodicOrbit:
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
    picard_threshold : float, default 0
        Multipliers of modulus below this are left to simple iteration
        (Newton-Picard, see :func:`newton_picard_step`); 0 gives Newton's
        method on every direction [1].
    transient : callable, optional
        ``(x, k) -> x_k``: the state at the ``k``-th section event from
        ``x``, by a fast simulation without sensitivities; the fall-back
        then runs ``transient_chunk`` cycles at a time between residual
        checks.  Default: iterate ``advance_cycle``.
    transient_chunk : int, default 100
        Cycles per fall-back chunk [1].
    retry_newton : bool, default True
        With ``transient``: try Newton again after chunks 1, 4, 16, ...,
        from the state the transient reached.
    progress : callable, optional
        Called as ``progress(description, done, total)`` at every Newton
        iteration and fall-back chunk (a progress display) [-].

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
    the cycle map fail, the residual grow or the period jump by more than a
    factor of two (another branch of the map, e.g. a re-trigger of the
    turn-on) is halved up to four times.  When Newton does not converge, the
    map is iterated from the starting guess (a long transient), which
    converges whenever the orbit is stable; a warning says so.  With a fast
    ``transient``, Newton is tried again after chunks 1, 4, 16, ... (the switching
    map is only piecewise smooth: Newton converges once the event sequence
    of the iterate is that of the orbit).
    """
    x = np.asarray(initial_state, dtype=float).copy()
    if scale is None:
        scale = np.maximum(np.abs(x), 1e-6 * max(float(np.max(np.abs(x))), 1e-300))
    scale = np.asarray(scale, dtype=float)
    try:
        cycle = advance_cycle(x)
    except CycleError as error:
        raise PeriodicSteadyStateError(
            f"no switching cycle from the starting state: {error}") from None
    start, start_cycle = x.copy(), cycle

    def report(description, done, total):
        if progress is not None:
            progress(description, done, total)

    def newton(x, cycle, limit):
        history, iterations = [], 0
        for _ in range(limit + 1):
            residual_vector = cycle.end_state - x
            residual = _scaled(residual_vector, scale)
            history.append(residual)
            report(f"Newton on the cycle: iteration {iterations}, residual {residual:.0e} "
                   f"(target {tolerance:.0e})", iterations, limit)
            if residual < tolerance:
                return True, x, cycle, iterations, history
            if iterations == limit:
                break
            try:
                jacobian = poincare_jacobian(cycle)
                step = newton_picard_step(jacobian, residual_vector, scale, picard_threshold)
            except (CycleError, np.linalg.LinAlgError, ValueError):
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
                same_branch = 0.5 * cycle.period < trial.period < 2.0 * cycle.period
                if same_branch and (_scaled(trial.end_state - candidate, scale)
                                    < max(residual, tolerance)):
                    accepted = True
                    break
                fraction *= 0.5
            if not accepted:
                break
            x, cycle = candidate, trial
            if _scaled(fraction * step, scale) < tolerance * 1e-2:
                residual = _scaled(cycle.end_state - x, scale)
                history.append(residual)
                return residual < max(tolerance, 1e3 * np.finfo(float).eps), x, cycle, \
                    iterations, history
        return False, x, cycle, iterations, history

    converged, x, cycle, iterations, history = newton(start, start_cycle, max_iterations)
    method = "newton"
    transient_cycles = 0
    if not converged:
        warnings.warn("Newton's method on the Poincaré map did not converge from the "
                      "starting state; continuing the transient", FallbackWarning, stacklevel=2)
        x, cycle = start, start_cycle
        chunks = 0
        while transient_cycles < fallback_cycles:
            report("no Newton convergence: following the transient",
                   transient_cycles, fallback_cycles)
            x = cycle.end_state
            try:
                if transient is not None:
                    chunk = max(1, min(transient_chunk, fallback_cycles - transient_cycles - 1))
                    x = transient(x, chunk)
                    transient_cycles += chunk
                cycle = advance_cycle(x)
            except CycleError as error:
                raise PeriodicSteadyStateError(
                    f"the transient fall-back lost the oscillation: {error}") from None
            transient_cycles += 1
            residual = _scaled(cycle.end_state - x, scale)
            if residual < tolerance:
                converged, method, iterations = True, "transient-fallback", transient_cycles
                history.append(residual)
                break
            chunks += 1
            if transient is not None and retry_newton and chunks & (chunks - 1) == 0 \
                    and chunks.bit_length() % 2 == 1:  # chunks 1, 4, 16, 64, ...
                # closer now: Newton again, from the transient's state
                ok, x_n, cycle_n, it_n, hist_n = newton(x, cycle, max_iterations)
                if ok:
                    converged, x, cycle, iterations, history = ok, x_n, cycle_n, it_n, hist_n
                    break
        else:
            method, iterations = "transient-fallback", transient_cycles
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
        transient_cycles=transient_cycles,
    )
