"""Parameter sweeps: thousands of models on a laptop or on a dask cluster.

A sweep file (TOML) names a base model (a model file, or an inline
``[model]`` table), a design (``grid``, ``random`` or ``latin``) and one or
more ``[[axis]]`` tables, each a dotted model key with explicit ``values`` or
``start``/``stop`` (and ``num`` and ``spacing`` for a grid).  The whole sweep
is validated -- every row built into a model -- before anything runs.

Execution goes through the ``concurrent.futures.Executor`` interface, which
both a local process pool and a ``dask.distributed`` client
(``Client.get_executor()``) provide: one code path for a laptop and a
cluster.  Rows are sent in batches so the per-task overhead stays small.

Nothing finished is lost: every finished batch is appended to a journal next
to the output (``OUT.h5.partial``, JSON lines, flushed after every batch, so a
killed sweep loses at most the batches in flight, and fsynced at least once a
second, so a machine that crashes loses at most about a second more), and
``--resume`` runs only the missing rows.  The HDF5 file is written at the end
from the finished rows (under a temporary name, then renamed), in design
order, so a resumed sweep gives the same table as an uninterrupted one.

One run per output: the output is locked (``OUT.h5.lock``, fcntl.flock) for
the whole run, every journal record carries a hash of the resolved design
(a resume refuses rows of another sweep), local workers end when the sweep
process dies, and a sweep in which nothing finishes for ``stall_timeout``
seconds (a dask cluster without workers) stops with one line.
"""

import hashlib
import itertools
import json
import logging
import math
import operator
import os
import sys
import time
from collections.abc import Mapping
from concurrent.futures import FIRST_COMPLETED, BrokenExecutor, CancelledError, wait
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ._version import __version__
from .errors import ModelError, OutputError, WindsolveError
from .opacity import nearest

__all__ = ["Sweep", "load_sweep", "run_sweep", "read_sweep_table", "axis_views", "DESIGNS",
           "SUMMARY_COLUMNS"]

DESIGNS = ("grid", "random", "latin")
SPACINGS = ("linear", "log")
SWEEP_KEYS = ("base", "design", "samples", "seed", "profiles", "batch")
AXIS_KEYS = ("key", "values", "start", "stop", "num", "spacing")
# Models per task when the sweep file does not say: the model's
# ModelSpec.sweep_batch (enough that a task is tens of milliseconds of work;
# each task costs the main process a few hundred microseconds), and at least
# four tasks per worker.
TASKS_PER_WORKER = 4


class _BatchLimits(Mapping):
    """``{kind: ModelSpec.sweep_batch}``, read from the model registry."""

    def __getitem__(self, kind):
        from .registry import MODEL_SPECS
        return MODEL_SPECS[kind].sweep_batch

    def __iter__(self):
        from .registry import MODEL_SPECS
        return iter(MODEL_SPECS)

    def __len__(self):
        from .registry import MODEL_SPECS
        return len(MODEL_SPECS)


BATCH_LIMIT = _BatchLimits()
JOURNAL_SUFFIX = ".partial"
FSYNC_INTERVAL = 1.0  # [s] the journal is flushed every batch, written to disk this often
LOCK_SUFFIX = ".lock"  # OUT.h5.lock: held (fcntl.flock) while a sweep writes OUT.h5
DEFAULT_STALL_TIMEOUT = 600.0  # [s] no batch finished for this long: the sweep stops
PARENT_WATCH_INTERVAL = 0.5  # [s] how often a pool worker checks that its parent lives
PR_SET_PDEATHSIG = 1  # Linux prctl option: a signal for the child when its parent dies


def _summary_columns():
    from .result import SUMMARY_UNITS
    return list(SUMMARY_UNITS)


SUMMARY_COLUMNS = _summary_columns()


@dataclass
class Axis:
    """One swept model key and its values (model-file strings, cgs numbers)."""

    key: str
    texts: list  # values as written into each row's model file
    numbers: np.ndarray  # the same values in cgs (floats) for the table
    unit: str  # unit of ``numbers`` ("" for plain numbers)
    shown_unit: str = ""  # the unit the sweep file wrote them in (for people: prints, plots)
    log: bool = False  # shown on a log scale: spacing = "log", or positive values over > 30x


@dataclass(frozen=True)
class AxisView:
    """How to show one axis of a sweep file: values = table[key] * factor [unit]."""

    key: str
    factor: float  # from the table's cgs numbers to ``unit``
    unit: str  # the unit as the sweep file wrote it, else the table's; "" for numbers
    cgs_unit: str  # the table's unit ("" for numbers)
    log: bool  # shown on a log scale (Axis.log; older files: values over more than 30x)

    @property
    def label(self):
        return f"{self.key} [{self.unit}]" if self.unit else self.key


@dataclass
class Sweep:
    """A validated sweep: the base model, the axes and every row's model file."""

    path: Path
    text: str
    kind: str
    design: str
    axes: list
    base: dict  # the base model file (nested dicts)
    rows: list  # per row: {dotted key: value as written in a model file}
    profiles: bool = False
    batch: int = None  # models per task; None: chosen when the sweep runs
    axis_table: np.ndarray = field(default=None)  # (n_rows, n_axes) cgs
    observables: dict = None  # line settings: widths are measured in the workers

    @property
    def digest(self):
        """A hash of the sweep file's text (see :meth:`design_digest` for the journal)."""
        return hashlib.sha256(self.text.encode()).hexdigest()[:16]

    def design_digest(self):
        """A hash of the resolved design: every row's model and what is stored of it.

        The base model as read (so an edited ``base = "model.toml"`` is a
        different sweep even when the sweep file's text is the same), the
        contents of an opacity table file it reads, every row's changes,
        ``profiles`` and ``[observables]``.  The journal stores it in its
        header and in every record; a journal of another design is refused.
        """
        h = hashlib.sha256()
        h.update(json.dumps([self.kind, self.base, self.rows, bool(self.profiles),
                             self.observables], sort_keys=True, default=str).encode())
        table = (self.base.get("opacity") or {}).get("path")
        if isinstance(table, str):
            try:
                h.update(Path(table).read_bytes())
            except OSError:
                pass  # the row models report an unreadable table themselves
        return h.hexdigest()[:16]

    def __len__(self):
        return len(self.rows)


