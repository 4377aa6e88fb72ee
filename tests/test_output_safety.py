"""Output safety: a full disk or a read-only directory, and temporaries of killed writers.

Tier (e): every output command (HDF5, CSV, text, PNG/SVG/PDF) on a full disk, a
nearly full disk (the write fails half-way) and a read-only file system ends
with exit 2 and one stderr line naming the output path, and leaves nothing at
or beside that path (no partial file, no ``.NAME.tmp-PID``).  A sweep whose
disk fills keeps its journal, and ``--resume`` after freeing space gives the
table of an uninterrupted run.  Temporaries of killed writers are removed by
the next write; a live writer's temporary is left alone.

The full and read-only disks are small tmpfs mounts (root only); without the
right to mount, those tests skip and say why.
"""

import os
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import numpy as np
import pytest

import windsolve
from windsolve import cli
from windsolve.sweep import read_sweep_table

CONFIGS = Path(__file__).parent.parent / "configs"
DEMO = Path(str(windsolve.demo_model_path()))
BUMP = CONFIGS / "bump_wind.toml"
OBSERVED = CONFIGS / "observed_widths.csv"
FILLER = "filler"
SIZE_KB = 1024

SWEEP = f"""[sweep]
base = "{DEMO}"
design = "grid"
[observables]
turbulence = "10 km/s"
[[axis]]
key = "star.luminosity"
start = "3e6 Lsun"
stop = "6e6 Lsun"
num = 4
spacing = "log"
"""


def _mount_tmpfs(where):
    """Mount a SIZE_KB tmpfs at ``where``, or skip the test saying why."""
    if os.geteuid() != 0:
        pytest.skip("a full disk needs a tmpfs mount: run as root")
    where.mkdir(parents=True, exist_ok=True)
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={SIZE_KB}k", "tmpfs",
                           str(where)], capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip() or done.returncode}")


def _unmount(where):
    subprocess.run(["umount", "-l", str(where)], capture_output=True)


@pytest.fixture
def disk(tmp_path, request):
    """A function fill(state) -> the directory: "full" (0 kB free), "nearly"
    (a few kB free, so writes fail half-way), "readonly"; unmounted afterwards."""
    where = tmp_path / f"disk-{uuid.uuid4().hex[:6]}"
    _mount_tmpfs(where)
    request.addfinalizer(lambda: _unmount(where))

    def fill(state):
        if state in ("full", "nearly"):
            free_kb = 0 if state == "full" else 4
            with open(where / FILLER, "wb") as f:
                try:
                    f.write(b"\0" * ((SIZE_KB - free_kb) * 1024))
                except OSError:
                    pass  # the disk is full: that is the point
        elif state == "readonly":
            done = subprocess.run(["mount", "-o", "remount,ro", str(where)],
                                  capture_output=True, text=True)
            if done.returncode != 0:
                pytest.skip(f"cannot remount read-only: {done.stderr.strip()}")
        return where
    return fill


def _left(where):
    return sorted(set(os.listdir(where)) - {FILLER})


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """A result file, a family file and a sweep file (with widths) to read from."""
    d = tmp_path_factory.mktemp("inputs")
    assert cli.main(["run", "-o", str(d / "demo.h5"), "-q"]) == 0
    assert cli.main(["family", str(BUMP), "--scan", "photosphere_radius", "--from", "3",
                     "--to", "10", "--num", "2", "-q", "-o", str(d / "fam.h5")]) == 0
    (d / "sweep.toml").write_text(SWEEP)
    assert cli.main(["sweep", str(d / "sweep.toml"), "-o", str(d / "sweep.h5"), "-q",
                     "--workers", "1"]) == 0
    return d


FAMILY = ["family", str(BUMP), "--scan", "photosphere_radius", "--from", "3", "--to", "10",
          "--num", "2", "-q"]

