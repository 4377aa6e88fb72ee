"""Running a sweep: the output's lock, the journal, the executor loop, the stall check.

:func:`run_sweep` sends batches of rows to an executor (a local process pool
or a dask cluster), journals every finished batch to ``OUT.h5.partial`` and
writes the table from the journal when every row is done.  The main process
keeps no record: only which rows are done and how each ended (a few bytes a
row), so its memory stays flat however many rows the sweep has.
"""

import contextlib
import json
import logging
import math
import multiprocessing.context
import os
import sys
import time
import types
from collections.abc import Mapping
from concurrent.futures import (
    FIRST_COMPLETED,
    BrokenExecutor,
    CancelledError,
    Executor,
    Future,
    wait,
)
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._version import __version__
from ..errors import ModelError, OutputError, WindsolveError
from .spec import Sweep
from .table import ROWS_PER_CHUNK, write_sweep_rows
from .worker import _worker_init, journal_batch, row_end

# Models per task when the sweep file does not say: the model's
# ModelSpec.sweep_batch (enough that a task is tens of milliseconds of work;
# each task costs the main process a few hundred microseconds), and at least
# four tasks per worker.
TASKS_PER_WORKER = 4


class _BatchLimits(Mapping):
    """``{kind: ModelSpec.sweep_batch}``, read from the model registry."""

    def __getitem__(self, kind):
        from ..registry import MODEL_SPECS
        return MODEL_SPECS[kind].sweep_batch

    def __iter__(self):
        from ..registry import MODEL_SPECS
        return iter(MODEL_SPECS)

    def __len__(self):
        from ..registry import MODEL_SPECS
        return len(MODEL_SPECS)


BATCH_LIMIT = _BatchLimits()
JOURNAL_SUFFIX = ".partial"
FSYNC_INTERVAL = 1.0  # [s] the journal is flushed every batch, written to disk this often
LOCK_SUFFIX = ".lock"  # OUT.h5.lock: held (fcntl.flock) while a sweep writes OUT.h5
DEFAULT_STALL_TIMEOUT = 600.0  # [s] no batch finished for this long: the sweep stops
ROW_TICK = 0.2  # [s] a local sweep journals and shows the rows that ended this often


def _trim_journal(journal):
    """Cut a last line that a kill left unfinished, so appended lines start clean."""
    with open(journal, "rb+") as f:
        data = f.read()
        if data and not data.endswith(b"\n"):
            f.truncate(data.rfind(b"\n") + 1)


def _journal_records(journal, sweep, design):
    """``(row, record)`` of every journaled row, line by line (never the whole file at once).

    The header and every record must carry ``design`` (:meth:`Sweep.design_digest`):
    rows journaled by another sweep (another sweep file, an edited base model,
    or two runs that once shared an output) refuse the resume instead of
    entering the table.  A line cut short by a kill is skipped (that row runs
    again).
    """
    with open(journal, encoding="utf-8", errors="replace", newline="\n") as f:
        first = f.readline()
        if not first.strip():
            return
        try:
            header = json.loads(first)
        except json.JSONDecodeError:
            header = None
        if not isinstance(header, dict) or "sweep" not in header:
            raise OutputError(f"{journal}: not a windsolve sweep journal; delete it") from None
        if header.get("sweep") != design or header.get("rows") != len(sweep):
            raise OutputError(f"{journal} belongs to a different sweep (another sweep file, "
                              f"base model or design); delete it or write to another output")
        for number, line in enumerate(f, start=2):
            if not line.strip():
                continue
            try:
                record = json.loads(line)
            except json.JSONDecodeError:
                continue  # a line cut short by a kill: that row runs again
            row = record.get("row") if isinstance(record, dict) else None
            if (record.get("design") if isinstance(record, dict) else None) != design or \
                    not isinstance(row, int) or not 0 <= row < len(sweep):
                raise OutputError(f"{journal} line {number} holds a row of another sweep (two "
                                  f"runs wrote to one output?); its rows cannot be trusted: "
                                  f"delete it and run the sweep again")
            yield row, record


