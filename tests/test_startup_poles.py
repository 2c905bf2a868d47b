"""Poles of the start-up network: the derived polynomial against independent
references.

- ``numpy.linalg.eigvals`` of a state-space matrix assembled here by hand,
  node by node, from Kirchhoff's laws (a different formulation from the
  nodal determinant of :mod:`rcc.startup.symbolic`);
- ``scipy.signal.ss2tf``: the characteristic polynomial of that matrix;
- python-control: the closed-loop poles of the derived loop gain,
  ``control.feedback(L, 1, sign=+1)``, must be the roots of ``P(s)``
  (``P = P_0 (1 - L)``, Bode 1945, ch. IV).

Random element values over wide, realistic ranges with hypothesis
(derandomized).
"""

from __future__ import annotations

import control
import numpy as np
import pytest
import scipy.signal
from hypothesis import given, settings, strategies as st

from rcc.startup.poles import polynomial_roots
from rcc.startup.symbolic import PARAMETERS, compiled, evaluate


def log_uniform(low, high):
    return st.floats(np.log10(low), np.log10(high)).map(lambda x: 10.0 ** x)


RAW = {
    "L_m": log_uniform(20e-6, 10e-3),
    "R_core": log_uniform(1e3, 1e6),
    "L_lk": log_uniform(0.1e-6, 200e-6),
    "R_p": log_uniform(1e-3, 5.0),
    "C_w": log_uniform(2e-12, 200e-12),
    "C_mu": log_uniform(2e-12, 100e-12),
    "C_pi": log_uniform(10e-12, 50e-9),
    "g_m": log_uniform(1e-5, 30.0),
    "hfe": log_uniform(5.0, 300.0),
    "R_s": log_uniform(0.1, 10.0),
    "R_st": log_uniform(100.0, 10e6),
    "R_be": log_uniform(100.0, 1e6),
    "R_d": log_uniform(10.0, 2e3),
    "C_d": log_uniform(100e-12, 2e-6),
    "n": log_uniform(0.01, 1.0),
    "sign": st.sampled_from([1.0, -1.0]),
    "g_m2": log_uniform(1e-9, 5.0),
    "hfe2": log_uniform(30.0, 300.0),
    "R_lb": log_uniform(10.0, 10e3),
}


def symbolic_parameters(raw):
    """Map raw element values to the symbols of the derivation."""
    g_lb = 1.0 / raw["R_lb"]
    g_pi2 = raw["g_m2"] / raw["hfe2"]
    divider = g_lb / (g_lb + g_pi2)
    return {
        "L_m": raw["L_m"], "G_core": 1.0 / raw["R_core"], "L_lk": raw["L_lk"],
        "R_p": raw["R_p"], "C_w": raw["C_w"], "C_mu": raw["C_mu"], "C_pi": raw["C_pi"],
        "g_m": raw["g_m"], "g_pi": raw["g_m"] / raw["hfe"],
        "G_e": 1.0 / raw["R_s"] + g_pi2 * divider, "G_st": 1.0 / raw["R_st"],
        "G_be": 1.0 / raw["R_be"], "G_d": 1.0 / raw["R_d"], "C_d": raw["C_d"],
        "k": raw["sign"] * raw["n"], "g_x": raw["g_m2"] * divider,
    }


def state_matrix(raw):
    """State-space matrix of the start-up network, assembled by hand.

    States: leakage current, magnetizing current, collector-node voltage,
    C_mu voltage (v_b - v_c), C_pi voltage (v_b - v_e), drive-capacitor
    voltage (v_f - v_d).  For each unit state the resistive network is
    solved by Kirchhoff's current law and the state derivatives read off.
    """
    k = raw["sign"] * raw["n"]
    g_core, g_d = 1.0 / raw["R_core"], 1.0 / raw["R_d"]
    g_pi = raw["g_m"] / raw["hfe"]
    g_be, g_st, g_s, g_lb = (1.0 / raw["R_be"], 1.0 / raw["R_st"], 1.0 / raw["R_s"],
                             1.0 / raw["R_lb"])
    g_pi2 = raw["g_m2"] / raw["hfe2"]
    a = np.zeros((6, 6))
    for column in range(6):
        i_lk, i_m, v_w, v_mu, v_pi, v_cd = np.eye(6)[column]
        v_c = v_w
        v_b = v_c + v_mu
        v_e = v_b - v_pi
        v_l = g_lb * v_e / (g_lb + g_pi2)
        # KCL at m with the ideal feedback winding: i_lk = i_m + G_core v_mag + k i_f,
        # i_f = G_d (k v_mag - v_cd - v_b)
        v_mag = (i_lk - i_m + k * g_d * (v_cd + v_b)) / (g_core + k * k * g_d)
        v_m = v_c + v_mag
        i_f = g_d * (k * v_mag - v_cd - v_b)
        i_pi = g_s * v_e + g_lb * (v_e - v_l) - (g_pi + g_be + raw["g_m"]) * v_pi
        i_mu = -g_st * v_b + i_f - i_pi - (g_pi + g_be) * v_pi - raw["g_m2"] * v_l
        i_primary = i_m + g_core * v_mag + k * i_f
        i_w = i_primary + i_mu - raw["g_m"] * v_pi
        a[:, column] = [
            (-v_m - raw["R_p"] * i_lk) / raw["L_lk"],
            v_mag / raw["L_m"],
            i_w / raw["C_w"],
            i_mu / raw["C_mu"],
            i_pi / raw["C_pi"],
            i_f / raw["C_d"],
        ]
    return a


