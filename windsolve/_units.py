"""Reading values with units: the only place strings become Quantities."""

import numbers

import astropy.units as u

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
    """A sample value with a unit of the same physical type as ``unit``."""
    unit = u.Unit(unit)
    for ref, _, example in EXAMPLES:
        if unit.is_equivalent(ref):
            return example
    return f"1 {unit.to_string()}"


def kind_of(unit):
    """Plain name of the physical type of ``unit`` ("speed", "luminosity")."""
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


def to_quantity(value, unit, where, convert=True):
    """Return ``value`` as a Quantity in ``unit`` (cgs), or raise ModelError.

    With ``convert=False`` the Quantity keeps the unit it was written in
    (after the dimension check), so that resolved model files stay readable.

    ``value`` may be a Quantity, a string astropy parses ("1.2 Msun"), or —
    only when ``unit`` is dimensionless — a plain number.  ``where`` names the
    setting in messages (e.g. ``"[star] mass"``).
    """
    unit = u.Unit(unit)
    if isinstance(value, bool):
        raise ModelError(f"{where} = {value}: expected a {kind_of(unit)}, "
                         f"e.g. \"{example_for(unit)}\"")
    if isinstance(value, u.Quantity):
        q = value
    elif isinstance(value, str):
        q = _PARSED.get(value)
        if q is None:
            try:
                q = u.Quantity(value)
            except (TypeError, ValueError):
                raise ModelError(f"{where} = \"{value}\" is not a number with a unit; "
                                 f"write e.g. \"{example_for(unit)}\"") from None
            if len(_PARSED) >= PARSED_CACHE_SIZE:
                _PARSED.clear()
            _PARSED[value] = q
    elif isinstance(value, numbers.Real):
        if unit == u.dimensionless_unscaled:
            q = value * u.dimensionless_unscaled
        else:
            raise ModelError(f"{where} = {value} has no unit; write it with one, "
                             f"e.g. \"{value} {example_for(unit).split(' ', 1)[1]}\"")
    else:
        raise ModelError(f"{where} = {value!r}: expected a {kind_of(unit)} "
                         f"such as \"{example_for(unit)}\"")
    if (q.unit == u.dimensionless_unscaled and unit != u.dimensionless_unscaled
            and not isinstance(value, u.Quantity)):
        raise ModelError(f"{where} = \"{value}\" has no unit; write it with one, "
                         f"e.g. \"{example_for(unit)}\"")
    if not q.unit.is_equivalent(unit):
        raise ModelError(f"{where} = \"{value}\" is a {kind_of(q.unit)}, but a {kind_of(unit)} "
                         f"is needed, e.g. \"{example_for(unit)}\"")
    if not q.isscalar:
        raise ModelError(f"{where} must be a single value, not an array")
    return q.to(unit) if convert else q


def to_cgs(value, unit, where):
    """Plain float in ``unit`` (the kernels' cgs) from anything ``to_quantity`` takes."""
    return float(to_quantity(value, unit, where).to_value(unit))


def format_quantity(q):
    """A string astropy parses back to the same value ("6.957e+10 cm")."""
    unit = q.unit.to_string()
    return f"{float(q.value)!r} {unit}".strip() if unit else repr(float(q.value))
