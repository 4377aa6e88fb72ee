"""Freeze the numbers of a fixed grid of models: an INTERNAL regression pin.

Tier (c) in DEVELOPERS.md.  The stored table guards refactors (every number
must stay the same when the code is only rearranged); it is not a physics
reference: its values are whatever the code gave when the table was written.

    python benchmarks/freeze_numbers.py            # rewrite tests/data/frozen_numbers.csv
    python benchmarks/freeze_numbers.py --check    # compare, print the worst deviation

The grid (~1000 Model A models around configs/demo.toml, parker_reference.toml
and porous_tiring.toml; ~40 Model B models around configs/bump_wind.toml, with
photosphere and base anchors) is solved through the public API
(``windsolve.load_model``, ``WindModel.replace``, ``windsolve.solve``).  Each row
is named by its spec, ``config|field=value|...`` (values as a model file would
give them; ``None`` unsets a field), so the test rebuilds the model from the
row alone.  tests/test_frozen_numbers.py recomputes the table.
"""

import argparse
import csv
import itertools
import math
import sys
from pathlib import Path

import windsolve

ROOT = Path(__file__).resolve().parents[1]
TABLE = ROOT / "tests" / "data" / "frozen_numbers.csv"

# summary keys stored per model (NaN where a model has none)
SUMMARY = ("mass_loss_rate", "sonic_radius", "terminal_velocity", "photosphere_radius",
           "sonic_temperature", "base_density_efolds", "base_radius", "base_luminosity")
COLUMNS = ("spec", "status", "shots", "n_profile", *SUMMARY, "v_outer")
INTS = ("shots", "n_profile")


def grid():
    """The specs of every model in the table, in order."""
    specs = []
    # Model A around the demo (porous, continuum-driven): Gamma via L, a, rho0, porosity, tiring
    for L, a, rho0, h, tiring in itertools.product(
            ("2e6 Lsun", "2.5e6 Lsun", "3e6 Lsun", "4e6 Lsun", "5e6 Lsun", "6e6 Lsun",
             "8e6 Lsun"),
            ("12 km/s", "16 km/s", "20 km/s", "35 km/s"),
            ("1e-11 g/cm3", "1e-9 g/cm3", "1e-7 g/cm3", "1e-6 g/cm3"),
            ("None", "10 Rsun", "1 Rsun", "0.01 Rsun"),
            ("false", "true")):
        specs.append(f"demo.toml|luminosity={L}|sound_speed={a}|base_density={rho0}"
                     f"|porosity_length={h}|photon_tiring={tiring}")
    # Model A around the porous photon-tiring eruption
    for h, q, rho0 in itertools.product(
            ("0.003 Rsun", "0.01 Rsun", "0.03 Rsun", "0.1 Rsun"),
            ("0.5", "1.0", "1.5"),
            ("3e-7 g/cm3", "1e-6 g/cm3", "3e-6 g/cm3")):
        specs.append(f"porous_tiring.toml|porosity_length={h}|porosity_exponent={q}"
                     f"|base_density={rho0}")
    # Model A around Parker's wind with reduced gravity (sub-Eddington, constant opacity)
    for L, a, rho0, tiring in itertools.product(
            ("0.386e5 Lsun", "1.0e5 Lsun", "1.930573e5 Lsun", "2.9e5 Lsun", "3.5e5 Lsun"),
            ("60 km/s", "100 km/s", "150 km/s", "250 km/s"),
            ("1e-14 g/cm3", "1e-12 g/cm3", "1e-10 g/cm3"),
            ("false", "true")):
        specs.append(f"parker_reference.toml|luminosity={L}|sound_speed={a}"
                     f"|base_density={rho0}|photon_tiring={tiring}")
    # Model B, photosphere anchor
    for L, T, M in itertools.product(("1.5e5 Lsun", "1.8e5 Lsun", "2e5 Lsun", "2.4e5 Lsun",
                                      "3e5 Lsun"),
                                     ("4e4 K", "5e4 K", "7e4 K"),
                                     ("8 Msun", "10 Msun", "12 Msun")):
        specs.append(f"bump_wind.toml|photosphere_luminosity={L}|photosphere_temperature={T}"
                     f"|mass={M}")
    # Model B with the invented opacity table (the tabulated twin of the bump law)
    for T in ("4e4 K", "5e4 K", "6e4 K"):
        specs.append(f"bump_wind.toml|opacity=table:invented_bump_table.txt"
                     f"|photosphere_temperature={T}")
    # Model B, base anchor (near the base of the bump_wind solution: R ~ 0.514 Rsun,
    # L ~ 2.19e5 Lsun, T ~ 1e6 K, rho ~ 1.39e-5 g/cm3)
    photo_off = "photosphere_luminosity=None|photosphere_temperature=None"
    # (a base-anchored solve costs seconds: few of them)
    for R, L in (("0.5 Rsun", "2.15e5 Lsun"), ("0.52 Rsun", "2.25e5 Lsun")):
        for base in ("base_temperature=1e6 K", "base_temperature=None|base_density=1.4e-5 g/cm3"):
            specs.append(f"bump_wind.toml|{photo_off}|radius={R}|luminosity={L}|{base}")
    return specs