# -- reading a sweep file ---------------------------------------------------------

def _fail(path, text):
    raise ModelError(f"{path}: {text}")


def _axis_spec(model_cls, key, where):
    """(reader, unit) for a dotted key: reader(value) -> checked value."""
    from .opacity import OPACITY_LAWS
    by_key = {p.key: p for p in model_cls.params().values()}
    if key in by_key:
        p = by_key[key]
        if p.kind in (str, bool):
            _fail(where, f"axis key \"{key}\" is not a number; sweep numeric keys only")
        return p.read, (None if p.kind is float else p.kind)
    if key.startswith("opacity."):
        name = key.partition(".")[2]
        for law in OPACITY_LAWS.values():
            for lp in law.parameters:
                if lp.name == name and lp.unit not in (bool, Path):
                    import astropy.units as u
                    unit = None if lp.unit == u.dimensionless_unscaled else lp.unit
                    return (lambda value, lp=lp: lp.read(value, f"[opacity] {lp.name}")), unit
    valid = [k for k in model_cls.keys() if k not in ("name", "opacity.law")]
    _fail(where, f"axis key \"{key}\" is not a {model_cls.kind} model key"
                 f"{nearest(key, valid)}")


def _number(value, unit):
    """cgs float of a checked value."""
    if unit is None:
        return float(value.value) if hasattr(value, "value") else float(value)
    return float(value.to_value(unit))


def _as_text(value):
    """How a checked value is written into a row's model file."""
    import astropy.units as u
    if isinstance(value, u.Quantity):
        if value.unit == u.dimensionless_unscaled:
            return float(value.value)
        return f"{float(value.value)!r} {value.unit.to_string()}"
    return value


def _read_axis(model_cls, table, where, design):
    import astropy.units as u
    for k in table:
        if k not in AXIS_KEYS:
            _fail(where, f"unknown key \"{k}\" in [[axis]]{nearest(k, AXIS_KEYS)}; an axis "
                         f"takes {', '.join(AXIS_KEYS)}")
    if "key" not in table:
        _fail(where, "an [[axis]] needs key = \"section.name\", e.g. key = \"star.luminosity\"")
    key = table["key"]
    read, unit = _axis_spec(model_cls, key, where)
    axis_where = f"{where} [[axis]] {key}"
    if "values" in table:
        if any(k in table for k in ("start", "stop", "num", "spacing")):
            _fail(axis_where, "give either values or start/stop/num, not both")
        values = table["values"]
        if not isinstance(values, list) or not values:
            _fail(axis_where, "values is empty; give at least one value")
        try:
            checked = [read(v) for v in values]
        except ModelError as error:
            _fail(axis_where, str(error))
        return key, "values", checked, unit
    if "start" not in table or "stop" not in table:
        _fail(axis_where, "give values = [...] or start and stop (and num for a grid)")
    if design != "grid" and "num" in table:
        _fail(axis_where, f"num is for grid designs; a {design} design draws [sweep] samples "
                          f"values between start and stop")
    spacing = table.get("spacing", "linear")
    if spacing not in SPACINGS:
        _fail(axis_where, f"spacing = \"{spacing}\": choose linear or log")
    try:
        start, stop = read(table["start"]), read(table["stop"])
    except ModelError as error:
        _fail(axis_where, str(error))
    if isinstance(start, u.Quantity):
        stop = stop.to(start.unit)
    lo = float(getattr(start, "value", start))
    hi = float(getattr(stop, "value", stop))
    if spacing == "log" and not (lo > 0 and hi > 0):
        _fail(axis_where, "a log axis needs positive start and stop")
    if design == "grid":
        num = table.get("num")
        if not isinstance(num, int) or isinstance(num, bool) or num < 1:
            _fail(axis_where, "a grid axis with start and stop needs num = a whole number >= 1")
        if num == 1:
            grid = np.array([lo])
        else:
            grid = np.geomspace(lo, hi, num) if spacing == "log" else np.linspace(lo, hi, num)
        unit_of = start.unit if isinstance(start, u.Quantity) else None
        try:
            checked = [read(g * unit_of if unit_of is not None else float(g)) for g in grid]
        except ModelError as error:
            _fail(axis_where, str(error))
        return key, "values", checked, unit
    return key, "range", (start, stop, spacing, read), unit


def _written_unit(table):
    """The unit of an [[axis]] as written ("Lsun" of start = "3e6 Lsun"); "" if none."""
    first = table.get("start", (table.get("values") or [None])[0])
    parts = first.split(None, 1) if isinstance(first, str) else []
    return parts[1].strip() if len(parts) == 2 else ""


def _wide(x):
    """Positive values over more than a factor 30: shown on a log scale."""
    return bool(np.all(x > 0) and x.max() > 30 * x.min())


def axis_views(path):
    """[AxisView] of a sweep file's axes, in sweep order (older files: the table's units)."""
    import astropy.units as u

    from ._io import column, dataset_unit, group, open_hdf5
    views = []
    with open_hdf5(path) as f:
        g = group(f, "table", path)
        for key in _axes_attr(f, path):
            column(g, key, path)
            dataset_unit(g, key, path)  # a unit astropy reads
            d = g[key]
            cgs = str(d.attrs.get("units", "1"))
            cgs = "" if cgs in ("1", "none") else cgs
            shown = str(d.attrs.get("shown_unit", ""))
            factor, unit = 1.0, cgs
            if shown and cgs:
                try:
                    factor, unit = float(u.Unit(cgs).to(u.Unit(shown))), shown
                except (ValueError, u.UnitsError):
                    pass
            log = bool(d.attrs["log"]) if "log" in d.attrs else _wide(d[()])
            views.append(AxisView(key, factor, unit, cgs, log))
    return views


def apply_changes(model, changes):
    """``model`` with the dotted-key values of ``changes`` (validated again).

    Rebuilding through :meth:`WindModel.replace` reuses the base model's
    already-parsed values: several times cheaper than reading a model file
    per row, which matters in a sweep of thousands.
    """
    by_key = {p.key: name for name, p in model.params().items()}
    kwargs = {}
    opacity = {}
    for key, value in changes.items():
        if key.startswith("opacity."):
            opacity[key.partition(".")[2]] = value
        else:
            kwargs[by_key[key]] = value
    if opacity:
        kwargs["opacity"] = dict(model.opacity.to_toml(), **opacity)
    return model.replace(**kwargs)


