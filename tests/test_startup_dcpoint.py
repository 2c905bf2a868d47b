"""Power-on DC point: Newton solution against scipy.optimize.root on the
same Ebers-Moll equations written out here, the limiter holding the switch
near Vbe/Rs, region and error reporting."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import Boltzmann, elementary_charge
from scipy.optimize import root

from rcc.design import load_design
from rcc.startup.dcpoint import (LIMITER_REFERENCE_CURRENT, REVERSE_GAIN, DcPointError,
                                 circuit_values, solve_dc_point)
from tests.conftest import WORKED_CASES

STANDBY = WORKED_CASES / "standby_12v_universal.toml"


def reference_dc_point(v, i, guess):
    """The DC network solved by scipy.optimize.root (MINPACK hybrd) from
    ``guess``.  Ebers-Moll transport model (Ebers & Moll, Proc. IRE 42, 1954).
    """
    vt = Boltzmann * v.temperature[i] / elementary_charge
    is1 = v.switch_reference_current[i] * np.exp(-v.switch_vbe[i] / vt)
    is2 = LIMITER_REFERENCE_CURRENT * np.exp(-v.limiter_vbe[i] / vt)

    def bjt(i_s, beta, vbe, vbc):
        ic = i_s * (np.exp(vbe / vt) - np.exp(vbc / vt)) - i_s / REVERSE_GAIN * (
            np.exp(vbc / vt) - 1)
        ib = i_s / beta * (np.exp(vbe / vt) - 1) + i_s / REVERSE_GAIN * (np.exp(vbc / vt) - 1)
        return ic, ib

    vbus = v.bus_voltage[i]

    def equations(x):
        vb, ve, vl, vc = x
        ic1, ib1 = bjt(is1, v.hfe[i], vb - ve, vb - vc)
        ic2, ib2 = bjt(is2, v.limiter_hfe[i], vl, vl - vb)
        return [
            v.startup_conductance[i] * (vbus - vb) - v.base_emitter_conductance[i] * (vb - ve)
            - ib1 - ic2,
            ic1 + ib1 + v.base_emitter_conductance[i] * (vb - ve) - ve / v.sense_resistance[i]
            - (ve - vl) / v.limiter_base_resistance[i],
            (ve - vl) / v.limiter_base_resistance[i] - ib2,
            (vbus - vc) - v.primary_resistance[i] * ic1,
        ]

    solution = root(equations, guess, method="hybr", options={"xtol": 1e-13})
    assert solution.success
    return solution.x, bjt(is1, v.hfe[i], solution.x[0] - solution.x[1],
                           solution.x[0] - solution.x[3])[0]


@pytest.mark.parametrize("startup", ["680 kohm", "100 kohm", "10 kohm"])
def test_newton_agrees_with_scipy_root(startup):
    design = load_design(STANDBY).with_values({"startup.resistance": startup,
                                               "drive.base_emitter_resistance": "22 kohm"})
    v = circuit_values(design, np.array([150.0, 300.0, 370.0]), np.array([273.15, 333.15, 300.0]))
    dc = solve_dc_point(v)
    for i in range(3):
        # hybrd from a start 30 mV off on every junction node (it does not
        # converge from a cold start on these exponentials)
        guess = [dc.base_voltage[i] + 0.03, dc.emitter_voltage[i] - 0.03,
                 dc.limiter_base_voltage[i] + 0.03, dc.collector_voltage[i] - 1.0]
        x, ic = reference_dc_point(v, i, guess)
        np.testing.assert_allclose(dc.base_voltage[i], x[0], atol=1e-9)
        np.testing.assert_allclose(dc.emitter_voltage[i], x[1], atol=1e-9)
        np.testing.assert_allclose(dc.collector_current[i], ic, rtol=1e-7)


def test_limiter_holds_the_switch_near_vbe_over_rs():
    """With a surplus of start current the limiter holds the collector
    current where the sense voltage equals the limiter base voltage plus its
    base-resistor drop: about 0.6 V over the sense resistor  # common practice
    """
    design = load_design(WORKED_CASES / "fault_limiter_stall.toml")
    v = circuit_values(design, np.array([120.0, 200.0, 370.0]), 298.15)
    dc = solve_dc_point(v)
    assert dc.limiter_active.all()
    sense_voltage = dc.collector_current * design.limiter.sense_resistance
    # I_E R_s = V_BE2 + I_B2 R_lb (+ the switch base current, < 5 %)
    ib2 = (dc.emitter_voltage - dc.limiter_base_voltage) / design.limiter.base_resistance
    np.testing.assert_allclose(dc.emitter_voltage,
                               dc.limiter_base_voltage + ib2 * design.limiter.base_resistance)
    np.testing.assert_allclose(sense_voltage, dc.emitter_voltage, rtol=0.1)
    assert np.all((sense_voltage > 0.55) & (sense_voltage < 0.9))
    # the start current rises threefold, the collector current barely moves
    assert np.ptp(dc.collector_current) < 0.15 * dc.collector_current.mean()


def test_regions():
    design = load_design(STANDBY).with_values({"drive.base_emitter_resistance": "22 kohm"})
    dc = solve_dc_point(circuit_values(design, np.array([0.3, 150.0]), 298.15))
    assert list(dc.region) == ["cut-off", "active"]
    # a large primary resistance drops the collector below the base: saturated
    heavy = design.with_values({"transformer.primary_resistance": "100 kohm"})
    dc = solve_dc_point(circuit_values(heavy, 150.0, 298.15))
    assert dc.region[0] == "saturated"


def test_non_convergence_is_a_clear_error():
    design = load_design(STANDBY)
    with pytest.raises(DcPointError, match=r"did not converge for 1 of 1 circuit\(s\)"):
        solve_dc_point(circuit_values(design, 300.0, 298.15), max_iterations=2)
    assert issubclass(DcPointError, RuntimeError)


def test_scalar_and_array_inputs_agree():
    design = load_design(STANDBY)
    one = solve_dc_point(circuit_values(design, 300.0, 298.15))
    many = solve_dc_point(circuit_values(design, np.array([100.0, 300.0]), 298.15))
    np.testing.assert_allclose(one.collector_current[0], many.collector_current[1])
