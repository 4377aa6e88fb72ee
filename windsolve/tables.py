"""Opacity tables: reading, checking, writing and making them.

A table gives log10 kappa [cm2 g-1] on a rectangular grid of log10 T [K] and
log10 R, with R = rho / T6**3, rho in g cm-3 and T6 = T / 1e6 K: the grid on
which published Rosseland-mean tables are given.  The ``table`` opacity law
(``[opacity] law = "table"``, ``path = "..."``) interpolates it in the
kernels; :func:`tabulate` turns any analytic law into such a table, and
``windsolve tabulate`` does the same from the command line.

Text layout (the only one accepted)
-----------------------------------
::

    # comment lines start with '#', anywhere; blank lines are ignored
    # and anything after a '#' on a line is a comment too
            -8.0    -7.5    -7.0    -6.5   ...     <- nR values of log10 R
    3.80   -0.39   -0.38   -0.37   -0.35   ...     <- log10 T, then nR log10 kappa
    3.85   -0.39   -0.38   -0.36   -0.33   ...
    ...

The first data row holds the nR log10 R values *only* (no placeholder in the
log10 T column); each following row holds log10 T and then one log10 kappa
per log10 R, so it has nR + 1 values.  Numbers are separated by blanks (a
comma counts as a blank).  Both axes increase strictly, each has at least 4
nodes, and every value is finite: a table with gaps (as published tables
have at high R) must be filled or cut before use.  Comment lines before the
first data row are the table's description.

HDF5 layout
-----------
Datasets ``log_T`` (nT), ``log_R`` (nR) and ``log_kappa`` (nT x nR, row i
belonging to log_T[i]), float64, each with a ``units`` attribute
(:data:`HDF5_UNITS`; checked when present); root attributes ``format``
(:data:`HDF5_FORMAT`), ``description`` and, when written by windsolve,
``windsolve_version`` and ``created``.

Interpolation
-------------
Bicubic Hermite in (log10 T, log10 R) on each cell, with the node
derivatives of the not-a-knot tensor-product cubic spline through the
nodes (:func:`node_derivatives`).  The interpolant is then that spline:
C2, exact at the nodes, with error O(h^4) for a smooth log10 kappa (it falls
~16x when the spacing halves; ``tests/test_tables.py`` measures it).  A
spline can overshoot next to a sharp feature that the grid under-resolves;
resolve bumps with several nodes across their width.
"""

import datetime
import math
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .core import opacity as kernels
from .errors import ModelError
from .io import write_hdf5 as _write_hdf5_file
from .io import write_text as _write_text_file

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from .opacity import Opacity

__all__ = ["OpacityTable", "read_table", "write_table", "write_text", "write_hdf5",
           "tabulate", "node_derivatives", "load_table", "table_kernel_data",
           "grid", "HDF5_FORMAT", "HDF5_UNITS", "TEXT_LAYOUT", "MAX_TABLE_NODES"]

HDF5_FORMAT = "windsolve opacity table 1"
HDF5_UNITS = {
    "log_T": "log10(K)",
    "log_R": "log10(g cm-3), R = rho / (T / 1e6 K)^3",
    "log_kappa": "log10(cm2 g-1)",
}
HDF5_SUFFIXES = (".h5", ".hdf5", ".he5")
MIN_NODES = 4  # a bicubic cell needs a not-a-knot spline: 4 nodes per axis
# Largest grid tabulate() makes, nT x nR nodes: about 30 MB of interpolation data
# (four float64 numbers a node) and a 20 MB text file.
MAX_TABLE_NODES = 1_000_000
MAX_LOG_T = 10.0  # larger "log10 T" values are linear temperatures given by mistake
TEXT_LAYOUT = (
    "Layout: first data row = log10 R (R = rho / T6^3, rho in g/cm3, T6 = T / 1e6 K);",
    "each following row = log10 T [K], then log10 kappa [cm2/g] at each log10 R.",
)


