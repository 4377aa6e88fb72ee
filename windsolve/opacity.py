"""Opacity laws: the registry that names them, their parameters and units.

:data:`OPACITY_LAWS` drives the model-file validator, ``windsolve check`` and
the help text; adding a law means one kernel in :mod:`windsolve.core.opacity`
and one entry here.
"""

import difflib
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np

from . import tables
from ._units import format_quantity, plain, to_quantity
from .core import basics
from .core import opacity as kernels
from .errors import ModelError

__all__ = ["OPACITY_LAWS", "Opacity", "OpacityLaw", "LawParameter", "opacity_value"]

KRAMERS_UNIT = u.cm**5 * u.K**3.5 / u.g**2


@dataclass(frozen=True)
class LawParameter:
    """One parameter of an opacity law as written in the model file.

    ``unit`` is an astropy unit (dimensionless for plain numbers), or one of
    the types ``bool`` (true/false), ``str`` (a word) and ``Path`` (a file
    path, stored as an absolute path string so that resolved model files work
    from anywhere; a bare name of a shipped table, e.g. ``"GN93hz"``, names
    that table).
    """

    name: str
    unit: object  # astropy unit; dimensionless for plain numbers; bool; str; Path
    default: object  # value used when omitted; None means required
    doc: str
    positive: bool = False

    @property
    def is_quantity(self) -> bool:
        """True unless the parameter is a flag (``bool``) or a file path (``Path``)."""
        return self.unit not in (bool, Path, str)

    def read(self, value, where: str):
        """Check a value from the model file and return it in its stored form.

        Parameters
        ----------
        value : str, float, Quantity, bool or path
            As written (a number or a string with units, a flag, a path).
        where : str
            The key's place, for messages (e.g. ``"[opacity] amplitude"``).

        Returns
        -------
        Quantity, bool or str
            A Quantity in the value's own unit (checked against ``unit``), the flag,
            or an absolute path string.

        Raises
        ------
        ModelError
            Wrong type or unit, not finite, or not positive where it must be.
        """
        if self.unit is bool:
            if not isinstance(value, bool):
                raise ModelError(f"{where} = {plain(value)}: write true or false")
            return value
        if self.unit is Path:
            if not isinstance(value, (str, Path)) or not str(value).strip():
                raise ModelError(f"{where} = {plain(value)}: write the file's path as a quoted "
                                 f"string, e.g. \"tables/kappa.txt\"")
            shipped = tables.packaged_table(str(value))
            if shipped is not None:
                return str(shipped)
            return str(Path(value).expanduser().absolute())
        if self.unit is str:
            if not isinstance(value, str):
                raise ModelError(f"{where} = {plain(value)}: write a quoted string")
            if self.name == "format" and value not in tables.FORMATS:
                raise ModelError(f"{where} = \"{value}\" is not known"
                                 f"{nearest(value, tables.FORMATS)}; choose one of: "
                                 f"{', '.join(tables.FORMATS)}")
            return value
        q = to_quantity(value, self.unit, where, convert=False)
        if not np.isfinite(q.value):
            raise ModelError(f"{where} = {plain(value)}: must be finite")
        if self.positive and not q.value > 0:
            raise ModelError(f"{where} = {plain(value)}: must be positive")
        return q


@dataclass(frozen=True)
class OpacityLaw:
    """A named opacity law: kernel code, parameters and how to pack them."""

    name: str
    code: int
    formula: str
    parameters: tuple = ()
    # (cgs parameter values by name, X, Z) -> floats for kernel slots 2..7
    pack: object = field(default=lambda values, X, Z: ())
    # (cgs parameter values by name, X, Z) -> floats appended after slot 10, or None
    extra: object = field(default=lambda values, X, Z: None)


def _pack_kramers(p, X, Z):
    coeff = (p["free_free_coefficient"] * (1.0 - Z)
             + p["bound_free_coefficient"] * p["gaunt_guillotine_ratio"] * Z) * (1.0 + X)
    return (coeff,)


def _pack_bump(p, X, Z):
    return (p["amplitude"], p["reference_density"], p["density_exponent"],
            np.log10(p["peak_temperature"]), p["width_dex"])


def _table_where(p):
    return f"[opacity] path = \"{p['path']}\""


def _load(p, X, Z):
    # The file is read once per version and composition
    # (windsolve.tables.load_table caches it).
    return tables.load_table(p["path"], _table_where(p), p["format"], X, Z,
                             p["mixture"] or None)


def _pack_table(p, X, Z):
    # Table edges, the clamp flag and the holes flag.
    table, params, extra = _load(p, X, Z)
    return params[:4] + (1.0 if p["clamp"] else 0.0,) + params[5:]


def _table_block(p, X, Z):
    return _load(p, X, Z)[2]


