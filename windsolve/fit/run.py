"""Run a fit with emcee, checkpointed as it grows, resumable; the posterior file and tables.

The sampler is emcee's affine-invariant ensemble sampler (Goodman & Weare
2010; Foreman-Mackey et al. 2013, emcee).  While it runs, every saved step
goes to emcee's own HDF5 backend in a journal next to the output
(``OUT.h5.partial``), together with the sampler's random state (emcee's
backend stores it with every step) and the counts of the models' statuses.
A fit killed at any point resumes from its last saved step to the same chain
as an uninterrupted one with the same seed.  At the end the output is
written in one piece (:func:`windsolve.io.write_hdf5`) and the journal removed.

Convergence: the integrated autocorrelation time of each key (emcee's
``get_autocorr_time`` with ``tol=0``, after ``burn``), the effective sample
size walkers * (saved steps - burn) * thin / tau, and the acceptance
fraction of each walker; a fit shorter than ``TAU_STEPS`` autocorrelation
times says so and how many more steps it needs.
"""

import hashlib
import json
import math
import os
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ModelError, WindsolveError
from .likelihood import DERIVED, LogPosterior
from .spec import FitSpec

__all__ = ["FitRun", "FitFile", "initial_walkers", "run_fit", "JOURNAL_SUFFIX", "TAU_STEPS",
           "read_fit", "posterior_table",
           "summary_table", "best_model"]

JOURNAL_SUFFIX = ".partial"
TAU_STEPS = 50  # a chain this many autocorrelation times long is long enough (common practice)
PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)
# Display units of the derived quantities (the fit file's keys keep their own units).
DERIVED_UNITS = {"mass_loss_rate": "solMass / yr", "terminal_velocity": "km / s",
                 "sonic_radius": "solRad", "photosphere_radius": "solRad",
                 "fwhm": "km / s", "hwzi": "km / s", "edge_velocity": "km / s"}


@dataclass
class FitRun:
    """What a fit did.

    Attributes
    ----------
    path : Path or None
        The output written (None while interrupted).
    steps : int
        Steps saved in the chain (each ``thin`` sampler steps).
    interrupted : bool
        Stopped before the end (Ctrl-C): the journal is kept for resume.
    statuses : dict
        Count of each model status (and ``outside prior``).
    acceptance : numpy.ndarray
        Acceptance fraction per walker.
    tau : numpy.ndarray
        Integrated autocorrelation time per key [saved steps].
    ess : numpy.ndarray
        Effective sample size per key.
    warning : str
        Non-empty when the chain is too short for its autocorrelation time.
    evaluations : int
        Models solved in this run (not counting a resumed part).
    """

    path: "Path | None"
    steps: int
    interrupted: bool = False
    statuses: dict = field(default_factory=dict)
    acceptance: np.ndarray = None
    tau: np.ndarray = None
    ess: np.ndarray = None
    warning: str = ""
    evaluations: int = 0


DASK_CHUNKS = 8  # tasks a half-ensemble is split into on a dask cluster (without --workers)
CHECKPOINT_SECONDS = 1.0  # the longest stretch of saved steps a killed fit can lose [s]