_BASES = {}


def build(spec):
    """The model a spec names."""
    config, *items = spec.split("|")
    if config not in _BASES:
        _BASES[config] = windsolve.load_model(ROOT / "configs" / config)
    changes = {}
    for item in items:
        key, _, value = item.partition("=")
        changes[key] = {"None": None, "true": True, "false": False}.get(value, value)
        if key in ("porosity_exponent",):
            changes[key] = float(value)
        if value.startswith("table:"):  # an opacity table in configs/
            changes[key] = {"law": "table", "path": str(ROOT / "configs" / value[6:])}
    return _BASES[config].replace(**changes)


def row(spec):
    """The stored numbers of one model: a dict of COLUMNS."""
    result = windsolve.solve(build(spec))
    out = {"spec": spec, "status": result.status,
           "shots": int(result.counters.get("shots", -1)),
           "n_profile": len(result.profile["radius"]) if result.profile else 0}
    for key in SUMMARY:
        q = result.summary.get(key)
        out[key] = math.nan if q is None else float(q.value)
    out["v_outer"] = float(result.profile["velocity"][-1].value) if result.profile else math.nan
    return out


def read_table(path=TABLE):
    with open(path, newline="") as f:
        lines = [line for line in f if not line.startswith("#")]
    rows = []
    for r in csv.DictReader(lines):
        for key in COLUMNS[2:]:
            r[key] = int(r[key]) if key in INTS else float(r[key])
        rows.append(r)
    return rows


def compare(old, new, rtol=1e-12):
    """Deviations of ``new`` from ``old``: (list of problems, largest relative deviation)."""
    problems, worst = [], 0.0
    for key in COLUMNS[1:]:
        a, b = old[key], new[key]
        if key in ("status", *INTS):
            if a != b:
                problems.append(f"{old['spec']}: {key} {a!r} -> {b!r}")
            continue
        if math.isnan(a) and math.isnan(b):
            continue
        dev = abs(b - a) / abs(a) if a != 0 else abs(b - a)
        if not dev <= rtol:  # NaN on one side only fails too
            problems.append(f"{old['spec']}: {key} {a!r} -> {b!r} (rel {dev:.3g})")
        elif dev > worst:
            worst = dev
    return problems, worst


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare instead of writing")
    args = parser.parse_args(argv)
    rows = [row(spec) for spec in grid()]
    if args.check:
        old = {r["spec"]: r for r in read_table()}
        problems, worst, exact = [], 0.0, 0
        for r in rows:
            p, w = compare(old[r["spec"]], r)
            problems += p
            worst = max(worst, w)
            exact += all(old[r["spec"]][k] == r[k] or
                         (isinstance(r[k], float) and math.isnan(r[k])) for k in COLUMNS[1:])
        print(f"{len(rows)} models, {exact} bit for bit, largest relative deviation "
              f"{worst:.3g}, {len(problems)} problems")
        print("\n".join(problems[:20]))
        return 1 if problems else 0
    with open(TABLE, "w", newline="") as f:
        f.write("# INTERNAL regression pin (tier (c), DEVELOPERS.md): numbers the code gave, "
                "written by benchmarks/freeze_numbers.py.\n# It guards refactors; it is NOT "
                "a physics reference.  cgs units; NaN where a model has no such value.\n")
        w = csv.DictWriter(f, COLUMNS, lineterminator="\n")
        w.writeheader()
        for r in rows:
            w.writerow({k: repr(v) if isinstance(v, float) else v for k, v in r.items()})
    counts = {}
    for r in rows:
        counts[r["status"]] = counts.get(r["status"], 0) + 1
    print(f"wrote {len(rows)} models to {TABLE}: {counts}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
