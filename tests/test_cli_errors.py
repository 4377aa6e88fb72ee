"""Tier (e): bad input gives the documented error.

The README and the ``windsolve.cli`` docstring promise that every failure
the user can fix ends with exit status 2 and exactly one line on stderr,
``windsolve: error: ...``, naming the problem (and, for a misspelt name, the
nearest valid one), with no traceback and no output file.  A valid model that
has no transonic solution counts as bad input too: exit 2, one line, nothing
written.

Every model case below is the built-in demo model with one edit, written into
``tmp_path``.  All cases run in-process through ``windsolve.cli.main`` (fast);
a handful also run end to end as ``python -m windsolve ...`` subprocesses to
prove that nothing escapes as a traceback outside ``main`` (about 1 s each,
so the subprocess set stays small).
"""

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from windsolve import cli, demo_model_path

DEMO = Path(str(demo_model_path())).read_text(encoding="utf-8")
EXIT_BAD_INPUT = 2


# -- editing a copy of the demo model -----------------------------------------

def _key_line(key):
    return re.compile(rf"^{re.escape(key)}\s*=.*$", re.M)


def set_value(text, key, toml_value):
    """Replace the value of the one line ``key = ...`` with raw TOML text."""
    new, n = _key_line(key).subn(lambda m: f"{key} = {toml_value}", text)
    assert n == 1, f"the demo model should have exactly one line '{key} = ...'"
    return new


def drop_key(text, key):
    new, n = _key_line(key).subn("", text)
    assert n == 1, f"the demo model should have exactly one line '{key} = ...'"
    return new


def add_after(text, key, line):
    """Insert ``line`` right after the one line ``key = ...``."""
    new, n = _key_line(key).subn(lambda m: f"{m.group(0)}\n{line}", text)
    assert n == 1, f"the demo model should have exactly one line '{key} = ...'"
    return new


def drop_table(text, table):
    """Remove ``[table]`` with its keys (up to the next table header)."""
    new, n = re.subn(rf"^\[{re.escape(table)}\][^\n]*\n(?:(?!\[)[^\n]*\n)*", "", text,
                     flags=re.M)
    assert n == 1, f"the demo model should have a [{table}] table"
    assert f"[{table}]" not in new
    return new


def rename(text, old, new):
    assert text.count(old) == 1, f"{old!r} should occur once in the demo model"
    return text.replace(old, new)


def _malformed(text):
    # Drop the closing quote of the mass value: the string runs into the newline.
    return set_value(text, "mass", '"50 Msun')


def _line_of(text, key):
    return next(i for i, line in enumerate(text.splitlines(), 1)
                if re.match(rf"{re.escape(key)}\s*=", line))


