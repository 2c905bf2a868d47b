"""Plain-text rendering of reports (display only: SI values scaled for reading).

Functions here return strings; the command line prints them.
"""

from __future__ import annotations

import textwrap


from rcc.units import format_si

__all__ = ["format_table", "format_check_report", "format_points_table",
           "format_verification", "format_start_line", "format_engine_points"]


def format_table(headers, rows) -> str:
    """Left-aligned text table.

    Parameters
    ----------
    headers : sequence of str
        Column headers [-].
    rows : sequence of sequence of str
        Cell texts [-].

    Returns
    -------
    str
        The table.
    """
    widths = [max(len(str(h)), *(len(str(r[i])) for r in rows)) if rows else len(str(h))
              for i, h in enumerate(headers)]
    line = "  ".join(str(h).ljust(w) for h, w in zip(headers, widths))
    rule = "  ".join("-" * w for w in widths)
    body = ["  ".join(str(c).ljust(w) for c, w in zip(row, widths)) for row in rows]
    return "\n".join([line, rule, *body])


def format_points_table(records) -> str:
    """Operating points as a text table.

    Parameters
    ----------
    records : list of dict
        ``OperatingPoints.records()`` (SI units) [-].

    Returns
    -------
    str
        The table, values scaled with SI prefixes for reading.
    """
    headers = ["line", "bus", "load", "T", "Vout", "freq", "t_on", "t_off", "duty",
               "Ipk", "mode", "on ends by", "off ends by", "source"]
    rows = []
    doubts = set()
    for r in records:
        doubt = r.get("doubt", "")
        source = r.get("source", "cycle-model")
        if doubt.startswith("invariant"):
            # a point that breaks a physical invariant is never printed as numbers
            rows.append([format_si(r["line_v"], "V", 3), "-", format_si(r["load_a"], "A", 3),
                         f"{r['temperature_c']:.0f} degC"] + ["-"] * 9
                        + [f"refused ({doubt})"])
            doubts.add(doubt)
            continue
        if doubt and source != "engine":
            doubts.add(doubt)
        if source == "engine":
            note = "engine (not settled)" if doubt else "engine"
        else:
            note = f"{source} (unverified: {doubt})" if doubt else source
        rows.append([format_si(r["line_v"], "V", 3), format_si(r["bus_v"], "V", 3),
                     format_si(r["load_a"], "A", 3), f"{r['temperature_c']:.0f} degC",
                     format_si(r["output_v"], "V", 4), format_si(r["frequency_hz"], "Hz", 3),
                     _si(r["on_time_s"], "s", 3), _si(r["off_time_s"], "s", 3),
                     "-" if r["duty"] is None else f"{r['duty']:.3f}",
                     format_si(r["peak_current_a"], "A", 3), r["mode"],
                     r["on_end"] or "-", r["off_end"] or "-", note])
    table = format_table(headers, rows)
    if any(r.get("source") == "engine" for r in records):
        table += "\n" + _wrap(
            "engine: the cycle model doubted this point and the time-domain engine from "
            "power-on (discharged capacitors) solved it: output, mean pulse rate and mean "
            "peak current over its settled window; mode regular / burst / irregular / "
            "lockup / off as the run switches (it does not give the on- and off-times). "
            "The cycle model's values are in the comparison below.", indent="")
    if doubts:
        table += "\n" + _wrap(
            "unverified: the cycle model is outside the domain where it was checked "
            "against the time-domain engine (pattern: a burst or irregular pattern, "
            "values are averages and the peak that of the strongest pulse; "
            "regime-boundary: the balance sits on a jump between two cycle regimes and "
            "the supply alternates between them; held-ring: the regulation hold keeps "
            "the switch off through a ring that reaches its threshold, and the model "
            "does not weigh the ring's drive against the held limiter; lockup: the low "
            "state the output stops in from power-on). Confirm such points with `rcc waveforms` or "
            "`rcc cycle` before acting on them.", indent="")
    return table


