"""The sweep figure (issue 10, section 2): one line style per temperature with a
legend saying so, and the engine's points (``--verify``) over the model curves."""

from __future__ import annotations

import numpy as np

from rcc.design import Load, load_design
from rcc.sweep import plot_sweep, sweep

from conftest import STANDBY_CASE


def test_every_temperature_is_drawn_and_named():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    design = load_design(STANDBY_CASE)
    result = sweep(design, np.array([85.0, 230.0]), Load("current", np.array([0.1, 0.5])),
                   np.array([273.15, 333.15]))
    axes = plot_sweep(result)
    styles = {line.get_linestyle() for line in axes[0].lines if len(line.get_xdata()) > 1}
    assert styles == {"-", "--"}
    legend = axes[1].get_legend()
    assert legend.get_title().get_text() == "temperature"
    assert [t.get_text() for t in legend.get_texts()] == ["0 degC", "60 degC"]
    assert "line style: temperature" in axes[0].get_title()
    plt.close(axes[0].figure)


def test_engine_points_are_drawn_over_the_model():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    design = load_design(STANDBY_CASE)
    result = sweep(design, np.array([230.0]), Load("current", np.array([0.1, 0.5])))
    rows = [{"load_value": 0.5, "engine_frequency_hz": 1.2e5, "engine_output_v": 12.0,
             "engine_peak_a": 0.2, "engine_converged": True},
            {"load_value": 0.1, "engine_frequency_hz": None, "engine_output_v": None,
             "engine_peak_a": None, "engine_converged": False}]
    axes = plot_sweep(result, verification=rows)
    for axis in axes:
        stars = [line for line in axis.lines if line.get_marker() == "*"]
        assert len(stars) == 1 and stars[0].get_xdata()[0] == 0.5
    assert "stars: engine periodic steady state" in axes[0].get_title()
    plt.close(axes[0].figure)
