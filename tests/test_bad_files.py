"""Tier (e), the survey of damaged result files: one line and exit 2, or a correct answer.

Every command that reads an HDF5 file (``inspect``, ``inspect --csv``, ``plot``,
``lines``, ``compare``) is run on damaged copies of three real files: a solved
demo result, a two-member family and a two-model sweep.  Each damage is one
kind of bad file (grouped by the ``kind`` field): a file that is not HDF5 or is
empty or truncated, a missing group or dataset, a group where a dataset should
be, a dataset of the wrong shape, type or length, a ``units`` attribute that is
not a unit or not of the right dimension (including a velocity unit that makes
the wind faster than light), NaN or infinite values, a radius that does not
increase, an unknown or contradicting model-kind stamp, a result given where a
family or sweep is expected and the reverse.  Each case goes through
``windsolve.cli.main`` and must exit 2 with exactly one stderr line
``windsolve: error: ...`` naming the file (and the dataset or attribute), with
nothing else printed and nothing written (``plot`` would write FILE.png).

A file written by another program may lack what windsolve itself does not
need: an empty, incomplete or unreadable ``model_toml`` attribute, no model
stamp, a profile in other (correct) units.  Those must be read like a file
without the attribute, giving the same answer as the intact file.

``benchmarks/bad_input_survey.py`` counts these cases too.
"""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

from windsolve import cli, demo_model_path

sys.path.insert(0, str(Path(__file__).parent))
from test_bad_input import OBSERVED, Case, files_under, problems, run_case  # noqa: E402

BUMP = Path(__file__).parent.parent / "configs" / "bump_wind.toml"
TERMINAL_ONLY = ("object,quantity,line,value,uncertainty,unit\n"
                 "Calder Var A (invented),terminal_velocity,-,450,40,km/s\n")
BAD = "bad.h5"


# -- the three intact files --------------------------------------------------------------

class Sources:
    """The intact result, family and sweep files, made once in ``directory``."""

    def __init__(self, directory, made=None):
        self.dir = Path(directory)
        self.made = dict(made or {})

    def get(self, which):
        if which not in self.made:
            self.made[which] = getattr(self, f"_make_{which}")(self.dir / f"{which}.h5")
        return self.made[which]

    @staticmethod
    def _make_family(path):
        from windsolve import load_model
        from windsolve.family import solve_family
        solve_family(load_model(BUMP), "photosphere_temperature", 4e4, 6e4, 2).to_hdf5(path)
        return path

    @staticmethod
    def _make_sweep(path):
        from windsolve.sweep import load_sweep, run_sweep
        toml = path.with_suffix(".toml")
        toml.write_text(f'[sweep]\nbase = "{demo_model_path()}"\ndesign = "grid"\n'
                        f'[[axis]]\nkey = "star.luminosity"\n'
                        f'values = ["3e6 Lsun", "4e6 Lsun"]\n', encoding="utf-8")
        run_sweep(load_sweep(toml), path, workers=1, quiet=True)
        return path


class Ctx:
    """A case's directory (also its working directory) and the intact files."""

    def __init__(self, directory, sources):
        self.dir = Path(directory)
        self.sources = sources

    def csv(self, text, name="observed.csv"):
        path = self.dir / name
        path.write_text(text, encoding="utf-8")
        return str(path)

    def damaged(self, which, edit):
        """A copy of the intact ``which`` file as bad.h5, changed by ``edit(h5py.File)``."""
        path = self.dir / BAD
        shutil.copy(self.sources.get(which), path)
        with h5py.File(path, "r+") as f:
            edit(f)
        return str(path)


# -- damages ---------------------------------------------------------------------------------

def delete(name):
    def edit(f):
        del f[name]
    return edit


def replace(name, make):
    """Replace dataset ``name`` by ``make(f, name, old values, old attrs)``."""
    def edit(f):
        old, attrs = f[name][()], dict(f[name].attrs)
        del f[name]
        make(f, name, old, attrs)
    return edit


