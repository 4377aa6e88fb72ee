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

OPAL layout (multi-composition, read only)
------------------------------------------
The layout of the published OPAL Rosseland-mean tables (Iglesias & Rogers
1996, ApJ 464, 943), e.g. ``GN93hz`` (shipped: ``path = "GN93hz"``): a text
header, a summary line per composition (``TABLE # n  $mixture$ X=... Y=...
Z=... dXc=... dXo=...``), then one block per composition: its ``TABLE #``
line, a ``logT`` line with the log10 R headings, and one row per log10 T
(the same grid in every block).  Cells that are blank or hold 9.999 lie
outside the computed range: they become holes (NaN).  :func:`read_opal`
reads every composition into an :class:`OpalFile`; a model's X and Z then
pick one 2-D table (:meth:`OpalFile.table_for`):

* exactly, when the file has a composition within :data:`COMPOSITION_MATCH`
  of (X, Z) in both fractions (the file gives four decimals);
* otherwise by 3-point Lagrange interpolation of log10 kappa node by node:
  first in Z along each series of constant X (and along the series Y = 0,
  whose X = 1 - Z), on the two Z nodes around the target and the nearer of
  their outer neighbours; then in X across the series at that Z, the same
  way (two nodes: linear).  A target on a node takes the node itself.  A
  hole in any table used is a hole in the result.
* a file holding a single composition is used for models whose X and Z lie
  within :data:`SINGLE_TOLERANCE` of it; beyond that, and outside the
  coverage of a multi-composition file, the model is refused.

