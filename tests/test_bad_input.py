"""Tier (e), the survey: bad input of every kind gives one line and exit 2.

The promise (``windsolve.cli`` docstring, README): every failure the user can
fix ends with exit status 2 and exactly one line on stderr,
``windsolve: error: ...``, naming the problem and the fix (and, for a
misspelt name, the nearest valid one), with no traceback and no output file.

Every case in :data:`CASES` is one bad input, grouped by kind (the ``kind``
field): bad model files, wrong value types, wrong units, values out of range
(including values whose cgs form over- or underflows, and derived numbers
that become infinite), bad command options, bad observed-widths CSV files.
Each builds its input files in a fresh directory and runs
``windsolve.cli.main([...])`` in-process; the test checks the exit code, the
one stderr line with the fragments the message must contain, that no
traceback or warning escaped, that nothing else was printed and that nothing was
written.  All cases but one (a model without a solution) fail during validation,
before anything is solved, so the whole set runs in a few seconds.
``benchmarks/bad_input_survey.py`` runs the same cases and prints the counts.

A few cases also run as real ``python -m windsolve`` subprocesses, so that
nothing escapes ``main``; a few more check that input which is merely unusual
gets a correct answer rather than an error.
"""

import contextlib
import io
import os
import re
import signal
import subprocess
import sys
import traceback
import warnings
from dataclasses import dataclass
from pathlib import Path

import pytest

from windsolve import cli, demo_model_path

DEMO = Path(str(demo_model_path())).read_text(encoding="utf-8")
BUMP = (Path(__file__).parent.parent / "configs" / "bump_wind.toml").read_text(encoding="utf-8")
OBSERVED = (Path(__file__).parent.parent / "configs" / "observed_widths.csv").read_text(
    encoding="utf-8")
EXIT_BAD_INPUT = 2
HEADER = "object,quantity,line,value,uncertainty,unit\n"


# -- editing model text ------------------------------------------------------------

def set_value(text, key, toml_value):
    """Replace the value of the one line ``key = ...`` with raw TOML text."""
    new, n = re.subn(rf"^{re.escape(key)}\s*=.*$", lambda m: f"{key} = {toml_value}", text,
                     flags=re.M)
    assert n == 1, f"expected exactly one line '{key} = ...'"
    return new


def drop_table(text, table):
    new, n = re.subn(rf"^\[{re.escape(table)}\][^\n]*\n(?:(?!\[)[^\n]*\n)*", "", text,
                     flags=re.M)
    assert n == 1, f"expected a [{table}] table"
    return new


def top_level(text, line):
    """Insert a top-level ``line`` right after ``name = ...`` (before any table)."""
    new, n = re.subn(r"^name\s*=.*$", lambda m: f"{m.group(0)}\n{line}", text, flags=re.M)
    assert n == 1
    return new


def demo(**edits):
    """The demo model with ``key = raw TOML`` edits."""
    text = DEMO
    for key, value in edits.items():
        text = set_value(text, key, value)
    return text


def bump(**edits):
    text = BUMP
    for key, value in edits.items():
        text = set_value(text, key, value)
    return text


# -- the cases --------------------------------------------------------------------------

class Ctx:
    """Where a case writes its inputs (``dir``, also the working directory)."""

    def __init__(self, directory, result_file):
        self.dir = Path(directory)
        self._result_file = result_file

    def write(self, name, text, encoding="utf-8"):
        path = self.dir / name
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text, encoding=encoding)
        return str(path)

    def model(self, text, name="model.toml"):
        return self.write(name, text)

    def csv(self, text, name="observed.csv"):
        return self.write(name, text)

    def result(self):
        """A solved demo result file (shared by the cases, outside ``dir``)."""
        return str(self._result_file())


@dataclass(frozen=True)
class Case:
    id: str
    kind: str
    argv: object  # Ctx -> list of arguments
    fragments: tuple = ()


CASES = []


def case(id, kind, argv, *fragments):
    CASES.append(Case(id, kind, argv, tuple(fragments)))


def run_model(text, verb="run"):
    return lambda c: [verb, c.model(text)]


# --- kind: model file cannot be read or is not TOML -------------------------------------
K = "model file"
case("missing-file", K, lambda c: ["run", str(c.dir / "nope.toml")], "nope.toml", "no such file")
case("directory", K, lambda c: ["run", str(c.dir)], "is a directory")
case("not-utf8", K, lambda c: ["run", c.write("model.toml", DEMO.replace(
    "(invented)", "(caf\u00e9)").encode("latin-1"))], "model.toml", "UTF-8")
case("binary-file", K, lambda c: ["check", c.write("model.toml", b"\x89HDF\r\n\x1a\n\x00\x00")],
     "model.toml", "UTF-8")
case("empty-file", K, run_model(""), "model is missing")
case("bad-toml-syntax", K, run_model(demo(mass='"50 Msun')), "not valid TOML", "line")
case("duplicate-key", K, run_model(DEMO.replace('mass = "50 Msun"',
                                                'mass = "50 Msun"\nmass = "40 Msun"')),
     "not valid TOML")

