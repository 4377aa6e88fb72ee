"""Every public function and class of the package is documented (numpydoc) and typed.

The package's source is read with ``ast``, not imported, so these tests run no
solver and compile no kernel.  "Public" is a module-level function or class, or a
method of a public class, whose name has no leading underscore.  Checked:

* every public function and class has a docstring;
* every public function or method that takes arguments (other than ``self`` and
  ``cls``) has a numpydoc ``Parameters`` section;
* every public function and method of the user-facing modules, except compiled
  kernels (numba cannot take annotations there), is annotated: its return or at
  least one argument.
"""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "windsolve"

# Nothing is exempt (the tuple stays for a file that must be, with its reason).
EXEMPT = ()

# The user-facing modules, whose public functions carry type hints (paths relative to
# windsolve/; a trailing "/" is every module of that package).  The sweep package is
# checked through the names its __init__ exports (SWEEP_EXPORTS below).
USER_FACING = ("__init__.py", "result.py", "solve.py", "modelfile.py", "registry.py",
               "family.py", "observe.py", "lines/", "tables.py", "opacity.py",
               "physics.py", "plotting.py", "models/isothermal/model.py",
               "models/diffusion/model.py", "models/base.py", "io/", "files.py",
               "cli.py", "status.py")

KERNEL_DECORATORS = {"njit", "jit", "vectorize", "guvectorize", "cfunc", "generated_jit"}


def relative(path):
    return path.relative_to(PACKAGE).as_posix()


def matches(rel, patterns):
    return any(rel == p or (p.endswith("/") and rel.startswith(p)) for p in patterns)


def sources():
    return sorted(p for p in PACKAGE.rglob("*.py")
                  if not matches(relative(p), EXEMPT) and p.name != "_scm_version.py")


def parse(path):
    return ast.parse(path.read_text(encoding="utf-8"), filename=str(path))


def public_defs(tree):
    """(qualified name, node) of the public functions, classes and methods of a module."""
    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)) \
                and not node.name.startswith("_"):
            yield node.name, node
            if isinstance(node, ast.ClassDef):
                for item in node.body:
                    if isinstance(item, (ast.FunctionDef, ast.AsyncFunctionDef)) \
                            and not item.name.startswith("_"):
                        yield f"{node.name}.{item.name}", item


def arguments(func):
    a = func.args
    named = [x for x in a.posonlyargs + a.args + a.kwonlyargs if x.arg not in ("self", "cls")]
    return named + [x for x in (a.vararg, a.kwarg) if x is not None]


def is_kernel(func):
    for dec in func.decorator_list:
        target = dec.func if isinstance(dec, ast.Call) else dec
        name = target.attr if isinstance(target, ast.Attribute) else getattr(target, "id", "")
        if name in KERNEL_DECORATORS:
            return True
    return False


def annotated(func):
    return func.returns is not None or any(a.annotation is not None for a in arguments(func))


def sweep_exports():
    """{module file relative to windsolve/: names} of the sweep package's ``__all__``."""
    tree = parse(PACKAGE / "sweep" / "__init__.py")
    exported = set()
    for node in tree.body:
        if isinstance(node, ast.Assign) and any(getattr(t, "id", "") == "__all__"
                                                for t in node.targets):
            exported = set(ast.literal_eval(node.value))
    where = {}
    for node in tree.body:
        if isinstance(node, ast.ImportFrom) and node.level == 1 and node.module:
            for alias in node.names:
                if alias.name in exported:
                    where.setdefault(f"sweep/{node.module}.py", set()).add(alias.name)
    return where


SOURCES = sources()
IDS = [relative(p) for p in SOURCES]


def test_the_walk_sees_the_package():
    # A walk that finds nothing would pass every check below.
    assert len(SOURCES) > 40
    assert "models/isothermal/kernels.py" in IDS and "result.py" in IDS
    assert sweep_exports(), "the sweep package exports no names the walk can find"


@pytest.mark.parametrize("path", SOURCES, ids=IDS)
def test_public_names_have_docstrings(path):
    missing = [name for name, node in public_defs(parse(path)) if not ast.get_docstring(node)]
    assert not missing, f"{relative(path)}: no docstring on " + ", ".join(missing)


@pytest.mark.parametrize("path", SOURCES, ids=IDS)
def test_public_functions_with_arguments_have_parameters(path):
    missing = []
    for name, node in public_defs(parse(path)):
        if isinstance(node, ast.ClassDef) or not arguments(node):
            continue
        doc = ast.get_docstring(node) or ""
        if "Parameters\n----------" not in doc:
            missing.append(name)
    assert not missing, (f"{relative(path)}: no numpydoc Parameters section in "
                         + ", ".join(missing))


def user_facing_functions():
    exports = sweep_exports()
    for path in SOURCES:
        rel = relative(path)
        only = exports.get(rel)
        if not matches(rel, USER_FACING) and only is None:
            continue
        for name, node in public_defs(parse(path)):
            if only is not None and name.split(".")[0] not in only:
                continue
            if isinstance(node, ast.ClassDef) or is_kernel(node):
                continue
            yield rel, name, node


def test_user_facing_functions_are_annotated():
    found = list(user_facing_functions())
    assert len(found) > 50
    missing = [f"{rel}: {name}" for rel, name, node in found if not annotated(node)]
    assert not missing, "no type hints on:\n" + "\n".join(missing)


def test_kernels_carry_no_annotations():
    # numba compiles these; an annotation there is at best ignored.
    annotated_kernels = [f"{relative(p)}: {name}" for p in SOURCES
                         for name, node in public_defs(parse(p))
                         if not isinstance(node, ast.ClassDef) and is_kernel(node)
                         and annotated(node)]
    assert not annotated_kernels, "\n".join(annotated_kernels)


def test_the_checks_catch_a_bare_function():
    tree = ast.parse("def f(x):\n    return x\n\n@njit\ndef g(y: float):\n    '''G.'''\n")
    defs = dict(public_defs(tree))
    assert not ast.get_docstring(defs["f"]) and arguments(defs["f"])
    assert not annotated(defs["f"]) and not is_kernel(defs["f"])
    assert is_kernel(defs["g"]) and annotated(defs["g"])
