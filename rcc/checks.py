"""Stress and limit checks: from a design to findings.

:func:`check_design` evaluates the cycle model on the report grid (min /
nominal / max line x min / nominal / max load at 25 degC clipped into the
design's range) and runs every check over the whole temperature range and
the current-gain spread.  The result is a frozen :class:`CheckReport`.

The checks compare computed values with ratings and limits; they never
claim that a design is safe.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rcc import cycle, stress
from rcc.design import Design
from rcc.devices import base_emitter_voltage
from rcc.findings import Finding, sorted_findings, verdict
from rcc.limiter import current_limit
from rcc.mains import bus_voltage_range

__all__ = ["Stress", "CheckReport", "EnginePoint", "check_design", "with_startup_stress",
           "solve_doubtful_points", "SAFETY_CAUTION", "STORAGE_PERIOD_FRACTION",
           "DRIVE_MARGIN_WARN", "ENGINE_BUDGET", "ENGINE_MODES"]

#: Printed with every report.
SAFETY_CAUTION = (
    "CAUTION: supplies of this kind run from rectified mains. The primary side "
    "carries lethal voltages and the bulk capacitor holds a dangerous charge after "
    "switch-off. These results are computed estimates from a model, not a safety "
    "evaluation: the applicable safety standards (e.g. IEC 62368-1), local codes and "
    "licensed practice govern any work on or qualification of a real supply."
)

#: The storage time should stay below this fraction of the switching period
#: so the limiter keeps control of the peak current  # common practice
STORAGE_PERIOD_FRACTION = 0.1
#: Base-drive margin (hFE I_B / I_C at turn-off) below which a warning is
#: raised: hFE spread with current and ageing  # common practice
DRIVE_MARGIN_WARN = 1.25
#: Fraction of its rating the start-up resistor may dissipate  # common practice
RESISTOR_POWER_DERATING = 0.5
#: Margin of current-limit power over the heaviest load before a warning  # common practice
OVERLOAD_MARGIN_WARN = 1.1


@dataclass(frozen=True)
class Stress:
    """Worst-case stresses.

    Attributes
    ----------
    switch_peak_v : float
        Peak collector voltage at the highest bus [V].
    switch_rating_v : float
        Rating it is compared with (before derating) [V].
    rating_basis : str
        ``"vcev"``, ``"vcbo"`` or ``"vceo"``.
    reflected_v : float
        Highest reflected voltage [V].
    spike_v : float
        Leakage spike or clamp voltage above bus plus reflected voltage [V].
    core_peak_flux_t : float
        Worst-case peak flux density [T].
    core_limit_t : float
        Allowed flux density (saturation times margin) [T].
    worst_peak_current_a : float
        Current limit (coldest) plus storage overshoot at the highest bus [A].
    startup : dict or None
        Peaks from power-on by the time-domain engine
        (:meth:`rcc.verification.StartupStress.to_json`), when computed.
    """

    switch_peak_v: float
    switch_rating_v: float
    rating_basis: str
    reflected_v: float
    spike_v: float
    core_peak_flux_t: float
    core_limit_t: float
    worst_peak_current_a: float
    startup: dict | None = None

    def to_json(self) -> dict:
        return {name: (float(value) if isinstance(value, (float, np.floating)) else value)
                for name, value in self.__dict__.items()}


#: Default budget for solving doubtful operating points with the engine from
#: power-on (:func:`solve_doubtful_points`), in nominal engine time [s].
ENGINE_BUDGET = 20.0
#: Nominal engine speed the budget is counted in: switching cycles per second
#: (``benchmarks/bench_engine.py``: 3,204 cycles/s on the idle 2-core
#: development machine, 2026-12-02) [1/s] ...
ENGINE_NOMINAL_RATE = 3000.0
#: ... and set-up per run (about 2,000 topologies at about 1 ms each,
#: ``notes/benchmarks.md``) [s].  The budget is spent by these nominal costs,
#: never by the clock, so what a check solves is the same on every machine.
ENGINE_NOMINAL_SETUP = 2.0
#: Mode reported for an engine-solved point, by kind of operation
#: (:data:`rcc.operation.KINDS`): the engine run says whether the switching
#: repeats, not which conduction mode a regular cycle is in.
ENGINE_MODES = {"regular": "regular", "burst": "burst", "irregular": "irregular",
                "lockup": "lockup", "none": "off"}


@dataclass(frozen=True)
class EnginePoint:
    """A doubtful operating point of the report grid and what the engine said.

    Attributes
    ----------
    index : int
        Position in the report grid, in the order of
        ``OperatingPoints.records()`` (line-major) [-].
    doubt : str
        Why the cycle model's value was doubted (``OperatingPoints.doubt``).
    run : PowerOnRun or None
        The engine from power-on at that line and load (25 degC clipped into
        the range, ``hfe_typ``); ``None`` where it was not solved.
    skipped : str
        Why it was not solved (the time budget was spent, the bus collapses,
        the engine failed), else empty.
    """

    index: int
    doubt: str
    run: object | None
    skipped: str = ""

    @property
    def solved(self) -> bool:
        """The engine gave this point's values [-]."""
        return self.run is not None and self.run.kind in ENGINE_MODES


