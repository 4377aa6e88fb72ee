"""Parameter sweeps: designs, validation, failures kept, kill-and-resume, dask.

Tiers: (d) invariants -- a sweep row equals the same model solved alone, a
resumed sweep equals an uninterrupted one row by row, a dask cluster gives
the same table as the local pool; (e) bad sweep files give one-line errors.
Latin-hypercube coverage is checked against its definition (McKay, Beckman
& Conover 1979, Technometrics 21, 239: one sample in each of the n strata of
every axis).
"""

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import windsolve
from windsolve import cli
from windsolve.errors import ModelError
from windsolve.sweep import load_sweep, read_sweep_table, run_batch, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))


def write(tmp_path, text, name="sweep.toml"):
    path = tmp_path / name
    path.write_text(f'[sweep]\nbase = "{DEMO}"\n' + text)
    return path


GRID = """design = "grid"
[[axis]]
key = "star.luminosity"
start = "3e6 Lsun"
stop = "6e6 Lsun"
num = 3
spacing = "log"
[[axis]]
key = "porosity.length"
values = ["3 Rsun", "30 Rsun"]
"""


def test_grid_covers_every_combination(tmp_path):
    sweep = load_sweep(write(tmp_path, GRID))
    assert len(sweep) == 6
    L = sweep.axis_table[:, 0]
    h = sweep.axis_table[:, 1]
    expected_L = np.geomspace(3e6, 6e6, 3) * 3.828e33
    pairs = {(round(a / 3.828e33, 6), round(b / 6.957e10, 6)) for a, b in zip(L, h, strict=True)}
    assert pairs == {(round(x / 3.828e33, 6), y) for x in expected_L for y in (3.0, 30.0)}


def test_latin_hypercube_hits_every_stratum_once(tmp_path):
    path = write(tmp_path, """design = "latin"
samples = 16
seed = 3
[[axis]]
key = "star.luminosity"
start = "2e6 Lsun"
stop = "8e6 Lsun"
spacing = "log"
[[axis]]
key = "gas.sound_speed"
start = "15 km/s"
stop = "25 km/s"
""")
    sweep = load_sweep(path)
    assert len(sweep) == 16
    u_L = np.log(sweep.axis_table[:, 0] / (2e6 * 3.828e33)) / np.log(4.0)
    u_a = (sweep.axis_table[:, 1] - 15e5) / 10e5
    for u01 in (u_L, u_a):
        strata = np.floor(u01 * 16 + 1e-9).astype(int)
        assert sorted(strata) == list(range(16))
    # same seed, same design
    again = load_sweep(path)
    np.testing.assert_array_equal(again.axis_table, sweep.axis_table)


def test_random_design_within_bounds(tmp_path):
    sweep = load_sweep(write(tmp_path, """design = "random"
samples = 20
seed = 1
[[axis]]
key = "composition.X"
start = 0.5
stop = 0.7
"""))
    X = sweep.axis_table[:, 0]
    assert len(X) == 20 and X.min() >= 0.5 and X.max() <= 0.7 and np.ptp(X) > 0.05


