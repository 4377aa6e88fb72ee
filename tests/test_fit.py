"""Posterior inference (windsolve fit): fit files, sampling, checkpoints, summaries.

The closed-form check uses a linear model registered in this file alone: its
"terminal velocity" is v = A . (x, y), so with normal priors and Gaussian
measurements the posterior is the Gaussian of Bayesian linear regression,
computed here from its equations (precision = prior precision + A^T S^-1 A;
e.g. Bishop 2006, Pattern Recognition and Machine Learning, eqs. 3.50-3.51,
from memory).
"""

import json
import math
from dataclasses import dataclass
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve.cli import main
from windsolve.fit import (
    best_model,
    load_fit,
    posterior_table,
    read_fit,
    run_fit,
    summary_table,
)
from windsolve.models import WindModel, param
from windsolve.registry import ModelSpec, register
from windsolve.result import WindResult

CONFIGS = Path(__file__).resolve().parent.parent / "configs"
KIND = "linear_fit_test"
A_KM_S = np.array([100.0, 30.0])  # v = A . (x, y) [km/s], the test model's linear map


@dataclass(frozen=True, eq=False)
class LinearToy(WindModel):
    """Test-only model: a terminal velocity linear in two dimensionless keys."""

    kind = KIND
    sections = ("toy",)

    name: str = param("name", str, "a label", "toy")
    x: float = param("toy.x", float, "first coefficient", 0.0)
    y: float = param("toy.y", float, "second coefficient", 0.0)
    opacity: object = None

    def __post_init__(self):
        self._read_fields()


def solve_toy(model, profile=True):
    v = (A_KM_S[0] * model.x + A_KM_S[1] * model.y) * 1e5
    if not v > 0:
        return WindResult(model, False, "no_solution", "v <= 0", {}, {}, [], {})
    return WindResult(model, True, "converged", "converged: linear toy",
                      {"terminal_velocity": v * u.cm / u.s}, {}, [], {"shots": 0,
                                                                      "seconds": 0.0})


TOY_SPEC = ModelSpec(kind=KIND, model_class=LinearToy, solve=solve_toy,
                     check=lambda model, source: ([("model", KIND)], []),
                     summary_units={"terminal_velocity": u.cm / u.s}, sweep_batch=50)
register(TOY_SPEC, replace=True)


@pytest.fixture(scope="module", autouse=True)
def registered():
    from windsolve.registry import unregister
    register(TOY_SPEC, replace=True)
    yield
    unregister(KIND)


def write_toy(tmp_path, sampler="walkers = 16\nsteps = 1000\nseed = 7\nburn = 200",
              obs=(("terminal_velocity", 150.0, 20.0),), extra=""):
    (tmp_path / "toy.toml").write_text(f'model = "{KIND}"\nname = "toy (invented)"\n'
                                       f'[toy]\nx = 1.0\ny = 0.0\n')
    rows = "".join(f"Toy (invented),{q},-,{v},{s},km/s\n" for q, v, s in obs)
    (tmp_path / "obs.csv").write_text("object,quantity,line,value,uncertainty,unit\n" + rows)
    fit = tmp_path / "fit.toml"
    fit.write_text(f"""[fit]
base = "toy.toml"
observations = "obs.csv"
{extra}
[[free]]
key = "toy.x"
prior = "normal"
mean = 1.0
sigma = 0.5

[[free]]
key = "toy.y"
prior = "normal"
mean = 0.0
sigma = 0.3

[sampler]
{sampler}
""")
    return fit


