"""The sweep's main process holds no records: the table comes from the journal.

Tier (d) invariants: a sweep stopped part-way (Ctrl-C) and resumed writes
the table of an uninterrupted run, every column, status and message (the
rows before the stop reach the table only through the journal); and the
main process's peak of Python allocations during ``run_sweep`` does not grow
with the rows as the records (about 2 kB a row) would.
"""

import _thread
import threading
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pytest

import windsolve
import windsolve.sweep.runner as runner
from windsolve.sweep import SweepRun, load_sweep, read_sweep_table, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))


def sweep_file(tmp_path, n_l, batch=None, name="sweep.toml"):
    # L from 1e3 Lsun (no transonic solution: failed rows with messages) to 6e6 Lsun.
    path = tmp_path / name
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n'
                    + (f"batch = {batch}\n" if batch else "")
                    + f'[[axis]]\nkey = "star.luminosity"\nstart = "1e3 Lsun"\n'
                      f'stop = "6e6 Lsun"\nnum = {n_l}\nspacing = "log"\n'
                      f'[[axis]]\nkey = "star.mass"\nvalues = ["45 Msun", "50 Msun"]\n')
    return path


def journal_rows(journal):
    try:
        return journal.read_bytes().count(b"\n") - 1
    except FileNotFoundError:
        return 0


def table_without_timing(path):
    table, _ = read_sweep_table(path)
    table.pop("seconds")
    return table


def test_stopped_and_resumed_sweep_writes_the_uninterrupted_table(tmp_path):
    path = sweep_file(tmp_path, 300, batch=1)  # 600 rows, one a task: a stop lands mid-way
    reference = tmp_path / "reference.h5"
    full = run_sweep(load_sweep(path), reference, workers=1, quiet=True)
    assert isinstance(full, SweepRun) and not full.interrupted
    assert full.rows == full.done == 600 and full.converged + full.failed == 600
    assert full.converged > 0 and full.failed > 0

    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    fired = threading.Event()

    def ctrl_c_after_some_rows():
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:
            if journal_rows(journal) >= 20:
                fired.set()
                _thread.interrupt_main()  # what Ctrl-C does
                return
            time.sleep(0.005)

    watcher = threading.Thread(target=ctrl_c_after_some_rows, daemon=True)
    watcher.start()
    stopped = run_sweep(load_sweep(path), out, workers=1, quiet=True)
    watcher.join()
    assert fired.is_set() and stopped.interrupted, "the sweep finished before the stop"
    assert 20 <= stopped.done < 600 and not out.exists()
    assert stopped.done == journal_rows(journal)

    resumed = run_sweep(load_sweep(path), out, workers=1, resume=True, quiet=True)
    assert not resumed.interrupted and not journal.exists()
    assert (resumed.rows, resumed.done, resumed.converged, resumed.failed, resumed.statuses) \
        == (full.rows, full.done, full.converged, full.failed, full.statuses)
    a, b = table_without_timing(reference), table_without_timing(out)
    assert a.keys() == b.keys() and {"status", "message", "converged"} <= a.keys()
    assert len(set(a["message"])) > 1  # failed rows carry their messages
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)
    counts = dict(zip(*np.unique(b["status"], return_counts=True), strict=True))
    assert counts == resumed.statuses
    assert resumed.converged == int(b["converged"].sum())
    assert resumed.hydrostatic == int((b["converged"] & b["hydrostatic"].astype(bool)).sum())


def main_process_peak(path, out):
    """Peak of Python allocations in this process during run_sweep, above its start [bytes]."""
    sweep = load_sweep(path)
    tracemalloc.start()
    try:
        start = tracemalloc.get_traced_memory()[0]
        tracemalloc.reset_peak()
        # one worker process, so that what is measured is the main process's part
        run_sweep(sweep, out, workers=1, quiet=True, in_process=False)
        return tracemalloc.get_traced_memory()[1] - start
    finally:
        tracemalloc.stop()


@pytest.mark.slow
def test_main_process_memory_does_not_grow_like_the_records(tmp_path, monkeypatch):
    # The journal is streamed to the table in chunks of 256 rows here, so both sizes
    # are many chunks.  A record held per row is about 2 kB of Python objects (a dict
    # of some 25 floats and strings); the file being built in memory
    # (windsolve.io.write_hdf5) costs its own few hundred bytes a row.
    monkeypatch.setattr(runner, "ROWS_PER_CHUNK", 256)
    small, large = 500, 5000
    peaks = [main_process_peak(sweep_file(tmp_path, n // 2, name=f"s{n}.toml"),
                               tmp_path / f"s{n}.h5") for n in (small, large)]
    per_row = (peaks[1] - peaks[0]) / (large - small)
    assert per_row < 800, f"{per_row:.0f} bytes a row: the main process holds the records?"