def _journal_chunks(journal, sweep, design, size=None):
    """:func:`_journal_records` in lists of ``size`` (default ROWS_PER_CHUNK; what the
    table's writer takes)."""
    size = size or ROWS_PER_CHUNK
    chunk = []
    for item in _journal_records(journal, sweep, design):
        chunk.append(item)
        if len(chunk) == size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


class _Progress:
    """Which rows of a sweep are done and how each ended: four bytes a row, no records."""

    def __init__(self, n):
        self.code = np.full(n, -1, dtype=np.int16)  # index in self.words; -1: not done
        self.converged = np.zeros(n, dtype=bool)
        self.hydrostatic = np.zeros(n, dtype=bool)
        self.words = {}  # status -> code
        self.done = self.n_converged = self.n_hydrostatic = 0
        self.by_code = []  # rows done, per code

    def add(self, row, converged, status, hydrostatic):
        """Count a finished row (a row given again replaces its earlier end)."""
        code = self.words.get(status)
        if code is None:
            code = self.words[status] = len(self.words)
            self.by_code.append(0)
        old = int(self.code[row])
        if old < 0:
            self.done += 1
        else:
            self.by_code[old] -= 1
            self.n_converged -= bool(self.converged[row])
            self.n_hydrostatic -= bool(self.hydrostatic[row])
        self.code[row] = code
        self.converged[row] = converged
        self.hydrostatic[row] = hydrostatic
        self.by_code[code] += 1
        self.n_converged += converged
        self.n_hydrostatic += hydrostatic

    def todo(self):
        """Row numbers not done (a numpy array)."""
        return np.flatnonzero(self.code < 0)

    def statuses(self):
        """{status: rows}, most frequent first."""
        counts = [(word, self.by_code[code]) for word, code in self.words.items()
                  if self.by_code[code]]
        return dict(sorted(counts, key=lambda wc: (-wc[1], str(wc[0]))))


def _read_journal(journal, sweep, design):
    """How the rows of a journal written for the same sweep design ended (a :class:`_Progress`).

    Raises OutputError for a journal of another sweep (see :func:`_journal_records`).
    """
    progress = _Progress(len(sweep))
    for _, record in _journal_records(journal, sweep, design):
        progress.add(*row_end(record))
    return progress


@dataclass(frozen=True)
class SweepRun:
    """What :func:`run_sweep` did: where the table is and how the rows ended (no records).

    Attributes
    ----------
    path : Path
        The sweep's HDF5 file (not written when ``interrupted``); read it with
        :func:`read_sweep_table`.
    rows : int
        Rows in the sweep.
    done : int
        Rows finished (``rows`` unless interrupted), including rows a resume
        took from the journal.
    converged : int
        Finished rows that converged.
    failed : int
        Finished rows that did not (``done - converged``).
    hydrostatic : int
        Converged rows with a hydrostatic base (the table's ``hydrostatic``
        column; see :data:`windsolve.result.HYDROSTATIC_EFOLDS`).
    statuses : dict of str to int
        Finished rows by status (:data:`windsolve.status.STATUSES`), most
        frequent first.
    interrupted : bool
        True after Ctrl-C: the finished rows stay in the journal and the
        table is not written.  Local workers send each row as it ends and
        are ended at once on Ctrl-C, so only the rows being solved are lost.
    """

    path: Path
    rows: int
    done: int
    converged: int
    failed: int
    hydrostatic: int
    statuses: dict
    interrupted: bool

    def _repr_html_(self):
        from .._units import html_summary
        rows = [("table", str(self.path)), ("rows", self.rows), ("done", self.done),
                ("converged", self.converged), ("failed", self.failed),
                ("hydrostatic", self.hydrostatic),
                ("statuses", ", ".join(f"{k}: {v}" for k, v in self.statuses.items())),
                ("interrupted", self.interrupted)]
        return html_summary(f"sweep run {self.path}", rows)