# --- kind: the structure of the file (tables and keys) ------------------------------------
K = "structure"
case("table-given-as-number", K, run_model(top_level(drop_table(DEMO, "star"), "star = 5")),
     "star = 5", "[star]", "table")
case("table-given-as-string", K, run_model(top_level(drop_table(DEMO, "composition"),
                                                     'composition = "solar"')),
     "composition", "[composition]", "table")
case("opacity-given-as-string", K, run_model(top_level(drop_table(DEMO, "opacity"),
                                                       'opacity = "kramers"')),
     "opacity", "[opacity]", "law")
case("key-given-as-table", K, run_model(DEMO.replace(
    'name = "Calder Var A (invented)"', 'name = {label = "x"}')), "name", "string")
case("table-key-at-top-level", K, run_model(top_level(DEMO, 'mass = "40 Msun"')),
     'unknown key "mass"', "[star]")
case("unknown-key-near-miss", K, run_model(DEMO.replace('luminosity = "', 'lumnosity = "')),
     'did you mean "luminosity"')
case("unknown-table-near-miss", K, run_model(DEMO.replace("[star]", "[stars]")),
     'did you mean "star"')
case("model-kind-number", K, run_model(demo(model="5")), "model = 5")
case("model-kind-list", K, run_model(demo(model='["isothermal"]')), "model", "string")
case("model-kind-near-miss", K, run_model(demo(model='"isotermal"')),
     'did you mean "isothermal"')
case("law-number", K, run_model(demo(law="5")), "law = 5", "electron_scattering")
case("law-list", K, run_model(demo(law='["kramers"]')), "law", "electron_scattering")
case("law-near-miss", K, run_model(demo(law='"kramer"')), 'did you mean "kramers"')
case("law-parameter-of-other-law", K, run_model(demo(law='"electron_scattering"\namplitude = 3')),
     'unknown key "amplitude"', "electron_scattering")
case("missing-required-key", K, run_model(DEMO.replace('base_density = "1e-9 g/cm3"', "")),
     "base_density is missing")
case("diffusion-key-in-isothermal", K, run_model(DEMO.replace(
    'base_density = "1e-9 g/cm3"', 'base_density = "1e-9 g/cm3"\nbase_temperature = "1e6 K"')),
     'unknown key "base_temperature"')

# --- kind: wrong value types ------------------------------------------------------------------
K = "type"
case("bool-for-quantity", K, run_model(demo(mass="true")), "[star] mass", "Msun")
case("array-for-quantity", K, run_model(demo(mass='["50 Msun"]')), "[star] mass", "Msun")
case("table-for-quantity", K, run_model(demo(mass='{value = 50, unit = "Msun"}')),
     "[star] mass", "Msun")
case("date-for-quantity", K, run_model(demo(mass="1979-05-27")), "[star] mass", "Msun")
case("string-for-fraction", K, run_model(demo(X='"0.7"')), "[composition] X", "plain number")
case("bool-for-fraction", K, run_model(demo(X="true")), "[composition] X", "plain number")
case("array-for-fraction", K, run_model(demo(Z="[0.02]")), "[composition] Z", "plain number")
case("string-for-rtol", K, run_model(demo(rtol='"1e-8"')), "[numerics] rtol", "plain number")
case("string-for-flag", K, run_model(demo(photon_tiring='"yes"')), "photon_tiring",
     "true or false")
case("number-for-flag", K, run_model(demo(photon_tiring="1")), "photon_tiring", "true or false")
case("number-for-name", K, run_model(demo(name="5")), "name", "quoted string")
case("array-for-exponent", K, run_model(demo(radial_exponent="[1, 2]")), "radial_exponent",
     "plain number")
case("bool-for-opacity-number", K, run_model(demo(
    law='"bump"\namplitude = true\npeak_temperature = "1.8e5 K"\nwidth_dex = 0.1')),
     "[opacity] amplitude")
case("array-for-opacity-number", K, run_model(demo(
    law='"bump"\namplitude = [3]\npeak_temperature = "1.8e5 K"\nwidth_dex = 0.1')),
     "[opacity] amplitude", "number")
case("string-for-clamp", K, run_model(demo(law='"table"\npath = "t.txt"\nclamp = "yes"')),
     "[opacity] clamp", "true or false")
case("number-for-table-path", K, run_model(demo(law='"table"\npath = 5')), "[opacity] path")

# --- kind: units -----------------------------------------------------------------------------
K = "units"
case("bare-number", K, run_model(demo(mass="50")), "[star] mass", "has no unit")
case("bare-number-string", K, run_model(demo(mass='"50"')), "[star] mass", "has no unit")
case("wrong-dimension", K, run_model(demo(radius='"50 Msun"')), "[star] radius", "length")
case("not-a-unit", K, run_model(demo(mass='"50 Msunn"')), "[star] mass", "not a number")
case("speed-for-temperature", K, run_model(DEMO.replace('sound_speed = "20 km/s"',
                                                        'temperature = "20 km/s"')),
     "[gas] temperature", "temperature")
