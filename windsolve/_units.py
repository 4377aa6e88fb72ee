"""Reading values with units: the only place strings become Quantities."""

import math
import numbers

import astropy.units as u
import numpy as np

from .errors import ModelError

# Plain names and example spellings used in error messages.
EXAMPLES = (
    (u.g, "mass", "1.2 Msun"),
    (u.cm, "length", "25 Rsun"),
    (u.erg / u.s, "luminosity", "3e4 Lsun"),
    (u.cm / u.s, "speed", "25 km/s"),
    (u.g / u.cm**3, "density", "1e-9 g/cm3"),
    (u.K, "temperature", "3e4 K"),
)


def example_for(unit):
    """A sample value with a unit of the same physical type as ``unit``.

    Parameters
    ----------
    unit : astropy unit or str
        The unit wanted.

    Returns
    -------
    str
        E.g. ``"25 km/s"`` for a speed; ``"1 <unit>"`` for a type without an example.
    """
    unit = u.Unit(unit)
    for ref, _, example in EXAMPLES:
        if unit.is_equivalent(ref):
            return example
    return f"1 {unit.to_string()}"


def kind_of(unit):
    """Plain name of the physical type of ``unit`` ("speed", "luminosity").

    Parameters
    ----------
    unit : astropy unit or str
        Any unit.

    Returns
    -------
    str
        ``"bare number"`` for dimensionless, a name from the examples, or
        ``"quantity in <unit>"``.
    """
    unit = u.Unit(unit)
    if unit == u.dimensionless_unscaled:
        return "bare number"
    for ref, name, _ in EXAMPLES:
        if unit.is_equivalent(ref):
            return name
    return f"quantity in {unit.to_string()}"


# Parsed value strings: a sweep's rows repeat the same few axis values, and
# parsing one costs tens of microseconds.  (Quantities are never changed in
# place here, so sharing them is safe.)
_PARSED = {}
PARSED_CACHE_SIZE = 4096


