"""Sweeps that race, die or stall: no mixed rows, no orphans, no silent wait.

Tier (d) invariants -- the rows a sweep writes equal each row's model solved
alone with ``windsolve.solve``; a sweep stopped by a stall and resumed gives
the table of an uninterrupted run -- and tier (e): a second run on a locked
output, a resume from another sweep's journal and a stalled cluster each
give one line and exit 2 through the real command line.

Runs are paused with SIGSTOP (not timed) so that a second run meets a first
one that certainly holds its output.
"""

import fcntl
import os
import pty
import select
import signal
import struct
import subprocess
import sys
import termios
import time
import tomllib
from pathlib import Path

import numpy as np
import pytest

import windsolve
from windsolve.sweep import load_sweep, read_sweep_table, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))

AXES = """[[axis]]
key = "star.luminosity"
start = "3e6 Lsun"
stop = "6e6 Lsun"
num = {num}
spacing = "log"
[[axis]]
key = "gas.sound_speed"
values = ["{a1}", "{a2}"]
"""


def sweep_file(tmp_path, name, num=100, a1="18 km/s", a2="22 km/s", base=DEMO):
    path = tmp_path / name
    path.write_text(f'[sweep]\nbase = "{base}"\ndesign = "grid"\nbatch = 1\n'
                    + AXES.format(num=num, a1=a1, a2=a2))
    return path