def with_data(transform, keep_units=True):
    def make(f, name, old, attrs):
        d = f.create_dataset(name, data=transform(old))
        if keep_units:
            d.attrs.update(attrs)
    return make


def as_group(f, name, old, attrs):
    f.create_group(name)


def set_attr(name, key, value):
    def edit(f):
        f[name].attrs[key] = value
    return edit


def del_attr(name, key):
    def edit(f):
        del f[name].attrs[key]
    return edit


def change_values(name, change):
    def edit(f):
        data = f[name][()]
        change(data)
        f[name][...] = data
    return edit


def _nan_at_3(a):
    a[3] = np.nan


def _inf_at_3(a):
    a[3] = np.inf


def _swap_5_6(a):
    a[5], a[6] = a[6], a[5]


def _negative_at_3(a):
    a[3] = -a[3]


def _first_nan(a):
    a[0] = np.nan


def _dangling_link(name):
    def edit(f):
        del f[name]
        f[name] = h5py.SoftLink("/nowhere/velocity")
    return edit


def _empty_profile(f):
    for key in list(f["profile"]):
        del f["profile"][key]
        f["profile"].create_dataset(key, data=np.zeros(0))


def _radius_overflows(f):
    r = f["profile/radius"]
    data = r[()]
    data[-1] = 1e300  # in Rsun: 7e310 cm, beyond float64
    r[...] = data
    r.attrs["units"] = "Rsun"


def _no_rows(f):
    for key in list(f["table"]):
        d = f["table"][key]
        data, attrs = d[()][:0], dict(d.attrs)
        del f["table"][key]
        f["table"].create_dataset(key, data=data)
        f["table"][key].attrs.update(attrs)


def _isothermal_family(f):
    f.attrs["model_toml"] = Path(str(demo_model_path())).read_text(encoding="utf-8")
    f.attrs["model"] = "isothermal"


def _summary_dataset(f):
    del f["summary"]
    f.create_dataset("summary", data=[1.0])


def _first_inf(a):
    a[0] = np.inf


def _summary_units(**units):
    def edit(f):
        import json
        table = json.loads(f["summary"].attrs["units"])
        table.update(units)
        f["summary"].attrs["units"] = json.dumps(table)
    return edit


