"""Sweep files: the design (grid, random, latin), its axes and their checks.

:func:`load_sweep` reads and validates a sweep file into a :class:`Sweep`
(every axis value checked, the corners of the design built into models);
:func:`apply_changes` builds one row's model from the base model.
"""

import hashlib
import itertools
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ModelError
from ..opacity import nearest

DESIGNS = ("grid", "random", "latin")
SPACINGS = ("linear", "log")
SWEEP_KEYS = ("base", "design", "samples", "seed", "profiles", "batch")
AXIS_KEYS = ("key", "values", "start", "stop", "num", "spacing")


@dataclass
class Axis:
    """One swept model key and its values (model-file strings, cgs numbers)."""

    key: str
    texts: list  # values as written into each row's model file
    numbers: np.ndarray  # the same values in cgs (floats) for the table
    unit: str  # unit of ``numbers`` ("" for plain numbers)
    shown_unit: str = ""  # the unit the sweep file wrote them in (for people: prints, plots)
    log: bool = False  # shown on a log scale: spacing = "log", or positive values over > 30x


@dataclass(frozen=True)
class AxisView:
    """How to show one axis of a sweep file: values = table[key] * factor [unit]."""

    key: str
    factor: float  # from the table's cgs numbers to ``unit``
    unit: str  # the unit as the sweep file wrote it, else the table's; "" for numbers
    cgs_unit: str  # the table's unit ("" for numbers)
    log: bool  # shown on a log scale (Axis.log; older files: values over more than 30x)

    @property
    def label(self) -> str:
        """Axis label: the key and, in brackets, the unit shown."""
        return f"{self.key} [{self.unit}]" if self.unit else self.key


@dataclass
class Sweep:
    """A validated sweep: the base model, the axes and every row's model file."""

    path: Path
    text: str
    kind: str
    design: str
    axes: list
    base: dict  # the base model file (nested dicts)
    rows: list  # per row: {dotted key: value as written in a model file}
    profiles: bool = False
    batch: int = None  # models per task; None: chosen when the sweep runs
    axis_table: np.ndarray = field(default=None)  # (n_rows, n_axes) cgs
    observables: dict = None  # line settings: widths are measured in the workers

    @property
    def digest(self) -> str:
        """A hash of the sweep file's text (see :meth:`design_digest` for the journal)."""
        return hashlib.sha256(self.text.encode()).hexdigest()[:16]

    def design_digest(self) -> str:
        """A hash of the resolved design: every row's model and what is stored of it.

        The base model as read (so an edited ``base = "model.toml"`` is a
        different sweep even when the sweep file's text is the same), the
        contents of an opacity table file it reads, every row's changes,
        ``profiles`` and ``[observables]``.  The journal stores it in its
        header and in every record; a journal of another design is refused.
        """
        h = hashlib.sha256()
        h.update(json.dumps([self.kind, self.base, self.rows, bool(self.profiles),
                             self.observables], sort_keys=True, default=str).encode())
        table = (self.base.get("opacity") or {}).get("path")
        if isinstance(table, str):
            try:
                h.update(Path(table).read_bytes())
            except OSError:
                pass  # the row models report an unreadable table themselves
        return h.hexdigest()[:16]

    def __len__(self):
        return len(self.rows)

    def __repr__(self):
        axes = ", ".join(f"{a.key} ({len(set(a.texts))} values)" for a in self.axes)
        return (f"<Sweep {str(self.path)!r}: {len(self.rows)} {self.kind} models, "
                f"{self.design} design over {axes}>")

    def _repr_html_(self):
        from .._units import html_summary
        rows = [("model kind", self.kind), ("design", self.design), ("rows", len(self.rows))]
        for a in self.axes:
            shown = a.shown_unit or a.unit
            rows.append((f"axis {a.key}", f"{len(set(a.texts))} values"
                         + (f" [{shown}]" if shown else "")))
        if self.observables:
            rows.append(("observables", ", ".join(self.observables)))
        return html_summary(repr(self), rows)


# -- reading a sweep file ---------------------------------------------------------

def _fail(path, text):
    raise ModelError(f"{path}: {text}")


