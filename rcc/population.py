"""A seeded population of plausible free-running flyback designs nobody tuned.

:func:`generate` draws designs the way a designer would draw them: the
specification (input class, output voltage and power) and the designer's
free choices are random within the ranges below; every dependent value is
derived from them by the usual design arithmetic and rounded to a preferred
value.  The designs are validated (:func:`rcc.design_from_dict`) and carry
their name and seed, so any one of them can be rebuilt with
:func:`generate_one`.  They serve as test material for the models (the
accuracy benchmark, ``benchmarks/bench_accuracy.py``), so the ranges were
chosen once, for plausibility only, and are **not** to be re-tuned to make
models agree (``notes/accuracy.md``).

Design procedure (in this order; ``U(a, b)`` uniform, ``logU`` log-uniform):

1.  Input class and bus range.  AC: the minimum bus is the bulk-capacitor
    valley at the lowest line and full power (:func:`rcc.mains.bulk_valley`),
    the maximum the rectified peak at the highest line.  DC: the given range.
2.  Reflected voltage ``V_R = r * V_bus,min`` (capped); turns ratio
    ``Np/Ns = V_R / (Vo + Vf)``.
3.  Magnetizing inductance from a boundary-conduction frequency target at
    the minimum bus and full power, ``Lp = Vin^2 V_R^2 / (2 Pin f (Vin +
    V_R)^2)`` (Irving & Jovanović 2002, as :func:`rcc.flyback.bcm_frequency`).
4.  Trip current ``I_trip = m * Ipk`` with the boundary-conduction peak
    ``Ipk = 2 Pin (1/Vin + 1/V_R)``; sense resistor ``Rs = Vbe,lim / I_trip``.
5.  Core area from the power class; primary turns for a design flux density
    at the trip current plus the storage overshoot at the highest bus,
    ``Np = Lp I / (B Ae)`` (Faraday's law, McLyman 2004), the frequency
    target raised where they would not fit; output turns from the turns
    ratio (the reflected voltage is recomputed from whole turns).
6.  Feedback turns for a drive voltage ``Nf/Np * V_bus,min``; with
    feedback-winding regulation at least enough for a 6 V auxiliary rail.
7.  Drive resistor for a base current ``k`` times what ``hFE_min`` needs at
    the trip current; drive capacitor with ``R C`` several on-times long.
8.  Start-up resistor for a start current at the minimum bus, its power
    rating the smallest preferred one with the dissipation at the highest
    bus under half of it; base-emitter resistor (if fitted) taking a fraction
    of the start current at ``Vbe``.
9.  Regulation: the auxiliary voltage the turns give at the target output,
    the zener below it by ``Vbe,lim`` and the series-resistor drop at the
    design regulation current (a fraction of the current that holds the
    limiter on); or, with an optocoupler, the reference voltage that puts the
    LED at that current at the target output.
10. Output capacitor for a ripple fraction at the lowest frequency, times an
    oversize factor (ESR and ripple-current rating); ESR of an electrolytic
    of that size.
11. Clamp: zener or RCD at a multiple of ``V_R`` (RCD resistor from the
    clamp power, capacitor for an ``RC`` many periods long), or none, the
    switch rated for the lossless leakage spike ``Ipk sqrt(L_lk / C_node)``.
12. Switch ratings: ``VCEV`` the first preferred rating with the stress
    (highest bus + ``V_R`` + clamp or spike) under 80 % of it; ``Ic,max``
    over 1.5 times the highest peak.

Ranges of the designer's choices (each plausible for hand-designed
ringing-choke supplies; none is from a single published source, so all are
marked common practice; the same table is in ``notes/accuracy.md``):

============================  ==========================  =====================================
choice                        range                       why plausible
============================  ==========================  =====================================
input class                   universal 85-265 V (nom.    the AC classes of mains products and
                              115 or 230 V) 30 %,         DC buses of telecom, industrial and
                              100-120 V class (90-132 V)  battery equipment  # common practice
                              15 %, 230 V class
                              (195-265 V) 20 %, DC 35 %
DC nominal bus                logU 15-320 V; min 0.75-0.9 12-400 V overall  # common practice
                              of it, max 1.1-1.25 (<=400)
line frequency                50 or 60 Hz (60 Hz for the  mains  # common practice
                              100-120 V class)
bulk capacitance              1.5-3 uF/W (universal,      hold-up rule of thumb  # common practice
                              100-120 V), 0.7-1.5 uF/W
                              (230 V), E6, >= 4.7 uF
output voltage                3.3, 5, 9, 12, 15, 18, 24,  usual rails  # common practice
                              48 V
output power (full load)      logU 1 W - min(60 W,        peak current at low line under about
                              0.3 A x V_bus,min,          3.5 A (a TO-220 bipolar switch),
                              4 A x Vo)                   output current under 4 A
                                                          # common practice
nominal / minimum load        0.4-1.0 / 0.05-0.25 of      # common practice
                              full load; current (70 %)
                              or resistance
efficiency assumed            0.65-0.85                   small flyback supplies  # common practice
output rectifier drop         0.35-0.55 V (Vo <= 15 V,    Schottky / fast diode  # common practice
                              Schottky), 0.7-1.0 V
reflected fraction r          0.35-0.9 of V_bus,min,      switch stress against duty  # common practice
                              V_R <= 160 V
BCM frequency at min bus,     logU 20-80 kHz              ferrite flyback range  # common practice
full power
trip-current margin m         1.15-1.5                    headroom for tolerances  # common practice
design flux density           0.2-0.3 T                   DOMAIN.md: designers keep 0.2-0.3 T
                                                          # common practice
saturation flux density       0.37-0.42 T                 MnZn power ferrite near 100 degC
                                                          # from memory
core area                     20 mm^2 x sqrt(P / 5 W) x   EE13-EE30 class cores  # common practice
                              U(0.8, 1.25), 8-150 mm^2
leakage inductance            0.5-3 % of Lp               layered windings  # common practice
winding capacitance           10-60 pF                    small flyback  # common practice
drive voltage at min bus      4-12 V                      # common practice
base overdrive k              1.5-3                       hFE_min margin  # common practice
drive RC / on-time            3-10                        # common practice
start-up current at min bus   0.1-0.6 mA                  "a fraction of a mA"  # common practice
base-emitter resistor         fitted 60 %; Vbe/Rbe        # common practice
                              0.1-0.3 of start current
limiter                       Vbe 0.55-0.65 V, hFE        small-signal NPN  # common practice
                              100-300, base resistor
                              100 ohm-1 kohm (E12)
regulation method             feedback winding 50 %,      both usual  # common practice
                              optocoupler 50 %
regulation current at target  0.3-0.8 of Vbe,lim / R_lb   # common practice
auxiliary filter capacitor    logU 22 nF - 47 uF (E6)     tens of nF to tens of uF, as built
zener series resistor         47-470 ohm (E12)            # common practice
optocoupler                   CTR 0.5-2, LED 1.0-1.2 V,   # common practice
                              series 100 ohm-1 kohm
output ripple / oversize      1-2 % at f_min / 1-4x       ESR and ripple current  # common practice
clamp                         none 30 %, zener 35 %,      # common practice
                              RCD 35 %; at 1.3-2.0 V_R
                              (zener), 1.4-2.2 V_R (RCD),
                              RCD RC 10-30 periods; none
                              only where the lossless
                              spike fits a rating
turns of any winding          at most 300; beyond, the    winding window of small cores
                              frequency target rises (up  # common practice
                              to 150 kHz)
storage overshoot             at most half the trip       a switch fast enough for the
                              current at the highest bus  inductance  # common practice
switch gain                   hFE_min logU 8-40,          power bipolar transistors
                              typ/min 1.3-2, max/typ      # common practice
                              1.3-2, all <= 100
storage time                  logU 0.2-4 us               # common practice
transition frequency          logU 4-30 MHz (VCEV >=      # common practice
                              400 V), 20-150 MHz
switch output capacitance     10-80 pF                    # common practice
switch Vbe / Vce,sat / VEBO   0.65-0.8 / 0.2-0.5 / 5-9 V  # common practice
temperature range             min -20, -10, 0, 10 degC;   # common practice
                              max 40-85 degC
============================  ==========================  =====================================

Values are rounded as a designer orders parts: resistors to E12 (sense
resistors E24), capacitors to E6, zener voltages to E24, turns to whole
turns.  A draw whose derived values break a plausibility rule (stress over
the largest rating, no zener fits, ...) is redrawn from the same seed
stream, so the population stays deterministic.

References
----------
.. [1] J. Irving and M. M. Jovanović, "Analysis and design of
   self-oscillating flyback converter", Proc. IEEE APEC 2002, pp. 897-903.
.. [2] C. W. T. McLyman, *Transformer and Inductor Design Handbook*, 3rd ed.,
   Marcel Dekker, 2004, ch. 2 (Faraday's law, ``B = L I / (N Ae)``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from rcc.design import Design, design_from_dict
from rcc.flyback import bcm_peak_current
from rcc.mains import bulk_valley, rectified_peak
from rcc.stress import clamp_power, leakage_spike

__all__ = ["GeneratedDesign", "generate", "generate_one", "family", "INPUT_CLASSES",
           "OUTPUT_VOLTAGES", "VOLTAGE_RATINGS", "CURRENT_RATINGS", "MAX_ATTEMPTS"]

#: Input classes: (name, probability, (ac_min, ac_nominal, ac_max) or None for DC).
INPUT_CLASSES = (
    ("universal", 0.30, (85.0, None, 265.0)),   # nominal 115 or 230 V, drawn
    ("100-120V", 0.15, (90.0, 115.0, 132.0)),
    ("230V", 0.20, (195.0, 230.0, 265.0)),
    ("dc", 0.35, None),
)
#: Output rails [V].
OUTPUT_VOLTAGES = (3.3, 5.0, 9.0, 12.0, 15.0, 18.0, 24.0, 48.0)
#: Preferred collector-emitter ratings (VCEV) of switching transistors [V].
VOLTAGE_RATINGS = (60.0, 80.0, 100.0, 150.0, 200.0, 250.0, 300.0, 400.0, 500.0, 600.0,
                   700.0, 800.0, 1000.0, 1200.0, 1500.0)
#: Preferred collector current ratings [A].
CURRENT_RATINGS = (0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 8.0, 10.0, 12.0, 15.0)
#: Start-up resistor power ratings [W].
STARTUP_RATINGS = (0.25, 0.5, 1.0)
#: Most turns of one winding that fit the window of a small core [1].
MAX_TURNS = 300
#: Highest boundary-conduction frequency target at the minimum bus, full
#: power, a designer goes to when the turns do not fit [Hz].
MAX_BCM_FREQUENCY = 150e3
#: Most output current of a ringing-choke supply (rectifier, capacitor
#: ripple current) [A].
MAX_OUTPUT_CURRENT = 4.0
#: Redraws allowed for one design before giving up (never reached in practice) [1].
MAX_ATTEMPTS = 200
#: Derating used by the designer for the switch voltage [1].
VOLTAGE_DERATING = 0.8
#: Smallest zener voltage of the E24 series used (the 2.4 V part) [V].
_SMALLEST_ZENER = 2.4

_E6 = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
_E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3,
        4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)


@dataclass(frozen=True)
class GeneratedDesign:
    """One design of the population.

    Attributes
    ----------
    name : str
        ``pop-<seed>-<index>``, unique in a population.
    seed : int
        Seed of the population [1].
    index : int
        Position in the population; ``generate_one(seed, index)`` rebuilds it [1].
    design : Design
        The validated design.
    data : dict
        The design as the dictionary given to :func:`rcc.design_from_dict`
        (SI numbers, loads as strings with units).
    choices : dict
        The designer's random choices that made it (names as in the module
        table, SI units).
    """

    name: str
    seed: int
    index: int
    design: Design
    data: dict
    choices: dict


def generate(count: int, seed: int) -> list[GeneratedDesign]:
    """A population of plausible designs.

    Parameters
    ----------
    count : int
        Number of designs [1].
    seed : int
        Seed; the same seed gives the same designs [1].

    Returns
    -------
    list of GeneratedDesign
        ``count`` designs, ``generate_one(seed, i)`` for ``i`` in order.
    """
    if count < 0:
        raise ValueError(f"count = {count!r}: expected a non-negative number of designs")
    return [generate_one(seed, index) for index in range(int(count))]


def generate_one(seed: int, index: int) -> GeneratedDesign:
    """Design number ``index`` of the population with ``seed``.

    Parameters
    ----------
    seed : int
        Population seed [1].
    index : int
        Position in the population [1].

    Returns
    -------
    GeneratedDesign

    Raises
    ------
    RuntimeError
        If no plausible draw is found in :data:`MAX_ATTEMPTS` attempts.
    """
    rng = np.random.default_rng([int(seed), int(index)])
    name = f"pop-{int(seed)}-{int(index):04d}"
    for _ in range(MAX_ATTEMPTS):
        drawn = _draw(_Choices(rng), name)
        if drawn is not None:
            data, choices = drawn
            design = design_from_dict(data, source=name)
            return GeneratedDesign(name=name, seed=int(seed), index=int(index),
                                   design=design, data=data, choices=choices)
    raise RuntimeError(f"{name}: no plausible design in {MAX_ATTEMPTS} draws")


def family(design: Design) -> dict[str, str]:
    """The family of a design for grouping results.

    Parameters
    ----------
    design : Design

    Returns
    -------
    dict
        ``regulation`` (method), ``clamp`` (type), ``input`` (``"ac"`` or
        ``"dc"``).
    """
    return {"regulation": design.regulation.method, "clamp": design.clamp.type,
            "input": "ac" if design.input.is_ac else "dc"}


# ------------------------------------------------------------------ drawing
class _Choices:
    """Random draws that remember what they drew (the designer's choices)."""

    def __init__(self, rng: np.random.Generator):
        self.rng = rng
        self.made: dict[str, Any] = {}

    def uniform(self, name: str, low: float, high: float) -> float:
        value = float(self.rng.uniform(low, high))
        self.made[name] = value
        return value

    def log_uniform(self, name: str, low: float, high: float) -> float:
        value = float(math.exp(self.rng.uniform(math.log(low), math.log(high))))
        self.made[name] = value
        return value

    def pick(self, name: str, options, weights=None):
        options = list(options)
        if weights is not None:
            weights = np.asarray(weights, dtype=float) / np.sum(weights)
        value = options[int(self.rng.choice(len(options), p=weights))]
        self.made[name] = value
        return value

    def chance(self, name: str, probability: float) -> bool:
        value = bool(self.rng.uniform() < probability)
        self.made[name] = value
        return value


def _preferred(value: float, series, how: str = "nearest") -> float:
    """Round to a preferred-number series (E6/E12/E24) over all decades."""
    decade = 10.0 ** math.floor(math.log10(value))
    candidates = [d * m for d in (decade / 10, decade, decade * 10) for m in series]
    candidates = [float(f"{c:.3g}") for c in candidates]     # no binary noise
    if how == "up":
        return min(c for c in candidates if c >= value * (1 - 1e-12))
    if how == "down":
        return max(c for c in candidates if c <= value * (1 + 1e-12))
    return min(candidates, key=lambda c: abs(math.log(c / value)))


def _power_cap(bus_min: float, output_voltage: float) -> float:
    """Highest full-load output power drawn for a minimum bus and an output [W]:
    60 W, a boundary-conduction peak of about 3.5 A at the minimum bus
    (0.3 A/V), and MAX_OUTPUT_CURRENT at the output  # common practice"""
    return max(1.0, min(60.0, 0.3 * bus_min, MAX_OUTPUT_CURRENT * output_voltage))


def _first_at_least(value: float, ladder) -> float | None:
    for rating in ladder:
        if rating >= value:
            return rating
    return None


def _draw(c: _Choices, name: str):
    """One draw of a design; None if a plausibility rule fails (redraw)."""
    # 1. specification and bus
    input_class = c.pick("input_class", [k[0] for k in INPUT_CLASSES],
                         [k[1] for k in INPUT_CLASSES])
    vo = c.pick("output_voltage", OUTPUT_VOLTAGES)
    efficiency = c.uniform("efficiency", 0.65, 0.85)
    vf = (c.uniform("output_rectifier_drop", 0.35, 0.55) if vo <= 15.0
          else c.uniform("output_rectifier_drop", 0.7, 1.0))
    data: dict[str, Any] = {}
    if input_class == "dc":
        nominal = c.log_uniform("dc_nominal", 15.0, 320.0)
        dc_min = max(12.0, nominal * c.uniform("dc_min_fraction", 0.75, 0.9))
        dc_max = min(400.0, nominal * c.uniform("dc_max_fraction", 1.1, 1.25))
        bus_min, bus_max = dc_min, dc_max
        power = c.log_uniform("output_power", 1.0, _power_cap(bus_min, vo))
        input_power = power / efficiency
        data["input"] = {"dc_min": round(dc_min, 1), "dc_nominal": round(nominal, 1),
                         "dc_max": round(dc_max, 1)}
        bus_min, bus_max = data["input"]["dc_min"], data["input"]["dc_max"]
    else:
        ac_min, ac_nominal, ac_max = dict((k[0], k[2]) for k in INPUT_CLASSES)[input_class]
        if ac_nominal is None:
            ac_nominal = c.pick("ac_nominal", (115.0, 230.0))
        line_frequency = 60.0 if input_class == "100-120V" else c.pick("line_frequency",
                                                                      (50.0, 60.0))
        bridge = c.uniform("bridge_drop", 1.4, 2.0)
        peak_min = float(rectified_peak(ac_min, bridge))
        power = c.log_uniform("output_power", 1.0, _power_cap(0.8 * peak_min, vo))
        input_power = power / efficiency
        per_watt = (c.uniform("bulk_uf_per_w", 0.7, 1.5) if input_class == "230V"
                    else c.uniform("bulk_uf_per_w", 1.5, 3.0))
        bulk = max(4.7e-6, _preferred(per_watt * 1e-6 * input_power, _E6, "up"))
        bus_min = float(bulk_valley(peak_min, input_power, bulk, line_frequency))
        bus_max = float(rectified_peak(ac_max, bridge))
        data["input"] = {"ac_min": ac_min, "ac_nominal": ac_nominal, "ac_max": ac_max,
                         "line_frequency": line_frequency, "bulk_capacitance": bulk,
                         "bridge_drop": round(bridge, 2)}
        if bus_min < 0.5 * peak_min:
            return None

    # 2. reflected voltage and turns ratio
    reflected = min(c.uniform("reflected_fraction", 0.35, 0.9) * bus_min, 160.0)
    # 3. magnetizing inductance for a BCM frequency target at min bus, full power
    frequency = c.log_uniform("bcm_frequency", 20e3, 80e3)
    lp = (bus_min ** 2 * reflected ** 2
          / (2.0 * input_power * frequency * (bus_min + reflected) ** 2))
    # 4. trip current and sense resistor
    peak = float(bcm_peak_current(input_power, bus_min, reflected))
    limiter_vbe = round(c.uniform("limiter_vbe", 0.55, 0.65), 3)
    trip = c.uniform("trip_margin", 1.15, 1.5) * peak
    sense = _preferred(limiter_vbe / trip, _E24)
    trip = limiter_vbe / sense
    # switch (its storage time enters the overshoot)
    storage = c.log_uniform("storage_time", 0.2e-6, 4e-6)
    overshoot = bus_max * storage / lp
    worst_peak = trip + overshoot
    # 5. core and turns
    area = min(150e-6, max(8e-6, 20e-6 * math.sqrt(power / 5.0)
                           * c.uniform("core_area_factor", 0.8, 1.25)))
    flux = c.uniform("design_flux", 0.2, 0.3)
    np_turns = max(4, math.ceil(lp * worst_peak / (flux * area)))
    if np_turns > MAX_TURNS:
        # too many turns for the window: the designer raises the frequency
        # target (Lp and Np fall in proportion), up to MAX_BCM_FREQUENCY
        frequency *= np_turns / MAX_TURNS
        if frequency > MAX_BCM_FREQUENCY:
            return None
        lp = (bus_min ** 2 * reflected ** 2
              / (2.0 * input_power * frequency * (bus_min + reflected) ** 2))
        overshoot = bus_max * storage / lp
        worst_peak = trip + overshoot
        np_turns = max(4, math.ceil(lp * worst_peak / (flux * area)))
        if np_turns > MAX_TURNS:
            return None
    if overshoot > 0.5 * trip:
        return None          # a switch this slow would not be chosen for this inductance
    ratio = reflected / (vo + vf)
    ns_turns = max(1, round(np_turns / ratio))
    if ns_turns > MAX_TURNS:
        return None
    reflected = np_turns / ns_turns * (vo + vf)
    if not reflected < 0.95 * bus_min:
        return None
    # 6. feedback turns
    method = c.pick("regulation_method", ("feedback-winding", "optocoupler"))
    drive_voltage = c.uniform("drive_voltage", 4.0, 12.0)
    nf_turns = max(1, round(np_turns * drive_voltage / bus_min))
    aux_drop = round(c.uniform("aux_rectifier_drop", 0.6, 0.8), 2)
    if method == "feedback-winding":
        needed = math.ceil(ns_turns * (6.0 + aux_drop) / (vo + vf))
        nf_turns = max(nf_turns, needed)
    if nf_turns > MAX_TURNS:
        return None
    drive_voltage = nf_turns / np_turns * bus_min
    # 7. base drive
    hfe_min = c.log_uniform("hfe_min", 8.0, 40.0)
    hfe_typ = min(100.0 / 1.3, hfe_min * c.uniform("hfe_typ_ratio", 1.3, 2.0))
    hfe_max = min(100.0, hfe_typ * c.uniform("hfe_max_ratio", 1.3, 2.0))
    switch_vbe = round(c.uniform("switch_vbe", 0.65, 0.8), 3)
    headroom = drive_voltage - switch_vbe - limiter_vbe
    if headroom < 1.0:
        return None
    overdrive = c.uniform("base_overdrive", 1.5, 3.0)
    drive_r = _preferred(headroom * hfe_min / (overdrive * trip), _E12, "down")
    on_time = lp * trip / bus_min
    drive_c = _preferred(c.uniform("drive_rc_on_times", 3.0, 10.0) * on_time / drive_r, _E12)
    # 8. start-up and base-emitter resistor
    start_current = c.uniform("startup_current", 0.1e-3, 0.6e-3)
    startup_r = _preferred(bus_min / start_current, _E12)
    rating = next((r for r in STARTUP_RATINGS if bus_max ** 2 / startup_r <= 0.5 * r), None)
    if rating is None:
        startup_r = _preferred(bus_max ** 2 / (0.5 * STARTUP_RATINGS[-1]), _E12, "up")
        rating = STARTUP_RATINGS[-1]
    start_current = bus_min / startup_r
    drive: dict[str, Any] = {"resistance": drive_r, "capacitance": drive_c}
    if c.chance("base_emitter_resistor", 0.6):
        share = c.uniform("base_emitter_share", 0.1, 0.3)
        drive["base_emitter_resistance"] = _preferred(switch_vbe / (share * start_current),
                                                      _E12)
    # 9. regulation
    limiter_rb = _preferred(c.log_uniform("limiter_base_resistance", 100.0, 1000.0), _E12)
    hold_current = limiter_vbe / limiter_rb
    regulation_current = c.uniform("regulation_fraction", 0.3, 0.8) * hold_current
    if method == "feedback-winding":
        aux = nf_turns / ns_turns * (vo + vf) - aux_drop
        series = _preferred(c.log_uniform("zener_series_resistance", 47.0, 470.0), _E12)
        ideal = aux - limiter_vbe - regulation_current * series
        if ideal < _SMALLEST_ZENER:
            return None
        zener = _preferred(ideal, _E24, "down")
        series = _preferred((aux - limiter_vbe - zener) / regulation_current, _E12)
        regulation = {"method": method, "zener_voltage": zener, "series_resistance": series,
                      "rectifier_drop": aux_drop,
                      "filter_capacitance": _preferred(
                          c.log_uniform("aux_filter_capacitance", 22e-9, 47e-6), _E6)}
    else:
        ctr = c.uniform("ctr", 0.5, 2.0)
        led_drop = round(c.uniform("led_drop", 1.0, 1.2), 2)
        led_current = regulation_current / ctr
        series = _preferred(c.log_uniform("led_series_resistance", 100.0, 1000.0), _E12)
        room = vo - led_drop - 1.24            # a shunt reference does not go below 1.24 V
        if room <= 0:
            return None
        series = min(series, _preferred(room / led_current, _E12, "down"))
        reference = round(vo - led_drop - led_current * series, 3)
        regulation = {"method": method, "reference_voltage": reference, "ctr": round(ctr, 2),
                      "led_drop": led_drop, "series_resistance": series}
    # 10. output capacitor and loads
    full_current = power / vo
    ripple = c.uniform("output_ripple", 0.01, 0.02)
    output_c = _preferred(c.uniform("output_oversize", 1.0, 4.0) * full_current
                          / (frequency * ripple * vo), _E6, "up")
    output_c = max(output_c, 10e-6)
    esr = round(0.1 * math.sqrt(470e-6 / output_c) * c.uniform("esr_factor", 0.5, 2.0), 4)
    nominal_current = full_current * c.uniform("nominal_load_fraction", 0.4, 1.0)
    minimum_current = full_current * c.uniform("minimum_load_fraction", 0.05, 0.25)
    as_resistance = c.chance("load_as_resistance", 0.3)

    def load(current):
        if as_resistance:
            return f"{vo / current:.6g} ohm"
        return f"{current:.6g} A"

    # 11. transformer parasitics and clamp
    leakage = lp * c.uniform("leakage_fraction", 0.005, 0.03)
    winding_c = c.uniform("winding_capacitance", 10e-12, 60e-12)
    output_cap = c.uniform("switch_output_capacitance", 10e-12, 80e-12)
    clamp_type = c.pick("clamp", ("none", "zener", "rcd"), (0.30, 0.35, 0.35))
    clamp: dict[str, Any] = {"type": clamp_type}
    if clamp_type == "none":
        # the lossless leakage spike: the rating below must cover it
        above_bus = reflected + float(leakage_spike(worst_peak, leakage,
                                                    winding_c + output_cap))
    elif clamp_type == "zener":
        above_bus = round(reflected * c.uniform("clamp_factor", 1.3, 2.0))
        clamp["voltage"] = above_bus
    else:
        above_bus = reflected * c.uniform("clamp_factor", 1.4, 2.2)
        clamp_power_w = float(clamp_power(reflected, above_bus, leakage, trip, frequency))
        clamp_r = _preferred(above_bus ** 2 / clamp_power_w, _E12)
        clamp["resistance"] = clamp_r
        clamp["capacitance"] = _preferred(c.uniform("clamp_rc_periods", 10.0, 30.0)
                                          / (frequency * clamp_r), _E6)
    # primary copper loss 0.5-2 % of the input power at the low-line RMS current
    duty = reflected / (bus_min + reflected)
    rms = trip * math.sqrt(duty / 3.0)
    primary_r = round(c.uniform("copper_loss_fraction", 0.005, 0.02) * input_power / rms ** 2,
                      3)
    # 12. switch ratings
    stress = bus_max + above_bus
    vcev = _first_at_least(stress / VOLTAGE_DERATING, VOLTAGE_RATINGS)
    ic_max = _first_at_least(1.5 * worst_peak, CURRENT_RATINGS)
    if vcev is None or ic_max is None:
        return None
    vceo = round(vcev * (c.uniform("vceo_fraction", 0.5, 0.65) if vcev >= 400
                         else c.uniform("vceo_fraction", 0.8, 1.0)))
    ft = (c.log_uniform("transition_frequency", 4e6, 30e6) if vcev >= 400
          else c.log_uniform("transition_frequency", 20e6, 150e6))

    temp_min = c.pick("temperature_min_c", (-20.0, -10.0, 0.0, 10.0))
    temp_max = c.pick("temperature_max_c", (40.0, 50.0, 60.0, 70.0, 85.0))
    regulation_text = "feedback-winding" if method == "feedback-winding" else "optocoupler"
    data.update({
        "title": (f"Generated design {name}: {vo:g} V {power:.3g} W, {input_class} input, "
                  f"{regulation_text} regulation, {clamp_type} clamp (invented)"),
        "description": ("Invented by rcc.population (seeded generator of plausible designs "
                        "nobody tuned); not a product."),
        "switch": {"hfe_min": round(hfe_min, 2), "hfe_typ": round(hfe_typ, 2),
                   "hfe_max": round(hfe_max, 2), "vbe": switch_vbe,
                   "vce_sat": round(c.uniform("vce_sat", 0.2, 0.5), 3),
                   "storage_time": storage, "transition_frequency": ft,
                   "output_capacitance": output_cap, "vceo": vceo, "vcev": vcev,
                   "vebo": round(c.uniform("vebo", 5.0, 9.0), 1), "ic_max": ic_max},
        "transformer": {"primary_turns": np_turns, "output_turns": ns_turns,
                        "feedback_turns": nf_turns, "magnetizing_inductance": lp,
                        "leakage_inductance": leakage, "winding_capacitance": winding_c,
                        "core_area": area,
                        "saturation_flux_density": round(c.uniform("saturation_flux", 0.37,
                                                                   0.42), 3),
                        "primary_resistance": primary_r},
        "startup": {"resistance": startup_r, "power_rating": rating},
        "drive": drive,
        "limiter": {"sense_resistance": sense, "vbe": limiter_vbe,
                    "base_resistance": limiter_rb,
                    "hfe": round(c.uniform("limiter_hfe", 100.0, 300.0))},
        "regulation": regulation,
        "output": {"voltage_target": vo, "rectifier_drop": round(vf, 3),
                   "capacitance": output_c, "esr": esr, "load_min": load(minimum_current),
                   "load_nominal": load(nominal_current), "load_max": load(full_current)},
        "clamp": clamp,
        "environment": {"temperature_min": f"{temp_min:g} degC",
                        "temperature_max": f"{temp_max:g} degC"},
    })
    choices = dict(c.made)
    choices.update({"frequency_target": frequency, "magnetizing_inductance": lp,
                    "bus_min": bus_min, "bus_max": bus_max, "input_power": input_power,
                    "design_peak_current": peak, "trip_current": trip,
                    "worst_peak_current": worst_peak, "reflected_voltage": reflected,
                    "switch_stress": stress, "drive_voltage_min_bus": drive_voltage})
    return data, choices
