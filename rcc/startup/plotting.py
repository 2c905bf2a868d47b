"""Bode plot of the start-up loop gain (matplotlib, imported lazily)."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_loop_gain", "loop_gain_span", "barkhausen_points"]

#: Widest span searched for the loop's interesting band [Hz].
SEARCH_SPAN = (1.0, 1e11)
#: The band shown keeps |L| within this many dB of its largest value [dB].
SHOWN_RANGE_DB = 60.0


def loop_gain_span(result, points: int = 800) -> np.ndarray:
    """Frequencies around the loop's band: where |L| is within
    :data:`SHOWN_RANGE_DB` of its peak, widened by three times on each side and
    always including the 0 dB crossings.

    Parameters
    ----------
    result : rcc.startup.analysis.StartupResult
    points : int
        Number of frequencies [1].

    Returns
    -------
    ndarray
        Logarithmically spaced frequencies [Hz].
    """
    grid = np.logspace(np.log10(SEARCH_SPAN[0]), np.log10(SEARCH_SPAN[1]), 2000)
    level = 20 * np.log10(np.maximum(np.abs(result.loop_gain(grid)), 1e-300))
    inside = grid[level >= level.max() - SHOWN_RANGE_DB]
    crossings = grid[:-1][np.diff(np.sign(level)) != 0]
    ends = np.concatenate([inside[[0, -1]], crossings]) if crossings.size else inside[[0, -1]]
    low = max(ends.min() / 3.0, SEARCH_SPAN[0])
    high = min(ends.max() * 3.0, SEARCH_SPAN[1])
    return np.logspace(np.log10(low), np.log10(high), points)


def _phase(gain):
    """Phase [deg] unwrapped and shifted by whole turns so that it lies in
    (-180, 180] where |L| is largest (the regenerative point is 0 deg)."""
    phase = np.degrees(np.unwrap(np.angle(gain)))
    peak = phase[np.argmax(np.abs(gain))]
    return phase - 360.0 * np.round(peak / 360.0)


def barkhausen_points(result, frequencies) -> dict:
    """Where the loop crosses 0 dB and where its phase crosses 0 deg (mod 360).

    Parameters
    ----------
    result : rcc.startup.analysis.StartupResult
    frequencies : array_like
        Frequencies searched [Hz].

    Returns
    -------
    dict
        ``crossover`` list of frequencies where |L| = 1 [Hz]; ``phase_zero`` list
        of (frequency [Hz], |L| [dB]) where the phase is a whole number of turns:
        the supply starts there when |L| > 0 dB (Barkhausen), and ``-|L|`` in dB is
        the gain margin of the non-start (positive: the gain is short by that much).
    """
    frequencies = np.asarray(frequencies, dtype=float)
    gain = result.loop_gain(frequencies)
    level = 20 * np.log10(np.maximum(np.abs(gain), 1e-300))
    phase = _phase(gain)
    crossover = [float(f) for f, a, b in zip(frequencies, level, level[1:])
                 if np.sign(a) != np.sign(b)]
    turns = np.round(phase / 360.0)
    wrapped = phase - 360.0 * turns  # distance to the nearest whole turn
    phase_zero = []
    for i in range(frequencies.size - 1):
        a, b = wrapped[i], wrapped[i + 1]
        if np.sign(a) != np.sign(b) and abs(a - b) < 90.0:
            phase_zero.append((float(frequencies[i]), float(level[i])))
    return {"crossover": crossover, "phase_zero": phase_zero}


def plot_loop_gain(result, ax=None, frequencies=None):
    """Bode plot of the loop gain ``L(j 2 pi f)`` of a start-up result.

    Parameters
    ----------
    result : rcc.startup.analysis.StartupResult
    ax : pair of matplotlib Axes, optional
        Magnitude and phase axes (stacked, shared frequency axis); a new
        figure is made if omitted.
    frequencies : array_like, optional
        Frequencies [Hz]; default :func:`loop_gain_span`.

    Returns
    -------
    pair of matplotlib Axes
        Magnitude [dB] above, phase [deg] below, frequency [Hz] on a shared
        logarithmic axis; the 0 dB crossings are marked with dotted lines, the
        points where the phase is a whole number of turns with the loop gain in
        dB there (the supply starts where it is above 0 dB); the analysed corner
        (bus, temperature, hFE) and the verdict are in the title.

    Notes
    -----
    The loop is opened at the switch collector current source; the
    characteristic equation is ``1 - L(s) = 0`` (regenerative sign), so the
    Barkhausen point is ``|L| = 1`` (0 dB) with the phase a multiple of 360
    degrees.
    """
    import matplotlib

    if ax is None:
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(2, 1, sharex=True, figsize=(7.5, 6.5),
                             gridspec_kw={"height_ratios": [3, 2]}, constrained_layout=True)
    magnitude_ax, phase_ax = ax
    frequencies = loop_gain_span(result) if frequencies is None else \
        np.asarray(frequencies, dtype=float)
    gain = result.loop_gain(frequencies)
    level = 20 * np.log10(np.maximum(np.abs(gain), 1e-300))
    phase = _phase(gain)
    magnitude_ax.semilogx(frequencies, level, color="tab:blue")
    magnitude_ax.axhline(0.0, color="gray", linewidth=0.8, linestyle="--")
    magnitude_ax.set_ylabel("|L| [dB]")
    phase_ax.semilogx(frequencies, phase, color="tab:orange")
    phase_ax.set_ylabel("phase of L [deg]")
    phase_ax.set_xlabel("frequency [Hz]")
    for turn in range(int(np.floor(phase.min() / 360)), int(np.ceil(phase.max() / 360)) + 1):
        phase_ax.axhline(360.0 * turn, color="gray", linewidth=0.8, linestyle="--")
    marks = barkhausen_points(result, frequencies)
    for f in marks["crossover"]:
        for axis in ax:
            axis.axvline(f, color="tab:blue", linewidth=0.8, linestyle=":")
        at = float(np.interp(np.log(f), np.log(frequencies), phase))
        magnitude_ax.annotate(f"0 dB at {_hz(f)}\nphase {at:+.0f} deg", (f, 0.0),
                              xytext=(4, 6), textcoords="offset points", fontsize=8,
                              color="tab:blue")
    if not marks["phase_zero"]:
        phase_ax.text(0.02, 0.06, "the phase is nowhere a whole number of turns: "
                      "no Barkhausen point", transform=phase_ax.transAxes, fontsize=8,
                      color="tab:red")
    for f, db in marks["phase_zero"]:
        magnitude_ax.plot(f, db, "o", color="tab:red", ms=5)
        text = (f"|L| = {db:+.1f} dB at phase 0: Barkhausen met" if db > 0 else
                f"gain margin {-db:.1f} dB at phase 0: short of Barkhausen")
        magnitude_ax.annotate(text, (f, db), xytext=(6, -12), textcoords="offset points",
                              fontsize=8, color="tab:red")
    verdict = "oscillation begins" if result.starts else f"stalls ({result.holding_element})"
    magnitude_ax.set_title(
        f"Start-up loop gain: {verdict}\nat {result.bus_voltage:.4g} V bus, "
        f"{result.temperature - 273.15:.3g} degC, hFE(25 degC) {result.hfe:.3g} "
        "(worst corner at the lowest bus)", fontsize=10)
    for axis in ax:
        axis.grid(True, which="both", alpha=0.3)
    return ax


def _hz(frequency: float) -> str:
    from rcc.units import format_si

    return format_si(frequency, "Hz", 3)