@dataclass(frozen=True, eq=False)
class OpacityTable:
    """log10 kappa on a (log10 T, log10 R) grid, checked.

    Parameters
    ----------
    log_T : array (nT,)
        log10 of the temperature [K], strictly increasing.
    log_R : array (nR,)
        log10 R, R = rho / (T / 1e6 K)**3 [g cm-3], strictly increasing.
    log_kappa : array (nT, nR)
        log10 of the opacity [cm2 g-1]; row i belongs to ``log_T[i]``.
    description : tuple of str
        Free text (the comment header of a text table).
    """

    log_T: np.ndarray
    log_R: np.ndarray
    log_kappa: np.ndarray
    description: tuple = field(default=())

    def __post_init__(self):
        log_T = np.array(self.log_T, dtype=float)
        log_R = np.array(self.log_R, dtype=float)
        log_kappa = np.array(self.log_kappa, dtype=float)
        where = "opacity table"
        if log_T.ndim != 1 or log_R.ndim != 1:
            raise ModelError(f"{where}: log_T and log_R must be 1-D")
        if log_kappa.shape != (log_T.size, log_R.size):
            raise ModelError(f"{where}: log_kappa has shape {log_kappa.shape}, expected "
                             f"{(log_T.size, log_R.size)} (nT, nR)")
        _check_axis(log_T, "log10 T", where, lambda i: f"log_T[{i}]")
        _check_axis(log_R, "log10 R", where, lambda i: f"log_R[{i}]")
        _check_values(log_T, log_R, log_kappa, where, lambda i, j: f"log_kappa[{i}, {j}]")
        for name, value in (("log_T", log_T), ("log_R", log_R), ("log_kappa", log_kappa)):
            value.flags.writeable = False
            object.__setattr__(self, name, value)
        lines = self.description
        if isinstance(lines, str):
            lines = lines.splitlines()
        object.__setattr__(self, "description", tuple(str(s) for s in lines))

    @property
    def shape(self) -> tuple:
        """(nT, nR): the number of temperature and R nodes."""
        return self.log_kappa.shape


# --- checks --------------------------------------------------------------------

def _check_axis(values, name, where, locate):
    """Finite, strictly increasing, at least MIN_NODES values; one-line errors."""
    if values.size < MIN_NODES:
        raise ModelError(f"{where}: only {values.size} {name} value"
                         f"{'' if values.size == 1 else 's'}; the interpolation needs at "
                         f"least {MIN_NODES} on each axis")
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        i = bad[0]
        raise ModelError(f"{where}: {name} is {float(values[i])} at {locate(i)}; every value "
                         f"must be finite")
    steps = np.diff(values)
    bad = np.flatnonzero(~(steps > 0))
    if bad.size:
        i = bad[0] + 1
        raise ModelError(f"{where}: {name} must increase strictly, but {float(values[i])!r} "
                         f"at {locate(i)} follows {float(values[i - 1])!r}")
    if name == "log10 T" and values[-1] > MAX_LOG_T:
        i = int(np.argmax(values > MAX_LOG_T))
        raise ModelError(f"{where}: log10 T = {float(values[i])!r} at {locate(i)} is not a "
                         f"log10 temperature; give log10 T [K], e.g. 4.5")


def _check_values(log_T, log_R, log_kappa, where, locate):
    bad = np.argwhere(~np.isfinite(log_kappa))
    if bad.size:
        i, j = bad[0]
        raise ModelError(f"{where}: log10 kappa is {float(log_kappa[i, j])} at "
                         f"{locate(i, j)} (log10 T = {float(log_T[i])!r}, log10 R = "
                         f"{float(log_R[j])!r}); every value must be finite (fill or cut gaps)")


# --- reading -------------------------------------------------------------------

def read_table(path: str | Path, where: str | None = None) -> "OpacityTable":
    """Read and check an opacity table (text matrix or HDF5, by content).

    Parameters
    ----------
    path : str or path-like
        The file.  HDF5 is recognised by its signature, anything else is
        read as the text layout of the module docstring.
    where : str, optional
        How messages name the file (default: the path).

    Returns
    -------
    OpacityTable

    Raises
    ------
    ModelError
        One line naming the file and the problem: missing file, not a table,
        ragged rows, non-increasing axes, NaN or inf, too few nodes.

    References
    ----------
    docs/physics.md, eq. 8 (the variable R) and section 2 (tables).
    """
    path = Path(path)
    where = where or str(path)
    if not path.exists():
        raise ModelError(f"{where}: no such file")
    if path.is_dir():
        raise ModelError(f"{where}: is a directory, not an opacity table")
    import h5py
    if h5py.is_hdf5(path):
        return _read_hdf5(path, where)
    return _read_text(path, where)


