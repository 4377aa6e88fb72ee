"""The sweep's HDF5 file: its columns, the writer and the checked reader."""

import json
import math
import operator
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..registry import LINE_WIDTHS
from .spec import AxisView, _wide

if TYPE_CHECKING:
    from astropy.table import QTable


def _summary_columns():
    from ..result import SUMMARY_UNITS
    return list(SUMMARY_UNITS)


SUMMARY_COLUMNS = _summary_columns()


WIDTH_COLUMNS = LINE_WIDTHS  # (windsolve.registry.LINE_WIDTHS)



def axis_views(path: str | Path) -> list[AxisView]:
    """How to show each axis of a sweep file, in sweep order.

    Parameters
    ----------
    path : str or Path
        A sweep output file (HDF5).

    Returns
    -------
    list of AxisView
        Each axis in the unit the sweep file wrote it in (older files: the
        table's cgs unit), with its scale.

    Raises
    ------
    OutputError
        The file, its table or an axis column is missing or damaged.
    """
    import astropy.units as u

    from ..io import column, dataset_unit, group, open_hdf5
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



# -- output --------------------------------------------------------------------------

def check_statuses(statuses):
    """Refuse a row status outside :data:`windsolve.status.STATUSES`.

    Parameters
    ----------
    statuses : iterable of str
        The rows' ``status`` words (a missing one as ``None``).

    Raises
    ------
    ValueError
        One line naming the unknown words (:func:`windsolve.status.check_statuses`).
    """
    from ..status import check_statuses as check
    check(statuses, "sweep row status")


# Rows parsed and written at a time: the writer holds one chunk's records (a record
# parsed from the journal is some 3 kB of Python objects).
ROWS_PER_CHUNK = 1024


def write_sweep_table(sweep, records, out):
    """The sweep's HDF5 file from records held in memory (see :func:`write_sweep_rows`).

    Parameters
    ----------
    sweep : Sweep
        The sweep the records belong to.
    records : mapping of int to dict
        A record (as :func:`run_batch` makes them) for every row ``0 .. len(sweep) - 1``.
    out : str or Path
        The HDF5 file to write.

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    ValueError
        A row's status is not in :data:`windsolve.status.STATUSES`, or a row
        has no record; nothing is written.
    """
    n = len(sweep)

    def chunks():
        for start in range(0, n, ROWS_PER_CHUNK):
            chunk = []
            for i in range(start, min(n, start + ROWS_PER_CHUNK)):
                if i not in records:
                    raise ValueError(f"sweep row {i} has no record; the table needs every row")
                chunk.append((i, records[i]))
            yield chunk

    return write_sweep_rows(sweep, chunks(), out)


def _runs(rows):
    """[(start, stop)] positions of the runs of consecutive row numbers in sorted ``rows``."""
    breaks = np.flatnonzero(np.diff(rows) != 1) + 1
    edges = [0, *breaks.tolist(), len(rows)]
    return list(zip(edges[:-1], edges[1:], strict=True))


