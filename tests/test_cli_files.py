"""Bad input and files on every command (issue 10, section 1): extreme values
refused up front with the valid range, design files that are not plain files,
output paths checked before computing and written all-or-nothing, strict JSON,
units required on every option, and the engine's kernel cache.

Each case: exit code 2 with one line naming what is wrong, never a traceback,
and no output file written.
"""

from __future__ import annotations

import json
import os
import re
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rcc.cli import app
from rcc.design import DesignError, design_from_dict, load_design

runner = CliRunner()


def invoke(*args):
    return runner.invoke(app, [str(a) for a in args])


def assert_refused(result, pattern):
    """Exit 2, no traceback, nothing on stdout, one stderr line matching ``pattern``."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    assert isinstance(result.exception, SystemExit), result.exception
    assert "Traceback" not in result.output
    assert result.stdout.strip() == ""
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, lines
    assert re.search(pattern, lines[0]), lines[0]


# ------------------------------------------------------------ extreme values
EXTREMES = {
    "400-digit turns": ("transformer", "primary_turns", int("9" * 400),
                        r"primary_turns = 99999.*\(400 characters\): expected a finite "
                        r"number, got an integer of 400 digits"),
    "huge hFE": ("switch", "hfe_max", 10 ** 300,
                 r"switch\.hfe_max = .*: expected a number from 1 to 1e\+05 \(the range"),
    "1e308 H": ("transformer", "magnetizing_inductance", "1e308 H",
                r"magnetizing_inductance = '1e308 H': expected an inductance from 100 pH "
                r"to 100 H \(the range the models are built for\)"),
    "1e-320 H": ("transformer", "magnetizing_inductance", "1e-320 H",
                 r"expected an inductance from 100 pH to 100 H"),
    "1e-300 F drive capacitor": ("drive", "capacitance", "1e-300 F",
                                 r"drive\.capacitance = '1e-300 F': expected a capacitance "
                                 r"from 1 fF to 10 F"),
    "1e6 K": ("environment", "temperature_max", 1e6,
              r"temperature_max = 1000000\.0: expected a temperature from -100 degC to "
              r"250 degC"),
    "1e308 W load": ("output", "load_max", "1e308 W",
                     r"load_max = '1e308 W': expected a power load up to 100 kW"),
    "400-digit string": ("startup", "resistance", "1" * 400,
                         r"expected a finite resistance, got a number too large"),
    "coupling 1e-9": ("transformer", "coupling", 1e-9,
                      r"coupling = 1e-09: expected a number from 0\.1 to 1"),
}


@pytest.mark.parametrize("case", EXTREMES, ids=list(EXTREMES))
def test_extreme_values_are_refused_with_the_range(write_design, minimal_design_dict, case):
    section, key, value, pattern = EXTREMES[case]
    minimal_design_dict.setdefault(section, {})[key] = value
    path = write_design(minimal_design_dict)
    for command in ("check", "startup"):
        result = invoke(command, path)
        assert_refused(result, pattern)
        assert result.stderr.startswith(f"{path}: {section}.{key} = ")


def test_load_min_above_load_max_is_refused(minimal_design_dict):
    minimal_design_dict["output"]["load_min"] = "0.6 A"
    with pytest.raises(DesignError, match=r"output\.load_min = '0\.6 A' is a heavier load "
                                          r"than output\.load_nominal = '0\.3 A'"):
        design_from_dict(minimal_design_dict)
    # different kinds are compared as currents at the target output
    minimal_design_dict["output"].update(load_min="10 ohm", voltage_target="12 V")
    with pytest.raises(DesignError, match=r"load_min = '10 ohm' is a heavier load"):
        design_from_dict(minimal_design_dict)
    minimal_design_dict["output"].update(load_min="240 ohm")  # 50 mA: fine
    design_from_dict(minimal_design_dict)


def test_temperature_law_that_makes_the_gain_negative_is_refused(minimal_design_dict):
    minimal_design_dict["switch"]["hfe_tempco"] = "2 %/K"
    minimal_design_dict["environment"] = {"temperature_min": "-40 degC"}
    with pytest.raises(DesignError, match=r"switch\.hfe_tempco = 0\.02: the current gain "
                                          r"would fall to -0\.3 times"):
        design_from_dict(minimal_design_dict)


def test_line_below_the_bridge_drop_is_refused_in_the_file(minimal_design_dict):
    minimal_design_dict["input"]["ac_min"] = "1 V"
    with pytest.raises(DesignError, match=r"input\.ac_min = 1: its peak 1\.41 V does not "
                                          r"exceed input\.bridge_drop"):
        design_from_dict(minimal_design_dict)


@pytest.mark.parametrize("sign", ["\u2126", "\u03a9"])
def test_ohm_sign_and_greek_omega_are_both_ohm(minimal_design_dict, sign):
    minimal_design_dict["startup"]["resistance"] = f"680 k{sign}"
    assert design_from_dict(minimal_design_dict).startup.resistance == pytest.approx(680e3)


# ----------------------------------------------------------- design files
def test_byte_order_mark_is_accepted(tmp_path, standby_case):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + standby_case.read_bytes())
    assert load_design(path).title == load_design(standby_case).title


@pytest.mark.parametrize("text", ["a = " + "[" * 100_000 + "]" * 100_000,
                                  "a = " + "{b=" * 5000 + "1" + "}" * 5000])
def test_deeply_nested_toml_is_refused(tmp_path, text):
    path = tmp_path / "deep.toml"
    path.write_text(text)
    assert_refused(invoke("check", path), r"nested too deeply")


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs a FIFO")
def test_fifo_is_refused_without_hanging(tmp_path):
    path = tmp_path / "fifo.toml"
    os.mkfifo(path)
    assert_refused(invoke("check", path), r"is not a regular file")


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_device_is_refused():
    assert_refused(invoke("check", "/dev/zero"), r"^/dev/zero: is not a regular file")


def test_oversized_file_is_refused(tmp_path):
    path = tmp_path / "big.toml"
    path.write_text("# padding\n" * 200_000)
    assert_refused(invoke("check", path), r"larger than the 1000000 bytes")


# ----------------------------------------------------------- output paths
@pytest.fixture
def in_tmp(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    return tmp_path


OUTPUT_CASES = {
    "missing folder": (["--plot", "nowhere/a.png"], r"--plot nowhere/a\.png: folder nowhere "
                                                    r"does not exist"),
    "directory": (["--plot", "."], r"--plot \.: is a directory"),
    "no suffix": (["--plot", "out"], r"--plot out: expected a file name ending in \.png / "
                                     r"\.pdf / \.svg, e\.g\. out\.png"),
    "same path twice": (["--csv", "x.png", "--plot", "x.png"],
                        r"--plot x\.png: the same file as --csv"),
    "exists": (["--csv", "here.csv"], r"--csv here\.csv: exists; use --force"),
}


@pytest.mark.parametrize("case", OUTPUT_CASES, ids=list(OUTPUT_CASES))
def test_sweep_output_paths_checked_before_computing(in_tmp, standby_case, case):
    (in_tmp / "here.csv").write_text("mine")
    options, pattern = OUTPUT_CASES[case]
    assert_refused(invoke("sweep", standby_case, *options), pattern)
    assert sorted(p.name for p in in_tmp.iterdir()) == ["here.csv"]
    assert (in_tmp / "here.csv").read_text() == "mine"


@pytest.mark.parametrize("command", ["startup", "cycle", "waveforms"])
def test_other_commands_check_outputs_first(in_tmp, standby_case, command):
    # refused in well under a second: nothing was simulated
    assert_refused(invoke(command, standby_case, "--plot", "nowhere/a.png"),
                   r"folder nowhere does not exist")
    assert_refused(invoke(command, standby_case, "--plot", "out"), r"ending in \.png")


@pytest.mark.skipif(sys.platform == "win32" or os.geteuid() == 0,
                    reason="permissions do not bind on this platform or as root")
def test_read_only_folder_is_refused(in_tmp, standby_case):
    folder = in_tmp / "locked"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        assert_refused(invoke("sweep", standby_case, "--csv", "locked/a.csv"),
                       r"folder locked is not writable")
    finally:
        folder.chmod(0o700)


def test_outputs_are_all_or_nothing(tmp_path):
    """A failure while writing the second output leaves neither behind (and no
    temporary file); the user's existing files are untouched."""
    import typer

    from rcc.cli import write_outputs

    first, second = tmp_path / "a.csv", tmp_path / "b.png"
    second.write_text("old")

    def write_first(files):
        files.write_text(first, "new")

    def full_disk(files):
        files.path(second).write_text("partial")
        raise OSError(28, "No space left on device", str(second))

    with pytest.raises(typer.Exit) as stop:
        write_outputs([write_first, full_disk])
    assert stop.value.exit_code == 2
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.png"]
    assert second.read_text() == "old"
    write_outputs([write_first])
    assert first.read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "b.png"]