def _checkpoints_class():
    """emcee's HDFBackend, writing the saved steps at most once a CHECKPOINT_SECONDS.

    emcee's own backend opens the file two or three times a step (~10 ms on
    this machine, more than a step of 16 Model A solves).  Here steps are kept
    in memory and written together (with the random state and the status
    counts after the last of them) at most once a second, when interrupted,
    and at the end, so a killed fit resumes from a step that was saved whole.
    """
    import emcee

    class Checkpoints(emcee.backends.HDFBackend):
        def __init__(self, filename, statuses):
            super().__init__(filename)
            self._statuses = statuses  # the LogPosterior's Counter (live)
            self._buffer = []
            self._last = time.monotonic()

        @property
        def iteration(self):
            return emcee.backends.HDFBackend.iteration.fget(self) + len(self._buffer)

        def save_step(self, state, accepted):
            self._buffer.append((np.array(state.coords), np.array(state.log_prob),
                                 None if state.blobs is None else np.array(state.blobs),
                                 np.array(accepted), state.random_state,
                                 dict(self._statuses)))
            if time.monotonic() - self._last >= CHECKPOINT_SECONDS:
                self.flush()

        def flush(self):
            if not self._buffer:
                return
            buffer, self._buffer = self._buffer, []
            with self.open("a") as f:
                g = f[self.name]
                it = int(g.attrs["iteration"])
                n = len(buffer)
                g["chain"][it:it + n] = np.stack([b[0] for b in buffer])
                g["log_prob"][it:it + n] = np.stack([b[1] for b in buffer])
                if buffer[0][2] is not None:
                    g["blobs"][it:it + n] = np.stack([b[2] for b in buffer])
                g["accepted"][:] += np.sum([b[3] for b in buffer], axis=0)
                for i, v in enumerate(buffer[-1][4]):
                    g.attrs[f"random_state_{i}"] = v
                f["windsolve"].attrs["statuses"] = json.dumps(buffer[-1][5], sort_keys=True)
                g.attrs["iteration"] = it + n
            self._last = time.monotonic()

    return Checkpoints


def _digest(spec):
    return hashlib.sha256(spec.text.encode()).hexdigest()[:16]


def _journal_meta(journal, spec, statuses=None):
    import h5py
    with h5py.File(journal, "a") as f:
        g = f.require_group("windsolve")
        g.attrs["fit_digest"] = _digest(spec)
        if statuses is not None:
            g.attrs["statuses"] = json.dumps(statuses, sort_keys=True)


def _journal_statuses(journal, spec):
    """The statuses counted so far, or a one-line error for another fit's journal."""
    import h5py
    try:
        with h5py.File(journal, "r") as f:
            g = f.get("windsolve")
            if g is None or "mcmc" not in f:
                raise ModelError(f"{journal}: not a fit journal; remove it to start again")
            if g.attrs.get("fit_digest") != _digest(spec):
                raise ModelError(f"{journal}: the journal of another fit file (its text "
                                 f"changed); remove it to start again")
            return json.loads(g.attrs.get("statuses", "{}"))
    except OSError as error:
        raise ModelError(f"{journal}: cannot read the fit journal ({error}); remove it to "
                         f"start again") from None


def _executor(workers, scheduler):
    if (workers or 1) == 1 and scheduler is None:
        return None, (lambda *a, **k: None), 1
    from ..sweep import _executor as sweep_executor
    pool, close, _describe, _rows = sweep_executor(workers, scheduler)
    # Tasks per half-ensemble: one per local worker; on a cluster DASK_CHUNKS unless
    # more workers are named.
    if scheduler is not None:
        return pool, close, workers if workers and workers > 1 else DASK_CHUNKS
    return pool, close, workers or os.cpu_count() or 1


def initial_walkers(spec: FitSpec) -> np.ndarray:
    """The starting ensemble, (walkers, ndim), drawn from the priors with the fit's seed.

    Parameters
    ----------
    spec : FitSpec
        The fit.

    Returns
    -------
    numpy.ndarray
        Sampled coordinates, (walkers, ndim).
    """
    rng = np.random.default_rng(spec.seed)
    return np.column_stack([p.draw(rng, spec.walkers) for p in spec.priors])