def _axis_spec(model_cls, key, where):
    """(reader, unit) for a dotted key: reader(value) -> checked value."""
    from ..opacity import OPACITY_LAWS
    by_key = {p.key: p for p in model_cls.params().values()}
    if key in by_key:
        p = by_key[key]
        if p.kind in (str, bool):
            _fail(where, f"axis key \"{key}\" is not a number; sweep numeric keys only")
        return p.read, (None if p.kind is float else p.kind)
    if key.startswith("opacity."):
        name = key.partition(".")[2]
        for law in OPACITY_LAWS.values():
            for lp in law.parameters:
                if lp.name == name and lp.unit not in (bool, Path):
                    import astropy.units as u
                    unit = None if lp.unit == u.dimensionless_unscaled else lp.unit
                    return (lambda value, lp=lp: lp.read(value, f"[opacity] {lp.name}")), unit
    valid = [k for k in model_cls.keys() if k not in ("name", "opacity.law")]
    _fail(where, f"axis key \"{key}\" is not a {model_cls.kind} model key"
                 f"{nearest(key, valid)}")


def _number(value, unit):
    """cgs float of a checked value."""
    if unit is None:
        return float(value.value) if hasattr(value, "value") else float(value)
    return float(value.to_value(unit))


def _as_text(value):
    """How a checked value is written into a row's model file."""
    import astropy.units as u
    if isinstance(value, u.Quantity):
        if value.unit == u.dimensionless_unscaled:
            return float(value.value)
        return f"{float(value.value)!r} {value.unit.to_string()}"
    return value


def _read_axis(model_cls, table, where, design):
    import astropy.units as u
    for k in table:
        if k not in AXIS_KEYS:
            _fail(where, f"unknown key \"{k}\" in [[axis]]{nearest(k, AXIS_KEYS)}; an axis "
                         f"takes {', '.join(AXIS_KEYS)}")
    if "key" not in table:
        _fail(where, "an [[axis]] needs key = \"section.name\", e.g. key = \"star.luminosity\"")
    key = table["key"]
    read, unit = _axis_spec(model_cls, key, where)
    axis_where = f"{where} [[axis]] {key}"
    if "values" in table:
        if any(k in table for k in ("start", "stop", "num", "spacing")):
            _fail(axis_where, "give either values or start/stop/num, not both")
        values = table["values"]
        if not isinstance(values, list) or not values:
            _fail(axis_where, "values is empty; give at least one value")
        try:
            checked = [read(v) for v in values]
        except ModelError as error:
            _fail(axis_where, str(error))
        return key, "values", checked, unit
    if "start" not in table or "stop" not in table:
        _fail(axis_where, "give values = [...] or start and stop (and num for a grid)")
    if design != "grid" and "num" in table:
        _fail(axis_where, f"num is for grid designs; a {design} design draws [sweep] samples "
                          f"values between start and stop")
    spacing = table.get("spacing", "linear")
    if spacing not in SPACINGS:
        _fail(axis_where, f"spacing = \"{spacing}\": choose linear or log")
    try:
        start, stop = read(table["start"]), read(table["stop"])
    except ModelError as error:
        _fail(axis_where, str(error))
    if isinstance(start, u.Quantity):
        stop = stop.to(start.unit)
    lo = float(getattr(start, "value", start))
    hi = float(getattr(stop, "value", stop))
    if spacing == "log" and not (lo > 0 and hi > 0):
        _fail(axis_where, "a log axis needs positive start and stop")
    if design == "grid":
        num = table.get("num")
        if not isinstance(num, int) or isinstance(num, bool) or num < 1:
            _fail(axis_where, "a grid axis with start and stop needs num = a whole number >= 1")
        if num == 1:
            grid = np.array([lo])
        else:
            grid = np.geomspace(lo, hi, num) if spacing == "log" else np.linspace(lo, hi, num)
        unit_of = start.unit if isinstance(start, u.Quantity) else None
        try:
            checked = [read(g * unit_of if unit_of is not None else float(g)) for g in grid]
        except ModelError as error:
            _fail(axis_where, str(error))
        return key, "values", checked, unit
    return key, "range", (start, stop, spacing, read), unit


def _written_unit(table):
    """The unit of an [[axis]] as written ("Lsun" of start = "3e6 Lsun"); "" if none."""
    first = table.get("start", (table.get("values") or [None])[0])
    parts = first.split(None, 1) if isinstance(first, str) else []
    return parts[1].strip() if len(parts) == 2 else ""


def _wide(x):
    """Positive values over more than a factor 30: shown on a log scale."""
    return bool(np.all(x > 0) and x.max() > 30 * x.min())




