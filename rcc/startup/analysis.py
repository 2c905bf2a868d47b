"""Start-up analysis of one design: verdict, minimum start-up voltage,
start-up time, large-signal continuation checks and findings.

Everything here builds on the power-on DC point (:mod:`.dcpoint`), the
compiled small-signal network (:mod:`.symbolic`) and its poles
(:mod:`.poles`).  The worst corner is the combination of ``hfe_min`` /
``hfe_max`` and ``temperature_min`` / ``temperature_max`` with the lowest
growth rate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from itertools import product

import numpy as np
from scipy.constants import elementary_charge

from rcc.devices import base_emitter_voltage, current_gain
from rcc.findings import Finding
from rcc.mains import bus_voltage_range, rectified_peak
from rcc.startup.dcpoint import CircuitValues, DcPoint, circuit_values, solve_dc_point
from rcc.startup.poles import (PoleResult, holding_element, network_poles,
                               small_signal_parameters)
from rcc.startup.network import compiled, evaluate
from rcc.startup.start_line import (REGULATED_KINDS, StartLineSearch,
                                    reaches_operating_point, run_into_load,
                                    search_start_line)

__all__ = [
    "DcSummary",
    "StartupResult",
    "StartTime",
    "DriveCycle",
    "StartupReport",
    "BatchVerdict",
    "batch_verdict",
    "analyze_startup",
    "minimum_start_bus_voltage",
    "estimate_start_time",
    "drive_cycle",
    "startup_report",
    "startup_findings",
    "LOWEST_SEARCH_VOLTAGE",
]

#: Lowest bus voltage the bisection for the start-up voltage looks at [V]:
#: below one junction voltage nothing conducts.
LOWEST_SEARCH_VOLTAGE = 0.5


@dataclass(frozen=True)
class BatchVerdict:
    """Verdict of many circuits at once (arrays).

    Attributes
    ----------
    circuit : CircuitValues
    dc : DcPoint
    poles : PoleResult
    holding_element : ndarray of str
        What holds each stalled circuit, ``""`` where it starts.
    """

    circuit: CircuitValues
    dc: DcPoint
    poles: PoleResult
    holding_element: np.ndarray


def batch_verdict(circuit: CircuitValues, name_holding: bool = True) -> BatchVerdict:
    """DC point, poles and verdict of every circuit in ``circuit``.

    Parameters
    ----------
    circuit : CircuitValues
        Element values at a bus voltage and temperature [SI].
    name_holding : bool
        Also name what holds the stalled circuits (one more pole
        evaluation).

    Returns
    -------
    BatchVerdict
    """
    dc = solve_dc_point(circuit)
    poles = network_poles(small_signal_parameters(circuit, dc))
    holding = (holding_element(circuit, dc, poles) if name_holding
               else np.full(poles.starts.shape, "", dtype=object))
    return BatchVerdict(circuit, dc, poles, holding)


@dataclass(frozen=True)
class DcSummary:
    """Power-on DC point of one circuit.

    Attributes
    ----------
    region : str
        ``"cut-off"``, ``"active"`` or ``"saturated"``.
    collector_current, base_current : float
        Switch currents [A].
    base_emitter_voltage : float
        Switch base-emitter voltage [V].
    limiter_active : bool
        The limiter diverts start-up current from the switch base.
    limiter_collector_current : float
        Current the limiter takes from the base [A].
    startup_current : float
        Current through the start-up resistor [A].
    """

    region: str
    collector_current: float
    base_current: float
    base_emitter_voltage: float
    limiter_active: bool
    limiter_collector_current: float
    startup_current: float


@dataclass(frozen=True)
class StartupResult:
    """Start-up verdict of one design at one bus voltage, temperature and gain.

    Attributes
    ----------
    bus_voltage : float
        DC bus voltage [V].
    temperature : float
        Junction temperature [K].
    hfe : float
        Switch current gain at 25 degC of this corner [1].
    dc : DcSummary
        Power-on DC point.
    poles : tuple of complex
        Poles of the small-signal network, by decreasing real part [rad/s].
    starts : bool
        A pole lies in the right half-plane.
    growth_rate : float
        Largest pole real part [1/s]; negative when the circuit stalls.
    growth_frequency : float
        Oscillation frequency of that pole [Hz] (0 for a real pole: the
        regenerative switching of a blocking oscillator).
    holding_element : str or None
        ``None`` when it starts, else one of ``"feedback-phase"``,
        ``"limiter"``, ``"startup-resistor"``, ``"drive-coupling"``.
    right_half_plane_roots : int
        Routh-Hurwitz count of right-half-plane roots (-1: undecided).
    loop_numerator, loop_denominator : tuple of float
        Loop gain ``L(s)`` coefficients, highest power first [SI].
    """

    bus_voltage: float
    temperature: float
    hfe: float
    dc: DcSummary
    poles: tuple
    starts: bool
    growth_rate: float
    growth_frequency: float
    holding_element: str | None
    right_half_plane_roots: int
    loop_numerator: tuple = field(repr=False)
    loop_denominator: tuple = field(repr=False)

    def loop_gain(self, frequency):
        """Loop gain ``L(j 2 pi f)`` at ``frequency`` [Hz] -> complex [1]."""
        s = 2j * np.pi * np.asarray(frequency, dtype=float)
        return np.polyval(self.loop_numerator, s) / np.polyval(self.loop_denominator, s)


def _corners(design, temperature, hfe):
    env = design.environment
    temperatures = [env.temperature_min, env.temperature_max] if temperature is None \
        else [float(temperature)]
    gains = [design.switch.hfe_min, design.switch.hfe_max] if hfe is None else [float(hfe)]
    return list(product(dict.fromkeys(temperatures), dict.fromkeys(gains)))


def analyze_startup(design, bus_voltage=None, temperature=None, hfe=None) -> StartupResult:
    """Start-up verdict at one bus voltage, at the worst corner.

    Parameters
    ----------
    design : rcc.design.Design
    bus_voltage : float, optional
        DC bus voltage [V]; default the lowest bus (rectified peak of the
        lowest line, or ``dc_min``).
    temperature : float, optional
        Junction temperature [K]; default both ends of the ambient range.
    hfe : float, optional
        Switch gain at 25 degC [1]; default ``hfe_min`` and ``hfe_max``.

    Returns
    -------
    StartupResult
        At the corner with the lowest growth rate.
    """
    if bus_voltage is None:
        bus_voltage = float(bus_voltage_range(design)[0])
    corners = _corners(design, temperature, hfe)
    temps = np.array([c[0] for c in corners])
    gains = np.array([c[1] for c in corners])
    circuit = circuit_values(design, float(bus_voltage), temps, gains)
    verdict = batch_verdict(circuit)
    worst = int(np.argmin(verdict.poles.growth_rate))
    return _result(verdict, worst, bus_voltage, temps[worst], gains[worst])


def _result(verdict: BatchVerdict, i: int, bus_voltage, temperature, hfe) -> StartupResult:
    dc, poles, circuit = verdict.dc, verdict.poles, verdict.circuit
    small = small_signal_parameters(circuit, dc)
    one = {k: np.atleast_1d(v)[i:i + 1] for k, v in small.values.items()}
    network = compiled()
    numerator = evaluate(network.loop_numerator, one)[0]
    denominator = evaluate(network.open_loop, one)[0]
    summary = DcSummary(
        region=str(dc.region[i]),
        collector_current=float(dc.collector_current[i]),
        base_current=float(dc.base_current[i]),
        base_emitter_voltage=float(dc.base_emitter_voltage[i]),
        limiter_active=bool(dc.limiter_active[i]),
        limiter_collector_current=float(dc.limiter_collector_current[i]),
        startup_current=float(dc.startup_current[i]),
    )
    holding = str(verdict.holding_element[i]) or None
    return StartupResult(
        bus_voltage=float(bus_voltage), temperature=float(temperature), hfe=float(hfe),
        dc=summary, poles=tuple(complex(p) for p in poles.poles[i]),
        starts=bool(poles.starts[i]), growth_rate=float(poles.growth_rate[i]),
        growth_frequency=float(poles.growth_frequency[i]), holding_element=holding,
        right_half_plane_roots=int(poles.right_half_plane_roots[i]),
        loop_numerator=tuple(float(x) for x in numerator),
        loop_denominator=tuple(float(x) for x in denominator),
    )


def minimum_start_bus_voltage(design, temperature=None, hfe=None,
                              relative_tolerance: float = 1e-4) -> float | None:
    """Lowest bus voltage at which the design starts, at the worst corner.

    Parameters
    ----------
    design : rcc.design.Design
    temperature : float, optional
        Fix the corner's temperature [K]; default both ends of the range.
    hfe : float, optional
        Fix the corner's current gain at 25 degC [1]; default ``hfe_min`` and
        ``hfe_max``. Over all corners the highest threshold is returned.
    relative_tolerance : float
        Bisection stops when the bracket is below this fraction of the
        highest bus voltage [1].

    Returns
    -------
    float or None
        Start-up threshold [V]; ``None`` if some corner does not start even
        at the highest bus voltage of the design.

    Notes
    -----
    Bisection on the verdict, all corners at once, between
    :data:`LOWEST_SEARCH_VOLTAGE` and the highest bus voltage; it assumes
    one threshold per corner (the circuit starts above it).
    """
    corners = _corners(design, temperature, hfe)
    temps = np.array([c[0] for c in corners])
    gains = np.array([c[1] for c in corners])
    high_bus = float(bus_voltage_range(design)[2])

    def starts(bus):
        circuit = circuit_values(design, bus, temps, gains)
        return batch_verdict(circuit, name_holding=False).poles.starts

    high = np.full(temps.shape, high_bus)
    if not starts(high).all():
        return None
    low = np.full(temps.shape, LOWEST_SEARCH_VOLTAGE)
    started_low = starts(low)
    while np.max(high - low) > relative_tolerance * high_bus:
        middle = 0.5 * (low + high)
        ok = starts(middle)
        high = np.where(ok, middle, high)
        low = np.where(ok, low, middle)
    high = np.where(started_low, LOWEST_SEARCH_VOLTAGE, high)
    return float(np.max(high))


def _line_from_bus(design, bus_voltage):
    if bus_voltage is None or not design.input.is_ac:
        return None
    return float((bus_voltage + design.input.bridge_drop) / math.sqrt(2.0))


@dataclass(frozen=True)
class StartTime:
    """Estimated time from switch-on to full switching.

    Attributes
    ----------
    line_voltage : float
        Line voltage (RMS for AC input, the bus for DC input) [V].
    bus_voltage : float
        Bus voltage reached [V].
    bulk_charge_time : float
        Time for the bulk capacitor to reach the start-up threshold [s].
    base_charge_time : float
        Time for the start-up resistor to charge the base node (drive
        capacitor plus junction capacitance) to the base-emitter voltage [s].
    growth_time : float
        Time for the growing mode to rise from shot noise to the trip
        current [s].
    total : float
        Sum of the three [s].
    """

    line_voltage: float
    bus_voltage: float
    bulk_charge_time: float
    base_charge_time: float
    growth_time: float
    total: float


def estimate_start_time(design, line_voltage=None, temperature=None, hfe=None,
                        threshold_bus_voltage=None) -> StartTime | None:
    """Start-up time at one line voltage, worst of the corners.

    Parameters
    ----------
    design : rcc.design.Design
    line_voltage : float, optional
        RMS line voltage (AC) or bus voltage (DC) [V]; default the lowest.
    temperature : float, optional
        Fix the corner's temperature [K] (see :func:`analyze_startup`).
    hfe : float, optional
        Fix the corner's current gain at 25 degC [1].
    threshold_bus_voltage : float, optional
        Start-up threshold [V] if already known (saves a bisection).

    Returns
    -------
    StartTime or None
        ``None`` when the design does not start at this line.

    Notes
    -----
    Three phases in sequence (a conservative sum):

    1. AC input: the bulk capacitor follows the first rising quarter-wave
       of the rectified line until the bus reaches the start-up threshold,
       ``t_1 = arcsin((V_th + V_bridge) / (sqrt 2 V_rms)) / (2 pi f)``
       (inrush limiting neglected); DC input: ``t_1 = 0``.
    2. The start-up resistor charges the base node: the drive capacitor
       (its winding end is a short at DC) in parallel with ``C_mu`` and
       the emitter junction capacitance, from the Thevenin source
       ``V_th = V_bus R_be/(R_st + R_be)`` through ``R_st || R_be``:
       ``t_2 = tau ln(V_th / (V_th - V_BE))`` (RC charging).
    3. The growing mode rises from the shot noise of the DC collector
       current, ``i_n = sqrt(2 q I_C B)`` (Schottky, Ann. Phys. 57, 1918)
       in the noise bandwidth ``B = sigma/4`` of a one-pole response of
       rate sigma (Motchenbacher & Connelly, *Low-Noise Electronic System
       Design*, 1993, ch. 1  # from memory), to the trip current:
       ``t_3 = ln(I_trip / i_n) / sigma``.
    """
    if line_voltage is None:
        line_voltage = design.input.line_voltages[0]
    bus = float(rectified_peak(line_voltage, design.input.bridge_drop)) \
        if design.input.is_ac else float(line_voltage)
    result = analyze_startup(design, bus, temperature, hfe)
    if not result.starts:
        return None
    if threshold_bus_voltage is None:
        threshold_bus_voltage = minimum_start_bus_voltage(design, temperature, hfe)
    if design.input.is_ac:
        if threshold_bus_voltage is None or threshold_bus_voltage > bus:
            return None
        ratio = (threshold_bus_voltage + design.input.bridge_drop) / (
            math.sqrt(2.0) * line_voltage)
        bulk = math.asin(min(1.0, ratio)) / (2.0 * math.pi * design.input.line_frequency)
    else:
        bulk = 0.0
    r_st = design.startup.resistance
    r_be = design.drive.base_emitter_resistance
    source = bus if r_be is None else bus * r_be / (r_st + r_be)
    resistance = r_st if r_be is None else r_st * r_be / (r_st + r_be)
    capacitance = design.drive.capacitance + 2.0 * design.switch.output_capacitance
    vbe = result.dc.base_emitter_voltage
    if source <= vbe:
        return None
    base = resistance * capacitance * math.log(source / (source - vbe))
    trip = float(base_emitter_voltage(design.limiter.vbe, design.limiter.vbe_tempco,
                                      result.temperature)) / design.limiter.sense_resistance
    sigma = result.growth_rate
    noise = math.sqrt(2.0 * elementary_charge * max(result.dc.collector_current, 1e-15)
                      * sigma / 4.0)
    growth = math.log(max(trip / noise, 1.0)) / sigma
    return StartTime(float(line_voltage), bus, bulk, base, growth, bulk + base + growth)


@dataclass(frozen=True)
class DriveCycle:
    """Large-signal drive over the first switching cycles after start-up.

    Attributes
    ----------
    bus_voltage, temperature, hfe : float
        Conditions [V], [K], gain at 25 degC [1].
    peak_current : float
        Collector current at the end of the on-time, the current-limit trip
        ``Vbe_limiter(T)/R_s`` [A].
    base_current_end : float
        Base current at the end of the on-time of the last cycle [A].
    base_current_needed : float
        ``peak_current / hFE(T)`` [A].
    restart_margin : float
        Smallest, over the cycles, of the base-emitter voltage the ring
        would produce at its first peak minus ``V_BE`` [V]; negative: the
        drive capacitor holds the base off after demagnetization.
    capacitor_voltage : float
        Drive-capacitor voltage at the start of the last on-time [V].
    cycles : int
        Cycles simulated.
    weak_drive : bool
        ``hFE * base_current_end < peak_current``.
    hiccup : bool
        ``restart_margin < 0``.
    """

    bus_voltage: float
    temperature: float
    hfe: float
    peak_current: float
    base_current_end: float
    base_current_needed: float
    restart_margin: float
    capacitor_voltage: float
    cycles: int
    weak_drive: bool
    hiccup: bool


def _relax(voltage, target, tau, duration):
    return target + (voltage - target) * math.exp(-duration / tau)


def drive_cycle(design, bus_voltage=None, temperature=None, hfe=None,
                max_cycles: int = 2000, steps: int = 50) -> DriveCycle | None:
    """Follow the drive capacitor over the switching cycles after start-up.

    Parameters
    ----------
    design : rcc.design.Design
    bus_voltage : float, optional
        Bus voltage [V]; default the lowest.
    temperature : float, optional
        Junction temperature [K]; default ``temperature_min`` (cold: lowest
        gain).
    hfe : float, optional
        Gain at 25 degC [1]; default ``hfe_min``.
    max_cycles : int
        Cycles followed at most (stops earlier at a periodic state).
    steps : int
        Time steps per phase.

    Returns
    -------
    DriveCycle or None
        ``None`` when the design has no ``output.voltage_target`` (the
        reflected voltage is unknown).

    Notes
    -----
    A large-signal, charge-balance picture of the base drive (the
    blocking-oscillator analysis of Norman & Smith, Proc. IEE 106 B, 1959,
    and Korzekwa, IRE Trans. Circuit Theory, 1961, reduced to the drive
    capacitor):

    - on-time ``t_on = L_m I_pk / V_bus`` (current-limit end, regulation
      off: the worst peak); the feedback winding gives ``n V_bus`` and the
      base sits at ``V_BE``: ``C_d dv/dt = (n V_bus - V_BE - v) / R_d``;
    - flyback plateau ``t_off = L_m I_pk / V_R``, ``V_R = (N_p/N_s)(V_o +
      V_f)``: the winding gives ``-n V_R``; the base is reverse-biased,
      through ``R_be`` or clamped at ``-V_EBO`` by emitter-base breakdown;
    - after demagnetization the node rings; at its first peak the winding
      gives ``+n V_R exp(-pi / (2 Q))`` with ``1/Q = Z_0/R_core + R_p/Z_0``,
      ``Z_0 = sqrt(L_m / C_node)`` (parallel and series RLC quality
      factors).  The switch restarts if that lifts the base above
      ``V_BE`` despite the capacitor voltage; otherwise the capacitor holds
      it off until the start-up resistor recharges the base: hiccup.

    The first cycle starts with the capacitor at ``-V_BE`` (charged by the
    start-up resistor).  Weak drive: the base current at the end of the
    on-time (drive plus start-up current, minus the base-emitter resistor
    current) times ``hFE(T)`` is below the peak current.
    """
    if design.output.voltage_target is None:
        return None
    if bus_voltage is None:
        bus_voltage = float(bus_voltage_range(design)[0])
    if temperature is None:
        temperature = design.environment.temperature_min
    if hfe is None:
        hfe = design.switch.hfe_min
    gain = float(current_gain(hfe, design.switch.hfe_tempco, temperature))
    vbe = float(base_emitter_voltage(design.switch.vbe, design.switch.vbe_tempco,
                                     temperature))
    peak = float(base_emitter_voltage(design.limiter.vbe, design.limiter.vbe_tempco,
                                      temperature)) / design.limiter.sense_resistance
    tr = design.transformer
    n = design.feedback_turns_ratio
    reflected = design.output_turns_ratio * (design.output.voltage_target
                                             + design.output.rectifier_drop)
    t_on = tr.magnetizing_inductance * peak / bus_voltage
    t_off = tr.magnetizing_inductance * peak / reflected
    z0 = math.sqrt(tr.magnetizing_inductance / design.node_capacitance)
    quality = 1.0 / (z0 / tr.core_loss_resistance + tr.primary_resistance / z0)
    ring = n * reflected * math.exp(-math.pi / (2.0 * quality))
    r_d, c_d = design.drive.resistance, design.drive.capacitance
    r_be = design.drive.base_emitter_resistance
    vebo = design.switch.vebo
    share = 1.0 if r_be is None else r_be / (r_be + r_d)

    v = -vbe
    margin = math.inf
    i_end = 0.0
    cycles = 0
    for cycles in range(1, max_cycles + 1):
        start = v
        drive = n * bus_voltage
        for _ in range(steps):  # on-time, base forward-biased
            if drive - vbe - v > 0:
                v = _relax(v, drive - vbe, r_d * c_d, t_on / steps)
        i_end = max(drive - vbe - v, 0.0) / r_d
        plateau = -n * reflected
        for _ in range(steps):  # flyback plateau, base reverse-biased
            linear = (plateau - v) * share
            if linear < -vebo:
                v = _relax(v, plateau + vebo, r_d * c_d, t_off / steps)
            elif r_be is not None:
                v = _relax(v, plateau, (r_d + r_be) * c_d, t_off / steps)
        margin = min(margin, (ring - v) * share - vbe)
        if abs(v - start) < 1e-5:
            break
    base_end = i_end + (bus_voltage - vbe) / design.startup.resistance - (
        0.0 if r_be is None else vbe / r_be)
    needed = peak / gain
    return DriveCycle(float(bus_voltage), float(temperature), float(hfe), peak, base_end,
                      needed, margin, v, cycles, base_end < needed, margin < 0)


def _number(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass(frozen=True)
class StartupReport:
    """Everything the start-up analysis says about one design.

    Attributes
    ----------
    title : str
        Design title.
    result : StartupResult
        Verdict at the lowest bus voltage, worst corner.
    oscillation_bus_voltage : float or None
        Small-signal threshold of oscillation: the lowest bus at which the
        power-on DC point is unstable at every corner; below it the supply
        cannot even begin to oscillate.  ``None`` if some corner does not
        oscillate even at the highest bus [V].
    oscillation_line_voltage : float or None
        The same as RMS line voltage at the rectified peak (AC input), else
        ``None`` [V].
    start_time : StartTime or None
        At the lowest line, worst corner; ``None`` if it does not start.
    drive : DriveCycle or None
        Continuation checks at the lowest bus, cold, ``hfe_min``; ``None``
        if it does not start or the output voltage target is missing.
    is_ac : bool
        AC (mains) input.
    into_load : PowerOnRun or None
        The engine from power-on at the lowest line, coldest, ``hfe_min``,
        full load; ``None`` where the engine was not run.
    start_line : StartLineSearch or None
        The lowest line at which the supply starts into its full load, by the
        engine (:func:`rcc.startup.start_line.search_start_line`); ``None``
        where the engine was not run.
    output_tolerance : float
        ``limits.output_tolerance``: the output shortfall allowed for
        "reaches its operating point" [1].
    """

    title: str
    result: StartupResult
    oscillation_bus_voltage: float | None
    oscillation_line_voltage: float | None
    start_time: StartTime | None
    drive: DriveCycle | None
    is_ac: bool
    into_load: object | None = None
    start_line: StartLineSearch | None = None
    output_tolerance: float = 0.05

    @property
    def oscillation_begins(self) -> bool:
        """The power-on DC point is unstable (small-signal verdict) [-]."""
        return bool(self.result.starts)

    @property
    def reaches_operating_point(self) -> bool | None:
        """From power-on at the worst corner and full load the engine reaches
        its operating point: it switches (regular, bursts, irregular) with the
        output within ``output_tolerance`` below the expected output
        (:func:`rcc.startup.start_line.reaches_operating_point`); ``None``
        where it was not run or the engine failed [-]."""
        if self.into_load is None:
            if self.start_line is not None:
                # the engine was asked for but had no bus at the lowest line
                return False
            return None if self.result.starts else False
        return reaches_operating_point(self.into_load, self.output_tolerance)

    @property
    def starts(self) -> bool:
        """Oscillation begins and the supply reaches its operating point [-]."""
        reaches = self.reaches_operating_point
        return self.oscillation_begins and reaches is not False

    @property
    def min_start_basis(self) -> str:
        """``"engine"`` where the lowest start line was searched with the
        engine from power-on, else ``"small-signal-bound"``: only the
        threshold of oscillation is known, a lower bound of the start line."""
        return "engine" if self.start_line is not None else "small-signal-bound"

    @property
    def min_start_bus_voltage(self) -> float | None:
        """Bus of the lowest line at which the supply starts into its full
        load (engine search); ``None`` where it was not searched or no line of
        the design starts [V]."""
        return None if self.start_line is None else self.start_line.bus_voltage

    @property
    def min_start_line_voltage(self) -> float | None:
        """Lowest RMS line at which the supply starts into its full load
        (engine search, AC input); ``None`` for DC input (see
        :attr:`min_start_bus_voltage`), where not searched, or where no line
        of the design starts [V]."""
        if self.start_line is None or not self.is_ac:
            return None
        return self.start_line.line_voltage

    def to_json(self) -> dict:
        """The ``startup`` object of the JSON report (no NaN or infinity)."""
        r = self.result
        run = self.into_load
        search = self.start_line
        return {
            "starts": self.starts,
            "oscillation_begins": self.oscillation_begins,
            "reaches_operating_point": self.reaches_operating_point,
            "time_to_regulation_s": None if run is None
            else _number(run.time_to_regulation),
            "power_on": None if run is None else {
                "kind": run.kind,
                "line_v": _number(run.line_voltage),
                "bus_v": _number(run.bus_voltage),
                "temperature_c": _number(run.temperature - 273.15),
                "hfe": _number(run.hfe),
                "load": run.load.text(),
                "output_v": _number(run.output_voltage),
                "expected_output_v": _number(run.expected_output),
                "frequency_hz": _number(run.frequency),
                "peak_current_a": _number(run.peak_current),
            },
            "growth_rate_per_s": _number(r.growth_rate),
            "growth_frequency_hz": _number(r.growth_frequency),
            "ac_input": self.is_ac,
            "min_start_basis": self.min_start_basis,
            "min_start_bus_v": _number(self.min_start_bus_voltage),
            "min_start_line_v": _number(self.min_start_line_voltage),
            "min_start_line_resolution_v": None if search is None
            else _number(search.resolution),
            "min_start_search": None if search is None else search.to_json(),
            "min_oscillation_bus_v": _number(self.oscillation_bus_voltage),
            "min_oscillation_line_v": _number(self.oscillation_line_voltage),
            "start_time_s": None if self.start_time is None else _number(self.start_time.total),
            "holding_element": r.holding_element,
            "dc_point": {
                "region": r.dc.region,
                "ic_a": _number(r.dc.collector_current),
                "ib_a": _number(r.dc.base_current),
                "vbe_v": _number(r.dc.base_emitter_voltage),
                "limiter_active": r.dc.limiter_active,
            },
            "poles": [[_number(p.real), _number(p.imag)] for p in r.poles],
        }


def startup_report(design, engine: bool = False) -> StartupReport:
    """Run the whole start-up analysis of a design.

    Parameters
    ----------
    design : rcc.design.Design
    engine : bool
        Also run the time-domain engine from power-on at the worst corner and
        full load: at the lowest line (does it start into its load?) and at a
        few more lines for the lowest line at which it does
        (:func:`rcc.startup.start_line.search_start_line`); seconds of CPU
        per run [-].

    Returns
    -------
    StartupReport
    """
    result = analyze_startup(design)
    threshold = minimum_start_bus_voltage(design)
    line = _line_from_bus(design, threshold)
    start_time = drive = None
    if result.starts:
        times = [estimate_start_time(design, None, t, h, threshold)
                 for t, h in _corners(design, None, None)]
        start_time = None if any(t is None for t in times) else max(
            times, key=lambda t: t.total)
        drive = drive_cycle(design)
    into_load = search = None
    if engine:
        from rcc.engine.power_on import power_on_bus_voltage

        if result.starts and power_on_bus_voltage(
                design, design.input.line_voltages[0], design.output.load_max,
                design.environment.temperature_min) > 0:
            into_load = run_into_load(design)
        # else the bulk capacitor cannot carry the full load at the lowest line:
        # no bus for the engine there (reaches_operating_point is False)
        search = search_start_line(design, threshold, first_run=into_load)
    return StartupReport(design.title, result, threshold, line, start_time, drive,
                         design.input.is_ac, into_load, search,
                         design.limits.output_tolerance)


_ADVICE = {
    "startup-resistor": "Check that the start-up resistor is not open; lower it (mind "
                        "its dissipation at the highest line), raise or remove the "
                        "base-emitter resistor, or use a switch with more gain.",
    "drive-coupling": "Strengthen the feedback: more feedback turns, a larger drive "
                      "capacitor or a smaller drive resistor, or a lower-loss "
                      "transformer.",
    "limiter": "Raise the start-up resistor so that hFE times the start current stays "
               "well below the trip current Vbe/Rs, or raise the limiter base "
               "resistor.",
    "feedback-phase": "Swap the two connections of the feedback winding so that it is "
                      "regenerative.",
}


def _start_line_sentence(design, report: StartupReport) -> str:
    """What the engine's start-line search found, in one sentence."""
    search = report.start_line
    if search is None:
        return ""
    unit = "V RMS line" if design.input.is_ac else "V input"
    if search.line_voltage is None:
        if search.note:
            return f"The search for the lowest start line stopped: {search.note}."
        if search.failing_basis == "small-signal":
            return ("It starts into its full load at no line of the design: at some "
                    "corner the power-on DC point is stable at every line.")
        return (f"It starts into its full load at no line of the design (engine from "
                f"power-on up to {search.failing_line_voltage:.4g} {unit}).")
    text = (f"From power-on it starts into its full load from {search.line_voltage:.4g} "
            f"{unit}")
    if search.resolution is not None:
        text += (f" (engine bisection: not at {search.failing_line_voltage:.4g} "
                 f"{unit}, resolution {search.resolution:.3g} V)")
    return text + "."


def startup_findings(design, report: StartupReport) -> list[Finding]:
    """Findings of the start-up analysis.

    Parameters
    ----------
    design : rcc.design.Design
    report : StartupReport

    Returns
    -------
    list of Finding
        ``feedback-phase``, ``dc-stall`` or ``no-start`` (fail) when it
        does not start at the lowest bus and worst corner; ``weak-drive``
        and ``hiccup`` (fail) from the continuation checks; ``slow-start``
        (warn) when the start-up time exceeds ``limits.start_time_max``.
    """
    r = report.result
    findings = []
    where = (f"at {r.bus_voltage:.4g} V bus, {r.temperature - 273.15:.3g} degC, "
             f"hFE(25 degC) {r.hfe:.3g}")
    if not r.starts:
        element = r.holding_element
        if element == "feedback-phase":
            findings.append(Finding(
                "feedback-phase", "fail",
                f"The feedback winding is connected degeneratively: it opposes any rise "
                f"of the collector current, so the circuit cannot start ({where}; "
                f"slowest mode decays at {-r.growth_rate:.3g} 1/s).",
                value=r.growth_rate, limit=0.0, unit="1/s", bound="lower",
                advice=_ADVICE["feedback-phase"]))
        elif element == "limiter":
            trip = design.limiter.vbe / design.limiter.sense_resistance
            findings.append(Finding(
                "dc-stall", "fail",
                f"The current-limit transistor holds a stable DC point with "
                f"{r.dc.collector_current:.3g} A in the switch ({where}); all poles "
                f"are in the left half-plane, so it never starts switching.",
                value=r.dc.collector_current, limit=trip, unit="A", bound="",
                advice=_ADVICE["limiter"]))
        else:
            bound = "upper"  # the lowest bus that starts must not exceed the lowest bus
            search = report.start_line
            if search is not None and search.line_voltage is not None:
                # the engine's start line against the design's lowest line
                value, limit, unit = (search.line_voltage,
                                      float(design.input.line_voltages[0]), "V")
                extra = " " + _start_line_sentence(design, report)
            elif report.oscillation_bus_voltage is not None:
                value, limit, unit = report.oscillation_bus_voltage, r.bus_voltage, "V"
                extra = (f" Oscillation can begin only above "
                         f"{report.oscillation_bus_voltage:.4g} V bus (small-signal "
                         f"threshold).")
                if search is not None:
                    extra += " " + _start_line_sentence(design, report)
            else:
                value, limit, unit, bound = r.growth_rate, 0.0, "1/s", "lower"
                extra = " It does not start at any bus voltage of the design."
            cause = ("the base is starved of start-up current"
                     if element == "startup-resistor"
                     else "the feedback through the drive RC is too weak")
            findings.append(Finding(
                "no-start", "fail",
                f"No start {where}: all poles are in the left half-plane because "
                f"{cause} (DC collector current {r.dc.collector_current:.3g} A)."
                + extra, value=value, limit=limit, unit=unit, bound=bound,
                advice=_ADVICE[element]))
        return findings
    run = report.into_load
    if run is None and report.start_line is not None:
        line = float(design.input.line_voltages[0])
        findings.append(Finding(
            "startup-lockup", "fail",
            f"The power-on DC point is unstable, but at the lowest line ({line:.4g} V) the "
            f"bulk capacitor cannot carry the full load ({design.output.load_max.text()}): "
            f"by the hold-up estimate its valley falls to zero, so the supply cannot reach "
            f"its operating point there. " + _start_line_sentence(design, report),
            value=None, limit=None, unit="",
            advice="Enlarge the bulk capacitor or reduce load_max; raise the lowest line "
                   "only if the specification allows."))
    elif run is not None and run.kind == "failed":
        findings.append(Finding(
            "startup-unverified", "warn",
            f"The power-on DC point is unstable, but whether the supply starts into its "
            f"full load is not known: the time-domain engine from power-on at "
            f"{run.line_voltage:.4g} V line stopped ({run.message}).",
            value=None, limit=None, unit="",
            advice="Check the start-up into the load with `rcc waveforms --line "
                   f"{run.line_voltage:.4g}V --load 100% --temperature "
                   f"{run.temperature - 273.15:.3g}degC --hfe min`."))
    elif run is not None and report.reaches_operating_point is False:
        if run.kind in REGULATED_KINDS:
            how = (f"it switches ('{run.kind}') but its output stays at "
                   f"{run.output_voltage:.3g} V, below {1 - report.output_tolerance:.0%} of "
                   f"the expected {run.expected_output:.3g} V, at the end of the "
                   f"{run.duration * 1e3:.3g} ms run (still rising, or the current limit "
                   f"caps the power at this corner)")
        else:
            how = (f"'{run.kind}', output {run.output_voltage:.3g} V of the expected "
                   f"{run.expected_output:.3g} V")
        findings.append(Finding(
            "startup-lockup", "fail",
            f"The power-on DC point is unstable, but from power-on at "
            f"{run.line_voltage:.4g} V line ({run.bus_voltage:.4g} V bus), "
            f"{run.temperature - 273.15:.3g} degC, hFE(25 degC) {run.hfe:.3g} and full load "
            f"({run.load.text()}) the time-domain engine does not reach the operating "
            f"point: {how}. " + _start_line_sentence(design, report),
            value=run.output_voltage, limit=run.expected_output, unit="V", bound="lower",
            advice="Let the flyback plateau reset the drive capacitor at a low output: "
                   "a smaller drive capacitor, a lower start-up resistor or a "
                   "base-emitter resistor; check with `rcc waveforms`."))
    drive = report.drive
    if drive is not None and drive.weak_drive:
        findings.append(Finding(
            "weak-drive", "fail",
            f"At {drive.bus_voltage:.4g} V bus, {drive.temperature - 273.15:.3g} degC and "
            f"hFE(25 degC) {drive.hfe:.3g} the base current at the end of the on-time "
            f"({drive.base_current_end:.3g} A) cannot hold {drive.peak_current:.3g} A "
            f"in saturation (needs {drive.base_current_needed:.3g} A): drive margin "
            f"hFE*Ib/Ic = {drive.base_current_end / drive.base_current_needed:.2f}.",
            value=drive.base_current_end / drive.base_current_needed, limit=1.0, unit="",
            bound="lower",
            advice="Lower the drive resistor, add feedback turns, enlarge the drive "
                   "capacitor or use a switch with more gain."))
    if drive is not None and drive.hiccup:
        findings.append(Finding(
            "hiccup", "fail",
            f"After demagnetization the drive capacitor holds the base off: at the "
            f"first ring peak the base stays {-drive.restart_margin:.3g} V short of the "
            f"base-emitter on-voltage, so the start-up resistor has to restart the "
            f"switch each time ({drive.bus_voltage:.4g} V bus, "
            f"{drive.temperature - 273.15:.3g} degC); the supply runs in bursts.",
            value=drive.restart_margin, limit=0.0, unit="V", bound="lower",
            advice="Give the drive capacitor a discharge path during the off-time (a "
                   "lower base-emitter resistor), enlarge it, or add feedback turns."))
    if report.start_time is not None and \
            report.start_time.total > design.limits.start_time_max:
        findings.append(Finding(
            "slow-start", "warn",
            f"Start-up takes about {report.start_time.total:.3g} s at the lowest line "
            f"(bulk {report.start_time.bulk_charge_time:.3g} s, base "
            f"{report.start_time.base_charge_time:.3g} s, growth "
            f"{report.start_time.growth_time:.3g} s).",
            value=report.start_time.total, limit=design.limits.start_time_max, unit="s",
            advice="Lower the start-up resistor (mind its dissipation) or the drive "
                   "capacitor."))
    return findings