# id -> (edit of the demo text, fragments the one error line must contain)
MODEL_CASES = {
    "malformed-toml": (
        _malformed,
        ["not valid TOML", f"line {_line_of(DEMO, 'mass')}"]),
    "unknown-key-near-miss": (
        lambda t: rename(t, 'luminosity = "4e6 Lsun"', 'lumnosity = "4e6 Lsun"'),
        ['unknown key "lumnosity"', "[star]", 'did you mean "luminosity"']),
    "unknown-table-near-miss": (
        lambda t: rename(t, "[star]", "[stra]"),
        ["unknown table [stra]", 'did you mean "star"']),
    "unknown-model-kind": (
        lambda t: set_value(t, "model", '"isothermel"'),
        ['model = "isothermel"', 'did you mean "isothermal"']),
    "top-level-model-missing": (
        lambda t: drop_key(t, "model"),
        ["model is missing", 'model = "isothermal"']),
    "bare-number-needs-unit": (
        lambda t: set_value(t, "mass", "50"),
        ["[star] mass", "has no unit", "Msun"]),
    "wrong-dimension": (
        lambda t: set_value(t, "radius", '"50 Msun"'),
        ["[star] radius", "a length is needed"]),
    "unparseable-quantity": (
        lambda t: set_value(t, "mass", '"fifty Msun"'),
        ["[star] mass", "fifty Msun", "not a number with a unit"]),
    "negative-mass": (
        lambda t: set_value(t, "mass", '"-50 Msun"'),
        ["[star] mass", "must be positive"]),
    "zero-radius": (
        lambda t: set_value(t, "radius", '"0 Rsun"'),
        ["[star] radius", "must be positive"]),
    "negative-base-density": (
        lambda t: set_value(t, "base_density", '"-1e-9 g/cm3"'),
        ["[boundary] base_density", "must be positive"]),
    "zero-sound-speed": (
        lambda t: set_value(t, "sound_speed", '"0 km/s"'),
        ["[gas] sound_speed", "must be positive"]),
    "X-plus-Z-above-1": (
        lambda t: set_value(set_value(t, "X", "0.9"), "Z", "0.2"),
        ["[composition]", "X + Z", "exceeds 1"]),
    "sound-speed-and-temperature": (
        lambda t: add_after(t, "sound_speed", 'temperature = "3e4 K"'),
        ["[gas]", "exactly one of sound_speed", "temperature"]),
    "neither-sound-speed-nor-temperature": (
        lambda t: drop_key(t, "sound_speed"),
        ["[gas]", "exactly one of sound_speed", "temperature"]),
    "unknown-opacity-law": (
        lambda t: set_value(t, "law", '"kramer"'),
        ['law = "kramer"', 'did you mean "kramers"']),
    "missing-required-key": (
        lambda t: drop_key(t, "base_density"),
        ["[boundary] base_density is missing"]),
    # Valid models without a transonic solution.
    # Pure electron scattering at Gamma_es ~ 2.1: the base is unbound.
    "no-solution-unbound-base": (
        lambda t: drop_table(t, "porosity"),
        ["no solution", "no critical point beyond R0", "unbound"]),
    # Gamma_es ~ 0.05 and a = 1 km/s: GM(1 - Gamma)/(2 a^2) ~ 5e6 Rsun lies far
    # beyond the outer radius (1e4 Rsun), so the flow never turns transonic.
    "no-solution-critical-point-beyond-outer-radius": (
        lambda t: set_value(set_value(drop_table(t, "porosity"), "sound_speed", '"1 km/s"'),
                            "luminosity", '"1e5 Lsun"'),
        ["no solution", "no critical point between R0 and the outer radius", "outer_radius"]),
}

# The cases also run end to end as subprocesses (keep this short: ~1 s each).
END_TO_END = [
    "malformed-toml",
    "unknown-key-near-miss",
    "bare-number-needs-unit",
    "X-plus-Z-above-1",
    "no-solution-unbound-base",
    "no-solution-critical-point-beyond-outer-radius",
]


# -- running the command line -------------------------------------------------

def run_in_process(argv, capsys, monkeypatch, cwd):
    monkeypatch.chdir(cwd)  # anything written relative to the cwd would show up
    code = cli.main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def run_subprocess(argv, cwd, program=None):
    command = program or [sys.executable, "-m", "windsolve"]
    env = dict(os.environ, MPLBACKEND="Agg")
    proc = subprocess.run([*command, *map(str, argv)], capture_output=True, text=True,
                          cwd=cwd, env=env, timeout=120)
    return proc.returncode, proc.stdout, proc.stderr


def assert_one_line_error(code, out, err, fragments):
    assert "Traceback" not in err, err
    assert "Traceback" not in out, out
    assert code == EXIT_BAD_INPUT, f"exit {code}; stderr: {err!r}"
    lines = err.splitlines()
    assert len(lines) == 1, f"expected one line on stderr, got {len(lines)}: {err!r}"
    assert err.endswith("\n")
    line = lines[0]
    assert line.startswith("windsolve: error: "), line
    assert len(line) > len("windsolve: error: ") + 10, line
    for fragment in fragments:
        assert fragment in line, f"{fragment!r} not in {line!r}"


def assert_only(directory, *names):
    """``directory`` holds exactly ``names``: no output, no stray temporary file."""
    assert sorted(p.name for p in directory.iterdir()) == sorted(names)


def write_model(tmp_path, case):
    edit, fragments = MODEL_CASES[case]
    text = edit(DEMO)
    assert text != DEMO
    model = tmp_path / "model.toml"
    model.write_text(text, encoding="utf-8")
    return model, fragments