def _si(value, unit, digits):
    return "-" if value is None else format_si(value, unit, digits)


def format_engine_points(records, budget=None) -> str:
    """The doubtful points: the cycle model against the engine from power-on.

    Parameters
    ----------
    records : list of dict
        ``CheckReport.operating_point_records()`` (SI units) [-].
    budget : float, optional
        The budget the engine runs were given, in nominal engine time [s].

    Returns
    -------
    str
        A table of every engine-solved point (cycle model and engine mode,
        output, frequency and peak current) and the doubtful points left
        unsolved with the reason; empty when no point was doubtful.
    """
    solved = [r for r in records if r.get("source") == "engine"]
    skipped = [r for r in records if "skipped" in (r.get("engine") or {})]
    if not solved and not skipped:
        return ""
    out = ["Doubtful points solved by the engine from power-on"
           + ("" if budget is None else f" (time budget {budget:.3g} s of nominal engine time)"),
           ""]
    if solved:
        rows = []
        for r in solved:
            model, run = r["cycle_model"], r["engine"]
            rows.append([format_si(r["line_v"], "V", 3), format_si(r["load_a"], "A", 3),
                         model["doubt"], model["mode"], run["kind"],
                         format_si(model["output_v"], "V", 4), format_si(r["output_v"], "V", 4),
                         format_si(model["frequency_hz"], "Hz", 3),
                         format_si(r["frequency_hz"], "Hz", 3),
                         format_si(model["peak_current_a"], "A", 3),
                         format_si(r["peak_current_a"], "A", 3),
                         f"{run['simulated_s'] * 1e3:.3g} ms"
                         + ("" if run["settled"] else ", not settled")])
        out.append(format_table(
            ["line", "load", "model doubt", "model mode", "engine", "model Vout",
             "engine Vout", "model f", "engine f", "model Ipk", "engine Ipk", "run"], rows))
    for r in skipped:
        out.append(f"    not solved: {format_si(r['line_v'], 'V', 3)}, "
                   f"{format_si(r['load_a'], 'A', 3)} ({r['doubt']}): "
                   f"{r['engine']['skipped']}")
    return "\n".join(out)


def _wrap(text, indent="    "):
    return textwrap.fill(text, width=92, initial_indent=indent, subsequent_indent=indent)