def load_sweep(path: str | Path) -> Sweep:
    """Read and validate a sweep file; every row is built into a model.

    Parameters
    ----------
    path : str or Path
        A sweep file (TOML): ``[sweep]`` with ``base`` (a model file, relative
        to the sweep file) or an inline ``[model]`` table, ``design``
        (``grid``, ``random`` or ``latin``), ``samples``, ``seed``; ``[[axis]]``
        tables with a dotted model key and ``values`` or ``start``, ``stop``,
        ``num``, ``spacing``; optionally ``[observables]`` (line settings).

    Returns
    -------
    Sweep
        The design with every row's model-file changes; each row's model has
        been built once, so a bad row fails here and not in a worker.

    Raises
    ------
    ModelError
        A missing or unreadable file, invalid TOML, an unknown table or key
        (with the nearest valid one), or a row whose model is invalid: one
        line naming the file, the key and the fix.
    """
    import tomllib

    from .modelfile import model_from_dict, read_model_file
    from .models import MODELS

    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModelError(f"{path}: no such file; give the path of a sweep file") from None
    except (OSError, UnicodeDecodeError) as error:
        raise ModelError(f"{path}: cannot read ({error})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise ModelError(f"{path}: not valid TOML: {error}") from None
    tables = ("sweep", "model", "axis", "observables")
    for k in data:
        if k not in tables:
            _fail(path, f"unknown table [{k}]{nearest(k, tables)}; a sweep file has [sweep], "
                        f"[[axis]] and optionally [model] and [observables]")
    observables = data.get("observables")
    if observables is not None:
        if not isinstance(observables, dict):
            _fail(path, "[observables] must be a table of line settings")
        _check_observables(path, observables)
    spec = data.get("sweep")
    if not isinstance(spec, dict):
        _fail(path, "the [sweep] table is missing")
    for k in spec:
        if k not in SWEEP_KEYS:
            _fail(path, f"unknown key \"{k}\" in [sweep]{nearest(k, SWEEP_KEYS)}")
    if ("base" in spec) == ("model" in data):
        _fail(path, "give the base model either as [sweep] base = \"model.toml\" or as an "
                    "inline [model] table (exactly one)")
    if "base" in spec:
        base_path = Path(spec["base"])
        if not base_path.is_absolute():
            base_path = path.resolve().parent / base_path
        base = read_model_file(base_path)
        source = str(base_path)
    else:
        base = data["model"]
        source = f"{path} [model]"
    base_model = model_from_dict(base, source=source)  # the base itself must be valid
    if "opacity" in base and isinstance(base["opacity"].get("path"), str):
        base["opacity"]["path"] = str(base_model.opacity.params["path"])
    model_cls = MODELS[base_model.kind]
    design = spec.get("design", "grid")
    if design not in DESIGNS:
        _fail(path, f"design = \"{design}\" is not known{nearest(str(design), DESIGNS)}; "
                    f"choose grid, random or latin")
    axes_tables = data.get("axis")
    if not isinstance(axes_tables, list) or not axes_tables:
        _fail(path, "no [[axis]] tables: give at least one axis to sweep")
    axes = [_read_axis(model_cls, t, path, design) for t in axes_tables]
    keys = [a[0] for a in axes]
    if len(set(keys)) != len(keys):
        _fail(path, "an axis key appears twice")
    seed = spec.get("seed", 0)
    # Format each axis value once: unit formatting costs ~20 us a call, and a
    # sweep can have 10^4 rows.
    options = []
    for _key, mode, spec_a, unit in axes:
        if mode == "values":
            options.append([(_as_text(v), _number(v, unit)) for v in spec_a])
        else:
            options.append(None)
    if design == "grid":
        index_combos = itertools.product(*[range(len(o)) for o in options])
        combos = [[options[j][k] for j, k in enumerate(ks)] for ks in index_combos]
    else:
        samples = spec.get("samples")
        if not isinstance(samples, int) or isinstance(samples, bool) or samples < 1:
            _fail(path, f"design = \"{design}\" needs samples = a whole number >= 1")
        if design == "random":
            unit_cube = np.random.default_rng(seed).random((samples, len(axes)))
        else:
            from scipy.stats import qmc
            unit_cube = qmc.LatinHypercube(d=len(axes), seed=seed).random(samples)
        pickers = [_picker(a, o) for a, o in zip(axes, options, strict=True)]
        combos = [[pickers[j](unit_cube[i, j]) for j in range(len(axes))]
                  for i in range(samples)]
    keys = [a[0] for a in axes]
    rows = [dict(zip(keys, (text for text, _ in combo), strict=True)) for combo in combos]
    numbers = np.array([[number for _, number in combo] for combo in combos], dtype=float)
    numbers = numbers.reshape(len(combos), len(axes))
    # Every axis value was checked on its own above.  Combinations are
    # checked at the corners of the design (and the first row): a model that
    # a cross-field rule rejects there (X + Z > 1, a photosphere inside R0)
    # stops the sweep now; any other invalid row is recorded as failed, with
    # its reason, when it runs.  (Building all rows here would cost ~0.1 ms
    # each -- a third of a Model A solve.)
    for i in _corner_rows(numbers):
        try:
            apply_changes(base_model, rows[i])
        except ModelError as error:
            label = ", ".join(f"{k} = {v}" for k, v in rows[i].items())
            raise ModelError(f"{path} row {i} ({label}): {error}") from None
    profiles = spec.get("profiles", False)
    if not isinstance(profiles, bool):
        _fail(path, "profiles = true or false")
    batch = spec.get("batch")
    if batch is not None and (not isinstance(batch, int) or isinstance(batch, bool)
                              or batch < 1):
        _fail(path, "batch = a whole number >= 1 (models per task)")
    out_axes = [Axis(a[0], [row[a[0]] for row in rows], numbers[:, j],
                     "" if a[3] is None else a[3].to_string(),
                     "" if a[3] is None else _written_unit(t),
                     t.get("spacing") == "log" or ("values" in t and _wide(numbers[:, j])))
                for j, (a, t) in enumerate(zip(axes, axes_tables, strict=True))]
    return Sweep(path, text, base_model.kind, design, out_axes, base, rows, profiles, batch,
                 numbers, observables)


WIDTH_COLUMNS = ("fwhm", "hwzi", "edge_velocity")


def _check_observables(path, table):
    """[observables] holds LineSettings keywords; check them before anything runs."""
    import dataclasses

    from .lines import LineSettings
    names = [f.name for f in dataclasses.fields(LineSettings)]
    for k in table:
        if k not in names:
            _fail(path, f"unknown key \"{k}\" in [observables]{nearest(k, names)}; it takes "
                        f"{', '.join(names)}")
    try:
        LineSettings(**table)
    except ModelError as error:
        _fail(path, f"[observables] {error}")


def _corner_rows(numbers, limit=256):
    """Rows holding the smallest or largest value of every axis (and row 0)."""
    rows = {0}
    for j in range(numbers.shape[1]):
        rows.add(int(np.argmin(numbers[:, j])))
        rows.add(int(np.argmax(numbers[:, j])))
    if numbers.shape[1] <= 8:
        lo = numbers.min(axis=0)
        hi = numbers.max(axis=0)
        at_edge = np.all((numbers == lo) | (numbers == hi), axis=1)
        rows.update(int(i) for i in np.flatnonzero(at_edge)[:limit])
    return sorted(rows)


def _picker(axis, options):
    """u01 -> (model-file text, cgs number) for a random/latin axis."""
    key, mode, spec, unit = axis
    if mode == "values":
        return lambda u01: options[min(int(u01 * len(options)), len(options) - 1)]
    import astropy.units as u
    start, stop, spacing, read = spec
    lo = float(getattr(start, "value", start))
    hi = float(getattr(stop, "value", stop))
    if isinstance(start, u.Quantity):
        text_unit = start.unit.to_string()
        scale = float(start.unit.to(unit))
    else:
        text_unit, scale = None, 1.0
    # Start and stop were checked; every rule on a single value (positive,
    # a fraction) holds between two values that satisfy it.

    def pick(u01):
        u01 = float(u01)
        if spacing == "log":
            x = math.exp(math.log(lo) + u01 * (math.log(hi) - math.log(lo)))
        else:
            x = lo + u01 * (hi - lo)
        return (f"{x!r} {text_unit}" if text_unit is not None else x), x * scale

    return pick


# -- running -------------------------------------------------------------------------

_BASE_CACHE = {}
_SCALES = {}


def _in_unit(q, unit):
    """float(q.to_value(unit)), with the conversion factor cached per unit pair.

    A unit conversion costs microseconds; twenty of them per model were a
    quarter of a Model A solve.
    """
    # Keyed by identity: the solvers build their summaries from module-level
    # unit objects, and hashing a composite unit costs as much as converting.
    key = (id(q.unit), id(unit))
    hit = _SCALES.get(key)
    if hit is None or hit[0] is not q.unit or hit[1] is not unit:
        hit = _SCALES[key] = (q.unit, unit, float(q.unit.to(unit)))
    return float(q.value) * hit[2]


def isothermal_row(model, record, observables):
    """Fill a sweep row of a Model A model from the cgs solver (no units on the way).

    The same numbers as ``solve(model)`` and ``line_widths`` give: the
    summary in the cgs units of SUMMARY_UNITS and, with ``observables``, the
    widths measured in the same compiled call that finishes the solution
    (:func:`windsolve.solve.solve_isothermal_cgs` with ``widths``).  Model A's
    ``ModelSpec.solve_row``.
    """
    from .solve import solve_isothermal_cgs

    settings = None if observables is None else _line_settings(observables).cgs
    raw = solve_isothermal_cgs(model, profile=False, critical=False, widths=settings,
                               explain=False)
    record["converged"] = raw["converged"]
    record["status"] = raw["status"]
    record["message"] = raw["message"]
    summary = raw["summary"]
    for key in SUMMARY_COLUMNS:
        record[key] = summary.get(key, math.nan)
    if observables is not None:
        record["fwhm"], record["hwzi"], record["edge_velocity"] = raw.get("widths", _NO_WIDTHS)


_NO_WIDTHS = (math.nan,) * 3


_SETTINGS_CACHE = []  # [(observables, LineSettings)] of the last sweep seen


def _line_settings(observables):
    """The LineSettings of an [observables] table, built once per worker."""
    if _SETTINGS_CACHE and _SETTINGS_CACHE[0][0] == observables:
        return _SETTINGS_CACHE[0][1]
    from .lines import LineSettings
    settings = LineSettings(**observables)
    _SETTINGS_CACHE[:] = [(observables, settings)]
    return settings


def journal_batch(base, items, profiles=False, observables=None, design=None):
    """:func:`run_batch` and its rows as the journal's JSON lines: ``(text, records)``.

    Serialising in the worker keeps that work off the main process, which
    appends the text to the journal and keeps the records (unpickling them
    costs it far less than parsing the JSON would).  Every record carries
    ``design`` (:meth:`Sweep.design_digest`), so a resume can tell that each
    journaled row belongs to its sweep.
    """
    records = run_batch(base, items, profiles, observables)
    for record in records:
        record["design"] = design
    return "".join(json.dumps(record) + "\n" for record in records), records


def run_batch(base, items, profiles=False, observables=None):
    """Solve a batch of rows in a worker: base model file, [(row, changes)] -> records.

    With ``observables`` (LineSettings keywords) each converged model's line
    widths are measured here, in the worker, and recorded with the row.

    A failure of any kind is recorded with its status and message; it never
    stops the sweep.
    """
    from .modelfile import model_from_dict
    from .registry import spec_for
    from .result import PROFILE_UNITS, SUMMARY_UNITS
    from .solve import solve

    out = []
    base_key = json.dumps(base, sort_keys=True)
    for row, changes in items:
        t0 = time.perf_counter()
        record = {"row": row}
        try:
            if base_key not in _BASE_CACHE:  # parse the base once per worker
                _BASE_CACHE.clear()
                _BASE_CACHE[base_key] = model_from_dict(base, source="sweep base")
            model = apply_changes(_BASE_CACHE[base_key], changes)
            solve_row = spec_for(model).solve_row
            if solve_row is not None and not profiles:
                # No stored profiles: the model's unit-free solve, plain floats all the way.
                solve_row(model, record, observables)
                record["seconds"] = time.perf_counter() - t0
                out.append(record)
                continue
            result = solve(model, profile=profiles or observables is not None)
            record["converged"] = bool(result.converged)
            record["status"] = result.status
            record["message"] = result.message
            for key in SUMMARY_COLUMNS:
                q = result.summary.get(key)
                record[key] = _in_unit(q, SUMMARY_UNITS[key]) if q is not None else math.nan
            if observables is not None:
                for name in WIDTH_COLUMNS:
                    record[name] = math.nan
                if result.converged:
                    from .lines import result_widths_cgs
                    fwhm, hwzi, edge = result_widths_cgs(result, _line_settings(observables))
                    record["fwhm"], record["hwzi"], record["edge_velocity"] = fwhm, hwzi, edge
            if profiles and result.profile:
                record["profile"] = {k: q.to_value(PROFILE_UNITS[k]).tolist()
                                     for k, q in result.profile.items()}
        except WindsolveError as error:
            record.update(converged=False, status="error", message=str(error))
        except Exception as error:  # noqa: BLE001 -- recorded, never fatal to the sweep
            record.update(converged=False, status="error",
                          message=f"{type(error).__name__}: {error}")
        record["seconds"] = time.perf_counter() - t0
        for key in SUMMARY_COLUMNS:  # every row has every column (failed ones NaN)
            record.setdefault(key, math.nan)
        if observables is not None:
            for key in WIDTH_COLUMNS:
                record.setdefault(key, math.nan)
        out.append(record)
    return out


def _trim_journal(journal):
    """Cut a last line that a kill left unfinished, so appended lines start clean."""
    with open(journal, "rb+") as f:
        data = f.read()
        if data and not data.endswith(b"\n"):
            f.truncate(data.rfind(b"\n") + 1)


def _read_journal(journal, sweep, design):
    """Finished rows from a journal written for the same sweep design.

    The header and every record must carry ``design`` (:meth:`Sweep.design_digest`):
    rows journaled by another sweep (another sweep file, an edited base model,
    or two runs that once shared an output) refuse the resume instead of
    entering the table.
    """
    done = {}
    with open(journal, encoding="utf-8", errors="replace") as f:
        lines = f.read().split("\n")
    if not lines or not lines[0].strip():
        return done
    try:
        header = json.loads(lines[0])
    except json.JSONDecodeError:
        header = None
    if not isinstance(header, dict) or "sweep" not in header:
        raise OutputError(f"{journal}: not a windsolve sweep journal; delete it") from None
    if header.get("sweep") != design or header.get("rows") != len(sweep):
        raise OutputError(f"{journal} belongs to a different sweep (another sweep file, base "
                          f"model or design); delete it or write to another output")
    for number, line in enumerate(lines[1:], start=2):
        if not line.strip():
            continue
        try:
            record = json.loads(line)
        except json.JSONDecodeError:
            continue  # a line cut short by a kill: that row runs again
        row = record.get("row") if isinstance(record, dict) else None
        if (record.get("design") if isinstance(record, dict) else None) != design or \
                not isinstance(row, int) or not 0 <= row < len(sweep):
            raise OutputError(f"{journal} line {number} holds a row of another sweep (two runs "
                              f"wrote to one output?); its rows cannot be trusted: delete it "
                              f"and run the sweep again")
        done[row] = record
    return done


def _lock_output(out):
    """Hold an OS lock (fcntl.flock) on ``OUT.lock`` while a sweep writes ``OUT`` and its journal.

    Returns the function that releases it.  A second sweep on the same output
    gets a one-line OutputError naming the process that holds it.  The kernel
    drops the lock when its holder dies (even by SIGKILL), so a lock file left
    by a killed run is harmless; a run that ends removes its lock file.
    Without fcntl (Windows) there is no lock: the journal's design check still
    refuses rows of another sweep, but two runs at once are not detected.
    """
    try:
        import fcntl
    except ImportError:
        return lambda: None
    lock = out.with_name(out.name + LOCK_SUFFIX)
    while True:
        try:
            fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as error:
            raise OutputError(f"{lock}: cannot create the sweep's lock file "
                              f"({error.strerror or error})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            holder = _lock_holder(fd)
            os.close(fd)
            who = f" (pid {holder})" if holder else ""
            raise OutputError(f"{out} is being written by another windsolve sweep{who}; wait "
                              f"for it to finish or choose another -o") from None
        # The holder we waited for may have removed its lock file (and a
        # third run made a new one): hold the lock of the file at the path.
        try:
            same = os.stat(lock).st_ino == os.fstat(fd).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    try:
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
    except OSError as error:  # e.g. a disk with no byte free: give the lock back
        try:
            lock.unlink()
        except OSError:
            pass
        os.close(fd)
        raise OutputError(f"{lock}: cannot write the sweep's lock file "
                          f"({error.strerror or error}); free some space or choose "
                          f"another -o") from None

    def release():
        try:
            lock.unlink()  # while still held: a waiting run then retries on a new file
        except OSError:
            pass
        os.close(fd)

    return release


def _lock_holder(fd):
    """The pid written in a lock file ("" when unreadable)."""
    for _ in range(20):  # the holder writes its pid just after it takes the lock
        try:
            text = os.pread(fd, 32, 0).decode().strip()
        except (OSError, UnicodeDecodeError):
            return ""
        if text.isdigit():
            return text
        time.sleep(0.01)
    return ""


def _check_stall_timeout(stall_timeout):
    """None for no limit (None or 0), else the number of seconds."""
    if stall_timeout is None:
        return None
    try:
        value = float(stall_timeout)
    except (TypeError, ValueError):
        value = math.nan
    if not (value >= 0 and math.isfinite(value)):
        raise ModelError(f"stall timeout {stall_timeout!r}: give a number of seconds >= 0 "
                         f"(0: wait for ever)")
    return value or None


def run_sweep(sweep: Sweep, out: str | Path, workers: int | None = None,
              scheduler: str | None = None, resume: bool = False, quiet: bool = False,
              stall_timeout: float | None = DEFAULT_STALL_TIMEOUT
              ) -> tuple[dict[int, dict], bool]:
    """Run every row not already done; returns (records by row, interrupted).

    Parameters
    ----------
    sweep : Sweep
        From :func:`load_sweep`.
    out : str or Path
        The sweep's HDF5 file, written when every row is done (its layout:
        docs/physics.md, section 9).  Rows are journaled to ``OUT.h5.partial``
        as they finish.
    workers : int, optional
        Local worker processes (default: one per core).
    scheduler : str, optional
        Address of a dask.distributed scheduler to run the rows on instead.
    resume : bool
        Finish an interrupted run from its journal (the journal must belong
        to the same design).
    quiet : bool
        No progress bar.
    stall_timeout : float or None [s]
        When no batch has finished for this long (a dask cluster that lost
        its workers, a stuck worker) the sweep stops; ``None`` or 0 waits
        for ever.

    Returns
    -------
    records : dict of int to dict
        Per finished row: ``converged``, ``status``, ``message``, the summary
        values in cgs (``mass_loss_rate`` [g/s], ``terminal_velocity``
        [cm/s], ...) and, with ``[observables]``, the line widths [cm/s].
    interrupted : bool
        True after Ctrl-C: the finished rows stay in the journal and the
        table is not written.

    Raises
    ------
    OutputError
        A journal of an interrupted run exists and ``resume`` is False, the
        journal belongs to another design, or the output is locked by
        another running sweep.
    WindsolveError
        The sweep stalled for ``stall_timeout`` (the rows finished so far
        stay in the journal for ``resume=True``).

    Notes
    -----
    A row that fails is recorded with its status and message; it never stops
    the sweep.  The output is locked while the sweep runs (see
    :func:`_lock_output`).
    """
    out = Path(out)
    stall_timeout = _check_stall_timeout(stall_timeout)
    release = _lock_output(out)
    try:
        return _run_locked(sweep, out, workers, scheduler, resume, quiet, stall_timeout)
    finally:
        release()


def _one_line(text):
    return " ".join(str(text).split())


def _run_locked(sweep, out, workers, scheduler, resume, quiet, stall_timeout):
    journal = out.with_name(out.name + JOURNAL_SUFFIX)
    if journal.exists() and not resume:
        raise OutputError(f"{journal} holds an interrupted run of a sweep; pass --resume to "
                          f"finish it, or delete it to start again")
    design = sweep.design_digest()
    done = {}
    if resume and journal.exists():
        _trim_journal(journal)
        done = _read_journal(journal, sweep, design)
    todo = [i for i in range(len(sweep)) if i not in done]
    executor, close, describe = _executor(workers, scheduler)
    batch = sweep.batch or _default_batch(sweep.kind, len(todo), workers, scheduler)
    batches = [todo[k:k + batch] for k in range(0, len(todo), batch)]
    bar = None
    if not quiet:
        from tqdm import tqdm
        bar = tqdm(total=len(sweep), initial=len(done), unit="model", desc="sweep")
    converged = sum(1 for r in done.values() if r.get("converged"))
    interrupted = False
    aborted = True  # until the loop ends normally or by Ctrl-C
    pending = set()
    # Wake up at least once a second (and ten times within a short stall
    # timeout) to notice and report a sweep in which nothing finishes.
    tick = 1.0 if stall_timeout is None else min(1.0, max(0.05, stall_timeout / 10))
    report = 5.0 if stall_timeout is None else min(5.0, stall_timeout / 2)  # [s] of no progress
    try:
        with open(journal, "a", encoding="utf-8") as jf:
            if jf.tell() == 0:
                jf.write(json.dumps({"sweep": design, "rows": len(sweep),
                                     "windsolve": __version__}) + "\n")
                jf.flush()
            queue = iter(batches)
            synced = progressed = time.monotonic()
            stalled_shown = 0
            # Keep a bounded number of batches in flight, so memory stays flat.
            limit = max(4 * (workers or os.cpu_count() or 1), 8)
            try:
                while True:
                    while len(pending) < limit:
                        b = next(queue, None)
                        if b is None:
                            break
                        pending.add(executor.submit(journal_batch, sweep.base,
                                                    [(i, sweep.rows[i]) for i in b],
                                                    sweep.profiles, sweep.observables, design))
                    if not pending:
                        break
                    finished, pending = wait(pending, timeout=tick,
                                             return_when=FIRST_COMPLETED)
                    now = time.monotonic()
                    if not finished:
                        idle = now - progressed
                        if stall_timeout is not None and idle >= stall_timeout:
                            where = describe()
                            raise WindsolveError(
                                f"no model finished in {stall_timeout:g} s ({where}); the "
                                f"{len(done)} models finished so far are kept in {journal}: "
                                f"rerun with --resume once it runs, or allow longer with "
                                f"--stall-timeout SECONDS")
                        if bar is not None and int(idle / report) > stalled_shown:
                            stalled_shown = int(idle / report)
                            bar.set_postfix_str(f"no model finished for {idle:.0f} s "
                                                f"({describe()})")
                        continue
                    progressed, stalled_shown = now, 0
                    for fut in finished:
                        try:
                            text, records = fut.result()
                        except BrokenExecutor as error:
                            raise WindsolveError(
                                f"a worker process died ({_one_line(error)}); the models "
                                f"finished so far are kept: rerun with --resume") from None
                        except CancelledError:
                            raise WindsolveError(
                                f"a task was cancelled by the executor ({describe()}: lost "
                                f"the connection?); the models finished so far are kept in "
                                f"{journal}: rerun with --resume") from None
                        except Exception as error:  # noqa: BLE001 -- e.g. dask's KilledWorker
                            why = ": ".join(filter(None, (type(error).__name__,
                                                          _one_line(error))))
                            raise WindsolveError(
                                f"a task failed on the executor ({why}); the models finished "
                                f"so far are kept in {journal}: rerun with --resume") from None
                        jf.write(text)
                        for record in records:
                            done[record["row"]] = record
                            converged += bool(record.get("converged"))
                        jf.flush()  # in the OS's hands: a killed sweep keeps it
                        if now - synced >= FSYNC_INTERVAL:  # on the disk: a crash keeps it
                            os.fsync(jf.fileno())
                            synced = now
                        if bar is not None:
                            bar.update(len(records))
                            failed = len(done) - converged
                            bar.set_postfix(converged=converged, failed=failed, refresh=False)
                aborted = False
            except KeyboardInterrupt:
                interrupted, aborted = True, False
            finally:
                jf.flush()
                os.fsync(jf.fileno())
    finally:
        if bar is not None:
            bar.close()  # before any error line is printed
        close(pending, abort=aborted)
    if interrupted:
        return done, True
    write_sweep_table(sweep, done, out)
    journal.unlink()
    return done, False


def _default_batch(kind, n_todo, workers, scheduler):
    """Models per task: the model's ModelSpec.sweep_batch, fewer when that would
    leave workers idle (fewer than TASKS_PER_WORKER tasks each)."""
    from .registry import spec_for
    n_workers = workers or (8 if scheduler is not None else os.cpu_count() or 1)
    spread = -(-n_todo // (TASKS_PER_WORKER * n_workers))  # ceil
    return max(1, min(spec_for(kind).sweep_batch, spread))


def _executor(workers, scheduler):
    """(executor, close, describe): a local process pool or a dask cluster's executor.

    ``close(pending, abort)`` cancels the futures still pending and shuts the
    executor down (``abort``: also end our local workers now, e.g. a stuck
    one; a dask cluster's workers are not ours to end); ``describe()`` says
    in a few words what runs the sweep (for stall reports).
    """
    if scheduler is not None:
        try:
            from distributed import Client
        except ImportError:
            raise WindsolveError("--scheduler needs dask.distributed: pip install "
                                 "\"windsolve[cluster]\"") from None
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as error:
            raise WindsolveError(f"cannot reach the dask scheduler at {scheduler} "
                                 f"({error})") from None

        def describe():
            # Asked in a daemon thread: a scheduler that hangs must not hang the report.
            answer = []

            def ask():
                try:
                    answer.append(len(client.scheduler_info().get("workers", {})))
                except Exception:  # noqa: BLE001 -- a report only
                    pass

            import threading
            asking = threading.Thread(target=ask, daemon=True)
            asking.start()
            asking.join(timeout=3.0)
            if not answer:
                return f"the dask scheduler at {scheduler} does not answer"
            n = answer[0]
            return f"the dask scheduler at {scheduler} has {n} worker{'s' * (n != 1)}"

        # The client's own log lines ("Couldn't gather keys, rescheduling" when
        # a worker dies) would land on the progress bar's line; what they mean
        # is reported by the stall check.  Back to the user's level on close.
        # Closing the client cancels the futures still pending, for which
        # dask's executor logs a traceback each ("Exception in callback ...
        # FutureCancelledError"): quiet too while the sweep runs and closes.
        quiet_loggers = {name: logging.getLogger(name).level
                         for name in ("distributed", "distributed.client", "tornado.application")}
        for name in quiet_loggers:
            logging.getLogger(name).setLevel(logging.CRITICAL)

        def close(pending=(), abort=False):
            try:
                client.close()
            finally:
                for name, level in quiet_loggers.items():
                    logging.getLogger(name).setLevel(level)

        return client.get_executor(), close, describe
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    n = workers or os.cpu_count() or 1
    # "spawn": workers start clean (no inherited threads or locks) and load
    # the compiled kernels from numba's on-disk cache.
    from .registry import plugin_modules
    pool = ProcessPoolExecutor(max_workers=n, mp_context=multiprocessing.get_context("spawn"),
                               initializer=_worker_init,
                               initargs=(os.getpid(), plugin_modules()))

    def close(pending=(), abort=False):
        if abort:  # a stuck worker would keep this process from exiting
            # Kill without cancelling first: the pool then fails every pending future
            # itself.  (Cancelled futures of a pool that breaks make CPython 3.11's
            # manager thread print an InvalidStateError traceback.)
            for process in list((getattr(pool, "_processes", None) or {}).values()):
                process.kill()  # SIGKILL: ends a stopped or stuck worker too
            pool.shutdown(wait=False)
            return
        for fut in pending:
            fut.cancel()
        pool.shutdown(wait=False, cancel_futures=True)

    return pool, close, lambda: f"{n} local worker process{'es' * (n != 1)}"


def _worker_init(parent=None, modules=()):
    """Workers leave Ctrl-C to the main process, which stops the sweep cleanly,
    and end when that process dies (even by SIGKILL), not later.  ``modules``
    (:func:`windsolve.registry.plugin_modules`) are imported first: they
    register the models defined outside windsolve.

    On Linux the kernel sends SIGKILL when the parent dies
    (``prctl(PR_SET_PDEATHSIG)``); everywhere a daemon thread also checks
    ``os.getppid()`` every PARENT_WATCH_INTERVAL seconds.
    """
    import importlib
    import signal
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    for module in modules:
        try:
            importlib.import_module(module)
        except Exception:  # noqa: BLE001 -- its rows then record the error
            pass
    if parent is None:
        return
    if sys.platform.startswith("linux"):
        try:
            import ctypes
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
        except (OSError, AttributeError):
            pass  # the thread below still watches
    if os.getppid() != parent:  # died before we got here
        os._exit(1)
    import threading
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True,
                     name="windsolve-watch-parent").start()


def _watch_parent(parent):
    while True:
        time.sleep(PARENT_WATCH_INTERVAL)
        if os.getppid() != parent:
            os._exit(1)


# -- output --------------------------------------------------------------------------

def write_sweep_table(sweep, records, out):
    """The sweep's HDF5 file: /table (one dataset per column) and /profiles."""
    from ._io import dataset, stamp, strings, write_hdf5
    from .result import HYDROSTATIC_EFOLDS, SUMMARY_UNITS, _unit_text, write_profile

    n = len(sweep)
    keys = list(SUMMARY_COLUMNS) + ["seconds"]
    if sweep.observables is not None:
        keys += list(WIDTH_COLUMNS)
    rows = [records[i] for i in range(n)]
    try:  # one C-level lookup a row when every row has every column (as run_batch makes them)
        get = operator.itemgetter(*keys)
        data = np.array([get(row) for row in rows], dtype=float).reshape(n, len(keys))
    except KeyError:
        data = np.array([[row.get(key, math.nan) for key in keys] for row in rows],
                        dtype=float).reshape(n, len(keys))
    index = {key: j for j, key in enumerate(keys)}

    def column(key):
        return data[:, index[key]]

    def fill(f):
        stamp(f, sweep.kind)
        f.attrs["sweep_toml"] = sweep.text
        f.attrs["sweep_file"] = str(sweep.path)
        f.attrs["design"] = sweep.design
        f.attrs["axes"] = json.dumps([a.key for a in sweep.axes])
        g = f.create_group("table")
        for a in sweep.axes:
            d = dataset(g, a.key, a.numbers, a.unit or "1")
            d.attrs["shown_unit"] = a.shown_unit
            d.attrs["log"] = a.log
        for key in SUMMARY_COLUMNS:
            dataset(g, key, column(key), _unit_text(SUMMARY_UNITS[key]))
        if sweep.observables is not None:
            for key in WIDTH_COLUMNS:
                dataset(g, key, column(key), "cm / s")
            f.attrs["observables"] = json.dumps(sweep.observables)
        dataset(g, "converged", np.array([bool(row.get("converged")) for row in rows]), "1")
        # (a hydrostatic base, not a wind: see windsolve.result.HYDROSTATIC_EFOLDS)
        dataset(g, "hydrostatic", np.nan_to_num(column("base_density_efolds"))
                > HYDROSTATIC_EFOLDS, "1")
        for key in ("status", "message"):
            strings(g, key, (row.get(key, "") for row in rows))
        dataset(g, "seconds", column("seconds"), "s")
        for i, row in enumerate(rows):
            if row.get("profile"):
                write_profile(f.create_group(f"profiles/{i}"), row["profile"])

    return write_hdf5(out, fill)


SWEEP_REQUIRED = ("mass_loss_rate", "terminal_velocity")  # numbers of every converged row


def read_sweep_table(path: str | Path) -> tuple[dict[str, np.ndarray], dict]:
    """{column: numpy array} and the root attributes of a sweep file.

    Parameters
    ----------
    path : str or Path
        A sweep's HDF5 file (layout: docs/physics.md, section 9).

    Returns
    -------
    table : dict of str to numpy.ndarray
        One 1-D array per column, row i being model i of the design: the axes
        by dotted key, the summary values (``mass_loss_rate`` [g/s],
        ``terminal_velocity`` [cm/s], ``sonic_radius`` [cm], ...), the line
        widths [cm/s] when measured, ``converged`` and ``status``; summary
        and width columns in cgs whatever unit the file names.
    attrs : dict
        The file's root attributes (sweep file text, version, ...).

    Raises
    ------
    OutputError
        A damaged file, in one line naming the file and column.  Every column
        is checked: one-dimensional, one length, numbers or text, a unit of
        the right dimension, finite or NaN, speeds below light, no NaN in a
        converged row's mass-loss rate and terminal velocity.
    """
    import astropy.units as u

    from ._io import (
        check_photosphere,
        check_values,
        column,
        dataset_unit,
        group,
        open_hdf5,
        require_kind,
        text_attr,
    )
    from .errors import OutputError
    from .models import MODELS
    from .result import SUMMARY_POSITIVE, SUMMARY_UNITS

    known = dict(SUMMARY_UNITS, seconds=u.s, **{k: u.cm / u.s for k in WIDTH_COLUMNS})
    with open_hdf5(path) as f:
        require_kind(f, path, "sweep", "; compare and plot read it as a whole")
        kind = text_attr(f.attrs, "model", path, "the file", default="")
        if "model" in f.attrs and kind not in MODELS:
            raise OutputError(f"{path}: the model attribute is \"{kind}\", not a windsolve "
                              f"model kind (one of: {', '.join(MODELS)})")
        axes = _axes_attr(f, path)
        g = group(f, "table", path)
        n = column(g, "converged", path).size
        if n == 0:
            raise OutputError(f"{path}: /table has no rows (a sweep has at least one model); "
                              f"the file is damaged")
        table = {"converged": column(g, "converged", path, n).astype(bool)}
        table["status"] = column(g, "status", path, n, text=True)
        for key in (*axes, *SWEEP_REQUIRED, *g.keys()):
            if key in table:
                continue
            d = g.get(key)
            if (key not in axes and key not in SWEEP_REQUIRED
                    and getattr(d, "dtype", None) is not None and d.dtype.kind in "OSU"):
                table[key] = column(g, key, path, n, text=True)
                continue
            values = column(g, key, path, n)
            where = f"/table/{key}"
            unit = dataset_unit(g, key, path, known.get(key))
            check_values(values, path, where, unit, positive=key in SUMMARY_POSITIVE,
                         allow_nan=key not in axes, cgs=known.get(key))
            if key in known and unit != known[key]:
                values = values * unit.to(known[key])
            if key in SWEEP_REQUIRED and np.isnan(values[table["converged"]]).any():
                i = int(np.flatnonzero(table["converged"] & np.isnan(values))[0])
                raise OutputError(f"{path}: {where} is NaN at row {i}, a converged model; "
                                  f"the file is damaged")
            table[key] = values
        if all(f"photosphere_{k}" in table for k in ("luminosity", "radius", "temperature")):
            check_photosphere(path, "/table", *(table[f"photosphere_{k}"] for k in
                                                ("luminosity", "radius", "temperature")),
                              rows=table["converged"])
        attrs = dict(f.attrs)
    return table, attrs


def _axes_attr(f, path):
    """The sweep's axis keys from its ``axes`` attribute (a JSON list of names)."""
    from ._io import text_attr
    from .errors import OutputError
    text = text_attr(f.attrs, "axes", path, "the file")
    try:
        axes = json.loads(text)
    except json.JSONDecodeError:
        axes = None
    if not (isinstance(axes, list) and axes and all(isinstance(a, str) for a in axes)):
        raise OutputError(f"{path}: the axes attribute {text[:40]!r} is not a JSON list of "
                          f"the swept keys; the file is damaged")
    return axes
