"""The one atomic-write path of every output file, and the reading of users' input text."""

import errno
import io
import os
import re
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import ModelError, OutputError

if TYPE_CHECKING:
    from collections.abc import Callable

    from matplotlib.figure import Figure

# Every output file (HDF5, CSV, text, PNG/SVG/PDF) is written by atomic_write:
# the bytes go to a hidden temporary sibling ``.NAME.tmp-PID`` which is renamed
# over NAME only when complete.  HDF5 files and figures are built in memory first
# (write_hdf5, write_figure), so a full disk or a read-only directory only ever
# meets plain Python file I/O -- never the HDF5 library or a matplotlib backend,
# which crash or leave broken files when a write fails half-way.

_HINTS = {getattr(errno, name, None): hint for name, hint in (
    ("ENOSPC", "free some space or write to another disk"),
    ("EDQUOT", "free some space (disk quota exceeded) or write elsewhere"),
    ("EROFS", "the file system is read-only; write elsewhere"),
    ("EACCES", "no permission to write there; write elsewhere"),
    ("EPERM", "no permission to write there; write elsewhere"),
    ("EFBIG", "the file is too large for this file system; write elsewhere"),
)}


def output_error(path: str | Path, error: BaseException) -> OutputError:
    """A one-line OutputError naming ``path`` for an error met while writing it.

    h5py and matplotlib wrap errno in long, multi-line texts; the errno is
    recovered from them (``errno = N`` or ``[Errno N]``) where it is not set
    on the error itself.

    Parameters
    ----------
    path : str or Path
        The output file the write was for; named first in the message.
    error : BaseException
        The error met, usually an OSError.

    Returns
    -------
    OutputError
        Not raised: "PATH: cannot write (REASON); HINT", where REASON is the
        errno's text and number (or the error's own text, on one line, when no
        errno is found) and HINT a fix for that errno (e.g. free some space
        for ENOSPC), else "choose another output path".
    """
    code = getattr(error, "errno", None)
    text = str(error)
    if not isinstance(code, int) or code <= 0:
        found = re.search(r"errno\s*=\s*(\d+)", text, re.IGNORECASE) or \
            re.search(r"\[Errno (\d+)\]", text)
        code = int(found.group(1)) if found else None
    if code:
        reason = f"{os.strerror(code).lower()}, errno {code}"
        hint = _HINTS.get(code, "choose another output path")
    else:
        reason = " ".join(text.split()) or type(error).__name__
        hint = "choose another output path"
    return OutputError(f"{path}: cannot write ({reason}); {hint}")


def check_output_path(path: str | Path, example: str | None = None) -> Path:
    """Check that ``path`` can be the name of an output file, before any work is done.

    Parameters
    ----------
    path : str or Path
        The output file to be written.
    example : str, optional
        A file name the message suggests when ``path`` is a directory
        (e.g. ``"wind.h5"``).

    Returns
    -------
    Path
        ``path`` as a Path.

    Raises
    ------
    OutputError
        One line: ``path`` is a directory, or its parent directory does not exist.
    """
    path = Path(path)
    if path.is_dir():
        such = f" such as {example}" if example else ""
        raise OutputError(f"{path}: cannot write (it is a directory); give a file name{such}")
    if not path.parent.is_dir():
        raise OutputError(f"{path}: cannot write (directory {path.parent} does not exist); "
                          f"create it first or choose another path")
    return path


def _pid_alive(pid):
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # exists, another user's
    except OSError:
        return False
    return True


def temporary_name(path: str | Path) -> Path:
    """The hidden temporary sibling a write of ``path`` by this process uses.

    Parameters
    ----------
    path : str or Path
        The output file.

    Returns
    -------
    Path
        ``.NAME.tmp-PID`` in the directory of ``path``, PID being this process's id.
    """
    path = Path(path)
    return path.with_name(f".{path.name}.tmp-{os.getpid()}")