P = "profile/"
RESULT_DAMAGES = {
    "result: structure": [
        ("no-summary-group", delete("summary"), "/summary"),
        ("no-profile-group", delete("profile"), "/profile"),
        ("no-radius", delete(P + "radius"), "radius"),
        ("no-velocity", delete(P + "velocity"), "velocity"),
        ("no-density", delete(P + "density"), "density"),
        ("velocity-is-a-group", replace(P + "velocity", as_group), "velocity", "group"),
        ("radius-is-a-group", replace(P + "radius", as_group), "radius", "group"),
        ("summary-is-a-dataset", _summary_dataset, "/summary"),
        ("velocity-2d", replace(P + "velocity", with_data(lambda a: a.reshape(2, -1))),
         "velocity"),
        ("velocity-scalar", replace(P + "velocity", with_data(lambda a: a[0])), "velocity"),
        ("velocity-text", replace(P + "velocity", with_data(
            lambda a: np.array([str(x) for x in a], dtype=h5py.string_dtype()))), "velocity"),
        ("density-shorter", replace(P + "density", with_data(lambda a: a[:-5])), "density"),
        ("temperature-longer", replace(P + "temperature", with_data(
            lambda a: np.concatenate([a, a[:3]]))), "temperature"),
        ("no-converged-attribute", del_attr("summary", "converged"), "converged"),
        ("no-status-attribute", del_attr("summary", "status"), "status"),
        ("mass-loss-rate-text", set_attr("summary", "mass_loss_rate", "lots"),
         "mass_loss_rate"),
        ("critical-points-no-kind", delete("critical_points/kind"), "critical_points"),
        ("critical-radius-is-a-group", replace("critical_points/radius", as_group),
         "critical_points"),
        ("velocity-complex", replace(P + "velocity", with_data(lambda a: a + 0j)), "velocity"),
        ("velocity-dangling-link", _dangling_link(P + "velocity"), "velocity"),
        ("profile-arrays-empty", _empty_profile, "/profile"),
        ("converged-attribute-text", set_attr("summary", "converged", "yes"), "converged"),
        ("status-attribute-a-number", set_attr("summary", "status", 3), "status"),
        ("message-attribute-a-number", set_attr("summary", "message", 3.5), "message"),
        ("summary-units-a-number", set_attr("summary", "units", 7), "units"),
    ],
    "result: units": [
        ("velocity-units-not-a-unit", set_attr(P + "velocity", "units", "furlongs per fortnight"),
         "velocity", "furlongs"),
        ("velocity-units-empty", set_attr(P + "velocity", "units", ""), "velocity"),
        ("velocity-units-a-number", set_attr(P + "velocity", "units", 3.0), "velocity"),
        ("velocity-units-a-list", set_attr(P + "velocity", "units", ["cm", "s"]), "velocity"),
        ("velocity-units-mass", set_attr(P + "velocity", "units", "g"), "velocity", "speed"),
        ("radius-units-speed", set_attr(P + "radius", "units", "km/s"), "radius"),
        ("density-units-length", set_attr(P + "density", "units", "cm"), "density"),
        ("velocity-units-faster-than-light", set_attr(P + "velocity", "units", "km/s"),
         "velocity", "speed of light"),
        ("velocity-units-metres", set_attr(P + "velocity", "units", "m / s"),
         "units attribute"),
        ("density-units-kg-per-m3", set_attr(P + "density", "units", "kg / m3"),
         "units attribute"),
        ("radius-units-km", set_attr(P + "radius", "units", "km"), "units attribute"),
        ("mass-loss-rate-units-msun-per-yr", _summary_units(mass_loss_rate="solMass / yr"),
         "mass_loss_rate"),
        ("summary-units-not-json", set_attr("summary", "units", "{mass_loss_rate: g/s"),
         "units"),
        ("summary-unit-a-number", _summary_units(mass_loss_rate=5), "mass_loss_rate"),
        ("summary-units-not-a-unit", _summary_units(mass_loss_rate="bananas"),
         "mass_loss_rate", "bananas"),
        ("summary-units-wrong-dimension", _summary_units(terminal_velocity="g"),
         "terminal_velocity"),
        ("summary-terminal-faster-than-light", _summary_units(terminal_velocity="km/s"),
         "terminal_velocity", "speed of light"),
    ],
    "result: values": [
        ("velocity-nan", change_values(P + "velocity", _nan_at_3), "velocity", "NaN"),
        ("density-inf", change_values(P + "density", _inf_at_3), "density"),
        ("radius-nan", change_values(P + "radius", _nan_at_3), "radius"),
        ("radius-not-increasing", change_values(P + "radius", _swap_5_6), "radius",
         "increas"),
        ("density-negative", change_values(P + "density", _negative_at_3), "density"),
        ("velocity-negative", change_values(P + "velocity", _negative_at_3), "velocity"),
        ("temperature-negative", change_values(P + "temperature", _negative_at_3),
         "temperature"),
        ("opacity-nan", change_values(P + "opacity", _nan_at_3), "opacity"),
        ("opacity-negative", change_values(P + "opacity", _negative_at_3), "opacity"),
        ("eddington-factor-inf", change_values(P + "eddington_factor", _inf_at_3),
         "eddington_factor"),
        ("terminal-velocity-inf", set_attr("summary", "terminal_velocity", np.inf),
         "terminal_velocity"),
        ("mass-loss-rate-negative", set_attr("summary", "mass_loss_rate", -1e21),
         "mass_loss_rate"),
        ("critical-radius-nan", change_values("critical_points/radius", _first_nan),
         "critical_points/radius"),
        ("radius-overflows-cgs", _radius_overflows, "radius"),
    ],
    "result: kind": [
        ("kind-stamp-unknown", set_attr("/", "model", "banana"), "banana"),
        ("kind-stamp-contradicts-model", set_attr("/", "model", "diffusion"), "diffusion"),
        ("kind-stamp-a-number", set_attr("/", "model", 7), "model"),
    ],
}
# Damages only compare cares about (a result may lack v_inf; comparing it with one may not).
COMPARE_DAMAGES = [
    ("terminal-velocity-missing", del_attr("summary", "terminal_velocity"),
     "terminal_velocity"),
    ("terminal-velocity-nan", set_attr("summary", "terminal_velocity", np.nan),
     "terminal_velocity"),
]
RESULT_COMMANDS = {
    "inspect": lambda c, p: ["inspect", p],
    "plot": lambda c, p: ["plot", p],
    "lines": lambda c, p: ["lines", p],
    "compare": lambda c, p: ["compare", p, c.csv(OBSERVED)],
}