def _read_text(path, where):
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ModelError(f"{where}: not an opacity table (neither text nor HDF5)") from None
    except OSError as error:
        raise ModelError(f"{where}: cannot read ({error.strerror or error})") from None
    rows = []  # (line number, tokens)
    description = []
    for number, line in enumerate(text.splitlines(), 1):
        body, hash_, comment = line.partition("#")
        tokens = body.replace(",", " ").split()
        if tokens:
            rows.append((number, tokens))
        elif hash_ and not rows:
            description.append(comment[1:] if comment.startswith(" ") else comment)
    if not rows:
        raise ModelError(f"{where}: not an opacity table: it holds no numbers")

    def numbers(number, tokens, first):
        values = []
        for token in tokens:
            try:
                values.append(float(token))
            except ValueError:
                if first:
                    snippet = " ".join(tokens)
                    snippet = snippet if len(snippet) <= 40 else snippet[:37] + "..."
                    raise ModelError(f"{where}: not an opacity table: line {number} "
                                     f"(\"{snippet}\") should hold the log10 R values; see "
                                     f"windsolve.tables for the layout") from None
                raise ModelError(f"{where}: line {number}: \"{token}\" is not a "
                                 f"number") from None
        return values

    line_R, tokens = rows[0]
    log_R = np.array(numbers(line_R, tokens, True))
    body = rows[1:]
    if not body:
        raise ModelError(f"{where}: not an opacity table: only one row of numbers (line "
                         f"{line_R}); after the log10 R row each row holds log10 T and "
                         f"the log10 kappa values")
    expected = log_R.size + 1
    if all(len(t) == log_R.size for _, t in body):
        raise ModelError(f"{where}: the first row has as many values ({log_R.size}) as the "
                         f"table rows; write the log10 R row without a placeholder over "
                         f"the log10 T column (see windsolve.tables for the layout)")
    matrix = []
    lines = []
    for k, (number, tokens) in enumerate(body, 1):
        values = numbers(number, tokens, False)
        if len(values) != expected:
            raise ModelError(f"{where}: row {k} (line {number}) has {len(values)} values, "
                             f"expected {expected} (log10 T, then {log_R.size} log10 kappa)")
        matrix.append(values)
        lines.append(number)
    matrix = np.array(matrix)
    log_T = matrix[:, 0]
    log_kappa = matrix[:, 1:]
    _check_axis(log_R, "log10 R", where, lambda i: f"line {line_R}, column {i + 1}")
    _check_axis(log_T, "log10 T", where, lambda i: f"line {lines[i]}")
    _check_values(log_T, log_R, log_kappa, where,
                  lambda i, j: f"line {lines[i]}, column {j + 2}")
    return OpacityTable(log_T, log_R, log_kappa, tuple(description))


def _read_hdf5(path, where):
    import h5py
    try:
        f = h5py.File(path, "r")
    except OSError:
        raise ModelError(f"{where}: an HDF5 file that cannot be opened (damaged?)") from None
    with f:
        names = ("log_T", "log_R", "log_kappa")
        missing = [n for n in names if not isinstance(f.get(n), h5py.Dataset)]
        if missing:
            held = ", ".join(sorted(f.keys())) or "nothing"
            raise ModelError(f"{where}: not an opacity table: an HDF5 file without "
                             f"{', '.join(missing)} (it holds {held}); a table has datasets "
                             f"log_T, log_R and log_kappa")
        data = {}
        for name in names:
            d = f[name]
            if d.dtype.kind not in "fiu":
                raise ModelError(f"{where}: dataset {name} is not numeric ({d.dtype})")
            units = d.attrs.get("units")
            if isinstance(units, bytes):
                units = units.decode()
            if units is not None and str(units) != HDF5_UNITS[name]:
                raise ModelError(f"{where}: dataset {name} has units \"{units}\", expected "
                                 f"\"{HDF5_UNITS[name]}\"")
            data[name] = np.asarray(d[()], dtype=float)
        description = f.attrs.get("description", "")
        if isinstance(description, bytes):
            description = description.decode()
    log_T, log_R, log_kappa = data["log_T"], data["log_R"], data["log_kappa"]
    for name in ("log_T", "log_R"):
        if data[name].ndim != 1:
            raise ModelError(f"{where}: dataset {name} has shape {data[name].shape}; "
                             f"expected one dimension")
    if log_kappa.shape != (log_T.size, log_R.size):
        raise ModelError(f"{where}: dataset log_kappa has shape {log_kappa.shape}, expected "
                         f"{(log_T.size, log_R.size)} (log_T by log_R)")
    _check_axis(log_R, "log10 R", where, lambda i: f"log_R[{i}]")
    _check_axis(log_T, "log10 T", where, lambda i: f"log_T[{i}]")
    _check_values(log_T, log_R, log_kappa, where, lambda i, j: f"log_kappa[{i}, {j}]")
    lines = tuple(str(description).splitlines()) if description else ()
    return OpacityTable(log_T, log_R, log_kappa, lines)


