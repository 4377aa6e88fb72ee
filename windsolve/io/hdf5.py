"""HDF5 files: built in memory and written atomically; every check of a file's layout,
units and values when it is read."""

import datetime
import io
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .._version import __version__
from ..core.constants import C_LIGHT, SIGMA_SB
from ..errors import OutputError
from .atomic import write_bytes

if TYPE_CHECKING:
    from collections.abc import Callable, Iterable

    import h5py
    from astropy.units import UnitBase
    from numpy.typing import ArrayLike


def write_hdf5(path: str | Path, fill: "Callable[[h5py.File], object]") -> Path:
    """Build an HDF5 file in memory with ``fill(f)``, then write its bytes to ``path``
    atomically.

    The HDF5 library never writes to the disk itself: on a full disk it can
    crash the interpreter (a segmentation fault when a write fails) instead of
    raising.

    Parameters
    ----------
    path : str or Path
        The HDF5 file to write.
    fill : callable
        Called once with an h5py.File open for writing on an in-memory buffer;
        creates the file's groups, datasets and attributes.  Its return value
        is ignored.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` cannot be written (see :func:`~windsolve.io.atomic.atomic_write`).
        An error raised by ``fill`` propagates unchanged, and nothing is written.
    """
    import h5py
    buffer = io.BytesIO()
    with h5py.File(buffer, "w") as f:
        fill(f)
    return write_bytes(path, buffer.getbuffer())


def open_hdf5(path: str | Path) -> "h5py.File":
    """Open an HDF5 file for reading, or raise a one-line OutputError.

    Parameters
    ----------
    path : str or Path
        The file to open.

    Returns
    -------
    h5py.File
        Open read-only; the caller closes it (it is a context manager).

    Raises
    ------
    OutputError
        One line naming ``path`` and a fix: no such file, a directory,
        permission denied, a truncated file, a file locked by a writer, or
        not an HDF5 file (or a damaged one).
    """
    import h5py

    path = Path(path)
    if not path.exists():
        raise OutputError(f"{path}: no such file")
    if path.is_dir():
        raise OutputError(f"{path} is a directory, not an HDF5 file")
    try:
        return h5py.File(path, "r")
    except OSError as error:
        text = str(error)
        fix = "give a result, family or sweep file written by windsolve"
        if "errno = 13" in text or isinstance(error, PermissionError):
            why, fix = "cannot read it (permission denied)", "check its permissions"
        elif "truncated" in text:
            why = "a truncated HDF5 file (cut short while it was written or copied)"
        elif "unable to lock" in text.lower():
            why = "another program has it open for writing (the file is locked)"
            fix = "wait until that program has finished, then try again"
        else:
            why = "not an HDF5 file (or a damaged one)"
        raise OutputError(f"{path}: {why}; {fix}") from None


# -- reading: every check of a file's layout, units and values lives here ---------------

CONSISTENCY_RTOL = 0.05  # windsolve's own files hold these relations to roundoff

KINDS = {"result": "a result file (windsolve run -o)",
         "family": "a family file (windsolve family -o)",
         "sweep": "a sweep file (windsolve sweep -o)"}


def file_kind(f: "h5py.File", path: str | Path) -> str:
    """The kind of an open windsolve file, told by its attributes and groups.

    A ``sweep_toml`` attribute, or an ``axes`` attribute with a /table, makes a
    sweep file; a ``family_scan`` attribute a family file; a /summary or a
    /profile a result file.

    Parameters
    ----------
    f : h5py.File
        The open file.
    path : str or Path
        Names the file in the message.

    Returns
    -------
    str
        ``"result"``, ``"family"`` or ``"sweep"`` (the keys of :data:`KINDS`).

    Raises
    ------
    OutputError
        The file is none of the three (the message lists up to three of its
        top-level names, or says it is empty).
    """
    if "sweep_toml" in f.attrs or ("axes" in f.attrs and "table" in f):
        return "sweep"
    if "family_scan" in f.attrs:
        return "family"
    if "summary" in f or "profile" in f:
        return "result"
    what = (f"holds only {', '.join(sorted(f.keys())[:3])}" if len(f) else "is empty")
    raise OutputError(f"{path}: no windsolve data in this HDF5 file (it {what}; a result "
                      f"file has /summary and /profile, a family or sweep file /table)")