# ----------------------------------------------------------- options
@pytest.mark.parametrize("args, pattern", [
    (["waveforms", "{case}", "--time", "5"], r"--time '5': expected a value with its unit, "
                                            r"e\.g\. '20ms'"),
    (["waveforms", "{case}", "--line", "230"], r"--line '230': expected a value with its "
                                              r"unit"),
    (["cycle", "{case}", "--load", "0.3"], r"--load '0\.3': expected a load with its unit"),
    (["waveforms", "{case}", "--line", "1V"], r"--line '1V': its peak 1\.41 V does not exceed "
                                             r"the bridge drop"),
    (["sweep", "{case}", "--line", "230"], r"--line '230': expected values with their unit"),
    (["sweep", "{case}", "--temperature", "-300degC"],
     r"--temperature '-300degC': expected values from -100 degC to 250 degC"),
    (["sweep", "{case}", "--line", "85V:265V:100000000"],
     r"--line '85V:265V:100000000': expected a count from 1 to 1000"),
    (["sweep", "{case}", "--load", "0.1A:0.5A:x"], r"expected a whole number of points"),
    (["waveforms", "{case}", "--window", "3"], r"--window '3': expected START:STOP"),
    (["waveforms", "{case}", "--hfe", "0.5"], r"--hfe '0\.5': expected a gain from 1"),
    (["cycle", "{case}", "--hfe", "lots"], r"--hfe 'lots': expected min, typ, max"),
    (["cycle", "{case}", "--temperature", "25"], r"--temperature '25': expected a value "
                                                 r"with its unit"),
    (["waveforms", "{case}", "--temperature", "400degC"], r"expected -100 degC to 250 degC"),
    (["waveforms", "{case}", "--signals", "collector,foo"], r"--signals 'collector,foo': "
                                                           r"expected some of"),
])
def test_options_need_units_and_ranges(standby_case, args, pattern):
    assert_refused(invoke(*[a.format(case=standby_case) for a in args]), pattern)


