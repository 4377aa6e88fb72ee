"""CSV files written atomically (the table exports are :mod:`windsolve.tabular`'s)."""

import io
from typing import TYPE_CHECKING

from .atomic import write_text

if TYPE_CHECKING:
    from collections.abc import Iterable
    from pathlib import Path


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