# --- writing -------------------------------------------------------------------

def write_text(table: "OpacityTable", path: str | Path) -> Path:
    """Write ``table`` as a text matrix (layout in the module docstring).

    Numbers are written with the shortest repr that reads back exactly, so a
    text round trip loses nothing.  Writes to a temporary name and renames.

    Parameters
    ----------
    table : OpacityTable
        The table to write.
    path : str or Path
        The output file.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    OutputError
        The file cannot be written.
    """
    cells = [[repr(float(x)) for x in row] for row in table.log_kappa]
    heads = [repr(float(x)) for x in table.log_T]
    top = [repr(float(x)) for x in table.log_R]
    width = max(len(s) for s in [*heads, *top, *(c for row in cells for c in row)]) + 2
    lines = [f"# {s}".rstrip() for s in table.description]
    lines.append(" " * width + "".join(s.rjust(width) for s in top))
    for head, row in zip(heads, cells, strict=True):
        lines.append(head.rjust(width) + "".join(s.rjust(width) for s in row))
    text = "\n".join(lines) + "\n"
    return _write_text_file(path, text)


def write_hdf5(table: "OpacityTable", path: str | Path) -> Path:
    """Write ``table`` in the HDF5 layout of the module docstring (via rename).

    Parameters
    ----------
    table : OpacityTable
        The table to write.
    path : str or Path
        The output file.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    OutputError
        The file cannot be written.
    """
    from ._version import __version__

    def fill(f):
        f.attrs["format"] = HDF5_FORMAT
        f.attrs["description"] = "\n".join(table.description)
        f.attrs["windsolve_version"] = __version__
        f.attrs["created"] = datetime.datetime.now(datetime.UTC).isoformat(
            timespec="seconds")
        for name in ("log_T", "log_R", "log_kappa"):
            d = f.create_dataset(name, data=np.asarray(getattr(table, name), dtype=float))
            d.attrs["units"] = HDF5_UNITS[name]
    return _write_hdf5_file(path, fill)


def write_table(table: "OpacityTable", path: str | Path) -> Path:
    """Write ``table`` as HDF5 (suffix .h5, .hdf5, .he5) or else as text.

    Parameters
    ----------
    table : OpacityTable
        The table to write.
    path : str or Path
        The file; written under a temporary name and renamed.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    OutputError
        The file cannot be written.
    """
    if Path(path).suffix.lower() in HDF5_SUFFIXES:
        return write_hdf5(table, path)
    return write_text(table, path)


# --- interpolation data -----------------------------------------------------------