case("temperature-for-speed", K, run_model(demo(sound_speed='"3e4 K"')), "[gas] sound_speed",
     "speed")
case("mass-for-density", K, run_model(demo(base_density='"1e-9 g"')), "base_density", "density")
case("rate-for-luminosity", K, run_model(demo(luminosity='"4e6 Lsun/yr"')), "luminosity")
case("opacity-bare-temperature", K, run_model(demo(
    law='"bump"\namplitude = 3\npeak_temperature = 1.8e5\nwidth_dex = 0.1')),
     "[opacity] peak_temperature", "has no unit")
case("opacity-wrong-dimension", K, run_model(demo(
    law='"kramers"\nfree_free_coefficient = "3.68e22 cm2/g"')), "free_free_coefficient")
case("logarithmic-unit", K, run_model(demo(mass='"50 dex(Msun)"')), "[star] mass")

# --- kind: values out of range ----------------------------------------------------------------
K = "range"
case("negative-mass", K, run_model(demo(mass='"-50 Msun"')), "[star] mass", "positive")
case("zero-radius", K, run_model(demo(radius='"0 Rsun"')), "[star] radius", "positive")
case("nan-mass", K, run_model(demo(mass='"nan Msun"')), "[star] mass", "finite")
case("inf-mass", K, run_model(demo(mass='"inf Msun"')), "[star] mass", "finite")
case("nan-fraction", K, run_model(demo(X="nan")), "[composition] X", "finite")
case("negative-fraction", K, run_model(demo(X="-0.1")), "[composition] X", "between 0 and 1")
case("X-plus-Z-above-1", K, run_model(demo(X="0.9", Z="0.2")), "X + Z", "exceeds 1")
case("rtol-too-small", K, run_model(demo(rtol="1e-20")), "rtol", "1e-13")
case("rtol-too-large", K, run_model(demo(rtol="0.5")), "rtol", "1e-3")
case("outer-inside-base", K, run_model(demo(outer_radius='"50 Rsun"')), "outer_radius",
     "must exceed")
case("mass-underflows-to-zero", K, run_model(demo(mass='"1e-400 Msun"')), "[star] mass",
     "positive")
case("mass-overflows-cgs", K, run_model(demo(mass='"1e300 Msun"')), "[star] mass", "cgs")
case("mass-overflows-cgs-check", K, run_model(demo(mass='"1e300 Msun"'), "check"),
     "[star] mass", "cgs")
case("luminosity-overflows-cgs", K, run_model(demo(luminosity='"1e300 Lsun"')),
     "[star] luminosity", "cgs")
case("porosity-overflows-cgs", K, run_model(demo(length='"1e300 Rsun"')), "[porosity] length",
     "cgs")
case("outer-radius-overflows-cgs", K, run_model(demo(outer_radius='"1e300 Rsun"')),
     "[numerics] outer_radius", "cgs")
case("tiny-radius-escape-speed", K, run_model(demo(radius='"1e-308 Rsun"')),
     "[star] radius", "speed of light")
case("tiny-radius-escape-speed-check", K, run_model(demo(radius='"1e-308 Rsun"'), "check"),
     "[star] radius", "speed of light")
case("radius-inside-schwarzschild", K, run_model(demo(radius='"100 km"')), "[star] radius",
     "Schwarzschild")
case("sound-speed-faster-than-light", K, run_model(demo(sound_speed='"1e6 km/s"')),
     "[gas] sound_speed", "speed of light")
case("temperature-faster-than-light", K, run_model(DEMO.replace(
    'sound_speed = "20 km/s"', 'temperature = "1e20 K"'), "check"), "[gas] temperature",
     "speed of light")
case("base-density-overflows", K, run_model(demo(base_density='"1e300 g/cm3"'), "check"),
     "base_density")
case("photosphere-temperature-tiny", K, run_model(bump(photosphere_temperature='"1e-100 K"')),
     "photosphere")
case("photosphere-temperature-huge", K, run_model(bump(photosphere_temperature='"1e100 K"')),
     "photosphere")
case("diffusion-mass-overflows", K, run_model(bump(mass='"1e300 Msun"')), "[star] mass", "cgs")
case("bump-negative-amplitude", K, run_model(bump(amplitude="-5")), "[opacity] amplitude")
case("bump-zero-width", K, run_model(bump(width_dex="0")), "[opacity] width_dex", "positive")
case("kramers-negative-coefficient", K, run_model(demo(
    law='"kramers"\nfree_free_coefficient = "-3.68e22 cm5 K(7/2) / g2"')),
     "[opacity] free_free_coefficient", "positive")
case("opacity-temperature-nan", K, run_model(demo(
    law='"bump"\namplitude = 3\npeak_temperature = "nan K"\nwidth_dex = 0.1')),
     "[opacity] peak_temperature", "finite")

case("fraction-above-one", K, run_model(demo(X="1.5")), "[composition] X", "between 0 and 1")
case("exponent-infinite", K, run_model(demo(radial_exponent="inf")), "radial_exponent", "finite")
case("zero-temperature", K, run_model(DEMO.replace('sound_speed = "20 km/s"',
                                                   'temperature = "0 K"')),
     "[gas] temperature", "positive")
