"""Start-up from the DC point: the engine against linear algebra and against
the start-up analysis (``rcc.startup.analyze_startup``).

Sources: inside one topology the engine solves ``dx/dt = A x + b`` exactly,
so a small perturbation of the equilibrium grows at the largest real part
of the eigenvalues of ``A`` (numpy.linalg.eigvals as the reference;
Chen, *Linear System Theory and Design*, 1999, ch. 4).  The start-up
verdict (right-half-plane pole of the linearized DC point) must agree in
sign with the engine.  The worked case is invented demo data.
"""

import numpy as np
import pytest

from rcc.design import Load, load_design
from rcc.engine import build_circuit, dc_initial_state, settle_topology, simulate
from rcc.engine.circuit import SWITCH_BASE_RESISTANCE
from rcc.startup import analyze_startup

BASE = load_design("worked_cases/standby_12v_universal.toml")
BUS, TEMPERATURE, HFE = 325.0, 298.15, 30.0


def perturbed_growth(design, times=(0.35e-6, 0.7e-6), perturbation=1e-9):
    """Growth rate of a 1 nV perturbation of the drive capacitor at the DC point,
    measured on the engine trajectory, and the engine's dominant eigenvalue."""
    circuit = build_circuit(design, BUS, Load("resistance", 40.0), TEMPERATURE, hfe=HFE)
    x_dc = dc_initial_state(circuit, from_dc_point=True)
    code = settle_topology(circuit, x_dc, 0)
    topology = circuit.topology(code)
    dominant = float(np.max(np.linalg.eigvals(topology.A).real))
    x0 = x_dc.copy()
    x0[circuit.state_index("v_drive")] += perturbation
    # deviation norm with every state scaled to its working range
    scale = np.array([{"i": 1.0, "v": 1.0, "q": 1e-7}[name[0]] for name in circuit.state_names])
    deviations = []
    for t_end in times:
        trace = simulate(circuit, x0, t_end, record=False, topology=code)
        assert len(trace.event_times) == 0  # still in the DC topology
        deviations.append(np.linalg.norm((trace.final_state - x_dc) / scale))
    rate = np.log(deviations[1] / deviations[0]) / (times[1] - times[0])
    return rate, dominant, circuit


def test_growth_from_dc_point_matches_dominant_eigenvalue():
    rate, dominant, _ = perturbed_growth(BASE)
    assert dominant > 0
    # after 0.35 us the faster decaying modes are gone and over 0.35 us the
    # slower modes (1e5 1/s and below) change the log-ratio
    # by well under 1 %
    assert rate == pytest.approx(dominant, rel=0.01)


@pytest.mark.parametrize("change", [
    {},                                                  # the worked case starts
    {"drive.capacitance": 1e-9},                         # small drive capacitor, starts
    {"transformer.feedback_phase": "degenerative"},      # reversed winding, stalls
])
def test_engine_grows_exactly_when_startup_analysis_says_starts(change):
    design = BASE.with_values(change) if change else BASE
    verdict = analyze_startup(design, bus_voltage=BUS, temperature=TEMPERATURE, hfe=HFE)
    if verdict.starts:
        rate, dominant, _ = perturbed_growth(design)
        assert rate > 1e4 and dominant > 0
    else:
        # stays at the DC point: no switching over 4 ms and the deviation
        # does not grow between 2 ms and 4 ms (a non-normal transient may
        # amplify it briefly at first)
        rate, dominant, _ = perturbed_growth(design, times=(2e-3, 4e-3), perturbation=1e-3)
        # (a drift of a few per second over milliseconds is not a start)
        assert rate < 1e3 and dominant <= 0.0


def test_growth_rate_within_ten_percent_of_startup_pole():
    """Issue 4, sec. 4: the engine's growth from the DC point within 10 % of
    the start-up analysis's dominant pole.  Both linearize the same network
    (hybrid-pi model with ``C_mu`` from collector to base: Giacoletto, RCA
    Review 15, 1954; Gray, Hurst, Lewis & Meyer, *Analysis and Design of
    Analog Integrated Circuits*, 5th ed., 2009, sec. 1.4); they differ in the
    junction (a chord of the exponential law in the stored charge against
    the tangent ``r_pi``), which moves this pole by under 1 %."""
    verdict = analyze_startup(BASE, bus_voltage=BUS, temperature=TEMPERATURE, hfe=HFE)
    rate, _, _ = perturbed_growth(BASE)
    assert verdict.starts
    assert rate == pytest.approx(verdict.growth_rate, rel=0.10)