@pytest.mark.parametrize("text, fragment", [
    ('design = "grid"\n[[axis]]\nkey = "star.lumnosity"\nvalues = ["1e6 Lsun"]\n',
     'did you mean "star.luminosity"'),
    ('design = "grid"\n[[axis]]\nkey = "star.luminosity"\nvalues = [3e6]\n', "no unit"),
    ('design = "grid"\n[[axis]]\nkey = "star.luminosity"\nvalues = ["3e6 km"]\n',
     "luminosity is needed"),
    ('design = "grid"\n[[axis]]\nkey = "star.luminosity"\nvalues = []\n', "empty"),
    ('design = "grid"\n', "no [[axis]]"),
    ('design = "latin"\nsamples = 4\n[[axis]]\nkey = "star.luminosity"\nstart = "1e6 Lsun"\n'
     'stop = "2e6 Lsun"\nnum = 3\n', "num is for grid"),
    ('design = "lattice"\n[[axis]]\nkey = "star.luminosity"\nvalues = ["1e6 Lsun"]\n',
     "design"),
    ('design = "grid"\n[[axis]]\nkey = "star.mass"\nvalues = ["50 Msun", "-1 Msun"]\n',
     "must be positive"),
    ('design = "grid"\n[[axis]]\nkey = "composition.X"\nvalues = [0.5, 0.99]\n'
     '[[axis]]\nkey = "composition.Z"\nvalues = [0.0, 0.02]\n', "X + Z"),
])
def test_bad_sweep_files(tmp_path, capsys, text, fragment):
    path = write(tmp_path, text)
    with pytest.raises(ModelError) as info:
        load_sweep(path)
    assert fragment in str(info.value)
    out = tmp_path / "out.h5"
    assert cli.main(["sweep", str(path), "-o", str(out), "-q"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and fragment in err[0]
    assert not out.exists() and not (tmp_path / "out.h5.partial").exists()


def test_row_equals_single_solve_and_failures_are_recorded(tmp_path, demo_result):
    # L = 1e3 Lsun puts the Parker point beyond the outer radius: no solution.
    path = write(tmp_path, """design = "grid"
[[axis]]
key = "star.luminosity"
values = ["4e6 Lsun", "1e3 Lsun"]
""")
    sweep = load_sweep(path)
    out = tmp_path / "out.h5"
    run = run_sweep(sweep, out, workers=1, quiet=True)
    assert not run.interrupted and out.exists() and run.path == out
    assert (run.rows, run.done, run.converged, run.failed) == (2, 2, 1, 1)
    assert run.statuses == {"converged": 1, "no_critical_point": 1}
    assert not (tmp_path / "out.h5.partial").exists()
    table, attrs = read_sweep_table(out)
    assert list(table["converged"]) == [True, False]
    assert table["status"][1] == "no_critical_point"
    single = demo_result
    assert table["mass_loss_rate"][0] == single.summary["mass_loss_rate"].value
    assert math.isnan(table["mass_loss_rate"][1])
    assert attrs["sweep_toml"] == path.read_text()


def test_run_batch_never_raises():
    base = windsolve.modelfile.read_model_file(DEMO)
    records = run_batch(base, [(0, {"star.mass": "-1 Msun"}), (1, {"star.nope": 1})])
    assert [r["status"] for r in records] == ["error", "error"]
    assert all(r["message"] for r in records)
    records = run_batch({"model": "nope"}, [(0, {})])
    assert records[0]["status"] == "error"


KILL_SWEEP = """design = "grid"
batch = 1
[[axis]]
key = "star.luminosity"
start = "3e6 Lsun"
stop = "6e6 Lsun"
num = 100
spacing = "log"
[[axis]]
key = "gas.sound_speed"
values = ["18 km/s", "22 km/s"]
"""
N_KILL = 200


def _table_without_timing(path):
    table, attrs = read_sweep_table(path)
    table.pop("seconds")
    return table


@pytest.mark.slow
def test_sigkill_then_resume_equals_uninterrupted_run(tmp_path):
    sweep_path = write(tmp_path, KILL_SWEEP)
    reference = tmp_path / "reference.h5"
    run_sweep(load_sweep(sweep_path), reference, workers=1, quiet=True)
    out = tmp_path / "killed.h5"
    journal = tmp_path / "killed.h5.partial"
    # A slowed worker (batch of one, one worker) so the kill lands mid-sweep.
    proc = subprocess.Popen([sys.executable, "-m", "windsolve", "sweep", str(sweep_path),
                             "-o", str(out), "--workers", "1", "-q"],
                            start_new_session=True, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    deadline = time.time() + 120
    rows = 0
    while time.time() < deadline:
        if journal.exists():
            rows = len(journal.read_text().splitlines()) - 1
            if rows >= 5:
                break
        time.sleep(0.02)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    assert rows >= 5 and not out.exists() and journal.exists()
    kept = len(journal.read_text().splitlines()) - 1
    assert kept < N_KILL  # killed part-way
    # without --resume the journal is protected
    assert cli.main(["sweep", str(sweep_path), "-o", str(out), "-q"]) == 2
    assert cli.main(["sweep", str(sweep_path), "-o", str(out), "-q", "--resume",
                     "--workers", "1"]) == 0
    assert not journal.exists()
    a, b = _table_without_timing(reference), _table_without_timing(out)
    assert a.keys() == b.keys()
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


@pytest.mark.slow
def test_ctrl_c_stops_cleanly_and_says_how_to_resume(tmp_path):
    sweep_path = write(tmp_path, KILL_SWEEP)
    out = tmp_path / "stopped.h5"
    journal = tmp_path / "stopped.h5.partial"
    proc = subprocess.Popen([sys.executable, "-m", "windsolve", "sweep", str(sweep_path),
                             "-o", str(out), "--workers", "1", "-q"],
                            start_new_session=True, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    deadline = time.time() + 120
    while time.time() < deadline:
        if journal.exists() and len(journal.read_text().splitlines()) > 3:
            break
        time.sleep(0.02)
    os.killpg(proc.pid, signal.SIGINT)  # what Ctrl-C sends to the foreground group
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 130
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and "--resume" in lines[0] and "Traceback" not in stderr
    assert journal.exists() and not out.exists()


@pytest.mark.slow
def test_dask_cluster_gives_the_local_table(tmp_path):
    distributed = pytest.importorskip("distributed")
    sweep_path = write(tmp_path, GRID)
    local = tmp_path / "local.h5"
    run_sweep(load_sweep(sweep_path), local, workers=2, quiet=True)
    # A real scheduler and two worker processes on loopback, dashboard off.
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        remote = tmp_path / "dask.h5"
        assert cli.main(["sweep", str(sweep_path), "-o", str(remote), "-q", "--scheduler",
                         cluster.scheduler_address]) == 0
    a, b = _table_without_timing(local), _table_without_timing(remote)
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


def test_axes_are_shown_in_the_units_the_sweep_file_wrote(tmp_path):
    # The table keeps cgs (docs/physics.md, section 9); prints and plots show each axis
    # as written, e.g. Lsun (IAU 2015 nominal value, via astropy) and Rsun,
    # on a log scale when the file asked for log spacing.
    import astropy.units as u

    from windsolve.sweep import axis_views
    path = tmp_path / "s.toml"
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n'
                    f'[[axis]]\nkey = "star.luminosity"\nstart = "3e6 Lsun"\n'
                    f'stop = "5e6 Lsun"\nnum = 2\nspacing = "log"\n'
                    f'[[axis]]\nkey = "porosity.length"\nvalues = ["5 Rsun", "7e11 cm"]\n'
                    f'[[axis]]\nkey = "boundary.base_density"\n'
                    f'values = ["1e-10 g/cm3", "1e-8 g/cm3"]\n'
                    f'[[axis]]\nkey = "composition.X"\nvalues = [0.7]\n')
    out = tmp_path / "s.h5"
    run_sweep(load_sweep(path), out, workers=1, quiet=True)
    table, _ = read_sweep_table(out)
    lum, h, rho0, x = axis_views(out)
    assert (rho0.unit, rho0.log) == ("g/cm3", True)  # values over 100x: a log axis
    assert (lum.unit, lum.cgs_unit, lum.log) == ("Lsun", "erg / s", True)
    assert math.isclose(table[lum.key][0] * lum.factor, 3e6, rel_tol=1e-12)
    assert math.isclose(lum.factor, 1 / u.Lsun.to(u.erg / u.s), rel_tol=1e-15)
    assert (h.unit, h.log, h.label) == ("Rsun", False, "porosity.length [Rsun]")
    assert math.isclose(table[h.key].max() * h.factor, 7e11 / u.Rsun.to(u.cm), rel_tol=1e-12)
    assert (x.unit, x.factor, x.label) == ("", 1.0, "composition.X")


def test_csv_export_and_plot(tmp_path, capsys):
    path = write(tmp_path, GRID)
    out = tmp_path / "grid.h5"
    run_sweep(load_sweep(path), out, workers=1, quiet=True)
    csv_path = tmp_path / "grid.csv"
    assert cli.main(["inspect", str(out), "--csv", str(csv_path)]) == 0
    lines = csv_path.read_text().splitlines()
    assert len(lines) == 7
    header = lines[0].split(",")
    # in the units the sweep file wrote (Lsun, Rsun; issue 14), cgs with --cgs
    assert header[:3] == ["row", "star.luminosity [solLum]", "porosity.length [solRad]"]
    assert "mass_loss_rate [solMass / yr]" in header and "status" in header
    assert cli.main(["inspect", str(out), "--csv", str(csv_path), "--cgs"]) == 0
    cgs = csv_path.read_text().splitlines()[0].split(",")
    assert cgs[:3] == ["row", "star.luminosity [erg / s]", "porosity.length [cm]"]
    assert "mass_loss_rate [g / s]" in cgs
    png = tmp_path / "grid.png"
    assert cli.main(["plot", str(out), "-o", str(png)]) == 0
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert json.loads(json.dumps(header))  # plain strings


def test_default_batch_keeps_every_worker_busy():
    # common practice: at least a few tasks per worker, and tasks long enough
    # that the per-task cost stays small -- the limits by model kind.
    from windsolve.sweep import BATCH_LIMIT, TASKS_PER_WORKER, _default_batch
    assert _default_batch("isothermal", 100_000, 2, None) == BATCH_LIMIT["isothermal"]
    assert _default_batch("diffusion", 100_000, 2, None) == BATCH_LIMIT["diffusion"]
    small = _default_batch("isothermal", 120, 2, None)
    assert -(-120 // small) >= TASKS_PER_WORKER * 2
    assert _default_batch("isothermal", 1, 8, None) == 1