def format_check_report(data: dict) -> str:
    """The ``rcc check`` text report.

    Parameters
    ----------
    data : dict
        ``CheckReport.to_json()`` (SI units) [-].

    Returns
    -------
    str
        The report.
    """
    out = [data["title"], "=" * len(data["title"]), "", _wrap(data["caution"], ""), ""]
    out += ["Operating points (25 degC clipped into the temperature range, hfe_typ)", ""]
    out += [format_points_table(data["operating_points"]), ""]
    engine = format_engine_points(data["operating_points"], data.get("engine_budget_s"))
    if engine:
        out += [engine, ""]
    s = data["stress"]
    out += ["Stresses (worst case over line, load, temperature, hFE; and from power-on)", ""]
    out += [format_table(["quantity", "value", "limit", "basis"], [
        ["switch peak voltage", format_si(s["switch_peak_v"], "V", 4),
         format_si(s["switch_rating_v"], "V", 4), s["rating_basis"].upper()],
        ["core peak flux density", f"{s['core_peak_flux_t']:.3f} T",
         f"{s['core_limit_t']:.3f} T", "saturation x margin"],
        ["worst peak current", format_si(s["worst_peak_current_a"], "A", 3), "",
         "limit + storage overshoot"],
    ] + _startup_rows(s)), ""]
    startup = data.get("startup")
    if startup:
        out += ["Start-up (lowest line, worst corner of hFE and temperature)", ""]
        run = startup.get("power_on")
        if not startup.get("oscillation_begins", startup.get("starts")):
            out.append(f"    does NOT start: held by {startup.get('holding_element')}")
        elif run is None and startup.get("min_start_search") is not None:
            out.append("    does NOT start into its load: the power-on DC point is unstable, "
                       "but at the lowest line the bulk capacitor cannot carry the full load")
        elif run is None:
            out.append("    oscillation begins: the power-on DC point is unstable "
                       "(the engine was not run from power-on)")
        else:
            verdict = ("starts into its load" if startup.get("starts")
                       else "does NOT start into its load")
            out.append(f"    {verdict}: the power-on DC point is unstable, and the engine "
                       f"from power-on at {format_si(run['line_v'], 'V', 4)} line, "
                       f"{run['temperature_c']:.3g} degC, hFE {run['hfe']:.3g}, "
                       f"{run['load']} gives '{run['kind']}' at "
                       f"{format_si(run['output_v'], 'V', 3)} (expected "
                       f"{format_si(run['expected_output_v'], 'V', 3)})")
            if startup.get("time_to_regulation_s") is not None:
                out.append(f"    time to regulation: "
                           f"{format_si(startup['time_to_regulation_s'], 's', 3)}")
        dc = startup.get("dc_point") or {}
        if dc:
            out.append(f"    DC point: {dc.get('region')}, Ic {format_si(dc.get('ic_a'), 'A', 3)}, "
                       f"Ib {format_si(dc.get('ib_a'), 'A', 3)}, limiter "
                       f"{'on' if dc.get('limiter_active') else 'off'}")
        rows = (("growth rate", "growth_rate_per_s", lambda v: f"{v:.4g} 1/s"),
                ("growth frequency", "growth_frequency_hz", lambda v: format_si(v, "Hz", 4)),
                ("start-up time", "start_time_s", lambda v: format_si(v, "s", 4)))
        for label, key, show in rows:
            if startup.get(key) is not None:
                out.append(f"    {label}: {show(startup[key])}")
        out += ["    " + line for line in format_start_line(startup)]
        out.append("")
    out += [f"Findings: verdict {data['verdict'].upper()}", ""]
    if not data["findings"]:
        out.append("    none")
    for f in data["findings"]:
        out.append(f"  [{f['severity'].upper()}] {f['code']}{_numbers(f)}")
        message = f["message"]
        if f.get("scope") == "if-running":
            message = ("Only if it ran (it does not start, see the first finding): "
                       + message)
        out.append(_wrap(message))
        if f["advice"]:
            out.append(_wrap("What to change: " + f["advice"]))
        out.append("")
    if data.get("verification"):
        out += [format_verification(data["verification"]), ""]
    return "\n".join(out).rstrip() + "\n"


def format_start_line(startup: dict) -> list[str]:
    """The lowest start line and the threshold of oscillation, as text lines.

    Parameters
    ----------
    startup : dict
        ``StartupReport.to_json()`` (SI units) [-].

    Returns
    -------
    list of str
        ``start into load from: ...`` (the engine search: the line found, the
        failing line below it and the resolution; or that it was not searched)
        and ``oscillation begins from: ...`` (the small-signal threshold, a
        lower bound of the start line).
    """
    search = startup.get("min_start_search")
    unit = "V line" if startup.get("ac_input") else "V input"
    lines = []
    if search is None:
        lines.append("start into full load from: not searched (the engine was not run; "
                     "`rcc startup` searches it): only the small-signal bound below is known")
    elif search["line_v"] is None:
        if search["note"]:
            lines.append(f"start into full load from: unknown, the search stopped: "
                         f"{search['note']}")
        elif search["failing_basis"] == "small-signal":
            lines.append("start into full load from: no line of the design (oscillation "
                         "cannot begin at some corner)")
        else:
            lines.append(f"start into full load from: no line of the design (engine from "
                         f"power-on up to {search['failing_line_v']:.4g} {unit})")
    else:
        found = next((run for run in search["runs"] if run["line_v"] == search["line_v"]),
                     None)
        there = "" if found is None else (
            f", output {format_si(found['output_v'], 'V', 3)} of "
            f"{format_si(found['expected_output_v'], 'V', 3)}")
        text = (f"start into full load from: {search['line_v']:.4g} {unit} "
                f"({format_si(search['bus_v'], 'V', 4)} bus{there})")
        if search["resolution_v"] is not None:
            below = ("engine run" if search["failing_basis"] == "engine"
                     else "below the threshold of oscillation")
            text += (f", not at {search['failing_line_v']:.4g} {unit} ({below}): "
                     f"resolution {search['resolution_v']:.3g} V")
        lines.append(text)
        lines.append(f"    (engine from power-on, coldest, hfe_min, full load, "
                     f"{len(search['runs'])} runs of at most "
                     f"{format_si(search['window_s'], 's', 3)}; bisection on the line)")
    bus = startup.get("min_oscillation_bus_v")
    if bus is None:
        lines.append("oscillation begins from: no bus voltage of the design (small-signal)")
    else:
        text = f"oscillation begins from: {format_si(bus, 'V', 4)} bus"
        if startup.get("min_oscillation_line_v") is not None:
            text += f" ({startup['min_oscillation_line_v']:.4g} V RMS line at the peak)"
        lines.append(text + " (small-signal threshold, worst corner: a lower bound of the "
                            "start line)")
    return lines


