"""Observed widths: a CSV format of our own, comparison with models, chi^2 over sweeps.

Observed-widths file (CSV, one measurement a row, ``#`` comment lines allowed)::

    object,quantity,line,value,uncertainty,unit
    Calder Var A (invented),terminal_velocity,-,450,40,km/s
    Calder Var A (invented),fwhm,H-alpha,510,50,km/s

``quantity`` is one of :data:`QUANTITIES` -- ``terminal_velocity`` (the
model's summary value), ``fwhm``, ``hwzi`` and ``edge_velocity`` (measured
on the model's synthetic line, :mod:`windsolve.lines`).  ``line`` is a free
label; ``uncertainty`` is one standard deviation in the same unit; ``unit``
is any speed astropy reads.

Sign convention (one, checked): an ``edge_velocity`` is a Doppler velocity,
blue-shifted, so it is written negative (``-650``), as :mod:`windsolve.lines`
measures it; a positive edge velocity (a speed quoted as a magnitude) is
refused with one line that says to write it negative, so a fit can never be
silently inverted.  Every other quantity is a positive speed.

chi^2 = sum over the measurements of ((predicted - observed) / uncertainty)^2
(docs/physics.md, eq. 31).
"""

import csv
import math
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from .errors import ModelError
from .io import read_input_text
from .opacity import nearest
from .registry import LINE_WIDTHS

if TYPE_CHECKING:
    from .lines import LineSettings
    from .models import WindModel
    from .result import WindResult

__all__ = ["QUANTITIES", "Observation", "read_observed", "read_observed_objects", "predict",
           "compare_result", "sweep_chi2", "match_parameter", "match_interval", "Comparison",
           "compare_table", "Grid", "read_grid", "row_model", "settings_text",
           "stored_settings", "delta_chi2_level", "Interval", "confidence_intervals", "chi2_map",
           "write_comparison_csv", "UNDEFINED"]

QUANTITIES = ("terminal_velocity", *LINE_WIDTHS)
COLUMNS = ("object", "quantity", "line", "value", "uncertainty", "unit")


@dataclass(frozen=True)
class Observation:
    """One measurement of an observed-widths CSV, in cgs.

    Attributes
    ----------
    object : str
        The star's name as the file gives it.
    quantity : str
        One of :data:`QUANTITIES`.
    line : str
        A free label (e.g. ``H-alpha``; ``-`` for none).
    value, uncertainty : float
        The measurement and its one-sigma uncertainty [cm/s].
    row : int
        Line number in the file.
    """

    object: str
    quantity: str
    line: str
    value: float  # cm/s
    uncertainty: float  # cm/s
    row: int  # line number in the file

    def label(self) -> str:
        """The quantity, with the line's name in parentheses when it has one."""
        return f"{self.quantity}" + (f" ({self.line})" if self.line not in ("", "-") else "")


C_KM_S = 299792.458  # speed of light [km/s]


def read_observed(path: str | Path, object_name: str | None = None) -> list[Observation]:
    """Validated observations from an observed-widths CSV (one-line errors).

    Parameters
    ----------
    path : str or Path
        The CSV (layout in the module docstring).
    object_name : str, optional
        Keep only this object's rows; required when the file holds several.

    Returns
    -------
    list of Observation
        In file order, values and uncertainties in cm/s.

    Raises
    ------
    ModelError
        A missing or unreadable file, a wrong header, no measurements, an
        unknown object, several objects without ``object_name``, or a bad
        row.  Every row must hold a finite value, below the speed of light,
        with the sign its quantity has (``edge_velocity`` negative, the
        others positive), a positive finite uncertainty and a speed unit.
        A byte-order mark (as spreadsheet programs write) is ignored.
    """
    path = Path(path)
    out = _read_all(path)
    objects = sorted({o.object for o in out})
    if object_name is not None:
        out = [o for o in out if o.object == object_name]
        if not out:
            raise ModelError(f"{path}: no measurements of \"{object_name}\""
                             f"{nearest(object_name, objects)}; objects: {', '.join(objects)}")
    elif len(objects) > 1:
        raise ModelError(f"{path} holds several objects ({', '.join(objects)}); choose one "
                         f"with --object")
    return out