def run_fit(spec: FitSpec, out: "str | Path", workers: int = 1, scheduler: "str | None" = None,
            resume: bool = False, quiet: bool = True, on_step=None) -> FitRun:
    """Sample the posterior of a fit, checkpointing to ``OUT.partial``; write ``out``.

    Parameters
    ----------
    spec : FitSpec
        From :func:`windsolve.fit.load_fit`.
    out : str or Path
        The output HDF5 file.
    workers : int
        Local processes solving the walkers' models (1: this process, a
        plain loop; fastest for Model A, whose solves take ~0.3 ms).
    scheduler : str, optional
        A dask.distributed scheduler's address instead of local processes.
    resume : bool
        Continue the journal of an interrupted run of the same fit file.
    quiet : bool
        No progress bar.
    on_step : callable, optional
        Called with the number of saved steps after each one (raising
        KeyboardInterrupt there stops the fit as Ctrl-C does).

    Returns
    -------
    FitRun
        What happened; ``interrupted`` with the journal kept.

    Raises
    ------
    ModelError
        A journal exists without ``resume``, belongs to another fit file, or
        every starting walker lies where no model has a solution.
    """
    import emcee

    from ..io import check_output_path
    out = check_output_path(out, "chain.h5")
    journal = Path(str(out) + JOURNAL_SUFFIX)
    statuses = {}
    if journal.exists():
        if not resume:
            raise ModelError(f"{journal}: the journal of an interrupted fit exists; add "
                             f"--resume to continue it, or remove it to start again")
        statuses = _journal_statuses(journal, spec)
    executor, close, chunks = _executor(workers, scheduler)
    logpost = LogPosterior(spec, executor, chunks)
    nsave = spec.steps // spec.thin
    run = FitRun(None, 0)
    try:
        backend = _checkpoints_class()(str(journal), logpost.statuses)
        fresh = not journal.exists() or backend.iteration == 0
        if fresh:
            backend.reset(spec.walkers, spec.ndim)
            _journal_meta(journal, spec, {})
        else:
            logpost.statuses.update(statuses)
        sampler = emcee.EnsembleSampler(spec.walkers, spec.ndim, logpost, vectorize=True,
                                        backend=backend)
        if fresh:
            sampler.random_state = np.random.RandomState(spec.seed).get_state()
            start = initial_walkers(spec)
            first = logpost(start)
            lnp0 = np.array([r[0] for r in first])
            if not np.any(np.isfinite(lnp0)):
                raise ModelError(f"{spec.path}: no starting walker has a solution "
                                 f"({_counts(logpost.statuses)}); narrow the priors")
            state = emcee.State(start, log_prob=lnp0,
                                blobs=np.array([r[1:] for r in first]),
                                random_state=sampler.random_state)
        else:
            state = backend.get_last_sample()
        left = nsave - backend.iteration
        try:
            # A walker with no solution proposing another: emcee computes -inf - (-inf);
            # the NaN rejects the move, as it should -- no warning for it.
            with np.errstate(invalid="ignore"):
                for _ in sampler.sample(state, iterations=max(left, 0), thin_by=spec.thin,
                                        progress=not quiet,
                                        # no bar when stderr is not a terminal (a log)
                                        progress_kwargs={"disable": None, "leave": False}):
                    if on_step is not None:
                        on_step(backend.iteration)
        except KeyboardInterrupt:
            backend.flush()  # every step finished whole; the one in progress is lost
            run.interrupted = True
            run.steps = backend.iteration
            run.statuses = dict(logpost.statuses)
            run.evaluations = logpost.evaluations
            return run
    finally:
        close()
    backend.flush()
    run.statuses = dict(logpost.statuses)
    run.evaluations = logpost.evaluations
    run.steps = backend.iteration
    _convergence(run, spec, backend)
    _write_output(out, spec, backend, run, logpost.blob_names)
    journal.unlink()
    run.path = out
    return run


def _counts(statuses):
    return ", ".join(f"{k}: {v}" for k, v in sorted(statuses.items()))