def node_derivatives(log_T: "ArrayLike", log_R: "ArrayLike",
                     log_kappa: "ArrayLike") -> np.ndarray:
    """Node values and derivatives of the bicubic interpolant, shape (nT, nR, 4).

    Per node: log10 kappa, d/dlog10 T, d/dlog10 R and d2/dlog10 T dlog10 R,
    taken from not-a-knot cubic splines: along log10 T on each column, along
    log10 R on each row, and along log10 R through the log10 T derivatives for
    the cross term.  Hermite cells built on these data reproduce the
    tensor-product cubic spline of the table exactly (de Boor 2001, A
    Practical Guide to Splines, ch. XVII, tensor-product interpolation): C2
    and fourth order.  Finite-difference (Catmull-Rom) derivatives would
    give only third order; Akima's would resist overshoot but are third order
    at best and only C1.

    Parameters
    ----------
    log_T : array_like (nT,)
        log10 of the temperature nodes [K], increasing.
    log_R : array_like (nR,)
        log10 R nodes, R = rho / T6^3 [g cm^-3] (docs/physics.md, eq. 8), increasing.
    log_kappa : array_like (nT, nR)
        log10 of the opacity [cm^2 g^-1] at the nodes.

    Returns
    -------
    ndarray (nT, nR, 4)
        log10 kappa and its three derivatives at every node.
    """
    from scipy.interpolate import CubicSpline
    log_T = np.asarray(log_T, dtype=float)
    log_R = np.asarray(log_R, dtype=float)
    f = np.asarray(log_kappa, dtype=float)
    f_T = CubicSpline(log_T, f, axis=0, bc_type="not-a-knot")(log_T, 1)
    f_R = CubicSpline(log_R, f, axis=1, bc_type="not-a-knot")(log_R, 1)
    f_TR = CubicSpline(log_R, f_T, axis=1, bc_type="not-a-knot")(log_R, 1)
    return np.stack([f, f_T, f_R, f_TR], axis=-1)


def table_kernel_data(table: "OpacityTable", clamp: bool = False) -> tuple:
    """The table block of the compiled opacity: (params, extra) for
    :func:`windsolve.core.opacity.pack`.

    Parameters
    ----------
    table : OpacityTable
        The table.
    clamp : bool
        Clamp points outside the grid to its edge instead of reporting them
        (docs/physics.md, section 2, "Tables").

    Returns
    -------
    params : tuple of float
        The law's parameter slots (grid edges, clamp flag).
    extra : ndarray
        The table block, as :func:`windsolve.core.opacity.pack_table` returns them.
    """
    nodes = node_derivatives(table.log_T, table.log_R, table.log_kappa)
    return kernels.pack_table(table.log_T, table.log_R, nodes, clamp)


@lru_cache(maxsize=32)
def _load_cached(path, mtime_ns, size, where):
    table = read_table(path, where)
    params, extra = table_kernel_data(table, clamp=False)
    extra.flags.writeable = False
    return table, params, extra


def load_table(path: str | Path, where: str | None = None) -> tuple:
    """(table, params, extra) of the file at ``path``, parsed once per version.

    Parameters
    ----------
    path : str or Path
        A table file (see :func:`read_table`).
    where : str, optional
        How messages name the file.

    Returns
    -------
    table : OpacityTable
    params : tuple of float
        Kernel slots 2..6 (table edges; clamp off).
    extra : numpy.ndarray
        The table block of the kernel vector (read-only).

    Raises
    ------
    ModelError
        As :func:`read_table`.

    Notes
    -----
    Cached on (absolute path, modification time, size), so a sweep over many
    models that share a table reads and differentiates it once, while an
    edited file is read again.  ``params`` has the clamp slot off; the caller
    sets it.
    """
    path = Path(path).expanduser().absolute()
    where = where or str(path)
    try:
        st = path.stat()
    except FileNotFoundError:
        raise ModelError(f"{where}: no such file") from None
    except OSError as error:
        raise ModelError(f"{where}: cannot read ({error.strerror or error})") from None
    return _load_cached(str(path), st.st_mtime_ns, st.st_size, where)


# --- making tables from analytic laws -----------------------------------------------

