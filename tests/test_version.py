"""The version comes from git and names the commit of the code that runs (windsolve/_version.py)."""

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from packaging.version import Version

import windsolve

TOP = Path(windsolve.__file__).resolve().parent.parent


def _git(*args):
    return subprocess.run(["git", *args], cwd=TOP, capture_output=True, text=True,
                          check=True).stdout.strip()


def test_cli_version_is_the_package_version_and_pep440():
    out = subprocess.run([sys.executable, "-m", "windsolve", "--version"], capture_output=True,
                         text=True, check=True, env={**os.environ, "PYTHONPATH": str(TOP)})
    assert out.stdout.strip() == f"windsolve {windsolve.__version__}"
    Version(windsolve.__version__)  # raises InvalidVersion if it is not a PEP 440 version


@pytest.mark.skipif(not (TOP / ".git").exists(), reason="not run from a git work tree")
def test_version_names_the_checked_out_commit():
    head = _git("rev-parse", "HEAD")
    dirty = bool(_git("status", "--porcelain", "--untracked-files=no"))
    v = windsolve.__version__
    # Built here (setuptools-scm: 0.1.1.devN+gHASH[.dYYYYMMDD]) or asked of git
    # (0+git.HASH[.dirty]); either way the local part names the commit.
    local = (Version(v).local or "").split(".")
    node = local[1] if local[0] == "git" else local[0].removeprefix("g")
    assert len(node) >= 7 and head.startswith(node), (v, head)
    marked = local[-1] == "dirty" or re.fullmatch(r"d\d{8}", local[-1]) is not None
    assert marked == dirty, (v, dirty)