def _startup_rows(stress: dict) -> list[list[str]]:
    """Rows of the peaks from power-on, or one row saying they were not computed."""
    up = stress.get("startup")
    if not up:
        return [["start-up peaks", "not computed", "", "rcc check (command) runs them"]]
    basis = f"engine from power-on, {up['duration'] * 1e3:.3g} ms"
    return [["start-up collector peak", format_si(up["switch_peak_v"], "V", 4),
             format_si(stress["switch_rating_v"], "V", 4), basis],
            ["start-up peak flux density", f"{up['core_peak_flux_t']:.3f} T",
             f"{stress['core_limit_t']:.3f} T", basis],
            ["start-up peak primary current", format_si(up["primary_peak_a"], "A", 3), "",
             basis]]


def _numbers(finding: dict) -> str:
    """' (value 1.18, minimum 1.25, margin -5.6%)': the margin is negative when the
    value is on the wrong side of the limit."""
    value, limit, unit = finding["value"], finding["limit"], finding["unit"]
    if value is None or limit is None:
        return ""
    unit = f" {unit}" if unit else ""
    word = {"upper": "limit", "lower": "minimum"}.get(finding.get("bound", "upper"),
                                                      "reference")
    text = f" (value {value:.4g}{unit}, {word} {limit:.4g}{unit}"
    if finding.get("margin") is not None:
        text += f", margin {finding['margin']:+.1%}"
    return text + ")"


def format_verification(rows) -> str:
    """Cycle model against the periodic-steady-state engine, as a table.

    Parameters
    ----------
    rows : list of dict
        :func:`rcc.verification.verification_rows` (SI units) [-].

    Returns
    -------
    str
        Heading and table; differences as engine/model - 1 in percent.
    """
    def percent(value):
        return "n/a" if value is None else f"{100 * value:+.1f}%"

    def si(value, unit):
        return "n/a" if value is None else format_si(value, unit, 4)

    table = format_table(
        ["line", "load", "model f", "engine f", "diff", "model Vout", "engine Vout", "diff",
         "model Ipk", "engine Ipk", "diff", "note"],
        [[si(r["line_v"], "V"), r["load"], si(r["model_frequency_hz"], "Hz"),
          si(r["engine_frequency_hz"], "Hz"), percent(r["frequency_diff"]),
          si(r["model_output_v"], "V"), si(r["engine_output_v"], "V"),
          percent(r["output_diff"]), si(r["model_peak_a"], "A"), si(r["engine_peak_a"], "A"),
          percent(r["peak_diff"]),
          textwrap.shorten(r["error"] or ("" if r["engine_converged"] else "not periodic: "
                                          + r["engine_flags"]), 70, placeholder=" ...")]
         for r in rows])
    return "Verification: cycle model against the periodic-steady-state engine\n\n" + table