def apply_changes(model, changes):
    """``model`` with the dotted-key values of ``changes`` (validated again).

    Rebuilding through :meth:`WindModel.replace` reuses the base model's
    already-parsed values: several times cheaper than reading a model file
    per row, which matters in a sweep of thousands.

    Parameters
    ----------
    model : WindModel
        The base model.
    changes : dict
        Dotted model-file key -> value as written in a model file (a string
        with units, a number); ``opacity.*`` keys change the opacity table.

    Returns
    -------
    WindModel
        The changed model.

    Raises
    ------
    ModelError
        A changed value is invalid.
    KeyError
        A key is not one of the model's.
    """
    by_key = {p.key: name for name, p in model.params().items()}
    kwargs = {}
    opacity = {}
    for key, value in changes.items():
        if key.startswith("opacity."):
            opacity[key.partition(".")[2]] = value
        else:
            kwargs[by_key[key]] = value
    if opacity:
        kwargs["opacity"] = dict(model.opacity.to_toml(), **opacity)
    return model.replace(**kwargs)


def load_sweep(path: str | Path) -> Sweep:
    """Read and validate a sweep file; every row is built into a model.

    Parameters
    ----------
    path : str or Path
        A sweep file (TOML): ``[sweep]`` with ``base`` (a model file, relative
        to the sweep file) or an inline ``[model]`` table, ``design``
        (``grid``, ``random`` or ``latin``), ``samples``, ``seed``; ``[[axis]]``
        tables with a dotted model key and ``values`` or ``start``, ``stop``,
        ``num``, ``spacing``; optionally ``[observables]`` (line settings).

    Returns
    -------
    Sweep
        The design with every row's model-file changes; each row's model has
        been built once, so a bad row fails here and not in a worker.

    Raises
    ------
    ModelError
        A missing or unreadable file, invalid TOML, an unknown table or key
        (with the nearest valid one), or a row whose model is invalid: one
        line naming the file, the key and the fix.
    """
    from ..io import parse_toml
    from ..modelfile import model_from_dict, read_model_file
    from ..registry import MODELS

    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModelError(f"{path}: no such file; give the path of a sweep file") from None
    except (OSError, UnicodeDecodeError) as error:
        raise ModelError(f"{path}: cannot read ({error})") from None
    data = parse_toml(text, path)
    if "sweep" not in data and isinstance(data.get("model"), str):
        _fail(path, f"this is a model file (model = \"{data['model']}\"), not a sweep file: "
                    f"use windsolve run {path} (a sweep file has [sweep] and [[axis]] tables)")
    tables = ("sweep", "model", "axis", "observables")
    for k in data:
        if k not in tables:
            _fail(path, f"unknown table [{k}]{nearest(k, tables)}; a sweep file has [sweep], "
                        f"[[axis]] and optionally [model] and [observables]")
    observables = data.get("observables")
    if observables is not None:
        if not isinstance(observables, dict):
            _fail(path, "[observables] must be a table of line settings")
        _check_observables(path, observables)
    spec = data.get("sweep")
    if not isinstance(spec, dict):
        _fail(path, "the [sweep] table is missing")
    for k in spec:
        if k not in SWEEP_KEYS:
            _fail(path, f"unknown key \"{k}\" in [sweep]{nearest(k, SWEEP_KEYS)}")
    if ("base" in spec) == ("model" in data):
        _fail(path, "give the base model either as [sweep] base = \"model.toml\" or as an "
                    "inline [model] table (exactly one)")
    if "base" in spec:
        base_path = Path(spec["base"])
        if not base_path.is_absolute():
            base_path = path.resolve().parent / base_path
        base = read_model_file(base_path)
        source = str(base_path)
    else:
        base = data["model"]
        source = f"{path} [model]"
    base_model = model_from_dict(base, source=source)  # the base itself must be valid
    if "opacity" in base and isinstance(base["opacity"].get("path"), str):
        base["opacity"]["path"] = str(base_model.opacity.params["path"])
    model_cls = MODELS[base_model.kind]
    design = spec.get("design", "grid")
    if design not in DESIGNS:
        _fail(path, f"design = \"{design}\" is not known{nearest(str(design), DESIGNS)}; "
                    f"choose grid, random or latin")
    axes_tables = data.get("axis")
    if not isinstance(axes_tables, list) or not axes_tables:
        _fail(path, "no [[axis]] tables: give at least one axis to sweep")
    axes = [_read_axis(model_cls, t, path, design) for t in axes_tables]
    keys = [a[0] for a in axes]
    if len(set(keys)) != len(keys):
        _fail(path, "an axis key appears twice")
    seed = spec.get("seed", 0)
    # Format each axis value once: unit formatting costs ~20 us a call, and a
    # sweep can have 10^4 rows.
    options = []
    for _key, mode, spec_a, unit in axes:
        if mode == "values":
            options.append([(_as_text(v), _number(v, unit)) for v in spec_a])
        else:
            options.append(None)
    if design == "grid":
        index_combos = itertools.product(*[range(len(o)) for o in options])
        combos = [[options[j][k] for j, k in enumerate(ks)] for ks in index_combos]
    else:
        samples = spec.get("samples")
        if not isinstance(samples, int) or isinstance(samples, bool) or samples < 1:
            _fail(path, f"design = \"{design}\" needs samples = a whole number >= 1")
        if design == "random":
            unit_cube = np.random.default_rng(seed).random((samples, len(axes)))
        else:
            from scipy.stats import qmc
            unit_cube = qmc.LatinHypercube(d=len(axes), seed=seed).random(samples)
        pickers = [_picker(a, o) for a, o in zip(axes, options, strict=True)]
        combos = [[pickers[j](unit_cube[i, j]) for j in range(len(axes))]
                  for i in range(samples)]
    keys = [a[0] for a in axes]
    rows = [dict(zip(keys, (text for text, _ in combo), strict=True)) for combo in combos]
    numbers = np.array([[number for _, number in combo] for combo in combos], dtype=float)
    numbers = numbers.reshape(len(combos), len(axes))
    # Every axis value was checked on its own above.  Combinations are
    # checked at the corners of the design (and the first row): a model that
    # a cross-field rule rejects there (X + Z > 1, a photosphere inside R0)
    # stops the sweep now; any other invalid row is recorded as failed, with
    # its reason, when it runs.  (Building all rows here would cost ~0.1 ms
    # each -- a third of a Model A solve.)
    for i in _corner_rows(numbers):
        try:
            apply_changes(base_model, rows[i])
        except ModelError as error:
            label = ", ".join(f"{k} = {v}" for k, v in rows[i].items())
            raise ModelError(f"{path} row {i} ({label}): {error}") from None
    profiles = spec.get("profiles", False)
    if not isinstance(profiles, bool):
        _fail(path, "profiles = true or false")
    batch = spec.get("batch")
    if batch is not None and (not isinstance(batch, int) or isinstance(batch, bool)
                              or batch < 1):
        _fail(path, "batch = a whole number >= 1 (models per task)")
    out_axes = [Axis(a[0], [row[a[0]] for row in rows], numbers[:, j],
                     "" if a[3] is None else a[3].to_string(),
                     "" if a[3] is None else _written_unit(t),
                     t.get("spacing") == "log" or ("values" in t and _wide(numbers[:, j])))
                for j, (a, t) in enumerate(zip(axes, axes_tables, strict=True))]
    return Sweep(path, text, base_model.kind, design, out_axes, base, rows, profiles, batch,
                 numbers, observables)


