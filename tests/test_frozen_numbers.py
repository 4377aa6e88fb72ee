"""INTERNAL regression pin (tier (c) in DEVELOPERS.md): every number stays the same.

tests/data/frozen_numbers.csv holds the status, shot count, profile length,
Mdot, r_c, v_inf, R_ph, T_c, ... of ~1100 models solved by the code as it was
when the table was written (benchmarks/freeze_numbers.py; each row names its
model by a spec built on a file in configs/).  It guards refactors of the
numerics: it is not a physics reference, and a change of physics or numerics
that is meant must rewrite the table (``python benchmarks/freeze_numbers.py``)
and say so in its commit.  Floats must agree to 1e-12 relative, statuses and
counts exactly.
"""

import importlib.util
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("freeze_numbers",
                                               ROOT / "benchmarks" / "freeze_numbers.py")
F = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(F)

ROWS = F.read_table()


def _slow(row):
    """Base-anchored and failed Model B solves take seconds each."""
    return row["spec"].startswith("bump_wind.toml") and (
        "photosphere_luminosity=None" in row["spec"] or row["status"] != "converged")


def _check(rows):
    problems = []
    for old in rows:
        problems += F.compare(old, F.row(old["spec"]))[0]
    assert not problems, f"{len(problems)} numbers changed:\n" + "\n".join(problems[:30])


def test_table_covers_the_grid():
    # the stored table is the grid the script defines, every model once
    assert [r["spec"] for r in ROWS] == F.grid()
    assert len(ROWS) > 1000
    statuses = {r["status"] for r in ROWS}
    assert {"converged", "no_critical_point", "no_bracket", "no_saddle"} <= statuses


@pytest.mark.parametrize("config", ["demo.toml", "porous_tiring.toml", "parker_reference.toml"])
def test_model_a_numbers_unchanged(config):
    _check([r for r in ROWS if r["spec"].startswith(config + "|")])


def test_model_b_photosphere_anchor_unchanged():
    _check([r for r in ROWS if r["spec"].startswith("bump_wind.toml") and not _slow(r)])


@pytest.mark.slow
def test_model_b_slow_cases_unchanged():
    _check([r for r in ROWS if _slow(r)])
