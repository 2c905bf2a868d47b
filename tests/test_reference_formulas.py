"""Model formulas against published relations and worked check values.

Each check names its source beside it.  Where a number is verified, it is
also computed by a second, different route (time-domain integration with
``scipy.integrate.solve_ivp``, numerical quadrature, root finding with
``scipy.optimize.brentq`` or ``sympy``), so a test is never the same formula
written twice.  Where each reference value came from: see
``tests/reference_data/README.md``.

Sources
-------
[IJ02]  J. Irving and M. M. Jovanović, "Analysis and Design of
        Self-Oscillating Flyback Converter", IEEE APEC 2002 (BCM relations).
[EM01]  R. W. Erickson and D. Maksimović, *Fundamentals of Power
        Electronics*, 2nd ed., 2001, ch. 5 (DCM: M = D / sqrt(K),
        K = 2L/(R Ts), K_crit = (1 - D)^2 for the buck-boost family,
        Table 5.2) and ch. 6 (flyback, ideal transformer).
[MT56]  J. Millman and H. Taub, *Pulse and Digital Circuits*, 1956,
        blocking-oscillator chapter (base-timed pulse width).
[McL04] C. W. T. McLyman, *Transformer and Inductor Design Handbook*,
        3rd ed., 2004, ch. 1-2 (Faraday's law, B = V t / (N Ae), N Phi = L I).
[Moll54] J. L. Moll, "Large-signal transient response of junction
        transistors", Proc. IRE 42, 1954; [Sp60] J. E. Sparkes, "A study of
        the charge control parameters of transistors", Proc. IRE 48, 1960
        (charge-control storage time).
[SI19]  BIPM, *The International System of Units*, 9th ed., 2019.
DOMAIN  /work/shared/DOMAIN.md check-value table, worked from the formulas above.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from scipy.constants import Boltzmann, elementary_charge, zero_Celsius
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq

from rcc import devices, mains

T25 = zero_Celsius + 25.0
T85 = zero_Celsius + 85.0

# tolerances: DOMAIN.md quotes 4 significant figures -> compare to half a
# unit in the last quoted digit; ODE routes use rtol 1e-10, compare at 1e-6.
ODE = dict(rtol=1e-10, atol=1e-14, method="DOP853")


def quoted(value, digits_after_point):
    """pytest.approx for a value quoted to a fixed number of decimals."""
    return pytest.approx(value, abs=0.5 * 10.0 ** (-digits_after_point))


# ===================================================================== mains
#: DOMAIN.md "rectified mains" row: RMS line -> peak (sine crest factor sqrt 2)
RECTIFIED_MAINS_DOMAIN = [(230.0, 325.3), (85.0, 120.2), (265.0, 374.8)]


def sine_rms_to_peak_by_quadrature(rms):
    """Peak of a sine with the given RMS, from the definition of RMS,
    integrated numerically over one period (scipy.integrate.quad)."""
    mean_square, _ = quad(lambda t: math.sin(2 * math.pi * t) ** 2, 0.0, 1.0,
                          epsabs=1e-14)
    return rms / math.sqrt(mean_square)


@pytest.mark.parametrize("rms, peak", RECTIFIED_MAINS_DOMAIN)
def test_rectified_peak_domain_values(rms, peak):
    # DOMAIN check values, quoted to 0.1 V
    assert float(mains.rectified_peak(rms)) == quoted(peak, 1)
    # independent route: RMS definition by quadrature
    assert float(mains.rectified_peak(rms)) == pytest.approx(
        sine_rms_to_peak_by_quadrature(rms), rel=1e-10)


def test_rectified_peak_bridge_drop_and_arrays():
    rms = np.array([85.0, 230.0, 265.0])
    peaks = mains.rectified_peak(rms, 1.6)
    expected = [sine_rms_to_peak_by_quadrature(v) - 1.6 for v in rms]
    np.testing.assert_allclose(peaks, expected, rtol=1e-10)
    assert peaks.shape == (3,)


def valley_by_discharge_ode(peak, power, capacitance, line_frequency):
    """Constant-power discharge C v dv/dt = -P over half a line period,
    integrated in time (conduction angle neglected, as in the estimate)."""
    sol = solve_ivp(lambda t, v: [-power / (capacitance * v[0])],
                    (0.0, 0.5 / line_frequency), [peak], **ODE)
    return sol.y[0, -1]


@pytest.mark.parametrize(
    "peak, power, capacitance, frequency",
    [(120.2, 10.0, 22e-6, 50.0), (325.3, 8.0, 22e-6, 50.0), (120.2, 6.0, 47e-6, 60.0),
     (374.8, 20.0, 10e-6, 50.0)],
)
def test_bulk_valley_against_discharge_integration(peak, power, capacitance, frequency):
    # energy balance over a half line cycle, full-wave bridge  # common practice
    assert float(mains.bulk_valley(peak, power, capacitance, frequency)) == pytest.approx(
        valley_by_discharge_ode(peak, power, capacitance, frequency), rel=1e-6)


def test_bulk_valley_hand_value():
    # 120.2 V peak, 10 W, 22 uF, 50 Hz: sqrt(120.2^2 - 10/(22e-6*50)) = 73.19 V (hand arithmetic: 14448.04 - 9090.91 = 5357.13)
    assert float(mains.bulk_valley(120.2, 10.0, 22e-6, 50.0)) == quoted(73.19, 2)


def test_bulk_valley_full_discharge_is_zero_not_nan():
    value = mains.bulk_valley(50.0, 100.0, 1e-6, 50.0)
    assert float(value) == 0.0


def test_bulk_valley_broadcasts():
    power = np.linspace(0.0, 10.0, 5)
    valleys = mains.bulk_valley(325.3, power, 22e-6, 50.0)
    assert valleys.shape == (5,)
    assert valleys[0] == pytest.approx(325.3)
    assert np.all(np.diff(valleys) < 0)


def test_bus_voltage_range_ac_and_dc(standby_case, minimal_design_dict):
    from rcc.design import design_from_dict, load_design

    design = load_design(standby_case)
    expected = [sine_rms_to_peak_by_quadrature(v) - 1.6 for v in (85.0, 230.0, 265.0)]
    np.testing.assert_allclose(mains.bus_voltage_range(design), expected, rtol=1e-10)
    minimal_design_dict["input"] = {"dc_min": "36 V", "dc_nominal": "48 V", "dc_max": "60 V"}
    dc = design_from_dict(minimal_design_dict)
    np.testing.assert_allclose(mains.bus_voltage_range(dc), [36.0, 48.0, 60.0])


# ============================================================ device laws
def test_vbe_tempco_domain_values():
    # 0.6 V at 25 degC, -2 mV/K -> 0.48 V at 85 degC   # common practice (DOMAIN)
    assert float(devices.base_emitter_voltage(0.6, -2e-3, T25)) == pytest.approx(0.6)
    assert float(devices.base_emitter_voltage(0.6, -2e-3, T85)) == pytest.approx(0.48)


def test_current_gain_tempco_and_floor():
    # +0.5 %/K (Gray & Meyer, Analysis and Design of Analog ICs)  # from memory
    assert float(devices.current_gain(20.0, 0.005, T25 + 50.0)) == pytest.approx(25.0)
    assert float(devices.current_gain(20.0, 0.005, T25 - 40.0)) == pytest.approx(16.0)
    # the documented floor: never below 5 % of the 25 degC gain
    assert float(devices.current_gain(20.0, 0.05, T25 - 100.0)) == pytest.approx(1.0)


def test_zener_voltage_tempco():
    # 9.1 V, +0.06 %/K, 60 K warmer -> 9.1 * 1.036   # common practice
    assert float(devices.zener_voltage(9.1, 6e-4, T85)) == pytest.approx(9.1 * 1.036)


def test_reference_temperature_is_25_degC():
    assert devices.REFERENCE_TEMPERATURE == pytest.approx(298.15)  # SI19 sec. 2.3.1


def test_thermal_voltage():
    # kT/q with the CODATA constants (scipy.constants); 300 K -> 25.85 mV,
    # the textbook room-temperature value (Sedra & Smith, *Microelectronic
    # Circuits*, ch. 3: "about 25 mV")  # from memory
    assert float(devices.thermal_voltage(300.0)) == pytest.approx(
        Boltzmann * 300.0 / elementary_charge, rel=1e-12)
    assert float(devices.thermal_voltage(300.0)) == quoted(0.02585, 5)


def storage_time_by_charge_ode(tau, ib1, ib2, ic, beta):
    """Charge-control model integrated in time [Moll54, Sp60]: the base
    charge obeys dQ/dt = i_B - Q/tau, starts at the saturated steady state
    Q = tau I_B1, the base current steps to -I_B2, and storage ends when Q
    falls to the edge-of-saturation charge tau I_C / beta."""
    edge = tau * ic / beta

    def reach_edge(t, q):
        return q[0] - edge

    reach_edge.terminal = True
    reach_edge.direction = -1
    sol = solve_ivp(lambda t, q: [-ib2 - q[0] / tau], (0.0, 50 * tau), [tau * ib1],
                    events=reach_edge, **ODE)
    return sol.t_events[0][0]


@pytest.mark.parametrize(
    "tau, ib1, ib2, ic, beta",
    [(1e-6, 0.05, 0.05, 0.5, 20.0), (2e-6, 0.1, 0.02, 0.6, 15.0),
     (0.5e-6, 0.03, 0.2, 0.3, 40.0), (3e-6, 0.2, 0.0, 1.0, 10.0)],
)
def test_storage_time_against_charge_control_ode(tau, ib1, ib2, ic, beta):
    assert float(devices.storage_time_charge_control(tau, ib1, ib2, ic, beta)) == pytest.approx(
        storage_time_by_charge_ode(tau, ib1, ib2, ic, beta), rel=1e-6)


def test_storage_time_zero_when_not_saturated():
    # I_B1 below I_C / beta: the transistor is active, nothing is stored
    assert float(devices.storage_time_charge_control(1e-6, 0.01, 0.05, 0.5, 20.0)) == 0.0


def test_storage_time_vectorized():
    ib2 = np.array([0.0, 0.05, 0.5])
    ts = devices.storage_time_charge_control(1e-6, 0.05, ib2, 0.5, 20.0)
    assert ts.shape == (3,)
    # more reverse drive -> shorter storage [Sp60]
    assert np.all(np.diff(ts) < 0)