@dataclass(frozen=True)
class CheckReport:
    """Result of :func:`check_design`.

    Attributes
    ----------
    design : Design
        The design checked.
    points : rcc.cycle.OperatingPoints
        Report grid, shape (3 lines, 3 loads).
    stress : Stress
        Worst-case stresses.
    findings : tuple of Finding
        All findings, worst first.
    extra : dict
        JSON-ready sections added by other analyses (e.g. ``"startup"``).
    engine_points : tuple of EnginePoint
        The doubtful points of the grid and what the engine from power-on said
        at each (:func:`solve_doubtful_points`); empty when not run.
    engine_budget : float or None
        Budget those runs were given, in nominal engine time
        (:func:`solve_doubtful_points`); ``None`` when not run [s].
    corners : tuple of rcc.cycle.OperatingPoints
        The points solved at the temperature x gain corners of the highest and
        lowest line, per load (the stress, drive and overload findings rest on
        them as well as on the grid); not in the JSON.
    """

    design: Design
    points: cycle.OperatingPoints
    stress: Stress
    findings: tuple[Finding, ...]
    extra: dict
    engine_points: tuple = ()
    engine_budget: float | None = None
    corners: tuple = ()

    @property
    def verdict(self) -> str:
        """``pass``, ``warn`` or ``fail``."""
        return verdict(self.findings)

    def to_json(self) -> dict:
        result = {
            "title": self.design.title,
            "source": self.design.source,
            "verdict": self.verdict,
            "caution": SAFETY_CAUTION,
            "findings": [finding.to_json() for finding in self.findings],
            "operating_points": self.operating_point_records(),
            "stress": self.stress.to_json(),
        }
        if self.engine_budget is not None:
            result["engine_budget_s"] = float(self.engine_budget)
        result.update(self.extra)
        return result

    def operating_point_records(self) -> list[dict]:
        """The grid's records, with the engine's values where it solved a point.

        An engine-solved record has ``source: "engine"``, the engine's bus,
        output, load current at that output, mean pulse rate and mean peak
        current, ``mode`` from :data:`ENGINE_MODES`, ``null`` for what the run
        does not give (on- and off-times, duty, what ended them, input power and
        losses), ``doubt`` ``"engine-unsettled"`` where the run had not settled
        by its end, ``engine`` (the run's summary) and ``cycle_model`` (the
        cycle model's record, for comparison).  A doubtful record the engine did not solve keeps the
        cycle model's values and gets ``engine: {"skipped": why}``.
        """
        records = self.points.records()
        for point in self.engine_points:
            record = records[point.index]
            if point.solved:
                records[point.index] = _engine_record(record, point.run)
            else:
                record["engine"] = {"skipped": point.skipped}
        return records


def _stack(columns) -> cycle.OperatingPoints:
    """Stack per-load results (each over lines) into a (lines, loads) grid."""
    from dataclasses import fields

    def stack(values):
        return np.stack(values, axis=-1)

    kwargs = {}
    for item in fields(cycle.OperatingPoints):
        if item.name == "losses":
            kwargs["losses"] = cycle.Losses(**{
                loss.name: stack([getattr(c.losses, loss.name) for c in columns])
                for loss in fields(cycle.Losses)})
        else:
            kwargs[item.name] = stack([getattr(c, item.name) for c in columns])
    return cycle.OperatingPoints(**kwargs)


