"""Bad input to ``rcc check`` through typer's test runner (issue 2, section 2).

Every case: exit code 2, one line per problem on stderr, each naming the
file, the ``section.key``, the value given and what was expected, and never
a traceback.
"""

from __future__ import annotations

import re

import pytest
from typer.testing import CliRunner

from rcc.cli import app

runner = CliRunner()


def run_check(path):
    return runner.invoke(app, ["check", str(path)])


def assert_bad_input(result, path, patterns):
    """Exit 2, no traceback, every stderr line names the file, and every
    pattern matches some line."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    assert isinstance(result.exception, SystemExit), result.exception
    assert "Traceback" not in result.output
    assert result.stdout.strip() == "", "problems belong on stderr"
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert lines, "no message on stderr"
    for line in lines:
        assert line.startswith(f"{path}:"), line
    for pattern in patterns:
        assert any(re.search(pattern, line) for line in lines), (pattern, lines)
    return lines


def test_good_file_passes_loading(standby_case):
    result = run_check(standby_case)
    assert result.exit_code in (0, 1), result.output
    assert "Traceback" not in result.output


# (mutation, expected line pattern).  Each mutation breaks one thing.
CASES = {
    "missing key": (
        lambda d: d["switch"].pop("vceo"),
        r": switch\.vceo: missing; expected a positive voltage \[V\]"),
    "wrong dimension": (
        lambda d: d["transformer"].update(magnetizing_inductance="10 mF"),
        r": transformer\.magnetizing_inductance = '10 mF': expected an inductance "
        r"such as '4\.7 mH' \('mF' is not a unit of inductance\)$"),
    "wrong dimension, capacitor given in henry": (
        lambda d: d["output"].update(capacitance="470 uH"),
        r": output\.capacitance = '470 uH': expected a capacitance .*not a unit of capacitance"),
    "zero where positive needed": (
        lambda d: d["startup"].update(resistance=0),
        r": startup\.resistance = 0: expected a positive resistance \[ohm\]$"),
    "negative where positive needed": (
        lambda d: d["drive"].update(capacitance="-47 nF"),
        r": drive\.capacitance = '-47 nF': expected a positive capacitance \[F\]$"),
    "negative gain": (
        lambda d: d["switch"].update(hfe_min=-3),
        r": switch\.hfe_min = -3: expected a positive number$"),
    "coupling above 1": (
        lambda d: d["transformer"].update(coupling=1.2),
        r": transformer\.coupling = 1\.2: expected a number in \(0, 1\]$"),
    "coupling zero": (
        lambda d: d["transformer"].update(coupling=0),
        r": transformer\.coupling = 0: expected a number in \(0, 1\]$"),
    "coupling negative": (
        lambda d: d["transformer"].update(coupling=-0.5),
        r": transformer\.coupling = -0\.5: expected a number in \(0, 1\]$"),
    "unparseable number": (
        lambda d: d["drive"].update(resistance="abc"),
        r": drive\.resistance = 'abc': expected a number with an optional unit, "
        r"such as '4\.7 kohm'$"),
    "unknown unit": (
        lambda d: d["drive"].update(resistance="150 ohms-ish"),
        r": drive\.resistance = '150 ohms-ish': expected a resistance .*unknown unit"),
    "TOML nan": (
        lambda d: d["switch"].update(storage_time=float("nan")),
        r": switch\.storage_time = nan: expected a finite time"),
    "TOML inf": (
        lambda d: d["switch"].update(ic_max=float("inf")),
        r": switch\.ic_max = inf: expected a finite current"),
    "string nan": (
        lambda d: d["input"].update(ac_nominal="nan"),
        r": input\.ac_nominal = 'nan': expected a finite voltage"),
    "string inf with unit": (
        lambda d: d["input"].update(ac_max="inf V"),
        r": input\.ac_max = 'inf V': expected a number"),
    "unknown key with suggestion": (
        lambda d: d["switch"].update(hfe_mni=10),
        r": switch\.hfe_mni = 10: unknown key \(did you mean 'hfe_min'\?\)$"),
    "unknown key, transformer": (
        lambda d: d["transformer"].update(magnetising_inductance="1 mH"),
        r": transformer\.magnetising_inductance = '1 mH': unknown key \(did you mean "
        r"'magnetizing_inductance'\?\)$"),
    "unknown section with suggestion": (
        lambda d: d.update(swtich={"hfe_min": 1}),
        r": \[swtich\]: unknown section \(did you mean 'switch'\?\)$"),
    "unknown section, nothing close": (
        lambda d: d.update(zzzz={"a": 1}),
        r": \[zzzz\]: unknown section$"),
    "unknown top-level key": (
        lambda d: d.update(titel="x"),
        r": titel = 'x': unknown key \(did you mean 'title'\?\)$"),
    "choice out of range": (
        lambda d: d["transformer"].update(feedback_phase="reversed"),
        r": transformer\.feedback_phase = 'reversed': expected one of "
        r"'regenerative', 'degenerative'$"),
    "wrong type": (
        lambda d: d["switch"].update(vceo=[400]),
        r": switch\.vceo = \[400\]: expected a number or a string"),
    "temperature below absolute zero": (
        lambda d: d.update(environment={"temperature_min": "-300 degC"}),
        r": environment\.temperature_min = '-300 degC': expected a temperature "
        r"above absolute zero"),
}


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_bad_value(case, minimal_design_dict, write_design):
    mutate, pattern = CASES[case]
    mutate(minimal_design_dict)
    path = write_design(minimal_design_dict)
    lines = assert_bad_input(run_check(path), path, [pattern])
    assert len(lines) == 1, lines


def test_transposed_letters_suggest_the_intended_key(minimal_design_dict, write_design):
    minimal_design_dict["switch"]["vcoe"] = "400 V"
    path = write_design(minimal_design_dict)
    assert_bad_input(run_check(path), path,
                     [r": switch\.vcoe = '400 V': unknown key \(did you mean 'vceo'\?\)$"])


def test_several_problems_reported_at_once(minimal_design_dict, write_design):
    d = minimal_design_dict
    for case in ("missing key", "wrong dimension", "zero where positive needed",
                 "negative gain", "coupling above 1", "unparseable number", "TOML nan",
                 "TOML inf", "unknown key with suggestion", "unknown section with suggestion"):
        CASES[case][0](d)
    path = write_design(d)
    patterns = [CASES[case][1] for case in (
        "missing key", "wrong dimension", "zero where positive needed", "negative gain",
        "coupling above 1", "unparseable number", "TOML nan", "TOML inf",
        "unknown key with suggestion", "unknown section with suggestion")]
    lines = assert_bad_input(run_check(path), path, patterns)
    assert len(lines) == len(patterns), lines


def test_not_toml(write_design):
    path = write_design("title = 'x'\n[switch\nhfe_min = 3\n")
    lines = assert_bad_input(run_check(path), path, [r": not valid TOML \(.*line 2"])
    assert len(lines) == 1


def test_binary_file(tmp_path):
    path = tmp_path / "design.toml"
    path.write_bytes(b"\xff\xfe\x00\x01garbage")
    assert_bad_input(run_check(path), path, [r": not UTF-8 text \(byte 0\)"])


@pytest.mark.parametrize("text", ["", "   \n\n", "\n"])
def test_empty_file(write_design, text):
    path = write_design(text)
    lines = assert_bad_input(run_check(path), path,
                             [r": the file is empty, expected a TOML design file$"])
    assert len(lines) == 1


def test_missing_file(tmp_path):
    path = tmp_path / "no_such_design.toml"
    lines = assert_bad_input(run_check(path), path, [r": file does not exist$"])
    assert len(lines) == 1


def test_directory(tmp_path):
    lines = assert_bad_input(run_check(tmp_path), tmp_path,
                             [r": is a directory, expected a TOML design file$"])
    assert len(lines) == 1


def test_comment_only_file_lists_missing_keys(write_design):
    # a file with only a comment is valid TOML with no keys: every required
    # key is reported missing, each on its own line
    path = write_design("# nothing here\n")
    lines = assert_bad_input(run_check(path), path, [
        r": title: missing", r": switch\.hfe_min: missing", r": input\.ac_min: missing",
        r": transformer\.core_area: missing", r": output\.load_max: missing"])
    assert len(lines) > 10


@pytest.mark.parametrize("command", [["check", "--json"], ["sweep"]], ids=["check-json", "sweep"])
def test_other_commands_report_design_problems_the_same_way(command, minimal_design_dict,
                                                            write_design, tmp_path):
    # the JSON switch and the sweep command load the design through the same
    # path: same exit code 2, same lines, nothing on stdout (no half JSON)
    for case in ("wrong dimension", "coupling above 1", "unknown key with suggestion"):
        CASES[case][0](minimal_design_dict)
    path = write_design(minimal_design_dict)
    result = runner.invoke(app, command[:1] + [str(path)] + command[1:])
    assert_bad_input(result, path, [CASES[c][1] for c in (
        "wrong dimension", "coupling above 1", "unknown key with suggestion")])
    missing = tmp_path / "absent.toml"
    result = runner.invoke(app, command[:1] + [str(missing)] + command[1:])
    assert_bad_input(result, missing, [r": file does not exist$"])