# -- windsolve run --------------------------------------------------------------

@pytest.mark.parametrize("case", list(MODEL_CASES))
def test_run_bad_model_in_process(case, tmp_path, capsys, monkeypatch):
    model, fragments = write_model(tmp_path, case)
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_in_process(["run", model, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, fragments)
    if case.startswith("no-solution"):
        assert stdout == ""  # no summary block repeating the message before the error
    assert not out.exists()
    assert_only(tmp_path, "model.toml")


@pytest.mark.parametrize("case", END_TO_END)
def test_run_bad_model_subprocess(case, tmp_path):
    model, fragments = write_model(tmp_path, case)
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_subprocess(["run", model, "-o", out], tmp_path)
    assert_one_line_error(code, stdout, stderr, fragments)
    if case.startswith("no-solution"):
        assert stdout == ""
    assert not out.exists()
    assert_only(tmp_path, "model.toml")


def test_run_missing_model_file_subprocess(tmp_path):
    missing = tmp_path / "no_such_model.toml"
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_subprocess(["run", missing, "-o", out], tmp_path)
    assert_one_line_error(code, stdout, stderr, ["no_such_model.toml", "no such file"])
    assert_only(tmp_path)


def test_run_missing_model_file_in_process(tmp_path, capsys, monkeypatch):
    missing = tmp_path / "no_such_model.toml"
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_in_process(["run", missing, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["no_such_model.toml", "no such file"])
    assert_only(tmp_path)


def test_run_model_path_is_a_directory(tmp_path, capsys, monkeypatch):
    folder = tmp_path / "models"
    folder.mkdir()
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_in_process(["run", folder, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["models", "is a directory"])
    assert_only(tmp_path, "models")


def test_run_model_not_utf8(tmp_path, capsys, monkeypatch):
    model = tmp_path / "model.toml"
    model.write_bytes(DEMO.replace("(invented)", "(caf\u00e9)").encode("latin-1"))
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_in_process(["run", model, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["model.toml", "cannot read"])
    assert_only(tmp_path, "model.toml")


def test_run_output_directory_missing(tmp_path, capsys, monkeypatch, write_model, demo_text):
    """A good model, but -o points into a directory that does not exist."""
    model = write_model(demo_text)
    out = tmp_path / "nowhere" / "out.h5"
    code, stdout, stderr = run_in_process(["run", model, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["nowhere", "does not exist"])
    assert_only(tmp_path, "model.toml")


def test_run_output_is_a_directory(tmp_path, capsys, monkeypatch, write_model, demo_text):
    model = write_model(demo_text)
    out = tmp_path / "results"
    out.mkdir()
    code, stdout, stderr = run_in_process(["run", model, "-o", out], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["results", "is a directory"])
    assert list(out.iterdir()) == []
    assert_only(tmp_path, "model.toml", "results")


@pytest.mark.skipif(shutil.which("windsolve") is None,
                    reason="the windsolve console script is not on PATH")
def test_console_script_bad_model(tmp_path):
    """The installed ``windsolve`` entry point behaves like ``python -m windsolve``."""
    model, fragments = write_model(tmp_path, "unknown-table-near-miss")
    out = tmp_path / "out.h5"
    code, stdout, stderr = run_subprocess(["run", model, "-o", out], tmp_path,
                                          program=[shutil.which("windsolve")])
    assert_one_line_error(code, stdout, stderr, fragments)
    assert_only(tmp_path, "model.toml")


# -- windsolve check ------------------------------------------------------------

CHECK_CASES = ["unknown-key-near-miss", "wrong-dimension", "X-plus-Z-above-1",
               "unknown-opacity-law", "missing-required-key"]


@pytest.mark.parametrize("case", CHECK_CASES)
def test_check_bad_model_in_process(case, tmp_path, capsys, monkeypatch):
    model, fragments = write_model(tmp_path, case)
    code, stdout, stderr = run_in_process(["check", model], capsys, monkeypatch, tmp_path)
    assert_one_line_error(code, stdout, stderr, fragments)
    assert stdout == ""  # no half-printed table before the error
    assert_only(tmp_path, "model.toml")


def test_check_bad_model_subprocess(tmp_path):
    model, fragments = write_model(tmp_path, "unknown-key-near-miss")
    code, stdout, stderr = run_subprocess(["check", model], tmp_path)
    assert_one_line_error(code, stdout, stderr, fragments)
    assert_only(tmp_path, "model.toml")


def test_check_same_message_as_run(tmp_path, capsys, monkeypatch):
    """``check`` and ``run`` report a bad model with the same line."""
    model, _ = write_model(tmp_path, "bare-number-needs-unit")
    _, _, err_check = run_in_process(["check", model], capsys, monkeypatch, tmp_path)
    _, _, err_run = run_in_process(["run", model], capsys, monkeypatch, tmp_path)
    assert err_check == err_run


def test_check_missing_model_file(tmp_path, capsys, monkeypatch):
    missing = tmp_path / "no_such_model.toml"
    code, stdout, stderr = run_in_process(["check", missing], capsys, monkeypatch, tmp_path)
    assert_one_line_error(code, stdout, stderr, ["no_such_model.toml", "no such file"])
    assert_only(tmp_path)


# -- windsolve inspect / plot -----------------------------------------------------

def _not_hdf5(tmp_path):
    path = tmp_path / "junk.h5"
    path.write_text("this is not an HDF5 file\n")
    return path


def _hdf5_without_result(tmp_path):
    h5py = pytest.importorskip("h5py")
    path = tmp_path / "other.h5"
    with h5py.File(path, "w") as f:
        f.create_group("something_else")
    return path


@pytest.mark.parametrize("verb", ["inspect", "plot"])
def test_missing_result_file_subprocess(verb, tmp_path):
    missing = tmp_path / "no_such_result.h5"
    code, stdout, stderr = run_subprocess([verb, missing], tmp_path)
    assert_one_line_error(code, stdout, stderr, ["no_such_result.h5", "no such file"])
    assert_only(tmp_path)


@pytest.mark.parametrize("verb", ["inspect", "plot"])
def test_not_hdf5_subprocess(verb, tmp_path):
    junk = _not_hdf5(tmp_path)
    code, stdout, stderr = run_subprocess([verb, junk], tmp_path)
    assert_one_line_error(code, stdout, stderr, ["junk.h5", "not an HDF5 file"])
    assert_only(tmp_path, "junk.h5")  # plot wrote no junk.png


@pytest.mark.parametrize("verb", ["inspect", "plot"])
def test_missing_result_file_in_process(verb, tmp_path, capsys, monkeypatch):
    missing = tmp_path / "no_such_result.h5"
    code, stdout, stderr = run_in_process([verb, missing], capsys, monkeypatch, tmp_path)
    assert_one_line_error(code, stdout, stderr, ["no_such_result.h5", "no such file"])
    assert_only(tmp_path)


def test_inspect_a_model_file_instead_of_a_result(tmp_path, capsys, monkeypatch, write_model,
                                                  demo_text):
    model = write_model(demo_text)
    code, stdout, stderr = run_in_process(["inspect", model], capsys, monkeypatch, tmp_path)
    assert_one_line_error(code, stdout, stderr, ["model.toml", "not an HDF5 file"])
    assert_only(tmp_path, "model.toml")


def test_plot_not_hdf5_with_output(tmp_path, capsys, monkeypatch):
    junk = _not_hdf5(tmp_path)
    png = tmp_path / "out.png"
    code, stdout, stderr = run_in_process(["plot", junk, "-o", png], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["junk.h5", "not an HDF5 file"])
    assert not png.exists()
    assert_only(tmp_path, "junk.h5")


def test_plot_hdf5_that_is_not_a_result(tmp_path, capsys, monkeypatch):
    other = _hdf5_without_result(tmp_path)
    png = tmp_path / "out.png"
    code, stdout, stderr = run_in_process(["plot", other, "-o", png], capsys, monkeypatch,
                                          tmp_path)
    assert_one_line_error(code, stdout, stderr, ["other.h5", "/summary", "/profile"])
    assert not png.exists()
    assert_only(tmp_path, "other.h5")