Format
------
``read_table(path, format="auto")`` tells the layouts apart by content (HDF5
signature; a line starting ``TABLE #``: OPAL; else the text matrix); a
model file may name one with ``[opacity] format = "text" | "hdf5" |
"opal"``.

Interpolation
-------------
Bicubic Hermite in (log10 T, log10 R) on each cell, with the node
derivatives of the not-a-knot tensor-product cubic spline through the
nodes (:func:`node_derivatives`).  The interpolant is then that spline:
C2, exact at the nodes, with error O(h^4) for a smooth log10 kappa (it falls
~16x when the spacing halves; ``tests/test_tables.py`` measures it).  A
spline can overshoot next to a sharp feature that the grid under-resolves;
resolve bumps with several nodes across their width.

Holes: on a table with holes the node derivatives come from not-a-knot
splines through each row's and each column's run of valid nodes (a run of 3:
a parabola, of 2: a line), so the interpolant is C1 everywhere and the
tensor-product spline wherever no hole is near; the kernels never evaluate
a cell that touches a hole (:mod:`windsolve.core.opacity`, the cell strips).
"""

import datetime
import math
import re
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
           "grid", "HDF5_FORMAT", "HDF5_UNITS", "TEXT_LAYOUT", "MAX_TABLE_NODES",
           "OpalFile", "OpalComposition", "read_opal", "FORMATS", "PACKAGED_TABLES",
           "packaged_table", "COMPOSITION_MATCH", "SINGLE_TOLERANCE"]

FORMATS = ("auto", "text", "hdf5", "opal")
KNOWN_LAYOUTS = ("known layouts: the windsolve text matrix, windsolve HDF5, OPAL "
                 "multi-composition (windsolve.tables)")
# Tables shipped in windsolve/data/opacity/, by the short name a model file may give.
PACKAGED_TABLES = ("GN93hz",)
COMPOSITION_MATCH = 5e-5  # |dX|, |dZ| below which a file's composition is the model's
SINGLE_TOLERANCE = (0.01, 0.1)  # single-composition file: |dX| <= 0.01, |dZ| <= 0.1 Z + 1e-4
OPAL_MISSING = 9.999  # the OPAL tables' mark of a cell outside the computed range

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
    holes : bool
        Allow NaN in ``log_kappa``: cells outside a ragged table (read from
        the OPAL layout).  Without it every value must be finite.
    """

    log_T: np.ndarray
    log_R: np.ndarray
    log_kappa: np.ndarray
    description: tuple = field(default=())
    holes: bool = False  # NaN marks cells outside a ragged (published) table

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
        if self.holes:
            if np.isinf(log_kappa).any() or np.isnan(log_kappa).all():
                raise ModelError(f"{where}: log_kappa holds inf, or nothing but holes")
        else:
            _check_values(log_T, log_R, log_kappa, where,
                          lambda i, j: f"log_kappa[{i}, {j}]")
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

def read_table(path: str | Path, where: str | None = None, format: str = "auto",
               X: float | None = None, Z: float | None = None,
               mixture: str | None = None) -> "OpacityTable":
    """Read and check an opacity table (text matrix, HDF5 or OPAL, by content or named).

    Parameters
    ----------
    path : str or path-like
        The file.
    where : str, optional
        How messages name the file (default: the path).
    format : {"auto", "text", "hdf5", "opal"}
        The layout (module docstring); "auto" tells them apart by content:
        HDF5 by its signature, OPAL by a line starting ``TABLE #``, else text.
    X, Z : float, optional
        Hydrogen and metal mass fractions [dimensionless]: which composition
        of an OPAL file (:meth:`OpalFile.table_for`); required for a file of
        several compositions, ignored by the one-composition layouts.
    mixture : str, optional
        The metal mixture the model asks for (OPAL files: checked against the
        file's, e.g. "G&N'93 Solar").

    Returns
    -------
    OpacityTable
        For an OPAL file the table of (X, Z), with holes.

    Raises
    ------
    ModelError
        One line naming the file (and line) and the problem: missing file, an
        unknown format name, not a table in any known layout, ragged or
        truncated rows, non-increasing axes, NaN or inf, too few nodes, a
        composition the file cannot give.

    References
    ----------
    docs/physics.md, eq. 8 (the variable R) and section 2 (tables).
    """
    path = Path(path)
    where = where or str(path)
    fmt = detect_format(path, where, format)
    if fmt == "hdf5":
        return _read_hdf5(path, where)
    if fmt == "opal":
        opal = read_opal(path, where)
        if X is None or Z is None:
            if len(opal.compositions) != 1:
                raise ModelError(f"{where}: an OPAL file of {len(opal.compositions)} "
                                 f"compositions; give X and Z to choose one")
            c = opal.compositions[0]
            X, Z = c.X, c.Z
        return opal.table_for(X, Z, mixture=mixture)
    return _read_text(path, where, named=format == "text")


def detect_format(path: str | Path, where: str | None = None, format: str = "auto") -> str:
    """The layout of a table file: "text", "hdf5" or "opal".

    Parameters
    ----------
    path : str or path-like
        The file (it must exist).
    where : str, optional
        How messages name it.
    format : str
        "auto" (by content) or a layout name, returned once checked.

    Returns
    -------
    str
        The layout.

    Raises
    ------
    ModelError
        An unknown format name, a missing file or a directory.
    """
    path = Path(path)
    where = where or str(path)
    if format not in FORMATS:
        raise ModelError(f"{where}: [opacity] format = \"{format}\" is not known; "
                         f"choose one of: {', '.join(FORMATS)}")
    if not path.exists():
        raise ModelError(f"{where}: no such file")
    if path.is_dir():
        raise ModelError(f"{where}: is a directory, not an opacity table")
    if format != "auto":
        return format
    import h5py
    if h5py.is_hdf5(path):
        return "hdf5"
    try:
        with open(path, "rb") as f:
            head = f.read(65536)
    except OSError as error:
        raise ModelError(f"{where}: cannot read ({error.strerror or error})") from None
    if _OPAL_TABLE.search(head.decode("latin-1")):
        return "opal"
    return "text"


def _read_text(path, where, named=False):
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ModelError(f"{where}: not an opacity table in a known layout "
                         f"({KNOWN_LAYOUTS})") from None
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
        raise ModelError(f"{where}: not an opacity table: it holds no numbers "
                         f"({KNOWN_LAYOUTS})")

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
                                     f"(\"{snippet}\") should hold the log10 R values of "
                                     f"the text matrix ({KNOWN_LAYOUTS})") from None
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