def test_startup_pole_gap_is_the_collector_base_capacitance():
    """The engine's DC-point pole equals the start-up analysis's within 1 %
    (measured 0.4 %) because both put the switch's collector-base
    capacitance ``C_mu`` between collector and base: the start-up
    analysis's own network with ``C_mu`` moved to collector-ground (same
    total node capacitance, the engine's placement before the Miller
    feedback) is over 20 % faster (measured 29 %), and with its junction
    resistance set to the engine's (the chord of the junction law at the DC
    point instead of the tangent ``r_pi``) it moves by under 2 %, so the
    junction is not what closes the gap.  Measured: engine 1.3226e7 1/s,
    start-up analysis 1.3157e7 1/s (0.5 %).
    Hybrid-pi model: Giacoletto, RCA Review 15, 1954; Gray, Hurst, Lewis &
    Meyer, *Analysis and Design of Analog Integrated Circuits*, 5th ed.,
    2009, sec. 1.4 (``r_pi = beta_0 / g_m``, ``C_mu`` collector-base) and
    sec. 7.2 (Miller effect); eigenvalues by numpy.linalg.eigvals and the
    companion matrix (Horn & Johnson 2013)."""
    from rcc.startup.dcpoint import circuit_values, solve_dc_point
    from rcc.startup.poles import SmallSignal, network_poles, small_signal_parameters

    values = circuit_values(BASE, BUS, np.array([TEMPERATURE]), np.array([HFE]))
    small = small_signal_parameters(values, solve_dc_point(values))

    def pole(**changes):
        changed = dict(small.values)
        changed.update({name: np.atleast_1d(value) for name, value in changes.items()})
        return float(network_poles(SmallSignal(changed, small.natural_frequency)).growth_rate[0])

    _, engine_pole, _ = perturbed_growth(BASE)
    c_mu = small.values["C_mu"]
    hybrid_pi = pole()
    lumped = pole(C_mu=1e-6 * c_mu, C_w=small.values["C_w"] + c_mu)
    assert engine_pole == pytest.approx(hybrid_pi, rel=0.01)
    assert lumped > 1.2 * engine_pole          # the gap the Miller feedback closes
    # the junction: r_pi against the engine's chord of the junction law at
    # the DC point (its slope in collector current times hFE, plus the base
    # spreading resistance), with g_m and C_pi scaled so that the current
    # gain hFE / (1 + s tau_BF) is unchanged (Gray et al. 2009, sec. 1.4)
    _, _, circuit = perturbed_growth(BASE)
    table = circuit.parameters["junctions"]["switch"]
    x_dc = dc_initial_state(circuit, from_dc_point=True)
    collector = x_dc[circuit.state_index("q_base")] * 2.0 * np.pi * \
        BASE.switch.transition_frequency
    chord = int(np.searchsorted(table.currents, collector)) - 1
    base_resistance = HFE * table.resistances[chord] + SWITCH_BASE_RESISTANCE
    tau_forward = 1.0 / (2.0 * np.pi * BASE.switch.transition_frequency)
    junction = pole(g_pi=1.0 / base_resistance, g_m=HFE / base_resistance,
                    C_pi=HFE * tau_forward / base_resistance - c_mu)
    assert junction == pytest.approx(hybrid_pi, rel=0.02)


def _dc_point_pole(design, bus_voltage, temperature, hfe):
    """Dominant eigenvalue of the engine's topology at the DC point
    (numpy.linalg.eigvals)."""
    circuit = build_circuit(design, bus_voltage, Load("resistance", 40.0), temperature, hfe=hfe)
    x_dc = dc_initial_state(circuit, from_dc_point=True)
    eigenvalues = np.linalg.eigvals(circuit.topology(settle_topology(circuit, x_dc, 0)).A)
    return eigenvalues[np.argmax(eigenvalues.real)]


@pytest.mark.parametrize("collector_base", [0.1e-12, 20e-12, 40e-12])
def test_collector_base_capacitance_slows_the_pole_as_in_the_startup_analysis(collector_base):
    """The switch output capacitance is the collector-base capacitance (C_mu
    of the hybrid-pi model, sources above); fed back into the base it opposes
    the feedback winding (the Miller effect: J. M. Miller, Sci. Papers Bureau
    of Standards 15, 1920).  Moving capacitance from the winding (collector
    to ground) to the switch (collector to base) at a fixed total slows the
    start-up pole from 1.62e7 to 0.97e7 1/s in the start-up analysis; the
    engine follows within 2 % (measured 0.3-0.6 %).  With C_mu lumped to
    ground the engine stayed at 1.63e7 1/s whatever the split."""
    total = BASE.node_capacitance
    design = BASE.with_values({"switch.output_capacitance": collector_base,
                               "transformer.winding_capacitance": total - collector_base})
    verdict = analyze_startup(design, bus_voltage=BUS, temperature=TEMPERATURE, hfe=HFE)
    pole = _dc_point_pole(design, BUS, TEMPERATURE, HFE)
    assert verdict.starts and pole.imag == 0.0  # a real regenerative root
    assert pole.real == pytest.approx(verdict.growth_rate, rel=0.02)


@pytest.mark.parametrize("temperature", [273.15, 333.15])
@pytest.mark.parametrize("hfe", [20.0, 45.0])
def test_dc_point_pole_agrees_with_startup_analysis_at_low_line(temperature, hfe):
    """At the lowest bus (rectified 85 V RMS, 119 V) and the hFE/temperature
    corners the engine's DC-point pole lies within 5 % of the start-up pole.
    The remaining gap is the slope of the engine's junction chord against
    the incremental ``r_pi = hFE V_T / I_C`` of the exponential law (Gray,
    Hurst, Lewis & Meyer 2009, sec. 1.4): measured -1.0 to +1.7 % (1-4 %
    with the former fixed 2 ohm junction)."""
    verdict = analyze_startup(BASE, temperature=temperature, hfe=hfe)
    pole = _dc_point_pole(BASE, verdict.bus_voltage, temperature, hfe)
    assert verdict.starts and pole.imag == 0.0
    assert pole.real == pytest.approx(verdict.growth_rate, rel=0.05)