def _lock_output(out):
    """Hold an OS lock (fcntl.flock) on ``OUT.lock`` while a sweep writes ``OUT`` and its journal.

    Returns the function that releases it.  A second sweep on the same output
    gets a one-line OutputError naming the process that holds it.  The kernel
    drops the lock when its holder dies (even by SIGKILL), so a lock file left
    by a killed run is harmless; a run that ends removes its lock file.
    Without fcntl (Windows) there is no lock: the journal's design check still
    refuses rows of another sweep, but two runs at once are not detected.
    """
    try:
        import fcntl
    except ImportError:
        return lambda: None
    lock = out.with_name(out.name + LOCK_SUFFIX)
    while True:
        try:
            fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as error:
            raise OutputError(f"{lock}: cannot create the sweep's lock file "
                              f"({error.strerror or error})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            holder = _lock_holder(fd)
            os.close(fd)
            who = f" (pid {holder})" if holder else ""
            raise OutputError(f"{out} is being written by another windsolve sweep{who}; wait "
                              f"for it to finish or choose another -o") from None
        # The holder we waited for may have removed its lock file (and a
        # third run made a new one): hold the lock of the file at the path.
        try:
            same = os.stat(lock).st_ino == os.fstat(fd).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    try:
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
    except OSError as error:  # e.g. a disk with no byte free: give the lock back
        try:
            lock.unlink()
        except OSError:
            pass
        os.close(fd)
        raise OutputError(f"{lock}: cannot write the sweep's lock file "
                          f"({error.strerror or error}); free some space or choose "
                          f"another -o") from None

    def release():
        try:
            lock.unlink()  # while still held: a waiting run then retries on a new file
        except OSError:
            pass
        os.close(fd)

    return release


def _lock_holder(fd):
    """The pid written in a lock file ("" when unreadable)."""
    for _ in range(20):  # the holder writes its pid just after it takes the lock
        try:
            text = os.pread(fd, 32, 0).decode().strip()
        except (OSError, UnicodeDecodeError):
            return ""
        if text.isdigit():
            return text
        time.sleep(0.01)
    return ""


def _check_stall_timeout(stall_timeout):
    """None for no limit (None or 0), else the number of seconds."""
    if stall_timeout is None:
        return None
    try:
        value = float(stall_timeout)
    except (TypeError, ValueError):
        value = math.nan
    if not (value >= 0 and math.isfinite(value)):
        raise ModelError(f"stall timeout {stall_timeout!r}: give a number of seconds >= 0 "
                         f"(0: wait for ever)")
    return value or None


def run_sweep(sweep: Sweep, out: str | Path, workers: int | None = None,
              scheduler: str | None = None, resume: bool = False, quiet: bool = False,
              stall_timeout: float | None = DEFAULT_STALL_TIMEOUT,
              in_process: bool | None = None) -> SweepRun:
    """Run every row not already done and write the table; returns a :class:`SweepRun`.

    Parameters
    ----------
    sweep : Sweep
        From :func:`load_sweep`.
    out : str or Path
        The sweep's HDF5 file, written from the journal when every row is
        done (its layout: docs/physics.md, section 9).  Rows are journaled to
        ``OUT.h5.partial`` as they finish; this process keeps no record.
    workers : int, optional
        Local worker processes (default: one per core).
    scheduler : str, optional
        Address of a dask.distributed scheduler to run the rows on instead.
    resume : bool
        Finish an interrupted run from its journal (the journal must belong
        to the same design); without a journal every row runs (the command
        line says so first).
    quiet : bool
        No progress bar.
    stall_timeout : float or None [s]
        When no batch has finished for this long (a dask cluster that lost
        its workers, a stuck worker) the sweep stops; ``None`` or 0 waits
        for ever.
    in_process : bool or None
        Solve the rows in this process, one batch after another, with no
        worker process (nothing re-imported, no pickling: any script or
        notebook).  None (the default): in this process when ``workers`` is
        1 and there is no ``scheduler``.  A row stuck in this process is not
        stopped by ``stall_timeout`` (Ctrl-C stops it); ``windsolve sweep``
        keeps a worker process for ``--workers 1``, so that its stall check
        holds.

    Returns
    -------
    SweepRun
        The table's path, the rows done, converged, failed and hydrostatic,
        the rows by status, and ``interrupted`` (True after Ctrl-C: the
        finished rows stay in the journal and the table is not written).
        The rows' values are in the table: :func:`read_sweep_table`.

    Raises
    ------
    OutputError
        A journal of an interrupted run exists and ``resume`` is False, the
        journal belongs to another design, or the output is locked by
        another running sweep.
    ValueError
        A row's status is not in :data:`windsolve.status.STATUSES` (the table
        is not written; the journal is kept).
    WindsolveError
        The sweep stalled for ``stall_timeout`` (the rows finished so far
        stay in the journal for ``resume=True``).

    Notes
    -----
    A row that fails is recorded with its status and message; it never stops
    the sweep.  The output is locked while the sweep runs (see
    :func:`_lock_output`).
    """
    if _in_bootstrap():
        raise WindsolveError("run_sweep was called while a sweep worker was starting (the "
                             "script that calls it runs again in each worker); put the call "
                             "under `if __name__ == \"__main__\":`")
    out = Path(out)
    stall_timeout = _check_stall_timeout(stall_timeout)
    release = _lock_output(out)
    try:
        if in_process is None:
            in_process = workers == 1 and scheduler is None
        return _run_locked(sweep, out, workers, scheduler, resume, quiet, stall_timeout,
                           in_process)
    finally:
        release()


def _one_line(text):
    return " ".join(str(text).split())


def _run_locked(sweep, out, workers, scheduler, resume, quiet, stall_timeout, in_process=False):
    journal = out.with_name(out.name + JOURNAL_SUFFIX)
    if journal.exists() and not resume:
        if _journal_is_empty(journal):  # a run that ended before any model finished
            journal.unlink()
        else:
            raise OutputError(f"{journal} holds an interrupted run of a sweep; pass --resume "
                              f"to finish it, or delete it to start again")
    design = sweep.design_digest()
    if resume and journal.exists():
        _trim_journal(journal)
        progress = _read_journal(journal, sweep, design)
    else:
        progress = _Progress(len(sweep))
    # (A journal a failed run left with no finished model is kept for --resume, as any,
    # but does not block a new run: see above.)
    return _run_todo(sweep, out, workers, scheduler, quiet, stall_timeout, journal, design,
                     progress, in_process)


def _journal_is_empty(journal):
    """Does the journal hold no finished row (at most its header line)?"""
    try:
        with open(journal, "rb") as f:
            lines = [line for line in f.read(1 << 20).splitlines() if line.strip()]
    except OSError:
        return False
    return len(lines) <= 1 and os.path.getsize(journal) < (1 << 20)


def _in_bootstrap():
    """Is this process a spawned worker still importing its parent's main module?"""
    import multiprocessing
    return (multiprocessing.parent_process() is not None
            and bool(getattr(multiprocessing.current_process(), "_inheriting", False)))


def _run_todo(sweep, out, workers, scheduler, quiet, stall_timeout, journal, design,
              progress, in_process=False):
    todo = progress.todo()
    if in_process:
        executor = _InProcess()
        rows_queue = None  # rows return with their batch, as from dask

        def close(pending=(), abort=False):
            pass

        def describe():
            return "this process"
    else:
        executor, close, describe, rows_queue = _executor(workers, scheduler)
    batch = sweep.batch or _default_batch(sweep.kind, len(todo), workers, scheduler)
    batches = (todo[k:k + batch].tolist() for k in range(0, len(todo), batch))
    bar = None
    if not quiet:
        from tqdm import tqdm
        bar = tqdm(total=len(sweep), initial=progress.done, unit="model", desc="sweep")
    interrupted = False
    aborted = True  # until the loop ends normally or by Ctrl-C
    pending = set()
    # Wake up at least once a second (and ten times within a short stall
    # timeout) to notice and report a sweep in which nothing finishes.
    tick = 1.0 if stall_timeout is None else min(1.0, max(0.05, stall_timeout / 10))
    if rows_queue is not None:
        tick = min(tick, ROW_TICK)  # rows arrive one by one: show them as they do
    sizes = {}  # future -> rows in its batch (rows streamed through rows_queue)
    streamed = {"expected": 0, "got": 0}
    report = 5.0 if stall_timeout is None else min(5.0, stall_timeout / 2)  # [s] of no progress
    try:
        with open(journal, "a", encoding="utf-8") as jf:
            if jf.tell() == 0:
                jf.write(json.dumps({"sweep": design, "rows": len(sweep),
                                     "windsolve": __version__}) + "\n")
                jf.flush()
            queue = batches
            synced = progressed = time.monotonic()
            stalled_shown = 0
            # Keep a bounded number of batches in flight, so memory stays flat.
            limit = max(4 * (workers or os.cpu_count() or 1), 8)
            if isinstance(executor, _InProcess):
                limit = 1  # each batch runs as it is submitted: report it at once
            try:
                while True:
                    while len(pending) < limit:
                        b = next(queue, None)
                        if b is None:
                            break
                        fut = executor.submit(journal_batch, sweep.base,
                                              [(i, sweep.rows[i]) for i in b],
                                              sweep.profiles, sweep.observables, design)
                        sizes[fut] = len(b)
                        pending.add(fut)
                    if not pending:
                        break
                    finished, pending = wait(pending, timeout=tick,
                                             return_when=FIRST_COMPLETED)
                    now = time.monotonic()
                    if rows_queue is not None and _drain(rows_queue, jf, progress, bar,
                                                         streamed):
                        progressed, stalled_shown = now, 0
                        if now - synced >= FSYNC_INTERVAL:
                            os.fsync(jf.fileno())
                            synced = now
                    if not finished:
                        idle = now - progressed
                        if stall_timeout is not None and idle >= stall_timeout:
                            where = describe()
                            raise WindsolveError(
                                f"no model finished in {stall_timeout:g} s ({where}); the "
                                f"{progress.done} models finished so far are kept in "
                                f"{journal}: "
                                f"rerun with --resume once it runs, or allow longer with "
                                f"--stall-timeout SECONDS")
                        if bar is not None and int(idle / report) > stalled_shown:
                            stalled_shown = int(idle / report)
                            bar.set_postfix_str(f"no model finished for {idle:.0f} s "
                                                f"({describe()})")
                        continue
                    progressed, stalled_shown = now, 0
                    for fut in finished:
                        try:
                            text, ends = fut.result()
                        except BrokenExecutor as error:
                            if progress.done == 0 and _main_is_needed():
                                raise WindsolveError(
                                    "a worker process died before any model finished: the "
                                    "script registers its own model, so every worker runs "
                                    "it again; put the run_sweep call under "
                                    "`if __name__ == \"__main__\":` (or pass workers=1)"
                                ) from None
                            raise WindsolveError(
                                f"a worker process died ({_one_line(error)}); the models "
                                f"finished so far are kept: rerun with --resume") from None
                        except CancelledError:
                            raise WindsolveError(
                                f"a task was cancelled by the executor ({describe()}: lost "
                                f"the connection?); the models finished so far are kept in "
                                f"{journal}: rerun with --resume") from None
                        except Exception as error:  # noqa: BLE001 -- e.g. dask's KilledWorker
                            why = ": ".join(filter(None, (type(error).__name__,
                                                          _one_line(error))))
                            raise WindsolveError(
                                f"a task failed on the executor ({why}); the models finished "
                                f"so far are kept in {journal}: rerun with --resume") from None
                        if rows_queue is not None:
                            streamed["expected"] += sizes.pop(fut)
                        jf.write(text)
                        for end in ends:
                            progress.add(*end)
                        jf.flush()  # in the OS's hands: a killed sweep keeps it
                        if now - synced >= FSYNC_INTERVAL:  # on the disk: a crash keeps it
                            os.fsync(jf.fileno())
                            synced = now
                        if bar is not None:
                            bar.update(len(ends))
                            bar.set_postfix(converged=progress.n_converged,
                                            failed=progress.done - progress.n_converged,
                                            refresh=False)
                if rows_queue is not None:  # the last rows may trail their batches
                    _drain_all(rows_queue, jf, progress, bar, streamed, stall_timeout)
                aborted = False
            except KeyboardInterrupt:
                # Keep every row that has reached us, then end the workers at once:
                # rows still being solved are lost (a resume runs them), nothing else.
                interrupted, aborted = True, True
                if rows_queue is not None:
                    try:
                        _drain(rows_queue, jf, progress, bar, streamed)
                    except KeyboardInterrupt:
                        pass
            finally:
                jf.flush()
                os.fsync(jf.fileno())
    finally:
        if bar is not None:
            bar.close()  # before any error line is printed
        close(pending, abort=aborted)
    if not interrupted:
        # Streamed from the journal, chunk by chunk: no record is held for the table.
        write_sweep_rows(sweep, _journal_chunks(journal, sweep, design), out)
        journal.unlink()
    return SweepRun(path=out, rows=len(sweep), done=progress.done,
                    converged=progress.n_converged,
                    failed=progress.done - progress.n_converged,
                    hydrostatic=progress.n_hydrostatic, statuses=progress.statuses(),
                    interrupted=interrupted)


def _drain(rows_queue, jf, progress, bar, streamed):
    """Journal and count every row waiting in ``rows_queue``; True if there was one."""
    import queue
    got = 0
    while True:
        try:
            line, end = rows_queue.get_nowait()
        except queue.Empty:
            break
        jf.write(line)
        progress.add(*end)
        got += 1
    if got:
        streamed["got"] += got
        jf.flush()  # in the OS's hands: a killed sweep keeps it
        if bar is not None:
            bar.update(got)
            bar.set_postfix(converged=progress.n_converged,
                            failed=progress.done - progress.n_converged, refresh=False)
    return bool(got)


def _drain_all(rows_queue, jf, progress, bar, streamed, stall_timeout):
    """Wait for the rows of every finished batch still on their way through ``rows_queue``."""
    deadline = time.monotonic() + (stall_timeout or DEFAULT_STALL_TIMEOUT)
    while streamed["got"] < streamed["expected"]:
        if not _drain(rows_queue, jf, progress, bar, streamed):
            if time.monotonic() > deadline:
                raise WindsolveError(
                    f"{streamed['expected'] - streamed['got']} finished rows never reached "
                    f"the main process; rerun with --resume")
            time.sleep(0.01)


def _default_batch(kind, n_todo, workers, scheduler):
    """Models per task: the model's ModelSpec.sweep_batch, fewer when that would
    leave workers idle (fewer than TASKS_PER_WORKER tasks each)."""
    from ..registry import spec_for
    n_workers = workers or (8 if scheduler is not None else os.cpu_count() or 1)
    spread = -(-n_todo // (TASKS_PER_WORKER * n_workers))  # ceil
    return max(1, min(spec_for(kind).sweep_batch, spread))


def _executor(workers, scheduler):
    """(executor, close, describe, rows): a local process pool or a dask cluster's executor.

    ``rows``: for a local pool, the queue its workers send each finished row
    to (:func:`journal_batch`); None for dask, whose rows return with their batch.

    ``close(pending, abort)`` cancels the futures still pending and shuts the
    executor down (``abort``: also end our local workers now, e.g. a stuck
    one; a dask cluster's workers are not ours to end); ``describe()`` says
    in a few words what runs the sweep (for stall reports).
    """
    if scheduler is not None:
        try:
            from distributed import Client
        except ImportError:
            raise WindsolveError("--scheduler needs dask.distributed: pip install "
                                 "\"windsolve[cluster]\"") from None
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as error:
            raise WindsolveError(f"cannot reach the dask scheduler at {scheduler} "
                                 f"({error})") from None

        def describe():
            # Asked in a daemon thread: a scheduler that hangs must not hang the report.
            answer = []

            def ask():
                try:
                    answer.append(len(client.scheduler_info().get("workers", {})))
                except Exception:  # noqa: BLE001 -- a report only
                    pass

            import threading
            asking = threading.Thread(target=ask, daemon=True)
            asking.start()
            asking.join(timeout=3.0)
            if not answer:
                return f"the dask scheduler at {scheduler} does not answer"
            n = answer[0]
            return f"the dask scheduler at {scheduler} has {n} worker{'s' * (n != 1)}"

        # The client's own log lines ("Couldn't gather keys, rescheduling" when
        # a worker dies) would land on the progress bar's line; what they mean
        # is reported by the stall check.  Back to the user's level on close.
        # Closing the client cancels the futures still pending, for which
        # dask's executor logs a traceback each ("Exception in callback ...
        # FutureCancelledError"): quiet too while the sweep runs and closes.
        quiet_loggers = {name: logging.getLogger(name).level
                         for name in ("distributed", "distributed.client", "tornado.application")}
        for name in quiet_loggers:
            logging.getLogger(name).setLevel(logging.CRITICAL)

        def close(pending=(), abort=False):
            try:
                client.close()
            finally:
                for name, level in quiet_loggers.items():
                    logging.getLogger(name).setLevel(level)

        return client.get_executor(), close, describe, None
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    n = workers or os.cpu_count() or 1
    # "spawn": workers start clean (no inherited threads or locks) and load
    # the compiled kernels from numba's on-disk cache.  They run only
    # windsolve's own functions, so they are started without the caller's main
    # module (_CleanSpawnContext): a script without an `if __name__ ==
    # "__main__":` guard is not run again in each worker.
    from ..registry import plugin_modules
    context = (multiprocessing.get_context("spawn") if _main_is_needed()
               else _CleanSpawnContext())
    rows = context.Queue()
    pool = ProcessPoolExecutor(max_workers=n, mp_context=context,
                               initializer=_worker_init,
                               initargs=(os.getpid(), plugin_modules(), rows))

    def close(pending=(), abort=False):
        if abort:  # a stuck worker would keep this process from exiting
            # Kill without cancelling first: the pool then fails every pending future
            # itself.  (Cancelled futures of a pool that breaks make CPython 3.11's
            # manager thread print an InvalidStateError traceback.)
            for process in list((getattr(pool, "_processes", None) or {}).values()):
                process.kill()  # SIGKILL: ends a stopped or stuck worker too
            pool.shutdown(wait=False)
            return
        for fut in pending:
            fut.cancel()
        pool.shutdown(wait=False, cancel_futures=True)

    return pool, close, lambda: f"{n} local worker process{'es' * (n != 1)}", rows




class _InProcess(Executor):
    """An executor that runs each task in this process as it is submitted (workers=1)."""

    def submit(self, fn, /, *args, **kwargs):
        future = Future()
        try:
            future.set_result(fn(*args, **kwargs))
        except Exception as error:  # noqa: BLE001 -- reported by the loop, as a pool's
            future.set_exception(error)
        return future


def _main_is_needed():
    """Do workers need the caller's main module (a model class registered there)?"""
    from ..registry import plugin_modules
    return any(m in ("__main__", "__mp_main__") for m in plugin_modules())


@contextlib.contextmanager
def _main_hidden():
    """While a worker is started: no main module for it to run again (see _CleanSpawnContext)."""
    main = sys.modules.get("__main__")
    if main is None:
        yield
        return
    sys.modules["__main__"] = types.ModuleType("__main__")
    try:
        yield
    finally:
        sys.modules["__main__"] = main


class _CleanSpawnProcess(multiprocessing.context.SpawnProcess):
    """A spawned process started without the parent's main module.

    multiprocessing's spawn start method has each child import the parent's
    ``__main__`` (by path or module name) so that functions defined there can
    be unpickled; that runs a script's top level again in every child.  A
    sweep worker runs only windsolve's functions (``run_batch``), so the child
    is told of no main module, as for an interactive session (or a notebook).
    """

    def start(self):
        with _main_hidden():
            super().start()


class _CleanSpawnContext(multiprocessing.context.SpawnContext):
    """The spawn context whose processes start without the parent's main module."""

    Process = _CleanSpawnProcess