# --- the OPAL layout ----------------------------------------------------------

_OPAL_TABLE = re.compile(r"^[ \t]*TABLE[ \t]*#[ \t]*\d+", re.M)
_OPAL_HEAD = re.compile(
    r"^\s*TABLE\s*#\s*(\d+)\s+\$(.*?)\$\s+X=\s*(\S+)\s+Y=\s*(\S+)\s+Z=\s*(\S+)"
    r"\s+dXc=\s*(\S+)\s+dXo=\s*(\S+)\s*$")
_OPAL_COUNT = re.compile(r"There are\s+(\d+)\s+tables", re.I)
_NUMBER = re.compile(r"\S+")


@dataclass(frozen=True)
class OpalComposition:
    """One composition of an OPAL file, as its ``TABLE #`` line gives it.

    Attributes
    ----------
    number : int
        The table's number in the file.
    X, Y, Z : float
        Hydrogen, helium and metal mass fractions [dimensionless].
    dXc, dXo : float
        Carbon and oxygen mass fractions beyond those in Z [dimensionless].
    line : int
        The line of the table's block.
    """

    number: int
    X: float
    Y: float
    Z: float
    dXc: float
    dXo: float
    line: int


@dataclass(frozen=True, eq=False)
class OpalFile:
    """Every composition of an OPAL multi-composition file, on one grid.

    Attributes
    ----------
    where : str
        How messages name the file.
    mixture : str
        The metal mixture named between $ signs (e.g. ``G&N'93 Solar``).
    log_T : ndarray (nT,)
        log10 T [K] of the rows (non-uniform).
    log_R : ndarray (nR,)
        log10 R [log10 g cm^-3], R = rho / T6^3.
    log_kappa : ndarray (n, nT, nR)
        log10 kappa [cm2 g-1] per composition; NaN outside the table.
    compositions : tuple of OpalComposition
        In file order; ``compositions[k]`` belongs to ``log_kappa[k]``.
    header : tuple of str
        The file's text before its first ``TABLE #`` line.
    """

    where: str
    mixture: str
    log_T: np.ndarray
    log_R: np.ndarray
    log_kappa: np.ndarray
    compositions: tuple
    header: tuple = ()

    def composition(self, number: int) -> OpacityTable:
        """The table numbered ``number`` in the file, verbatim (with holes).

        Parameters
        ----------
        number : int
            The table number (``TABLE # n``).

        Returns
        -------
        OpacityTable

        Raises
        ------
        ModelError
            No table of that number.
        """
        for k, c in enumerate(self.compositions):
            if c.number == number:
                return self._table(self.log_kappa[k], (
                    f"OPAL table {c.number} of {self.where} ({self.mixture}), X = {c.X}, "
                    f"Y = {c.Y}, Z = {c.Z}",))
        raise ModelError(f"{self.where}: no table number {number}")

    def _table(self, log_kappa, description):
        return OpacityTable(self.log_T, self.log_R, log_kappa,
                            (*description, "Iglesias & Rogers 1996, ApJ 464, 943"),
                            holes=True)

    def table_for(self, X: float, Z: float, mixture: str | None = None) -> OpacityTable:
        """The 2-D table of a model's composition (module docstring, "OPAL layout").

        Parameters
        ----------
        X, Z : float
            Hydrogen and metal mass fractions [dimensionless].
        mixture : str, optional
            The metal mixture asked for; refused unless it is the file's
            (compared without case, blanks and $ signs).

        Returns
        -------
        OpacityTable
            log10 kappa with holes; its description says how it was made.

        Raises
        ------
        ModelError
            Another mixture, no plain (dXc = dXo = 0) table, a composition
            outside the file's coverage, or far from a single-composition
            file's.

        Notes
        -----
        Quadratic (3-point Lagrange) interpolation in Z along each series of
        constant X (and the series Y = 0), then in X at that Z:

        .. math::

            \\log\\kappa(x) = \\sum_{i=0}^{2} \\log\\kappa_i
                \\prod_{j \\ne i} \\frac{x - x_j}{x_i - x_j}

        on the two nodes around x and the nearer outer neighbour (two nodes:
        linear).  Node by node on the (log10 T, log10 R) grid.

        References
        ----------
        docs/physics.md, section 10 (the scheme, its accuracy and tolerances).
        """
        where = self.where
        if mixture is not None and _mix_key(mixture) != _mix_key(self.mixture):
            raise ModelError(f"{where}: the file's tables are for the {self.mixture} metal "
                             f"mixture, not \"{mixture}\"; use a table file for that "
                             f"mixture")
        plain = [(k, c) for k, c in enumerate(self.compositions)
                 if c.dXc == 0.0 and c.dXo == 0.0]
        if not plain:
            raise ModelError(f"{where}: every table has extra carbon or oxygen (dXc, dXo > 0); "
                             f"none is for the plain {self.mixture} mixture")
        X, Z = float(X), float(Z)
        for k, c in plain:
            if abs(c.X - X) <= COMPOSITION_MATCH and abs(c.Z - Z) <= COMPOSITION_MATCH:
                return self._table(self.log_kappa[k], (
                    f"OPAL table {c.number} of {where} ({self.mixture}): X = {c.X}, "
                    f"Y = {c.Y}, Z = {c.Z}",))
        if len(plain) == 1:
            k, c = plain[0]
            dx, dz = SINGLE_TOLERANCE
            if abs(c.X - X) <= dx and abs(c.Z - Z) <= dz * c.Z + 1e-4:
                return self._table(self.log_kappa[k], (
                    f"OPAL table {c.number} of {where} ({self.mixture}): X = {c.X}, "
                    f"Z = {c.Z}, used for X = {X}, Z = {Z}",))
            raise ModelError(f"{where}: holds one composition, X = {c.X}, Z = {c.Z}; the "
                             f"model's X = {X}, Z = {Z} differ by more than |dX| <= {dx}, "
                             f"|dZ| <= {dz} Z + 1e-4; use a table for the model's "
                             f"composition")
        series = _series(plain)
        z_all = sorted({c.Z for _, c in plain})
        if not z_all[0] - COMPOSITION_MATCH <= Z <= z_all[-1] + COMPOSITION_MATCH:
            raise ModelError(f"{where}: Z = {Z} lies outside the file's tables, Z = "
                             f"{z_all[0]} .. {z_all[-1]}")
        nodes = []  # (X of the series at Z, log kappa there, table numbers used)
        for x_of, members in series:
            zs = np.array([c.Z for _, c in members])
            if not zs[0] - COMPOSITION_MATCH <= Z <= zs[-1] + COMPOSITION_MATCH:
                continue
            ks, ws = _lagrange_stencil(zs, Z)
            value = sum(w * self.log_kappa[members[i][0]] for i, w in zip(ks, ws,
                                                                          strict=True))
            nodes.append((x_of(Z), value, [members[i][1].number for i in ks]))
        nodes.sort(key=lambda n: n[0])
        xs = np.array([n[0] for n in nodes])
        if not nodes or not xs[0] - COMPOSITION_MATCH <= X <= xs[-1] + COMPOSITION_MATCH:
            span = f"X = {xs[0]:.4g} .. {xs[-1]:.4g}" if nodes else "no X"
            raise ModelError(f"{where}: X = {X}, Z = {Z} lies outside the file's tables: at "
                             f"Z = {Z} they span {span}")
        ks, ws = _lagrange_stencil(xs, X)
        value = sum(w * nodes[i][1] for i, w in zip(ks, ws, strict=True))
        used = sorted({n for i in ks for n in nodes[i][2]})
        return self._table(value, (
            f"OPAL tables of {where} ({self.mixture}) interpolated to X = {X}, Z = {Z}: "
            f"3-point Lagrange in Z, then in X, of log10 kappa (tables "
            f"{', '.join(map(str, used))})",))


