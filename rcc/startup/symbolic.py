"""Symbolic small-signal network of the power-on DC point (sympy).

The linearized circuit of ``notes/circuit.md`` at the power-on DC point is
written as modified nodal equations ``M(s) x = 0``.  From them, once per
process, sympy derives

- the characteristic polynomial ``P(s) = det M(s)`` (degree 6),
- the loop gain around the regenerative path, opened at the switch's
  collector current source (equivalently its base current,
  ``i_c = beta i_b``): ``P = P_0 + g_m P_1``, ``L(s) = -g_m P_1(s) / P_0(s)``
  so that ``P(s) = P_0(s) (1 - L(s))`` and the start condition is
  ``L(j w) = 1`` at the boundary (Barkhausen),
- the Routh-Hurwitz first column of a general degree-6 polynomial, whose
  sign changes count the right-half-plane roots,

and compiles them with :func:`sympy.lambdify` to numpy functions that take
arrays, so thousands of designs are evaluated without re-deriving anything.
The derivation is written out in ``notes/startup_derivation.md``.

Notes
-----
Characteristic polynomial of a linear network as the determinant of its
nodal matrix: Chua, Desoer & Kuh, *Linear and Nonlinear Circuits*, 1987,
ch. 10.  Return ratio of a controlled source and ``det = det_0 (1 + T)``:
Bode, *Network Analysis and Feedback Amplifier Design*, 1945, ch. IV
(here with the regenerative sign, ``L = -T``).  Routh array: Routh, *A
Treatise on the Stability of a Given State of Motion*, 1877; Ogata,
*Modern Control Engineering*, 5th ed., 2010, sec. 5-6.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import sympy as sp

# The numeric side (no sympy) lives in rcc.startup.network; re-exported here.
from rcc.startup.network import (GENERATED_MODULE, PARAMETER_MEANINGS,  # noqa: F401
                                 PARAMETERS, CompiledNetwork, _FUNCTIONS, compiled,
                                 evaluate)

__all__ = [
    "SYMBOLS",
    "PARAMETERS",
    "Derivation",
    "CompiledNetwork",
    "derive",
    "compiled",
    "routh_first_column",
    "derivation_text",
]

s = sp.Symbol("s")

#: Symbols of the small-signal network, in the argument order of the
#: compiled functions (:data:`PARAMETERS`), with their meaning and unit.
SYMBOLS: dict[str, tuple[sp.Symbol, str]] = {
    name: (sp.Symbol(name, real=True), text) for name, text in PARAMETER_MEANINGS
}

#: Unknowns of the nodal equations, in column order.
UNKNOWNS = ("v_m", "v_c", "v_b", "v_e", "v_d", "i_lk", "i_m")


@dataclass(frozen=True)
class Derivation:
    """Symbolic results (sympy objects).

    Attributes
    ----------
    matrix : sympy.Matrix
        Nodal matrix ``M(s)`` (rows: KCL at m, c, b, e, d; branch equations
        of L_m and L_lk; columns: :data:`UNKNOWNS`).
    polynomial : tuple of sympy.Expr
        Coefficients of ``P(s) = det M(s)``, highest power first.
    open_loop : tuple of sympy.Expr
        Coefficients of ``P_0(s) = P(s)|_{g_m=0}``, highest power first.
    loop_numerator : tuple of sympy.Expr
        Coefficients of ``-g_m P_1(s)``, so ``L = loop_numerator / open_loop``.
    loop_gain : sympy.Expr
        ``L(s)`` as a rational expression.
    reduced_loop_gain : sympy.Expr
        ``L(s)`` of the reduced circuit (drive capacitor a short, C_pi,
        C_mu, leakage, primary resistance and the limiter neglected) for
        reading.
    """

    matrix: sp.Matrix
    polynomial: tuple
    open_loop: tuple
    loop_numerator: tuple
    loop_gain: sp.Expr
    reduced_loop_gain: sp.Expr


def nodal_matrix() -> sp.Matrix:
    """The nodal matrix ``M(s)`` of the small-signal start-up network.

    Returns
    -------
    sympy.Matrix, shape (7, 7)
        Rows: Kirchhoff current law (currents leaving the node) at the
        magnetizing node m, the collector c, the base b, the emitter e and
        the drive node d; the branch equations of L_m and L_lk.  Columns:
        :data:`UNKNOWNS`.

    Notes
    -----
    The bus is AC ground (bulk-capacitor reactance neglected); the feedback
    winding is an ideal voltage source ``v_f = k (v_m - v_c)`` whose
    current ``i_f`` reflects into the primary as ``k i_f`` (ideal
    transformer, power conserving); the output winding carries no current
    (its rectifier is reverse-biased at the DC point); the limiter is
    memoryless (its capacitances, a few pF, are neglected beside the
    switch's), so it enters as ``g_x`` and the extra emitter conductance in
    ``G_e``.
    """
    p = {name: sym for name, (sym, _) in SYMBOLS.items()}
    vm, vc, vb, ve, vd, ilk, im = unknowns = sp.symbols(" ".join(UNKNOWNS))
    i_f = s * p["C_d"] * (p["k"] * (vm - vc) - vd)
    y_pi = p["g_pi"] + p["G_be"] + s * p["C_pi"]
    equations = [
        -ilk + im + p["G_core"] * (vm - vc) + p["k"] * i_f,
        -im - p["G_core"] * (vm - vc) - p["k"] * i_f + s * p["C_w"] * vc
        + s * p["C_mu"] * (vc - vb) + p["g_m"] * (vb - ve),
        p["G_st"] * vb + p["G_d"] * (vb - vd) + s * p["C_mu"] * (vb - vc)
        + y_pi * (vb - ve) + p["g_x"] * ve,
        y_pi * (ve - vb) - p["g_m"] * (vb - ve) + p["G_e"] * ve,
        p["G_d"] * (vd - vb) - i_f,
        vm - vc - s * p["L_m"] * im,
        vm + (s * p["L_lk"] + p["R_p"]) * ilk,
    ]
    return sp.Matrix([[sp.expand(sp.diff(eq, x)) for x in unknowns] for eq in equations])


def _determinant(matrix: sp.Matrix) -> sp.Expr:
    from sympy.polys.matrices import DomainMatrix

    domain_matrix = DomainMatrix.from_Matrix(matrix)
    return domain_matrix.domain.to_sympy(domain_matrix.det())


@lru_cache(maxsize=1)
def derive() -> Derivation:
    """Derive polynomial and loop gain (memoized; about 2 s on first use)."""
    matrix = nodal_matrix()
    det = sp.expand(_determinant(matrix))
    gm = SYMBOLS["g_m"][0]
    poly = sp.Poly(det, s)
    p0 = sp.Poly(det.subs(gm, 0), s)
    p1 = sp.Poly(sp.expand(det.coeff(gm, 1)), s)
    numerator = sp.Poly(-gm * p1.as_expr(), s)
    degree = poly.degree()
    pad = lambda q: (0,) * (degree - q.degree()) + tuple(q.all_coeffs())  # noqa: E731
    loop = numerator.as_expr() / p0.as_expr()
    reduced = _reduced_loop_gain(matrix)
    return Derivation(matrix, tuple(poly.all_coeffs()), pad(p0), pad(numerator), loop,
                      reduced)


def reduced_polynomial(matrix: sp.Matrix | None = None) -> sp.Expr:
    """Characteristic polynomial of the reduced circuit.

    Drive capacitor a short (leading coefficient in C_d), emitter at ground
    (leading coefficient in G_e), C_pi = C_mu = 0, no leakage, no primary
    resistance, no limiter, no start-up or base-emitter resistor.

    Returns
    -------
    sympy.Expr
        Polynomial in ``s`` (with the remaining symbols).
    """
    matrix = nodal_matrix() if matrix is None else matrix
    p = {name: sym for name, (sym, _) in SYMBOLS.items()}
    zero = {p[n]: 0 for n in ("C_pi", "C_mu", "L_lk", "R_p", "g_x", "G_st", "G_be")}
    det = sp.expand(_determinant(matrix.subs(zero)))
    det = sp.Poly(det, p["C_d"]).LC()
    det = sp.Poly(sp.expand(det), p["G_e"]).LC()
    return sp.expand(det)


def _reduced_loop_gain(matrix: sp.Matrix) -> sp.Expr:
    gm = SYMBOLS["g_m"][0]
    det = reduced_polynomial(matrix)
    p0 = det.subs(gm, 0)
    p1 = det.coeff(gm, 1)
    return sp.factor(sp.cancel(-gm * p1 / p0))


def routh_first_column(degree: int):
    """First column of the Routh array of a general polynomial.

    Parameters
    ----------
    degree : int
        Degree ``n`` of ``a_n s^n + ... + a_0``.

    Returns
    -------
    coefficients : tuple of sympy.Symbol
        ``(a_n, ..., a_0)``.
    column : list of sympy.Expr
        The ``n + 1`` first-column entries.  With ``a_n > 0`` and no zero
        entry, the number of sign changes equals the number of roots in
        the right half-plane (Routh 1877; Ogata 2010, sec. 5-6).
    """
    a = sp.symbols(f"a0:{degree + 1}")[::-1]  # a_n ... a_0
    rows = [list(a[0::2]), list(a[1::2])]
    width = len(rows[0])
    rows = [r + [0] * (width - len(r)) for r in rows]
    for _ in range(degree - 1):
        upper, lower = rows[-2], rows[-1]
        new = [sp.cancel((lower[0] * upper[j + 1] - upper[0] * lower[j + 1]) / lower[0])
               if j + 1 < width else 0 for j in range(width)]
        rows.append(new)
    return a, [row[0] for row in rows]


def _lambdified():
    derivation = derive()
    args = [SYMBOLS[name][0] for name in PARAMETERS]
    degree = len(derivation.polynomial) - 1
    coefficients, column = routh_first_column(degree)
    return degree, {
        "polynomial": (args, list(derivation.polynomial)),
        "open_loop": (args, list(derivation.open_loop)),
        "loop_numerator": (args, list(derivation.loop_numerator)),
        "routh": (list(coefficients), column),
    }


def generate_module(path=None) -> str:
    """Write the compiled functions as a plain Python module.

    Parameters
    ----------
    path : str or Path, optional
        Target file; default ``rcc/startup/_generated.py`` beside this file.

    Returns
    -------
    str
        The module source.
    """
    import inspect
    from pathlib import Path

    degree, table = _lambdified()
    parts = [
        '"""Generated by ``python -m rcc.startup.symbolic`` from the sympy derivation',
        "in :mod:`rcc.startup.symbolic`; do not edit.  tests/test_startup_symbolic.py",
        'checks that it matches a fresh derivation."""',
        "# flake8: noqa",
        "",
        f"DEGREE = {degree}",
        "",
    ]
    for name in _FUNCTIONS:
        args, exprs = table[name]
        function = sp.lambdify(args, exprs, "math", cse=True)
        source = inspect.getsource(function).replace("_lambdifygenerated", name)
        parts += [source, ""]
    text = "\n".join(parts)
    target = Path(path) if path else Path(__file__).with_name("_generated.py")
    target.write_text(text, encoding="utf-8")
    return text