def test_linear_gaussian_posterior_matches_the_closed_form(tmp_path):
    fit = write_toy(tmp_path)
    run = run_fit(load_fit(fit), tmp_path / "chain.h5")
    samples = posterior_table(tmp_path / "chain.h5")
    xy = np.column_stack([samples["toy.x"], samples["toy.y"]])
    # Bayesian linear regression (independent calculation, equations in the docstring):
    prior_mean, prior_prec = np.array([1.0, 0.0]), np.diag([1 / 0.5**2, 1 / 0.3**2])
    prec = prior_prec + np.outer(A_KM_S, A_KM_S) / 20.0**2
    cov = np.linalg.inv(prec)
    mean = cov @ (prior_prec @ prior_mean + A_KM_S * 150.0 / 20.0**2)
    sd = np.sqrt(np.diag(cov))
    # A few per cent of the posterior width (common practice for MCMC checks).
    assert np.all(np.abs(xy.mean(0) - mean) < 0.08 * sd), (xy.mean(0), mean)
    assert np.all(np.abs(xy.std(0) / sd - 1) < 0.06), (xy.std(0), sd)
    rho = cov[0, 1] / (sd[0] * sd[1])
    assert abs(np.corrcoef(xy.T)[0, 1] - rho) < 0.05
    assert np.all(run.ess > 400)  # effective samples behind the checks above
    assert 0.2 < run.acceptance.mean() < 0.9  # the stretch move's usual range (common practice)


def test_killed_and_resumed_fit_gives_the_same_chain(tmp_path):
    sampler = "walkers = 8\nsteps = 40\nseed = 11\nthin = 2\nburn = 10"
    fit = write_toy(tmp_path, sampler)
    spec = load_fit(fit)
    run_fit(spec, tmp_path / "whole.h5")

    def stop(step):
        if step == 10:  # of 20 saved steps
            raise KeyboardInterrupt

    part = run_fit(spec, tmp_path / "parts.h5", on_step=stop)
    assert part.interrupted and part.steps == 10
    assert (tmp_path / "parts.h5.partial").exists() and not (tmp_path / "parts.h5").exists()
    with pytest.raises(windsolve.ModelError, match="--resume"):
        run_fit(spec, tmp_path / "parts.h5")
    done = run_fit(spec, tmp_path / "parts.h5", resume=True)
    assert done.steps == 20 and not (tmp_path / "parts.h5.partial").exists()
    a, b = read_fit(tmp_path / "whole.h5"), read_fit(tmp_path / "parts.h5")
    assert np.array_equal(a.chain, b.chain)
    assert np.array_equal(a.log_prob, b.log_prob)
    for name in a.derived:
        assert np.array_equal(a.derived[name], b.derived[name], equal_nan=True)
    # Statuses are counted across the interruption: one solve per walker and proposal
    # (40 steps x 8 walkers) plus the starting ensemble.
    assert sum(json.loads(b.attrs["statuses"]).values()) == 8 * 40 + 8


def test_a_too_short_chain_says_how_many_more_steps(tmp_path):
    fit = write_toy(tmp_path, "walkers = 8\nsteps = 30\nseed = 1\nburn = 0")
    run = run_fit(load_fit(fit), tmp_path / "c.h5")
    assert "more steps" in run.warning
    more = int(run.warning.split("run about ")[1].split()[0])
    assert more == math.ceil(50 * float(np.max(run.tau)) - 30)


def write_demo_fit(tmp_path, free=None, sampler="walkers = 8\nsteps = 12\nseed = 2\nburn = 4",
                   extra="", lines=""):
    free = free or """[[free]]
key = "star.luminosity"
prior = "log-uniform"
lower = "3.5e6 Lsun"
upper = "4.5e6 Lsun"
"""
    fit = tmp_path / "fit.toml"
    fit.write_text(f"""[fit]
base = "{CONFIGS / 'demo.toml'}"
observations = "{CONFIGS / 'observed_widths.csv'}"
model_uncertainty = 0.05
{extra}
{free}
{lines}
[sampler]
{sampler}
""")
    return fit


