"""The compiled small-signal start-up network, without sympy.

:mod:`rcc.startup.symbolic` derives the characteristic polynomial, the loop
gain and the Routh first column of the power-on network with sympy and writes
them, once, as plain Python (``rcc/startup/_generated.py``).  This module is
what the numeric start-up analysis uses: the parameter table, the compiled
functions and their evaluation on arrays.  It does not import sympy (half a
second per process), which only a fresh derivation needs.

Notes
-----
The network, its symbols and the derivation: :mod:`rcc.startup.symbolic` and
``notes/startup_derivation.md``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = [
    "PARAMETER_MEANINGS",
    "PARAMETERS",
    "CompiledNetwork",
    "compiled",
    "evaluate",
]

#: Parameters of the small-signal network, in the argument order of the
#: compiled functions, with their meaning and unit.
PARAMETER_MEANINGS: tuple[tuple[str, str], ...] = (
    ("L_m", "magnetizing inductance [H]"),
    ("G_core", "core-loss conductance across the magnetizing inductance, 1/R_core [S]"),
    ("L_lk", "primary leakage inductance [H]"),
    ("R_p", "primary winding resistance, in series with the leakage [ohm]"),
    ("C_w", "winding self-capacitance, collector node to ground [F]"),
    ("C_mu", "switch collector-base capacitance (switch output capacitance) [F]"),
    ("C_pi", "switch base-emitter capacitance, g_m/(2 pi f_T) - C_mu [F]"),
    ("g_m", "switch transconductance dI_C/dV_BE at the DC point, about I_C/V_T [S]"),
    ("g_pi", "switch input conductance dI_B/dV_BE, about g_m/h_FE [S]"),
    ("G_e", "emitter conductance to ground: 1/R_s plus the limiter base branch [S]"),
    ("G_st", "start-up conductance, 1/R_start (bus is AC ground) [S]"),
    ("G_be", "base-emitter resistor conductance, 0 if absent [S]"),
    ("G_d", "drive resistor conductance, 1/R_d [S]"),
    ("C_d", "drive capacitor [F]"),
    ("k", "signed feedback turns ratio sigma*N_f/N_p, sigma = +1 regenerative [1]"),
    ("g_x", "limiter transfer conductance: current taken from the base per volt "
            "at the emitter, g_m2*G_lb/(G_lb + g_pi2) [S]"),
)

#: Argument order of the compiled functions.
PARAMETERS: tuple[str, ...] = tuple(name for name, _ in PARAMETER_MEANINGS)


@dataclass(frozen=True)
class CompiledNetwork:
    """Numpy functions compiled from :func:`rcc.startup.symbolic.derive` (all broadcast).

    Attributes
    ----------
    degree : int
        Degree of the characteristic polynomial.
    polynomial : callable
        ``polynomial(*parameters) -> list`` of coefficients, highest first.
    open_loop, loop_numerator : callable
        The same for ``P_0`` and ``-g_m P_1``.
    routh : callable
        ``routh(a_n, ..., a_0) -> list`` of first-column entries.
    """

    degree: int
    polynomial: object
    open_loop: object
    loop_numerator: object
    routh: object


#: Module holding the compiled functions, generated at build time by
#: ``python -m rcc.startup.symbolic`` (a test checks that it matches a fresh
#: derivation).
GENERATED_MODULE = "rcc.startup._generated"

_FUNCTIONS = ("polynomial", "open_loop", "loop_numerator", "routh")


@lru_cache(maxsize=1)
def compiled(fresh: bool = False) -> "CompiledNetwork":
    """The compiled numpy functions (memoized on first use).

    Parameters
    ----------
    fresh : bool
        Derive and lambdify now instead of loading the module generated at
        build time (several seconds).

    Returns
    -------
    CompiledNetwork
    """
    if not fresh:
        try:
            import importlib

            module = importlib.import_module(GENERATED_MODULE)
            return CompiledNetwork(module.DEGREE, *(getattr(module, f) for f in _FUNCTIONS))
        except ImportError:  # pragma: no cover - only before the first build
            pass
    import sympy as sp

    from rcc.startup.symbolic import _lambdified

    degree, table = _lambdified()
    return CompiledNetwork(degree, *(sp.lambdify(args, exprs, "numpy", cse=True)
                                     for args, exprs in (table[f] for f in _FUNCTIONS)))


def evaluate(function, parameters: dict) -> np.ndarray:
    """Call a compiled coefficient function on a dict of arrays.

    Parameters
    ----------
    function : callable
        One of the :class:`CompiledNetwork` functions.
    parameters : dict
        ``{name: array}`` for every name of :data:`PARAMETERS` [SI].

    Returns
    -------
    ndarray, shape (n, degree + 1)
        Coefficients, highest power first [SI: each in the unit its power of s
        gives it from the element values].
    """
    shape = np.broadcast_shapes(*(np.shape(parameters[n]) for n in PARAMETERS))
    values = function(*(parameters[n] for n in PARAMETERS))
    return np.stack([np.broadcast_to(np.asarray(v, dtype=float), shape) for v in values],
                    axis=-1)