def check_design(design: Design) -> CheckReport:
    """Run the cycle model and every stress and limit check.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    CheckReport
        Operating points, stresses and findings.

    Notes
    -----
    Checks and their bases: switch voltage (bus + reflected + spike or
    clamp) against the off-state rating with ``limits.voltage_derating``;
    core flux at the current limit plus storage overshoot against
    ``saturation_flux_density * limits.flux_margin``; base drive at lowest
    line, coldest, ``hfe_min``; current-limit power at lowest line, hottest,
    against ``load_max``; highest frequency against the storage time;
    start-up resistor dissipation at the highest line; output voltage
    against ``voltage_target``.  See :mod:`rcc.stress`, :mod:`rcc.cycle`.
    """
    env, sw, out = design.environment, design.switch, design.output
    temperatures = np.array([env.temperature_min, cycle.reference_temperature(design),
                             env.temperature_max])
    gains = np.array([sw.hfe_min, sw.hfe_typ, sw.hfe_max])
    lines = np.array(design.input.line_voltages, dtype=float)
    loads = (out.load_min, out.load_nominal, out.load_max)
    # every operating point of the check in one vectorized call: the report
    # grid (lines x loads at the reference temperature and hfe_typ) and the
    # corners (temperatures x gains) at the highest and lowest line
    corner_temperatures = temperatures[:, None]
    corner_gains = gains[None, :]
    requests = ([(lines, load, None, None) for load in loads]
                + [(lines[2], load, corner_temperatures, corner_gains) for load in loads]
                + [(lines[0], load, corner_temperatures, corner_gains) for load in loads])
    solved = cycle.operating_points_batch(design, requests)
    points = _stack(solved[:3])
    high_line, low_line = solved[3:6], solved[6:9]

    findings: list[Finding] = []
    stress_result = _switch_and_core(design, high_line, findings)
    _drive(design, low_line, findings)
    _current_rating(design, high_line + low_line, stress_result, findings)
    _overload(design, findings)
    _light_load(design, high_line + [points], findings)
    _startup_resistor(design, findings)
    _output(design, points, low_line + high_line, findings)
    _not_running(design, points, findings)
    _squegging(design, [points] + low_line + high_line, findings)
    _lockup(design, [points] + low_line + high_line, findings)
    return CheckReport(design=design, points=points, stress=stress_result,
                       findings=sorted_findings(findings), extra={},
                       corners=tuple(high_line + low_line))


def with_startup_stress(report: CheckReport, startup) -> CheckReport:
    """Add the peaks from power-on to a report's stresses and findings.

    Parameters
    ----------
    report : CheckReport
        From :func:`check_design` (or :func:`rcc.analysis.full_check`).
    startup : rcc.verification.StartupStress
        Peaks from power-on by the engine.

    Returns
    -------
    CheckReport
        ``stress.startup`` filled in; ``core-saturation``, ``switch-overcurrent``
        and ``switch-overvoltage`` raised (or replaced, when the start-up value is
        the worse one: one finding per code) where the start-up peaks exceed the
        limits the steady-state checks use.
    """
    from dataclasses import replace

    design, stress_result = report.design, report.stress
    where = (f"from power-on (engine, {startup.duration * 1e3:.3g} ms at "
             f"{startup.line_voltage:.4g} V line, {startup.temperature - 273.15:.3g} degC, "
             f"hfe_max, heaviest load)")
    candidates = []
    tr, sw = design.transformer, design.switch
    if startup.core_peak_flux_t > stress_result.core_limit_t:
        candidates.append(Finding(
            "core-saturation", "fail",
            f"Peak flux density {startup.core_peak_flux_t:.3f} T {where}, magnetizing "
            f"current {startup.magnetizing_peak_a:.3f} A, exceeds "
            f"{design.limits.flux_margin:.0%} of the saturation flux density "
            f"{tr.saturation_flux_density:.3f} T: the first cycles, with the output still "
            "low and the drive capacitor discharged, overshoot the current limit most.",
            startup.core_peak_flux_t, stress_result.core_limit_t, "T",
            "Raise the sense resistor, shorten the storage time (less base overdrive at "
            "start-up, a speed-up network), add primary turns or use a larger core."))
    if startup.primary_peak_a > sw.ic_max:
        candidates.append(Finding(
            "switch-overcurrent", "fail",
            f"Collector current {startup.primary_peak_a:.3f} A {where} exceeds the rating "
            f"IC(max) = {sw.ic_max:.3f} A.", startup.primary_peak_a, sw.ic_max, "A",
            "Lower the current limit or shorten the storage time; or use a higher-current "
            "switch."))
    allowed = stress_result.switch_rating_v * design.limits.voltage_derating
    if startup.switch_peak_v > allowed:
        candidates.append(Finding(
            "switch-overvoltage", "fail",
            f"Peak collector voltage {startup.switch_peak_v:.0f} V {where} exceeds "
            f"{design.limits.voltage_derating:.0%} of {stress_result.rating_basis.upper()} = "
            f"{stress_result.switch_rating_v:.0f} V.", startup.switch_peak_v, allowed, "V",
            "Clamp lower or reduce leakage; or use a switch with a higher rating."))
    findings = list(report.findings)
    for candidate in candidates:
        twin = next((f for f in findings if f.code == candidate.code), None)
        if twin is None:
            findings.append(candidate)
        elif twin.margin is not None and candidate.margin is not None and \
                candidate.margin < twin.margin:
            findings[findings.index(twin)] = candidate
    from rcc.findings import ordered_findings

    return replace(report, stress=replace(stress_result, startup=startup.to_json()),
                   findings=ordered_findings(findings))