FAMILY_DAMAGES = [
    ("scan-unknown", set_attr("/", "family_scan", "banana"), "family_scan", "banana"),
    ("scan-attribute-a-number", set_attr("/", "family_scan", 3), "family_scan"),
    ("no-table", delete("table"), "/table"),
    ("no-scan-column", delete("table/photosphere_temperature"), "photosphere_temperature"),
    ("no-status", delete("table/status"), "status"),
    ("no-converged", delete("table/converged"), "converged"),
    ("column-shorter", replace("table/mass_loss_rate", with_data(lambda a: a[:-1])),
     "mass_loss_rate"),
    ("column-is-a-group", replace("table/terminal_velocity", as_group), "terminal_velocity"),
    ("column-2d", replace("table/mass_loss_rate", with_data(lambda a: a.reshape(1, -1))),
     "mass_loss_rate"),
    ("units-not-a-unit", set_attr("table/mass_loss_rate", "units", "bananas"),
     "mass_loss_rate", "bananas"),
    ("units-wrong-dimension", set_attr("table/terminal_velocity", "units", "g"),
     "terminal_velocity"),
    ("faster-than-light", set_attr("table/terminal_velocity", "units", "km/s"),
     "terminal_velocity", "speed of light"),
    ("nan-in-converged-member", change_values("table/photosphere_radius", _first_nan),
     "photosphere_radius"),
    ("kind-stamp-unknown", set_attr("/", "model", "banana"), "banana"),
    ("status-numbers", replace("table/status", with_data(lambda a: np.zeros(len(a)))),
     "status"),
    ("no-rows", _no_rows, "/table"),
    ("model-isothermal", _isothermal_family, "model_toml"),
    ("extra-group-in-table", lambda f: f["table"].create_group("notes"), "/table/notes"),
    ("photosphere-radius-units-rsun", set_attr("table/photosphere_radius", "units", "Rsun"),
     "photosphere_radius"),
    ("extra-column-shorter", lambda f: f["table"].create_dataset("x", data=[1.0]), "/table/x"),
]
# Damages of a Model B (diffusion) result, whose /summary states its photosphere.
DIFFUSION_DAMAGES = [
    ("photosphere-radius-units-rsun", _summary_units(photosphere_radius="solRad"),
     "photosphere_radius"),
    ("photosphere-luminosity-units-lsun", _summary_units(photosphere_luminosity="solLum"),
     "photosphere_luminosity"),
    ("optical-depth-negative", change_values(P + "optical_depth", _negative_at_3),
     "optical_depth"),
]

FAMILY_COMMANDS = {
    "inspect": lambda c, p: ["inspect", p],
    "csv": lambda c, p: ["inspect", p, "--csv", str(c.dir / "table.csv")],
    "plot": lambda c, p: ["plot", p],
}

