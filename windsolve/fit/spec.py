"""Fit files: a base model, free keys with priors, observations, line and sampler settings.

A fit file (TOML) is validated whole -- base model, every prior, the
observations, the line settings, the sampler settings, and one probe solve
at the priors' centre -- before anything runs or is written::

    [fit]
    base = "demo.toml"                  # a model file (relative to the fit file)
    observations = "observed_widths.csv"
    object = "Calder Var A (invented)"  # needed when the CSV holds several objects
    model_uncertainty = 0.05            # fractional, added in quadrature (default 0)

    [[free]]
    key = "star.luminosity"             # any numeric dotted model key
    prior = "log-uniform"               # uniform | log-uniform | normal | truncated-normal
    lower = "3e6 Lsun"
    upper = "5e6 Lsun"

    [lines]                             # LineSettings keywords (as a sweep's [observables])
    turbulence = "10 km/s"

    [sampler]                           # emcee's affine-invariant ensemble sampler
    walkers = 16
    steps = 2000
    seed = 1
    thin = 1
    burn = 500                          # steps left out of the summaries (default steps/4)

Each prior's numbers carry the key's unit (plain numbers for dimensionless
keys) and the summaries are given in the unit of the prior's first number.
A ``log-uniform`` key is sampled in ln x (flat in ln x between the bounds,
density 1/x); the others in x.
"""

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ModelError
from ..io import parse_toml, read_input_text
from ..modelfile import model_from_dict, read_model_file
from ..observe import read_observed
from ..opacity import nearest
from ..registry import MODELS
from ..sweep import _axis_spec, apply_changes
from ..sweep.spec import _check_observables

__all__ = ["PRIORS", "Prior", "FitSpec", "load_fit", "SAMPLER_KEYS"]

_UNITS = {}  # unit text -> astropy unit, parsed once
PRIORS = ("uniform", "log-uniform", "normal", "truncated-normal")
FIT_KEYS = ("base", "observations", "object", "model_uncertainty")
FREE_KEYS = ("key", "prior", "lower", "upper", "mean", "sigma")
SAMPLER_KEYS = ("walkers", "steps", "seed", "thin", "burn")
TABLES = ("fit", "free", "lines", "sampler")
# What each prior needs (and allows) besides key and prior.
PRIOR_NUMBERS = {"uniform": ("lower", "upper"), "log-uniform": ("lower", "upper"),
                 "normal": ("mean", "sigma"),
                 "truncated-normal": ("mean", "sigma", "lower", "upper")}