def natural_frequency(raw):
    return 1.0 / np.sqrt(raw["L_m"] * (raw["C_w"] + raw["C_mu"]))


def match(found, reference):
    """Greedy nearest matching of two root sets; returns the largest
    relative mismatch."""
    reference = list(reference)
    worst = 0.0
    for root in found:
        index = int(np.argmin([abs(root - r) for r in reference]))
        r = reference.pop(index)
        worst = max(worst, abs(root - r) / max(abs(r), 1e-300))
    return worst


@settings(deadline=None, max_examples=150, derandomize=True)
@given(st.fixed_dictionaries(RAW))
def test_polynomial_roots_equal_state_space_eigenvalues(raw):
    network = compiled()
    values = {name: np.array([v]) for name, v in symbolic_parameters(raw).items()}
    coefficients = evaluate(network.polynomial, values)
    w0 = np.array([natural_frequency(raw)])
    roots = polynomial_roots(coefficients, w0)[0]
    eigenvalues = np.linalg.eigvals(state_matrix(raw))
    # roots span up to eight decades; the companion eigenvalues keep about
    # 1e-6 relative accuracy for the smallest after frequency scaling
    assert match(roots, eigenvalues) < 1e-5
    # the verdict (any right-half-plane root) agrees wherever it is clear-cut
    largest = eigenvalues.real.max()
    if abs(largest) > 1e-6 * np.abs(eigenvalues).max():
        assert (roots.real.max() > 0) == (largest > 0)


@settings(deadline=None, max_examples=60, derandomize=True)
@given(st.fixed_dictionaries(RAW))
def test_polynomial_equals_scipy_ss2tf_denominator(raw):
    """scipy.signal.ss2tf returns the characteristic polynomial det(sI - A)."""
    network = compiled()
    w0 = natural_frequency(raw)
    values = {name: np.array([v]) for name, v in symbolic_parameters(raw).items()}
    ours = evaluate(network.polynomial, values)[0] * w0 ** np.arange(6, -1, -1)
    ours = ours / ours[0]
    a = state_matrix(raw) / w0  # frequency-scaled, p = s / w0
    _, reference = scipy.signal.ss2tf(a, np.ones((6, 1)), np.ones((1, 6)), np.zeros((1, 1)))
    np.testing.assert_allclose(ours, reference, rtol=1e-6,
                               atol=1e-9 * np.max(np.abs(reference)))


@settings(deadline=None, max_examples=60, derandomize=True)
@given(st.fixed_dictionaries(RAW))
def test_loop_gain_closed_loop_poles_with_python_control(raw):
    """Closing the derived loop gain with python-control gives the roots of P."""
    network = compiled()
    w0 = natural_frequency(raw)
    values = {name: np.array([v]) for name, v in symbolic_parameters(raw).items()}
    scale = w0 ** np.arange(6, -1, -1)
    numerator = evaluate(network.loop_numerator, values)[0] * scale
    denominator = evaluate(network.open_loop, values)[0] * scale
    polynomial = evaluate(network.polynomial, values)[0] * scale
    top = np.max(np.abs(denominator))
    loop = control.tf(np.trim_zeros(numerator / top, "f") if np.any(numerator) else [0.0],
                      denominator / top)
    closed = control.feedback(loop, 1, sign=1)
    poles = np.asarray(control.poles(closed)) * w0
    roots = np.roots(polynomial) * w0
    # python-control's feedback interconnection may keep pole-zero pairs of
    # the open loop; every root of P must be among its poles
    worst = max(np.min(np.abs(poles - r)) / abs(r) for r in roots)
    assert worst < 1e-5


def test_polynomial_roots_vectorized_against_numpy_roots():
    """Batched companion eigenvalues equal numpy.roots row by row."""
    rng = np.random.default_rng(7)
    coefficients = rng.normal(size=(50, 7))
    batched = polynomial_roots(coefficients)
    for row, roots in zip(coefficients, batched):
        reference = np.roots(row)
        assert match(roots, reference) < 1e-9