case("trailing-words-in-value", K, run_model(demo(mass='"50 Msun please"')), "[star] mass")
case("gaunt-ratio-wrong-dimension", K, run_model(demo(
    law='"kramers"\ngaunt_guillotine_ratio = "2 K"')), "gaunt_guillotine_ratio")
case("photosphere-half-anchor", K, run_model(BUMP.replace(
    'photosphere_temperature = "5e4 K"\n', "")), "photosphere_temperature")
case("base-anchor-without-radius", K, run_model(BUMP.replace(
    'photosphere_luminosity = "2e5 Lsun"\nphotosphere_temperature = "5e4 K"\n', "")),
     "under-specified", "[star] radius")
case("diffusion-radius-inside-schwarzschild", K, run_model(BUMP.replace(
    'mass = "10 Msun"', 'mass = "10 Msun"\nradius = "10 km"').replace(
    'base_temperature = "1e6 K"\n', "")), "[star] radius", "Schwarzschild")
case("empty-table-path", K, run_model(demo(law='"table"\npath = ""')), "[opacity] path")

# --- kind: opacity tables named by a model -----------------------------------------------------
K = "opacity table"
case("table-missing", K, run_model(demo(law='"table"\npath = "nope.txt"')), "nope.txt",
     "no such file")
case("table-is-directory", K, run_model(demo(law='"table"\npath = "."')), "directory")


def _not_a_table(c):
    c.write("t.txt", "hello world\n")
    return ["run", c.model(demo(law='"table"\npath = "t.txt"'))]


case("table-not-a-table", K, _not_a_table, "t.txt", "not an opacity table")


def _small_table(c):
    # A valid table that covers only 3.8 <= log10 T <= 3.95: nowhere near a diffusion
    # model's photosphere (5e4 K) or base (1e6 K).
    rows = ["   -8.0  -7.0  -6.0  -5.0"]
    rows += [f"{t:.2f}  -0.4  -0.4  -0.4  -0.4" for t in (3.8, 3.85, 3.9, 3.95)]
    c.write("small.txt", "\n".join(rows) + "\n")
    text = re.sub(r'law = "bump".*?reference_density = "1e-10 g/cm3"\n',
                  'law = "table"\npath = "small.txt"\n', BUMP, flags=re.S)
    return ["check", c.model(text)]


case("table-off-range-check", K, _small_table, "small.txt")

# --- kind: a valid model without a solution (the one kind that solves: ~0.1 s) -------------
case("no-solution-prints-one-line", "no solution",
     lambda c: ["run", c.model(drop_table(DEMO, "porosity")), "-o", str(c.dir / "out.h5")],
     "no solution", "unbound")

# --- kind: command line syntax ----------------------------------------------------------------
K = "command line"
case("unknown-command", K, lambda c: ["frobnicate"], "frobnicate")
case("set-unknown-key", K, lambda c: ["run", c.model(DEMO), "--set", "star.lumi=3e6 Lsun"],
     "--set star.lumi=3e6 Lsun", 'unknown key "lumi"', 'did you mean "luminosity"')
case("set-value-without-unit", K, lambda c: ["run", c.model(DEMO), "--set",
                                             "star.luminosity=3e6"],
     "--set star.luminosity=3e6", "unit")
case("set-without-equals", K, lambda c: ["run", c.model(DEMO), "--set", "numerics.rtol"],
     "--set numerics.rtol", "section.key=value")
case("set-two-dots", K, lambda c: ["run", c.model(DEMO), "--set", "star.mass.x=1"],
     "--set star.mass.x=1", "one dot")
case("run-given-a-sweep-file", K, lambda c: ["run", c.write(
    "sweep.toml", '[sweep]\nbase = "model.toml"\n[[axis]]\nkey = "star.mass"\n'
                  'values = ["50 Msun"]\n')], "sweep.toml", "this is a sweep file",
     "windsolve sweep")
case("sweep-given-a-model-file", K, lambda c: ["sweep", c.model(DEMO), "-o",
                                               str(c.dir / "s.h5")],
     "this is a model file", "windsolve run")
case("command-near-miss", K, lambda c: ["rnu"], "rnu", 'did you mean "run"')
case("no-command", K, lambda c: [], "command")
case("unknown-option", K, lambda c: ["run", "--fast"], "--fast")
case("extra-argument", K, lambda c: ["check", c.model(DEMO), "extra"], "extra")
case("option-without-value", K, lambda c: ["run", c.model(DEMO), "-o"], "-o")
case("missing-required-option", K, lambda c: ["tabulate", c.model(BUMP)], "-o")
case("bad-choice", K, lambda c: ["family", c.model(BUMP), "--scan", "temperature",
                                 "--from", "1", "--to", "2"], "--scan", "temperature")