def plain(value):
    """``value`` as an error message shows it: as it would be written in a model file.

    Numbers plainly (``0.5``, never ``np.float64(0.5)``), Quantities as
    ``50.0 solMass``, strings quoted, flags as true/false, lists and tables in
    TOML's spelling.

    Parameters
    ----------
    value : object
        Any value a model file or keyword may hold.

    Returns
    -------
    str
    """
    if isinstance(value, u.Quantity):
        if value.isscalar:
            return format_quantity(value)
        return f"{plain(value.value.tolist())} {value.unit.to_string()}".strip()
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if isinstance(value, numbers.Real):
        return repr(float(value))
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, np.ndarray):
        return plain(value.tolist())
    if isinstance(value, list | tuple):
        return "[" + ", ".join(plain(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {plain(v)}" for k, v in value.items()) + "}"
    return str(value)


# id(written unit), id(wanted unit) -> (written, wanted, factor).  Keyed by identity:
# comparing astropy units costs microseconds, and parsed values share unit objects.
_SCALES = {}


def unit_scale(have, want):
    """The factor that turns a number in unit ``have`` into one in ``want`` (cached).

    Parameters
    ----------
    have, want : astropy unit
        Equivalent units; the cache is keyed by the unit objects' identity.

    Returns
    -------
    float

    Raises
    ------
    astropy.units.UnitConversionError
        The units are not equivalent.
    """
    entry = _SCALES.get((id(have), id(want)))
    if entry is None or entry[0] is not have or entry[1] is not want:
        entry = (have, want, float(have.to(want)))
        if len(_SCALES) >= PARSED_CACHE_SIZE:
            _SCALES.clear()
        _SCALES[(id(have), id(want))] = entry
    return entry[2]


def fast_cgs(q, unit):
    """float(q in ``unit``) for a scalar Quantity, without astropy's per-call cost.

    Parameters
    ----------
    q : Quantity
        A scalar Quantity.
    unit : astropy unit
        A unit equivalent to ``q``'s (usually cgs).

    Returns
    -------
    float
    """
    return float(q.value) * unit_scale(q.unit, unit)


def check_cgs_range(q, unit, where):
    """Refuse a value whose form in ``unit`` over- or underflows a double.

    Parameters
    ----------
    q : Quantity
        A scalar Quantity.
    unit : astropy unit
        The (cgs) unit it will be computed in.
    where : str
        The setting's name, for the message (e.g. ``"[star] mass"``).

    Raises
    ------
    ModelError
        ``q`` is finite but not in ``unit``, or nonzero but 0 in ``unit``.
    """
    number = float(q.value)
    value = number * unit_scale(q.unit, unit)
    if math.isfinite(number) and not math.isfinite(value):
        raise ModelError(f"{where} = {plain(q)} is out of range: in cgs units "
                         f"({unit.to_string() or 'a bare number'}) it overflows double "
                         f"precision (above 1.8e308); check the number and its unit")
    if number != 0.0 and value == 0.0:
        raise ModelError(f"{where} = {plain(q)} is out of range: in cgs units "
                         f"({unit.to_string()}) it underflows to 0; check the number and "
                         f"its unit")


def to_quantity(value, unit, where, convert=True):
    """Return ``value`` as a Quantity in ``unit`` (cgs), or raise ModelError.

    With ``convert=False`` the Quantity keeps the unit it was written in
    (after the dimension check), so that resolved model files stay readable.

    ``value`` may be a Quantity, a string astropy parses ("1.2 Msun"), or —
    only when ``unit`` is dimensionless — a plain number.  ``where`` names the
    setting in messages (e.g. ``"[star] mass"``).

    Parameters
    ----------
    value : Quantity, str or float
        The value as given.
    unit : astropy unit or str
        The unit (physical type) wanted, usually cgs.
    where : str
        The setting's name, for messages.
    convert : bool
        Return the Quantity in ``unit`` (True) or in the unit it was written in.

    Returns
    -------
    Quantity
        A scalar Quantity of ``unit``'s physical type.

    Raises
    ------
    ModelError
        Not a number (with a unit), the wrong physical type, no unit where one
        is needed, an array, or out of double range in ``unit``.
    """
    unit = u.Unit(unit)
    if isinstance(value, bool | np.bool_):
        raise ModelError(f"{where} = {plain(value)}: expected a {kind_of(unit)}, "
                         f"e.g. {_example(unit)}")
    if isinstance(value, u.Quantity):
        q = value
    elif isinstance(value, str):
        q = _PARSED.get(value)
        if q is None:
            try:
                q = u.Quantity(value)
            except (TypeError, ValueError):
                what = ("not a number" if unit == u.dimensionless_unscaled
                        else "not a number with a unit")
                raise ModelError(f"{where} = \"{value}\" is {what}; write e.g. "
                                 f"{_example(unit)}") from None
            if len(_PARSED) >= PARSED_CACHE_SIZE:
                _PARSED.clear()
            _PARSED[value] = q
    elif isinstance(value, numbers.Real):
        if unit == u.dimensionless_unscaled:
            q = value * u.dimensionless_unscaled
        else:
            raise ModelError(f"{where} = {plain(value)} has no unit; write it with one, "
                             f"e.g. \"{plain(value)} {example_for(unit).split(' ', 1)[1]}\"")
    else:
        raise ModelError(f"{where} = {plain(value)}: expected a {kind_of(unit)} "
                         f"such as {_example(unit)}")
    if (q.unit == u.dimensionless_unscaled and unit != u.dimensionless_unscaled
            and not isinstance(value, u.Quantity)):
        raise ModelError(f"{where} = \"{value}\" has no unit; write it with one, "
                         f"e.g. \"{example_for(unit)}\"")
    if not q.unit.is_equivalent(unit):
        raise ModelError(f"{where} = \"{value}\" is a {kind_of(q.unit)}, but a {kind_of(unit)} "
                         f"is needed, e.g. \"{example_for(unit)}\"")
    if not q.isscalar:
        raise ModelError(f"{where} must be a single value, not an array")
    check_cgs_range(q, unit, where)
    return q.to(unit) if convert else q


def _example(unit):
    """An example value as a model file writes it: quoted with a unit, or a bare number."""
    if unit == u.dimensionless_unscaled:
        return "1.5"
    return f"\"{example_for(unit)}\""


def to_cgs(value, unit, where):
    """Plain float in ``unit`` (the kernels' cgs) from anything ``to_quantity`` takes.

    Parameters
    ----------
    value : Quantity, str or float
        The value as given.
    unit : astropy unit or str
        The unit of the result.
    where : str
        The setting's name, for messages.

    Returns
    -------
    float

    Raises
    ------
    ModelError
        As :func:`to_quantity`.
    """
    return float(to_quantity(value, unit, where).to_value(unit))


def format_quantity(q):
    """A string astropy parses back to the same value ("6.957e+10 cm").

    Parameters
    ----------
    q : Quantity
        A scalar Quantity.

    Returns
    -------
    str
        The value's repr and its unit (the bare number when dimensionless).
    """
    unit = q.unit.to_string()
    return f"{float(q.value)!r} {unit}".strip() if unit else repr(float(q.value))


# Units people read summaries in (a quantity of none of these physical types stays in
# its cgs unit): mass-loss rate, speed, length, luminosity, mass.
READING_UNITS = (u.Msun / u.yr, u.km / u.s, u.Rsun, u.Lsun, u.Msun)


def chosen_units(model=None, shown=()):
    """A function giving, for a cgs unit, the unit the user chose for that physical type.

    The user's choices are, in order: the units of ``shown`` (e.g. a sweep's
    axes as its sweep file wrote them), then the units of the model's fields
    in declaration order (``star.radius = "100 Rsun"`` makes lengths Rsun),
    then :data:`READING_UNITS`; a unit of no chosen physical type is kept.
    Dimensionless units are never replaced.

    Parameters
    ----------
    model : WindModel or None
        The model whose field units count (its Quantity fields).
    shown : iterable of Unit or str
        Units chosen first.

    Returns
    -------
    callable
        ``pick(cgs_unit) -> Unit``, a unit equivalent to ``cgs_unit``.
    """
    prefs = []
    for unit in shown:
        try:
            prefs.append(u.Unit(unit))
        except (ValueError, TypeError):
            continue
    if model is not None:
        for name in model.params():
            value = getattr(model, name, None)
            if isinstance(value, u.Quantity):
                prefs.append(value.unit)
    prefs += list(READING_UNITS)
    prefs = [p for p in prefs if p.physical_type != "dimensionless"]

    def pick(cgs_unit):
        cgs_unit = u.Unit(cgs_unit)
        if cgs_unit.physical_type == "dimensionless":
            return cgs_unit
        for unit in prefs:
            if unit.physical_type == cgs_unit.physical_type:
                return unit
        return cgs_unit

    return pick


def html_summary(title, rows):
    """An HTML table (for notebooks' ``_repr_html_``): a title, then quantity, value, unit.

    Parameters
    ----------
    title : str
        The caption (escaped).
    rows : iterable of (str, object)
        Label and value: a Quantity shows its value and unit, anything else as text.

    Returns
    -------
    str
        ``<table>...</table>``.
    """
    from html import escape
    out = [f"<table><caption>{escape(str(title))}</caption>",
           "<tr><th>quantity</th><th>value</th><th>unit</th></tr>"]
    for label, value in rows:
        if isinstance(value, u.Quantity):
            text, unit = f"{float(value.value):.6g}", value.unit.to_string()
        else:
            text, unit = str(value), ""
        out.append(f"<tr><td>{escape(str(label))}</td><td>{escape(text)}</td>"
                   f"<td>{escape(unit)}</td></tr>")
    out.append("</table>")
    return "\n".join(out)