def test_demo_fit_through_the_command_line(tmp_path, capsys):
    fit = write_demo_fit(tmp_path)
    out, best = tmp_path / "chain.h5", tmp_path / "best.toml"
    pngs = tmp_path / "corner.png", tmp_path / "predictive.png"
    assert main(["fit", str(fit), "-o", str(out), "--best", str(best), "--corner",
                 str(pngs[0]), "--predictive", str(pngs[1])]) == 0
    printed = capsys.readouterr().out
    assert "autocorrelation time" in printed and "acceptance fraction" in printed
    for png in pngs:
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    model = windsolve.load_model(best)
    samples = posterior_table(out)
    i = np.argmax(samples["log_prob"])
    # The maximum-posterior model file holds the best sample's luminosity exactly.
    assert model.luminosity.to_value(u.Lsun) == samples["star.luminosity"][i].to_value(u.Lsun)
    assert samples["star.luminosity"].unit == u.Lsun
    assert samples["mass_loss_rate"].unit == u.Msun / u.yr
    assert best_model(out).luminosity == model.luminosity
    table = summary_table(out)
    row = table[list(table["quantity"]).index("star.luminosity")]
    assert 3.5e6 <= row["p2.5"] <= row["p16"] <= row["median"] <= row["p84"] <= 4.5e6
    assert set(table["quantity"]) >= {"mass_loss_rate", "terminal_velocity", "fwhm", "hwzi",
                                      "sonic_radius"}


BAD_FITS = {
    "unknown prior": ("prior", 'prior = "log-uniform"', 'prior = "loguniform"'),
    "no unit": ("prior", 'lower = "3.5e6 Lsun"', "lower = 3.5e6"),
    "wrong unit": ("prior", 'lower = "3.5e6 Lsun"', 'lower = "3.5e6 km/s"'),
    "bad range": ("prior", 'upper = "4.5e6 Lsun"', 'upper = "3e6 Lsun"'),
    "unknown key": ("prior", 'key = "star.luminosity"', 'key = "star.luminosty"'),
    "not variable": ("prior", 'key = "star.luminosity"', 'key = "energy.photon_tiring"'),
    "unknown sampler option": ("sampler", "seed = 2", "sed = 2"),
    "too few walkers": ("sampler", "walkers = 8", "walkers = 1"),
    "odd walkers": ("sampler", "walkers = 8", "walkers = 7"),
    "unknown fit key": ("extra", "", "obj = \"x\""),
    "bad model uncertainty": ("extra", "", "model_uncertainty = -1"),
    "unknown line setting": ("lines", "", "[lines]\nturbulance = \"10 km/s\""),
}


