"""A sweep row built from the base model's kernel vectors is the row apply_changes builds.

(f) internal consistency: sweep workers set a Model A row's kernel vectors
(P, O) from the base model's (windsolve.sweep.worker.FAST_KEYS) instead of
rebuilding and checking the whole model.  Every key kind, alone and together,
valid and invalid, must give the same vectors bit for bit, the same record
as the reference path (apply_changes, then the row solve) and the numbers of
``solve(apply_changes(base, changes))``; and the frozen Model A table
(tests/data/frozen_numbers.csv) must come out of the sweep path unchanged.
"""

import importlib.util
import json
import math
from pathlib import Path

import pytest

import windsolve
from windsolve.errors import ModelError
from windsolve.modelfile import model_from_dict, read_model_file
from windsolve.result import SUMMARY_UNITS
from windsolve.sweep import SUMMARY_COLUMNS, apply_changes, run_batch
from windsolve.sweep import worker as W

ROOT = Path(__file__).resolve().parents[1]
DEMO = Path(str(windsolve.demo_model_path()))

# One case per key kind (FAST_KEYS), combinations, keys that take the reference path
# (radius, composition, opacity), and rows that a value or a cross-field rule refuses.
CASES = [
    {"star.luminosity": "5e6 Lsun"},
    {"star.luminosity": "0 Lsun"},
    {"star.mass": "40 Msun"},
    {"gas.sound_speed": "25 km/s"},
    {"gas.sound_speed": "1000 km/s"},
    {"boundary.base_density": "1e-7 g/cm3"},
    {"numerics.outer_radius": "2000 Rsun"},
    {"numerics.rtol": 1e-9},
    {"porosity.length": "3 Rsun"},
    {"porosity.radial_exponent": 0.5},
    {"star.luminosity": "6e6 Lsun", "porosity.length": "30 Rsun",
     "porosity.radial_exponent": 1.5, "boundary.base_density": "1e-10 g/cm3",
     "gas.sound_speed": "16 km/s", "star.mass": "60 Msun", "numerics.rtol": 1e-10,
     "numerics.outer_radius": "5000 Rsun"},
    {"star.luminosity": "1e3 Lsun"},  # no critical point
    {"star.radius": "80 Rsun"},  # reference path
    {"composition.X": 0.6},  # reference path
    {"star.luminosity": "-1 Lsun"},  # refused value
    {"star.luminosity": "4e6"},  # no unit
    {"star.mass": [1, 2]},  # not a value
    {"numerics.outer_radius": "50 Rsun"},  # inside the base
    {"gas.temperature": "3e4 K"},  # both sound_speed and temperature
    {"gas.sound_speed": "4e5 km/s"},  # faster than light
    {"boundary.base_density": "1e300 g/cm3"},  # the base mass flux overflows
    {"star.mass": "1e12 Msun"},  # the base inside 2GM/c^2
]


@pytest.fixture(scope="module")
def base():
    return read_model_file(DEMO)


def _key(changes):
    return json.dumps(changes)


def _same(a, b):
    return a == b or (isinstance(a, float) and isinstance(b, float)
                      and math.isnan(a) and math.isnan(b))


def _records(base, cases, fast, monkeypatch):
    monkeypatch.setattr(W, "FAST_ROWS", fast)
    records = run_batch(base, list(enumerate(cases)))
    for r in records:
        r.pop("seconds")
    return records


def test_fast_rows_give_the_reference_records(base, monkeypatch):
    fast = _records(base, CASES, True, monkeypatch)
    slow = _records(base, CASES, False, monkeypatch)
    for changes, f, s in zip(CASES, fast, slow, strict=True):
        assert f.keys() == s.keys(), changes
        for k in f:
            assert _same(f[k], s[k]), (changes, k, f[k], s[k])
    statuses = {r["status"] for r in fast}
    assert {"converged", "error", "no_critical_point"} <= statuses


@pytest.mark.parametrize("changes", CASES, ids=_key)
def test_fast_row_vectors_equal_the_models(base, changes):
    base_model = model_from_dict(base, source="sweep base")
    try:
        model = apply_changes(base_model, changes)
    except ModelError:
        model = None
    row = W._FastRows(base_model).row(changes)
    if any(k not in W.FAST_KEYS for k in changes) or model is None:
        assert row is None  # the reference path builds it (and says why it fails)
        return
    assert row is not None
    for mine, theirs in zip(row.kernel_arrays, model.kernel_arrays, strict=True):
        assert mine.dtype == theirs.dtype and mine.tobytes() == theirs.tobytes()
    assert (row.rtol, row.a, row.T) == (model.rtol, model.a, model.T)
    for name in ("radius", "outer_radius", "base_density", "luminosity", "mass"):
        assert row.cgs(name) == model.cgs(name)
    assert row.porosity_length == model.porosity_length  # anything else: from the model


@pytest.mark.parametrize("changes", [c for c in CASES if set(c) <= set(W.FAST_KEYS)],
                         ids=_key)
def test_fast_row_numbers_equal_solve(base, changes, monkeypatch):
    record = _records(base, [changes], True, monkeypatch)[0]
    try:
        model = apply_changes(model_from_dict(base, source="sweep base"), changes)
    except ModelError as error:
        assert record["status"] == "error" and record["message"] == str(error)
        return
    result = windsolve.solve(model, profile=False)
    assert record["status"] == result.status and record["converged"] == result.converged
    for key in SUMMARY_COLUMNS:
        q = result.summary.get(key)
        expected = math.nan if q is None else float(q.to_value(SUMMARY_UNITS[key]))
        assert _same(record[key], expected), key


def _frozen():
    spec = importlib.util.spec_from_file_location("freeze_numbers",
                                                  ROOT / "benchmarks" / "freeze_numbers.py")
    F = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(F)
    return F


DOTTED = {"luminosity": "star.luminosity", "sound_speed": "gas.sound_speed",
          "base_density": "boundary.base_density", "porosity_length": "porosity.length",
          "porosity_exponent": "porosity.radial_exponent"}


def test_frozen_model_a_numbers_through_the_sweep_path():
    # Every Model A model of the frozen table as a sweep row: the swept keys as the row's
    # changes, the rest (photon tiring, no porosity) in the base model file.
    F = _frozen()
    groups = {}
    for old in F.read_table():
        config, *items = old["spec"].split("|")
        if config == "bump_wind.toml":
            continue
        fixed, changes = {}, {}
        for item in items:
            key, _, value = item.partition("=")
            if key == "photon_tiring" or value == "None":
                fixed[key] = {"None": None, "true": True, "false": False}[value]
            else:
                changes[DOTTED[key]] = float(value) if key == "porosity_exponent" else value
        group = (config, tuple(sorted(fixed.items())))
        groups.setdefault(group, []).append((old, changes))
    assert sum(len(g) for g in groups.values()) > 1000
    problems = []
    for (config, fixed), rows in groups.items():
        base = windsolve.load_model(ROOT / "configs" / config).replace(**dict(fixed))
        records = run_batch(base.to_dict(), [(i, c) for i, (_, c) in enumerate(rows)])
        for (old, _), record in zip(rows, records, strict=True):
            new = dict(old, status=record["status"])
            for key in ("mass_loss_rate", "sonic_radius", "terminal_velocity",
                        "base_density_efolds"):
                new[key] = record[key]
            problems += F.compare(old, new)[0]
    assert not problems, f"{len(problems)} numbers changed:\n" + "\n".join(problems[:30])