SWEEP_DAMAGES = [
    ("no-axes-attribute", del_attr("/", "axes"), "axes"),
    ("axes-not-json", set_attr("/", "axes", "[star.luminosity"), "axes"),
    ("axes-not-a-list", set_attr("/", "axes", '{"a": 1}'), "axes"),
    ("axis-not-in-table", set_attr("/", "axes", '["star.mass"]'), "star.mass"),
    ("no-table", delete("table"), "/table"),
    ("no-converged", delete("table/converged"), "converged"),
    ("no-terminal-velocity", delete("table/terminal_velocity"), "terminal_velocity"),
    ("no-mass-loss-rate", delete("table/mass_loss_rate"), "mass_loss_rate"),
    ("column-shorter", replace("table/mass_loss_rate", with_data(lambda a: a[:-1])),
     "mass_loss_rate"),
    ("column-is-a-group", replace("table/terminal_velocity", as_group), "terminal_velocity"),
    ("axis-column-text", replace("table/star.luminosity", with_data(
        lambda a: np.array(["x"] * len(a), dtype=h5py.string_dtype()))), "star.luminosity"),
    ("units-not-a-unit", set_attr("table/terminal_velocity", "units", "bananas"),
     "terminal_velocity", "bananas"),
    ("units-wrong-dimension", set_attr("table/terminal_velocity", "units", "g"),
     "terminal_velocity"),
    ("faster-than-light", set_attr("table/terminal_velocity", "units", "km/s"),
     "terminal_velocity", "speed of light"),
    ("nan-in-converged-row", change_values("table/mass_loss_rate", _first_nan),
     "mass_loss_rate"),
    ("axis-inf", change_values("table/star.luminosity", _first_inf), "star.luminosity"),
    ("converged-text", replace("table/converged", with_data(
        lambda a: np.array(["yes"] * len(a), dtype=h5py.string_dtype()))), "converged"),
    ("kind-stamp-unknown", set_attr("/", "model", "banana"), "banana"),
    ("extra-group-in-table", lambda f: f["table"].create_group("notes"), "/table/notes"),
    ("no-rows", _no_rows, "/table"),
]
SWEEP_COMMANDS = {
    "inspect": lambda c, p: ["inspect", p],
    "csv": lambda c, p: ["inspect", p, "--csv", str(c.dir / "table.csv")],
    "plot": lambda c, p: ["plot", p],
    "compare": lambda c, p: ["compare", p, c.csv(TERMINAL_ONLY)],
}


# -- files that are not windsolve files at all ---------------------------------------------------

def _text_file(c):
    (c.dir / BAD).write_text("radius,velocity\n1,2\n", encoding="utf-8")
    return str(c.dir / BAD)


def _empty_file(c):
    (c.dir / BAD).write_bytes(b"")
    return str(c.dir / BAD)


def _empty_hdf5(c):
    with h5py.File(c.dir / BAD, "w"):
        pass
    return str(c.dir / BAD)


def _hdf5_with_other_data(c):
    with h5py.File(c.dir / BAD, "w") as f:
        f.create_dataset("images/frame0", data=np.zeros((4, 4)))
    return str(c.dir / BAD)


