"""HDF5 and file plumbing shared by results, families, sweeps and tables."""

import datetime
import os
from pathlib import Path

import numpy as np

from ._version import __version__
from .errors import ModelError, OutputError


def atomic_write(path, write):
    """Call ``write(tmp)`` on a temporary name beside ``path``, then rename.

    An interrupted write (an error, Ctrl-C, a kill before the rename) never
    leaves a half-written file at ``path``; the temporary file is removed.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        write(tmp)
        os.replace(tmp, path)
    except OSError as error:
        raise OutputError(f"{path}: cannot write ({error.strerror or error})") from None
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def read_input_text(path, what, missing_hint, encoding_hint, encoding="utf-8"):
    """The text of a user's input file, or a one-line ModelError.

    ``what`` names the kind of file ("a model file"), ``missing_hint`` ends
    the no-such-file message and ``encoding_hint`` the not-UTF-8 one.
    """
    path = Path(path)
    try:
        return path.read_text(encoding=encoding)
    except FileNotFoundError:
        raise ModelError(f"{path}: no such file; {missing_hint}") from None
    except IsADirectoryError:
        raise ModelError(f"{path} is a directory, not {what}") from None
    except UnicodeDecodeError as error:
        raise ModelError(f"{path}: cannot read: not a UTF-8 text file (byte "
                         f"0x{error.object[error.start]:02x} at position {error.start}); "
                         f"{encoding_hint}") from None
    except OSError as error:
        raise ModelError(f"{path}: cannot read ({error.strerror or error})") from None


def open_hdf5(path):
    """An open h5py.File for reading, or a one-line OutputError."""
    import h5py

    path = Path(path)
    if not path.exists():
        raise OutputError(f"{path}: no such file")
    try:
        return h5py.File(path, "r")
    except OSError:
        raise OutputError(f"{path}: not an HDF5 file (or damaged)") from None


def stamp(f, model_kind):
    """Root attributes every windsolve file carries: version, creation time, model."""
    f.attrs["windsolve_version"] = __version__
    f.attrs["created"] = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
    f.attrs["model"] = model_kind


def dataset(group, name, data, units):
    """Create a dataset with its ``units`` attribute (SPEC section 7)."""
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