def _mix_key(name):
    return re.sub(r"[\s$]", "", str(name)).lower()


def _series(plain):
    """Series of constant X (two or more tables), and Y = 0 (X = 1 - Z), Z increasing.

    Returns a list of (X as a function of Z, [(index, composition), ...]).
    """
    by_x = {}
    for k, c in plain:
        by_x.setdefault(round(c.X, 4), []).append((k, c))
    out = []
    rest = []
    for x, members in by_x.items():
        if len(members) >= 2:
            out.append((lambda z, x=x: x, sorted(members, key=lambda m: m[1].Z)))
        else:
            rest.extend(members)
    y0 = [m for m in rest if abs(m[1].Y) <= COMPOSITION_MATCH]
    if len(y0) >= 2:
        out.append((lambda z: 1.0 - z, sorted(y0, key=lambda m: m[1].Z)))
    return out


def _lagrange_stencil(nodes, x):
    """(indices, weights) of the 3-point Lagrange interpolation at x.

    ``nodes`` increasing; x within them (to COMPOSITION_MATCH).  A node within
    COMPOSITION_MATCH of x is taken alone; otherwise the two around x and the
    nearer of their outer neighbours (the lower on a tie, to 1e-12), or the two alone.
    """
    nodes = np.asarray(nodes, dtype=float)
    near = np.flatnonzero(np.abs(nodes - x) <= COMPOSITION_MATCH)
    if near.size:
        return [int(near[0])], [1.0]
    k = int(np.searchsorted(nodes, x)) - 1  # nodes[k] < x < nodes[k + 1]
    k = min(max(k, 0), nodes.size - 2)
    idx = [k, k + 1]
    lo, hi = k - 1, k + 2
    if lo >= 0 and (hi >= nodes.size or x - nodes[lo] <= nodes[hi] - x + 1e-12):
        idx = [lo, k, k + 1]
    elif hi < nodes.size:
        idx = [k, k + 1, hi]
    xs = nodes[idx]
    weights = []
    for i in range(len(idx)):
        w = 1.0
        for j in range(len(idx)):
            if j != i:
                w *= (x - xs[j]) / (xs[i] - xs[j])
        weights.append(w)
    return idx, weights


