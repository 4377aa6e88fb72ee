"""Sweep row statuses come from one vocabulary, windsolve.status.STATUSES.

The words a sweep can write are found in the program's source (every status
assignment, ``status=`` keyword, ``record["status"] = ...`` and every
``(status, message)`` a failure function returns), not asked of the code
under test; the table writer must refuse any other word.
"""

import ast
from pathlib import Path

import pytest

import windsolve
from windsolve.status import STATUSES
from windsolve.sweep import load_sweep, run_batch, write_sweep_table

PACKAGE = Path(windsolve.__file__).parent
DEMO = Path(str(windsolve.demo_model_path()))


def _strings(node):
    """The str constants an expression can evaluate to: a constant, either arm of an
    IfExp, the values and default of ``{code: "word"}.get(code, "word")``.  Other calls
    (readers such as ``text_attr(..., "status")``) are not statuses written."""
    if isinstance(node, ast.Constant):
        return {node.value} if isinstance(node.value, str) else set()
    if isinstance(node, ast.IfExp):
        return _strings(node.body) | _strings(node.orelse)
    if isinstance(node, ast.Dict):
        return set().union(*(_strings(v) for v in node.values))
    if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
            and node.func.attr == "get" and isinstance(node.func.value, ast.Dict)):
        return _strings(node.func.value).union(*(_strings(a) for a in node.args[1:]))
    return set()


def _is_status_target(t):
    return ((isinstance(t, ast.Name) and t.id == "status")
            or (isinstance(t, ast.Attribute) and t.attr == "status")
            or (isinstance(t, ast.Subscript) and isinstance(t.slice, ast.Constant)
                and t.slice.value == "status"))


def status_words_in_source():
    """{word: "file:line"} of every status literal the package's Python code writes."""
    found = {}

    def add(words, path, node):
        for w in words:
            found.setdefault(w, f"{path.relative_to(PACKAGE)}:{node.lineno}")

    for path in sorted(PACKAGE.rglob("*.py")):
        if "core" in path.relative_to(PACKAGE).parts:
            continue  # compiled kernels: integer codes, no words
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Assign):
                for t in node.targets:
                    if _is_status_target(t):
                        add(_strings(node.value), path, node)
                    elif isinstance(t, ast.Tuple) and isinstance(node.value, ast.Tuple):
                        for tt, vv in zip(t.elts, node.value.elts, strict=False):
                            if _is_status_target(tt):
                                add(_strings(vv), path, node)
            elif isinstance(node, ast.keyword) and node.arg == "status":
                add(_strings(node.value), path, node.value)
            elif isinstance(node, ast.FunctionDef):
                doc = ast.get_docstring(node) or ""
                if doc.startswith("(status, message)"):
                    for ret in ast.walk(node):
                        if isinstance(ret, ast.Return) and isinstance(ret.value, ast.Tuple):
                            add(_strings(ret.value.elts[0]), path, ret)
    return found


def test_every_status_a_sweep_can_write_is_in_the_vocabulary():
    found = status_words_in_source()
    # The scan must see the words of both solvers and of the sweep worker (else it is blind).
    for word in ("converged", "no_bracket", "no_saddle", "sonic_point_on_base", "off_table",
                 "fallback", "stalled", "second_singular_point", "no_solution", "failed",
                 "error"):
        assert word in found, f"the source scan no longer finds status {word!r}"
    unknown = {w: where for w, where in found.items() if w not in STATUSES}
    assert not unknown, f"statuses outside windsolve.status.STATUSES: {unknown}"


@pytest.fixture
def small_sweep(tmp_path):
    path = tmp_path / "sweep.toml"
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[[axis]]\n'
                    f'key = "star.luminosity"\nvalues = ["4e6 Lsun", "1e3 Lsun"]\n')
    sweep = load_sweep(path)
    records = run_batch(sweep.base, [(i, sweep.rows[i]) for i in range(len(sweep))])
    return sweep, {r["row"]: r for r in records}


def test_the_table_writer_writes_vocabulary_statuses(small_sweep, tmp_path):
    from windsolve.sweep import read_sweep_table
    sweep, records = small_sweep
    out = tmp_path / "ok.h5"
    write_sweep_table(sweep, records, out)
    table, _ = read_sweep_table(out)
    # L = 1e3 Lsun: the Parker point lies beyond the outer radius.
    assert list(table["status"]) == ["converged", "no_critical_point"]


@pytest.mark.parametrize("status", ["went_wrong", "", None, "Converged"])
def test_the_table_writer_refuses_an_unknown_status(small_sweep, tmp_path, status):
    sweep, records = small_sweep
    records[1] = dict(records[1])
    if status is None:
        del records[1]["status"]
    else:
        records[1]["status"] = status
    out = tmp_path / "bad.h5"
    with pytest.raises(ValueError, match="STATUSES"):
        write_sweep_table(sweep, records, out)
    assert not out.exists()
    assert list(tmp_path.iterdir()) == [tmp_path / "sweep.toml"]