def _convergence(run, spec, backend):
    """Autocorrelation times, effective sample sizes and acceptance into ``run``."""
    chain = backend.get_chain(discard=spec.burn // spec.thin)
    n = chain.shape[0]
    import emcee
    tau = emcee.autocorr.integrated_time(chain, tol=0) if n > 1 else np.full(spec.ndim, np.inf)
    run.tau = np.asarray(tau, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        run.ess = spec.walkers * n / run.tau
    run.acceptance = backend.accepted / max(backend.iteration * spec.thin, 1)
    worst = float(np.max(run.tau))
    if not worst > 0:  # a chain of a few steps: no estimate at all
        run.warning = (f"the chain ({n} saved steps after burn-in) is too short to estimate "
                       f"an autocorrelation time; run many more steps (raise [sampler] steps)")
    elif not n >= TAU_STEPS * worst:
        more = math.ceil((TAU_STEPS * worst - n) * spec.thin) if math.isfinite(worst) else None
        run.warning = (f"the chain is shorter than {TAU_STEPS} autocorrelation times "
                       f"(tau up to {worst:.3g} saved steps, {n} after burn-in): the "
                       f"estimates are unreliable; run about "
                       f"{'many' if more is None else more} more steps (raise [sampler] steps)")


def _write_output(out, spec, backend, run, blob_names):
    from ..io import dataset, stamp, write_hdf5
    chain = backend.get_chain()
    log_prob = backend.get_log_prob()
    blobs = backend.get_blobs()

    def fill(f):
        stamp(f, spec.base_model.kind)
        f.attrs["kind"] = "fit"
        f.attrs["fit_file"] = spec.text
        f.attrs["base"] = json.dumps(spec.base, sort_keys=True)
        f.attrs["statuses"] = json.dumps(run.statuses, sort_keys=True)
        f.attrs["warning"] = run.warning
        for name in ("walkers", "steps", "seed", "thin", "burn"):
            f.attrs[name] = getattr(spec, name)
        f.attrs["model_uncertainty"] = spec.model_uncertainty
        f.attrs["observations"] = json.dumps([  # cgs
            {"quantity": o.quantity, "line": o.line, "value": o.value,
             "uncertainty": o.uncertainty} for o in spec.observations])
        g = f.create_group("posterior")
        g.attrs["keys"] = json.dumps(spec.keys)
        g.attrs["units"] = json.dumps([p.unit for p in spec.priors])
        g.attrs["priors"] = json.dumps([p.kind for p in spec.priors])
        values = np.stack([p.to_value(chain[..., j]) for j, p in enumerate(spec.priors)], -1)
        dataset(g, "chain", values, "various (attribute units, per key)")
        dataset(g, "log_prob", log_prob, "")
        for j, name in enumerate(blob_names):
            dataset(g, name, blobs[..., j], DERIVED.get(name, "cm / s"))
        dataset(g, "acceptance", run.acceptance, "")
        dataset(g, "tau", run.tau, "saved steps")
        dataset(g, "ess", run.ess, "")

    write_hdf5(out, fill)


# -- reading the posterior --------------------------------------------------------------

@dataclass
class FitFile:
    """A fit's output as read: the chain (saved steps, walkers, keys) and its attributes."""

    path: Path
    keys: list
    units: list
    chain: np.ndarray
    log_prob: np.ndarray
    derived: dict
    attrs: dict


def read_fit(path: "str | Path") -> FitFile:
    """Read a fit's output file.

    Parameters
    ----------
    path : str or Path
        Written by :func:`run_fit` (``windsolve fit``).

    Returns
    -------
    FitFile
        The chain in the fit file's units, ln posterior, derived quantities (cgs).

    Raises
    ------
    WindsolveError
        Not a fit file.
    """
    from ..io import open_hdf5
    path = Path(path)
    with open_hdf5(path) as f:
        if f.attrs.get("kind") != "fit" or "posterior" not in f:
            raise WindsolveError(f"{path}: not a fit file (written by windsolve fit)")
        g = f["posterior"]
        keys = json.loads(g.attrs["keys"])
        units = json.loads(g.attrs["units"])
        derived = {k: g[k][()] for k in g if k not in ("chain", "log_prob", "acceptance",
                                                      "tau", "ess")}
        attrs = {k: f.attrs[k] for k in f.attrs}
        for k in ("acceptance", "tau", "ess"):
            attrs[k] = g[k][()]
        return FitFile(path, keys, units, g["chain"][()], g["log_prob"][()], derived, attrs)


def posterior_table(fit: "FitFile | str | Path", discard: "int | None" = None):
    """The posterior samples after burn-in as an astropy QTable with units.

    Parameters
    ----------
    fit : FitFile, str or Path
        A fit's output.
    discard : int, optional
        Saved steps to leave out (default: the fit's burn / thin).

    Returns
    -------
    astropy.table.QTable
        One row per sample: each free key (the fit file's unit), ``log_prob``
        and the derived quantities (Mdot in Msun/yr, speeds in km/s, r_c and
        R_ph in Rsun; NaN where a model has none), samples with no solution
        left out.
    """
    import astropy.units as u
    from astropy.table import QTable
    if not isinstance(fit, FitFile):
        fit = read_fit(fit)
    if discard is None:
        discard = int(fit.attrs["burn"]) // int(fit.attrs["thin"])
    ok = np.isfinite(fit.log_prob[discard:]).reshape(-1)
    t = QTable()
    for j, (key, unit) in enumerate(zip(fit.keys, fit.units, strict=True)):
        col = fit.chain[discard:, :, j].reshape(-1)[ok]
        t[key] = col * u.Unit(unit) if unit else col
    t["log_prob"] = fit.log_prob[discard:].reshape(-1)[ok]
    for name, values in fit.derived.items():
        cgs = u.Unit(DERIVED.get(name, "cm / s"))
        t[name] = (values[discard:].reshape(-1)[ok] * cgs).to(DERIVED_UNITS[name])
    return t


def summary_table(fit: "FitFile | str | Path"):
    """Median and 2.5/16/84/97.5 percentiles of every free key and derived quantity.

    Parameters
    ----------
    fit : FitFile, str or Path
        A fit's output.

    Returns
    -------
    astropy.table.QTable
        Columns ``quantity``, ``p2.5``, ``p16``, ``median``, ``p84``,
        ``p97.5`` (each row in its quantity's unit, given in ``unit``).
    """
    from astropy.table import QTable
    samples = posterior_table(fit)
    rows = []
    for name in samples.colnames:
        if name == "log_prob":
            continue
        col = samples[name]
        unit = getattr(col, "unit", None)
        x = np.asarray(getattr(col, "value", col), float)
        x = x[np.isfinite(x)]  # (a model without a photosphere has no R_ph)
        if not len(x):
            continue
        p = np.percentile(x, PERCENTILES)
        rows.append((name, *p, "" if unit is None else unit.to_string()))
    names = ("quantity", "p2.5", "p16", "median", "p84", "p97.5", "unit")
    return QTable(rows=rows, names=names)


def best_model(fit: "FitFile | str | Path"):
    """The maximum-posterior sample as a model (:class:`~windsolve.models.WindModel`).

    Parameters
    ----------
    fit : FitFile, str or Path
        A fit's output.

    Returns
    -------
    WindModel
        The base model with the free keys at the sample of highest ln posterior.
    """
    from ..modelfile import model_from_dict
    from ..sweep import apply_changes
    if not isinstance(fit, FitFile):
        fit = read_fit(fit)
    i, w = np.unravel_index(np.argmax(fit.log_prob), fit.log_prob.shape)
    base = model_from_dict(json.loads(fit.attrs["base"]), source=str(fit.path))
    changes = {}
    for j, (key, unit) in enumerate(zip(fit.keys, fit.units, strict=True)):
        x = float(fit.chain[i, w, j])
        changes[key] = f"{x!r} {unit}" if unit else x
    return apply_changes(base, changes)