def write_sweep_rows(sweep, chunks, out):
    """The sweep's HDF5 file: /table (one dataset per column) and /profiles, streamed.

    The columns are created at their full length and filled chunk by chunk,
    each row's profile (if any) written as its chunk passes, so the memory
    this takes is one chunk's records (plus the file being built), whatever
    the number of rows.

    Parameters
    ----------
    sweep : Sweep
        The sweep the rows belong to.
    chunks : iterable of list of (int, dict)
        ``(row, record)`` pairs in any order, every row ``0 .. len(sweep) - 1``
        at least once; a row given again replaces the earlier record (as a
        journal read line by line would).
    out : str or Path
        The HDF5 file, written atomically (:func:`windsolve.io.write_hdf5`).

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    ValueError
        A row's status is not in :data:`windsolve.status.STATUSES` (checked
        chunk by chunk), a row number out of range, or a row without a
        record; nothing is written.
    """
    import h5py

    from ..io import dataset, stamp, write_hdf5
    from ..result import HYDROSTATIC_EFOLDS, SUMMARY_UNITS, _unit_text, write_profile

    n = len(sweep)
    keys = list(SUMMARY_COLUMNS) + ["seconds"]
    widths = sweep.observables is not None
    if widths:
        keys += list(WIDTH_COLUMNS)
    get = operator.itemgetter(*keys)
    index = {key: j for j, key in enumerate(keys)}
    efolds = index["base_density_efolds"]

    from ..io import dumps
    from ..modelfile import model_from_dict
    base_toml = dumps(model_from_dict(sweep.base, source=str(sweep.path)).to_dict())

    def fill(f):
        stamp(f, sweep.kind)
        f.attrs["sweep_toml"] = sweep.text
        f.attrs["sweep_file"] = str(sweep.path)
        f.attrs["design"] = sweep.design
        f.attrs["axes"] = json.dumps([a.key for a in sweep.axes])
        f.attrs["base_model_toml"] = base_toml  # what `windsolve extract` rebuilds rows from
        g = f.create_group("table")
        for a in sweep.axes:
            d = dataset(g, a.key, a.numbers, a.unit or "1")
            d.attrs["shown_unit"] = a.shown_unit
            d.attrs["log"] = a.log

        def column(key, dtype, units):
            d = g.create_dataset(key, shape=(n,), dtype=dtype)
            d.attrs["units"] = units
            return d

        # Created in the order (and with the types) the columns always had.
        numbers = {key: column(key, float, _unit_text(SUMMARY_UNITS[key]))
                   for key in SUMMARY_COLUMNS}
        if widths:
            for key in WIDTH_COLUMNS:
                numbers[key] = column(key, float, "cm / s")
            f.attrs["observables"] = json.dumps(sweep.observables)
        converged = column("converged", bool, "1")
        # (a hydrostatic base, not a wind: see windsolve.result.HYDROSTATIC_EFOLDS)
        hydrostatic = column("hydrostatic", bool, "1")
        text = {key: column(key, h5py.string_dtype(), "none") for key in ("status", "message")}
        numbers["seconds"] = column("seconds", float, "s")
        seen = np.zeros(n, dtype=bool)
        for chunk in chunks:
            if not chunk:
                continue
            chunk = sorted(chunk, key=operator.itemgetter(0))  # stable: a later copy last
            rows = np.array([i for i, _ in chunk], dtype=np.int64)
            if rows[0] < 0 or rows[-1] >= n:
                raise ValueError(f"sweep row {int(rows[0] if rows[0] < 0 else rows[-1])} is "
                                 f"outside the sweep's {n} rows")
            last = np.append(rows[1:] != rows[:-1], True)  # a row given twice: the later
            records = [r for (_, r), keep in zip(chunk, last, strict=True) if keep]
            rows = rows[last]
            check_statuses({r.get("status") for r in records})
            m = len(records)
            try:  # one C-level lookup a row when every row has every column
                data = np.array([get(r) for r in records], dtype=float).reshape(m, len(keys))
            except KeyError:
                data = np.array([[r.get(key, math.nan) for key in keys] for r in records],
                                dtype=float).reshape(m, len(keys))
            targets = [(d, data[:, index[key]]) for key, d in numbers.items()]
            targets.append((converged, np.array([bool(r.get("converged")) for r in records])))
            targets.append((hydrostatic, np.nan_to_num(data[:, efolds]) > HYDROSTATIC_EFOLDS))
            targets += [(d, np.array([r.get(key, "") for r in records], dtype=h5py.string_dtype()))
                        for key, d in text.items()]
            runs = _runs(rows)
            for d, v in targets:
                if len(runs) <= 32:  # a few contiguous slices (the usual journal order)
                    for a, b in runs:
                        d[rows[a]:rows[a] + (b - a)] = v[a:b]
                else:  # scattered rows (a resumed journal with holes): one selection
                    d[rows] = v
            for i, r, again in zip(rows.tolist(), records, seen[rows].tolist(), strict=True):
                name = f"profiles/{i}"
                if again and name in f:
                    del f[name]
                if r.get("profile"):
                    write_profile(f.create_group(name), r["profile"])
            seen[rows] = True
            del chunk, records, targets, data  # before the next chunk is read
        if not seen.all():
            raise ValueError(f"sweep row {int(np.flatnonzero(~seen)[0])} has no record; the "
                             f"table needs every row")

    return write_hdf5(out, fill)


SWEEP_REQUIRED = ("mass_loss_rate", "terminal_velocity")  # numbers of every converged row


