"""Robustness of the engine over random designs from power-on.

Property (issue 4, checks): for any valid design the engine ends in finite
time with finite states, or stops with a clear :class:`EngineError` (event
storm / no consistent topology / event budget), never a NaN or a hang.
Designs are random variations of the invented worked case.
"""

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rcc.design import Load, load_design
from rcc.engine import EngineError, build_circuit, dc_initial_state, simulate

BASE = load_design("worked_cases/standby_12v_universal.toml")

designs = st.fixed_dictionaries({
    "startup.resistance": st.floats(1e5, 3e6),
    "drive.resistance": st.floats(33.0, 1000.0),
    "drive.capacitance": st.floats(2.2e-9, 470e-9),
    "limiter.sense_resistance": st.floats(0.3, 5.0),
    "transformer.coupling": st.floats(0.9, 0.9999),
    "transformer.magnetizing_inductance": st.floats(0.3e-3, 5e-3),
    "transformer.feedback_turns": st.integers(2, 16),
    "transformer.feedback_phase": st.sampled_from(["regenerative", "regenerative",
                                                   "degenerative"]),
    "output.capacitance": st.floats(47e-6, 2200e-6),
    "clamp.type": st.sampled_from(["rcd", "zener", "none"]),
    "regulation.method": st.sampled_from(["feedback-winding", "none", "optocoupler"]),
})
operating = st.tuples(
    st.floats(60.0, 380.0),                                   # bus voltage [V]
    st.sampled_from(["resistance", "current", "power"]),
    st.floats(0.05, 1.0),                                     # load scale [1]
    st.sampled_from([20.0, 30.0, 45.0]),                      # hFE at 25 degC
    st.floats(233.15, 358.15),                                # temperature [K]
)


def variant(values):
    extra = {"clamp.voltage": 200.0, "regulation.reference_voltage": 10.0,
             "regulation.ctr": 0.5}
    return BASE.with_values({**values, **extra})


@settings(max_examples=200, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(designs, operating)
def test_random_designs_from_power_on_finish_or_fail_clearly(values, condition):
    bus, kind, scale, hfe, temperature = condition
    design = variant(values)
    load = {"resistance": Load("resistance", 40.0 / scale),
            "current": Load("current", 0.3 * scale),
            "power": Load("power", 4.0 * scale)}[kind]
    circuit = build_circuit(design, bus, load, temperature, hfe=hfe)
    try:
        trace = simulate(circuit, dc_initial_state(circuit), 1e-3, record=False,
                         max_events=200_000)
    except EngineError as error:
        message = str(error)
        assert any(word in message for word in
                   ("event storm", "no consistent topology", "switching events"))
        return
    assert np.all(np.isfinite(trace.final_state))
    assert trace.final_time >= 1e-3 - 1e-14