OPACITY_LAWS = {law.name: law for law in (
    OpacityLaw(
        "electron_scattering", kernels.LAW_ELECTRON_SCATTERING,
        "kappa = kappa_es = sigma_T / (mu_e m_u) ~ 0.2 (1 + X) cm2/g (Thomson scattering, "
        "fully ionized)"),
    OpacityLaw(
        "kramers", kernels.LAW_KRAMERS,
        "kappa = kappa_es + (C_ff (1 - Z) + C_bf (g/t) Z) (1 + X) rho T^-3.5 (Kramers form)",
        (
            LawParameter("free_free_coefficient", KRAMERS_UNIT,
                         "3.68e22 cm5 K(7/2) / g2", "C_ff, free-free coefficient", True),
            LawParameter("bound_free_coefficient", KRAMERS_UNIT,
                         "4.34e25 cm5 K(7/2) / g2", "C_bf, bound-free coefficient", True),
            LawParameter("gaunt_guillotine_ratio", u.dimensionless_unscaled, 1.0,
                         "g_bf / t, Gaunt over guillotine factor multiplying C_bf", True),
        ),
        _pack_kramers),
    OpacityLaw(
        "bump", kernels.LAW_BUMP,
        "kappa = kappa_es [1 + A (rho/rho_ref)^s exp(-(log T - log T_b)^2 / (2 w^2))]",
        (
            LawParameter("amplitude", u.dimensionless_unscaled, None,
                         "A, peak height in units of kappa_es"),
            LawParameter("peak_temperature", u.K, None, "T_b, temperature of the peak", True),
            LawParameter("width_dex", u.dimensionless_unscaled, None,
                         "w, Gaussian width in log10 T", True),
            LawParameter("density_exponent", u.dimensionless_unscaled, 0.0,
                         "s, density dependence of the peak"),
            LawParameter("reference_density", u.g / u.cm**3, "1e-10 g / cm3",
                         "rho_ref, density at which the peak height is A", True),
        ),
        _pack_bump),
    OpacityLaw(
        "table", kernels.LAW_TABLE,
        "log10 kappa from a table of log10 T and log10 R = log10(rho / T6^3), "
        "bicubic-spline interpolated",
        (
            LawParameter("path", Path, None,
                         "table file: text matrix or HDF5 (layout: windsolve.tables); "
                         "a relative path is taken from the model file's folder"),
            LawParameter("clamp", bool, False,
                         "outside the table use the nearest edge value instead of stopping"),
            LawParameter("format", str, "auto",
                         "the file's layout: auto (from its content), text, hdf5 or opal"),
            LawParameter("mixture", str, "",
                         "OPAL files: the metal mixture the model needs (checked against "
                         "the file's, e.g. \"G&N'93 Solar\"); empty: the file's"),
        ),
        _pack_table, _table_block),
)}


def nearest(word: str, choices) -> str:
    """A hint naming the closest of ``choices`` to a mistyped word.

    Parameters
    ----------
    word : str
        What was written.
    choices : iterable of str
        The valid words.

    Returns
    -------
    str
        ``' (did you mean "x"?)'``, or ``''`` when nothing is close.
    """
    match = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f' (did you mean "{match[0]}"?)' if match else ""


def _check_bump(values):
    """kappa = kappa_es [1 + A (rho/rho_ref)^s G] stays positive at every density only for
    A >= 0, or for -1 < A < 0 when s = 0 (a dip)."""
    A = float(values["amplitude"].value)
    s = float(values["density_exponent"].value)
    if A < 0 and (s != 0 or A <= -1):
        need = "amplitude > -1 (a dip) or >= 0" if s == 0 else "amplitude >= 0"
        raise ModelError(f"[opacity] amplitude = {plain(A)} with density_exponent = "
                         f"{plain(s)} makes the opacity negative "
                         f"{'at the peak' if s == 0 else 'at high density'}; the bump law "
                         f"needs {need}")