def remove_stale_temporaries(path: str | Path) -> list[Path]:
    """Delete ``.NAME.tmp-PID`` siblings of ``path`` left by a killed writer.

    Only temporaries whose process is no longer alive (on this machine) are
    removed; a running writer's temporary file, and this process's own, are
    left alone.  Errors (an unreadable directory, a file not ours to delete)
    are ignored.

    Parameters
    ----------
    path : str or Path
        The output file whose temporaries are looked for.

    Returns
    -------
    list of Path
        The temporaries removed (empty if none, or if the directory cannot be listed).
    """
    path = Path(path)
    prefix = f".{path.name}.tmp-"
    removed = []
    try:
        candidates = [p for p in path.parent.iterdir() if p.name.startswith(prefix)]
    except OSError:
        return removed
    for p in candidates:
        pid = p.name[len(prefix):]
        if not pid.isdigit() or int(pid) == os.getpid() or _pid_alive(int(pid)):
            continue
        try:
            p.unlink()
            removed.append(p)
        except OSError:
            pass  # not ours to remove (permissions) or already gone
    return removed


def atomic_write(path: str | Path, write: "Callable[[Path], object]") -> Path:
    """Call ``write(tmp)`` on a temporary name beside ``path``, then rename it to ``path``.

    An interrupted or failed write (an error, a full disk, Ctrl-C, a kill
    before the rename) never leaves a half-written file at ``path``; the
    temporary file is removed, and temporaries of killed writers are cleaned
    up by the next write (:func:`remove_stale_temporaries`).

    Parameters
    ----------
    path : str or Path
        The output file.
    write : callable
        Called once with the temporary Path (see :func:`temporary_name`);
        writes the complete file there.  Its return value is ignored.

    Returns
    -------
    Path
        ``path``, now holding what ``write`` wrote.

    Raises
    ------
    OutputError
        ``path`` is a directory or its directory is missing (checked first,
        see :func:`check_output_path`), or ``write`` or the rename raised an
        OSError (one line, see :func:`output_error`).  Other errors of
        ``write`` propagate unchanged, the temporary file removed.
    """
    path = check_output_path(path)
    remove_stale_temporaries(path)
    tmp = temporary_name(path)
    try:
        write(tmp)
        os.replace(tmp, path)
    except OSError as error:
        raise output_error(path, error) from None
    finally:
        try:
            tmp.unlink(missing_ok=True)
        except OSError:
            pass
    return path


def write_bytes(path: str | Path, data: bytes | memoryview) -> Path:
    """Write ``data`` to ``path`` atomically, flushed to the disk before the rename.

    Parameters
    ----------
    path : str or Path
        The output file.
    data : bytes or memoryview
        The whole content of the file.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` cannot be written (see :func:`atomic_write`).
    """
    def write(tmp):
        with open(tmp, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())  # a delayed ENOSPC (network file systems) shows up here
    return atomic_write(path, write)


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text``, encoded as UTF-8, to ``path`` atomically.

    Parameters
    ----------
    path : str or Path
        The output file.
    text : str
        The whole content of the file.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` cannot be written (see :func:`atomic_write`).
    """
    return write_bytes(path, text.encode("utf-8"))


def write_figure(fig: "Figure", path: str | Path, **savefig: Any) -> Path:
    """Render a matplotlib figure in memory and write it to ``path`` atomically.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure to render.
    path : str or Path
        The image file; its suffix (``.png``, ``.pdf``, ``.svg`` ...) chooses
        the format.
    **savefig
        Further keyword arguments of :meth:`matplotlib.figure.Figure.savefig`
        (e.g. ``dpi``).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` is a directory or its directory is missing (checked before
        the figure is rendered), or the file cannot be written.  An error of
        matplotlib while rendering (e.g. a format it does not know) propagates
        unchanged, and nothing is written.
    """
    path = check_output_path(path)
    fmt = path.suffix[1:].lower() or None
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, **savefig)
    return write_bytes(path, buffer.getbuffer())


def read_input_text(path: str | Path, what: str, missing_hint: str, encoding_hint: str,
                    encoding: str = "utf-8") -> str:
    """The text of a user's input file, or a one-line ModelError.

    Parameters
    ----------
    path : str or Path
        The input file (a model file, a sweep file ...).
    what : str
        The kind of file, for the message when ``path`` is a directory
        (e.g. ``"a model file"``).
    missing_hint : str
        The end of the message when there is no such file (what to do instead).
    encoding_hint : str
        The end of the message when the file cannot be decoded.
    encoding : str, optional
        The text encoding (default UTF-8).

    Returns
    -------
    str
        The file's whole text.

    Raises
    ------
    ModelError
        One line naming ``path``: no such file, a directory, not decodable
        text (naming the first bad byte and its position), or any other OSError
        of the read (its reason).
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