def hdf5_kind(path: str | Path) -> str:
    """The kind of the windsolve file at ``path`` (see :func:`file_kind`).

    Parameters
    ----------
    path : str or Path
        An HDF5 file; opened for reading and closed again.

    Returns
    -------
    str
        ``"result"``, ``"family"`` or ``"sweep"``.

    Raises
    ------
    OutputError
        The file cannot be opened (see :func:`open_hdf5`) or is no windsolve
        file (see :func:`file_kind`).
    """
    with open_hdf5(path) as f:
        return file_kind(f, path)


def require_kind(f: "h5py.File", path: str | Path, kind: str,
                 command_hint: str = "") -> None:
    """Check that the open file ``f`` is a windsolve file of ``kind``.

    Parameters
    ----------
    f : h5py.File
        The open file.
    path : str or Path
        Names the file in the message.
    kind : str
        The kind required: ``"result"``, ``"family"`` or ``"sweep"``.
    command_hint : str, optional
        Appended to the message (e.g. which command reads the kind found).

    Raises
    ------
    OutputError
        ``f`` is a file of another kind ("PATH is a sweep file ..., not a
        result file ..."), or no windsolve file (see :func:`file_kind`).
    """
    found = file_kind(f, path)
    if found != kind:
        raise OutputError(f"{path} is {KINDS[found]}, not {KINDS[kind]}{command_hint}")


def _member(g, name, path, where, what):
    """``g[name]``, or an OutputError saying that it is missing (or a broken link)."""
    if name not in g:
        hint = "; the file is incomplete or not written by windsolve" if what == "group" else ""
        raise OutputError(f"{path}: no {where} {what}{hint}")
    try:
        return g[name]
    except (KeyError, OSError):
        raise OutputError(f"{path}: {where} is a link to nothing (a broken soft or external "
                          f"link); the file is damaged") from None


def group(f: "h5py.Group", name: str, path: str | Path) -> "h5py.Group":
    """The HDF5 group ``name`` of ``f``, checked to be a group.

    Parameters
    ----------
    f : h5py.Group
        The open file (or a group of it).
    name : str
        The group's name in ``f``.
    path : str or Path
        Names the file in the message.

    Returns
    -------
    h5py.Group
        ``f[name]``.

    Raises
    ------
    OutputError
        ``name`` is absent, a link to nothing (a broken soft or external
        link), or a dataset.
    """
    import h5py
    g = _member(f, name, path, f"/{name}", "group")
    if not isinstance(g, h5py.Group):
        raise OutputError(f"{path}: /{name} is a dataset where a group should be")
    return g


def column(g: "h5py.Group", name: str, path: str | Path, length: int | None = None,
           text: bool = False) -> np.ndarray:
    """A 1-D dataset ``name`` of group ``g`` read as an array, checked on the way.

    Parameters
    ----------
    g : h5py.Group
        The group holding the dataset.
    name : str
        The dataset's name in ``g``.
    path : str or Path
        Names the file in the message.
    length : int, optional
        The number of values the dataset must have (that of the other
        columns); not checked when None.
    text : bool, optional
        Read text (str) instead of numbers.

    Returns
    -------
    numpy.ndarray
        float64 values (integers and booleans converted) in the units the file
        stores them in, or str values when ``text``.

    Raises
    ------
    OutputError
        Naming the file and the dataset: it is missing, a broken link, a
        group, not one-dimensional, of the wrong type (text where numbers are
        wanted or the reverse), or not ``length`` long.
    """
    import h5py
    where = f"{g.name.rstrip('/')}/{name}"
    d = _member(g, name, path, where, "dataset")
    if not isinstance(d, h5py.Dataset):
        raise OutputError(f"{path}: {where} is a group where a dataset should be")
    if d.ndim != 1:
        raise OutputError(f"{path}: {where} has shape {d.shape}; it must be one-dimensional")
    kind = d.dtype.kind
    if text:
        if kind not in "OSU":
            raise OutputError(f"{path}: {where} holds {d.dtype} values, not text")
        data = read_strings(d[()])
    else:
        if kind not in "fiub":
            raise OutputError(f"{path}: {where} holds {'text' if kind in 'OSU' else d.dtype}, "
                              f"not numbers")
        data = np.asarray(d[()], dtype=np.float64)
    if length is not None and data.size != length:
        raise OutputError(f"{path}: {where} has {data.size} values where the other datasets "
                          f"have {length}; the file is damaged")
    return data


