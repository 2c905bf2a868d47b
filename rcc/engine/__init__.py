"""Time-domain engine: exact event-driven simulation of the piecewise-linear circuit.

Public API
----------
:func:`build_circuit` builds the circuit of a design at one operating
condition (:mod:`rcc.engine.circuit`); :func:`simulate` integrates it from
an initial state (:func:`dc_initial_state`, :func:`power_on_state`) and
returns a :class:`Trace`; :func:`advance_cycle` advances one switching
cycle turn-on to turn-on and returns what a periodic-steady-state solver
needs (segment transition matrices, saltation matrices, monodromy);
:func:`cycle_power` gives its exact power balance and the loss in every
element.
"""

from rcc._numba_cache import configure as _configure_numba_cache

_configure_numba_cache()  # per-user kernel cache, damaged files dropped (before numba loads)

from rcc.engine.circuit import (SIGNAL_NAMES, SWITCH_STATES, Circuit,  # noqa: E402
                                EngineError, Topology, build_circuit)
from rcc.engine.simulate import (CyclePower, CycleResult, EventData,  # noqa: E402
                                 Segment, Trace,
                                 advance_cycle, cycle_power, dc_initial_state, power_on_state,
                                 segment_energy, settle_topology, simulate)

__all__ = [
    "Circuit", "Topology", "EngineError", "build_circuit", "SIGNAL_NAMES", "SWITCH_STATES",
    "Trace", "Segment", "EventData", "CycleResult", "CyclePower", "simulate", "advance_cycle",
    "cycle_power",
    "dc_initial_state", "power_on_state", "segment_energy", "settle_topology",
]