# name -> (argv from the inputs directory and the output path, output file name)
COMMANDS = {
    "run -o": (lambda i, o: ["run", "-o", o, "-q"], "out.h5"),
    "family -o --profiles": (lambda i, o: [*FAMILY, "-o", o, "--profiles"], "fam.h5"),
    "family --plot": (lambda i, o: [*FAMILY, "--plot", o], "fam.svg"),
    "lines -o csv": (lambda i, o: ["lines", str(i / "demo.h5"), "-o", o], "line.csv"),
    "lines -o png": (lambda i, o: ["lines", str(i / "demo.h5"), "-o", o], "line.png"),
    "compare -o": (lambda i, o: ["compare", str(i / "demo.h5"), str(OBSERVED), "-o", o],
                   "cmp.csv"),
    "compare sweep -o": (lambda i, o: ["compare", str(i / "sweep.h5"), str(OBSERVED),
                                       "-o", o], "chi2.csv"),
    "compare --plot": (lambda i, o: ["compare", str(i / "demo.h5"), str(OBSERVED),
                                     "--plot", o], "res.pdf"),
    "inspect --csv": (lambda i, o: ["inspect", str(i / "sweep.h5"), "--csv", o], "t.csv"),
    "plot -o png": (lambda i, o: ["plot", str(i / "demo.h5"), "-o", o], "p.png"),
    "plot -o svg": (lambda i, o: ["plot", str(i / "demo.h5"), "-o", o], "p.svg"),
    "plot -o pdf": (lambda i, o: ["plot", str(i / "demo.h5"), "-o", o], "p.pdf"),
    "plot sweep": (lambda i, o: ["plot", str(i / "sweep.h5"), "-o", o], "s.png"),
    "plot family": (lambda i, o: ["plot", str(i / "fam.h5"), "-o", o], "f.png"),
    "tabulate -o txt": (lambda i, o: ["tabulate", str(DEMO), "-o", o, "-q"], "tab.txt"),
    "tabulate -o h5": (lambda i, o: ["tabulate", str(DEMO), "-o", o, "-q"], "tab.h5"),
    "sweep -o": (lambda i, o: ["sweep", str(i / "sweep.toml"), "-o", o, "-q",
                               "--workers", "1"], "sw.h5"),
}
REASONS = {"full": "no space left on device", "nearly": "no space left on device",
           "readonly": "read-only file system"}


# An HDF5 library writing to a nearly full disk crashed the interpreter
# (segmentation fault): those cases run in a subprocess, and so do sweeps (a
# failed sweep in this process could keep its lock file's lock).
HDF5 = {"run -o", "family -o --profiles", "tabulate -o h5"}


def _main(argv):
    """(exit code, stderr) of windsolve.cli.main(argv)."""
    import contextlib
    import io
    buffer = io.StringIO()
    with contextlib.redirect_stderr(buffer):
        code = cli.main(argv)
    return code, buffer.getvalue()


def _run(argv):
    """A real ``python -m windsolve`` run (a crash of the HDF5 library shows as a
    negative return code instead of killing the test session)."""
    done = subprocess.run([sys.executable, "-m", "windsolve", *argv], capture_output=True,
                          text=True, timeout=300)
    return done.returncode, done.stdout, done.stderr


SMALL = {"compare -o", "compare sweep -o", "inspect --csv"}  # fit in the free 4 kB


# Slow (rendering): the nearly full disk but for HDF5, and the other figures on a
# read-only disk (the same path as "plot -o png" there).
PLOTS = {"family --plot", "plot -o svg", "plot -o pdf", "plot sweep", "plot family"}
CASES = [pytest.param(name, state, marks=[pytest.mark.slow] if (
             (state == "nearly" and name not in HDF5)
             or (state == "readonly" and name in PLOTS)) else [])
         for name in COMMANDS for state in ("full", "nearly", "readonly")
         if not (state == "nearly" and name in SMALL)]


@pytest.mark.parametrize(("name", "state"), CASES)
def test_a_failed_write_is_one_line_and_leaves_nothing(name, state, disk, inputs):
    argv, filename = COMMANDS[name]
    where = disk(state)
    out = where / filename
    if (state == "nearly" and name in HDF5) or name.startswith("sweep"):
        code, _, err = _run(argv(inputs, str(out)))
    else:
        code, err = _main(argv(inputs, str(out)))
    lines = err.strip().splitlines()
    assert code == 2, err
    assert len(lines) == 1 and "Traceback" not in err, err
    assert lines[0].startswith("windsolve: error: ") and str(where) in lines[0], err
    assert REASONS[state] in lines[0].lower(), err
    left = _left(where)
    if name.startswith("sweep") and state != "readonly":
        # The journal is kept for --resume.  (On a disk with no byte free the
        # sweep's lock file can be made but not written: it stays, harmless --
        # an flock lock ends with its process and the next run reuses the file.)
        assert set(left) - {filename + ".lock"} <= {filename + ".partial"}
        assert state == "full" or left == [filename + ".partial"]
    else:
        assert left == []


def _table(path):
    table, _ = read_sweep_table(path)
    table.pop("seconds")
    return table


