"""Symbolic layer of the start-up analysis.

- The module generated at build time equals a fresh sympy derivation.
- A textbook oscillation condition on a reduced circuit: a transistor
  with transformer feedback across a parallel LC tank with loss
  conductance ``G`` is a negative conductance ``-k g_m``; it starts when
  ``k g_m > G`` and oscillates at ``w0 = 1/sqrt(L C)``.  Razavi, *RF
  Microelectronics*, 2nd ed., Prentice Hall, 2012, sec. 8.2 (one-port view
  of an oscillator: a tank with parallel loss resistance R_p oscillates when
  the active circuit provides a negative resistance of magnitude at most
  R_p)  # from memory (section number); Barkhausen, *Lehrbuch der
  Elektronen-Röhren*, vol. 3, 1935 (loop gain 1 at the oscillation
  frequency).
- ``P(s) = P_0(s) (1 - L(s))`` (Bode, *Network Analysis and Feedback
  Amplifier Design*, 1945, ch. IV: determinant and return ratio).
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from rcc.startup import symbolic
from rcc.startup.poles import polynomial_roots

SYM = {name: sym for name, (sym, _) in symbolic.SYMBOLS.items()}


@pytest.fixture(scope="module")
def derivation():
    return symbolic.derive()


def test_generated_module_matches_fresh_derivation(derivation):
    """Evaluate both on random parameters: equal to round-off."""
    generated = symbolic.compiled()
    fresh = symbolic.compiled.__wrapped__(fresh=True)
    rng = np.random.default_rng(11)
    values = {name: 10 ** rng.uniform(-12, 1, 20) for name in symbolic.PARAMETERS}
    values["k"] = rng.uniform(-1, 1, 20)
    for name in ("polynomial", "open_loop", "loop_numerator"):
        a = symbolic.evaluate(getattr(generated, name), values)
        b = symbolic.evaluate(getattr(fresh, name), values)
        np.testing.assert_allclose(a, b, rtol=1e-12, atol=0)
    column = np.array(generated.routh(*[rng.uniform(0.5, 2.0) for _ in range(7)]))
    assert column.shape == (7,) and np.all(np.isfinite(column))


def test_characteristic_polynomial_degree_six(derivation):
    # six energy stores: L_m, L_lk, C_w, C_mu, C_pi, C_d
    assert len(derivation.polynomial) == 7
    leading = sp.factor(derivation.polynomial[0])
    for name in ("C_d", "C_mu", "C_pi", "C_w", "L_lk", "L_m"):
        assert leading.has(SYM[name])


def test_determinant_splits_into_open_loop_and_loop_gain(derivation):
    """P = P0 - N with L = N / P0: P = P0 (1 - L)."""
    for p, p0, n in zip(derivation.polynomial, derivation.open_loop,
                        derivation.loop_numerator):
        assert sp.expand(p - (p0 - n)) == 0
    assert all(not sp.expand(c).has(SYM["g_m"]) for c in derivation.open_loop)


def test_reduced_circuit_is_the_negative_conductance_lc_oscillator():
    """With r_pi infinite the reduced polynomial is
    G_d s (C L s^2 + (G - k g_m) L s + 1): a parallel RLC with the conductance
    G - k g_m (Razavi 2012, sec. 8.2)."""
    reduced = symbolic.reduced_polynomial().subs(SYM["g_pi"], 0)
    s = symbolic.s
    expected = SYM["G_d"] * s * (SYM["C_w"] * SYM["L_m"] * s ** 2
                                 + (SYM["G_core"] - SYM["k"] * SYM["g_m"]) * SYM["L_m"] * s + 1)
    assert sp.expand(reduced - expected) == 0


def test_reduced_loop_gain_at_resonance_is_k_gm_over_g(derivation):
    """Barkhausen: L(j w0) = k g_m R at w0 = 1/sqrt(L C), real and positive."""
    loop = derivation.reduced_loop_gain.subs(SYM["g_pi"], 0)
    w0 = 1 / sp.sqrt(SYM["L_m"] * SYM["C_w"])
    at_resonance = sp.simplify(loop.subs(symbolic.s, sp.I * w0))
    assert sp.simplify(at_resonance - SYM["k"] * SYM["g_m"] / SYM["G_core"]) == 0


@pytest.mark.parametrize("ratio, starts", [(1.05, True), (0.95, False)])
def test_full_network_reproduces_the_threshold(ratio, starts):
    """The full compiled network, with the parasitics made small, starts just
    above g_m = G_core / k and not just below; the growing pair sits at
    w0 = 1/sqrt(L_m C_w) (Razavi 2012, sec. 8.2)."""
    L, C, R, k = 1e-3, 100e-12, 50e3, 0.2
    gm = ratio / (k * R)
    values = {
        "L_m": L, "G_core": 1 / R, "L_lk": 1e-12, "R_p": 0.0, "C_w": C, "C_mu": 1e-18,
        "C_pi": 1e-18, "g_m": gm, "g_pi": gm * 1e-7, "G_e": 1e6, "G_st": 0.0,
        "G_be": 0.0, "G_d": 1e-2, "C_d": 1.0, "k": k, "g_x": 0.0,
    }
    values = {n: np.array([v]) for n, v in values.items()}
    coefficients = symbolic.evaluate(symbolic.compiled().polynomial, values)
    w0 = 1 / np.sqrt(L * C)
    roots = polynomial_roots(coefficients, np.array([w0]))[0]
    oscillating = roots[np.argmin(np.abs(np.abs(roots.imag) - w0))]
    assert (oscillating.real > 0) == starts
    # damping of the pair: (G - k g_m) / (2 C)
    np.testing.assert_allclose(oscillating.real, (k * gm - 1 / R) / (2 * C), rtol=1e-3)
    np.testing.assert_allclose(abs(oscillating.imag), w0, rtol=1e-3)


def test_routh_first_column_of_a_cubic():
    """Routh array of a3 s^3 + a2 s^2 + a1 s + a0: first column a3, a2,
    (a2 a1 - a3 a0)/a2, a0 (Ogata, Modern Control Engineering, 5th ed., 2010,
    sec. 5-6, the third-order example)."""
    a, column = symbolic.routh_first_column(3)
    a3, a2, a1, a0 = a
    expected = [a3, a2, (a2 * a1 - a3 * a0) / a2, a0]
    for got, want in zip(column, expected):
        assert sp.simplify(got - want) == 0


@pytest.mark.parametrize("latex", [False, True])
def test_derivation_text_explains_every_symbol(latex):
    text = symbolic.derivation_text(latex=latex)
    for name in symbolic.PARAMETERS:
        assert f"  {name} " in text
    assert "Routh" in text and "Barkhausen" in text
    if latex:
        assert "\\frac" in text