def read_opal(path: str | Path, where: str | None = None) -> OpalFile:
    """Read an OPAL multi-composition Rosseland-mean file (module docstring).

    Strict: the summary and the blocks must list the same tables, every block
    has the first block's log10 T rows and the ``logT`` line's log10 R
    headings, every value lies under a heading, and X + Y + Z + dXc + dXo = 1
    to the file's four decimals.

    Parameters
    ----------
    path : str or path-like
        The file.
    where : str, optional
        How messages name it.

    Returns
    -------
    OpalFile

    Raises
    ------
    ModelError
        One line naming the file and line: not the layout, truncated or ragged
        blocks, a value that is not a number (or NaN), a composition that does
        not add up to 1.

    References
    ----------
    docs/physics.md, section 10; Iglesias & Rogers 1996, ApJ 464, 943.
    """
    path = Path(path)
    where = where or str(path)
    try:
        text = path.read_bytes().decode("latin-1")
    except OSError as error:
        raise ModelError(f"{where}: cannot read ({error.strerror or error})") from None
    lines = text.splitlines()
    first = next((n for n, line in enumerate(lines) if _OPAL_TABLE.match(line)), None)
    if first is None:
        raise ModelError(f"{where}: not in the OPAL layout: no \"TABLE #\" line "
                         f"({KNOWN_LAYOUTS})")
    declared = None
    for line in lines[:first]:
        m = _OPAL_COUNT.search(line)
        if m:
            declared = int(m.group(1))
    summary = []  # compositions in the summary
    blocks = []  # (composition, [(line number, text)...]) of the table blocks
    log_R = None
    log_R_line = None
    mixture = None
    n = first
    nlines = len(lines)
    while n < nlines:
        line = lines[n]
        if not _OPAL_TABLE.match(line):
            if line.strip() and not line.strip().startswith("*"):
                # text between the summary and the tables: only blank and ***** lines
                raise ModelError(f"{where}: line {n + 1}: unexpected text "
                                 f"\"{line.strip()[:40]}\" between OPAL tables")
            n += 1
            continue
        comp, mix = _opal_head(line, n + 1, where)
        if mixture is None:
            mixture = mix
        elif _mix_key(mix) != _mix_key(mixture):
            raise ModelError(f"{where}: line {n + 1}: table {comp.number} is for the mixture "
                             f"{mix}, the file's first for {mixture}; one mixture a file")
        # A block: the next non-blank lines are "log R" (optional) and "logT ...".
        m = n + 1
        while m < nlines and not lines[m].strip():
            m += 1
        if m < nlines and lines[m].strip().lower().replace(" ", "") == "logr":
            m += 1
            while m < nlines and not lines[m].strip():
                m += 1
        if m >= nlines or not lines[m].lstrip().lower().startswith("logt"):
            if blocks:
                raise ModelError(f"{where}: line {n + 1}: table {comp.number} has no "
                                 f"\"logT\" heading line (truncated or damaged block)")
            summary.append(comp)
            n += 1
            continue
        heads = [(mm.group(0), mm.end()) for mm in _NUMBER.finditer(lines[m])][1:]
        try:
            values = np.array([float(h) for h, _ in heads])
        except ValueError:
            raise ModelError(f"{where}: line {m + 1}: the logT line should hold the log10 R "
                             f"headings") from None
        if log_R is None:
            log_R, log_R_line = values, m + 1
            _check_axis(log_R, "log10 R", where, lambda i, m=m: f"line {m + 1}, heading {i + 1}")
            # a value ends one column right of its heading (to 2 columns either way)
            column = {e + 1 + d: j for j, (_, e) in enumerate(heads) for d in range(-2, 3)}
        elif values.shape != log_R.shape or np.any(values != log_R):
            raise ModelError(f"{where}: line {m + 1}: table {comp.number} has other log10 R "
                             f"headings than line {log_R_line}")
        comp = OpalComposition(comp.number, comp.X, comp.Y, comp.Z, comp.dXc, comp.dXo, n + 1)
        rows = []
        k = m + 1
        while k < nlines and not lines[k].strip():
            k += 1
        while k < nlines and lines[k].strip() and not _OPAL_TABLE.match(lines[k]):
            rows.append((k + 1, lines[k]))
            k += 1
        blocks.append((comp, rows))
        n = k
    if not blocks:
        raise ModelError(f"{where}: not in the OPAL layout: a table list without tables "
                         f"(truncated?)")
    # the log T grid from the first block; every block must have it
    log_T = np.array([_opal_row_T(text_, line_, where) for line_, text_ in blocks[0][1]])
    _check_axis(log_T, "log10 T", where, lambda i: f"line {blocks[0][1][i][0]}")
    nT, nR = log_T.size, log_R.size
    data = np.full((len(blocks), nT, nR), np.nan)
    for b, (comp, rows) in enumerate(blocks):
        if len(rows) != nT:
            last = rows[-1][0] if rows else comp.line
            raise ModelError(f"{where}: line {last}: table {comp.number} has {len(rows)} "
                             f"log10 T rows, the first table {nT} (truncated or ragged)")
        for i, (number, row) in enumerate(rows):
            t = _opal_row_T(row, number, where)
            if t != log_T[i]:
                raise ModelError(f"{where}: line {number}: log10 T = {t!r} in table "
                                 f"{comp.number}, expected {float(log_T[i])!r} (the first "
                                 f"table's row {i + 1})")
            tokens = list(_NUMBER.finditer(row))[1:]
            for tok in tokens:
                j = column.get(tok.end())
                if j is None:
                    raise ModelError(f"{where}: line {number}: \"{tok.group(0)}\" at column "
                                     f"{tok.start() + 1} lies under no log10 R heading "
                                     f"(ragged row)")
                try:
                    v = float(tok.group(0))
                except ValueError:
                    raise ModelError(f"{where}: line {number}: \"{tok.group(0)}\" is not a "
                                     f"number") from None
                if not math.isfinite(v):
                    raise ModelError(f"{where}: line {number}: log10 kappa = "
                                     f"{tok.group(0)} at log10 R = {float(log_R[j])!r}; "
                                     f"missing values are written 9.999 or left blank")
                if not np.isnan(data[b, i, j]):
                    raise ModelError(f"{where}: line {number}: two values under the log10 "
                                     f"R = {float(log_R[j])!r} heading (ragged row)")
                data[b, i, j] = np.nan if v == OPAL_MISSING else v
        if np.isnan(data[b]).all():
            raise ModelError(f"{where}: line {comp.line}: table {comp.number} holds no "
                             f"values")
    comps = tuple(c for c, _ in blocks)
    numbers = [c.number for c in comps]
    if len(set(numbers)) != len(numbers):
        dup = next(x for x in numbers if numbers.count(x) > 1)
        raise ModelError(f"{where}: table {dup} appears twice")
    if declared is not None and declared != len(comps):
        raise ModelError(f"{where}: line {blocks[-1][1][-1][0]}: the header announces "
                         f"{declared} tables, the file holds {len(comps)} (truncated?)")
    if summary:
        listed = {c.number: c for c in summary}
        for c in comps:
            s_ = listed.get(c.number)
            if s_ is None or (s_.X, s_.Y, s_.Z, s_.dXc, s_.dXo) != (c.X, c.Y, c.Z, c.dXc,
                                                                     c.dXo):
                raise ModelError(f"{where}: line {c.line}: table {c.number} is not the one "
                                 f"the table list gives under that number")
        if len(listed) != len(comps):
            raise ModelError(f"{where}: the table list names {len(listed)} tables, the "
                             f"file holds {len(comps)} (truncated?)")
    return OpalFile(where, mixture, log_T, log_R, data, comps, tuple(lines[:first]))


