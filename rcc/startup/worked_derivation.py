"""The start-up derivation worked with a design's numbers: text and LaTeX.

``rcc startup --derivation`` prints, for the analysed corner (lowest bus, worst
temperature and gain), the small-signal values at the power-on DC point, the
loop gain ``L(s) = N(s) / D(s)`` and the characteristic polynomial
``P(s) = D(s) - N(s)`` with their numeric coefficients, the Routh-Hurwitz first
column and its sign changes, and the reduced circuit's Barkhausen condition
with both sides evaluated, all wrapped to the terminal.  ``--latex`` writes
the same as a complete LaTeX document.  The general symbolic derivation is in
``notes/startup_derivation.md`` and :mod:`rcc.startup.symbolic`.

Nothing here is a new model: the numbers come from the start-up analysis
(:mod:`rcc.startup.dcpoint`, :mod:`rcc.startup.poles`) and the compiled
symbolic network (:func:`rcc.startup.symbolic.compiled`).
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

import numpy as np

__all__ = ["WorkedDerivation", "worked_derivation", "derivation_text", "latex_document"]


@dataclass(frozen=True)
class WorkedDerivation:
    """The start-up derivation at one corner, with numbers.

    Attributes
    ----------
    title : str
        Design title.
    bus_voltage, temperature, hfe : float
        Analysed corner: bus [V], temperature [K], hFE at 25 degC [1].
    values : dict of str to float
        Small-signal values by symbol name (:data:`rcc.startup.symbolic.SYMBOLS`) [SI].
    loop_numerator, loop_denominator : tuple of float
        ``N(s)`` and ``D(s)`` of ``L(s) = N(s)/D(s)``, highest power first [SI].
    polynomial : tuple of float
        ``P(s) = D(s) - N(s)``, highest power first [SI].
    routh : tuple of float
        Routh first column (``r0`` = leading coefficient) [SI].
    sign_changes : int
        Sign changes in the Routh column: right-half-plane poles [1].
    reduced_gain, reduced_loss : float
        Both sides of the reduced circuit's start condition
        ``k g_m G_d/(G_d + g_pi) > G_core + k^2 G_d g_pi/(G_d + g_pi)`` [S].
    poles : tuple of complex
        Poles of the full network [1/s].
    starts : bool
        Verdict of the analysis.
    """

    title: str
    bus_voltage: float
    temperature: float
    hfe: float
    values: dict
    loop_numerator: tuple
    loop_denominator: tuple
    polynomial: tuple
    routh: tuple
    sign_changes: int
    reduced_gain: float
    reduced_loss: float
    poles: tuple
    starts: bool


def worked_derivation(design, result) -> WorkedDerivation:
    """Evaluate the derivation at the corner of a start-up result.

    Parameters
    ----------
    design : rcc.design.Design
    result : rcc.startup.analysis.StartupResult
        The analysed corner (``startup_report(design).result``).

    Returns
    -------
    WorkedDerivation
    """
    from rcc.startup.dcpoint import circuit_values, solve_dc_point
    from rcc.startup.poles import small_signal_parameters
    from rcc.startup.network import PARAMETERS, compiled, evaluate

    circuit = circuit_values(design, result.bus_voltage, np.array([result.temperature]),
                             np.array([result.hfe]))
    small = small_signal_parameters(circuit, solve_dc_point(circuit))
    one = {name: np.atleast_1d(value)[:1] for name, value in small.values.items()}
    values = {name: float(one[name][0]) for name in PARAMETERS}
    network = compiled()
    polynomial = np.ravel(evaluate(network.polynomial, one)).astype(float)
    column = np.array([float(np.ravel(entry)[0]) if np.size(entry) else float(entry)
                       for entry in network.routh(*polynomial)])
    signs = np.sign(column[np.isfinite(column) & (column != 0)])
    v = values
    coupling = v["G_d"] / (v["G_d"] + v["g_pi"])
    return WorkedDerivation(
        title=design.title, bus_voltage=result.bus_voltage, temperature=result.temperature,
        hfe=result.hfe, values=values, loop_numerator=tuple(result.loop_numerator),
        loop_denominator=tuple(result.loop_denominator), polynomial=tuple(polynomial),
        routh=tuple(column), sign_changes=int(np.sum(signs[1:] != signs[:-1])),
        reduced_gain=v["k"] * v["g_m"] * coupling,
        reduced_loss=v["G_core"] + v["k"] ** 2 * v["g_pi"] * coupling,
        poles=tuple(result.poles), starts=bool(result.starts))


def _polynomial(coefficients, variable="s", digits=4) -> list[str]:
    """Terms of a polynomial, highest power first, zero terms left out."""
    degree = len(coefficients) - 1
    terms = []
    for power, c in zip(range(degree, -1, -1), coefficients):
        if c == 0:
            continue
        sign = "-" if c < 0 else "+"
        magnitude = f"{abs(c):.{digits}g}"
        term = magnitude + ("" if power == 0 else f" {variable}" if power == 1
                            else f" {variable}^{power}")
        terms.append(f"{sign} {term}")
    if not terms:
        return ["0"]
    terms[0] = terms[0].removeprefix("+ ").replace("- ", "-", 1)
    return terms


def _packed(items: list[str], width: int, first: str, indent: str, separator=" ") -> list[str]:
    """Items packed into lines of at most ``width`` columns, never split inside one;
    the first line starts with ``first``, the others with ``indent``."""
    lines, line = [], first
    for i, item in enumerate(items):
        piece = item + (separator.rstrip() if i < len(items) - 1 else "")
        if line != first and len(line) + 1 + len(piece) > width:
            lines.append(line)
            line = indent + piece
        else:
            line += ("" if line == first else " ") + piece
    lines.append(line)
    return lines


def _wrapped(label: str, terms: list[str], width: int, indent: str = "    ") -> list[str]:
    return _packed(terms, width, indent + label, indent + " " * len(label))


def derivation_text(worked: WorkedDerivation, width: int = 80) -> str:
    """The worked derivation as plain text wrapped to ``width`` columns.

    Parameters
    ----------
    worked : WorkedDerivation
    width : int
        Terminal width [characters].

    Returns
    -------
    str
    """
    from rcc.startup.symbolic import SYMBOLS
    from rcc.units import format_si

    width = max(int(width), 60)
    w = worked
    lines = [f"Start-up derivation with the numbers of {w.title}",
             f"Analysed corner: {w.bus_voltage:.4g} V bus, {w.temperature - 273.15:.3g} degC, "
             f"hFE(25 degC) {w.hfe:.3g} (the worst of the design's corners at the lowest "
             "bus).",
             "", "Small-signal values at the power-on DC point:"]
    for name, (_, meaning) in SYMBOLS.items():
        unit = meaning.rsplit("[", 1)[-1].rstrip("]") if "[" in meaning else ""
        meaning = meaning.rsplit(" [", 1)[0]
        value = w.values[name]
        shown = f"{value:.4g}" if unit in ("1", "") else format_si(value, unit)
        lines += textwrap.wrap(f"{name:7s} = {shown:>12s}   {meaning}", width=width,
                               initial_indent="  ", subsequent_indent=" " * 27)
    lines += ["", "Loop gain, opened at the switch collector current source "
                  "(i_c = g_m v_be):",
              "    L(s) = N(s) / D(s),   P(s) = D(s) (1 - L(s)) = D(s) - N(s)"]
    lines += _wrapped("N(s) = ", _polynomial(w.loop_numerator), width)
    lines += _wrapped("D(s) = ", _polynomial(w.loop_denominator), width)
    lines += _wrapped("P(s) = ", _polynomial(w.polynomial), width)
    lines += ["", "Start condition: P(s) has a root with Re s > 0. Routh first column "
                  "(its sign changes count those roots):"]
    column = [f"r{i} = {value:.4g}" for i, value in enumerate(w.routh)]
    lines += _packed(column, width, "    ", "    ", separator=", ")
    verdict = ("starts" if w.starts else "does not start")
    lines.append(f"    {w.sign_changes} sign change(s): {w.sign_changes} pole(s) in the "
                 f"right half-plane; the supply {verdict}.")
    poles = [f"{p.real:.4g}{p.imag:+.4g}j" if p.imag else f"{p.real:.4g}" for p in w.poles]
    lines += _packed(poles, width, "    poles [1/s]: ", "      ", separator=", ")
    holds = ">" if w.reduced_gain > w.reduced_loss else "<="
    lines += ["", "Reduced circuit (drive capacitor a short, C_pi = C_mu = 0, no leakage, "
                  "limiter or resistors at the base), Barkhausen at w0 = 1/sqrt(L_m C_w):",
              "    k g_m G_d/(G_d + g_pi)  >  G_core + k^2 G_d g_pi/(G_d + g_pi)",
              f"    {w.reduced_gain:.4g} S  {holds}  {w.reduced_loss:.4g} S   "
              f"({'holds' if holds == '>' else 'fails'})",
              "", "The symbolic network and its derivation: notes/startup_derivation.md; "
                  "the nodal matrix M(s): rcc.startup.symbolic.nodal_matrix()."]
    out = []
    for line in lines:
        out += textwrap.wrap(line, width=width, subsequent_indent="    ") if len(line) > width \
            else [line]
    return "\n".join(out)


def _latex_number(value: float, digits: int = 4) -> str:
    text = f"{value:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        return f"{mantissa} \\times 10^{{{int(exponent)}}}"
    return text


def _latex_escape(text: str) -> str:
    for old, new in (("\\", r"\textbackslash{}"), ("&", r"\&"), ("%", r"\%"), ("$", r"\$"),
                     ("#", r"\#"), ("_", r"\_"), ("{", r"\{"), ("}", r"\}"),
                     ("~", r"\textasciitilde{}"), ("^", r"\textasciicircum{}")):
        text = text.replace(old, new)
    return text


def latex_document(worked: WorkedDerivation) -> str:
    """The worked derivation as a complete LaTeX document (article class,
    amsmath only), with the symbolic reduced loop gain.

    Parameters
    ----------
    worked : WorkedDerivation

    Returns
    -------
    str
        Compiles with ``pdflatex``.
    """
    import sympy as sp

    from rcc.startup.symbolic import SYMBOLS, derive

    w = worked
    symbol_rows = []
    for name, (symbol, meaning) in SYMBOLS.items():
        symbol_rows.append(f"${sp.latex(symbol)}$ & ${_latex_number(w.values[name])}$ & "
                           f"{_latex_escape(meaning)} \\\\")

    def coefficients(name, values):
        degree = len(values) - 1
        rows = [f"{name}_{{{power}}} &= {_latex_number(c)}"
                for power, c in zip(range(degree, -1, -1), values)]
        return " \\\\\n".join(rows)

    routh = " \\\\\n".join(f"r_{{{i}}} &= {_latex_number(value)}"
                           for i, value in enumerate(w.routh))
    reduced = sp.latex(derive().reduced_loop_gain)
    verdict = "starts" if w.starts else "does not start"
    relation = "$>$" if w.reduced_gain > w.reduced_loss else r"$\le$"
    return "\n".join([
        r"\documentclass[a4paper,10pt]{article}",
        r"\usepackage[margin=2cm]{geometry}",
        r"\usepackage{amsmath}",
        r"\allowdisplaybreaks",
        r"\begin{document}",
        r"\section*{Start-up derivation: " + _latex_escape(w.title) + "}",
        (f"Analysed corner: {_latex_number(w.bus_voltage)}~V bus, "
         f"{_latex_number(w.temperature - 273.15, 3)}~$^\\circ$C, "
         f"$h_{{FE}}(25\\,^\\circ\\mathrm{{C}}) = {_latex_number(w.hfe, 3)}$. "
         "Computed estimates from a model, not a safety evaluation."),
        r"\subsection*{Small-signal values at the power-on DC point (SI units)}",
        r"\begin{tabular}{lll}",
        *symbol_rows,
        r"\end{tabular}",
        r"\subsection*{Loop gain and characteristic polynomial}",
        (r"Opened at the switch collector current source ($i_c = g_m v_{be}$): "
         r"$L(s) = N(s)/D(s)$, $P(s) = D(s)\,(1 - L(s)) = D(s) - N(s)$, "
         r"$N(s) = \sum n_i s^i$, $D(s) = \sum d_i s^i$, $P(s) = \sum a_i s^i$."),
        r"\begin{align*}",
        coefficients("n", w.loop_numerator) + r" \\[4pt]",
        coefficients("d", w.loop_denominator) + r" \\[4pt]",
        coefficients("a", w.polynomial),
        r"\end{align*}",
        r"\subsection*{Start condition}",
        (r"The supply starts when $P(s)$ has a root with $\operatorname{Re} s > 0$; the "
         r"sign changes of the Routh first column count such roots:"),
        r"\begin{align*}",
        routh,
        r"\end{align*}",
        (f"{w.sign_changes} sign change(s): {w.sign_changes} right-half-plane pole(s); "
         f"the supply {verdict}."),
        r"\subsection*{Reduced circuit}",
        (r"Drive capacitor a short, $C_\pi = C_\mu = 0$, no leakage, limiter or base "
         r"resistors:"),
        r"\[ L(s) = " + reduced + r" \]",
        (r"Barkhausen at $\omega_0 = 1/\sqrt{L_m C_w}$: "
         r"$k g_m G_d/(G_d + g_\pi) > G_{core} + k^2 G_d g_\pi/(G_d + g_\pi)$, here "
         f"${_latex_number(w.reduced_gain)}$~S {relation} "
         f"${_latex_number(w.reduced_loss)}$~S."),
        r"\end{document}",
        "",
    ])
