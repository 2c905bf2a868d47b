"""DC operating point of the ringing-choke flyback at power-on.

At the instant of switch-on every winding is a short at DC, every capacitor
is open (the drive capacitor and the regulation filter capacitor are empty)
and the regulation path is off.  What is left is the start-up resistor, the
optional base-emitter resistor, the switch, the sense resistor and the
current-limit transistor with its base resistor (``notes/circuit.md``).
Both transistors use the Ebers-Moll transport model.  The nonlinear network
is solved by a damped Newton iteration, vectorized over any number of
circuits at once.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rcc.devices import base_emitter_voltage, current_gain, thermal_voltage

__all__ = [
    "DcPointError",
    "CircuitValues",
    "DcPoint",
    "circuit_values",
    "solve_dc_point",
    "LIMITER_REFERENCE_CURRENT",
    "REVERSE_GAIN",
    "CUTOFF_CURRENT",
]

#: Collector current at which the limiter's datasheet ``vbe`` is taken [A];
#: small-signal transistor datasheets quote VBE(on) at 1 to 10 mA
#: # common practice
LIMITER_REFERENCE_CURRENT = 1e-3

#: Reverse current gain of both transistors in the Ebers-Moll model [1];
#: of order one for planar bipolar transistors  # common practice
REVERSE_GAIN = 1.0

#: Collector current below which the switch is called cut off [A]: the
#: leakage level of a power transistor  # common practice
CUTOFF_CURRENT = 1e-6

#: Shunt conductance from every node to ground that keeps the Jacobian
#: regular when a transistor is fully off [S] (common practice in nodal analysis).
_NODE_LEAK_CONDUCTANCE = 1e-12

#: Largest change of a node voltage in one Newton step [V]: about four
#: thermal voltages, so the junction exponentials change by at most e^4.
_STEP_LIMIT = 0.1


class DcPointError(RuntimeError):
    """The Newton iteration for the power-on DC point did not converge."""


@dataclass(frozen=True)
class CircuitValues:
    """Element values of one or many circuits at one bus voltage and temperature.

    Every field is an ndarray of the same shape (one entry per circuit), in
    SI units.  Absent elements carry a zero conductance.

    Attributes
    ----------
    bus_voltage : ndarray
        DC bus voltage [V].
    temperature : ndarray
        Junction temperature of both transistors [K].
    startup_conductance : ndarray
        1 / start-up resistance [S].
    base_emitter_conductance : ndarray
        1 / base-emitter resistance, 0 if absent [S].
    sense_resistance : ndarray
        Emitter sense resistor [ohm].
    limiter_base_resistance : ndarray
        Limiter base resistor [ohm].
    primary_resistance : ndarray
        Primary winding resistance [ohm].
    hfe : ndarray
        Forward current gain of the switch at ``temperature`` [1].
    switch_vbe : ndarray
        Switch base-emitter on voltage at ``temperature`` at the reference
        current ``switch_reference_current`` [V].
    switch_reference_current : ndarray
        Collector current at which ``switch_vbe`` holds: the current-limit
        trip current ``limiter_vbe(25 degC) / sense_resistance`` [A].
    limiter_hfe : ndarray
        Limiter current gain [1].
    limiter_vbe : ndarray
        Limiter base-emitter voltage at ``temperature`` at
        :data:`LIMITER_REFERENCE_CURRENT` [V].
    transition_frequency, output_capacitance : ndarray
        Switch fT [Hz] and collector-base capacitance [F].
    winding_capacitance, magnetizing_inductance, leakage_inductance : ndarray
        Primary self-capacitance [F], magnetizing [H] and leakage [H]
        inductance.
    core_loss_resistance : ndarray
        Parallel loss resistance of the magnetizing branch [ohm].
    feedback_ratio : ndarray
        Signed turns ratio ``sigma * Nf / Np``, ``sigma = +1`` regenerative,
        ``-1`` degenerative [1].
    drive_resistance, drive_capacitance : ndarray
        Drive RC [ohm], [F].
    """

    bus_voltage: np.ndarray
    temperature: np.ndarray
    startup_conductance: np.ndarray
    base_emitter_conductance: np.ndarray
    sense_resistance: np.ndarray
    limiter_base_resistance: np.ndarray
    primary_resistance: np.ndarray
    hfe: np.ndarray
    switch_vbe: np.ndarray
    switch_reference_current: np.ndarray
    limiter_hfe: np.ndarray
    limiter_vbe: np.ndarray
    transition_frequency: np.ndarray
    output_capacitance: np.ndarray
    winding_capacitance: np.ndarray
    magnetizing_inductance: np.ndarray
    leakage_inductance: np.ndarray
    core_loss_resistance: np.ndarray
    feedback_ratio: np.ndarray
    drive_resistance: np.ndarray
    drive_capacitance: np.ndarray

    @property
    def size(self) -> int:
        return int(self.bus_voltage.size)

    @property
    def trip_current(self) -> np.ndarray:
        """Current-limit trip current ``Vbe_limiter(T) / R_s`` with the
        regulation path off [A]."""
        return self.limiter_vbe / self.sense_resistance

    def replace(self, **changes) -> "CircuitValues":
        """Copy with some fields replaced (broadcast to the common shape)."""
        data = {name: getattr(self, name) for name in self.__dataclass_fields__}
        data.update(changes)
        shape = np.broadcast_shapes(*(np.shape(v) for v in data.values()))
        return CircuitValues(**{k: np.broadcast_to(np.asarray(v, dtype=float), shape).copy()
                                for k, v in data.items()})


def circuit_values(designs, bus_voltage, temperature, hfe=None) -> CircuitValues:
    """Collect the element values of designs at operating conditions.

    Parameters
    ----------
    designs : Design or sequence of Design
        One design, or one design per entry of the broadcast result.
    bus_voltage : float or array_like
        DC bus voltage [V].
    temperature : float or array_like
        Junction temperature [K].
    hfe : float or array_like, optional
        Switch current gain at 25 degC [1]; the temperature law of
        :func:`rcc.devices.current_gain` is applied.  Default: ``hfe_min``.

    Returns
    -------
    CircuitValues
        Arrays broadcast over designs, bus voltages, temperatures and gains.
    """
    if not isinstance(designs, (list, tuple)):
        designs = [designs]
    get = lambda f: np.array([f(d) for d in designs], dtype=float)  # noqa: E731
    if len(designs) == 1:
        get1 = get
        get = lambda f: get1(f)[0]  # noqa: E731
    hfe25 = get(lambda d: d.switch.hfe_min) if hfe is None else np.asarray(hfe, dtype=float)
    sigma = get(lambda d: 1.0 if d.transformer.feedback_phase == "regenerative" else -1.0)
    sense = get(lambda d: d.limiter.sense_resistance)
    limiter_vbe25 = get(lambda d: d.limiter.vbe)
    raw = dict(
        bus_voltage=np.asarray(bus_voltage, dtype=float),
        temperature=np.asarray(temperature, dtype=float),
        startup_conductance=1.0 / get(lambda d: d.startup.resistance),
        base_emitter_conductance=get(
            lambda d: 0.0 if d.drive.base_emitter_resistance is None
            else 1.0 / d.drive.base_emitter_resistance),
        sense_resistance=sense,
        limiter_base_resistance=get(lambda d: d.limiter.base_resistance),
        primary_resistance=get(lambda d: d.transformer.primary_resistance),
        hfe=current_gain(hfe25, get(lambda d: d.switch.hfe_tempco), temperature),
        switch_vbe=base_emitter_voltage(get(lambda d: d.switch.vbe),
                                        get(lambda d: d.switch.vbe_tempco), temperature),
        switch_reference_current=limiter_vbe25 / sense,
        limiter_hfe=get(lambda d: d.limiter.hfe),
        limiter_vbe=base_emitter_voltage(limiter_vbe25,
                                         get(lambda d: d.limiter.vbe_tempco), temperature),
        transition_frequency=get(lambda d: d.switch.transition_frequency),
        output_capacitance=get(lambda d: d.switch.output_capacitance),
        winding_capacitance=get(lambda d: d.transformer.winding_capacitance),
        magnetizing_inductance=get(lambda d: d.transformer.magnetizing_inductance),
        leakage_inductance=get(lambda d: d.transformer.leakage_inductance),
        core_loss_resistance=get(lambda d: d.transformer.core_loss_resistance),
        feedback_ratio=sigma * get(lambda d: d.feedback_turns_ratio),
        drive_resistance=get(lambda d: d.drive.resistance),
        drive_capacitance=get(lambda d: d.drive.capacitance),
    )
    shape = np.broadcast_shapes(*(np.shape(v) for v in raw.values()))
    shape = shape if shape else (1,)
    return CircuitValues(**{k: np.broadcast_to(v, shape).astype(float) for k, v in raw.items()})


@dataclass(frozen=True)
class DcPoint:
    """Power-on DC operating point (arrays, one entry per circuit).

    Attributes
    ----------
    base_voltage, emitter_voltage, limiter_base_voltage, collector_voltage : ndarray
        Node voltages to ground [V].
    collector_current, base_current : ndarray
        Switch collector and base current [A].
    base_emitter_voltage : ndarray
        Switch base-emitter voltage [V].
    limiter_collector_current : ndarray
        Current the limiter transistor takes from the switch base [A].
    startup_current : ndarray
        Current through the start-up resistor [A].
    transconductance, input_conductance : ndarray
        Switch small-signal gm = dIc/dVbe [S] and g_pi = dIb/dVbe [S].
    limiter_transconductance, limiter_input_conductance : ndarray
        The same for the limiter transistor [S].
    region : ndarray of str
        ``"cut-off"``, ``"active"`` or ``"saturated"``.
    limiter_active : ndarray of bool
        The limiter diverts at least 10 % of the start-up current from the
        switch base (it holds the collector current near Vbe/Rs).
    iterations : int
        Newton iterations used.
    """

    base_voltage: np.ndarray
    emitter_voltage: np.ndarray
    limiter_base_voltage: np.ndarray
    collector_voltage: np.ndarray
    collector_current: np.ndarray
    base_current: np.ndarray
    base_emitter_voltage: np.ndarray
    limiter_collector_current: np.ndarray
    startup_current: np.ndarray
    transconductance: np.ndarray
    input_conductance: np.ndarray
    limiter_transconductance: np.ndarray
    limiter_input_conductance: np.ndarray
    region: np.ndarray
    limiter_active: np.ndarray
    iterations: int


def _transport(saturation_current, forward_gain, vbe, vbc, vt):
    """Ebers-Moll transport model: currents and their derivatives.

    Returns ``ic, ib, dic_dvbe, dic_dvbc, dib_dvbe, dib_dvbc``.

    Notes
    -----
    ``I_C = I_S (e^{V_BE/V_T} - e^{V_BC/V_T}) - (I_S/beta_R)(e^{V_BC/V_T} - 1)``,
    ``I_B = (I_S/beta_F)(e^{V_BE/V_T} - 1) + (I_S/beta_R)(e^{V_BC/V_T} - 1)``:
    Ebers & Moll, "Large-signal behavior of junction transistors", Proc.
    IRE 42, 1954; transport form as in Gray, Hurst, Lewis & Meyer,
    *Analysis and Design of Analog Integrated Circuits*, 5th ed., 2009,
    sec. 1.4.
    """
    ef = np.exp(np.minimum(vbe / vt, 200.0))
    er = np.exp(np.minimum(vbc / vt, 200.0))
    isr = saturation_current / REVERSE_GAIN
    isf = saturation_current / forward_gain
    ic = saturation_current * (ef - er) - isr * (er - 1.0)
    ib = isf * (ef - 1.0) + isr * (er - 1.0)
    dic_dvbe = saturation_current * ef / vt
    dic_dvbc = -(saturation_current + isr) * er / vt
    dib_dvbe = isf * ef / vt
    dib_dvbc = isr * er / vt
    return ic, ib, dic_dvbe, dic_dvbc, dib_dvbe, dib_dvbc


def solve_dc_point(values: CircuitValues, max_iterations: int = 300,
                   tolerance: float = 1e-12) -> DcPoint:
    """Solve the power-on DC network for every circuit in ``values``.

    Parameters
    ----------
    values : CircuitValues
        Element values, bus voltage and temperature [SI].
    max_iterations : int
        Newton iteration limit.
    tolerance : float
        Newton step of the junction node voltages below which a circuit
        counts as converged [V] (the collector step is compared with
        ``tolerance * (1 + V_bus)``).

    Returns
    -------
    DcPoint

    Raises
    ------
    DcPointError
        If some circuit has not converged within ``max_iterations``; the
        message lists how many and the first bus voltage concerned.

    Notes
    -----
    Unknowns: base, emitter, limiter-base and collector voltages.  Kirchhoff
    current law at the base, emitter and limiter base; the collector node is
    tied to the bus through the primary resistance (windings are shorts at
    DC).  The saturation currents follow from the datasheet on-voltages:
    ``I_S = I_ref exp(-V_BE(T) / V_T)``, with ``V_T = kT/q`` and ``V_BE(T)``
    from :func:`rcc.devices.base_emitter_voltage`.  Newton steps are
    limited to 0.1 V per node (junction-voltage limiting: L. W. Nagel,
    UC Berkeley ERL memorandum M520, 1975).
    """
    v = values
    n = v.size
    vt = thermal_voltage(v.temperature)
    is1 = v.switch_reference_current * np.exp(-v.switch_vbe / vt)
    is2 = LIMITER_REFERENCE_CURRENT * np.exp(-v.limiter_vbe / vt)
    gst, gbe = v.startup_conductance, v.base_emitter_conductance
    gs = 1.0 / v.sense_resistance
    glb = 1.0 / v.limiter_base_resistance
    rp = v.primary_resistance
    vbus = v.bus_voltage

    x = np.zeros((n, 4))  # v_b, v_e, v_l, v_c
    x[:, 0] = np.minimum(0.5 * v.switch_vbe, 0.5 * vbus)
    x[:, 3] = vbus
    active = np.ones(n, dtype=bool)
    iterations = 0
    for iterations in range(1, max_iterations + 1):
        xa = x[active]
        vb, ve, vl, vc = xa.T
        sel = lambda a: a[active] if np.ndim(a) else a  # noqa: E731
        t = sel(vt)
        ic1, ib1, a1, b1, c1, d1 = _transport(sel(is1), sel(v.hfe), vb - ve, vb - vc, t)
        ic2, ib2, a2, b2, c2, d2 = _transport(sel(is2), sel(v.limiter_hfe), vl, vl - vb, t)
        g_st, g_be, g_s, g_lb = sel(gst), sel(gbe), sel(gs), sel(glb)
        r_p, v_bus = sel(rp), sel(vbus)
        ie1 = ic1 + ib1
        f = np.empty_like(xa)
        f[:, 0] = g_st * (vb - v_bus) + g_be * (vb - ve) + ib1 + ic2 + _NODE_LEAK_CONDUCTANCE * vb
        f[:, 1] = -ie1 + g_be * (ve - vb) + g_s * ve + g_lb * (ve - vl) + _NODE_LEAK_CONDUCTANCE * ve
        f[:, 2] = g_lb * (vl - ve) + ib2 + _NODE_LEAK_CONDUCTANCE * vl
        f[:, 3] = r_p * ic1 - (v_bus - vc)
        jac = np.zeros((xa.shape[0], 4, 4))
        # derivatives of Q1 currents w.r.t. (vb, ve, vc): vbe = vb - ve, vbc = vb - vc
        dib1 = (c1 + d1, -c1, -d1)
        dic1 = (a1 + b1, -a1, -b1)
        die1 = tuple(p + q for p, q in zip(dib1, dic1))
        # Q2: vbe2 = vl, vbc2 = vl - vb
        dic2_dvb, dic2_dvl = -b2, a2 + b2
        dib2_dvb, dib2_dvl = -d2, c2 + d2
        jac[:, 0, 0] = g_st + g_be + dib1[0] + dic2_dvb + _NODE_LEAK_CONDUCTANCE
        jac[:, 0, 1] = -g_be + dib1[1]
        jac[:, 0, 2] = dic2_dvl
        jac[:, 0, 3] = dib1[2]
        jac[:, 1, 0] = -die1[0] - g_be
        jac[:, 1, 1] = -die1[1] + g_be + g_s + g_lb + _NODE_LEAK_CONDUCTANCE
        jac[:, 1, 2] = -g_lb
        jac[:, 1, 3] = -die1[2]
        jac[:, 2, 0] = dib2_dvb
        jac[:, 2, 1] = -g_lb
        jac[:, 2, 2] = g_lb + dib2_dvl + _NODE_LEAK_CONDUCTANCE
        jac[:, 3, 0] = r_p * dic1[0]
        jac[:, 3, 1] = r_p * dic1[1]
        jac[:, 3, 3] = r_p * dic1[2] + 1.0
        step = -np.linalg.solve(jac, f[..., None])[..., 0]
        step[:, :3] = np.clip(step[:, :3], -_STEP_LIMIT, _STEP_LIMIT)
        # the collector moves freely while the collector junction is off;
        # its forward bias may grow by at most the step limit per iteration
        vbc_cap = np.maximum(vb - vc + _STEP_LIMIT, 0.3)
        new_vb = vb + step[:, 0]
        step[:, 3] = np.maximum(vc + step[:, 3], new_vb - vbc_cap) - vc
        xa = xa + step
        x[active] = xa
        done = (np.max(np.abs(step[:, :3]), axis=1) < tolerance) & (
            np.abs(step[:, 3]) < tolerance * (1.0 + np.abs(v_bus)))
        idx = np.flatnonzero(active)
        active[idx[done]] = False
        if not active.any():
            break
    if active.any():
        first = np.flatnonzero(active)[0]
        raise DcPointError(
            f"power-on DC point did not converge for {active.sum()} of {n} circuit(s) "
            f"after {max_iterations} Newton steps (first: bus voltage "
            f"{vbus.flat[first]:.4g} V, temperature {v.temperature.flat[first]:.4g} K)")

    vb, ve, vl, vc = x.T
    ic1, ib1, a1, _, c1, _ = _transport(is1, v.hfe, vb - ve, vb - vc, vt)
    ic2, ib2, a2, _, c2, _ = _transport(is2, v.limiter_hfe, vl, vl - vb, vt)
    startup_current = gst * (vbus - vb)
    region = np.where(ic1 < CUTOFF_CURRENT, "cut-off",
                      np.where(ic1 < 0.9 * v.hfe * ib1, "saturated", "active"))
    limiter_active = ic2 > 0.1 * np.maximum(startup_current, 1e-300)
    return DcPoint(
        base_voltage=vb, emitter_voltage=ve, limiter_base_voltage=vl, collector_voltage=vc,
        collector_current=ic1, base_current=ib1, base_emitter_voltage=vb - ve,
        limiter_collector_current=ic2, startup_current=startup_current,
        transconductance=a1, input_conductance=c1,
        limiter_transconductance=a2, limiter_input_conductance=c2,
        region=region, limiter_active=limiter_active, iterations=iterations,
    )