case("match-unknown-quantity", K, lambda c: ["match", c.model(DEMO), "--key", "star.luminosity",
                                             "--from", "3e6 Lsun", "--to", "6e6 Lsun",
                                             "--observed", c.csv(OBSERVED),
                                             "--quantity", "fwhn"],
     "--quantity", "fwhn", 'did you mean "fwhm"')
case("int-option-not-int", K, lambda c: ["lines", c.result(), "--emissivity-power", "two"],
     "--emissivity-power", "two")
case("float-option-not-float", K, lambda c: ["lines", c.result(), "--hwzi-fraction", "half"],
     "--hwzi-fraction", "half")

# --- kind: tabulate sizes and grids -------------------------------------------------------------
K = "tabulate"


def tab(*options):
    return lambda c: ["tabulate", c.model(BUMP), "-o", str(c.dir / "table.txt"), *options]


case("tabulate-huge-num", K, tab("--log-t", "3.8", "7.0", "100000000"), "--log-t", "100000000")
case("tabulate-huge-num-exponent", K, tab("--log-t", "3.8", "7.0", "1e8"), "--log-t")
case("tabulate-huge-grid", K, tab("--log-t", "3.8", "7.0", "5000", "--log-r", "-8", "1", "5000"),
     "nodes")
case("tabulate-num-too-small", K, tab("--log-t", "3.8", "7.0", "3"), "--log-t", "at least 4")
case("tabulate-num-fraction", K, tab("--log-t", "3.8", "7.0", "10.5"), "--log-t", "whole number")
case("tabulate-start-above-stop", K, tab("--log-t", "7.0", "3.8", "65"), "--log-t")
case("tabulate-nan", K, tab("--log-t", "nan", "7.0", "65"), "--log-t")
case("tabulate-not-log", K, tab("--log-t", "3.8", "7000", "65"), "log10")
case("tabulate-words", K, tab("--log-r", "low", "high", "19"), "--log-r")
case("tabulate-two-values", K, tab("--log-t", "3.8", "7.0"), "--log-t")
case("tabulate-table-law", K, lambda c: ["tabulate", c.model(demo(law='"table"\npath = "t.txt"')),
                                         "-o", str(c.dir / "x.txt")], "table")
case("tabulate-output-dir-missing", K, lambda c: ["tabulate", c.model(BUMP), "-o",
                                                  str(c.dir / "no" / "t.txt")], "does not exist")

# --- kind: family options ------------------------------------------------------------------------
K = "family"


def fam(*options, text=BUMP):
    return lambda c: ["family", c.model(text), "--scan", "photosphere_temperature", *options]


case("family-huge-num", K, fam("--from", "2e4", "--to", "2e5", "--num", "100000000"), "--num",
     "100000000")
case("family-huge-num-exponent", K, fam("--from", "2e4", "--to", "2e5", "--num", "1e8"), "--num")
case("family-num-one", K, fam("--from", "2e4", "--to", "2e5", "--num", "1"), "--num")
case("family-negative-from", K, fam("--from", "-2e4", "--to", "2e5"), "--from")
case("family-nan-to", K, fam("--from", "2e4", "--to", "nan"), "--to")
case("family-inf-to", K, fam("--from", "2e4", "--to", "inf"), "--to")
case("family-wrong-unit", K, fam("--from", "2e4 km/s", "--to", "2e5 K"), "--from", "temperature")
case("family-words", K, fam("--from", "hot", "--to", "2e5"), "--from", "hot")
case("family-rate-in-mass", K, lambda c: ["family", c.model(BUMP), "--scan", "mass_loss_rate",
                                          "--from", "1e-5 Msun", "--to", "1e-4 Msun/yr"],
     "--from", "solMass / yr")
case("family-base-anchored", K, fam("--from", "2e4", "--to", "2e5", text=BUMP.replace(
    'photosphere_luminosity = "2e5 Lsun"\nphotosphere_temperature = "5e4 K"\n', "").replace(
    'mass = "10 Msun"', 'mass = "10 Msun"\nradius = "1 Rsun"\nluminosity = "2e5 Lsun"')),
     "photosphere")
case("family-isothermal-model", K, fam("--from", "2e4", "--to", "2e5", text=DEMO),
     "photosphere")
case("family-output-dir-missing", K, lambda c: ["family", c.model(BUMP), "--scan",
                                                "photosphere_temperature", "--from", "2e4",
                                                "--to", "2e5", "-o", str(c.dir / "no" / "f.h5")],
     "does not exist")

# --- kind: line options (lines, compare, match) ---------------------------------------------------
K = "line options"


def lines_with(*options):
    return lambda c: ["lines", c.result(), *options]


case("turbulence-faster-than-light", K, lines_with("--turbulence", "1e6 km/s"), "--turbulence",
     "speed of light")
case("turbulence-light-speed", K, lines_with("--turbulence", "3e5 km/s"), "--turbulence",
     "speed of light")