def parse_unit(text: object, path: str | Path, where: str,
               expected: "UnitBase | str | None" = None) -> "UnitBase":
    """The astropy unit a ``units`` attribute names, checked against ``expected``.

    Parameters
    ----------
    text : str, bytes or numpy scalar
        The attribute's value; an empty (or blank) text is dimensionless.
    path : str or Path
        Names the file in the message.
    where : str
        Names the dataset or attribute in the message (e.g. ``"/profile/radius"``).
    expected : astropy.units.UnitBase or str, optional
        A unit of the physical type required (e.g. cm / s for a speed); any
        unit when None.

    Returns
    -------
    astropy.units.UnitBase
        The unit, read strictly (an unknown unit name is an error).

    Raises
    ------
    OutputError
        The value is not text, not a unit astropy reads, or not of the
        physical type of ``expected`` (the message names that type and gives
        ``expected`` as an example).
    """
    import astropy.units as u
    text = plain(text)
    if isinstance(text, bytes):
        text = text.decode(errors="replace")
    if not isinstance(text, str):
        raise OutputError(f"{path}: {where} has units {plain(text)!r}, which is not a unit name "
                          f"(e.g. \"cm / s\")")
    try:
        unit = u.Unit(text.strip() or "1", parse_strict="raise")
    except (ValueError, TypeError):
        raise OutputError(f"{path}: {where} has units \"{text}\", which is not a unit "
                          f"astropy reads") from None
    if expected is not None and not unit.is_equivalent(expected):
        kind = str(u.Unit(expected).physical_type).split("/")[0]
        raise OutputError(f"{path}: {where} has units \"{text}\", which is not a unit of "
                          f"{kind} (e.g. \"{u.Unit(expected).to_string() or '1'}\")")
    return unit


def dataset_unit(g: "h5py.Group", name: str, path: str | Path,
                 expected: "UnitBase | None" = None) -> "UnitBase":
    """The unit of the dataset ``g[name]``, from its ``units`` attribute.

    Parameters
    ----------
    g : h5py.Group
        The group holding the dataset (which must exist; see :func:`column`).
    name : str
        The dataset's name in ``g``.
    path : str or Path
        Names the file in the message.
    expected : astropy.units.UnitBase, optional
        The unit of the physical type required; also the unit assumed when
        the dataset has no ``units`` attribute.

    Returns
    -------
    astropy.units.UnitBase
        The unit the attribute names; without an attribute, ``expected``, or
        dimensionless when ``expected`` is None.

    Raises
    ------
    OutputError
        The attribute is not a unit of the physical type of ``expected``
        (see :func:`parse_unit`).
    """
    d = g[name]
    where = f"{g.name.rstrip('/')}/{name}"
    if "units" not in d.attrs:
        if expected is None:
            import astropy.units as u
            return u.one
        return expected
    return parse_unit(d.attrs["units"], path, where, expected)