def derivation_text(latex: bool = False) -> str:
    """The loop gain and start condition as readable text (or LaTeX).

    Parameters
    ----------
    latex : bool
        Print expressions as LaTeX instead of plain text.

    Returns
    -------
    str
    """
    d = derive()
    fmt = sp.latex if latex else (lambda e: sp.pretty(e, use_unicode=False, wrap_line=False))
    degree = len(d.polynomial) - 1
    a, column = routh_first_column(degree)
    lines = [
        "Start-up small-signal network at the power-on DC point",
        "",
        "Symbols:",
    ]
    lines += [f"  {name:7s} {text}" for name, (_, text) in SYMBOLS.items()]
    lines += [
        "  s       complex frequency [1/s]",
        "  sigma   +1 regenerative feedback winding, -1 degenerative",
        "",
        "Nodal equations M(s) x = 0, x = (" + ", ".join(UNKNOWNS) + "):",
        fmt(d.matrix),
        "",
        "Characteristic polynomial P(s) = det M(s) = a6 s^6 + ... + a0 with",
    ]
    for power, coefficient in zip(range(degree, -1, -1), d.polynomial):
        terms = len(sp.Add.make_args(coefficient))
        if terms <= 12:
            lines.append(f"  a{power} = " + (sp.latex(coefficient) if latex
                                              else str(coefficient)))
        else:
            lines.append(f"  a{power} = <{terms} terms; printed in full by "
                         "sympy from rcc.startup.symbolic.derive().polynomial>")
    lines += [
        "",
        "Loop gain, opened at the switch collector current source (i_c = g_m v_be):",
        "  P(s) = P0(s) + g_m P1(s),   L(s) = -g_m P1(s) / P0(s),   P = P0 (1 - L)",
        "",
        "Reduced loop gain (drive capacitor a short, emitter grounded, C_pi = C_mu = 0,",
        "no leakage, no limiter, no start-up or base-emitter resistor):",
        "  L(s) =",
        fmt(d.reduced_loop_gain),
        "  Start condition of the reduced circuit (Barkhausen: L(j w0) > 1 at",
        "  w0 = 1/sqrt(L_m C_w)), the switch a negative conductance across the tank:",
        "    k g_m G_d / (G_d + g_pi) > G_core + k^2 G_d g_pi / (G_d + g_pi)",
        "",
        "Start condition of the full network: P(s) has a root with Re s > 0, i.e.",
        "with a6 > 0 at least one entry of the Routh first column is negative:",
    ]
    for index, entry in enumerate(column):
        lines.append(f"  r{index} = " + (sp.latex(entry) if latex else str(entry)))
    return "\n".join(lines)


if __name__ == "__main__":  # build step: regenerate rcc/startup/_generated.py
    generate_module()