@dataclass(frozen=True)
class Opacity:
    """An opacity law by name with its parameters (Quantities, cgs).

    Build from keywords, e.g. ``Opacity("bump", amplitude=4,
    peak_temperature="1.8e5 K", width_dex=0.1)``; omitted parameters take the
    registry's defaults.

    Parameters
    ----------
    law : str
        ``"electron_scattering"`` (docs/physics.md, eq. 5), ``"kramers"``
        (eq. 6), ``"bump"`` (eq. 7) or ``"table"`` (eq. 8).
    params : dict, optional
        Parameter values by name; merged with ``**kwargs``.
    **kwargs
        The law's parameters (:data:`OPACITY_LAWS` lists them with units):
        kramers: ``free_free_coefficient`` and ``bound_free_coefficient``
        [cm5 K(7/2) / g2], ``gaunt_guillotine_ratio`` [dimensionless]; bump:
        ``amplitude`` [dimensionless], ``peak_temperature`` [K],
        ``width_dex`` [dex], ``density_exponent`` [dimensionless],
        ``reference_density`` [g/cm3]; table: ``path`` (text or HDF5 file),
        ``clamp`` (bool).  Dimensioned values as Quantities or strings.

    Attributes
    ----------
    law : str
        The law's name.
    params : dict
        Every parameter of the law (defaults filled in): Quantities in the
        unit given, paths as absolute strings, flags as bools.

    Raises
    ------
    ModelError
        An unknown law or parameter (the message suggests the nearest name),
        a missing required parameter, a value of the wrong dimension, or a
        bump whose opacity would be negative.

    References
    ----------
    docs/physics.md, section 2 (eqs. 5-8); porosity (eqs. 9, 10) is set on
    the model, not here.
    """

    law: str = "electron_scattering"
    params: dict = field(default_factory=dict)

    def __init__(self, law: str = "electron_scattering", params: dict | None = None,
                 **kwargs):
        if not isinstance(law, str):
            raise ModelError(f"[opacity] law = {plain(law)}: write the law's name as a quoted "
                             f"string, one of: {', '.join(OPACITY_LAWS)}")
        if law not in OPACITY_LAWS:
            raise ModelError(f"[opacity] law = \"{law}\" is not known{nearest(law, OPACITY_LAWS)}; "
                             f"choose one of: {', '.join(OPACITY_LAWS)}")
        spec = OPACITY_LAWS[law]
        given = dict(params or {}, **kwargs)
        allowed = {p.name for p in spec.parameters}
        for key in given:
            if key not in allowed:
                hint = nearest(key, allowed) or (
                    f"; the {law} law takes {', '.join(sorted(allowed))}" if allowed
                    else f"; the {law} law takes no parameters")
                raise ModelError(f"[opacity] unknown key \"{key}\"{hint}")
        values = {}
        for p in spec.parameters:
            where = f"[opacity] {p.name}"
            if p.name in given:
                values[p.name] = p.read(given[p.name], where)
            elif p.default is None:
                raise ModelError(f"{where} is required by the {law} law ({p.doc})")
            else:
                values[p.name] = p.read(p.default, where)
        if law == "bump":
            _check_bump(values)
        object.__setattr__(self, "law", law)
        object.__setattr__(self, "params", values)

    def cgs(self) -> dict:
        """Parameter values by name: Quantities as plain floats in cgs; paths
        (absolute, as strings) and flags as they are."""
        spec = {p.name: p for p in OPACITY_LAWS[self.law].parameters}
        return {k: float(q.to_value(spec[k].unit)) if spec[k].is_quantity else q
                for k, q in self.params.items()}

    @property
    def formula(self) -> str:
        """The law's formula as one line of text (from :data:`OPACITY_LAWS`)."""
        return OPACITY_LAWS[self.law].formula

    def kernel_vector(self, X: float, Z: float,
                      porosity: tuple = (0.0, 1.0, 0.0)) -> np.ndarray:
        """The flat float vector ``O`` the kernels take (see core.opacity).

        For the table law this reads and checks the file (once per version
        of the file; see :func:`windsolve.tables.load_table`).

        Parameters
        ----------
        X, Z : float
            Hydrogen and metal mass fractions [dimensionless].
        porosity : tuple of float
            (h0 [cm], R0 [cm], q [dimensionless]) of docs/physics.md, eq. 10;
            h0 = 0 for no porosity.

        Returns
        -------
        ndarray
            The packed vector (:func:`windsolve.core.opacity.pack`).

        Raises
        ------
        ModelError
            A table file is missing or malformed (one line naming it).
        """
        spec = OPACITY_LAWS[self.law]
        kes = basics.electron_scattering_opacity(X, Z)
        values = self.cgs()
        return kernels.pack(spec.code, kes, spec.pack(values, X, Z), porosity,
                            spec.extra(values, X, Z))

    def to_toml(self) -> dict:
        """The ``[opacity]`` table, every value written out."""
        table = {"law": self.law}
        for name, q in self.params.items():
            if not isinstance(q, u.Quantity):
                table[name] = q  # absolute path string, or a flag
                continue
            dimensionless = q.unit == u.dimensionless_unscaled
            table[name] = float(q.value) if dimensionless else format_quantity(q)
        return table


def opacity_value(opacity: Opacity, density: u.Quantity | str,
                  temperature: u.Quantity | str, X: float = 0.7,
                  Z: float = 0.02) -> u.Quantity:
    """kappa(rho, T) of ``opacity`` (an :class:`Opacity`), no porosity [cm2/g].

    Parameters
    ----------
    opacity : Opacity
        The law and its parameters.
    density : Quantity or str [mass / volume]
        rho, e.g. ``"1e-10 g/cm3"``.
    temperature : Quantity or str [temperature]
        T, e.g. ``"1e5 K"``.
    X, Z : float
        Hydrogen and metal mass fractions (dimensionless), for kappa_es
        (docs/physics.md, eqs. 1 and 5) and the Kramers coefficient.

    Returns
    -------
    Quantity [cm2 / g]
        kappa; NaN outside an unclamped table.

    Raises
    ------
    ModelError
        A value without a unit or of the wrong dimension; an unreadable table.

    Notes
    -----
    Kernel twin: ``opacity_value.lite(O, rho, T)`` with ``O`` from
    :meth:`Opacity.kernel_vector`.

    References
    ----------
    docs/physics.md, eqs. 5-8.
    """
    rho = to_quantity(density, u.g / u.cm**3, "density").value
    T = to_quantity(temperature, u.K, "temperature").value
    O = opacity.kernel_vector(X, Z)
    return kernels.opacity(O, float(rho), float(T)) << u.cm**2 / u.g


opacity_value.lite = kernels.opacity