def _opal_head(line, number, where):
    m = _OPAL_HEAD.match(line)
    if not m:
        raise ModelError(f"{where}: line {number}: a TABLE line should read \"TABLE # n "
                         f"$mixture$ X=... Y=... Z=... dXc=... dXo=...\"")
    try:
        X, Y, Z, dXc, dXo = (float(m.group(i)) for i in range(3, 8))
    except ValueError:
        raise ModelError(f"{where}: line {number}: a composition that is not a number") from None
    fractions = (X, Y, Z, dXc, dXo)
    if not all(math.isfinite(f) and 0.0 <= f <= 1.0 for f in fractions):
        raise ModelError(f"{where}: line {number}: mass fractions must lie between 0 and 1")
    if abs(sum(fractions) - 1.0) > 2.5e-4:
        raise ModelError(f"{where}: line {number}: table {m.group(1)} has X + Y + Z + dXc + "
                         f"dXo = {sum(fractions):.4f}, not 1")
    return OpalComposition(int(m.group(1)), X, Y, Z, dXc, dXo, number), m.group(2).strip()


def _opal_row_T(row, number, where):
    head = row.split(None, 1)[0]
    try:
        t = float(head)
    except ValueError:
        raise ModelError(f"{where}: line {number}: \"{head}\" should be log10 T") from None
    if not math.isfinite(t):
        raise ModelError(f"{where}: line {number}: log10 T is {head}")
    return t