def solve_doubtful_points(report: CheckReport, budget: float = ENGINE_BUDGET,
                          progress=None) -> CheckReport:
    """Solve the operating points the cycle model doubts with the engine from
    power-on, as far as a time budget allows.

    Parameters
    ----------
    report : CheckReport
        From :func:`check_design` (or :func:`rcc.analysis.full_check`).
    budget : float
        Nominal engine time after which no further engine run is started; a
        run started before finishes (at most
        :data:`rcc.startup.start_line.INTO_LOAD_DURATION` simulated).  Each
        run costs :data:`ENGINE_NOMINAL_SETUP` plus its planned switching
        cycles at :data:`ENGINE_NOMINAL_RATE`, whatever the clock says, so the
        points solved do not depend on the machine [s].
    progress : callable, optional
        Called as ``progress(done, total)`` after each doubtful point [1].

    Returns
    -------
    CheckReport
        With ``engine_points``: every point whose ``doubt`` is not empty,
        solved or with the reason it was not.

    Notes
    -----
    Each doubtful point of the grid (line x load at 25 degC clipped into the
    range, ``hfe_typ``) is run with the engine from power-on with discharged
    capacitors, as a real supply starts, and classified from its settled
    window (:func:`rcc.engine.power_on.run_from_power_on`,
    :func:`rcc.operation.classify_operation`): the existing steady-state
    extraction, not a new one.  Points that break a physical invariant come
    first (the cycle model's numbers there must not be printed), then the rest
    by the number of switching cycles the run is planned to take
    (:func:`rcc.engine.power_on.planned_duration`), cheapest first, so the
    budget solves as many points as it can.
    """
    from rcc.engine.power_on import (expected_output_voltage, planned_duration,
                                     power_on_bus_voltage)
    from rcc.startup.start_line import INTO_LOAD_DURATION, power_on_run

    design = report.design
    lines = design.input.line_voltages
    out = design.output
    loads = (out.load_min, out.load_nominal, out.load_max)
    temperature = float(cycle.reference_temperature(design))
    hfe = float(design.switch.hfe_typ)
    doubts = [str(d) for d in np.ravel(report.points.doubt)]
    expected = expected_output_voltage(design, temperature)
    queue, points = [], []
    for index, doubt in enumerate(doubts):
        if not doubt:
            continue
        line, load = float(lines[index // len(loads)]), loads[index % len(loads)]
        bus = power_on_bus_voltage(design, line, load, temperature)
        if not bus > 0:
            points.append(EnginePoint(index, doubt, None, "the bulk capacitor cannot carry "
                                      "this load: no bus for the engine"))
            continue
        duration, frequency = planned_duration(design, bus, load, expected,
                                               INTO_LOAD_DURATION)
        queue.append((not doubt.startswith("invariant"), duration * frequency, index, doubt,
                      line, load))
    queue.sort(key=lambda item: item[:3])
    spent = 0.0
    total = len(queue)
    for done, (_, cycles, index, doubt, line, load) in enumerate(queue, start=1):
        if spent >= budget:
            points.append(EnginePoint(index, doubt, None,
                                      f"time budget of {budget:.3g} s spent"))
        else:
            spent += ENGINE_NOMINAL_SETUP + cycles / ENGINE_NOMINAL_RATE
            run = power_on_run(design, line, load, temperature, hfe, INTO_LOAD_DURATION)
            skipped = "" if run.kind in ENGINE_MODES else f"the engine failed: {run.message}"
            points.append(EnginePoint(index, doubt, run, skipped))
        if progress is not None:
            progress(done, total)
    from dataclasses import replace

    return replace(report, engine_points=tuple(sorted(points, key=lambda p: p.index)),
                   engine_budget=float(budget))


def _engine_record(record: dict, run) -> dict:
    """A grid record with the engine's values (see
    :meth:`CheckReport.operating_point_records`)."""
    pulses = {"regular": 1, "burst": int(round(run.pulses_per_burst))}.get(run.kind, 0)
    engine = dict(record)
    engine.update({
        "bus_v": float(run.bus_voltage), "output_v": float(run.output_voltage),
        "load_a": float(run.load.current(run.output_voltage)),
        "frequency_hz": float(run.frequency), "on_time_s": None, "off_time_s": None,
        "duty": None, "peak_current_a": float(run.peak_current),
        "mode": ENGINE_MODES[run.kind], "on_end": None, "off_end": None,
        "input_power_w": None, "losses_w": None, "pulses_per_pattern": pulses,
        "source": "engine", "doubt": "" if run.settled else "engine-unsettled",
        "engine": {
            "kind": run.kind, "settled": bool(run.settled),
            "simulated_s": float(run.duration), "wall_time_s": float(run.wall_time),
            "burst_period_s": float(run.burst_period),
            "pulses_per_burst": float(run.pulses_per_burst),
            "time_to_regulation_s": (None if run.time_to_regulation is None
                                     else float(run.time_to_regulation)),
            "hfe": float(run.hfe),
        },
        "cycle_model": record,
    })
    return engine


# ---------------------------------------------------------------- checks
def _max(arrays, attribute):
    return float(max(np.max(getattr(a, attribute)) for a in arrays))


def _switch_and_core(design, high_line, findings) -> Stress:
    sw, tr, env, limits = design.switch, design.transformer, design.environment, design.limits
    bus_max = float(bus_voltage_range(design)[2])
    reflected = _max(high_line, "reflected_voltage")
    coldest = min(env.temperature_min, env.temperature_max)
    limit_current = float(current_limit(design.limiter.vbe, design.limiter.vbe_tempco,
                                        coldest, design.limiter.sense_resistance))
    overshoot = float(stress.storage_overshoot(bus_max, sw.storage_time,
                                               tr.magnetizing_inductance + tr.leakage_inductance))
    # the datasheet storage time at the coldest limit, or the charge-control
    # storage of an overdriven switch found by the cycle model, whichever is worse
    worst_current = max(limit_current + overshoot, _max(high_line, "peak_current"))
    clamp = design.clamp
    if clamp.type == "zener":
        above_bus = clamp.voltage
        spike = max(above_bus - reflected, 0.0)
        how = f"zener clamp at {clamp.voltage:.0f} V above the bus"
    elif clamp.type == "rcd":
        # the clamp capacitor's highest level at high line, carried through
        # the cycles (rcc.stress.rcd_clamp_cycle)
        clamp_voltage = _max(high_line, "clamp_voltage")
        spike = clamp_voltage - reflected
        how = f"RCD clamp capacitor peaking at {clamp_voltage:.0f} V above the bus"
    else:
        spike = float(stress.leakage_spike(worst_current, tr.leakage_inductance,
                                           design.node_capacitance))
        how = "no clamp: leakage energy rings into the node capacitance"
    peak = float(stress.switch_peak_voltage(bus_max, reflected, spike))
    basis, rating = stress.rating_basis(sw)
    allowed = rating * limits.voltage_derating
    if peak > allowed:
        findings.append(Finding(
            "switch-overvoltage", "fail",
            f"Peak collector voltage {peak:.0f} V (bus {bus_max:.0f} V + reflected "
            f"{reflected:.0f} V + spike {spike:.0f} V; {how}) exceeds "
            f"{limits.voltage_derating:.0%} of {basis.upper()} = {rating:.0f} V.",
            peak, allowed, "V",
            "Use a switch with a higher off-state rating, lower the reflected voltage "
            "(fewer primary turns per output turn), or clamp lower (zener clamp, smaller "
            "RCD resistor) and reduce leakage inductance."))
    if basis != "vceo" and peak > sw.vceo:
        findings.append(Finding(
            "switch-vceo-exceeded", "warn",
            f"Peak collector voltage {peak:.0f} V is above VCEO = {sw.vceo:.0f} V and "
            f"relies on the {basis.upper()} rating: the feedback winding must hold the "
            "base reverse-biased through the whole flyback plateau. At start-up, before "
            "the feedback builds up, and with the base open (failed drive), only VCEO applies.",
            peak, sw.vceo, "V",
            "Keep the base-emitter path low-impedance during the off-time, or choose a "
            "part whose VCEO covers the peak."))
    flux = float(stress.peak_flux_density(tr.magnetizing_inductance, worst_current,
                                          tr.primary_turns, tr.core_area))
    flux_limit = tr.saturation_flux_density * limits.flux_margin
    if flux > flux_limit:
        findings.append(Finding(
            "core-saturation", "fail",
            f"Worst-case peak flux density {flux:.3f} T at current limit plus storage "
            f"overshoot ({worst_current:.3f} A at the highest bus, coldest limiter) exceeds "
            f"{limits.flux_margin:.0%} of the saturation flux density "
            f"{tr.saturation_flux_density:.3f} T.",
            flux, flux_limit, "T",
            "Raise the sense resistor (lower current limit), add primary turns or use a "
            "larger core; a shorter storage time also lowers the overshoot."))
    return Stress(switch_peak_v=peak, switch_rating_v=rating, rating_basis=basis,
                  reflected_v=reflected, spike_v=spike, core_peak_flux_t=flux,
                  core_limit_t=flux_limit, worst_peak_current_a=worst_current)


def _drive(design, low_line, findings):
    """Base drive at the lowest line, coldest temperature, hfe_min, heaviest load."""
    heavy = low_line[2]
    # index [0, 0]: coldest temperature (row 0), hfe_min (column 0)
    capability = float(heavy.drive_capability[0, 0])
    peak = float(heavy.peak_current[0, 0])
    ended_by_drive = str(heavy.on_end[0, 0]) == "drive"
    if not heavy.running[0, 0] or peak <= 0:
        return
    needed = float(heavy.trip_current[0, 0]) if ended_by_drive else peak
    margin = capability / max(needed, 1e-12)
    if ended_by_drive:
        findings.append(Finding(
            "weak-drive", "fail",
            f"At the lowest line, coldest and hfe_min the switch leaves saturation at "
            f"{peak:.3f} A before the limiter's {needed:.3f} A: the on-time is ended by "
            "the base drive, the switch desaturates at full current and dissipates.",
            margin, 1.0, "",
            "Increase the base drive: more feedback turns, a smaller drive resistor, a "
            "larger drive capacitor, or a switch with higher hFE.", bound="lower"))
    elif margin < DRIVE_MARGIN_WARN:
        findings.append(Finding(
            "weak-drive", "warn",
            f"Base-drive margin hFE*Ib/Ic = {margin:.2f} at turn-off (lowest line, coldest, "
            f"hfe_min, heaviest load): little reserve for hFE spread and ageing.",
            margin, DRIVE_MARGIN_WARN, "",
            "Increase the base drive (feedback turns, drive resistor, drive capacitor).",
            bound="lower"))


def _current_rating(design, corner_sets, stress_result, findings):
    peak = max(stress_result.worst_peak_current_a, _max(corner_sets, "peak_current"))
    if peak > design.switch.ic_max:
        findings.append(Finding(
            "switch-overcurrent", "fail",
            f"Worst-case collector current {peak:.3f} A exceeds the rating "
            f"IC(max) = {design.switch.ic_max:.3f} A.",
            peak, design.switch.ic_max, "A",
            "Lower the current limit (larger sense resistor) or use a higher-current switch."))


def _overload(design, findings):
    env, out = design.environment, design.output
    hottest = max(env.temperature_min, env.temperature_max)
    line = design.input.line_voltages[0]
    capability = float(cycle.limit_power_capability(design, line, hottest))
    target = out.voltage_target
    if target is None:
        target = float(cycle.hold_output_voltage(design, hottest) or 0.0)
    demand = float(out.load_max.current(target) * target) if target > 0 else 0.0
    if demand <= 0:
        return
    limit_text = (f"the current limit delivers {capability:.2f} W at the lowest line, "
                  f"hottest (limiter Vbe lowest), hfe_min")
    if capability < demand:
        findings.append(Finding(
            "overload", "fail",
            f"Heaviest load needs {demand:.2f} W at {target:.2f} V but {limit_text}: the "
            "output falls at full load.",
            demand, capability, "W",
            "Lower the sense resistor (higher current limit), raise the magnetizing "
            "inductance or reflected voltage, or reduce load_max."))
    elif capability < OVERLOAD_MARGIN_WARN * demand:
        findings.append(Finding(
            "overload", "warn",
            f"Heaviest load needs {demand:.2f} W; {limit_text}: less than "
            f"{OVERLOAD_MARGIN_WARN - 1:.0%} reserve.",
            # the bound of a warning is the load the reserve allows
            demand, capability / OVERLOAD_MARGIN_WARN, "W",
            "Raise the current limit slightly or reduce load_max."))


def _light_load(design, corner_sets, findings):
    frequency = _max(corner_sets, "frequency")
    limit = STORAGE_PERIOD_FRACTION / design.switch.storage_time
    burst = any(np.any(a.mode == "burst") for a in corner_sets)
    if frequency > limit:
        findings.append(Finding(
            "light-load-frequency", "warn",
            f"Switching frequency reaches {frequency / 1e3:.0f} kHz at light load; the "
            f"storage time {design.switch.storage_time * 1e6:.2f} us would exceed "
            f"{STORAGE_PERIOD_FRACTION:.0%} of the period above {limit / 1e3:.0f} kHz, "
            "where the limiter loses control of the peak current.",
            frequency, limit, "Hz",
            "Add a minimum load, raise the magnetizing inductance, or use a faster switch "
            "(shorter storage time)."))
    if burst:
        findings.append(Finding(
            "light-load-burst", "info",
            "At the lightest load the storage-time-limited minimum energy per cycle "
            "exceeds the demand: the regulation path holds the limiter on and the "
            "supply runs in bursts (audible noise, higher output ripple).",
            None, None, "",
            "Acceptable for many standby rails; otherwise add a minimum load or use a "
            "faster switch."))


def _startup_resistor(design, findings):
    bus_max = float(bus_voltage_range(design)[2])
    vbe = float(base_emitter_voltage(design.switch.vbe, design.switch.vbe_tempco,
                                     design.environment.temperature_min))
    power = (bus_max - vbe) ** 2 / design.startup.resistance
    allowed = RESISTOR_POWER_DERATING * design.startup.power_rating
    if power > allowed:
        findings.append(Finding(
            "startup-resistor-power", "fail" if power > design.startup.power_rating else "warn",
            f"Start-up resistor dissipates {power:.3f} W at the highest bus "
            f"({bus_max:.0f} V), more than {RESISTOR_POWER_DERATING:.0%} of its "
            f"{design.startup.power_rating:.2f} W rating.",
            power, allowed, "W",
            "Use a higher-rated resistor or split it into several in series (which also "
            "shares the voltage); a larger value lowers the dissipation but slows start-up."))


def _output(design, points, corner_sets, findings):
    target = design.output.voltage_target
    if target is None:
        return
    tolerance = design.limits.output_tolerance
    running = points.running
    nominal = float(points.output_voltage[1, 1])
    deviation = (nominal - target) / target
    # a supply that does not run has no output: that is reported by its cause
    if abs(deviation) > tolerance and bool(running[1, 1]):
        findings.append(Finding(
            "output-off-target", "fail",
            f"Output at nominal line and load is {nominal:.3f} V, {deviation:+.1%} from the "
            f"target {target:.3f} V (allowed +/-{tolerance:.0%}).",
            nominal, target * (1 + np.sign(deviation) * tolerance), "V",
            "Adjust the regulation set point (zener voltage, reference or divider) or the "
            "output-to-feedback turns ratio.", bound="upper" if deviation > 0 else "lower"))
    outputs = np.concatenate([np.ravel(points.output_voltage[running])] + [
        np.ravel(a.output_voltage[a.running]) for a in corner_sets])
    if outputs.size == 0:
        return
    low, high = float(outputs.min()), float(outputs.max())
    worst = low if (target - low) > (high - target) else high
    worst_deviation = (worst - target) / target
    if abs(worst_deviation) > tolerance and abs(deviation) <= tolerance:
        findings.append(Finding(
            "output-off-target", "warn",
            f"Across line, load, temperature and hFE the output spans {low:.3f} to "
            f"{high:.3f} V; the worst is {worst_deviation:+.1%} from the target "
            f"{target:.3f} V (allowed +/-{tolerance:.0%}): finite regulation gain or "
            "overload.",
            worst, target * (1 + np.sign(worst_deviation) * tolerance), "V",
            "Raise the regulation gain (smaller zener/LED series resistor, larger limiter "
            "base resistor) or compensate the zener tempco.",
            bound="upper" if worst_deviation > 0 else "lower"))


def _not_running(design, points, findings):
    if design.transformer.feedback_phase != "regenerative":
        return  # reported by the start-up analysis as feedback-phase
    if not np.all(points.running):
        findings.append(Finding(
            "no-restart", "fail",
            "After the first cycle the drive capacitor holds the base below its "
            "threshold and neither the ring nor the start-up current can turn the switch "
            "on again (the base-emitter resistor bleeds more than the start-up resistor "
            "supplies).",
            None, None, "",
            "Lower the start-up resistor, raise the base-emitter resistor, or shorten "
            "the drive time constant."))


def _squegging(design, corner_sets, findings):
    unsettled = sum(int(np.sum(~a.settled & a.running)) for a in corner_sets)
    total = sum(int(np.sum(a.running)) for a in corner_sets)
    if unsettled:
        findings.append(Finding(
            "drive-ratchet", "warn",
            f"At {unsettled} of {total} evaluated operating points the cycle states "
            "(drive and auxiliary capacitors) settle into no steady cycle: a repeating "
            "pattern of different pulses (for example a full pulse, then held short ones "
            "while the drive capacitor ratchets and resets), an alternation between two "
            "cycle regimes, or irregular cycles. The cycle-model values there are averages "
            "of that pattern, marked unverified; check with `rcc cycle`/`rcc waveforms`.",
            float(unsettled), 0.0, "points",
            "Give the drive capacitor a reset path in the off-time: a base-emitter resistor "
            "of lower value, a diode across the base-emitter junction, or more feedback "
            "turns so the base is clamped during the flyback plateau."))


def _lockup(design, corner_sets, findings):
    blocked = [(a, np.asarray(a.startup_lockup)) for a in corner_sets]
    count = sum(int(np.sum(mask)) for _, mask in blocked)
    if not count:
        return
    worst = min(float(np.min(a.load_current[mask])) for a, mask in blocked if np.any(mask))
    findings.append(Finding(
        "startup-lockup", "fail",
        f"At {count} evaluated operating points (lightest affected load {worst:.3g} A) the "
        "output cannot rise from zero to its operating point: at a low output the "
        "reflected voltage is too small to reset the drive capacitor during the off-time, "
        "the cycles become drive-timed and deliver less than the load takes. From "
        "power-on the supply would stay at a low output and hiccup.",
        float(count), 0.0, "points",
        "Strengthen the drive-capacitor reset (a lower base-emitter resistor, a diode "
        "path across the base, a smaller drive capacitor or more feedback turns), or make "
        "sure the load stays light until the output is up; confirm with `rcc waveforms`."))
