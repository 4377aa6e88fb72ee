"""The documentation the code cites ships with it, and its citations resolve.

The docstrings cite the physics as "docs/physics.md, eq. N" (or "eqs. N-M",
"eqs. N and M", "section N"); these tests read the repository's text files,
not the package's behaviour, so they need no solver run.
"""

import re
from pathlib import Path

import pytest

import windsolve.physics

ROOT = Path(__file__).resolve().parents[1]
PHYSICS = ROOT / "docs" / "physics.md"
# Text the repository ships: the package (code, docstrings, data), its tests and
# benchmarks, and the top-level and docs/ prose.
SCANNED = sorted(
    [p for d in ("windsolve", "tests", "benchmarks") for p in (ROOT / d).rglob("*")
     if p.is_file() and p.suffix in {".py", ".toml", ".md", ".txt"}]
    + [p for p in ROOT.glob("*.md")]
    + [p for p in (ROOT / "docs").rglob("*.md")]
)
SELF = Path(__file__).resolve()

# An equation is defined by its label at the end of a displayed line, "(eq. N)"
# optionally followed by its unit in brackets; "(eq. N)" inside prose is a reference.
EQ_DEFINED = re.compile(r"\(eq\. (\d+)\)[ \t]*(?:\[[^\]\n]*\])?[ \t]*$", re.M)
EQ_MENTIONED = re.compile(r"\beqs?\. (\d+)")
SECTION_DEFINED = re.compile(r"^## (\d+)\. ", re.M)
# "docs/physics.md, eq. 7", "docs/physics.md, eqs. 19-21", "..., eqs. 9 and 10",
# "docs/physics.md, section 5, eqs. 19-21"; whitespace may wrap a line.
CITATION = re.compile(
    r"docs/physics\.md[,:]\s+(?:(sections?)\s+(\d+)(?:\s*(?:-|and|,)\s*(\d+))?(?:,\s+)?)?"
    r"(?:(eqs?)\.\s+(\d+)(?:\s*(?:-|and|,)\s*(\d+))?)?")
# A path-like mention of a document: name.md or name.rst, with an optional directory.
DOCUMENT = re.compile(r"(?<![\w/.-])((?:[\w-]+/)*[\w-]+\.(?:md|rst))\b")


def text(path):
    return path.read_text(encoding="utf-8", errors="replace")


def physics_labels():
    doc = text(PHYSICS)
    eqs = [int(n) for n in EQ_DEFINED.findall(doc)]
    sections = {int(n) for n in SECTION_DEFINED.findall(doc)}
    return doc, eqs, sections


def test_physics_equations_are_numbered_once_and_in_order():
    _, eqs, sections = physics_labels()
    assert eqs, "docs/physics.md defines no (eq. N) labels"
    assert eqs == list(range(1, len(eqs) + 1)), f"equation labels out of order: {eqs}"
    assert sections == set(range(1, max(sections) + 1))


def test_physics_refers_only_to_its_own_equations():
    doc, eqs, _ = physics_labels()
    assert {int(n) for n in EQ_MENTIONED.findall(doc)} <= set(eqs)


