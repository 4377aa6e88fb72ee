"""Any windsolve file as an astropy QTable, astropy's ``format="windsolve"``, and CSV in units.

:func:`read_table` reads a sweep or family file's table, or a result file's
profile, as a :class:`astropy.table.QTable` whose number columns are
Quantities (pandas: ``read_table(path).to_pandas()``, astropy's own
conversion, after dropping units if wanted).  Importing this module registers
the reader with astropy's unified I/O registry, so that
``QTable.read(path, format="windsolve")`` (and ``Table.read``) work too.  The
format is named, not guessed from the file: astropy's own HDF5 reader claims
every ``.h5`` file, and two readers claiming one file make astropy refuse it
as ambiguous; and windsolve's layout (a group of 1-D datasets with a
``units`` attribute each, checked by windsolve's readers) is not astropy's
(one compound dataset), so the reader goes through windsolve's checked
readers rather than changing the file layout every command reads.

:func:`write_table_csv` writes such a table as CSV with each column's unit in
its header (``star.luminosity [solLum]``), the CSV form of ``windsolve
inspect --csv``.
"""

import csv
import sys
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from typing import TextIO

    from astropy.table import QTable, Table

__all__ = ["read_table", "write_table_csv", "export_csv"]


def read_table(path: "str | Path", cgs: bool = False) -> "QTable":
    """The table of any windsolve file, with units: sweep, family or one result's profile.

    Parameters
    ----------
    path : str or Path
        A sweep file (its /table: :func:`windsolve.sweep.table.sweep_qtable`),
        a family file (:meth:`windsolve.family.FamilyResult.to_table`) or a
        result file (its profile: :meth:`windsolve.result.WindResult.profile_table`).
    cgs : bool
        Every column in cgs; by default in the units the sweep or model file
        used (lengths in Rsun when the model's radius was written in Rsun, ...).

    Returns
    -------
    astropy.table.QTable
        Number columns as Quantities; ``meta["file_kind"]`` is ``"sweep"``,
        ``"family"`` or ``"result"``.

    Raises
    ------
    OutputError
        The file is missing, not a windsolve file, or damaged (one line, from
        the reader of its kind).
    """
    from .files import read_any_file
    kind = read_any_file(path)
    if kind == "sweep":
        from .sweep import read_sweep_table
        table = read_sweep_table(path, as_qtable=True, cgs=cgs)
    elif kind == "family":
        from .family import FamilyResult
        table = FamilyResult.from_hdf5(path).to_table(cgs=cgs)
    else:
        from .result import read_result
        table = read_result(path).profile_table(cgs=cgs)
    table.meta["file_kind"] = kind
    return table


def _astropy_reader(path, cgs=False):
    return read_table(path, cgs=cgs)


def _table_reader(path, cgs=False):
    from astropy.table import Table
    return Table(read_table(path, cgs=cgs))


def _register():
    from astropy.io import registry
    from astropy.table import QTable, Table
    for cls, reader in ((QTable, _astropy_reader), (Table, _table_reader)):
        try:
            registry.register_reader("windsolve", cls, reader)
        except registry.IORegistryError:  # already registered (a reload)
            pass


_register()


def _cells(table: "Table"):
    """Header (name [unit]) and the rows of ``table`` as CSV cells (floats by repr)."""
    header, cols = ["row"], []
    for name in table.colnames:
        col = table[name]
        unit = getattr(col, "unit", None)
        text = unit.to_string() if unit is not None else ""
        header.append(f"{name} [{text}]" if text else name)
        values = np.asarray(getattr(col, "value", col))
        cols.append(values)
    rows = ([i] + [repr(float(c[i])) if c.dtype.kind == "f" else
                   (bool(c[i]) if c.dtype.kind == "b" else str(c[i])) for c in cols]
            for i in range(len(table)))
    return header, rows


def write_table_csv(table: "Table", target: "str | Path",
                    stream: "TextIO | None" = None) -> "Path | None":
    """Write a table as CSV, the unit of every column in its header.

    Parameters
    ----------
    table : astropy.table.Table or QTable
        E.g. from :func:`read_table`.
    target : str or Path
        The CSV file (written atomically), or ``"-"`` for ``stream``.
    stream : text file, optional
        Where ``"-"`` writes (default: :data:`sys.stdout`).

    Returns
    -------
    Path or None
        The file written; None for ``"-"``.

    Raises
    ------
    OutputError
        ``target`` cannot be written.
    """
    from .io import write_csv
    header, rows = _cells(table)
    if str(target) == "-":
        w = csv.writer(sys.stdout if stream is None else stream)
        w.writerow(header)
        w.writerows(rows)
        return None
    return write_csv(target, [header, *rows])


def export_csv(path: "str | Path", target: "str | Path", cgs: bool = False,
               stream: "TextIO | None" = None) -> "Path | None":
    """``windsolve inspect FILE --csv [OUT] [--cgs]``: a file's table (or profile) as CSV.

    Parameters
    ----------
    path : str or Path
        A sweep, family or result file.
    target : str or Path
        The CSV file, or ``"-"`` for ``stream``.
    cgs : bool
        Every column in cgs instead of the units the sweep or model file used.
    stream : text file, optional
        Where ``"-"`` writes (default: :data:`sys.stdout`).

    Returns
    -------
    Path or None
        The file written; None for ``"-"``.

    Raises
    ------
    OutputError
        ``target`` cannot be written (checked before ``path`` is read), or
        ``path`` is missing or damaged; nothing is written then.
    """
    from .io import check_output_path
    if str(target) != "-":
        check_output_path(target)
    return write_table_csv(read_table(path, cgs=cgs), target, stream)