def packaged_table(name: str) -> Path | None:
    """The shipped table of a short name (:data:`PACKAGED_TABLES`), else None.

    Parameters
    ----------
    name : str
        A path as written in a model file; only a bare name counts.

    Returns
    -------
    Path or None
        The file inside the package.
    """
    if name in PACKAGED_TABLES:
        return Path(__file__).resolve().parent / "data" / "opacity" / name
    return None


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
    if np.isnan(f).any():
        f_T = _run_derivative(log_T, f.T).T
        f_R = _run_derivative(log_R, f)
        f_TR = _run_derivative(log_R, f_T)
        return np.stack([f, f_T, f_R, f_TR], axis=-1)
    f_T = CubicSpline(log_T, f, axis=0, bc_type="not-a-knot")(log_T, 1)
    f_R = CubicSpline(log_R, f, axis=1, bc_type="not-a-knot")(log_R, 1)
    f_TR = CubicSpline(log_R, f_T, axis=1, bc_type="not-a-knot")(log_R, 1)
    return np.stack([f, f_T, f_R, f_TR], axis=-1)


def _run_derivative(x, rows):
    """d/dx of not-a-knot splines through each run of finite values of each row.

    A run of 3 gives the parabola, of 2 the line, of 1 no derivative (NaN, as
    the holes).
    """
    from scipy.interpolate import CubicSpline
    out = np.full(rows.shape, np.nan)
    for i, row in enumerate(rows):
        ok = np.isfinite(row)
        j = 0
        n = row.size
        while j < n:
            if not ok[j]:
                j += 1
                continue
            k = j
            while k < n and ok[k]:
                k += 1
            if k - j >= 3:
                out[i, j:k] = CubicSpline(x[j:k], row[j:k], bc_type="not-a-knot")(x[j:k], 1)
            elif k - j == 2:
                out[i, j:k] = (row[j + 1] - row[j]) / (x[j + 1] - x[j])
            j = k
    return out


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


