"""The start-up figure and derivation an engineer reads (issue 10, section 3):
a stacked Bode plot over the loop's band with its crossings marked and the
analysed corner in the title; the derivation with the design's numbers,
wrapped to the terminal; the LaTeX document compiles."""

from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest
from typer.testing import CliRunner

from rcc.cli import app
from rcc.design import load_design
from rcc.startup import startup_report
from rcc.startup.plotting import barkhausen_points, loop_gain_span, plot_loop_gain
from rcc.startup.worked_derivation import derivation_text, latex_document, worked_derivation

from conftest import WORKED_CASES

STANDBY = WORKED_CASES / "standby_12v_universal.toml"
STALLED = WORKED_CASES / "fault_drive_capacitor_small.toml"


@pytest.fixture(scope="module")
def standby():
    design = load_design(STANDBY)
    return design, startup_report(design).result


def test_bode_band_is_around_the_crossover_not_up_to_terahertz(standby):
    _, result = standby
    band = loop_gain_span(result)
    marks = barkhausen_points(result, band)
    assert marks["crossover"], "the 0 dB crossings must lie inside the band"
    assert band[0] < min(marks["crossover"]) and max(marks["crossover"]) < band[-1]
    assert band[-1] < 1e9 and band[0] > 1.0
    # it starts: a point where the phase is a whole number of turns above 0 dB
    assert any(db > 0 for _, db in marks["phase_zero"])


def test_bode_is_stacked_with_corner_and_marks(standby):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    _, result = standby
    magnitude, phase = plot_loop_gain(result)
    assert magnitude.get_shared_x_axes().joined(magnitude, phase)
    title = magnitude.get_title()
    assert "oscillation begins" in title and "118.6 V bus" in title and "0 degC" in title \
        and "hFE(25 degC) 20" in title
    texts = " ".join(t.get_text() for t in magnitude.texts)
    assert "0 dB at" in texts and "Barkhausen met" in texts
    plt.close(magnitude.figure)


def test_stalled_loop_says_why(tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    design = load_design(STALLED)
    magnitude, phase = plot_loop_gain(startup_report(design).result)
    assert "stalls (drive-coupling)" in magnitude.get_title()
    assert "no Barkhausen point" in " ".join(t.get_text() for t in phase.texts)
    plt.close(magnitude.figure)


def test_derivation_has_numbers_and_fits_the_terminal(standby):
    design, result = standby
    worked = worked_derivation(design, result)
    for width in (60, 80, 120):
        text = derivation_text(worked, width=width)
        assert max(len(line) for line in text.splitlines()) <= width
    assert "L_m     =       2.5 mH" in text and "N(s) = " in text and "P(s) = " in text
    # P = D - N, coefficient by coefficient
    d = np.array(worked.loop_denominator)
    n = np.pad(worked.loop_numerator, (d.size - len(worked.loop_numerator), 0))
    assert np.allclose(worked.polynomial, d - n, rtol=1e-6, atol=0.0)
    # the Routh sign changes agree with the poles found by the analysis
    assert worked.sign_changes == sum(p.real > 0 for p in result.poles)
    assert "the supply starts" in text


def test_derivation_through_the_command_line():
    result = CliRunner().invoke(app, ["startup", str(STANDBY), "--derivation"])
    assert result.exit_code == 0, result.output
    assert "Routh first column" in result.stdout and "Matrix(" not in result.stdout


def test_latex_is_a_complete_document(standby, tmp_path):
    design, result = standby
    text = latex_document(worked_derivation(design, result))
    assert text.startswith("\\documentclass") and text.rstrip().endswith("\\end{document}")
    assert text.count("\\begin{align*}") == text.count("\\end{align*}")
    if shutil.which("pdflatex") is None:
        pytest.skip("pdflatex not installed: structure checked only")
    (tmp_path / "d.tex").write_text(text, encoding="utf-8")
    run = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "d.tex"],
                         cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-2000:]
    assert (tmp_path / "d.pdf").stat().st_size > 1000
