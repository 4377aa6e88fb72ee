"""CSV files: tables written atomically, and the CSV export of a sweep or family table."""

import io
import sys
from typing import TYPE_CHECKING

from .atomic import check_output_path, write_text

if TYPE_CHECKING:
    from collections.abc import Iterable, Iterator
    from pathlib import Path
    from typing import TextIO


def write_csv(path: "str | Path", rows: "Iterable[Iterable[object]]") -> "Path":
    """Write ``rows`` as CSV to ``path`` atomically.

    Parameters
    ----------
    path : str or Path
        The CSV file to write.
    rows : iterable of iterables
        One iterable of cells a row, header rows included (cells as
        :func:`csv.writer` writes them: numbers by ``str``, None empty).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` cannot be written (see :func:`~windsolve.io.atomic.atomic_write`).
    """
    import csv
    buffer = io.StringIO(newline="")
    w = csv.writer(buffer)
    for row in rows:
        w.writerow(row)
    return write_text(path, buffer.getvalue())


def table_rows(path: "str | Path") -> "tuple[list[str], Iterator[list]]":
    """The header and the rows of the /table of a sweep or family file, as CSV cells.

    Parameters
    ----------
    path : str or Path
        A sweep or family file (HDF5), already checked by its reader.

    Returns
    -------
    header : list of str
        ``row``, then one name a column, with its unit in brackets (axis columns
        first, in sweep order); values in the units the file stores (cgs).
    rows : iterator of list
        One list of cells a row: the row index, floats as ``repr`` (every digit),
        booleans, text.

    Raises
    ------
    OutputError
        The file has no /table (a result file).
    """
    import h5py
    import numpy as np

    from ..errors import OutputError
    with h5py.File(path, "r") as f:
        if "table" not in f:
            raise OutputError(f"{path}: no /table to export (only sweep and family files "
                              f"have one)")
        g = f["table"]
        keys = list(g.keys())
        if "axes" in f.attrs:  # axis columns first, in sweep order
            import json
            axes = json.loads(f.attrs["axes"])
            keys = axes + [k for k in keys if k not in axes]
        cols = []
        for key in keys:
            data = g[key][()]
            if data.dtype.kind in "OS":
                data = np.array([x.decode() if isinstance(x, bytes) else str(x) for x in data])
            cols.append(data)
        units = [g[k].attrs.get("units", "") for k in keys]
    header = ["row"] + [f"{k} [{u}]" if u not in ("", "1", "none") else k
                        for k, u in zip(keys, units, strict=True)]
    rows = ([i] + [repr(float(c[i])) if c.dtype.kind == "f" else
                   (bool(c[i]) if c.dtype.kind == "b" else c[i]) for c in cols]
            for i in range(len(cols[0]) if cols else 0))
    return header, rows


def export_table_csv(path: "str | Path", target: "str | Path",
                     stream: "TextIO | None" = None) -> "Path | None":
    """Write the /table of a sweep or family file as CSV (units in the header).

    Parameters
    ----------
    path : str or Path
        A sweep or family file (HDF5), already checked by its reader.
    target : str or Path
        The CSV file to write (atomically), or ``"-"`` for ``stream``.
    stream : text file, optional
        Where ``"-"`` writes, row by row (default: :data:`sys.stdout`).

    Returns
    -------
    Path or None
        The file written; None for ``"-"``.

    Raises
    ------
    OutputError
        ``target`` cannot be written (checked before ``path`` is read), or
        ``path`` has no /table.
    """
    import csv
    if target != "-":
        check_output_path(target)
    header, rows = table_rows(path)
    if target == "-":
        w = csv.writer(sys.stdout if stream is None else stream)
        w.writerow(header)
        w.writerows(rows)
        return None
    return write_csv(target, [header, *rows])