def check_values(values: "ArrayLike", path: str | Path, where: str, unit: "UnitBase",
                 positive: bool = False, allow_nan: bool = False,
                 cgs: "UnitBase | None" = None, nonnegative: bool = False) -> None:
    """Check the numbers read from a dataset or attribute before they are used.

    Parameters
    ----------
    values : array_like
        The numbers, in ``unit`` (one attribute's value, or a dataset's).
    path : str or Path
        Names the file in the message.
    where : str
        Names the dataset or attribute in the message.
    unit : astropy.units.UnitBase
        The unit of ``values`` (from the file's ``units`` attribute).  When it
        is a speed unit, every value must be slower than light.
    positive : bool, optional
        Every finite value must be > 0.
    allow_nan : bool, optional
        NaN is allowed (e.g. a quantity not defined for a failed model);
        infinities never are.
    cgs : astropy.units.UnitBase, optional
        The unit the code computes in; the values converted to it must still
        be finite.
    nonnegative : bool, optional
        Every finite value must be >= 0.

    Raises
    ------
    OutputError
        Naming the first bad value (and its index): it overflows float64 when
        converted to ``cgs``; it is NaN (unless ``allow_nan``) or infinite; it
        is <= 0 when ``positive`` or < 0 when ``nonnegative``; or a speed
        reaches the speed of light (a wrong units attribute, most likely).
    """
    import astropy.units as u
    values = np.asarray(values, dtype=np.float64)  # a 0-d array for one attribute
    if cgs is not None and unit != cgs:
        with np.errstate(over="ignore", invalid="ignore"):
            converted = values * unit.to(cgs)
        over = np.isfinite(values) & ~np.isfinite(converted)
        if over.any():
            i = int(np.flatnonzero(over)[0])
            raise OutputError(f"{path}: {where} = {float(values.flat[i]):.6g} "
                              f"{unit.to_string()} is too large to compute with "
                              f"(beyond 1.8e308 {u.Unit(cgs).to_string()})")
    bad = ~np.isfinite(values)
    if allow_nan:
        bad &= ~np.isnan(values)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        what = "NaN" if np.isnan(values.flat[i]) else "infinite"
        at = (f" at index {i} ({int(bad.sum())} of {values.size} values)" if values.ndim
              else "")
        raise OutputError(f"{path}: {where} is {what}{at}; the file is damaged")
    ok = values[np.isfinite(values)]
    if positive and ok.size and not np.all(ok > 0):
        i = int(np.flatnonzero(np.isfinite(values) & ~(values > 0))[0])
        at = f" at index {i}" if values.ndim else ""
        raise OutputError(f"{path}: {where} = {float(values.flat[i]):.6g}{at}; it must "
                          f"be > 0")
    if nonnegative and ok.size and not np.all(ok >= 0):
        i = int(np.flatnonzero(np.isfinite(values) & ~(values >= 0))[0])
        at = f" at index {i}" if values.ndim else ""
        raise OutputError(f"{path}: {where} = {float(values.flat[i]):.6g}{at}; it must "
                          f"be >= 0")
    if ok.size and unit.is_equivalent(u.cm / u.s):
        fastest = float(np.max(np.abs(ok)) * unit.to(u.cm / u.s))
        if fastest >= C_LIGHT:
            raise OutputError(f"{path}: {where} reaches {fastest / C_LIGHT:.3g} times the speed "
                              f"of light; is its units attribute ({unit.to_string()}) right?")


def plain(value: Any) -> Any:
    """The Python value a numpy scalar (or one-element array) holds.

    Some programs write attributes as one-element arrays; h5py reads scalars
    as numpy scalars.

    Parameters
    ----------
    value : object
        An attribute's value as h5py reads it.

    Returns
    -------
    object
        The Python scalar (int, float, str, bytes ...) for a numpy scalar or a
        one-element array; ``value`` itself otherwise.
    """
    if isinstance(value, np.ndarray) and value.size == 1:
        value = value.reshape(()).item()
    return value.item() if isinstance(value, np.generic) else value


def text_attr(attrs: "h5py.AttributeManager", key: str, path: str | Path, where: str,
              default: str | None = None) -> str:
    """A text attribute, checked to be text.

    Parameters
    ----------
    attrs : h5py.AttributeManager
        The attributes of a file, group or dataset (``.attrs``).
    key : str
        The attribute's name.
    path : str or Path
        Names the file in the message.
    where : str
        Names the object the attributes belong to in the message.
    default : str, optional
        Returned when the attribute is absent; when None, an absent attribute
        is an error.

    Returns
    -------
    str
        The attribute's text (bytes decoded, undecodable bytes replaced).

    Raises
    ------
    OutputError
        The attribute is absent and there is no ``default``, or it is not text.
    """
    if key not in attrs:
        if default is None:
            raise OutputError(f"{path}: {where} has no {key} attribute")
        return default
    value = plain(attrs[key])
    if isinstance(value, bytes):
        value = value.decode(errors="replace")
    if not isinstance(value, str):
        raise OutputError(f"{path}: the {key} attribute of {where} is {plain(value)!r}, "
                          f"not text")
    return value


