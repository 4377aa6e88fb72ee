"""windsolve's version, from one place: the git history.

Building or installing windsolve (``pip install .``, ``pip install -e .``, ``python -m build``)
runs setuptools-scm (``[tool.setuptools_scm]`` in ``pyproject.toml``), which reads the version
from git and writes it to ``windsolve/_scm_version.py`` (not tracked): before the first tag
``0.1.1.devN+gHASH``, N the number of commits, HASH the commit; ``.dYYYYMMDD`` is added when the
tree had uncommitted changes.  An sdist carries the same; a copy of the files without git
history is built as the bare base, ``0.1.0``.

A source tree is also run without building (``PYTHONPATH=.``, or an editable install whose
``_scm_version.py`` was written at an older commit).  When this file lies in a git work tree,
one ``git describe`` (a few ms) tells the commit here: if it is the one ``_scm_version.py`` was
written at (with the same uncommitted-changes state), that version is used; otherwise the
version is ``0+git.HASH`` (``.dirty`` with uncommitted changes), so that a stamp never names a
commit other than the code that wrote it.  ``0+unknown`` when neither says anything.
"""

import importlib
import os
import re
import subprocess

__all__ = ["__version__"]


def _built():
    """(version, commit id or None) written by setuptools-scm at build time, or None."""
    # By name: the module exists only after a build, and import-linter (grimp) would take
    # a missing ``from . import _scm_version`` for an import of the whole package.
    try:
        built = importlib.import_module(f"{__package__}._scm_version")
    except ImportError:
        return None
    return built.version, getattr(built, "commit_id", None)


def _checkout():
    """(full commit hash, dirty) of the git work tree this package is the top of, or None."""
    top = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    if not os.path.exists(os.path.join(top, ".git")):
        return None  # an installed copy: no work tree around it
    try:
        out = subprocess.run(
            ["git", "describe", "--always", "--dirty", "--abbrev=40", "--exclude=*"],
            cwd=top, capture_output=True, text=True, timeout=10, check=True,
        ).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return None
    dirty = out.endswith("-dirty")
    full = out.removesuffix("-dirty")
    if not re.fullmatch(r"[0-9a-f]{40}", full):
        return None
    return full, dirty


def _version():
    built = _built()
    here = _checkout()
    if here is None:
        return built[0] if built else "0+unknown"
    full, dirty = here
    if built:
        version, commit = built
        built_dirty = re.search(r"\.d\d{8}$", version) is not None
        if commit and full.startswith(commit.removeprefix("g")) and built_dirty == dirty:
            return version
    return f"0+git.{full[:10]}" + (".dirty" if dirty else "")


__version__ = _version()