def test_parameters_order_is_the_argument_order():
    import inspect

    from rcc.startup import _generated

    assert tuple(inspect.signature(_generated.polynomial).parameters) == PARAMETERS


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_routh_count_equals_right_half_plane_roots(sign):
    """Routh sign changes count the right-half-plane roots (Ogata 2010, sec. 5-6)."""
    from rcc.startup.poles import SmallSignal, network_poles

    rng = np.random.default_rng(3)
    # deterministic draws over the same ranges as RAW
    bounds = {"L_m": (20e-6, 10e-3), "R_core": (1e3, 1e6), "L_lk": (0.1e-6, 200e-6),
              "R_p": (1e-3, 5.0), "C_w": (2e-12, 200e-12), "C_mu": (2e-12, 100e-12),
              "C_pi": (10e-12, 50e-9), "g_m": (1e-5, 30.0), "hfe": (5.0, 300.0),
              "R_s": (0.1, 10.0), "R_st": (100.0, 10e6), "R_be": (100.0, 1e6),
              "R_d": (10.0, 2e3), "C_d": (100e-12, 2e-6), "n": (0.01, 1.0),
              "g_m2": (1e-9, 5.0), "hfe2": (30.0, 300.0), "R_lb": (10.0, 10e3)}
    draws = {name: 10 ** rng.uniform(np.log10(lo), np.log10(hi), 200)
             for name, (lo, hi) in bounds.items()}
    draws["sign"] = np.full(200, sign)
    values = symbolic_parameters(draws)
    w0 = natural_frequency(draws)
    result = network_poles(SmallSignal({n: values[n] for n in PARAMETERS}, w0))
    decided = result.right_half_plane_roots >= 0
    assert decided.mean() > 0.9
    counted = (result.poles.real > 1e-9 * w0[:, None]).sum(axis=1)
    np.testing.assert_array_equal(result.right_half_plane_roots[decided], counted[decided])


def _raw_from_values(values):
    """The hand-assembled matrix's parameters from the library's small-signal
    values (limiter off: ``G_e = 1/R_s``, no limiter transconductance)."""
    g = {name: float(np.ravel(value)[0]) for name, value in values.items()}
    return {"L_m": g["L_m"], "R_core": 1.0 / g["G_core"], "L_lk": g["L_lk"], "R_p": g["R_p"],
            "C_w": g["C_w"], "C_mu": g["C_mu"], "C_pi": g["C_pi"], "g_m": g["g_m"],
            "hfe": g["g_m"] / g["g_pi"], "R_s": 1.0 / g["G_e"], "R_st": 1.0 / g["G_st"],
            "R_be": np.inf if g["G_be"] == 0.0 else 1.0 / g["G_be"], "R_d": 1.0 / g["G_d"],
            "C_d": g["C_d"], "n": abs(g["k"]), "sign": np.sign(g["k"]),
            # limiter off: with g_m2 = 0 and no limiter input conductance
            # (g_m2/hfe2 = 0) R_lb carries no current, so its value is moot
            "R_lb": 1.0, "g_m2": 0.0, "hfe2": 1.0}


def _designs_for_onset():
    from pathlib import Path

    from rcc.design import load_design
    from rcc.population import generate_one

    cases = sorted(Path("worked_cases").glob("*.toml"))
    designs = [(case.stem, load_design(case)) for case in cases]
    designs += [(f"pop-1-{index:04d}", generate_one(1, index).design) for index in range(8)]
    return designs


@pytest.mark.parametrize("name,design", _designs_for_onset(),
                         ids=[name for name, _ in _designs_for_onset()])
def test_regeneration_onset_is_where_the_hand_assembled_network_turns_unstable(name, design):
    """``onset_collector_current`` (bisection on the Routh count of the
    derived polynomial) against ``numpy.linalg.eigvals`` of the state matrix
    assembled by hand from Kirchhoff's laws (``state_matrix``, a different
    formulation): 1e-6 below the onset every pole of the hand-built network
    is in the left half-plane, 1e-6 above it one is in the right half-plane
    (Routh 1877; the hybrid-pi transconductance ``g_m = I_C/V_T``)."""
    from rcc.startup.dcpoint import circuit_values
    from rcc.startup.poles import onset_collector_current, small_signal_parameters

    circuit = circuit_values(design, 100.0, 298.15, design.switch.hfe_typ)
    onset = float(onset_collector_current(circuit)[0])
    trip = float(circuit.trip_current[0])

    def growth(current):
        small = small_signal_parameters(circuit, None, collector_current=current)
        raw = _raw_from_values(small.values)
        return np.linalg.eigvals(state_matrix(raw)).real.max() / natural_frequency(raw)

    if np.isinf(onset):
        # no onset up to the trip current (a drive too weak to regenerate):
        # the hand-built network is stable there too
        assert growth(trip) < 0.0
        return
    assert 1e-12 < onset < trip
    assert growth(onset * (1.0 - 1e-6)) < 0.0 < growth(onset * (1.0 + 1e-6))
