"""Make numba's on-disk cache safe for several processes compiling at once.

numba (0.68) saves a compiled function as an index file (``NAME.nbi``: which
specialisation lives in which data file) plus numbered data files
(``NAME.1.nbc``, ``NAME.2.nbc``, ...).  Saving reads the index, picks the
first free number, writes the index, then the data, with no lock
(``numba.core.caching.IndexDataCacheFile.save``).  Two processes that compile
*different* specialisations of one function at the same time (two sweep
workers on a fresh install: the factory-made DOP853 drivers and root-finders
of :mod:`windsolve.core.integrate` and :mod:`windsolve.core.roots` have one
specialisation per equation) both pick the same number; the index one of them
leaves then points at the other one's machine code.  Every later run loads
that code for the wrong specialisation and silently computes something else
(seen here: the demo model reported a second singular point after a
two-worker sweep on a fresh checkout).

:func:`install` wraps ``save`` and ``load`` in an advisory lock on the index
(``NAME.nbi.lock``, ``fcntl.flock``: exclusive to save, shared to load), so a
save's read-pick-write of the index is atomic among processes, and a load
never sees a new index with an old data file.  A process that cannot have the
lock within :data:`WAIT_S` (its holder stopped) neither loads nor saves: it
compiles in memory and goes on.  The cost is one flock per
cached function loaded or saved (microseconds, against milliseconds to
unpickle the code).  Where ``fcntl`` is missing (Windows) nothing is wrapped.
"""

import contextlib
import functools
import os
import time

try:
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

_MARK = "_windsolve_cachelock"


# How long a process waits for the lock before it goes on without the cache: a holder
# that is stopped (Ctrl-Z, SIGSTOP) must not hang every other windsolve process.
WAIT_S = 30.0
_POLL_S = 0.005


@contextlib.contextmanager
def _locked(index_path, mode):
    """Yield True holding the lock on ``index_path``; False if it could not be had within
    WAIT_S; None if the lock file cannot be made (a read-only cache directory, which no
    process saves to: reading it unlocked is safe)."""
    try:
        fd = os.open(index_path + ".lock", os.O_RDWR | os.O_CREAT, 0o666)
    except OSError:
        yield None
        return
    try:
        deadline = time.monotonic() + WAIT_S
        while True:
            try:
                fcntl.flock(fd, mode | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() > deadline:
                    yield False
                    return
                time.sleep(_POLL_S)
        yield True
    finally:
        os.close(fd)  # closing releases the lock


def _wrap(method, mode):
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with _locked(self._index_path, mode) as held:
            if held is False:  # no lock in time: no save (the code runs uncached), a miss
                return None
            return method(self, *args, **kwargs)

    setattr(wrapper, _MARK, True)
    return wrapper


def install():
    """Lock numba's cache index around every save and load; True when the locks are in.

    Idempotent.  Returns False (and changes nothing) without ``fcntl`` or
    when numba's cache class no longer has the methods wrapped here.
    """
    if fcntl is None:
        return False
    try:
        from numba.core.caching import IndexDataCacheFile
    except ImportError:  # pragma: no cover - numba reorganised
        return False
    if not all(hasattr(IndexDataCacheFile, name) for name in ("save", "load", "__init__")):
        return False  # pragma: no cover
    for name, mode in (("save", fcntl.LOCK_EX), ("load", fcntl.LOCK_SH)):
        method = getattr(IndexDataCacheFile, name)
        if not getattr(method, _MARK, False):
            setattr(IndexDataCacheFile, name, _wrap(method, mode))
    return installed()


def installed():
    """True when numba's cache saves and loads take the index lock."""
    try:
        from numba.core.caching import IndexDataCacheFile
    except ImportError:  # pragma: no cover
        return False
    return all(getattr(getattr(IndexDataCacheFile, name, None), _MARK, False)
               for name in ("save", "load"))