case("turbulence-no-unit", K, lines_with("--turbulence", "20"), "--turbulence", "km/s")
case("turbulence-wrong-unit", K, lines_with("--turbulence", "20 K"), "--turbulence", "speed")
case("turbulence-negative", K, lines_with("--turbulence", "-5 km/s"), "--turbulence")
case("turbulence-nan", K, lines_with("--turbulence", "nan km/s"), "--turbulence")
case("resolution-faster-than-light", K, lines_with("--resolution", "1e6 km/s"), "--resolution",
     "speed of light")
case("resolution-power-one", K, lines_with("--resolution", "1"), "--resolution",
     "speed of light")
case("resolution-power-zero", K, lines_with("--resolution", "0"), "--resolution")
case("resolution-words", K, lines_with("--resolution", "high"), "--resolution")
case("resolution-wrong-unit", K, lines_with("--resolution", "30 K"), "--resolution", "speed")
case("emissivity-power-three", K, lines_with("--emissivity-power", "3"), "--emissivity-power")
case("hwzi-fraction-above-one", K, lines_with("--hwzi-fraction", "1.5"), "--hwzi-fraction")
case("edge-depth-zero", K, lines_with("--edge-depth", "0"), "--edge-depth")
case("line-strength-negative", K, lines_with("--line-strength", "-1"), "--line-strength")
case("line-strength-nan", K, lines_with("--line-strength", "nan"), "--line-strength")
case("lines-output-suffix", K, lines_with("-o", "line.txt"), "line.txt", ".csv")
case("compare-turbulence-faster-than-light", K, lambda c: [
    "compare", c.result(), c.csv(OBSERVED), "--turbulence", "1e6 km/s"], "--turbulence",
     "speed of light")

# --- kind: match options -------------------------------------------------------------------------
K = "match"


def match(key, start, stop, observed=OBSERVED, text=DEMO, *more):
    return lambda c: ["match", c.model(text), "--key", key, "--from", start, "--to", stop,
                      "--observed", c.csv(observed), *more]


case("match-key-near-miss", K, match("star.lumnosity", "3e6 Lsun", "6e6 Lsun"),
     'did you mean "star.luminosity"')
case("match-string-key", K, match("name", "a", "b"), "--key", "name")
case("match-from-words", K, match("star.luminosity", "bright", "6e6 Lsun"), "--from", "bright")
case("match-no-unit", K, match("star.luminosity", "3e6", "6e6"), "--from", "Lsun")
case("match-wrong-dimension", K, match("star.luminosity", "3 km/s", "6 km/s"), "--from",
     "luminosity")
case("match-mixed-dimensions", K, match("star.luminosity", "3e6 Lsun", "6 km/s"), "--to")
case("match-nan", K, match("star.luminosity", "nan Lsun", "6e6 Lsun"), "--from", "finite")
case("match-negative", K, match("star.mass", "-5 Msun", "60 Msun"), "--from", "positive")
case("match-empty-range", K, match("star.luminosity", "3e6 Lsun", "3e6 Lsun"), "range")
case("match-emissivity-not-int", K, lambda c: [
    "match", c.model(DEMO), "--key", "star.luminosity", "--from", "3e6 Lsun", "--to", "6e6 Lsun",
    "--observed", c.csv(OBSERVED), "--emissivity-power", "2.5"], "--emissivity-power", "2.5")
case("match-no-such-measurement", K, match("star.luminosity", "3e6 Lsun", "6e6 Lsun",
                                           HEADER + "A,fwhm,-,500,50,km/s\n"),
     "terminal_velocity")

# --- kind: observed-widths CSV -------------------------------------------------------------
K = "observed CSV"


def compare_csv(text):
    return lambda c: ["compare", c.result(), c.csv(text)]


case("csv-missing", K, lambda c: ["compare", c.result(), str(c.dir / "obs.csv")], "obs.csv",
     "no such file")
case("csv-directory", K, lambda c: ["compare", c.result(), str(c.dir)], "directory")
case("csv-not-utf8", K, lambda c: ["compare", c.result(), c.write(
    "observed.csv", (HEADER + "Caf\u00e9,fwhm,-,500,50,km/s\n").encode("latin-1"))], "UTF-8")
case("csv-empty", K, compare_csv(""), "no header")
case("csv-header-only", K, compare_csv(HEADER), "no measurements")
case("csv-missing-column", K, compare_csv("object,quantity,line,value,unit\nA,fwhm,-,5,km/s\n"),
     "missing uncertainty")
case("csv-wrong-header", K, compare_csv("name,what,line,value,sigma,unit\n"), "header")
case("csv-too-few-fields", K, compare_csv(HEADER + "A,fwhm,-,500,km/s\n"), "line 2", "fields")
case("csv-unknown-quantity", K, compare_csv(HEADER + "A,fwmh,-,500,50,km/s\n"),
     'did you mean "fwhm"')
case("csv-nan-value", K, compare_csv(HEADER + "A,fwhm,-,nan,50,km/s\n"), "line 2", "value")
case("csv-inf-value", K, compare_csv(HEADER + "A,fwhm,-,inf,50,km/s\n"), "line 2", "value")
case("csv-words-value", K, compare_csv(HEADER + "A,fwhm,-,wide,50,km/s\n"), "value", "wide")
case("csv-nan-uncertainty", K, compare_csv(HEADER + "A,fwhm,-,500,nan,km/s\n"), "uncertainty")
case("csv-zero-uncertainty", K, compare_csv(HEADER + "A,fwhm,-,500,0,km/s\n"), "uncertainty")
case("csv-negative-fwhm", K, compare_csv(HEADER + "A,fwhm,-,-500,50,km/s\n"), "fwhm",
     "positive")
