"""Command-line conveniences (issue 14, item 4), through ``windsolve.cli.main`` or a subprocess.

``run --set section.key=value``; a sweep file given to ``run`` (and a model file
given to ``sweep``) named as such; ``sweep --resume`` with nothing to resume; Ctrl-C
on a running sweep keeps every row finished so far; labels that say what a number is.
"""

import math
import os
import signal
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import astropy.constants as const
import astropy.units as u
import h5py
import pytest

from windsolve import cli, demo_model_path

ROOT = Path(__file__).resolve().parents[1]
CONFIGS = ROOT / "configs"
DEMO = Path(str(demo_model_path())).read_text(encoding="utf-8")


def run(argv, capsys):
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_error_line(err):
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("windsolve: error: ")
    return lines[0]


# -- run --set ---------------------------------------------------------------------

def test_set_gives_the_result_of_the_edited_file(tmp_path, capsys):
    # Reference: the same change written into a copy of the model file by hand.
    edited = tmp_path / "edited.toml"
    text = DEMO.replace('luminosity = "4e6 Lsun"', 'luminosity = "3e6 Lsun"')
    text = text.replace("rtol = 1e-8", "rtol = 1e-9")
    assert text.count("3e6 Lsun") == 1 and "rtol = 1e-9" in text
    edited.write_text(text, encoding="utf-8")
    code, out_file, _ = run(["run", edited, "-o", tmp_path / "file.h5"], capsys)
    assert code == 0
    code, out_set, _ = run(["run", "--set", "star.luminosity=3e6 Lsun",
                            "--set", "numerics.rtol=1e-9", "-o", tmp_path / "set.h5"], capsys)
    assert code == 0
    assert "with star.luminosity=3e6 Lsun, numerics.rtol=1e-9" in out_set.splitlines()[0]
    assert out_set.splitlines()[1:-1] == out_file.splitlines()[1:-1]  # not "wrote PATH"
    with h5py.File(tmp_path / "file.h5") as a, h5py.File(tmp_path / "set.h5") as b:
        assert a["summary"].attrs["mass_loss_rate"] == b["summary"].attrs["mass_loss_rate"]


def test_set_reads_toml_values_and_quoted_strings(tmp_path, capsys):
    # A TOML boolean and a quoted TOML string (as written inside single shell quotes).
    code, out, _ = run(["run", "--set", "energy.photon_tiring=true",
                        "--set", 'star.luminosity="3e6 Lsun"', "-o", tmp_path / "t.h5"], capsys)
    assert code in (0, 3)
    with h5py.File(tmp_path / "t.h5") as f:
        data = tomllib.loads(f.attrs["model_toml"])
    assert data["energy"]["photon_tiring"] is True
    assert u.Quantity(data["star"]["luminosity"]).to_value(u.Lsun) == pytest.approx(3e6)


@pytest.mark.parametrize("assignment, says", [
    ("star.lumi=3e6 Lsun", 'unknown key "lumi" in [star]'),
    ("star.luminosity=3e6", "has no unit"),
    ("numerics.rtol=abc", "rtol"),
    ("star.luminosity", "write --set section.key=value"),
    ("=3", "write --set section.key=value"),
    ("a.b.c=1", "one dot"),
    ("stars.mass=50 Msun", "unknown table [stars]"),
])
def test_bad_set_is_one_line_naming_it(tmp_path, capsys, assignment, says):
    out = tmp_path / "out.h5"
    code, stdout, err = run(["run", "--set", assignment, "-o", out], capsys)
    assert code == 2
    line = one_error_line(err)
    assert f"--set {assignment}" in line and says in line, line
    assert not out.exists() and stdout == ""


def test_check_takes_set_too(capsys):
    code, out, _ = run(["check", "--set", "star.luminosity=1e6 Lsun"], capsys)
    assert code == 0
    assert "built-in demo with star.luminosity=1e6 Lsun" in out
    code, _, err = run(["check", "--set", "star.luminosity=-1 Lsun"], capsys)
    assert code == 2 and "--set star.luminosity=-1 Lsun" in one_error_line(err)


# -- the wrong kind of file --------------------------------------------------------

def test_run_names_a_sweep_file(capsys):
    code, _, err = run(["run", CONFIGS / "demo_sweep.toml"], capsys)
    assert code == 2
    line = one_error_line(err)
    assert "this is a sweep file" in line and "windsolve sweep" in line
    assert "model is missing" not in line


def test_sweep_names_a_model_file(tmp_path, capsys):
    code, _, err = run(["sweep", CONFIGS / "demo.toml", "-o", tmp_path / "s.h5"], capsys)
    assert code == 2
    line = one_error_line(err)
    assert "this is a model file" in line and "windsolve run" in line
    assert not (tmp_path / "s.h5").exists()


# -- resume with nothing to resume -------------------------------------------------

def small_sweep(tmp_path, num=3, batch=None):
    path = tmp_path / "small.toml"
    path.write_text(f'[sweep]\nbase = "{CONFIGS / "demo.toml"}"\n'
                    + (f"batch = {batch}\n" if batch else "")
                    + f'[[axis]]\nkey = "star.luminosity"\nstart = "3e6 Lsun"\n'
                      f'stop = "6e6 Lsun"\nnum = {num}\n', encoding="utf-8")
    return path