def test_sweep_lists_percent_loads_and_loss_columns(in_tmp, standby_case):
    result = invoke("sweep", standby_case, "--line", "100V,230V", "--load", "50%,100%",
                    "--csv", "s.csv")
    assert result.exit_code == 0, result.output
    rows = (in_tmp / "s.csv").read_text().splitlines()
    header = rows[0].split(",")
    assert "losses_w" not in header
    assert {"loss_clamp_w", "loss_core_w", "loss_drive_w"} <= set(header)
    assert len(rows) == 1 + 2 * 2
    load = [float(r.split(",")[header.index("load_a")]) for r in rows[1:]]
    assert load[:2] == pytest.approx([0.25, 0.5])  # 50 % and 100 % of load_max 0.5 A


# ----------------------------------------------------------- strict JSON
def _strict(text):
    def refuse(name):
        raise AssertionError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=refuse)


def test_strict_json_replaces_non_finite_numbers():
    import numpy as np

    from rcc.cli.outputs import strict_json

    data = _strict(strict_json({"a": float("nan"), "b": [np.float64("inf"), 1.5],
                                "c": {"d": -float("inf")}}))
    assert data == {"a": None, "b": [None, 1.5], "c": {"d": None}}


@pytest.mark.parametrize("command", ["check", "startup", "sweep"])
def test_json_of_every_worked_case_is_strict(worked_cases, command):
    for case in worked_cases:
        result = invoke(command, case, "--json")
        assert result.exit_code in (0, 1), (case, result.output)
        _strict(result.stdout)


# ----------------------------------------------------------- kernel cache
def test_kernel_cache_drops_damaged_files_and_keeps_recorded_ones(tmp_path, monkeypatch):
    from rcc import _numba_cache as cache

    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path))
    assert cache.cache_folder() == tmp_path
    folder = tmp_path / "engine_0123"
    folder.mkdir()
    good = folder / "simulate._kernel-1.py311.nbi"
    good.write_bytes(b"intact index")
    cache.record(tmp_path)
    damaged = folder / "simulate._kernel-1.py311.1.nbc"
    damaged.write_bytes(b"\x80\x04garbage")  # written by a process that crashed
    other = folder / "unrelated.nbi"  # another package's cache: not ours to touch
    other.write_bytes(b"x")
    assert cache.verify(tmp_path) == [damaged]
    assert good.exists() and other.exists() and not damaged.exists()
    good.write_bytes(b"intact indeT")  # changed on disk after it was recorded
    assert cache.verify(tmp_path) == [good]
    (tmp_path / cache.MANIFEST_NAME).write_text("{not json")  # damaged manifest
    cache.verify(tmp_path)