@dataclass(frozen=True)
class Prior:
    """One free key and its prior, in the fit file's unit.

    Attributes
    ----------
    key : str
        The dotted model key.
    kind : str
        One of :data:`PRIORS`.
    unit : str
        The unit of the prior's numbers (``""`` for a dimensionless key).
    lower, upper : float
        Bounds in ``unit`` (-inf/inf for a normal prior).
    mean, sigma : float
        For (truncated) normal priors, in ``unit`` (NaN otherwise).
    """

    key: str
    kind: str
    unit: str
    lower: float = -math.inf
    upper: float = math.inf
    mean: float = math.nan
    sigma: float = math.nan

    @property
    def log(self) -> bool:
        """Sampled in ln x (a log-uniform prior)."""
        return self.kind == "log-uniform"

    def to_value(self, theta: np.ndarray) -> np.ndarray:
        """Sampled coordinate -> value in :attr:`unit`.

        Parameters
        ----------
        theta : numpy.ndarray
            Sampled coordinates (x, or ln x for a log-uniform prior).

        Returns
        -------
        numpy.ndarray
            Values in :attr:`unit`.
        """
        return np.exp(theta) if self.log else np.asarray(theta, float)

    def to_theta(self, x: np.ndarray) -> np.ndarray:
        """Value in :attr:`unit` -> sampled coordinate.

        Parameters
        ----------
        x : numpy.ndarray
            Values in :attr:`unit`.

        Returns
        -------
        numpy.ndarray
            Sampled coordinates.
        """
        return np.log(x) if self.log else np.asarray(x, float)

    def log_prior(self, theta: np.ndarray) -> np.ndarray:
        """ln prior density in the sampled coordinate, up to a constant (-inf outside).

        Parameters
        ----------
        theta : numpy.ndarray
            Sampled coordinates.

        Returns
        -------
        numpy.ndarray
            ln prior (dimensionless); -inf outside the bounds.
        """
        theta = np.asarray(theta, float)
        x = self.to_value(theta)
        inside = (x >= self.lower) & (x <= self.upper)
        if self.kind in ("normal", "truncated-normal"):
            out = -0.5 * ((x - self.mean) / self.sigma) ** 2
        else:  # flat in theta (x, or ln x)
            out = np.zeros_like(theta)
        return np.where(inside, out, -np.inf)

    def centre(self) -> float:
        """A central value in :attr:`unit`: the mean, or the (geometric) middle of the bounds."""
        if self.kind in ("normal", "truncated-normal"):
            return min(max(self.mean, self.lower), self.upper)
        if self.log:
            return math.sqrt(self.lower * self.upper)
        return 0.5 * (self.lower + self.upper)

    def draw(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` sampled coordinates drawn from the prior (a normal one truncated at 5 sigma).

        Parameters
        ----------
        rng : numpy.random.Generator
            The random numbers.
        n : int
            How many.

        Returns
        -------
        numpy.ndarray
            Sampled coordinates.
        """
        if self.kind == "uniform":
            return rng.uniform(self.lower, self.upper, n)
        if self.log:
            return rng.uniform(math.log(self.lower), math.log(self.upper), n)
        lo = max(self.lower, self.mean - 5 * self.sigma)
        hi = min(self.upper, self.mean + 5 * self.sigma)
        out = np.empty(n)
        filled = 0
        while filled < n:  # rejection from the normal, within the bounds
            x = rng.normal(self.mean, self.sigma, 4 * n)
            x = x[(x >= lo) & (x <= hi)]
            take = min(n - filled, len(x))
            out[filled:filled + take] = x[:take]
            filled += take
        return out

    def quantity(self, x: float) -> "object":
        """A value in :attr:`unit` as the solver takes it: a Quantity (a float if unitless).

        Parameters
        ----------
        x : float
            The value in :attr:`unit`.

        Returns
        -------
        astropy.units.Quantity or float
            ``x`` in :attr:`unit` (one unit object per prior: no unit text parsed per model).
        """
        if not self.unit:
            return float(x)
        unit = _UNITS.get(self.unit)
        if unit is None:
            import astropy.units as u
            unit = _UNITS[self.unit] = u.Unit(self.unit)
        return float(x) * unit

    def text(self, x: float) -> "str | float":
        """A value in :attr:`unit` as a model file writes it (exact: repr of the float).

        Parameters
        ----------
        x : float
            The value in :attr:`unit`.

        Returns
        -------
        str or float
            ``"X UNIT"``, or the float for a dimensionless key.
        """
        return float(x) if not self.unit else f"{float(x)!r} {self.unit}"


@dataclass
class FitSpec:
    """A validated fit file.

    Attributes
    ----------
    path : Path
        The fit file.
    text : str
        Its text (stored with the chain).
    base : dict
        The base model file (nested dicts, as a sweep's base).
    base_model : WindModel
        The base model, built and checked.
    priors : list of Prior
        One per free key, in file order.
    observations : list of Observation
        The object's measurements (cgs).
    lines : dict or None
        LineSettings keywords, or None when only terminal velocities are observed.
    model_uncertainty : float
        Fractional model uncertainty added in quadrature (dimensionless).
    walkers, steps, seed, thin, burn : int
        Sampler settings.
    """

    path: Path
    text: str
    base: dict
    base_model: object
    priors: list
    observations: list
    lines: dict | None
    model_uncertainty: float = 0.0
    walkers: int = 32
    steps: int = 1000
    seed: int = 0
    thin: int = 1
    burn: int = 0
    object: str | None = None
    extra: dict = field(default_factory=dict)

    @property
    def ndim(self) -> int:
        """The number of free keys."""
        return len(self.priors)

    @property
    def keys(self) -> list:
        """The free keys, in file order."""
        return [p.key for p in self.priors]

    def changes(self, theta: np.ndarray) -> dict:
        """The dotted-key changes of one point of the sampled space (Quantities in the unit).

        Parameters
        ----------
        theta : numpy.ndarray
            One point, (ndim,), sampled coordinates.

        Returns
        -------
        dict
            Dotted key -> value (:meth:`Prior.quantity`).
        """
        return {p.key: p.quantity(p.to_value(t)) for p, t in zip(self.priors, theta, strict=True)}

    def log_prior(self, theta: np.ndarray) -> np.ndarray:
        """ln prior of points ``theta`` (shape (n, ndim)), up to a constant.

        Parameters
        ----------
        theta : numpy.ndarray
            Points, (n, ndim), sampled coordinates.

        Returns
        -------
        numpy.ndarray
            ln prior per point (dimensionless; -inf outside a bound).
        """
        theta = np.atleast_2d(theta)
        return sum(p.log_prior(theta[:, j]) for j, p in enumerate(self.priors))


def _fail(path, text):
    raise ModelError(f"{path}: {text}")


def _whole(path, table, key, default, minimum):
    value = table.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        _fail(path, f"[sampler] {key} = {value!r}: must be a whole number >= {minimum}")
    return value


def _read_prior(path, model_cls, table, index):
    where = f"[[free]] {index + 1}"
    if not isinstance(table, dict):
        _fail(path, f"{where} must be a table with key and prior")
    for k in table:
        if k not in FREE_KEYS:
            _fail(path, f"{where}: unknown key \"{k}\"{nearest(k, FREE_KEYS)}; it takes "
                        f"{', '.join(FREE_KEYS)}")
    key = table.get("key")
    if not isinstance(key, str):
        _fail(path, f"{where}: key = \"a dotted model key\" is missing, e.g. "
                    f"key = \"star.luminosity\"")
    where = f"[[free]] {key}"
    try:
        reader, cgs_unit = _axis_spec(model_cls, key, f"{path} {where}")
    except ModelError as error:  # the sweeps' check, in a fit's words
        raise ModelError(str(error).replace("axis key", "free key").replace(
            "sweep numeric keys only", "only numeric keys can be free")) from None
    kind = table.get("prior")
    if kind not in PRIORS:
        _fail(path, f"{where}: prior = {kind!r} is not known{nearest(str(kind), PRIORS)}; "
                    f"choose one of {', '.join(PRIORS)}")
    needed = PRIOR_NUMBERS[kind]
    for k in ("lower", "upper", "mean", "sigma"):
        if k in needed and k not in table:
            _fail(path, f"{where}: a {kind} prior needs {', '.join(needed)}; {k} is missing")
        if k not in needed and k in table:
            _fail(path, f"{where}: a {kind} prior takes {', '.join(needed)}, not {k}")
    unit = None
    numbers = {}
    for k in needed:  # file order of PRIOR_NUMBERS: the first number's unit is the fit's
        value = table[k]
        try:
            checked = reader(value) if k != "sigma" else None
        except ModelError as error:
            _fail(path, f"{where} {k}: {error}")
        if cgs_unit is None:  # dimensionless
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                _fail(path, f"{where}: {k} = {value!r}: a plain number (the key has no unit)")
            numbers[k] = float(value)
            continue
        if k == "sigma":
            from .._units import to_quantity
            try:
                checked = to_quantity(value, cgs_unit, f"{where} sigma", convert=False)
            except ModelError as error:
                _fail(path, str(error))
        if unit is None:
            unit = checked.unit
        numbers[k] = float(checked.to_value(unit))
    for k, x in numbers.items():
        if not math.isfinite(x):
            _fail(path, f"{where}: {k} must be finite")
    lo, hi = numbers.get("lower", -math.inf), numbers.get("upper", math.inf)
    if not lo < hi:
        _fail(path, f"{where}: lower must be below upper")
    if kind == "log-uniform" and not lo > 0:
        _fail(path, f"{where}: a log-uniform prior needs lower > 0")
    if "sigma" in numbers and not numbers["sigma"] > 0:
        _fail(path, f"{where}: sigma must be positive")
    if kind == "truncated-normal" and not (lo - 5 * numbers["sigma"] < numbers["mean"]
                                           < hi + 5 * numbers["sigma"]):
        _fail(path, f"{where}: the mean lies more than 5 sigma outside [lower, upper]")
    return Prior(key, kind, "" if unit is None else unit.to_string(), lo, hi,
                 numbers.get("mean", math.nan), numbers.get("sigma", math.nan))


def load_fit(path: "str | Path", probe: bool = True) -> FitSpec:
    """Read and validate a fit file whole (one-line errors).

    Parameters
    ----------
    path : str or Path
        The fit file (layout in the module docstring).
    probe : bool
        Also solve the model at the priors' centre and check that every
        observed quantity is predicted there (default True).

    Returns
    -------
    FitSpec
        The checked fit.

    Raises
    ------
    ModelError
        Any bad table or value: an unknown table or key, a prior without its
        numbers, a unit or a range, a free key that does not exist or cannot
        vary (text, true/false), a key given twice, a bad observations file,
        a line setting, a sampler setting, fewer walkers than twice the
        number of free keys (or an odd number), or an observation the model
        does not predict at the priors' centre.
    """
    path = Path(path)
    text = read_input_text(path, "a fit file", "give the path of a fit file (TOML)",
                           "a fit file is TOML text, saved as UTF-8")
    data = parse_toml(text, path)
    for k in data:
        if k not in TABLES:
            _fail(path, f"unknown table [{k}]{nearest(k, TABLES)}; a fit file has "
                        f"[fit], [[free]], [lines] and [sampler]")
    fit = data.get("fit")
    if not isinstance(fit, dict):
        _fail(path, "the [fit] table is missing (base, observations)")
    for k in fit:
        if k not in FIT_KEYS:
            _fail(path, f"unknown key \"{k}\" in [fit]{nearest(k, FIT_KEYS)}; it takes "
                        f"{', '.join(FIT_KEYS)}")
    for k in ("base", "observations"):
        if not isinstance(fit.get(k), str):
            _fail(path, f"[fit] {k} = \"a file\" is missing")
    base_path = Path(fit["base"])
    if not base_path.is_absolute():
        base_path = path.resolve().parent / base_path
    base = read_model_file(base_path)
    base_model = model_from_dict(base, source=str(base_path))
    if "opacity" in base and isinstance(base["opacity"].get("path"), str):
        base["opacity"]["path"] = str(base_model.opacity.params["path"])
    model_cls = MODELS[base_model.kind]
    obs_path = Path(fit["observations"])
    if not obs_path.is_absolute():
        obs_path = path.resolve().parent / obs_path
    obj = fit.get("object")
    if obj is not None and not isinstance(obj, str):
        _fail(path, "[fit] object = \"the star's name as the observations file gives it\"")
    observations = read_observed(obs_path, obj)
    f = fit.get("model_uncertainty", 0.0)
    if isinstance(f, bool) or not isinstance(f, (int, float)) or not 0 <= f < 10:
        _fail(path, f"[fit] model_uncertainty = {f!r}: a fraction >= 0 (e.g. 0.05)")
    free = data.get("free")
    if not isinstance(free, list) or not free:
        _fail(path, "no [[free]] tables: give at least one free key with its prior")
    priors = [_read_prior(path, model_cls, t, i) for i, t in enumerate(free)]
    keys = [p.key for p in priors]
    for k in keys:
        if keys.count(k) > 1:
            _fail(path, f"[[free]] {k} appears twice")
    lines = data.get("lines")
    if lines is not None:
        if not isinstance(lines, dict):
            _fail(path, "[lines] must be a table of line settings")
        _check_observables(path, {k: v for k, v in lines.items()})
    needs_lines = any(o.quantity != "terminal_velocity" for o in observations)
    if needs_lines:
        lines = dict(lines or {})
    else:
        lines = None  # only terminal velocities: no synthetic line is needed
    sampler = data.get("sampler", {})
    if not isinstance(sampler, dict):
        _fail(path, "[sampler] must be a table")
    for k in sampler:
        if k not in SAMPLER_KEYS:
            _fail(path, f"unknown sampler option \"{k}\" in [sampler]"
                        f"{nearest(k, SAMPLER_KEYS)}; it takes {', '.join(SAMPLER_KEYS)}")
    ndim = len(priors)
    walkers = _whole(path, sampler, "walkers", max(16, 4 * ndim), 2)
    if walkers < 2 * ndim or walkers % 2:
        _fail(path, f"[sampler] walkers = {walkers}: the ensemble sampler needs an even "
                    f"number of at least twice the free keys ({2 * ndim} for {ndim})")
    steps = _whole(path, sampler, "steps", 1000, 1)
    seed = _whole(path, sampler, "seed", 0, 0)
    thin = _whole(path, sampler, "thin", 1, 1)
    burn = _whole(path, sampler, "burn", steps // 4, 0)
    if burn >= steps:
        _fail(path, f"[sampler] burn = {burn}: must be below steps = {steps}")
    spec = FitSpec(path, text, base, base_model, priors, observations, lines, float(f),
                   walkers, steps, seed, thin, burn, obj)
    centre = {p.key: p.text(p.centre()) for p in priors}
    try:
        apply_changes(base_model, centre)
    except ModelError as error:
        _fail(path, f"the model at the priors' centre ({_label(centre)}): {error}")
    if probe:
        _probe(spec, centre)
    return spec


def _label(changes):
    return ", ".join(f"{k} = {v}" for k, v in changes.items())


def _probe(spec, centre):
    """Solve at the priors' centre: every observed quantity must be predicted there."""
    from ..sweep import run_batch
    (record,) = run_batch(spec.base, [(0, centre)], False, spec.lines)
    if record.get("status") == "error" and spec.lines is not None:
        (plain,) = run_batch(spec.base, [(0, centre)], False, None)
        if plain.get("converged"):  # it solves, but its lines cannot be measured
            widths = sorted({o.quantity for o in spec.observations} - {"terminal_velocity"})
            _fail(spec.path, f"the model predicts no {', '.join(widths)} at the priors' "
                             f"centre ({_label(centre)}): {record.get('message')}; leave "
                             f"those measurements out")
    if record.get("status") == "error":
        _fail(spec.path, f"the model at the priors' centre ({_label(centre)}) cannot be "
                         f"solved: {record.get('message')}")
    if not record.get("converged"):
        return  # the centre may lie where no wind exists; the chain will say so
    for o in spec.observations:
        if not math.isfinite(record.get(o.quantity, math.nan)):
            _fail(spec.path, f"observation {o.label()} (line {o.row}): the model predicts no "
                             f"{o.quantity} at the priors' centre ({_label(centre)}); check "
                             f"[lines] or leave the measurement out")