@lru_cache(maxsize=4)
def _opal_cached(path, mtime_ns, size, where):
    return read_opal(path, where)


@lru_cache(maxsize=32)
def _load_cached(path, mtime_ns, size, where, format, X, Z, mixture):
    fmt = detect_format(path, where, format)
    if fmt == "opal":
        opal = _opal_cached(path, mtime_ns, size, where)
        table = opal.table_for(X, Z, mixture=mixture)
    else:
        table = read_table(path, where, fmt)
    params, extra = table_kernel_data(table, clamp=False)
    extra.flags.writeable = False
    return table, params, extra


def load_table(path: str | Path, where: str | None = None, format: str = "auto",
               X: float = 0.7, Z: float = 0.02, mixture: str | None = None) -> tuple:
    """(table, params, extra) of the file at ``path``, parsed once per version.

    Parameters
    ----------
    path : str or Path
        A table file (see :func:`read_table`).
    where : str, optional
        How messages name the file.
    format : str
        "auto", "text", "hdf5" or "opal" (:func:`read_table`).
    X, Z : float
        The model's hydrogen and metal mass fractions [dimensionless]: which
        composition of an OPAL file (ignored by the other layouts).
    mixture : str, optional
        The metal mixture asked for (OPAL files).

    Returns
    -------
    table : OpacityTable
    params : tuple of float
        Kernel slots 2..7 (table edges; clamp off; holes flag).
    extra : numpy.ndarray
        The table block of the kernel vector (read-only).

    Raises
    ------
    ModelError
        As :func:`read_table`.

    Notes
    -----
    Cached on (absolute path, modification time, size) and the composition,
    so a sweep over many models that share a table reads and differentiates
    it once (an OPAL file is parsed once for all compositions), while an
    edited file is read again.  ``params`` has the clamp slot off; the caller
    sets it.
    """
    path = Path(path).expanduser().absolute()
    where = where or str(path)
    if format not in FORMATS:
        detect_format(path, where, format)  # the one-line message
    try:
        st = path.stat()
    except FileNotFoundError:
        raise ModelError(f"{where}: no such file") from None
    except OSError as error:
        raise ModelError(f"{where}: cannot read ({error.strerror or error})") from None
    return _load_cached(str(path), st.st_mtime_ns, st.st_size, where, format, float(X),
                        float(Z), mixture)


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