def cli(*args, **kwargs):
    return subprocess.Popen([sys.executable, "-m", "windsolve", *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True, **kwargs)


def wait_for(condition, seconds=60.0, what="condition"):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if condition():
            return
        time.sleep(0.005)
    raise AssertionError(f"timed out waiting for {what}")


def records(journal):
    try:
        return len(journal.read_text().splitlines()) - 1
    except FileNotFoundError:
        return -1


def stop_when(proc, condition, what):
    """SIGSTOP ``proc`` once ``condition()`` holds (skip if it finished first)."""
    wait_for(lambda: condition() or proc.poll() is not None, what=what)
    os.kill(proc.pid, signal.SIGSTOP)
    if proc.poll() is not None or not condition():
        os.kill(proc.pid, signal.SIGCONT)
        pytest.skip("the sweep finished before it could be paused")


def kill_group(proc):
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    proc.communicate()


def one_error_line(stderr):
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    assert lines[0].startswith("windsolve: error: ") and "Traceback" not in stderr
    return lines[0]


def direct_mass_loss_rates(sweep_path):
    """Each row's model built from the demo file's dict and solved alone."""
    base = tomllib.loads(DEMO.read_text())
    spec = tomllib.loads(Path(sweep_path).read_text())
    lum, sound = spec["axis"]
    L = np.geomspace(3e6, 6e6, lum["num"])
    out = []
    for x in L.tolist():  # grid order: the first axis varies slowest
        for a in sound["values"]:
            model = dict(base, star=dict(base["star"], luminosity=f"{x!r} Lsun"),
                         gas=dict(base["gas"], sound_speed=a))
            out.append(windsolve.solve(windsolve.model_from_dict(model)))
    return out


# -- item 6: two sweeps on one output ------------------------------------------------

@pytest.mark.slow
def test_second_sweep_on_a_locked_output_is_refused_and_the_first_keeps_its_rows(tmp_path):
    a = sweep_file(tmp_path, "a.toml", num=10)
    b = sweep_file(tmp_path, "b.toml", num=10, a1="15 km/s", a2="25 km/s")
    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    first = cli("sweep", a, "-o", out, "--workers", "1", "-q")
    try:
        # Paused while it holds the output (its journal is open).
        stop_when(first, journal.exists, "the first sweep's journal")
        for args in (("sweep", b, "-o", out, "--workers", "1", "-q"),
                     ("sweep", a, "-o", out, "--workers", "1", "-q", "--resume")):
            second = cli(*args)
            _, err = second.communicate(timeout=120)
            assert second.returncode == 2, err
            line = one_error_line(err)
            assert "being written by another windsolve sweep" in line
            assert f"pid {first.pid}" in line and str(out) in line
        assert not out.exists() and journal.exists()
        os.kill(first.pid, signal.SIGCONT)
        _, err = first.communicate(timeout=120)
    finally:
        kill_group(first)
    assert first.returncode == 0, err
    assert not journal.exists() and not (tmp_path / "out.h5.lock").exists()
    table, attrs = read_sweep_table(out)
    assert attrs["sweep_toml"] == a.read_text()
    expected = direct_mass_loss_rates(a)
    assert len(table["mass_loss_rate"]) == len(expected) == 20
    for i, result in enumerate(expected):
        assert result.converged and table["converged"][i]
        assert table["mass_loss_rate"][i] == result.summary["mass_loss_rate"].value, i


def start_and_kill(tmp_path, sweep_path, out):
    """A sweep killed (SIGKILL) with a few rows in its journal."""
    journal = out.with_name(out.name + ".partial")
    proc = cli("sweep", sweep_path, "-o", out, "--workers", "1", "-q")
    try:
        stop_when(proc, lambda: records(journal) >= 2, "journaled rows")
    finally:
        kill_group(proc)
    assert journal.exists() and not out.exists()
    return journal


@pytest.mark.slow
def test_resume_from_a_journal_of_another_sweep_is_refused(tmp_path):
    base = tmp_path / "base.toml"
    base.write_text(DEMO.read_text())
    a = sweep_file(tmp_path, "a.toml", base=base)
    b = sweep_file(tmp_path, "b.toml", a1="15 km/s", a2="25 km/s", base=base)
    out_a, out_b = tmp_path / "a.h5", tmp_path / "b.h5"
    journal_a = start_and_kill(tmp_path, a, out_a)
    journal_b = start_and_kill(tmp_path, b, out_b)
    kept = journal_a.read_text()

    def resume(sweep_path, out):
        proc = cli("sweep", sweep_path, "-o", out, "--workers", "1", "-q", "--resume")
        _, err = proc.communicate(timeout=120)
        return proc.returncode, err

    # The sweep file's text is unchanged but its base model is not: another design.
    base.write_text(DEMO.read_text().replace('mass = "50 Msun"', 'mass = "45 Msun"'))
    code, err = resume(a, out_a)
    assert code == 2 and "belongs to a different sweep" in one_error_line(err)
    assert not out_a.exists() and journal_a.read_text() == kept
    base.write_text(DEMO.read_text())

    # Rows of sweep b under sweep a's header (as two runs on one output once left them).
    a_lines, b_lines = kept.splitlines(), journal_b.read_text().splitlines()
    journal_a.write_text("\n".join(a_lines[:2] + b_lines[1:]) + "\n")
    code, err = resume(a, out_a)
    assert code == 2
    assert "line 3 holds a row of another sweep" in one_error_line(err)
    assert not out_a.exists()

    # Its own journal resumes to the whole sweep.
    journal_a.write_text(kept)
    code, err = resume(a, out_a)
    assert code == 0, err
    assert len(read_sweep_table(out_a)[0]["converged"]) == 200


# -- item 7: workers end with their parent -------------------------------------------

def children_of(pid):
    """Processes whose parent is ``pid`` (psutil if present, else /proc)."""
    try:
        import psutil
    except ImportError:
        psutil = None
    if psutil is not None:
        try:
            return [c.pid for c in psutil.Process(pid).children(recursive=True)]
        except psutil.NoSuchProcess:
            return []
    out = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                out.append(int(entry.name))
    return out


def alive(pid):
    """Running (a zombie left to an init that does not reap has ended)."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return stat.rsplit(")", 1)[1].split()[0] != "Z"


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc")
def test_sigkill_of_a_sweep_ends_its_pool_workers(tmp_path):
    path = sweep_file(tmp_path, "s.toml", num=300)
    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    proc = cli("sweep", path, "-o", out, "--workers", "2", "-q")
    workers = []
    try:
        wait_for(lambda: records(journal) >= 2 or proc.poll() is not None, what="rows")
        os.kill(proc.pid, signal.SIGSTOP)  # hold still while its children are listed
        workers = [p for p in children_of(proc.pid)
                   if "spawn_main" in Path(f"/proc/{p}/cmdline").read_text(errors="replace")]
        if proc.poll() is not None or len(workers) < 2:
            pytest.skip("the sweep finished before its workers could be listed")
        os.kill(proc.pid, signal.SIGKILL)  # the parent only, not its process group
        proc.wait()
        deadline = time.monotonic() + 10
        while time.monotonic() < deadline and any(alive(p) for p in workers):
            time.sleep(0.05)
        left = [p for p in workers if alive(p)]
        assert not left, f"{len(left)} of {len(workers)} workers outlived their parent"
    finally:
        for p in workers:  # processes this test started: end what is left
            if alive(p):
                os.kill(p, signal.SIGKILL)
        kill_group(proc)


# -- item 9: a dask cluster that stalls ----------------------------------------------

def table_without_timing(path):
    table, _ = read_sweep_table(path)
    table.pop("seconds")
    return table


def run_in_terminal(args, timeout):
    """(exit code, what a terminal showed on stderr, seconds) of the CLI with a tty stderr."""
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 100, 0, 0))  # 100 columns
    t0 = time.monotonic()
    proc = subprocess.Popen([sys.executable, "-m", "windsolve", *map(str, args)],
                            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=slave,
                            start_new_session=True)
    os.close(slave)
    shown = b""
    try:
        while True:
            ready, _, _ = select.select([master], [], [], 0.5)
            if ready:
                try:
                    chunk = os.read(master, 65536)
                except OSError:  # the terminal closed: the program ended
                    break
                if not chunk:
                    break
                shown += chunk
            elif proc.poll() is not None:
                break
            if time.monotonic() - t0 > timeout:
                raise AssertionError(f"still running after {timeout} s")
        proc.wait(timeout=30)
    finally:
        os.close(master)
        kill_group(proc)
    return proc.returncode, shown.decode(errors="replace"), time.monotonic() - t0


@pytest.mark.slow
def test_cluster_without_workers_stops_after_the_stall_timeout(tmp_path):
    distributed = pytest.importorskip("distributed")
    path = sweep_file(tmp_path, "s.toml", num=3)
    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    with distributed.LocalCluster(n_workers=0, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        code, shown, seconds = run_in_terminal(
            ["sweep", path, "-o", out, "--scheduler", cluster.scheduler_address,
             "--stall-timeout", "2"], timeout=90)
    assert code == 2, shown
    # The progress bar was drawn, then closed: the error has a line of its own.
    assert "sweep:" in shown
    assert "no model finished for 1 s (the dask scheduler at" in shown  # the stall reported
    last = shown.rstrip("\r\n").split("\n")[-1]
    assert last.startswith("windsolve: error: no model finished in 2 s"), repr(shown[-300:])
    assert "has 0 workers" in last and "--resume" in last and "\r" not in last.rstrip("\r")
    assert "Traceback" not in shown
    assert seconds < 60  # 2 s of stall after start-up, not a wait for ever
    assert journal.exists() and not out.exists()
    # A live executor finishes it: the uninterrupted run's table.
    reference = tmp_path / "reference.h5"
    run_sweep(load_sweep(path), reference, workers=1, quiet=True)
    run = run_sweep(load_sweep(path), out, workers=1, resume=True, quiet=True)
    assert not run.interrupted and not journal.exists() and run.done == run.rows
    a, b = table_without_timing(reference), table_without_timing(out)
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


@pytest.mark.slow
def test_cluster_that_loses_its_worker_mid_sweep_fails_in_one_line_and_resumes(tmp_path):
    distributed = pytest.importorskip("distributed")
    path = sweep_file(tmp_path, "s.toml", num=300)
    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    with distributed.LocalCluster(n_workers=0, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        worker = subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", cluster.scheduler_address,
             "--nthreads", "1", "--no-nanny", "--no-dashboard", "--host", "127.0.0.1"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
        sweep = cli("sweep", path, "-o", out, "-q", "--scheduler", cluster.scheduler_address,
                    "--stall-timeout", "3")
        try:
            stop_when(worker, lambda: records(journal) >= 3, "rows from the dask worker")
            kill_group(worker)  # the cluster's only worker dies mid-sweep
            kept = records(journal)
            t0 = time.monotonic()
            _, err = sweep.communicate(timeout=90)
        finally:
            kill_group(worker)
            kill_group(sweep)
    assert sweep.returncode == 2, err
    line = one_error_line(err)
    assert "no model finished in 3 s" in line and "--resume" in line
    assert time.monotonic() - t0 < 30
    assert not out.exists() and records(journal) >= kept >= 3
    assert records(journal) < 600
    reference = tmp_path / "reference.h5"
    run_sweep(load_sweep(path), reference, workers=1, quiet=True)
    resume = cli("sweep", path, "-o", out, "--workers", "1", "-q", "--resume")
    _, err = resume.communicate(timeout=120)
    assert resume.returncode == 0, err
    a, b = table_without_timing(reference), table_without_timing(out)
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


def test_stall_timeout_option_is_checked(capsys):
    from windsolve import cli as windsolve_cli
    for bad in ("-1", "nan", "soon"):
        code = windsolve_cli.main(["sweep", "x.toml", "-o", "x.h5", "--stall-timeout", bad])
        assert code == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "--stall-timeout" in err[0], err
    with pytest.raises(windsolve.ModelError):
        run_sweep(None, "x.h5", stall_timeout=-1)


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc")
def test_stuck_local_worker_stops_after_the_stall_timeout(tmp_path):
    path = sweep_file(tmp_path, "s.toml")
    out = tmp_path / "out.h5"
    journal = tmp_path / "out.h5.partial"
    proc = cli("sweep", path, "-o", out, "--workers", "1", "-q", "--stall-timeout", "2")
    workers = []

    def pool_workers():
        found = []
        for p in children_of(proc.pid):
            try:
                if "spawn_main" in Path(f"/proc/{p}/cmdline").read_text(errors="replace"):
                    found.append(p)
            except OSError:
                pass
        return found

    try:
        # Stop the worker as soon as it exists (before it can finish the 200 rows, which
        # would leave nothing to stall on).
        wait_for(lambda: pool_workers() or proc.poll() is not None, what="a pool worker")
        workers = pool_workers()
        assert proc.poll() is None and workers, "the sweep ended before its worker started"
        os.kill(workers[0], signal.SIGSTOP)  # a worker that never answers again
        kept = records(journal)
        _, err = proc.communicate(timeout=60)  # ends: the stuck worker does not hold it
        deadline = time.monotonic() + 5
        while time.monotonic() < deadline and alive(workers[0]):
            time.sleep(0.05)
        left_stopped = alive(workers[0])
    finally:
        for p in workers:
            if alive(p):
                os.kill(p, signal.SIGKILL)
        kill_group(proc)
    assert proc.returncode == 2, err
    line = one_error_line(err)
    assert "no model finished in 2 s (1 local worker process)" in line and "--resume" in line
    assert not out.exists() and records(journal) >= kept
    assert not left_stopped  # ended by the sweep, not left behind
    resume = cli("sweep", path, "-o", out, "--workers", "1", "-q", "--resume")
    _, err = resume.communicate(timeout=120)
    assert resume.returncode == 0, err
    assert len(read_sweep_table(out)[0]["converged"]) == 200
