"""Run every bad-input case of ``tests/test_bad_input.py`` (and the damaged result, family
and sweep files of ``tests/test_bad_files.py``) and count the outcomes.

    python benchmarks/bad_input_survey.py          # counts, and every case that is not clean
    python benchmarks/bad_input_survey.py -v       # every case with its stderr line

A case counts as a one-line exit 2 when ``windsolve.cli.main`` exits 2 with exactly
one stderr line ``windsolve: error: ...``, no traceback, no warning, nothing on
stdout and no file written; "(poor message)" counts those whose line lacks a
fragment the case expects it to name (the key, the option, the fix).  Prints tried /
one-line exit 2 / other, per kind and in total.  Each case runs in-process under a
60 s alarm and a 4 GB address-space limit, so that a case that tries to allocate or
compute without bound (as some did) is counted instead of taking the machine down.
"""

import argparse
import importlib.util
import os
import sys
import tempfile
from collections import Counter
from pathlib import Path

os.environ.setdefault("MPLBACKEND", "Agg")
HERE = Path(__file__).resolve().parent


def load_cases(name="test_bad_input"):
    sys.path.insert(0, str(HERE.parent / "tests"))
    spec = importlib.util.spec_from_file_location(name, HERE.parent / "tests" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


MEMORY_LIMIT = 4 << 30  # bytes of address space: an attempt to allocate fails, not the machine


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-v", "--verbose", action="store_true")
    parser.add_argument("-k", metavar="TEXT", help="only cases whose id contains TEXT")
    parser.add_argument("--files", choices=["no", "also", "only"], default="also",
                        help="the damaged-file cases of tests/test_bad_files.py: leave out, "
                             "add (default) or run only those")
    args = parser.parse_args()
    try:
        import resource
        resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))
    except (ImportError, ValueError, OSError):
        pass
    m = load_cases()
    f = load_cases("test_bad_files") if args.files != "no" else None
    import windsolve
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        result = tmp / "result" / "demo.h5"
        result.parent.mkdir()

        def result_file():
            if not result.exists():
                windsolve.solve(windsolve.load_model(windsolve.demo_model_path())).to_hdf5(result)
            return result

        runs = [] if args.files == "only" else [(c, lambda d: m.Ctx(d, result_file))
                                                 for c in m.CASES]
        if f is not None:
            (tmp / "intact").mkdir()
            sources = f.Sources(tmp / "intact")
            runs += [(c, lambda d: f.Ctx(d, sources)) for c in f.CASES]
        tried, clean, poor = Counter(), Counter(), Counter()
        for i, (c, make_ctx) in enumerate(runs):
            if args.k and args.k not in c.id:
                continue
            directory = tmp / f"case{i}"
            directory.mkdir()
            outcome = m.run_case(c, make_ctx(directory))
            found = m.problems(*outcome, c.fragments)
            bad = [f for f in found if not f.startswith("message lacks")]
            tried[c.kind] += 1
            clean[c.kind] += not bad
            poor[c.kind] += not bad and bool(found)
            err = outcome[2].strip().splitlines()
            first = err[-1] if err else ""
            if bad or args.verbose or found:
                mark = "ok   " if not bad else "OTHER"
                print(f"{mark} {c.kind:<14s} {c.id:<38s} {'; '.join(found) or ''}")
                print(f"        {first[:220]}")
    print()
    print("one-line exit 2: exit 2, one stderr line, no traceback, warning, stdout or file;")
    print("  (poor message): of those, the line lacks what the case expects it to name")
    print(f"{'kind':<16s} {'tried':>6s} {'one-line exit 2':>16s} {'(poor message)':>15s} "
          f"{'other':>6s}")
    for kind in tried:
        print(f"{kind:<16s} {tried[kind]:6d} {clean[kind]:16d} {poor[kind]:15d} "
              f"{tried[kind] - clean[kind]:6d}")
    total, ok, weak = sum(tried.values()), sum(clean.values()), sum(poor.values())
    print(f"{'total':<16s} {total:6d} {ok:16d} {weak:15d} {total - ok:6d}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
