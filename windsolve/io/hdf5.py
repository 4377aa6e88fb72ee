"""HDF5 files: built in memory and written atomically; every check of a file's layout,
units and values when it is read."""

import datetime
import io
from pathlib import Path

import numpy as np

from .._version import __version__
from ..core.constants import C_LIGHT, SIGMA_SB
from ..errors import OutputError
from .atomic import write_bytes


def write_hdf5(path, fill):
    """Build an HDF5 file in memory with ``fill(f)`` (an open h5py.File), then
    write its bytes to ``path`` atomically.

    The HDF5 library never writes to the disk itself: on a full disk it can
    crash the interpreter (a segmentation fault when a write fails) instead of
    raising.
    """
    import h5py
    buffer = io.BytesIO()
    with h5py.File(buffer, "w") as f:
        fill(f)
    return write_bytes(path, buffer.getbuffer())


def open_hdf5(path):
    """An open h5py.File for reading, or a one-line OutputError."""
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


def file_kind(f, path):
    """"result", "family" or "sweep" for an open windsolve file; OutputError otherwise."""
    if "sweep_toml" in f.attrs or ("axes" in f.attrs and "table" in f):
        return "sweep"
    if "family_scan" in f.attrs:
        return "family"
    if "summary" in f or "profile" in f:
        return "result"
    what = (f"holds only {', '.join(sorted(f.keys())[:3])}" if len(f) else "is empty")
    raise OutputError(f"{path}: no windsolve data in this HDF5 file (it {what}; a result "
                      f"file has /summary and /profile, a family or sweep file /table)")


def hdf5_kind(path):
    """The kind of the windsolve file at ``path`` (see :func:`file_kind`)."""
    with open_hdf5(path) as f:
        return file_kind(f, path)


def require_kind(f, path, kind, command_hint=""):
    """OutputError unless ``f`` is a windsolve file of ``kind``."""
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


def group(f, name, path):
    """The HDF5 group ``name`` of ``f``; OutputError if absent or a dataset."""
    import h5py
    g = _member(f, name, path, f"/{name}", "group")
    if not isinstance(g, h5py.Group):
        raise OutputError(f"{path}: /{name} is a dataset where a group should be")
    return g


def column(g, name, path, length=None, text=False):
    """A 1-D dataset ``name`` of group ``g`` as an array (numbers, or str when ``text``).

    OutputError naming the file and dataset if it is missing, a group, not
    one-dimensional, of the wrong type, or not ``length`` long.
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


def parse_unit(text, path, where, expected=None):
    """An astropy unit from a ``units`` attribute; OutputError if it is not a unit of the
    dimension of ``expected``."""
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


def dataset_unit(g, name, path, expected=None):
    """The unit of dataset ``g[name]`` (its ``units`` attribute; ``expected`` without one)."""
    d = g[name]
    where = f"{g.name.rstrip('/')}/{name}"
    if "units" not in d.attrs:
        if expected is None:
            import astropy.units as u
            return u.one
        return expected
    return parse_unit(d.attrs["units"], path, where, expected)


def check_values(values, path, where, unit, positive=False, allow_nan=False, cgs=None,
                 nonnegative=False):
    """OutputError unless ``values`` (in ``unit``) are finite (or NaN where allowed), > 0
    when ``positive``, slower than light when they are speeds, and still finite in the
    unit ``cgs`` (the unit the code computes in) when one is given."""
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


def plain(value):
    """A numpy scalar (or one-element array, as some programs write attributes) as the
    Python value it holds."""
    if isinstance(value, np.ndarray) and value.size == 1:
        value = value.reshape(()).item()
    return value.item() if isinstance(value, np.generic) else value


def text_attr(attrs, key, path, where, default=None):
    """A text attribute (str), or ``default`` when absent; OutputError if not text."""
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


def stamp(f, model_kind):
    """Root attributes every windsolve file carries: version, creation time, model."""
    f.attrs["windsolve_version"] = __version__
    f.attrs["created"] = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
    f.attrs["model"] = model_kind


def dataset(group, name, data, units):
    """Create a dataset with its ``units`` attribute (docs/physics.md, section 9)."""
    d = group.create_dataset(name, data=data)
    d.attrs["units"] = units
    return d


def strings(group, name, values):
    """A dataset of text (status, message ...), units "none"."""
    import h5py
    return dataset(group, name, np.array(list(values), dtype=h5py.string_dtype()), "none")


def read_strings(data):
    """Decode an h5py text dataset's values to str."""
    return np.array([x.decode() if isinstance(x, bytes) else str(x) for x in data])


def check_photosphere(path, where, L, R, T, rows=None):
    """OutputError unless L = 4 pi R^2 sigma T^4 (cgs arrays; NaN entries and rows outside
    the boolean ``rows`` are skipped).

    windsolve derives T_eff from L_ph and R_ph, so its files agree to roundoff; a
    mismatch means a units attribute of one of the three that does not describe its
    numbers (e.g. a radius in cm labelled Rsun), which the dimension check cannot see.
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
