"""Any windsolve file: which kind it is, checked by the reader of its kind."""

from typing import TYPE_CHECKING

from .io import hdf5_kind
from .result import read_result

if TYPE_CHECKING:
    from pathlib import Path

__all__ = ["read_any_file"]


def read_any_file(path: "str | Path") -> str:
    """Check any windsolve HDF5 file (result, family or sweep) with its reader.

    Parameters
    ----------
    path : str or Path
        A result, family or sweep file.

    Returns
    -------
    str
        Its kind: ``"result"``, ``"family"`` or ``"sweep"``.

    Raises
    ------
    OutputError
        One line naming what is wrong: no such file, not a windsolve file, or
        a damaged dataset, unit or value (see the readers of each kind).
    """
    kind = hdf5_kind(path)
    if kind == "result":
        read_result(path)
    elif kind == "family":
        from .family import FamilyResult
        FamilyResult.from_hdf5(path)
    else:
        from .sweep import axis_views, read_sweep_table
        read_sweep_table(path)
        axis_views(path)
    return kind