def test_resume_with_nothing_to_resume_says_so_and_runs(tmp_path, capsys):
    out = tmp_path / "s.h5"
    code, _, err = run(["sweep", small_sweep(tmp_path), "-o", out, "--workers", "1", "-q",
                        "--resume"], capsys)
    assert code == 0
    notice = [line for line in err.splitlines() if "nothing to resume" in line]
    assert len(notice) == 1 and "running all 3 models" in notice[0], err
    with h5py.File(out) as f:
        assert len(f["table/converged"]) == 3


# -- Ctrl-C ------------------------------------------------------------------------

def journal_rows(journal):
    if not journal.exists():
        return 0
    return max(0, journal.read_text(encoding="utf-8").count("\n") - 1)  # minus the header


def test_ctrl_c_keeps_every_finished_row_of_a_running_batch(tmp_path):
    # One worker and one batch of all 3000 rows (seconds of work): rows reach the
    # journal one by one while the batch runs, and Ctrl-C (SIGINT to the process
    # group, as a terminal sends it) stops the sweep before the batch is done,
    # keeping the rows already finished; --resume then completes the same table.
    n = 3000
    sweep = small_sweep(tmp_path, num=n, batch=n)
    out = tmp_path / "s.h5"
    journal = tmp_path / "s.h5.partial"
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "windsolve", "sweep", str(sweep), "-o",
                             str(out), "--workers", "1", "-q"], cwd=tmp_path, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 240
        while journal_rows(journal) < 20:
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "no row reached the journal"
            time.sleep(0.02)
        os.killpg(proc.pid, signal.SIGINT)
        sent = time.monotonic()
        _, err = proc.communicate(timeout=60)  # a hang guard, not a speed goal
        latency = time.monotonic() - sent
    finally:
        if proc.poll() is None:
            proc.kill()
    print(f"Ctrl-C to exit: {latency:.2f} s")
    assert proc.returncode == 130, err
    kept = journal_rows(journal)
    assert 20 <= kept < n  # the batch was still running: its finished rows were kept
    assert f"interrupted: {kept} of {n} models done and kept" in err, err
    assert not out.exists()
    done = subprocess.run([sys.executable, "-m", "windsolve", "sweep", str(sweep), "-o",
                           str(out), "--workers", "1", "-q", "--resume"], cwd=tmp_path,
                          env=env, capture_output=True, text=True, timeout=240)
    assert done.returncode == 0, done.stderr
    with h5py.File(out) as f:
        assert len(f["table/converged"]) == n
        assert f["table/converged"][()].all()


# -- labels ------------------------------------------------------------------------

def test_porous_demo_prints_gamma_eff_and_gamma_es(capsys):
    code, out, _ = run(["run"], capsys)
    assert code == 0
    lines = {line.split("  ")[1].strip(): line for line in out.splitlines()
             if line.startswith("  base Gamma")}
    assert set(lines) == {"base Gamma_eff (porous)", "base Gamma_es"}, out
    assert "base Eddington factor" not in out
    # Gamma_es = L0 / L_Edd, L_Edd = 4 pi G M c / kappa_es, kappa_es = sigma_T / m_u *
    # (X / A_H + 2 Y / A_He + Z / 2) for a fully ionised gas (standard atomic weights
    # A_H = 1.008, A_He = 4.002602; metals give about one electron per two m_u);
    # constants from astropy. The demo: M = 50 Msun, L0 = 4e6 Lsun, X = 0.7, Z = 0.02.
    X, Z = 0.7, 0.02
    electrons = X / 1.008 + 2 * (1 - X - Z) / 4.002602 + Z / 2
    kappa = (const.sigma_T / const.u * electrons).to(u.cm**2 / u.g)
    l_edd = 4 * math.pi * const.G * 50 * const.M_sun * const.c / kappa
    expected = float((4e6 * const.L_sun / l_edd).decompose())
    printed = float(lines["base Gamma_es"].split()[2])
    assert printed == pytest.approx(expected, rel=1e-3)  # printed to 4 digits
    assert printed > 2 > float(lines["base Gamma_eff (porous)"].split()[3])


def test_isothermal_speed_is_v_at_the_outer_radius(tmp_path, capsys):
    code, out, _ = run(["run", "-o", tmp_path / "d.h5"], capsys)
    assert code == 0
    assert "  v at the outer radius " in out and "terminal velocity" not in out
    code, out, _ = run(["lines", tmp_path / "d.h5"], capsys)
    assert code == 0
    assert "model v at the outer radius" in out and "terminal velocity" not in out


def test_isothermal_sweep_plot_says_v_at_the_outer_radius(tmp_path, capsys):
    import matplotlib
    matplotlib.use("Agg")
    from windsolve.plotting import sweep_figure
    out = tmp_path / "s.h5"
    assert run(["sweep", small_sweep(tmp_path), "-o", out, "--workers", "1", "-q"],
               capsys)[0] == 0
    fig = sweep_figure(out)
    labels = [ax.get_ylabel() for ax in fig.axes]
    assert any("v at the outer radius" in label for label in labels), labels
    assert not any("infty" in label or "terminal" in label for label in labels), labels
