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
    (:func:`windsolve.solve.solve_isothermal_cgs` with ``widths``).  Model A's
    ``ModelSpec.solve_row``.
    """
    from ..solve import solve_isothermal_cgs

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
    from ..lines import LineSettings
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
    from ..modelfile import model_from_dict
    from ..registry import spec_for
    from ..result import PROFILE_UNITS, SUMMARY_UNITS
    from ..solve import solve

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
                    from ..lines import result_widths_cgs
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