def stamp(f: "h5py.File", model_kind: str) -> None:
    """Write the root attributes every windsolve file carries.

    Parameters
    ----------
    f : h5py.File
        The file being written.
    model_kind : str
        The wind model's kind (e.g. ``"isothermal"``), stored as ``model``.

    Notes
    -----
    Sets ``windsolve_version``, ``created`` (the UTC time, ISO 8601 to the
    second) and ``model``.
    """
    f.attrs["windsolve_version"] = __version__
    f.attrs["created"] = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
    f.attrs["model"] = model_kind


def dataset(group: "h5py.Group", name: str, data: "ArrayLike", units: str) -> "h5py.Dataset":
    """Create a dataset with its ``units`` attribute (docs/physics.md, section 9).

    Parameters
    ----------
    group : h5py.Group
        Where to create it.
    name : str
        The dataset's name.
    data : array_like
        Its values, in ``units``.
    units : str
        An astropy unit name (``"cm / s"``), or ``"none"`` for text.

    Returns
    -------
    h5py.Dataset
        The new dataset.
    """
    d = group.create_dataset(name, data=data)
    d.attrs["units"] = units
    return d


def strings(group: "h5py.Group", name: str, values: "Iterable[str]") -> "h5py.Dataset":
    """Create a dataset of text (status, message ...), units ``"none"``.

    Parameters
    ----------
    group : h5py.Group
        Where to create it.
    name : str
        The dataset's name.
    values : iterable of str
        One text a row, stored as variable-length UTF-8 strings.

    Returns
    -------
    h5py.Dataset
        The new dataset.
    """
    import h5py
    return dataset(group, name, np.array(list(values), dtype=h5py.string_dtype()), "none")


def read_strings(data: "Iterable[bytes | str]") -> np.ndarray:
    """Decode the values of an h5py text dataset to str.

    Parameters
    ----------
    data : iterable of bytes or str
        The values as h5py reads them (bytes for variable-length strings).

    Returns
    -------
    numpy.ndarray
        The values as str (bytes decoded as UTF-8, anything else by ``str``).
    """
    return np.array([x.decode() if isinstance(x, bytes) else str(x) for x in data])


def check_photosphere(path: str | Path, where: str, L: "ArrayLike", R: "ArrayLike",
                      T: "ArrayLike", rows: "ArrayLike | None" = None) -> None:
    """Check that L = 4 pi R^2 sigma T^4 holds, to :data:`CONSISTENCY_RTOL`.

    windsolve derives T_eff from L_ph and R_ph, so its files agree to roundoff; a
    mismatch means a units attribute of one of the three that does not describe its
    numbers (e.g. a radius in cm labelled Rsun), which the dimension check cannot see.

    Parameters
    ----------
    path : str or Path
        Names the file in the message.
    where : str
        Names the group the three come from in the message.
    L : array_like
        Photosphere luminosity [erg/s].
    R : array_like
        Photosphere radius [cm].
    T : array_like
        Photosphere (effective) temperature [K].
    rows : array_like of bool, optional
        Which entries to check (e.g. the converged rows of a table); all when None.
        Entries where any of the three is not finite are never checked.

    Raises
    ------
    OutputError
        At the first entry checked where L / (4 pi R^2 sigma T^4) differs from 1
        by more than :data:`CONSISTENCY_RTOL`, giving the ratio and the index.
    """
    L, R, T = (np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (L, R, T))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        ratio = L / (4.0 * np.pi * SIGMA_SB * R**2 * T**4)
    bad = np.isfinite(L) & np.isfinite(R) & np.isfinite(T) & ~(np.abs(ratio - 1.0)
                                                                <= CONSISTENCY_RTOL)
    if rows is not None:
        bad &= np.asarray(rows, dtype=bool)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        at = f" at index {i}" if L.size > 1 else ""
        raise OutputError(f"{path}: {where} photosphere_luminosity is {ratio[i]:.4g} times "
                          f"4 pi R^2 sigma T^4 of photosphere_radius and "
                          f"photosphere_temperature{at}; a units attribute of one of the three "
                          f"does not describe its numbers")