def _check_observables(path, table):
    """[observables] holds LineSettings keywords; check them before anything runs."""
    import dataclasses

    from ..lines import LineSettings
    names = [f.name for f in dataclasses.fields(LineSettings)]
    for k in table:
        if k not in names:
            _fail(path, f"unknown key \"{k}\" in [observables]{nearest(k, names)}; it takes "
                        f"{', '.join(names)}")
    try:
        LineSettings(**table)
    except ModelError as error:
        _fail(path, f"[observables] {error}")


def _corner_rows(numbers, limit=256):
    """Rows holding the smallest or largest value of every axis (and row 0)."""
    rows = {0}
    for j in range(numbers.shape[1]):
        rows.add(int(np.argmin(numbers[:, j])))
        rows.add(int(np.argmax(numbers[:, j])))
    if numbers.shape[1] <= 8:
        lo = numbers.min(axis=0)
        hi = numbers.max(axis=0)
        at_edge = np.all((numbers == lo) | (numbers == hi), axis=1)
        rows.update(int(i) for i in np.flatnonzero(at_edge)[:limit])
    return sorted(rows)


def _picker(axis, options):
    """u01 -> (model-file text, cgs number) for a random/latin axis."""
    key, mode, spec, unit = axis
    if mode == "values":
        return lambda u01: options[min(int(u01 * len(options)), len(options) - 1)]
    import astropy.units as u
    start, stop, spacing, read = spec
    lo = float(getattr(start, "value", start))
    hi = float(getattr(stop, "value", stop))
    if isinstance(start, u.Quantity):
        text_unit = start.unit.to_string()
        scale = float(start.unit.to(unit))
    else:
        text_unit, scale = None, 1.0
    # Start and stop were checked; every rule on a single value (positive,
    # a fraction) holds between two values that satisfy it.

    def pick(u01):
        u01 = float(u01)
        if spacing == "log":
            x = math.exp(math.log(lo) + u01 * (math.log(hi) - math.log(lo)))
        else:
            x = lo + u01 * (hi - lo)
        return (f"{x!r} {text_unit}" if text_unit is not None else x), x * scale

    return pick

