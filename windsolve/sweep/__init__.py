"""Parameter sweeps: thousands of models on a laptop or on a dask cluster.

A sweep file (TOML) names a base model (a model file, or an inline
``[model]`` table), a design (``grid``, ``random`` or ``latin``) and one or
more ``[[axis]]`` tables, each a dotted model key with explicit ``values`` or
``start``/``stop`` (and ``num`` and ``spacing`` for a grid).  The whole sweep
is validated -- every row built into a model -- before anything runs.

Execution goes through the ``concurrent.futures.Executor`` interface, which
both a local process pool and a ``dask.distributed`` client
(``Client.get_executor()``) provide: one code path for a laptop and a
cluster.  Rows are sent in batches so the per-task overhead stays small.

Nothing finished is lost: every finished batch is appended to a journal next
to the output (``OUT.h5.partial``, JSON lines, flushed after every batch, so a
killed sweep loses at most the batches in flight, and fsynced at least once a
second, so a machine that crashes loses at most about a second more), and
``--resume`` runs only the missing rows.  The HDF5 file is written at the end
from the journal, streamed chunk by chunk (under a temporary name, then
renamed), in design order, so a resumed sweep gives the same table as an
uninterrupted one; the main process keeps no record, only a few bytes a row
saying how it ended.

One run per output: the output is locked (``OUT.h5.lock``, fcntl.flock) for
the whole run, every journal record carries a hash of the resolved design
(a resume refuses rows of another sweep), local workers end when the sweep
process dies, and a sweep in which nothing finishes for ``stall_timeout``
seconds (a dask cluster without workers) stops with one line.

The package has one job per module: :mod:`.spec` (sweep files and their
checks), :mod:`.worker` (rows solved in a worker), :mod:`.runner` (the
executor loop, journal and lock) and :mod:`.table` (the HDF5 file).
"""

from .runner import (
    BATCH_LIMIT,
    DEFAULT_STALL_TIMEOUT,
    FSYNC_INTERVAL,
    JOURNAL_SUFFIX,
    LOCK_SUFFIX,
    TASKS_PER_WORKER,
    SweepRun,
    _check_stall_timeout,
    _default_batch,
    _executor,
    _journal_chunks,
    _lock_output,
    _read_journal,
    _trim_journal,
    run_sweep,
)
from .spec import (
    AXIS_KEYS,
    DESIGNS,
    SPACINGS,
    SWEEP_KEYS,
    Axis,
    AxisView,
    Sweep,
    _axis_spec,
    apply_changes,
    load_sweep,
)
from .table import (
    ROWS_PER_CHUNK,
    SUMMARY_COLUMNS,
    SWEEP_REQUIRED,
    WIDTH_COLUMNS,
    axis_views,
    read_sweep_table,
    write_sweep_rows,
    write_sweep_table,
)
from .worker import _worker_init, isothermal_row, journal_batch, row_end, run_batch

__all__ = ["Sweep", "SweepRun", "load_sweep", "run_sweep", "read_sweep_table", "axis_views",
           "DESIGNS", "SUMMARY_COLUMNS"]
