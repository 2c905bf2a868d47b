"""Bode plot of the start-up loop gain (matplotlib, imported lazily)."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_loop_gain"]


def plot_loop_gain(result, ax=None, frequencies=None):
    """Bode plot of the loop gain ``L(j 2 pi f)`` of a start-up result.

    Parameters
    ----------
    result : rcc.startup.analysis.StartupResult
    ax : matplotlib.axes.Axes, optional
        Axes for the magnitude; the phase goes on a twin axis.  A new figure
        is made if omitted.
    frequencies : array_like, optional
        Frequencies [Hz]; default a logarithmic span around the poles.

    Returns
    -------
    matplotlib.axes.Axes
        The magnitude axes.

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

        _, ax = plt.subplots(figsize=(7, 4.5))
    if frequencies is None:
        magnitudes = np.abs(np.array(result.poles)) / (2 * np.pi)
        magnitudes = magnitudes[magnitudes > 0]
        low = max(np.min(magnitudes) / 30, 1.0) if magnitudes.size else 10.0
        high = np.max(magnitudes) * 3 if magnitudes.size else 1e8
        frequencies = np.logspace(np.log10(low), np.log10(high), 600)
    frequencies = np.asarray(frequencies, dtype=float)
    gain = result.loop_gain(frequencies)
    ax.semilogx(frequencies, 20 * np.log10(np.maximum(np.abs(gain), 1e-300)),
                color="tab:blue", label="|L| [dB]")
    ax.axhline(0.0, color="gray", linewidth=0.8, linestyle="--")
    ax.set_xlabel("frequency [Hz]")
    ax.set_ylabel("loop gain magnitude [dB]", color="tab:blue")
    phase_ax = ax.twinx()
    phase = np.degrees(np.unwrap(np.angle(gain)))
    # shift by whole turns so the phase at the largest |L| lies in (-180, 180]
    peak = phase[np.argmax(np.abs(gain))]
    phase = phase - 360.0 * np.round(peak / 360.0)
    phase_ax.semilogx(frequencies, phase,
                      color="tab:orange", label="phase [deg]")
    phase_ax.set_ylabel("loop gain phase [deg]", color="tab:orange")
    verdict = "starts" if result.starts else f"stalls ({result.holding_element})"
    ax.set_title(f"Start-up loop gain at {result.bus_voltage:.4g} V bus: {verdict}")
    ax.grid(True, which="both", alpha=0.3)
    return ax
