"""Observed widths: a CSV format of our own, comparison with models, chi^2 over sweeps.

Observed-widths file (CSV, one measurement a row, ``#`` comment lines allowed)::

    object,quantity,line,value,uncertainty,unit
    Calder Var A (invented),terminal_velocity,-,450,40,km/s
    Calder Var A (invented),fwhm,H-alpha,510,50,km/s

``quantity`` is one of :data:`QUANTITIES` -- ``terminal_velocity`` (the
model's summary value), ``fwhm``, ``hwzi`` and ``edge_velocity`` (measured
on the model's synthetic line, :mod:`windsolve.lines`; an edge velocity is
negative, blue-shifted).  ``line`` is a free label; ``uncertainty`` is one
standard deviation in the same unit; ``unit`` is any speed astropy reads.

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

__all__ = ["QUANTITIES", "Observation", "read_observed", "predict", "compare_result",
           "sweep_chi2", "match_parameter"]

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
    for (s0, f0), (s1, f1) in zip(zip(grid, values, strict=True),
                                  zip(grid[1:], values[1:], strict=True), strict=False):
        if np.isfinite(f0) and np.isfinite(f1) and (f0 == 0 or (f0 > 0) != (f1 > 0)):
            s = brentq(miss, s0, s1, xtol=xtol * (1 + abs(s0)))
            x = math.exp(s) if log else s
            return x * unit, miss(s) + observation.value, scan
    finite = [v for v in values if np.isfinite(v)]
    if not finite:
        raise ModelError(f"no model between {key} = {start} and {stop} has a solution")
    span = (min(finite) + observation.value, max(finite) + observation.value)
    raise ModelError(f"no value of {key} between {start} and {stop} reproduces "
                     f"{observation.quantity} = {observation.value / 1e5:.4g} km/s: the models "
                     f"give {span[0] / 1e5:.4g} to {span[1] / 1e5:.4g} km/s")


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
