"""The README's tour runs as written, in order, from a fresh copy of the repository's top folder.

The tour is every fenced block of README.md that follows a line ``<!-- tour -->``
(DEVELOPERS.md, "The README is tested"): each command (a ``\\`` at a line's end
continues it, ``#`` starts a comment) runs in a temporary copy of the top folder's
``configs/``, with ``python -m windsolve`` for ``windsolve`` so that the checkout is
what runs, and must exit 0.  A block that follows ``<!-- file: PATH -->`` must be
the text of PATH exactly, so the example the README shows is the file the tour uses.
"""

import os
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
MARKED = re.compile(r"^<!-- (tour|file: (\S+)) -->\n```[\w-]*\n(.*?)^```$", re.M | re.S)


def marked_blocks():
    """[(marker, path or None, block text)] of the README, in order."""
    text = README.read_text(encoding="utf-8")
    return [(m.group(1).split(":")[0], m.group(2), m.group(3)) for m in MARKED.finditer(text)]


def tour_commands():
    """Every command of the tour blocks, in order, as argument lists."""
    commands = []
    for marker, _, block in marked_blocks():
        if marker != "tour":
            continue
        joined = re.sub(r"\\\n", " ", block)
        for line in joined.splitlines():
            argv = shlex.split(line, comments=True)
            if argv:
                commands.append(argv)
    return commands


def test_the_tour_is_marked_and_uses_only_windsolve():
    commands = tour_commands()
    # The blocks named in the README: the short tour (9), sweeps (5), lines (6).
    assert len(commands) == 20, [" ".join(c) for c in commands]
    assert all(c[0] == "windsolve" for c in commands), [c for c in commands
                                                         if c[0] != "windsolve"]


def test_file_blocks_are_the_files_they_name():
    files = [(path, block) for marker, path, block in marked_blocks() if marker == "file"]
    assert files, "no <!-- file: PATH --> block in the README"
    for path, block in files:
        assert (ROOT / path).read_text(encoding="utf-8") == block, path


def test_every_tour_command_runs_in_order(tmp_path):
    shutil.copytree(ROOT / "configs", tmp_path / "configs", symlinks=False)
    env = dict(os.environ, PYTHONPATH=str(ROOT), MPLBACKEND="Agg")
    for argv in tour_commands():
        done = subprocess.run([sys.executable, "-m", "windsolve", *argv[1:]], cwd=tmp_path,
                              env=env, capture_output=True, text=True, timeout=300)
        assert done.returncode == 0, (f"{shlex.join(argv)} -> exit {done.returncode}:\n"
                                      f"{done.stderr[-2000:]}")
    # The files the tour says it makes are there (a later command read each one).
    for name in ("demo.h5", "tiring.h5", "tiring.png", "bump.h5", "family.h5", "family.png",
                 "my_table.txt", "sweep.h5", "sweep.csv", "sweep.png", "line.png", "pcyg.csv",
                 "residuals.png", "chi2.csv", "chi2.png"):
        assert (tmp_path / name).stat().st_size > 0, name