def _read_all(path):
    """Every checked row of an observed-widths CSV (at least one)."""
    text = read_input_text(path, "an observed-widths CSV",
                           "give an observed-widths CSV (see configs/observed_widths.csv)",
                           "save the CSV as UTF-8", encoding="utf-8-sig")
    lines = [(i + 1, line) for i, line in enumerate(text.splitlines())
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise ModelError(f"{path}: no header and no measurements; the first line must be "
                         f"{','.join(COLUMNS)}")
    # One line, one record: a stray quote must not swallow the lines after it.
    header = [h.strip() for h in next(csv.reader([lines[0][1]]))]
    if header != list(COLUMNS):
        missing = [c for c in COLUMNS if c not in header]
        hint = f"; missing {', '.join(missing)}" if missing else ""
        raise ModelError(f"{path} line {lines[0][0]}: the header must be "
                         f"{','.join(COLUMNS)}{hint}")
    out = []
    for lineno, text_line in lines[1:]:
        row = next(csv.reader([text_line]))
        out.append(_observation(row, f"{path} line {lineno}", lineno))
    if not out:
        raise ModelError(f"{path}: no measurements below the header")
    return out


def _observation(row, where, lineno):
    """One checked row of an observed-widths CSV."""
    if len(row) != len(COLUMNS):
        raise ModelError(f"{where}: {len(row)} fields, expected {len(COLUMNS)} "
                         f"({','.join(COLUMNS)})")
    obj, quantity, line, value_text, sigma_text, unit = (x.strip() for x in row)
    if quantity not in QUANTITIES:
        raise ModelError(f"{where}: quantity \"{quantity}\" is not known"
                         f"{nearest(quantity, QUANTITIES)}; choose one of "
                         f"{', '.join(QUANTITIES)}")
    numbers = []
    for name, text in (("value", value_text), ("uncertainty", sigma_text)):
        try:
            number = float(text)
        except ValueError:
            raise ModelError(f"{where}: {name} \"{text}\" is not a number") from None
        if not math.isfinite(number):
            raise ModelError(f"{where}: {name} = {text}: must be a finite number")
        numbers.append(number)
    value, sigma = numbers
    if not sigma > 0:
        raise ModelError(f"{where}: uncertainty = {sigma_text}: must be positive (one "
                         f"standard deviation, in the row's unit)")
    try:
        unit_obj = u.Unit(unit)
    except ValueError:
        raise ModelError(f"{where}: unit \"{unit}\" is not a unit; write e.g. km/s") from None
    if not unit_obj.is_equivalent(u.cm / u.s):
        raise ModelError(f"{where}: unit \"{unit}\" is not a speed; write e.g. km/s")
    scale = float(unit_obj.to(u.cm / u.s))
    shown = f"{value_text} {unit}"
    if quantity == "edge_velocity" and not value < 0:
        raise ModelError(f"{where}: edge_velocity = {shown}: an edge velocity is blue-shifted, "
                         f"so negative; write -{value_text.lstrip('+')}")
    if quantity != "edge_velocity" and not value > 0:
        raise ModelError(f"{where}: {quantity} = {shown}: must be positive")
    if not abs(value) * scale < C_KM_S * 1e5:
        raise ModelError(f"{where}: {quantity} = {shown} is faster than the speed of light "
                         f"({C_KM_S:.6g} km/s); check the value and its unit")
    return Observation(obj, quantity, line, value * scale, sigma * scale, lineno)


def predict(result: "WindResult", quantity: str, settings: "LineSettings | None" = None,
            widths: dict | None = None) -> float:
    """A model's value of an observed quantity [cm/s] (NaN when undefined).

    Parameters
    ----------
    result : WindResult
        A solved model.
    quantity : str
        One of :data:`QUANTITIES`.
    settings : LineSettings, optional
        For the line widths (default ``LineSettings()``).
    widths : dict, optional
        Widths already measured (:func:`windsolve.lines.line_widths`).

    Returns
    -------
    float
        The prediction [cm/s]: the summary's terminal velocity, or a width
        of the synthetic line (docs/physics.md, section 7).
    """
    if quantity == "terminal_velocity":
        return float(result.summary["terminal_velocity"].to_value(u.cm / u.s))
    if widths is None:
        from .lines import LineSettings, line_widths
        widths = line_widths(result, settings or LineSettings())
    q = widths.get(quantity)
    return math.nan if q is None else float(q.to_value(u.cm / u.s))


def compare_result(result: "WindResult", observations: list[Observation],
                   settings: "LineSettings | None" = None) -> tuple[list[tuple], float]:
    """Rows (observation, predicted, residual in sigma) and chi^2 for one model.

    Parameters
    ----------
    result : WindResult
        A solved model.
    observations : list of Observation
        From :func:`read_observed`.
    settings : LineSettings, optional
        For the line widths.

    Returns
    -------
    rows : list of tuple
        ``(observation, predicted [cm/s], (predicted - observed) / sigma)``.
    chi2 : float
        The sum of the squared residuals (dimensionless).

    References
    ----------
    docs/physics.md, eq. 31.
    """
    widths = None
    if any(o.quantity != "terminal_velocity" for o in observations):
        from .lines import LineSettings, line_widths
        widths = line_widths(result, settings or LineSettings())
    rows = []
    for o in observations:
        p = predict(result, o.quantity, settings, widths)
        rows.append((o, p, (p - o.value) / o.uncertainty))
    chi2 = float(sum(r[2] ** 2 for r in rows))
    return rows, chi2


def sweep_chi2(table: dict[str, np.ndarray], observations: list[Observation]) -> np.ndarray:
    """chi^2 per sweep row from the stored columns; NaN for failed rows.

    Parameters
    ----------
    table : dict of str to numpy.ndarray
        A sweep table (:func:`windsolve.sweep.read_sweep_table`), columns in cgs.
    observations : list of Observation
        From :func:`read_observed`.

    Returns
    -------
    numpy.ndarray
        chi^2 per row (dimensionless); NaN for rows that did not converge or
        have no value.

    Raises
    ------
    ModelError
        Widths (fwhm, hwzi, edge_velocity) were observed but not computed in
        the sweep (no ``[observables]`` table).

    References
    ----------
    docs/physics.md, eq. 31.
    """
    n = len(table["converged"])
    chi2 = np.zeros(n)
    for o in observations:
        if o.quantity not in table:
            raise ModelError(f"the sweep has no {o.quantity} column: add an [observables] "
                             f"table to the sweep file so that line widths are computed in "
                             f"the workers")
        chi2 += ((table[o.quantity] - o.value) / o.uncertainty) ** 2
    ok = table["converged"].astype(bool) & np.isfinite(chi2)
    chi2[~ok] = np.nan
    return chi2


def match_parameter(model: "WindModel", key: str, start: "u.Quantity | str | float",
                    stop: "u.Quantity | str | float", observation: Observation,
                    settings: "LineSettings | None" = None, num: int = 12,
                    xtol: float = 1e-6) -> tuple:
    """The value of one model key (in start's unit) that reproduces an observation.

    Parameters
    ----------
    model : WindModel
        The model to vary.
    key : str
        A numeric dotted model-file key, e.g. ``"star.luminosity"``.
    start, stop : Quantity, str or float
        The range, with a unit of the key's dimension (plain numbers for
        dimensionless keys).
    observation : Observation
        The measurement to reproduce.
    settings : LineSettings, optional
        For the line widths.
    num : int
        Values scanned (log-spaced when both ends are positive).
    xtol : float
        Relative tolerance of the refinement (in the scanned variable).

    Returns
    -------
    value : Quantity
        The key's value, in the unit of ``start``.
    predicted : float
        The prediction there [cm/s].
    scan : list of tuple
        ``(value, predicted - observed [cm/s])`` at the scanned points.

    Raises
    ------
    ModelError
        An unusable key or range, no solution in the range, or no value in
        the range that reproduces the observation (the message gives the
        range the models cover).

    Notes
    -----
    The scan finds a sign change of predicted - observed; Brent's method
    (scipy.optimize.brentq) then refines it.
    """
    from scipy.optimize import brentq

    from .registry import MODELS
    from .solve import solve
    from .sweep import apply_changes
    start, stop, unit = _match_range(MODELS[model.kind], key, start, stop)
    lo, hi = start.to_value(unit), stop.to_value(unit)
    log = lo > 0 and hi > 0

    def text(x):
        x = float(x)  # a plain float: np.float64 would be written as "np.float64(...)"
        return f"{x!r} {unit.to_string()}" if unit != u.dimensionless_unscaled else x

    def miss(s):
        x = math.exp(s) if log else s
        result = solve(apply_changes(model, {key: text(x)}))
        if not result.converged:
            return math.nan
        return predict(result, observation.quantity, settings) - observation.value

    grid = np.linspace(math.log(lo), math.log(hi), num) if log else np.linspace(lo, hi, num)
    values = [miss(s) for s in grid]
    scan = [(math.exp(s) if log else s, v) for s, v in zip(grid, values, strict=True)]
    root = _first_root(miss, grid, values, 0.0, xtol, brentq)
    if root is not None:
        s, f = root
        x = math.exp(s) if log else s
        return x * unit, f + observation.value, scan
    finite = [v for v in values if np.isfinite(v)]
    if not finite:
        raise ModelError(f"no model between {key} = {start} and {stop} has a solution")
    span = (min(finite) + observation.value, max(finite) + observation.value)
    raise ModelError(f"no value of {key} between {start} and {stop} reproduces "
                     f"{observation.quantity} = {observation.value / 1e5:.4g} km/s: the models "
                     f"give {span[0] / 1e5:.4g} to {span[1] / 1e5:.4g} km/s")


def _first_root(miss, grid, values, offset, xtol, brentq):
    """(s, miss(s)) of the first sign change of miss - offset along the scan, or None."""
    for (s0, f0), (s1, f1) in zip(zip(grid, values, strict=True),
                                  zip(grid[1:], values[1:], strict=True), strict=False):
        g0, g1 = f0 - offset, f1 - offset
        if np.isfinite(g0) and np.isfinite(g1) and (g0 == 0 or (g0 > 0) != (g1 > 0)):
            s = brentq(lambda t: miss(t) - offset, s0, s1, xtol=xtol * (1 + abs(s0)))
            return s, miss(s)
    return None


def match_interval(model: "WindModel", key: str, start: "u.Quantity | str | float",
                   stop: "u.Quantity | str | float", observation: Observation,
                   settings: "LineSettings | None" = None, num: int = 12,
                   xtol: float = 1e-6) -> dict:
    """The key's value that reproduces an observation, and the interval its +-sigma maps to.

    Like :func:`match_parameter`, and also the values that reproduce
    observed - sigma and observed + sigma (the first crossing of each along
    the scan; when the prediction is monotonic in the key, the interval
    between them is the one-sigma interval of the key).

    Parameters
    ----------
    model, key, start, stop, observation, settings, num, xtol
        As :func:`match_parameter`.

    Returns
    -------
    dict
        ``value`` (Quantity, start's unit), ``predicted`` [cm/s], ``low`` and
        ``high`` (Quantity; None where observed -+ sigma is not reached
        inside the range: the interval is open on that side), ``span``
        (lowest, highest prediction over the scan [cm/s]), ``scan``.

    Raises
    ------
    ModelError
        As :func:`match_parameter` (the range cannot contain the value).
    """
    from scipy.optimize import brentq

    from .registry import MODELS
    from .solve import solve
    from .sweep import apply_changes
    start_q, stop_q, unit = _match_range(MODELS[model.kind], key, start, stop)
    lo, hi = start_q.to_value(unit), stop_q.to_value(unit)
    log = lo > 0 and hi > 0
    cache = {}

    def text(x):
        x = float(x)
        return f"{x!r} {unit.to_string()}" if unit != u.dimensionless_unscaled else x

    def miss(s):
        if s not in cache:
            x = math.exp(s) if log else s
            result = solve(apply_changes(model, {key: text(x)}))
            cache[s] = (predict(result, observation.quantity, settings) - observation.value
                        if result.converged else math.nan)
        return cache[s]

    value, predicted, scan = match_parameter(model, key, start, stop, observation, settings,
                                             num, xtol)
    grid = np.linspace(math.log(lo), math.log(hi), num) if log else np.linspace(lo, hi, num)
    values = [v for _, v in scan]
    ends = []
    for offset in (-observation.uncertainty, observation.uncertainty):
        root = _first_root(miss, grid, values, offset, xtol, brentq)
        ends.append(None if root is None else (math.exp(root[0]) if log else root[0]) * unit)
    found = sorted((e for e in ends if e is not None), key=lambda q: q.value)
    low = high = None
    if len(found) == 2:
        low, high = found
    elif len(found) == 1:
        # one side reached: the other end of the interval is the end of the range
        # on the side away from the value
        if found[0].value < value.value:
            low = found[0]
        else:
            high = found[0]
    finite = [v for v in values if np.isfinite(v)]
    span = (min(finite) + observation.value, max(finite) + observation.value)
    return {"value": value, "predicted": predicted, "low": low, "high": high,
            "span": span, "scan": scan, "start": start_q, "stop": stop_q}


def _match_range(model_cls, key, start, stop):
    """(start, stop, unit) of a match range, checked as values of ``key`` (one-line
    errors naming --key, --from and --to)."""
    from ._units import plain
    from .sweep import _axis_spec
    valid = [k for k in model_cls.keys() if k not in ("name", "opacity.law")]
    if key not in valid:
        raise ModelError(f"--key {key}: not a key of a {model_cls.kind} model"
                         f"{nearest(key, valid)}")
    param = {p.key: p for p in model_cls.params().values()}.get(key)
    if param is not None and param.kind in (str, bool):
        raise ModelError(f"--key {key}: not a numeric key; match varies a number such as "
                         f"star.luminosity")
    read, cgs_unit = _axis_spec(model_cls, key, "--key")
    ends = []
    for option, given in (("--from", start), ("--to", stop)):
        value = given
        if cgs_unit is None and isinstance(given, str):  # a bare-number key
            try:
                value = float(given)
            except ValueError:
                raise ModelError(f"{option} \"{given}\": {key} is a plain number; give "
                                 f"one, e.g. 0.5") from None
        try:
            value = read(value)
        except ModelError as error:
            raise ModelError(f"{option} {plain(given)}: {error}") from None
        ends.append(value if isinstance(value, u.Quantity) else value * u.dimensionless_unscaled)
    start, stop = ends
    unit = start.unit
    if start.to_value(unit) == stop.to_value(unit):
        raise ModelError(f"--from and --to are both {plain(start)}: give a range")
    return start, stop, unit


def write_chi2_csv(path: str | Path, views: list, table: dict[str, np.ndarray],
                   chi2: np.ndarray) -> Path:
    """Write a sweep comparison as CSV: row, axis values, chi2.

    Parameters
    ----------
    path : str or Path
        The CSV file.
    views : list of AxisView
        :func:`windsolve.sweep.axis_views` of the sweep file; each axis is written
        in cgs, as in the sweep table, its unit in the header.
    table : dict of ndarray
        The sweep table (:func:`windsolve.sweep.read_sweep_table`).
    chi2 : ndarray
        chi^2 per row (docs/physics.md, eq. 31).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    OutputError
        The file cannot be written.
    """
    from .io import write_csv
    rows = [["row"] + [f"{v.key} [{v.cgs_unit}]" if v.cgs_unit else v.key for v in views]
            + ["chi2"]]
    rows += [[i] + [repr(float(table[v.key][i])) for v in views] + [repr(float(chi2[i]))]
             for i in range(len(chi2))]
    return write_csv(path, rows)


# -- comparisons that say what they compare, and how well -----------------------------

# Why a prediction can be undefined (NaN) for a converged model: one line a quantity,
# as docs/lines.md defines the widths.
UNDEFINED = {
    "terminal_velocity": "the model's summary has no finite terminal velocity",
    "fwhm": "no line flux outside the core radius (docs/lines.md)",
    "hwzi": "no line flux outside the core radius (docs/lines.md)",
    "edge_velocity": ("no P Cygni blue edge: v(r) falls outward outside the core radius, "
                      "or the trough never reaches edge_depth (docs/lines.md)"),
}


def read_observed_objects(path: str | Path,
                          object_name: str | None = None) -> dict[str, list[Observation]]:
    """Every object's observations, in file order (one answer per object).

    Parameters
    ----------
    path : str or Path
        An observed-widths CSV (module docstring).
    object_name : str, optional
        Only this object (a name the file does not hold is refused).

    Returns
    -------
    dict of str to list of Observation
        Object name -> its measurements, values in cm/s.

    Raises
    ------
    ModelError
        As :func:`read_observed`; an unknown ``object_name`` in one line.
    """
    if object_name is not None:
        return {object_name: read_observed(path, object_name)}
    out = {}
    for o in _read_all(Path(path)):
        out.setdefault(o.object, []).append(o)
    return out


@dataclass
class Comparison:
    """One object's measurements against every row of a sweep or family.

    Attributes
    ----------
    observations : list of Observation
        The object's measurements, in file order.
    predicted : numpy.ndarray
        (rows, measurements) predictions [cm/s]; NaN where undefined.
    residual : numpy.ndarray
        (rows, measurements) (predicted - observed) / sigma (dimensionless).
    used : numpy.ndarray
        Per measurement: predicted by at least one converged row (used).
    reasons : dict
        Measurement index -> why it is excluded (for all rows), or why some
        rows cannot predict it.
    converged : numpy.ndarray
        Per row: the model converged.
    compared : numpy.ndarray
        Per row: converged and every used measurement predicted.
    chi2 : numpy.ndarray
        Per row, over the used measurements (docs/physics.md, eq. 31); NaN
        for rows not compared.
    """

    observations: list
    predicted: np.ndarray
    residual: np.ndarray
    used: np.ndarray
    reasons: dict
    converged: np.ndarray
    compared: np.ndarray
    chi2: np.ndarray

    @property
    def incomplete(self) -> np.ndarray:
        """Converged rows that cannot predict some used measurement."""
        return self.converged & ~self.compared

    @property
    def n_used(self) -> int:
        """How many measurements enter chi^2."""
        return int(self.used.sum())

    def best(self) -> int:
        """Row of the lowest chi^2 (ValueError when no row was compared)."""
        if not self.compared.any():
            raise ValueError("no row compared")
        return int(np.nanargmin(np.where(self.compared, self.chi2, np.nan)))

    def counts(self) -> str:
        """One line: rows, measurements used and exclusions, counted separately."""
        n = len(self.converged)
        conv = int(self.converged.sum())
        text = (f"{n} rows: {conv} converged, {n - conv} not converged; "
                f"{int(self.compared.sum())} compared on {self.n_used} of "
                f"{len(self.observations)} measurements")
        if self.incomplete.any():
            text += f"; {int(self.incomplete.sum())} converged rows not compared (a used " \
                    f"measurement undefined there)"
        return text

    def reason_lines(self) -> list[str]:
        """One line per measurement excluded (everywhere or in some rows), with its reason."""
        out = []
        conv = self.converged
        for j, why in self.reasons.items():
            o = self.observations[j]
            undefined = int((conv & ~np.isfinite(self.predicted[:, j])).sum())
            where = ("excluded: no converged row predicts it" if not self.used[j]
                     else f"undefined in {undefined} converged rows")
            out.append(f"{o.label()} (file line {o.row}): {where} -- {why}")
        return out


def compare_table(table: dict[str, np.ndarray], observations: list[Observation],
                  reasons: dict[str, str] | None = None) -> Comparison:
    """Compare one object's measurements with every row of a sweep or family table.

    A measurement a converged row cannot predict (NaN, with its reason)
    excludes that measurement there, never makes the row "failed".  A
    measurement no converged row predicts is left out of chi^2 everywhere; a
    converged row that lacks a used measurement is not compared (chi^2 over
    fewer measurements is not comparable), and is counted as such.

    Parameters
    ----------
    table : dict of str to numpy.ndarray
        Columns in cgs: ``converged`` and each observed quantity [cm/s].
    observations : list of Observation
        One object's measurements.
    reasons : dict, optional
        Quantity -> why a NaN prediction is undefined (default
        :data:`UNDEFINED`).

    Returns
    -------
    Comparison
        Predictions, residuals, what was used and why, chi^2 per row.

    Raises
    ------
    ModelError
        The table has no column for an observed quantity (the file cannot
        predict it): one line saying how to get it.
    """
    reasons = dict(UNDEFINED, **(reasons or {}))
    conv = np.asarray(table["converged"], dtype=bool)
    n, m = len(conv), len(observations)
    pred = np.empty((n, m))
    for j, o in enumerate(observations):
        if o.quantity not in table:
            raise ModelError(f"{o.quantity} (observations line {o.row}) cannot be predicted "
                             f"from this file: it has no {o.quantity} column")
        pred[:, j] = table[o.quantity]
    value = np.array([o.value for o in observations])
    sigma = np.array([o.uncertainty for o in observations])
    z = (pred - value) / sigma
    finite = np.isfinite(pred) & conv[:, None]
    used = finite.any(axis=0)
    missing = conv[:, None] & ~np.isfinite(pred)
    why = {j: reasons[o.quantity] for j, o in enumerate(observations) if missing[:, j].any()}
    compared = conv & finite[:, used].all(axis=1) if used.any() else np.zeros(n, bool)
    chi2 = np.where(compared, np.sum(np.where(used, z, 0.0) ** 2, axis=1), np.nan)
    return Comparison(list(observations), pred, z, used, why, conv, compared, chi2)


# -- Delta chi^2 confidence regions ----------------------------------------------------

def delta_chi2_level(n_params: int, sigma: float) -> float:
    """Delta chi^2 bounding the region of ``sigma`` (Gaussian-equivalent) confidence.

    The region chi^2 <= chi^2_min + Delta, projected on ``n_params``
    parameters of interest, holds the true values with the probability a
    Gaussian gives within +-sigma (68.27 % for 1): Delta is the quantile of
    the chi^2 distribution with ``n_params`` degrees of freedom at that
    probability (Press et al., Numerical Recipes, 3rd ed., section 15.6.5;
    Avni 1976, ApJ 210, 642).

    Parameters
    ----------
    n_params : int
        Parameters of interest, >= 1.
    sigma : float
        The confidence as a number of Gaussian standard deviations, > 0.

    Returns
    -------
    float
        Delta chi^2 (dimensionless): 1, 4, 9 for one parameter; 2.30, 6.18,
        11.83 for two.

    Raises
    ------
    ValueError
        ``n_params`` < 1 or ``sigma`` <= 0.
    """
    from scipy.special import erf, gammaincinv
    if int(n_params) < 1 or not sigma > 0:
        raise ValueError("n_params >= 1 and sigma > 0")
    p = float(erf(sigma / math.sqrt(2.0)))
    return 2.0 * float(gammaincinv(0.5 * int(n_params), p))


@dataclass(frozen=True)
class Interval:
    """A confidence range of one axis (in the unit the sweep file used)."""

    key: str
    sigma: float
    low: float
    high: float
    unit: str
    at_low_edge: bool  # the region reaches the lowest value swept: a limit, not a range
    at_high_edge: bool
    points: int  # distinct axis values inside

    def text(self) -> str:
        """e.g. ``star.luminosity 1σ: 2.1e+06 to 2.6e+06 Lsun (upper edge of the sweep)``."""
        unit = f" {self.unit}" if self.unit else ""
        edge = [w for w, e in (("lowest", self.at_low_edge), ("highest", self.at_high_edge))
                if e]
        note = (f" (reaches the {' and '.join(edge)} value swept: a limit, widen the sweep)"
                if edge else "")
        if self.points == 1:
            note += " (one grid value: narrower than the grid spacing)"
        return f"{self.key} {self.sigma:g}σ: {self.low:.5g} to {self.high:.5g}{unit}{note}"


def confidence_intervals(comparison: Comparison, axes: dict[str, np.ndarray],
                         units: dict[str, str] | None = None, n_params: int = 1,
                         sigmas: tuple = (1, 2, 3)) -> list[Interval]:
    """Ranges of each axis inside the Delta chi^2 region (projection on that axis).

    The rows with chi^2 <= chi^2_min + Delta(n_params, sigma) are the region;
    its extent along an axis is the range printed (the profile-chi^2
    interval when ``n_params`` is 1; Press et al., Numerical Recipes, 3rd
    ed., section 15.6.5).

    Parameters
    ----------
    comparison : Comparison
        From :func:`compare_table`.
    axes : dict of str to numpy.ndarray
        Axis key -> value per row, in the unit to print.
    units : dict of str to str, optional
        Axis key -> unit text.
    n_params : int
        Parameters of interest (1, or 2 for a joint region).
    sigmas : tuple of float
        Confidence levels, in Gaussian sigma.

    Returns
    -------
    list of Interval
        Per sigma, per axis.
    """
    units = units or {}
    ok = comparison.compared
    if not ok.any():
        return []
    chi2 = comparison.chi2
    lo = float(np.min(chi2[ok]))
    out = []
    for s in sigmas:
        inside = ok & (chi2 <= lo + delta_chi2_level(n_params, s))
        for key, x in axes.items():
            xs = x[inside]
            all_x = x[ok]
            out.append(Interval(key, float(s), float(xs.min()), float(xs.max()),
                                units.get(key, ""), bool(xs.min() <= all_x.min()),
                                bool(xs.max() >= all_x.max()), int(np.unique(xs).size)))
    return out


def chi2_map(comparison: Comparison, x: np.ndarray, y: np.ndarray,
             sigmas: tuple = (1, 2, 3)) -> dict:
    """The profile chi^2 on the (x, y) plane and the 2-parameter Delta chi^2 levels.

    For drawing confidence contours on a chi^2 map: the minimum of chi^2 over
    every other axis at each distinct (x, y) pair (the profile), and
    chi^2_min + Delta(2, sigma) for each sigma.

    Parameters
    ----------
    comparison : Comparison
        From :func:`compare_table`.
    x, y : numpy.ndarray
        The two axes' values per row (any unit).
    sigmas : tuple of float
        Confidence levels, in Gaussian sigma.

    Returns
    -------
    dict
        ``x`` (distinct values, sorted), ``y`` (likewise), ``chi2`` (len(y),
        len(x)) with NaN where no row was compared, ``chi2_min``, ``levels``
        (sigma -> chi^2 value of the contour), ``n_params`` (2).
    """
    ok = comparison.compared
    xs, xi = np.unique(x, return_inverse=True)
    ys, yi = np.unique(y, return_inverse=True)
    grid = np.full((len(ys), len(xs)), np.inf)
    np.minimum.at(grid, (yi[ok], xi[ok]), comparison.chi2[ok])
    grid[np.isinf(grid)] = np.nan
    lo = float(np.nanmin(grid)) if ok.any() else math.nan
    return {"x": xs, "y": ys, "chi2": grid, "chi2_min": lo, "n_params": 2,
            "levels": {s: lo + delta_chi2_level(2, s) for s in sigmas}}


def write_comparison_csv(path: str | Path, comparison: Comparison,
                         axes: list[tuple[str, str, np.ndarray]],
                         table: dict[str, np.ndarray]) -> Path:
    """The chi^2 CSV of a sweep or family: one line per row.

    Columns: ``row``; each axis in the unit the sweep file used (header
    ``key [unit]``); ``mass_loss_rate [Msun/yr]``, ``terminal_velocity
    [km/s]``; per measurement its prediction [km/s] and residual [sigma];
    ``measurements_used``; ``chi2`` (empty where the row was not compared);
    ``status``.

    Parameters
    ----------
    path : str or Path
        The CSV file.
    comparison : Comparison
        From :func:`compare_table`.
    axes : list of (key, unit, values)
        The axes, values in ``unit``.
    table : dict of str to numpy.ndarray
        ``mass_loss_rate`` [g/s], ``terminal_velocity`` [cm/s], ``status``.

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    OutputError
        The file cannot be written.
    """
    from .io import write_csv
    msun_yr = float((u.Msun / u.yr).to(u.g / u.s))
    obs = comparison.observations
    labels = [f"{o.quantity}{'' if o.line in ('', '-') else '_' + o.line}_{o.row}"
              for o in obs]
    header = (["row"] + [f"{k} [{unit}]" if unit else k for k, unit, _ in axes]
              + ["mass_loss_rate [Msun/yr]", "terminal_velocity [km/s]"]
              + [f"predicted {lab} [km/s]" for lab in labels]
              + [f"residual {lab} [sigma]" for lab in labels]
              + ["measurements_used", "chi2", "status"])

    def num(x):
        x = float(x)
        return repr(x) if math.isfinite(x) else ""

    mdot = table["mass_loss_rate"] / msun_yr
    vinf = table["terminal_velocity"] / 1e5
    status = table.get("status")
    used_n = np.sum(np.isfinite(comparison.predicted) & comparison.used, axis=1)
    rows = [header]
    for i in range(len(comparison.chi2)):
        rows.append([i] + [num(v[i]) for _, _, v in axes] + [num(mdot[i]), num(vinf[i])]
                    + [num(p / 1e5) for p in comparison.predicted[i]]
                    + [num(z) for z in comparison.residual[i]]
                    + [int(used_n[i]) if comparison.converged[i] else 0,
                       num(comparison.chi2[i]), "" if status is None else str(status[i])])
    return write_csv(path, rows)


# -- sweep and family files as one kind of table -----------------------------------------

@dataclass
class Grid:
    """A sweep or family file read for comparison.

    Attributes
    ----------
    path : Path
        The file.
    kind : str
        ``"sweep"`` or ``"family"``.
    table : dict of str to numpy.ndarray
        ``converged``, ``status``, ``mass_loss_rate`` [g/s],
        ``terminal_velocity`` [cm/s] and the stored widths [cm/s].
    axes : list of tuple
        ``(key, unit, values, log)`` per axis, values in the unit the sweep
        file used (a family: its scan in K, Rsun or Msun/yr).
    settings : dict or None
        The line settings the widths were measured with (a sweep's
        ``[observables]``); None when the file holds no widths.
    """

    path: Path
    kind: str
    table: dict
    axes: list
    settings: dict | None
    family: object = None  # FamilyResult (a family)
    attrs: dict | None = None  # root attributes (a sweep)
    views: list | None = None  # AxisView per axis (a sweep)

    def cannot_predict(self) -> str:
        """How to get widths this file does not hold (for one-line refusals)."""
        if self.kind == "family":
            return ("a family file stores no line widths; compare it with terminal_velocity "
                    "only, or run a sweep with an [observables] table")
        return "run the sweep with an [observables] table so that its workers measure widths"


def read_grid(path: str | Path) -> Grid:
    """A sweep or family file as a :class:`Grid` (checked by its reader).

    Parameters
    ----------
    path : str or Path
        A sweep or family file.

    Returns
    -------
    Grid
        Its table, axes and stored line settings.

    Raises
    ------
    OutputError
        Not a windsolve file, or a damaged one (one line).
    ModelError
        A result file (no rows).
    """
    import json

    from .files import read_any_file
    path = Path(path)
    kind = read_any_file(path)
    if kind == "result":
        raise ModelError(f"{path}: a result file (one model), not a sweep or family file")
    if kind == "family":
        from .family import SCANS, FamilyResult
        fam = FamilyResult.from_hdf5(path)
        table = {"converged": fam.converged,
                 "status": np.array([m.status for m in fam.members]),
                 "mass_loss_rate": fam.column("mass_loss_rate"),
                 "terminal_velocity": fam.column("terminal_velocity"),
                 "photosphere_temperature": fam.column("photosphere_temperature")}
        axes = [(fam.scan, SCANS[fam.scan].to_string(), np.asarray(fam.values, float), True)]
        return Grid(path, "family", table, axes, None, family=fam)
    from .sweep import axis_views, read_sweep_table
    table, attrs = read_sweep_table(path)
    views = axis_views(path)
    axes = [(v.key, v.unit, table[v.key] * v.factor, v.log) for v in views]
    settings = attrs.get("observables")
    settings = json.loads(settings) if settings is not None else None
    return Grid(path, "sweep", table, axes, settings, attrs=attrs, views=views)


def settings_text(settings: "LineSettings", source: str) -> str:
    """One line naming every line setting a comparison used, and where it came from.

    Parameters
    ----------
    settings : LineSettings
        The settings.
    source : str
        Where they came from (e.g. ``"stored in the sweep file"``).

    Returns
    -------
    str
        ``line settings (SOURCE): emissivity ~ rho^2, occultation on, ...``.
    """
    res = settings.resolution
    res = "none" if res is None else (f"{res:g}" if isinstance(res, float) else str(res))
    return (f"line settings ({source}): emissivity ~ rho^{settings.emissivity_power}, "
            f"occultation {'on' if settings.occultation else 'off'}, turbulence "
            f"{settings.turbulence.to_value(u.km / u.s):g} km/s FWHM, resolution {res}, "
            f"HWZI at {settings.hwzi_fraction:g} of the peak, edge at depth "
            f"{settings.edge_depth:g}, line strength {settings.line_strength:g}, "
            f"{settings.n_velocity} velocity points")


def stored_settings(grid: Grid, given: dict) -> "LineSettings | None":
    """The line settings of a sweep's widths; refuse options that differ from them.

    Parameters
    ----------
    grid : Grid
        From :func:`read_grid`.
    given : dict
        Line options given on the command line (LineSettings keywords).

    Returns
    -------
    LineSettings or None
        The stored settings (None: the file holds no widths).

    Raises
    ------
    ModelError
        Options given that differ from the stored settings, or given for a
        file without widths (they would be ignored): one line.
    """
    from .lines import LineSettings
    if grid.settings is None:
        if given:
            raise ModelError(f"{grid.path}: line options ({', '.join(sorted(given))}) given, "
                             f"but this {grid.kind} file holds no line widths to apply them "
                             f"to; leave them out")
        return None
    stored = LineSettings(**grid.settings)
    if given:
        wanted = LineSettings(**dict(grid.settings, **given))
        if wanted.cgs != stored.cgs or wanted.emissivity_power != stored.emissivity_power:
            differ = ", ".join(f"{k} = {grid.settings.get(k, 'default')} stored, "
                               f"{given[k]} given" for k in given
                               if LineSettings(**dict(grid.settings, **{k: given[k]})).cgs
                               != stored.cgs)
            raise ModelError(f"{grid.path}: its widths were measured with other line settings "
                             f"({differ}); compare without these options, or run the sweep "
                             f"again with them in [observables]")
    return stored


def row_model(grid: Grid, row: int) -> "WindModel":
    """The complete model of one sweep or family row.

    Parameters
    ----------
    grid : Grid
        From :func:`read_grid`.
    row : int
        The row, 0 .. rows - 1.

    Returns
    -------
    WindModel
        The row's model: the sweep's base model with the row's axis values
        (a family: its stored model at the member's photosphere temperature).

    Raises
    ------
    ModelError
        No such row, or the file does not hold the base model.
    """
    n = len(grid.table["converged"])
    if not 0 <= row < n:
        raise ModelError(f"{grid.path}: no row {row}; the {grid.kind} has rows 0 to {n - 1}")
    if grid.kind == "family":
        fam = grid.family
        if fam.model is None:
            raise ModelError(f"{grid.path}: the family file holds no complete stored model "
                             f"(model_toml), so its rows cannot be written as model files")
        if fam.scan == "photosphere_temperature":
            T = float(fam.values[row])
        else:
            T = float(grid.table["photosphere_temperature"][row])
        if not math.isfinite(T):
            raise ModelError(f"{grid.path}: member {row} has no photosphere temperature "
                             f"({fam.members[row].status}): it was never solved")
        return fam.model.replace(photosphere_temperature=T * u.K)
    from .modelfile import model_from_dict
    from .sweep import apply_changes
    base = _sweep_base(grid)
    model = model_from_dict(base, source=f"{grid.path} (stored base model)")
    changes = {}
    for v in grid.views:
        x = float(grid.table[v.key][row])
        changes[v.key] = _exact_text(x, v) if v.cgs_unit else x
    return apply_changes(model, changes)


def _exact_text(x, view):
    """``x`` [cgs] as model-file text in the sweep file's unit when that reads back to
    the same float, else in the table's cgs unit (exact)."""
    if view.unit and view.unit != view.cgs_unit:
        shown = f"{x * view.factor!r} {view.unit}"
        try:
            if float(u.Quantity(shown).to_value(u.Unit(view.cgs_unit))) == x:
                return shown
        except (ValueError, TypeError, u.UnitsError):
            pass
    return f"{x!r} {view.cgs_unit}"


def _sweep_base(grid):
    """The base model (nested dicts) a sweep file was run with."""
    from .io import parse_toml
    from .modelfile import read_model_file
    attrs = grid.attrs
    stored = attrs.get("base_model_toml")
    if stored is not None:
        return parse_toml(str(stored), grid.path)
    text = attrs.get("sweep_toml")
    if text is None:
        raise ModelError(f"{grid.path}: the sweep file holds neither its base model nor its "
                         f"sweep file text")
    data = parse_toml(str(text), grid.path)
    if "model" in data:
        return data["model"]
    base = Path(str(data.get("sweep", {}).get("base", "")))
    if not base.is_absolute():
        base = Path(str(attrs.get("sweep_file", "."))).resolve().parent / base
    if not base.is_file():
        raise ModelError(f"{grid.path}: its base model {base} is gone (this sweep file was "
                         f"written before sweep files stored their base model); restore it "
                         f"or run the sweep again")
    return read_model_file(base)