case("csv-positive-edge", K, compare_csv(HEADER + "A,edge_velocity,-,1500,50,km/s\n"),
     "edge_velocity", "negative")
case("csv-faster-than-light", K, compare_csv(HEADER + "A,fwhm,-,4e5,50,km/s\n"),
     "speed of light")
case("csv-unit-not-speed", K, compare_csv(HEADER + "A,fwhm,-,500,50,km\n"), "km", "speed")
case("csv-not-a-unit", K, compare_csv(HEADER + "A,fwhm,-,500,50,furlongs\n"), "furlongs")
case("csv-empty-unit", K, compare_csv(HEADER + "A,fwhm,-,500,50,\n"), "unit")
case("csv-unclosed-quote", K, compare_csv(HEADER + '"A,fwhm,-,500,50,km/s\nB,fwhm,-,5,1,km/s\n'),
     "line 2")
case("csv-several-objects", K, compare_csv(HEADER + "A,fwhm,-,500,50,km/s\n"
                                                    "B,fwhm,-,500,50,km/s\n"), "--object")
case("csv-object-not-present", K, lambda c: ["compare", c.result(), c.csv(OBSERVED), "--object",
                                             "Calder Var B"], "Calder Var B",
     'did you mean "Calder Var A (invented)"')


# -- running a case -----------------------------------------------------------------------------

def files_under(directory):
    return sorted(str(p.relative_to(directory)) for p in Path(directory).rglob("*"))


def problems(code, out, err, warned, before, after, fragments=()):
    """Why a run is not a clean one-line exit 2 ([] when it is)."""
    found = []
    if "Traceback" in err or "Traceback" in out:
        found.append("traceback")
    if code != EXIT_BAD_INPUT:
        found.append(f"exit {code}")
    lines = err.splitlines()
    if len(lines) != 1:
        found.append(f"{len(lines)} stderr lines")
    elif not lines[0].startswith("windsolve: error: ") or not err.endswith("\n"):
        found.append("stderr line not 'windsolve: error: ...'")
    if warned:
        found.append(f"{len(warned)} warning(s): {warned[0]}")
    if out:
        found.append("stdout not empty")
    if after != before:
        found.append(f"files written: {sorted(set(after) - set(before))}")
    message = lines[0] if len(lines) == 1 else err
    if "np.float64" in message or "np.int64" in message or "<Quantity" in message:
        found.append("numpy or Quantity repr in the message")
    missing = [f for f in fragments if f not in message]
    if missing:
        found.append(f"message lacks {missing}")
    return found


def run_case(c, ctx, capture=None):
    """Run one case in ``ctx.dir``; (code, out, err, warnings, files before, after)."""
    argv = [str(a) for a in c.argv(ctx)]
    before = files_under(ctx.dir)
    cwd = os.getcwd()
    out, err = io.StringIO(), io.StringIO()
    os.chdir(ctx.dir)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            if capture is None:
                with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                    code = _call_main(argv, err)
            else:
                code = _call_main(argv, sys.stderr)
    finally:
        os.chdir(cwd)
    if capture is not None:
        captured = capture.readouterr()
        out_text, err_text = captured.out, captured.err
    else:
        out_text, err_text = out.getvalue(), err.getvalue()
    warned = [f"{w.category.__name__}: {w.message}" for w in caught]
    return code, out_text, err_text, warned, before, files_under(ctx.dir)


CASE_SECONDS = 60  # a case still running after this has tried to do the impossible


class CaseTimeout(Exception):
    pass


def _alarm(signum, frame):
    raise CaseTimeout(f"still running after {CASE_SECONDS} s")


def _call_main(argv, err):
    alarm = hasattr(signal, "SIGALRM")
    if alarm:
        previous = signal.signal(signal.SIGALRM, _alarm)
        signal.alarm(CASE_SECONDS)
    try:
        return cli.main(argv)
    except SystemExit as exit_:
        return exit_.code
    except CaseTimeout as error:
        print(f"timeout: {error}", file=err)
        return "timeout"
    except Exception:  # noqa: BLE001 - a traceback is what the survey counts
        print(traceback.format_exc(), file=err, end="")
        return "traceback"
    finally:
        if alarm:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, previous)


# -- the tests ----------------------------------------------------------------------------------

@pytest.fixture(scope="session")
def demo_file(request):
    """The solved demo file (conftest.py's demo_h5), fetched only by the cases that use it."""
    return lambda: request.getfixturevalue("demo_h5")


@pytest.mark.parametrize("c", CASES, ids=[c.id for c in CASES])
def test_bad_input_one_line(c, tmp_path, capsys, demo_file):
    ctx = Ctx(tmp_path, demo_file)
    code, out, err, warned, before, after = run_case(c, ctx, capture=capsys)
    assert problems(code, out, err, warned, before, after, c.fragments) == [], err