@pytest.mark.parametrize("path", SCANNED, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_mention_of_the_outside_specification(path):
    # Identifiers such as SPEC_PROFILE are names, not references (\b stops at "_").
    hits = [f"{path.relative_to(ROOT)}:{i}: {line.strip()}"
            for i, line in enumerate(text(path).splitlines(), 1)
            if re.search(r"\bSPEC\b|SPEC\.md", line) and path != SELF]
    assert not hits, "a reference to a document the repository does not hold:\n" + "\n".join(hits)


@pytest.mark.parametrize("path", SCANNED, ids=lambda p: str(p.relative_to(ROOT)))
def test_every_cited_document_is_in_the_repository(path):
    if path == SELF:
        return
    missing = []
    for i, line in enumerate(text(path).splitlines(), 1):
        for name in DOCUMENT.findall(line):
            candidates = [ROOT / name, path.parent / name, ROOT / "docs" / name]
            if not any(c.exists() for c in candidates):
                missing.append(f"{path.relative_to(ROOT)}:{i}: {name}")
    assert not missing, "documents cited but not in the repository:\n" + "\n".join(missing)


def citations():
    """(where, sections, first eq, last eq) of every docs/physics.md citation."""
    out = []
    for path in SCANNED:
        if path in (SELF, PHYSICS):
            continue
        s = text(path)
        for m in CITATION.finditer(s):
            line = s.count("\n", 0, m.start()) + 1
            where = f"{path.relative_to(ROOT)}:{line}: {m.group(0)!r}"
            sections = [int(g) for g in m.group(2, 3) if g]
            first = int(m.group(5)) if m.group(5) else None
            last = int(m.group(6)) if m.group(6) else first
            out.append((where, sections, first, last))
    return out


def test_the_package_cites_physics_md():
    # The test below must have something to check: the kernels cite the document.
    cited = [c for c in citations() if c[0].startswith("windsolve")]
    assert len(cited) >= 10


def test_every_physics_citation_resolves():
    _, eqs, sections = physics_labels()
    bad = []
    for where, cited_sections, first, last in citations():
        if not cited_sections and first is None:
            bad.append(f"{where} (names no equation or section)")
        for n in cited_sections:
            if n not in sections:
                bad.append(f"{where} (no section {n})")
        if first is not None and not (first in eqs and last in eqs and first <= last):
            bad.append(f"{where} (no such equation)")
    assert not bad, "citations of docs/physics.md that do not resolve:\n" + "\n".join(bad)


# The public API whose docstrings are numpydoc (Parameters with units, Returns,
# Raises, References) and whose signatures are annotated.  windsolve.__all__ is
# read, so a new export is checked without editing this list.
PUBLIC = [
    "windsolve.models:WindModel.replace", "windsolve.models:WindModel.cgs",
    "windsolve.models:WindModel.to_dict", "windsolve.models:WindModel.from_dict",
    "windsolve.opacity:opacity_value", "windsolve.result:WindResult.to_hdf5",
    "windsolve.result:WindResult.from_hdf5", "windsolve.result:WindResult.summary_lines",
    "windsolve.sweep:run_sweep", "windsolve.sweep:load_sweep", "windsolve.sweep:read_sweep_table",
    "windsolve.family:solve_family", "windsolve.family:check_family",
    "windsolve.family:FamilyResult", "windsolve.family:plot_family",
    "windsolve.lines:line_widths", "windsolve.lines:emission_profile",
    "windsolve.lines:pcygni_profile", "windsolve.lines:LineSettings",
    "windsolve.observe:read_observed", "windsolve.observe:predict",
    "windsolve.observe:compare_result", "windsolve.observe:sweep_chi2",
    "windsolve.observe:match_parameter",
    "windsolve.tables:read_table", "windsolve.tables:write_table", "windsolve.tables:load_table",
    "windsolve.tables:tabulate",
] + [f"windsolve.physics:{name}" for name in windsolve.physics.__all__]


def public_objects():
    import importlib
    import inspect

    import windsolve
    out = {}
    for name in windsolve.__all__:
        obj = getattr(windsolve, name)
        if (inspect.isfunction(obj) or inspect.isclass(obj)) and not issubclass_error(obj):
            out[f"windsolve:{name}"] = obj
    for spec in PUBLIC:
        module, _, qualname = spec.partition(":")
        obj = importlib.import_module(module)
        for part in qualname.split("."):
            obj = getattr(obj, part)
        out[spec] = obj
    return out


def issubclass_error(obj):
    return isinstance(obj, type) and issubclass(obj, Exception)


@pytest.mark.parametrize("name", sorted(public_objects()))
def test_public_api_is_documented_and_annotated(name):
    import inspect
    obj = public_objects()[name]
    doc = inspect.getdoc(obj) or ""
    sig = inspect.signature(obj)
    params = [p for p in sig.parameters.values()
              if p.name not in ("self", "cls") and p.kind is not p.VAR_KEYWORD]
    problems = []
    if params and not ("Parameters\n---" in doc or "Attributes\n---" in doc):
        problems.append("no Parameters (or Attributes) section")
    if inspect.isfunction(obj) or inspect.ismethod(obj):
        if "Returns\n---" not in doc and sig.return_annotation is not None:
            problems.append("no Returns section")
        if sig.return_annotation is inspect.Signature.empty:
            problems.append("no return annotation")
    problems += [f"parameter {p.name} not annotated" for p in params
                 if p.annotation is inspect.Parameter.empty]
    assert not problems, f"{name}: " + "; ".join(problems)
