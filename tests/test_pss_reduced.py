"""Periodic steady state and Floquet multipliers of reduced piecewise-linear
oscillators with known answers.

Systems (all invented test systems, not circuits of a product):

- *relaxation oscillator*: an RC charged and discharged by a hysteresis
  comparator, with a passive RC filter on its voltage.  Period from the
  first-order RC law ``x(t) = V + (x0 - V) exp(-t/tau)`` (Sedra & Smith,
  *Microelectronic Circuits*, 7th ed., 2015, astable multivibrator section
  # from memory for the section); the filter mode's multiplier is exactly
  ``exp(-T/tau_f)`` because the section only constrains the comparator
  voltage.
- *relay oscillator*: ``x'' + 2 zeta x' + x = d sign(x')`` (a damped
  oscillator driven by a relay on its velocity).  Each half cycle is a
  damped half-oscillation about ``+-d`` starting and ending at rest, so the
  half period is ``pi/omega_d``, the amplitude ``a = d (1+q)/(1-q)`` with
  ``q = exp(-zeta pi/omega_d)`` and the non-trivial multiplier ``q^2``
  (derived from the closed-form solution of the damped oscillator; the
  piecewise-linear relay oscillator of Andronov, Vitt & Khaikin, *Theory of
  Oscillators*, 1966, ch. 3 # from memory for the chapter).  Its vector
  field jumps at the switching line, so the saltation matrices matter.
- *Liénard oscillator with piecewise-linear damping* (continuous field):
  the multiplier of a planar cycle is ``exp(oint div f dt)`` (Perko,
  *Differential Equations and Dynamical Systems*, 3rd ed., 2001, sec. 3.4,
  Theorem 2), here ``exp(sum_k trace(A_k) tau_k)``.  For the relay
  oscillator the same identity with the determinant of each saltation
  matrix, ``(n.f+)/(n.f-)`` (matrix determinant lemma), applies.

Independent references: scipy's ``solve_ivp`` (Radau, rtol 1e-11) with
event location for brute-force transients, and central finite differences
of the return map.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from rcc.engine.floquet import (
    AffineMode,
    CycleError,
    Guard,
    PiecewiseAffineSystem,
    classify_multipliers,
    finite_difference_jacobian,
    monodromy,
    poincare_jacobian,
    saltation_matrix,
)
from rcc.engine.pss import find_periodic_orbit

# ----------------------------------------------------------------- systems
TAU, TAU_FILTER, SUPPLY, LOW, HIGH = 1.0e-3, 0.4e-3, 10.0, 3.0, 7.0


def relaxation_oscillator() -> PiecewiseAffineSystem:
    """State (comparator capacitor voltage x, filter voltage y) [V]."""
    matrix = np.array([[-1.0 / TAU, 0.0], [1.0 / TAU_FILTER, -1.0 / TAU_FILTER]])
    charge = AffineMode(matrix, np.array([SUPPLY / TAU, 0.0]),
                        (Guard(np.array([1.0, 0.0]), -HIGH, +1, "discharge", "upper-trip"),))
    discharge = AffineMode(matrix, np.array([0.0, 0.0]),
                           (Guard(np.array([1.0, 0.0]), -LOW, -1, "charge", "lower-trip"),))
    return PiecewiseAffineSystem({"charge": charge, "discharge": discharge},
                                 section_mode="charge", max_step=TAU / 50)


ZETA, RELAY = 0.1, 1.0


def relay_oscillator() -> PiecewiseAffineSystem:
    """x'' + 2 zeta x' + x = d sign(x'), unit natural frequency [rad/s]."""
    matrix = np.array([[0.0, 1.0], [-1.0, -2.0 * ZETA]])
    up = AffineMode(matrix, np.array([0.0, +RELAY]),
                    (Guard(np.array([0.0, 1.0]), 0.0, -1, "down", "velocity-falls"),))
    down = AffineMode(matrix, np.array([0.0, -RELAY]),
                      (Guard(np.array([0.0, 1.0]), 0.0, +1, "up", "velocity-rises"),))
    return PiecewiseAffineSystem({"up": up, "down": down}, section_mode="up", max_step=0.05)


NEGATIVE_DAMPING, POSITIVE_DAMPING = 0.2, 0.3


def lienard_oscillator() -> PiecewiseAffineSystem:
    """x' = y, y' = -x - h(y); h = -a y for |y| <= 1, continuous and with
    slope b outside: a stable limit cycle, continuous vector field."""
    a, b = NEGATIVE_DAMPING, POSITIVE_DAMPING
    middle = np.array([[0.0, 1.0], [-1.0, a]])
    outer = np.array([[0.0, 1.0], [-1.0, -b]])
    # h(y) = -a sign(y) + b (y - sign(y)) for |y| > 1  ->  y' = -x - b y + (a + b) sign(y)
    upper = AffineMode(outer, np.array([0.0, a + b]),
                       (Guard(np.array([0.0, 1.0]), -1.0, -1, "middle-down", "leave-upper"),))
    lower = AffineMode(outer, np.array([0.0, -(a + b)]),
                       (Guard(np.array([0.0, 1.0]), 1.0, +1, "middle-up", "leave-lower"),))
    middle_down = AffineMode(middle, np.zeros(2),
                             (Guard(np.array([0.0, 1.0]), 1.0, -1, "lower", "enter-lower"),
                              Guard(np.array([0.0, 1.0]), -1.0, +1, "upper", "enter-upper")))
    middle_up = AffineMode(middle, np.zeros(2),
                           (Guard(np.array([0.0, 1.0]), -1.0, +1, "upper", "enter-upper"),
                            Guard(np.array([0.0, 1.0]), 1.0, -1, "lower", "enter-lower")))
    return PiecewiseAffineSystem({"upper": upper, "lower": lower, "middle-down": middle_down,
                                  "middle-up": middle_up}, section_mode="upper", max_step=0.02)


def _advance(system):
    return lambda state: system.advance_cycle(state, horizon=1e3)


# ------------------------------------------------------ relaxation oscillator
def test_relaxation_period_matches_rc_law():
    """Period tau ln((V-Vl)/(V-Vh)) + tau ln(Vh/Vl) from the RC law
    (Sedra & Smith 2015, astable multivibrator  # from memory for the section)."""
    system = relaxation_oscillator()
    orbit = find_periodic_orbit(_advance(system), np.array([LOW, 5.0]),
                                scale=np.array([SUPPLY, SUPPLY]), tolerance=1e-12)
    expected = TAU * np.log((SUPPLY - LOW) / (SUPPLY - HIGH)) + TAU * np.log(HIGH / LOW)
    assert orbit.converged and orbit.method == "newton"
    assert orbit.period == pytest.approx(expected, rel=1e-10)
    assert orbit.cycle.event_sequence == ("upper-trip", "lower-trip")
    assert orbit.state[0] == pytest.approx(LOW, rel=1e-12)


def test_relaxation_filter_multiplier_is_exp_of_period():
    """The section fixes x, the filter mode decays by exp(-T/tau_f) per cycle
    (linear filter, closed form)."""
    system = relaxation_oscillator()
    orbit = find_periodic_orbit(_advance(system), np.array([LOW, 1.0]),
                                scale=np.array([SUPPLY, SUPPLY]), tolerance=1e-12)
    assert orbit.multipliers.shape == (1,)
    assert orbit.multipliers[0].real == pytest.approx(np.exp(-orbit.period / TAU_FILTER), rel=1e-9)
    assert orbit.report.stable
    # An affine map: Newton lands on the fixed point in one step.
    assert orbit.iterations == 1


def test_relaxation_fixed_point_matches_reference_integrator():
    """Filter voltage at the lower trip on the cycle vs a long scipy Radau
    transient with event location (scipy.integrate.solve_ivp)."""
    orbit = find_periodic_orbit(_advance(relaxation_oscillator()), np.array([LOW, 0.0]),
                                scale=np.array([SUPPLY, SUPPLY]), tolerance=1e-13)

    def rhs(_t, z, charging):
        x, y = z
        return [((SUPPLY if charging else 0.0) - x) / TAU, (x - y) / TAU_FILTER]

    state, charging = np.array([LOW, 0.0]), True
    for _ in range(60):  # 60 periods: the filter mode has decayed by exp(-60 T/tau_f)
        threshold = HIGH if charging else LOW
        event = lambda _t, z, c=charging, h=threshold: z[0] - h  # noqa: E731
        event.terminal = True
        event.direction = 1 if charging else -1
        solution = solve_ivp(rhs, (0.0, 1.0), state, method="Radau", args=(charging,),
                             events=event, rtol=1e-11, atol=1e-13)
        state = solution.y_events[0][0]
        charging = not charging
    assert state[1] == pytest.approx(orbit.state[1], rel=1e-6)


# ------------------------------------------------------------ relay oscillator
def _relay_closed_form():
    omega_d = np.sqrt(1.0 - ZETA**2)
    q = np.exp(-ZETA * np.pi / omega_d)
    amplitude = RELAY * (1.0 + q) / (1.0 - q)
    return 2.0 * np.pi / omega_d, amplitude, q * q


def test_relay_oscillator_closed_form():
    """Period 2 pi/omega_d, amplitude d(1+q)/(1-q), multiplier q^2 (closed
    form of the damped oscillator, see module docstring)."""
    period, amplitude, multiplier = _relay_closed_form()
    orbit = find_periodic_orbit(_advance(relay_oscillator()), np.array([-2.0, 0.0]),
                                scale=np.array([1.0, 1.0]), tolerance=1e-12)
    assert orbit.converged and orbit.method == "newton"
    assert orbit.period == pytest.approx(period, rel=1e-9)
    assert orbit.state[0] == pytest.approx(-amplitude, rel=1e-9)
    assert orbit.multipliers.shape == (1,)
    assert orbit.multipliers[0].real == pytest.approx(multiplier, rel=1e-8)
    assert orbit.cycle.event_sequence == ("velocity-falls", "velocity-rises")


def test_relay_multiplier_equals_liouville_and_saltation_determinants():
    """Planar cycle: multiplier = prod det(exp(A tau)) * prod det(S) with
    det(exp(A tau)) = exp(trace(A) tau) (Liouville/Jacobi formula) and
    det(S) = (n.f+)/(n.f-) (matrix determinant lemma)."""
    orbit = find_periodic_orbit(_advance(relay_oscillator()), np.array([-3.0, 0.0]),
                                scale=np.array([1.0, 1.0]), tolerance=1e-12)
    product = 1.0
    for segment, event in zip(orbit.cycle.segments, orbit.cycle.events):
        product *= np.exp(-2.0 * ZETA * segment.duration)
        product *= (event.gradient @ event.field_after) / (event.gradient @ event.field_before)
    assert orbit.multipliers[0].real == pytest.approx(product, rel=1e-9)
    # and the full monodromy (with the section saltation) has det = multiplier * 1
    assert np.linalg.det(monodromy(orbit.cycle)) == pytest.approx(product, rel=1e-9)


def test_relay_full_monodromy_has_trivial_multiplier_one():
    """The flow direction is an eigenvector of the full monodromy with
    eigenvalue 1 (autonomous system; di Bernardo et al. 2008, sec. 2.5)."""
    orbit = find_periodic_orbit(_advance(relay_oscillator()), np.array([-3.0, 0.0]),
                                scale=np.array([1.0, 1.0]), tolerance=1e-12)
    values = np.sort(np.abs(np.linalg.eigvals(monodromy(orbit.cycle))))
    assert values[-1] == pytest.approx(1.0, rel=1e-8)


# ----------------------------------------------------------- Liénard oscillator
def test_lienard_multiplier_is_exp_of_divergence_integral():
    """Continuous field: multiplier exp(oint div f dt) (Perko 2001, sec. 3.4,
    Theorem 2); the saltation matrices are the identity."""
    orbit = find_periodic_orbit(_advance(lienard_oscillator()), np.array([-1.0, 1.0]),
                                scale=np.array([1.0, 1.0]), tolerance=1e-12)
    integral = sum((NEGATIVE_DAMPING if s.label.startswith("middle") else -POSITIVE_DAMPING)
                   * s.duration for s in orbit.cycle.segments)
    assert orbit.converged
    assert orbit.multipliers[0].real == pytest.approx(np.exp(integral), rel=1e-9)
    for event in orbit.cycle.events:
        salt = saltation_matrix(event.field_before, event.field_after, event.gradient)
        np.testing.assert_allclose(salt, np.eye(2), atol=1e-12)
    assert orbit.cycle.event_sequence == ("leave-upper", "enter-lower", "leave-lower",
                                          "enter-upper")


def _reference_return_map_relay(state):
    """Return map of the relay oscillator with scipy Radau (independent of
    the exponential and event code of the package)."""
    def rhs(_t, z, u):
        return [z[1], -z[0] - 2.0 * ZETA * z[1] + u]

    z = np.asarray(state, dtype=float)
    for u, direction in ((+RELAY, -1), (-RELAY, +1)):
        event = lambda _t, y, _u: y[1]  # noqa: E731
        event.terminal, event.direction = True, direction
        # leave the switching line before looking for the next crossing
        sol = solve_ivp(rhs, (0.0, 100.0), z, method="Radau", args=(u,), events=event,
                        rtol=1e-12, atol=1e-14, first_step=1e-6)
        z = sol.y_events[0][-1]
    return z


@pytest.mark.parametrize("make, start", [(relay_oscillator, [-2.5, 0.0]),
                                         (lienard_oscillator, [-0.8, 1.0]),
                                         (relaxation_oscillator, [LOW, 4.0])])
def test_saltation_jacobian_matches_finite_differences(make, start):
    """Poincaré-map Jacobian from exponentials and saltation matrices vs
    central differences of the return map (off the orbit too)."""
    system = make()
    cycle = system.advance_cycle(np.array(start), horizon=1e3)
    analytic = poincare_jacobian(cycle)
    numeric = finite_difference_jacobian(lambda x: system.advance_cycle(x, 1e3).end_state,
                                         np.array(start), 1e-6 * max(1.0, abs(start[0])))
    np.testing.assert_allclose(analytic, numeric, rtol=1e-5, atol=1e-6)


def test_relay_jacobian_matches_reference_integrator_differences():
    """Saltation Jacobian vs finite differences of a scipy Radau return map."""
    start = np.array([-2.5, 0.0])
    cycle = relay_oscillator().advance_cycle(start, horizon=1e3)
    numeric = finite_difference_jacobian(_reference_return_map_relay, start, 1e-5)
    np.testing.assert_allclose(poincare_jacobian(cycle)[:, 0], numeric[:, 0], rtol=1e-5,
                               atol=1e-7)
    np.testing.assert_allclose(cycle.end_state, _reference_return_map_relay(start),
                               rtol=1e-9, atol=1e-10)


def test_multiplier_matches_decay_of_a_perturbation():
    """Per-cycle decay of a perturbation of the cycle (brute-force return-map
    iteration) equals the largest multiplier within 1 %."""
    system = lienard_oscillator()
    advance = _advance(system)
    orbit = find_periodic_orbit(advance, np.array([-1.0, 1.0]), scale=np.array([1.0, 1.0]),
                                tolerance=1e-13)
    x = orbit.state + np.array([1e-4, 0.0])
    deviations = []
    for _ in range(4):
        x = advance(x).end_state
        deviations.append(np.linalg.norm(x - orbit.state))
    ratios = np.array(deviations[1:]) / np.array(deviations[:-1])
    np.testing.assert_allclose(ratios, abs(orbit.multipliers[0]), rtol=1e-2)


def test_fixed_point_matches_long_transient():
    """Newton's fixed point vs iterating the map (a long transient) to 1e-6."""
    system = lienard_oscillator()
    advance = _advance(system)
    orbit = find_periodic_orbit(advance, np.array([-2.0, 1.0]), scale=np.array([1.0, 1.0]),
                                tolerance=1e-12)
    x = np.array([-2.0, 1.0])
    for _ in range(60):
        x = advance(x).end_state
    np.testing.assert_allclose(x, orbit.state, rtol=1e-6)


def test_newton_fails_then_transient_fallback_is_reported():
    """With no Newton iterations allowed the solver says it used the
    transient, and still finds the relay cycle (closed form above)."""
    from rcc.engine.pss import FallbackWarning
    period, amplitude, _ = _relay_closed_form()
    with pytest.warns(FallbackWarning):
        orbit = find_periodic_orbit(_advance(relay_oscillator()), np.array([-2.0, 0.0]),
                                    scale=np.array([1.0, 1.0]), tolerance=1e-9,
                                    max_iterations=0)
    assert orbit.method == "transient-fallback"
    assert orbit.converged
    assert orbit.state[0] == pytest.approx(-amplitude, rel=1e-7)


def test_no_cycle_is_a_clear_error():
    """A damped system without a relay never returns to the section."""
    from rcc.engine.pss import PeriodicSteadyStateError
    matrix = np.array([[0.0, 1.0], [-1.0, -0.5]])
    modes = {"a": AffineMode(matrix, np.zeros(2),
                             (Guard(np.array([1.0, 0.0]), -5.0, +1, "a", "never"),))}
    system = PiecewiseAffineSystem(modes, "a", max_step=0.1)
    with pytest.raises(PeriodicSteadyStateError, match="no switching cycle"):
        find_periodic_orbit(lambda x: system.advance_cycle(x, horizon=50.0), np.array([1.0, 0.0]))
    with pytest.raises(CycleError):
        system.advance_cycle(np.array([1.0, 0.0]), horizon=50.0)


# ------------------------------------------------------------ classification
def test_classify_flags():
    """Kuznetsov 2004, sec. 4.5/5.4: flip at -1, Neimark-Sacker pair on the
    unit circle, fold at +1."""
    flip = classify_multipliers([-0.98, 0.2])
    assert flip.period_doubling and flip.stable and not flip.quasi_periodic
    # |m| = 0.999 at 0.3 rad per cycle: the mode keeps 0.999^(2 pi/0.3) = 98 %
    # of its amplitude per oscillation -> flagged; |m| = 0.984 at 0.915 rad
    # keeps 0.984^(6.87) = 90 % -> a well-damped slow mode, not flagged.
    close = 0.999 * np.exp(0.3j)
    pair = classify_multipliers([close, np.conj(close)])
    assert pair.quasi_periodic and not pair.period_doubling and pair.stable
    damped = classify_multipliers([0.6 + 0.78j, 0.6 - 0.78j])
    assert not damped.quasi_periodic and damped.stable
    unstable = classify_multipliers([1.2, 0.1])
    assert not unstable.stable and unstable.largest_modulus == pytest.approx(1.2)
    calm = classify_multipliers([0.3, -0.2 + 0.1j, -0.2 - 0.1j])
    assert calm.stable and not calm.flags