@pytest.mark.parametrize("case", sorted(BAD_FITS))
def test_bad_fit_file_is_one_line_exit_2_nothing_written(case, tmp_path, capsys):
    where, old, new = BAD_FITS[case]
    fit = write_demo_fit(tmp_path)
    text = fit.read_text()
    if where in ("extra", "lines"):
        marker = "model_uncertainty = 0.05\n" if where == "extra" else "[sampler]\n"
        text = (text.replace(marker, marker + new + "\n") if where == "extra"
                else text.replace(marker, new + "\n" + marker))
        if case == "bad model uncertainty":
            text = text.replace("model_uncertainty = 0.05\n", "", 1)
    else:
        assert old in text
        text = text.replace(old, new, 1)
    fit.write_text(text)
    out = tmp_path / "chain.h5"
    assert main(["fit", str(fit), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("windsolve: error: "), err
    assert not out.exists() and not Path(str(out) + ".partial").exists()


def test_an_observation_the_model_cannot_predict_is_refused(tmp_path, capsys):
    # The toy model has no line profile, so it predicts no FWHM.
    fit = write_toy(tmp_path, obs=(("terminal_velocity", 150.0, 20.0), ("fwhm", 100, 10)))
    out = tmp_path / "chain.h5"
    assert main(["fit", str(fit), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "predicts no fwhm" in err, err
    assert not out.exists()


@pytest.mark.slow
def test_a_fit_killed_with_sigkill_resumes_to_the_uninterrupted_chain(tmp_path):
    import os
    import signal
    import subprocess
    import sys
    import time

    fit = write_demo_fit(tmp_path, sampler="walkers = 8\nsteps = 1500\nseed = 5\nburn = 100")
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parent.parent))
    cmd = [sys.executable, "-m", "windsolve", "fit", str(fit), "-q"]
    subprocess.run(cmd + ["-o", str(tmp_path / "whole.h5")], check=True, env=env)
    parts = tmp_path / "parts.h5"
    journal = Path(str(parts) + ".partial")
    proc = subprocess.Popen(cmd + ["-o", str(parts)], env=env)
    deadline = time.monotonic() + 60
    while not journal.exists() and time.monotonic() < deadline:
        time.sleep(0.05)
    time.sleep(2.5)  # a few checkpoints (one a second)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert journal.exists() and not parts.exists(), "the fit ended before it was killed"
    subprocess.run(cmd + ["-o", str(parts), "--resume"], check=True, env=env)
    a, b = read_fit(tmp_path / "whole.h5"), read_fit(parts)
    assert np.array_equal(a.chain, b.chain) and np.array_equal(a.log_prob, b.log_prob)
    assert a.attrs["statuses"] == b.attrs["statuses"]


def test_model_b_photosphere_anchored_fit_runs(tmp_path):
    # Model B (configs/bump_wind.toml, an invented star), one free key, a short chain:
    # every model of the chain is counted by status, and a converged sample predicts a
    # finite terminal velocity.
    (tmp_path / "obs.csv").write_text("object,quantity,line,value,uncertainty,unit\n"
                                      "Bump (invented),terminal_velocity,-,1000,300,km/s\n")
    fit = tmp_path / "fit.toml"
    fit.write_text(f"""[fit]
base = "{CONFIGS / 'bump_wind.toml'}"
observations = "obs.csv"

[[free]]
key = "boundary.photosphere_luminosity"
prior = "uniform"
lower = "1.95e5 Lsun"
upper = "2.05e5 Lsun"

[sampler]
walkers = 4
steps = 3
seed = 1
burn = 1
""")
    run = run_fit(load_fit(fit), tmp_path / "b.h5")
    assert sum(run.statuses.values()) == 4 * 3 + 4
    samples = posterior_table(tmp_path / "b.h5")
    assert len(samples) > 0 and np.all(np.isfinite(samples["terminal_velocity"]))
    assert samples["boundary.photosphere_luminosity"].unit == u.Lsun


def test_flat_prior_credible_interval_agrees_with_the_delta_chi2_interval(tmp_path):
    # One key, a flat prior, one measurement, no model uncertainty: the posterior is
    # exp(-chi^2/2), so its central 68.27 % interval is the Delta chi^2 = 1 interval
    # (common practice) when the prediction is close to linear over it.  The Delta chi^2
    # interval comes from windsolve.observe.match_interval (Brent's method on full solves).
    from windsolve.observe import match_interval, read_observed
    obs_csv = tmp_path / "vinf.csv"
    obs_csv.write_text("object,quantity,line,value,uncertainty,unit\n"
                       "Calder Var A (invented),terminal_velocity,-,450,15,km/s\n")
    free = """[[free]]
key = "star.luminosity"
prior = "uniform"
lower = "3.4e6 Lsun"
upper = "5.4e6 Lsun"
"""
    fit = write_demo_fit(tmp_path, free=free,
                         sampler="walkers = 8\nsteps = 700\nseed = 4\nburn = 100")
    fit.write_text(fit.read_text().replace(str(CONFIGS / "observed_widths.csv"), str(obs_csv))
                   .replace("model_uncertainty = 0.05", "model_uncertainty = 0.0"))
    run_fit(load_fit(fit), tmp_path / "c.h5")
    L = posterior_table(tmp_path / "c.h5")["star.luminosity"].to_value(u.Lsun)
    (obs,) = read_observed(obs_csv)
    m = match_interval(windsolve.load_model(CONFIGS / "demo.toml"), "star.luminosity",
                       "3.4e6 Lsun", "5.4e6 Lsun", obs)
    low, high = m["low"].to_value(u.Lsun), m["high"].to_value(u.Lsun)
    half = 0.5 * (high - low)
    p_lo, p_hi = np.percentile(L, [15.865, 84.135])
    assert abs(p_lo - low) < 0.15 * half and abs(p_hi - high) < 0.15 * half, (
        (p_lo, p_hi), (low, high))


@pytest.mark.slow
def test_credible_intervals_are_calibrated_over_seeded_synthetic_data(tmp_path):
    # Truths drawn from the prior, data from the likelihood: the truth falls inside the
    # 68 % (95 %) central interval with probability 0.68 (0.95) (common practice:
    # simulation-based calibration).  Bounds: 99 % binomial intervals from scipy.stats.
    from scipy.stats import binom
    rng = np.random.default_rng(2026)
    n_sets, inside68, inside95 = 20, 0, 0
    for k in range(n_sets):
        while True:
            truth = rng.normal([1.0, 0.0], [0.5, 0.3])
            v = float(A_KM_S @ truth + rng.normal(0.0, 20.0))
            if v > 0:
                break
        d = tmp_path / f"set{k}"
        d.mkdir()
        fit = write_toy(d, f"walkers = 12\nsteps = 500\nseed = {k}\nburn = 100",
                        obs=(("terminal_velocity", v, 20.0),))
        run_fit(load_fit(fit), d / "c.h5")
        x = np.asarray(posterior_table(d / "c.h5")["toy.x"], float)
        lo68, hi68, lo95, hi95 = np.percentile(x, [16, 84, 2.5, 97.5])
        inside68 += lo68 <= truth[0] <= hi68
        inside95 += lo95 <= truth[0] <= hi95
    lo, hi = binom.interval(0.99, n_sets, 0.68)
    assert lo <= inside68 <= hi, inside68
    lo, hi = binom.interval(0.99, n_sets, 0.95)
    assert lo <= inside95 <= hi, inside95


@pytest.mark.slow
def test_the_chain_does_not_depend_on_where_the_models_are_solved(tmp_path):
    # In process, on 2 local worker processes and on a dask cluster: the same chain.
    distributed = pytest.importorskip("distributed")
    fit = write_demo_fit(tmp_path, sampler="walkers = 8\nsteps = 15\nseed = 9\nburn = 5")
    spec = load_fit(fit)
    run_fit(spec, tmp_path / "local.h5")
    run_fit(spec, tmp_path / "pool.h5", workers=2)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        client = distributed.Client(cluster.scheduler_address)
        run_fit(spec, tmp_path / "dask.h5", scheduler=cluster.scheduler_address)
        # The models were solved on the cluster's workers, not here.
        assert sum(client.run(lambda: len(__import__("windsolve.sweep.worker", fromlist=[
            "_BASE_CACHE"])._BASE_CACHE)).values()) >= 1
        client.close()
    a = read_fit(tmp_path / "local.h5")
    for name in ("pool.h5", "dask.h5"):
        b = read_fit(tmp_path / name)
        assert np.array_equal(a.chain, b.chain) and np.array_equal(a.log_prob, b.log_prob)


def test_the_demo_fit_file_is_valid():
    spec = load_fit(CONFIGS / "demo_fit.toml")
    assert spec.keys == ["star.luminosity", "porosity.length"]
    assert spec.lines == {"turbulence": "10 km/s"} and spec.walkers >= 2 * spec.ndim


def test_a_journal_of_another_fit_file_is_not_resumed(tmp_path, capsys):
    fit = write_toy(tmp_path, "walkers = 8\nsteps = 20\nseed = 3\nburn = 0")

    def stop(step):
        if step == 5:
            raise KeyboardInterrupt

    assert run_fit(load_fit(fit), tmp_path / "c.h5", on_step=stop).interrupted
    fit.write_text(fit.read_text().replace("seed = 3", "seed = 4"))
    assert main(["fit", str(fit), "-o", str(tmp_path / "c.h5"), "--resume", "-q"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "another fit file" in err, err
    assert not (tmp_path / "c.h5").exists()
