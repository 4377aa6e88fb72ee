"""Sweep rows in a worker: a batch of rows in, records (and their journal lines) out.

:func:`run_batch` is the only code that runs in workers; it never raises
(every failure is a recorded row).  :func:`_worker_init` starts each local
pool worker.
"""

import json
import math
import os
import sys
import time

from ..errors import WindsolveError
from .spec import apply_changes
from .table import SUMMARY_COLUMNS, WIDTH_COLUMNS

PARENT_WATCH_INTERVAL = 0.5  # [s] how often a pool worker checks that its parent lives
PR_SET_PDEATHSIG = 1  # Linux prctl option: a signal for the child when its parent dies


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
    (:func:`windsolve.models.isothermal.solve_isothermal_cgs` with ``widths``).  Model A's
    ``ModelSpec.solve_row``.

    Parameters
    ----------
    model : IsothermalWind
        The row's model.
    record : dict
        The row's record, filled in place (converged, status, message, every
        summary column [cgs] and, with ``observables``, fwhm, hwzi and
        edge_velocity [cm s^-1]).
    observables : dict or None
        LineSettings keywords, or None to measure no widths.
    """
    from ..models.isothermal import solve_isothermal_cgs

    settings = None if observables is None else _line_settings(observables).cgs
    solution = solve_isothermal_cgs(model, profile=False, critical=False, widths=settings,
                                    explain=False)
    record["converged"] = solution.converged
    record["status"] = solution.status
    record["message"] = solution.message
    summary = solution.summary
    for key in SUMMARY_COLUMNS:
        record[key] = summary.get(key, math.nan)
    if observables is not None:
        record.update(zip(WIDTH_COLUMNS, solution.widths or _NO_WIDTHS, strict=True))


_NO_WIDTHS = (math.nan,) * 3


_SETTINGS_CACHE = []  # [(observables, LineSettings)] of the last sweep seen


def _line_settings(observables):
    """The LineSettings of an [observables] table, built once per worker."""
    if _SETTINGS_CACHE and _SETTINGS_CACHE[0][0] == observables:
        return _SETTINGS_CACHE[0][1]
    from ..lines import LineSettings
    settings = LineSettings(**observables)
    _SETTINGS_CACHE[:] = [(observables, settings)]
    return settings


def journal_batch(base, items, profiles=False, observables=None, design=None):
    """:func:`run_batch` and its rows as the journal's JSON lines: ``(text, ends)``.

    Serialising in the worker keeps that work off the main process, which
    appends the text to the journal and keeps only how each row ended: the
    records themselves go to the journal alone (the table is written from
    it).  ``ends`` holds :func:`row_end` of every record.  Every record
    carries ``design`` (:meth:`Sweep.design_digest`), so a resume can tell
    that each journaled row belongs to its sweep.

    Parameters
    ----------
    base : dict
        The base model file (nested dicts).
    items : list of tuple
        (row index, {dotted key: value}) per row.
    profiles : bool
        Store each row's profile in its record.
    observables : dict or None
        LineSettings keywords, or None.
    design : str or None
        The sweep's design digest.

    Returns
    -------
    text : str
        One JSON line per record.
    ends : list of tuple
        :func:`row_end` of every record.

    Notes
    -----
    In a local pool worker started with a row queue (:func:`_worker_init`)
    every row is sent as ``(line, end)`` on that queue as soon as it is
    solved, and ``("", [])`` is returned: the main process journals and counts
    each row when it ends (the progress bar moves per model, and Ctrl-C keeps
    every finished row of a batch still running).
    """
    if _ROW_QUEUE:  # a local pool worker: each row goes to the main process as it ends
        rows = _ROW_QUEUE[0]

        def send(record):
            record["design"] = design
            rows.put((json.dumps(record) + "\n", row_end(record)))

        run_batch(base, items, profiles, observables, on_row=send)
        return "", []
    records = run_batch(base, items, profiles, observables)
    for record in records:
        record["design"] = design
    return "".join(json.dumps(record) + "\n" for record in records), \
        [row_end(record) for record in records]


def row_end(record):
    """How a row ended, in a few bytes: ``(row, converged, status, hydrostatic)``.

    ``hydrostatic``: converged with a hydrostatic base (more than
    :data:`windsolve.result.HYDROSTATIC_EFOLDS` density e-folds below the
    sonic point).  A status that is not text (a damaged journal) is given as
    its repr, so it can be counted (the table's writer refuses it).

    Parameters
    ----------
    record : dict
        A row's record (``row``, ``converged``, ``status``, ``base_density_efolds``).

    Returns
    -------
    tuple
        (row : int, converged : bool, status : str or None, hydrostatic : bool).
    """
    from ..result import HYDROSTATIC_EFOLDS
    status = record.get("status")
    if status is not None and not isinstance(status, str):
        status = repr(status)
    converged = bool(record.get("converged"))
    efolds = record.get("base_density_efolds", 0.0)
    static = converged and isinstance(efolds, (int, float)) and efolds > HYDROSTATIC_EFOLDS
    return record["row"], converged, status, bool(static)


# -- a Model A row from the base model's kernel vectors ------------------------------

FAST_ROWS = True  # False: every row is built by apply_changes (the reference path)

# Model A keys (-> field) whose checked cgs value goes to known slots of the kernel
# vectors (P, O) and into no cross-field rule of IsothermalWind but the ones
# :meth:`_FastRows.row` guards.  A row changing any other key (radius, composition,
# opacity law parameters, ...) is built by apply_changes.
FAST_KEYS = {
    "star.mass": "mass",
    "star.luminosity": "luminosity",
    "gas.sound_speed": "sound_speed",
    "gas.temperature": "temperature",
    "boundary.base_density": "base_density",
    "numerics.outer_radius": "outer_radius",
    "numerics.rtol": "rtol",
    "porosity.length": "porosity_length",
    "porosity.radial_exponent": "porosity_exponent",
}
_FAST_ROWS = {}  # base key -> _FastRows (of the base model in _BASE_CACHE)
_INVALID = object()


def _fast_row(base_key, base_model, changes):
    """The row as a :class:`_RowModel`, or None: build it with apply_changes."""
    fast = _FAST_ROWS.get(base_key)
    if fast is None:
        from ..models import IsothermalWind
        if type(base_model) is not IsothermalWind:
            return None
        fast = _FAST_ROWS[base_key] = _FastRows(base_model)
    return fast.row(changes)


class _RowModel:
    """What a Model A row's solve reads of its model, without building the model.

    ``kernel_arrays``, ``rtol``, ``a``, ``T`` and :meth:`cgs` of the fields
    the solve reads are set from the base model and the row's checked values;
    anything else (a failure message's wording) builds the row's model once
    through :func:`apply_changes` and asks it, so a row reads exactly what
    its model would give.
    """

    kind = "isothermal"

    def __init__(self, base, changes, arrays, rtol, a, T, cgs):
        self._base = base
        self._changes = changes
        self._full = None
        self.kernel_arrays = arrays
        self.rtol = rtol
        self.a = a
        self.T = T
        self._cgs = cgs

    def _model(self):
        if self._full is None:
            self._full = apply_changes(self._base, self._changes)
        return self._full

    def cgs(self, name):
        value = self._cgs.get(name)
        return self._model().cgs(name) if value is None else value

    def __getattr__(self, name):  # only for attributes not set above
        if name.startswith("_"):
            raise AttributeError(name)
        return getattr(self._model(), name)


NUMBERS_KEPT = 1024  # _FastRows keeps at most this many read values (then starts afresh)


class _FastRows:
    """Model A rows of one base model: (P, O) from the base's, each axis value read once.

    Each distinct value of a key is read and checked once per worker
    (:meth:`Param.read <windsolve.models.Param.read>`, then its cgs float,
    the numbers the model itself would hold); a value that fails, or a row
    that a cross-field rule of :class:`~windsolve.models.IsothermalWind` might
    refuse (the sound speed reaching c, an overflowing base mass flux, a
    radius inside 2GM/c^2, an outer radius not beyond the base, both or
    the other of sound_speed and temperature), goes to apply_changes, which
    says why exactly as before.  The guards keep a margin, so the rule's
    own float rounding never decides.
    """

    def __init__(self, base):
        from ..core.constants import C_LIGHT, G
        self.base = base
        self.params = base.params()
        self.P, self.O = base.kernel_arrays
        self.R0 = base.cgs("radius")
        self.fixed = {"radius": self.R0, "outer_radius": base.cgs("outer_radius"),
                      "base_density": base.cgs("base_density")}
        self.gas = "sound_speed" if base.sound_speed is not None else "temperature"
        self.h = None if base.porosity_length is None else base.cgs("porosity_length")
        self.q = float(base.porosity_exponent)
        self.G, self.C = G, C_LIGHT
        self.numbers = {}  # (key, type, value) -> cgs float, or _INVALID

    def number(self, key, value):
        """The checked cgs float of a model-file value (or a scalar Quantity), or _INVALID."""
        unit = getattr(value, "unit", None)
        try:
            # A Quantity (a fit's walkers: no unit string to parse, ~65 us for g/cm3) is
            # keyed by its unit and float value.
            k = (key, type(value), value) if unit is None else (key, unit, float(value.value))
            hit = self.numbers.get(k)
        except TypeError:  # unhashable (a table where a number belongs): apply_changes says
            return _INVALID
        if hit is None:
            p = self.params[FAST_KEYS[key]]
            try:
                hit = p.cgs(p.read(value))
            except Exception:  # noqa: BLE001 -- apply_changes gives the row its error
                hit = _INVALID
            if len(self.numbers) >= NUMBERS_KEPT:  # a random design or a fit: values new
                self.numbers.clear()
            self.numbers[k] = hit
        return hit

    def row(self, changes):
        """A :class:`_RowModel` of the row, or None when apply_changes must build it."""
        from ..core import basics
        from ..core import opacity as KO
        from ..models.isothermal import kernels as K

        vals = {}
        for key, value in changes.items():
            if key not in FAST_KEYS:
                return None
            x = self.number(key, value)
            if x is _INVALID:
                return None
            vals[FAST_KEYS[key]] = x
        base = self.base
        a, T = base.a, base.T
        if "sound_speed" in vals or "temperature" in vals:
            if self.gas not in vals or len({"sound_speed", "temperature"} & vals.keys()) != 1:
                return None
            if self.gas == "sound_speed":  # as IsothermalWind.a and .T compute them
                a = vals["sound_speed"]
                T = basics.gas_temperature(a, base.mu)
            else:
                T = vals["temperature"]
                a = basics.isothermal_sound_speed(T, base.mu)
            if not a < 0.999 * self.C:
                return None
        R0 = self.R0
        cgs = dict(self.fixed)
        cgs.update(vals)
        if ("base_density" in vals or a != base.a) and not (
                4.0 * math.pi * R0 * R0 * cgs["base_density"] * a < 1e300):
            return None
        if "mass" in vals and not R0 > 1.000001 * 2.0 * self.G * vals["mass"] / (
                self.C * self.C):
            return None
        if "outer_radius" in vals and not vals["outer_radius"] > 1.000001 * R0:
            return None
        P = self.P.copy()
        if "mass" in vals:
            P[K.I_GM] = self.G * vals["mass"]
        P[K.I_A2] = a ** 2
        P[K.I_T] = T
        if "luminosity" in vals:
            P[K.I_L0] = vals["luminosity"]
        if "base_density" in vals:
            P[K.I_RHO0] = vals["base_density"]
        if "outer_radius" in vals:
            P[K.I_ROUT] = vals["outer_radius"]
        O = self.O.copy()
        h = vals.get("porosity_length", self.h)
        if h is not None:  # (h0, R0, q) as IsothermalWind.kernel_arrays packs them
            O[KO.SLOT_H0], O[KO.SLOT_R0], O[KO.SLOT_Q] = (
                h, R0, float(vals.get("porosity_exponent", self.q)))
        return _RowModel(base, changes, (P, O), vals.get("rtol", base.rtol), a, T, cgs)


def run_batch(base, items, profiles=False, observables=None, on_row=None):
    """Solve a batch of rows in a worker: base model file, [(row, changes)] -> records.

    With ``observables`` (LineSettings keywords) each converged model's line
    widths are measured here, in the worker, and recorded with the row.

    A failure of any kind is recorded with its status and message; it never
    stops the sweep.

    Parameters
    ----------
    base : dict
        The base model file (nested dicts).
    items : list of tuple
        (row index, {dotted key: value as written in a model file}) per row.
    profiles : bool
        Store each row's profile (cgs lists) in its record.
    observables : dict or None
        LineSettings keywords, or None to measure no widths.
    on_row : callable, optional
        Called with each record as soon as its row is done; the records are
        then not kept (an empty list is returned).

    Returns
    -------
    list of dict
        One record per row, in the order of ``items`` (none with ``on_row``).
    """
    from ..modelfile import model_from_dict
    from ..registry import spec_for
    from ..result import PROFILE_UNITS, SUMMARY_UNITS
    from ..solve import solve

    out = []
    base_key = json.dumps(base, sort_keys=True)
    previous = None  # the batch's last converged result: where the next solve may start
    for row, changes in items:
        t0 = time.perf_counter()
        record = {"row": row}
        try:
            if base_key not in _BASE_CACHE:  # parse the base once per worker
                _BASE_CACHE.clear()
                _FAST_ROWS.clear()
                _BASE_CACHE[base_key] = model_from_dict(base, source="sweep base")
            model = None
            if not profiles and FAST_ROWS:
                # A row changing only keys with known kernel-vector slots: its (P, O)
                # from the base model's, not the model rebuilt and checked again.
                model = _fast_row(base_key, _BASE_CACHE[base_key], changes)
            if model is None:
                model = apply_changes(_BASE_CACHE[base_key], changes)
            solve_row = spec_for(model).solve_row
            if solve_row is not None and not profiles:
                # No stored profiles: the model's unit-free solve, plain floats all the way.
                solve_row(model, record, observables)
                record["seconds"] = time.perf_counter() - t0
                _keep(out, on_row, record)
                continue
            result = solve(model, profile=profiles or observables is not None,
                           start_from=previous)
            if result.converged:
                previous = result
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
                    from ..lines import result_widths_cgs
                    record.update(zip(WIDTH_COLUMNS, result_widths_cgs(
                        result, _line_settings(observables)), strict=True))
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
        _keep(out, on_row, record)
    return out


def _keep(out, on_row, record):
    if on_row is None:
        out.append(record)
    else:
        on_row(record)


_ROW_QUEUE = []  # [queue] in a local pool worker: finished rows go there one by one


def _worker_init(parent=None, modules=(), rows=None):
    """Workers leave Ctrl-C to the main process, which stops the sweep cleanly,
    and end when that process dies (even by SIGKILL), not later.  ``modules``
    (:func:`windsolve.registry.plugin_modules`) are imported first: they
    register the models defined outside windsolve.  ``rows``: a
    multiprocessing queue that :func:`journal_batch` sends each finished row
    to (None: rows return with their batch).

    On Linux the kernel sends SIGKILL when the parent dies
    (``prctl(PR_SET_PDEATHSIG)``); everywhere a daemon thread also checks
    ``os.getppid()`` every PARENT_WATCH_INTERVAL seconds.
    """
    import importlib
    import signal
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _ROW_QUEUE[:] = [] if rows is None else [rows]
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