def tabulate(opacity: "Opacity", log_T: "ArrayLike", log_R: "ArrayLike", X: float = 0.7,
             Z: float = 0.02, description: "list[str] | tuple[str, ...] | None" = None
             ) -> "OpacityTable":
    """Tabulate an analytic opacity law on a (log10 T, log10 R) grid.

    Parameters
    ----------
    opacity : windsolve.Opacity
        Any law but ``table``; porosity is not part of a law (a model applies
        it on top of the table), so it is not tabulated.
    log_T : array (nT,)
        log10 T [K], strictly increasing, at least 4 values.
    log_R : array (nR,)
        log10 R, R = rho / (T / 1e6 K)**3 [g cm-3], strictly increasing.
    X, Z : float
        Hydrogen and metal mass fractions (kappa_es and the law's
        composition terms).
    description : sequence of str, optional
        Header text; by default it names the law, its parameters, X, Z and the
        layout.

    Returns
    -------
    OpacityTable
        ``log_kappa[i, j] = log10 kappa(rho_ij, T_i)`` with
        ``rho_ij = R_j (T_i / 1e6 K)**3``.

    Raises
    ------
    ModelError
        A ``table`` law, a grid that is not 1-D, increasing, with at least 4
        nodes (and not too many), or a law without a finite positive opacity
        somewhere on the grid.

    References
    ----------
    docs/physics.md, eqs. 5-8.
    """
    from ._version import __version__
    if opacity.law == "table":
        raise ModelError("[opacity] law = \"table\": that is a table already; tabulate an "
                         "analytic law (electron_scattering, kramers, bump)")
    log_T = np.asarray(log_T, dtype=float)
    log_R = np.asarray(log_R, dtype=float)
    where = "tabulation grid"
    for values, name in ((log_T, "log10 T"), (log_R, "log10 R")):
        if values.ndim != 1:
            raise ModelError(f"{where}: {name} must be a 1-D sequence")
        _check_axis(values, name, where, lambda i, n=name: f"{n} index {i}")
    _check_size(log_T.size, log_R.size, where)
    O = opacity.kernel_vector(X, Z)
    log_kappa = kernels.tabulate_log_opacity(O, log_T, log_R)
    bad = np.argwhere(~np.isfinite(log_kappa))
    if bad.size:
        i, j = bad[0]
        raise ModelError(f"{where}: the {opacity.law} law gives no finite positive opacity "
                         f"at log10 T = {float(log_T[i])!r}, log10 R = {float(log_R[j])!r}")
    if description is None:
        values = ", ".join(f"{k} = {v!r}" if not isinstance(v, str) else f'{k} = "{v}"'
                           for k, v in opacity.to_toml().items() if k != "law")
        description = (
            f"Tabulated by windsolve {__version__} (windsolve.tables.tabulate) from the "
            f"analytic \"{opacity.law}\" law",
            f"  {opacity.formula}",
            *([f"  with {values}"] if values else []),
            f"  for X = {float(X)!r}, Z = {float(Z)!r}; no porosity.",
            f"Grid: {log_T.size} log10 T from {float(log_T[0])!r} to {float(log_T[-1])!r}, "
            f"{log_R.size} log10 R from {float(log_R[0])!r} to {float(log_R[-1])!r}.",
            *TEXT_LAYOUT,
        )
    return OpacityTable(log_T, log_R, log_kappa, tuple(description))


def _check_size(n_T, n_R, where):
    if n_T * n_R > MAX_TABLE_NODES:
        raise ModelError(f"{where}: {n_T} x {n_R} = {n_T * n_R} nodes is more than the "
                         f"{MAX_TABLE_NODES} a table may have (nT x nR); use fewer nodes")


def grid(start: float, stop: float, num: int, name: str) -> np.ndarray:
    """``num`` evenly spaced values from ``start`` to ``stop`` (checked).

    At most ``MAX_TABLE_NODES // MIN_NODES`` values: with the fewest nodes on the
    other axis, the table then still has at most :data:`MAX_TABLE_NODES`.

    Parameters
    ----------
    start, stop : float
        The first and last value (a log10 axis of a table: dex).
    num : int
        Number of values, at least ``MIN_NODES``.
    name : str
        The axis's name, for messages.

    Returns
    -------
    ndarray
        The values, rounded to 12 decimals.

    Raises
    ------
    ModelError
        A bound is not finite, ``start >= stop``, or ``num`` is out of range.
    """
    start, stop = float(start), float(stop)
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise ModelError(f"{name}: START and STOP must be finite numbers (got {start!r}, "
                         f"{stop!r})")
    if not stop > start:
        raise ModelError(f"{name}: START must be below STOP (got {start!r}, {stop!r})")
    if num < MIN_NODES:
        raise ModelError(f"{name}: NUM = {num}; the interpolation needs at least {MIN_NODES} "
                         f"nodes on each axis")
    if num > MAX_TABLE_NODES // MIN_NODES:
        raise ModelError(f"{name}: NUM = {num} is more nodes than a table may have (at most "
                         f"{MAX_TABLE_NODES} in all, nT x nR); use fewer")
    # Rounded to 12 decimals so that 3.85 is written as 3.85, not 3.8499999999999996.
    return np.round(np.linspace(start, stop, num), 12)
