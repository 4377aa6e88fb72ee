"""The one atomic-write path of every output file, and the reading of users' input text."""

import errno
import io
import os
import re
from pathlib import Path

from ..errors import ModelError, OutputError

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


def output_error(path, error):
    """A one-line OutputError naming ``path`` for an OSError met while writing it.

    h5py and matplotlib wrap errno in long, multi-line texts; the errno is
    recovered from them where it is not set on the error itself.
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


def check_output_path(path, example=None):
    """OutputError (one line) if ``path`` is a directory or its directory is missing.

    ``example``: a file name the message suggests for a directory (e.g. "wind.h5").
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


def temporary_name(path):
    """The hidden temporary sibling ``.NAME.tmp-PID`` a write of ``path`` uses."""
    path = Path(path)
    return path.with_name(f".{path.name}.tmp-{os.getpid()}")


def remove_stale_temporaries(path):
    """Delete ``.NAME.tmp-PID`` siblings of ``path`` left by a killed writer.

    Only temporaries whose process is no longer alive (on this machine) are
    removed; a running writer's temporary file is left alone.  Returns the
    removed paths.
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


def atomic_write(path, write):
    """Call ``write(tmp)`` on a temporary name beside ``path``, then rename.

    An interrupted or failed write (an error, a full disk, Ctrl-C, a kill
    before the rename) never leaves a half-written file at ``path``; the
    temporary file is removed, and temporaries of killed writers are cleaned
    up by the next write.  Any OSError becomes a one-line OutputError naming
    ``path``.
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


def write_bytes(path, data):
    """Write ``data`` to ``path`` atomically (flushed to the disk before the rename)."""
    def write(tmp):
        with open(tmp, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())  # a delayed ENOSPC (network file systems) shows up here
    return atomic_write(path, write)


def write_text(path, text):
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    return write_bytes(path, text.encode("utf-8"))


def write_figure(fig, path, **savefig):
    """Render a matplotlib figure in memory (format by the suffix of ``path``)
    and write it to ``path`` atomically."""
    path = check_output_path(path)
    fmt = path.suffix[1:].lower() or None
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, **savefig)
    return write_bytes(path, buffer.getbuffer())


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