def test_kernel_cache_is_per_user_not_in_the_package(monkeypatch, tmp_path):
    from pathlib import Path

    import rcc
    from rcc import _numba_cache as cache

    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    folder = cache.cache_folder()
    if sys.platform not in ("win32", "darwin"):
        assert folder == tmp_path / "rcc" / "numba"
    assert Path(rcc.__file__).parent not in folder.parents


def test_waveforms_max_events_option(standby_case):
    result = invoke("waveforms", standby_case, "--time", "5ms", "--max-events", "1000")
    assert result.exit_code == 1, result.output
    assert "more than 1000 switching events" in result.stdout
    assert "raise --max-events" in result.stdout


def test_waveforms_says_which_bus_and_corner_it_ran(standby_case):
    # AC input: the bulk capacitor through the bridge, by default
    result = invoke("waveforms", standby_case, "--time", "0.2ms", "--temperature", "-20degC",
                    "--hfe", "min")
    assert result.exit_code == 0, result.output
    assert "bulk capacitor 22 uF charged through the bridge from 230 V RMS 50 Hz" \
        in result.stdout
    assert "run shorter than a line period, 20 ms: no full ripple" in result.stdout
    assert "-20 degC / 20 at 25 degC" in result.stdout
    result = invoke("waveforms", standby_case, "--time", "0.2ms", "--bus", "peak")
    assert result.exit_code == 0, result.output
    assert "held at 323.7 V, the rectified peak of 230 V RMS 50 Hz (no bulk ripple)" \
        in result.stdout


@pytest.mark.parametrize("case, choice, words", [
    ("standby_12v_universal", "ripple", "expected one of bulk, peak, valley, dc"),
    ("standby_12v_universal", "dc", "the design has AC input; expected bulk, peak, valley"),
    ("aux_5v_48v_dc", "bulk", "the design has DC input; expected dc"),
])
def test_waveforms_bus_choice_fits_the_input(case, choice, words):
    path = Path(__file__).resolve().parent.parent / "worked_cases" / f"{case}.toml"
    assert_refused(invoke("waveforms", path, "--bus", choice), re.escape(words))


@pytest.mark.parametrize("case, model", [("standby_12v_universal", "valley"),
                                         ("aux_5v_48v_dc", "dc")])
def test_sweep_says_which_bus_its_points_use(case, model):
    """In the JSON, the text and the figure's title."""
    path = Path(__file__).resolve().parent.parent / "worked_cases" / f"{case}.toml"
    result = invoke("sweep", path, "--load", "100%", "--line", "230V" if model == "valley"
                    else "48V", "--json")
    data = json.loads(result.stdout)
    assert data["bus_model"] == model
    if model == "valley":
        assert "bulk-capacitor valley" in data["bus_description"]
        point = data["operating_points"][0]
        assert point["bus_v"] < 230 * 2 ** 0.5 - 1.6   # below the rectified peak
    text = invoke("sweep", path, "--load", "100%", "--line", "230V" if model == "valley"
                  else "48V").stdout
    assert f"bus: {data['bus_description']}" in " ".join(text.split())


def test_check_says_which_bus_its_points_use():
    # a supply that cannot start: the check skips the engine runs (seconds)
    path = Path(__file__).resolve().parent.parent / "worked_cases" / \
        "fault_feedback_reversed.toml"
    data = json.loads(invoke("check", path, "--json").stdout)
    assert data["bus_model"] == "valley"
    assert "bulk-capacitor valley" in data["bus_description"]
    text = invoke("check", path).stdout
    assert "Bus: the operating points hold it at the bulk-capacitor valley" in text


def test_sweep_figure_title_names_the_bus(standby_case):
    import matplotlib.pyplot as plt

    from rcc.design import Load
    from rcc.sweep import plot_sweep, sweep

    design = load_design(standby_case)
    axes = plot_sweep(sweep(design, [230.0], Load("current", [0.3])))
    assert "bus at the bulk valley" in axes[0].get_title()
    plt.close(axes[0].figure)