def test_case_ids_unique():
    assert len({c.id for c in CASES}) == len(CASES)


# -- real subprocesses: nothing escapes main -------------------------------------------------

SUBPROCESS_CASES = ["table-given-as-number", "mass-overflows-cgs", "unknown-option",
                    "tabulate-huge-num", "family-huge-num"]


@pytest.mark.parametrize("case_id", SUBPROCESS_CASES)
def test_bad_input_subprocess(case_id, tmp_path):
    c = next(c for c in CASES if c.id == case_id)
    ctx = Ctx(tmp_path, None)
    argv = [str(a) for a in c.argv(ctx)]
    before = files_under(tmp_path)
    env = dict(os.environ, MPLBACKEND="Agg")
    proc = subprocess.run([sys.executable, "-m", "windsolve", *argv], capture_output=True,
                          text=True, cwd=tmp_path, env=env, timeout=120)
    assert problems(proc.returncode, proc.stdout, proc.stderr, [], before,
                    files_under(tmp_path), c.fragments) == [], proc.stderr


def test_lines_turbulence_faster_than_light_subprocess(tmp_path, demo_h5):
    proc = subprocess.run([sys.executable, "-m", "windsolve", "lines", str(demo_h5),
                           "--turbulence", "1e6 km/s"], capture_output=True, text=True,
                          cwd=tmp_path, timeout=120)
    assert problems(proc.returncode, proc.stdout, proc.stderr, [], [], [],
                    ("--turbulence", "speed of light")) == [], proc.stderr


# -- unusual but valid input gets a correct answer -------------------------------------------

def _main(argv, capsys):
    code = cli.main([str(a) for a in argv])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    return code, captured.out, captured.err


def test_check_without_luminosity(tmp_path, capsys):
    """L0 = 0 is a valid model (no radiation force: Parker's wind); check reports it."""
    model = tmp_path / "model.toml"
    model.write_text(demo(luminosity='"0 Lsun"'), encoding="utf-8")
    code, out, err = _main(["check", model], capsys)
    assert (code, err) == (0, "")
    # With L0 = 0, Gamma = 0 and r_c = GM/(2 a^2): for 50 Msun, a = 20 km/s and
    # R0 = 100 Rsun (G, Msun, Rsun from CODATA/IAU, to 4 digits) that is 119.2 R0.
    expected = 6.6743e-8 * 50 * 1.98841e33 / (2 * 2e6**2) / (100 * 6.957e10)
    rows = {line[:51].strip(): line[51:].split() for line in out.splitlines()}
    assert float(rows["expected sonic radius"][0]) == pytest.approx(expected, rel=1e-3)
    assert float(rows["Gamma at the base (that opacity)"][0]) == 0.0


def test_observed_csv_with_byte_order_mark(tmp_path, capsys, demo_h5):
    """A spreadsheet's UTF-8 CSV starts with a byte-order mark: read it as if it did not."""
    csv = tmp_path / "observed.csv"
    csv.write_text("\ufeff" + HEADER + "Calder Var A (invented),terminal_velocity,-,450,40,km/s\n",
                   encoding="utf-8")
    code, out, err = _main(["compare", str(demo_h5), csv], capsys)
    assert (code, err) == (0, ""), err
    assert "chi2 = " in out


def test_tabulate_num_written_with_exponent(tmp_path, capsys):
    """NUM = 6.5e1 is the whole number 65."""
    model = tmp_path / "model.toml"
    model.write_text(BUMP, encoding="utf-8")
    out = tmp_path / "t.txt"
    code, stdout, err = _main(["tabulate", model, "-o", out, "--log-t", "3.8", "7.0", "6.5e1",
                               "--log-r", "-8", "1", "1e1"], capsys)
    assert (code, err) == (0, "")
    assert "65 log10 T x 10 log10 R" in stdout


def test_match_linear_range_prints_plain_numbers(tmp_path, capsys):
    """A range from 0 is scanned linearly; its values reach the model as plain numbers,
    and whatever the answer, no message shows np.float64(...)."""
    model = tmp_path / "model.toml"
    model.write_text(DEMO, encoding="utf-8")
    csv = tmp_path / "observed.csv"
    csv.write_text(OBSERVED, encoding="utf-8")
    code, out, err = _main(["match", model, "--key", "star.luminosity", "--from", "0 Lsun",
                            "--to", "6e6 Lsun", "--observed", csv], capsys)
    assert code in (0, 2)
    assert "np.float64" not in out + err
    if code == 2:
        assert len(err.splitlines()) == 1 and err.startswith("windsolve: error: ")
    else:
        assert "star.luminosity = " in out


@pytest.mark.parametrize("argv", [["--help"], ["--version"], ["run", "--help"]])
def test_help_and_version_exit_zero(argv, capsys):
    code, out, err = _main(argv, capsys)
    assert (code, err) == (0, "")
    assert out