def read_sweep_table(path: str | Path, as_qtable: bool = False,
                     cgs: bool = False) -> "tuple[dict[str, np.ndarray], dict] | QTable":
    """{column: numpy array} and the root attributes of a sweep file (or one QTable).

    Parameters
    ----------
    path : str or Path
        A sweep's HDF5 file (layout: docs/physics.md, section 9).
    as_qtable : bool
        Return one :class:`astropy.table.QTable` with units instead
        (:func:`sweep_qtable`: axes in the sweep file's units, the summary in
        the units its base model used; the arrays below are cgs).
    cgs : bool
        With ``as_qtable``: every column in its cgs unit instead.

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
    if as_qtable:
        return sweep_qtable(path, cgs=cgs)
    import astropy.units as u

    from ..errors import OutputError
    from ..io import (
        check_photosphere,
        check_values,
        column,
        dataset_unit,
        group,
        open_hdf5,
        require_kind,
        text_attr,
    )
    from ..registry import MODELS
    from ..result import SUMMARY_POSITIVE, SUMMARY_UNITS

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


def sweep_qtable(path: str | Path, cgs: bool = False) -> "QTable":
    """A sweep file's table as an astropy QTable, every number a Quantity column.

    Columns: the axes (in sweep order), the summary values the sweep's model
    kind reports (:attr:`windsolve.registry.ModelSpec.summary_units`; no
    column of another model's, so no column that is NaN in every row), the
    line widths when measured, ``seconds``, ``converged``, ``hydrostatic``,
    ``status`` and ``message``.  Units: each axis in the unit its sweep file
    wrote it in; each other value in the unit the user chose for its physical
    type (:func:`windsolve._units.chosen_units`: the axes' units, then the
    base model's field units, then Msun/yr, km/s, Rsun, Lsun); or all cgs.

    Parameters
    ----------
    path : str or Path
        A sweep's HDF5 file; checked by :func:`read_sweep_table`.
    cgs : bool
        Every column in its cgs unit (as the file stores it).

    Returns
    -------
    astropy.table.QTable
        One row per model of the design; ``meta`` holds ``kind``, ``design``,
        ``axes``, ``sweep_toml``, ``base_model_toml`` and ``windsolve_version``.

    Raises
    ------
    OutputError
        As :func:`read_sweep_table`.
    """
    import astropy.units as u
    from astropy.table import QTable

    from .._units import chosen_units
    from ..registry import MODEL_SPECS, SUMMARY_UNITS

    table, attrs = read_sweep_table(path)
    views = axis_views(path)
    kind = str(attrs.get("model", ""))
    base = _base_model(attrs)
    pick = chosen_units(base, [v.unit for v in views])
    spec = MODEL_SPECS.get(kind)
    summary = list(spec.summary_units) if spec is not None else list(SUMMARY_UNITS)
    out = QTable(meta={"kind": kind, "design": str(attrs.get("design", "")),
                       "axes": [v.key for v in views],
                       "sweep_toml": str(attrs.get("sweep_toml", "")),
                       "base_model_toml": str(attrs.get("base_model_toml", "")),
                       "windsolve_version": str(attrs.get("windsolve_version", ""))})
    for v in views:
        values = table[v.key]
        if v.cgs_unit:
            q = values * u.Unit(v.cgs_unit)
            out[v.key] = q if cgs or not v.unit else q.to(u.Unit(v.unit))
        else:
            out[v.key] = values
    extra = {"seconds": u.s, **{k: u.cm / u.s for k in WIDTH_COLUMNS}}
    for key in [*summary, *WIDTH_COLUMNS, "seconds"]:
        if key not in table or key in out.colnames:
            continue
        unit = SUMMARY_UNITS.get(key, extra.get(key))
        q = table[key] * unit
        out[key] = q if cgs or key == "seconds" else q.to(pick(unit))
    for key in ("converged", "hydrostatic"):
        if key in table:
            out[key] = np.asarray(table[key], dtype=bool)
    for key in ("status", "message"):
        if key in table:
            out[key] = table[key]
    return out


def _base_model(attrs):
    """The base model of a sweep file's ``base_model_toml`` (None when absent or unreadable)."""
    from ..errors import WindsolveError
    from ..io import parse_toml
    from ..modelfile import model_from_dict
    text = attrs.get("base_model_toml")
    if isinstance(text, bytes):
        text = text.decode(errors="replace")
    if not isinstance(text, str) or not text.strip():
        return None
    try:
        return model_from_dict(parse_toml(text, "sweep file"), source="sweep file")
    except (WindsolveError, KeyError, TypeError, ValueError):
        return None


def _axes_attr(f, path):
    """The sweep's axis keys from its ``axes`` attribute (a JSON list of names)."""
    from ..errors import OutputError
    from ..io import text_attr
    text = text_attr(f.attrs, "axes", path, "the file")
    try:
        axes = json.loads(text)
    except json.JSONDecodeError:
        axes = None
    if not (isinstance(axes, list) and axes and all(isinstance(a, str) for a in axes)):
        raise OutputError(f"{path}: the axes attribute {text[:40]!r} is not a JSON list of "
                          f"the swept keys; the file is damaged")
    return axes