def _truncated(c):
    data = Path(c.sources.get("result")).read_bytes()
    (c.dir / BAD).write_bytes(data[: len(data) // 2])
    return str(c.dir / BAD)


def _directory(c):
    (c.dir / BAD).mkdir()
    return str(c.dir / BAD)


def _missing(c):
    return str(c.dir / BAD)


def _family_as_result(c):
    return c.damaged("family", lambda f: None)


def _sweep_as_result(c):
    return c.damaged("sweep", lambda f: None)


FILE_DAMAGES = [
    ("text-file", _text_file, "HDF5"),
    ("zero-bytes", _empty_file, "HDF5"),
    ("empty-hdf5", _empty_hdf5, "windsolve"),
    ("hdf5-of-another-program", _hdf5_with_other_data, "windsolve"),
    ("truncated-hdf5", _truncated, "truncated"),
    ("a-directory", _directory, "directory"),
    ("no-such-file", _missing, "no such file"),
]
FILE_COMMANDS = dict(RESULT_COMMANDS, csv=FAMILY_COMMANDS["csv"])
WRONG_KIND = [  # (id, file, commands that need another kind, fragment)
    ("family-given-to", _family_as_result, ("lines", "compare"), "family"),
    ("sweep-given-to", _sweep_as_result, ("lines",), "sweep"),
]

CASES = []


def _damage_case(which, edit):
    return lambda c: c.damaged(which, edit)


for kind, damages in RESULT_DAMAGES.items():
    for id, edit, *fragments in damages:
        for verb, argv in RESULT_COMMANDS.items():
            CASES.append(Case(f"{verb}-{id}", kind, (lambda a, m: lambda c: a(c, m(c)))(
                argv, _damage_case("result", edit)), (BAD, *fragments)))
for id, edit, *fragments in DIFFUSION_DAMAGES:
    for verb, argv in RESULT_COMMANDS.items():
        CASES.append(Case(f"{verb}-diffusion-{id}", "result: units", (lambda a, m: lambda c: a(
            c, m(c)))(argv, _damage_case("diffusion", edit)), (BAD, *fragments)))
for id, edit, *fragments in COMPARE_DAMAGES:
    CASES.append(Case(f"compare-{id}", "result: values", (lambda m: lambda c: [
        "compare", m(c), c.csv(OBSERVED)])(_damage_case("result", edit)), (BAD, *fragments)))
for id, edit, *fragments in FAMILY_DAMAGES:
    for verb, argv in FAMILY_COMMANDS.items():
        CASES.append(Case(f"family-{verb}-{id}", "family file", (lambda a, m: lambda c: a(
            c, m(c)))(argv, _damage_case("family", edit)), (BAD, *fragments)))
for id, edit, *fragments in SWEEP_DAMAGES:
    for verb, argv in SWEEP_COMMANDS.items():
        CASES.append(Case(f"sweep-{verb}-{id}", "sweep file", (lambda a, m: lambda c: a(
            c, m(c)))(argv, _damage_case("sweep", edit)), (BAD, *fragments)))
for id, make, *fragments in FILE_DAMAGES:
    for verb, argv in FILE_COMMANDS.items():
        CASES.append(Case(f"{verb}-{id}", "not a result file", (lambda a, m: lambda c: a(
            c, m(c)))(argv, make), (BAD, *fragments)))
for id, make, verbs, *fragments in WRONG_KIND:
    for verb in verbs:
        CASES.append(Case(f"{id}-{verb}", "wrong kind of file", (lambda a, m: lambda c: a(
            c, m(c)))(RESULT_COMMANDS[verb], make), (BAD, *fragments)))


# -- the tests -------------------------------------------------------------------------------------

@pytest.fixture(scope="session")
def sources(tmp_path_factory, demo_h5, bump_h5):
    # the solved demo and bump wind come from conftest.py (solved once per session)
    return Sources(tmp_path_factory.mktemp("intact"), {"result": demo_h5, "diffusion": bump_h5})


@pytest.mark.parametrize("c", CASES, ids=[c.id for c in CASES])
def test_bad_file_one_line(c, tmp_path, capsys, sources):
    ctx = Ctx(tmp_path, sources)
    code, out, err, warned, before, after = run_case(c, ctx, capture=capsys)
    assert problems(code, out, err, warned, before, after, c.fragments) == [], err


def test_case_ids_unique():
    assert len({c.id for c in CASES}) == len(CASES)


# -- real subprocesses: nothing escapes main ------------------------------------------------------

SUBPROCESS_CASES = ["plot-velocity-is-a-group", "lines-velocity-units-faster-than-light",
                    "plot-velocity-nan", "inspect-empty-hdf5", "compare-velocity-units-not-a-unit",
                    "sweep-plot-units-not-a-unit", "family-plot-no-status"]


@pytest.mark.slow
@pytest.mark.parametrize("case_id", SUBPROCESS_CASES)
def test_bad_file_subprocess(case_id, tmp_path, sources):
    c = next(c for c in CASES if c.id == case_id)
    argv = [str(a) for a in c.argv(Ctx(tmp_path, sources))]
    before = files_under(tmp_path)
    env = dict(os.environ, MPLBACKEND="Agg")
    proc = subprocess.run([sys.executable, "-m", "windsolve", *argv], capture_output=True,
                          text=True, cwd=tmp_path, env=env, timeout=120)
    assert problems(proc.returncode, proc.stdout, proc.stderr, [], before,
                    files_under(tmp_path), c.fragments) == [], proc.stderr


@pytest.mark.slow
@pytest.mark.skipif(os.environ.get("HDF5_USE_FILE_LOCKING", "").upper() == "FALSE",
                    reason="HDF5 file locking is switched off")
def test_file_open_for_writing_elsewhere_subprocess(tmp_path):
    """A file another process holds open for writing is locked (HDF5 file locking): one
    line saying so, not "not an HDF5 file"."""
    path = tmp_path / "busy.h5"
    writer = subprocess.Popen([sys.executable, "-c", (
        f"import h5py, sys, time\nf = h5py.File({str(path)!r}, 'w')\n"
        f"f.create_group('summary')\nf.flush()\nprint('open', flush=True)\n"
        f"sys.stdin.read()\n")], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        assert writer.stdout.readline().strip() == "open"
        proc = subprocess.run([sys.executable, "-m", "windsolve", "inspect", str(path)],
                              capture_output=True, text=True, cwd=tmp_path, timeout=120)
    finally:
        writer.communicate("", timeout=60)
    assert problems(proc.returncode, proc.stdout, proc.stderr, [], [], [],
                    ("busy.h5", "open for writing")) == [], proc.stderr


# -- a file with less than windsolve writes is read for what it has -------------------------------

def _run(argv, capsys):
    code = cli.main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _drop_mass(f):
    text = f.attrs["model_toml"]
    kept = [line for line in text.splitlines() if not line.startswith("mass")]
    assert len(kept) == len(text.splitlines()) - 1  # exactly one [star] mass line
    f.attrs["model_toml"] = "\n".join(kept)


MODEL_TOML_DAMAGES = {
    "absent": lambda f: f.attrs.__delitem__("model_toml"),
    "empty": lambda f: f.attrs.__setitem__("model_toml", ""),
    "incomplete": _drop_mass,
    "not-toml": lambda f: f.attrs.__setitem__("model_toml", "[star\nmass = "),
    "a-number": lambda f: f.attrs.__setitem__("model_toml", 5),
    "no-kind-stamp-either": lambda f: (f.attrs.__delitem__("model_toml"),
                                       f.attrs.__delitem__("model")),
}


def _answer(out):
    """A command's output without its first line (which names the file)."""
    return out.splitlines()[1:]


@pytest.mark.parametrize("damage", MODEL_TOML_DAMAGES, ids=list(MODEL_TOML_DAMAGES))
def test_result_without_complete_model_is_read(damage, tmp_path, capsys, sources):
    """lines, compare and plot do not need the model: a file whose model_toml is absent,
    empty, incomplete or not TOML gives the answer the intact file gives."""
    ctx = Ctx(tmp_path, sources)
    intact = str(sources.get("result"))
    observed = ctx.csv(OBSERVED)
    bad = ctx.damaged("result", MODEL_TOML_DAMAGES[damage])
    for argv in (["lines", "{}"], ["lines", "{}", "--pcygni"], ["compare", "{}", observed]):
        want = _run([a.format(intact) for a in argv], capsys)
        got = _run([a.format(bad) for a in argv], capsys)
        assert (got[0], got[2]) == (0, ""), got[2]
        assert _answer(got[1]) == _answer(want[1]) and len(_answer(want[1])) >= 3
    code, out, err = _run(["plot", bad, "-o", tmp_path / "p.png"], capsys)
    assert (code, err) == (0, "") and (tmp_path / "p.png").stat().st_size > 0
    code, out, err = _run(["inspect", bad], capsys)
    assert (code, err) == (0, "") and "velocity" in out


def _only_the_flow(f):
    for key in list(f["profile"]):
        if key not in ("radius", "velocity", "density"):
            del f["profile"][key]
    del f["summary"].attrs["sonic_velocity"]  # the sonic radius without its speed


def test_result_with_only_the_flow_is_read(tmp_path, capsys, sources):
    """A profile of radius, velocity and density alone (all a file from another program
    needs): plot draws the panels it has, lines computes the line."""
    ctx = Ctx(tmp_path, sources)
    bad = ctx.damaged("result", _only_the_flow)
    code, out, err = _run(["plot", bad, "-o", tmp_path / "p.png"], capsys)
    assert (code, err) == (0, ""), err
    assert (tmp_path / "p.png").stat().st_size > 0
    code, out, err = _run(["lines", bad], capsys)
    assert (code, err) == (0, ""), err
    assert "FWHM" in out


def _in_units(name, unit, factor):
    """Store dataset ``name`` in ``unit`` (values times ``factor``): the same data."""
    def edit(f):
        f[name][...] = f[name][()] * factor
        f[name].attrs["units"] = unit
    return edit


def _as_other_programs_write(f):
    """Attributes as one-element arrays and fixed-length byte strings (as h5py writes
    numpy.bytes_, and as many C and Fortran programs write text)."""
    for d in f["profile"].values():
        d.attrs["units"] = np.bytes_(d.attrs["units"])
    s = f["summary"].attrs
    for key in ("converged", "mass_loss_rate", "terminal_velocity", "sonic_radius",
                "sonic_velocity"):
        s[key] = np.array([s[key]])
    s["status"] = np.bytes_(s["status"])
    s["units"] = np.bytes_(s["units"])


def test_result_with_array_and_byte_attributes_is_read(tmp_path, capsys, sources):
    ctx = Ctx(tmp_path, sources)
    bad = ctx.damaged("result", _as_other_programs_write)
    observed = ctx.csv(OBSERVED)
    for argv in (["lines", "{}"], ["compare", "{}", observed]):
        want = _run([a.format(sources.get("result")) for a in argv], capsys)
        got = _run([a.format(bad) for a in argv], capsys)
        assert (got[0], got[2]) == (0, ""), got[2]
        assert _answer(got[1]) == _answer(want[1])


def test_result_in_other_units_gives_the_same_lines(tmp_path, capsys, sources):
    """Profiles in km/s, kg/m3 and Rsun are read in those units (1 km/s = 1e5 cm/s,
    1 kg/m3 = 1e-3 g/cm3, 1 Rsun = 6.957e10 cm, IAU 2015 nominal)."""
    ctx = Ctx(tmp_path, sources)

    def edit(f):
        _in_units("profile/velocity", "km / s", 1e-5)(f)
        _in_units("profile/density", "kg / m3", 1e3)(f)
        _in_units("profile/radius", "Rsun", 1 / 6.957e10)(f)
    bad = ctx.damaged("result", edit)
    want = _run(["lines", sources.get("result")], capsys)
    got = _run(["lines", bad], capsys)
    assert (got[0], got[2]) == (0, "")
    assert _answer(got[1]) == _answer(want[1])


def test_sweep_table_in_other_units_gives_the_same_comparison(tmp_path, capsys, sources):
    """A sweep table whose terminal velocity is stored in km/s (1 km/s = 1e5 cm/s) compares
    with observations as the cgs file does, not 1e5 times too slow."""
    ctx = Ctx(tmp_path, sources)
    observed = ctx.csv(TERMINAL_ONLY)
    bad = ctx.damaged("sweep", _in_units("table/terminal_velocity", "km / s", 1e-5))
    want = _run(["compare", sources.get("sweep"), observed], capsys)
    got = _run(["compare", bad, observed], capsys)
    assert (got[0], got[2]) == (0, ""), got[2]
    assert _answer(got[1]) == _answer(want[1])


def test_family_without_complete_model_plots(tmp_path, capsys, sources):
    """plot and inspect --csv of a family read its table; the model is not needed."""
    ctx = Ctx(tmp_path, sources)
    bad = ctx.damaged("family", _drop_mass)
    code, out, err = _run(["plot", bad, "-o", tmp_path / "f.png"], capsys)
    assert (code, err) == (0, ""), err
    assert (tmp_path / "f.png").stat().st_size > 0
    code, out, err = _run(["inspect", bad, "--csv"], capsys)
    want = _run(["inspect", sources.get("family"), "--csv"], capsys)
    assert (code, err) == (0, "") and out == want[1] and len(out.splitlines()) == 3