@pytest.mark.parametrize("free_kb", [0, 8])
def test_a_sweep_on_a_full_disk_keeps_its_journal_and_resumes(free_kb, disk, inputs,
                                                              tmp_path):
    # free_kb = 0: not even the journal fits; 8: the journal fits, the table does not.
    sweep = str(inputs / "sweep.toml")
    reference = inputs / "sweep.h5"  # the same sweep, uninterrupted
    where = disk("empty")
    with open(where / FILLER, "wb") as f:
        try:
            f.write(b"\0" * ((SIZE_KB - free_kb) * 1024))
        except OSError:
            pass
    out = where / "sw.h5"
    code, _, err = _run(["sweep", sweep, "-o", str(out), "-q", "--workers", "1"])
    assert code == 2 and len(err.strip().splitlines()) == 1, err
    if free_kb:
        assert _left(where) == ["sw.h5.partial"]
    else:  # no byte free: the lock file may stay (see above), the journal may be empty
        assert set(_left(where)) <= {"sw.h5.partial", "sw.h5.lock"}
    if free_kb:  # every model journaled before the table write failed
        assert len((where / "sw.h5.partial").read_text().splitlines()) == 1 + 4
    (where / FILLER).unlink()  # free the space
    assert cli.main(["sweep", sweep, "-o", str(out), "-q", "--workers", "1",
                     "--resume"]) == 0
    assert _left(where) == ["sw.h5"]  # journal and lock gone
    a, b = _table(reference), _table(out)
    assert a.keys() == b.keys()
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


def test_inspect_csv_into_a_missing_directory_is_one_line(inputs, tmp_path, capsys):
    target = tmp_path / "nowhere" / "t.csv"
    assert cli.main(["inspect", str(inputs / "sweep.h5"), "--csv", str(target)]) == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and str(target) in lines[0] and "does not exist" in lines[0]
    assert not (tmp_path / "nowhere").exists()


# -- temporaries of killed writers ----------------------------------------------------

def _dead_pid():
    """The PID of a process that has exited (and been reaped)."""
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


@pytest.fixture
def live_pid(request):
    p = subprocess.Popen(["sleep", "120"])
    request.addfinalizer(lambda: (p.kill(), p.wait()))
    return p.pid


@pytest.mark.parametrize("name", ["run -o", "family -o --profiles", "lines -o csv",
                                  "plot -o png", "compare -o", "inspect --csv",
                                  "tabulate -o h5"])
def test_the_next_write_removes_stale_temporaries_only(name, inputs, tmp_path, live_pid):
    argv, filename = COMMANDS[name]
    out = tmp_path / filename
    dead = tmp_path / f".{filename}.tmp-{_dead_pid()}"
    alive = tmp_path / f".{filename}.tmp-{live_pid}"
    other = tmp_path / f".other{filename}.tmp-{_dead_pid()}"  # not a temporary of out
    for p in (dead, alive, other):
        p.write_bytes(b"half a file")
    assert cli.main(argv(inputs, str(out))) == 0
    assert out.exists() and not dead.exists()
    assert alive.read_bytes() == b"half a file" and other.exists()


def test_a_sigkilled_writer_leaves_a_temporary_the_next_run_removes(tmp_path):
    # A writer killed in mid-write: its .NAME.tmp-PID stays while it lives, and
    # is removed by the first write after it died.
    out = tmp_path / "wind.h5"
    # The writer is `windsolve run -o`, held in mid-write where it flushes its
    # temporary to the disk (os.fsync, before the rename).
    code = ("import os, time\n"
            "from windsolve.cli import main\n"
            "os.fsync = lambda fd: time.sleep(120)\n"
            f"main(['run', '-o', {str(out)!r}, '-q'])\n")
    writer = subprocess.Popen([sys.executable, "-c", code])
    tmp = tmp_path / f".wind.h5.tmp-{writer.pid}"
    try:
        deadline = time.time() + 60
        while not tmp.exists() and time.time() < deadline:
            time.sleep(0.05)
        assert tmp.exists()
        # while the writer lives, another write leaves its temporary alone
        assert cli.main(["run", "-o", str(out), "-q"]) == 0
        assert tmp.exists()
    finally:
        os.kill(writer.pid, signal.SIGKILL)
        writer.wait()
    assert tmp.exists()  # a SIGKILL runs no clean-up
    assert cli.main(["run", "-o", str(out), "-q"]) == 0
    assert not tmp.exists()
    assert [p.name for p in tmp_path.iterdir()] == ["wind.h5"]
