"""Wind models as frozen dataclasses: one declaration per parameter.

Each field declares, once, its key in the model file, its unit, its default
and its check (:func:`param`).  The model-file reader, the resolved-model
writer, ``windsolve check`` and sweeps all read these declarations.  Values
are stored as astropy Quantities in cgs units (plain floats for fractions
and flags); kernels get plain floats from :meth:`WindModel.kernel_arrays`.

Build a model from keywords (strings with units or Quantities)::

    >>> from windsolve import IsothermalWind
    >>> m = IsothermalWind(mass="50 Msun", radius="100 Rsun", luminosity="4e6 Lsun",
    ...                    sound_speed="20 km/s", base_density="1e-9 g/cm3")

and variants with :meth:`WindModel.replace`.
"""

import dataclasses
import math
import threading
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import astropy.units as u
import numpy as np

from ._units import fast_cgs, format_quantity, plain, to_quantity
from .core import basics
from .core import diffusion as diff_kernels
from .core import isothermal as iso_kernels
from .core.constants import C_LIGHT, K_B, M_U, R_SUN, SIGMA_SB, G
from .errors import ModelError
from .opacity import Opacity, nearest
from .physics import check_composition

__all__ = ["WindModel", "IsothermalWind", "DiffusionWind", "Param", "param"]

REQUIRED = object()
RHO = u.g / u.cm**3  # unit objects made once: fast_cgs caches by identity
LUM = u.erg / u.s


@dataclass(frozen=True)
class Param:
    """Declaration of one model parameter (see :func:`param`)."""

    key: str  # dotted key in the model file, e.g. "star.mass"
    kind: object  # an astropy unit, or float, bool, str
    doc: str
    default: object = REQUIRED
    check: str = ""  # "", "positive", "nonnegative", "fraction", "rtol"

    @property
    def section(self):
        return self.key.rpartition(".")[0]

    @property
    def name(self):
        return self.key.rpartition(".")[2]

    @property
    def where(self):
        return f"[{self.section}] {self.name}" if self.section else self.name

    def read(self, value):
        """Convert and check one value; raises ModelError naming the key."""
        where = self.where
        if self.kind is bool:
            if not isinstance(value, bool):
                raise ModelError(f"{where} = {plain(value)}: write true or false")
            return value
        if self.kind is str:
            if not isinstance(value, str):
                raise ModelError(f"{where} = {plain(value)}: write a quoted string")
            return value
        if self.kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ModelError(f"{where} = {plain(value)}: write a plain number")
            value = float(value)
            number = value
        else:
            value = to_quantity(value, self.kind, where, convert=False)
            number = float(value.value)
        if not math.isfinite(number):
            raise ModelError(f"{where} = {plain(value)}: must be finite")
        if self.check == "positive" and not number > 0:
            raise ModelError(f"{where} = {format_value(value)}: must be positive")
        if self.check == "nonnegative" and not number >= 0:
            raise ModelError(f"{where} = {format_value(value)}: must not be negative")
        if self.check == "fraction" and not 0.0 <= number <= 1.0:
            raise ModelError(f"{where} = {plain(number)}: a mass fraction lies between 0 and 1")
        if self.check == "rtol" and not 1e-13 <= number <= 1e-3:
            raise ModelError(f"{where} = {plain(number)}: choose a relative tolerance "
                             f"between 1e-13 and 1e-3 (1e-8 is the default)")
        return value

    def cgs(self, value):
        """Plain float in the declared (cgs) unit."""
        if isinstance(value, u.Quantity):
            return float(value.to_value(self.kind))
        return float(value)

    def dump(self, value):
        """Value as written in a model file."""
        if isinstance(value, u.Quantity):
            return format_quantity(value)
        return value


def format_value(value):
    return plain(value)


def param(key, kind, doc, default=REQUIRED, check=""):
    """A dataclass field that declares a model-file parameter."""
    meta = {"param": Param(key, kind, doc, default, check)}
    return field(default=None, metadata=meta)


# The fields WindModel.replace copies unchanged from a checked model (per
# thread: dask workers may build models in several threads at once).
_REPLACING = threading.local()


class WindModel:
    """Shared machinery of the model dataclasses (not a model itself)."""

    kind = ""  # the model file's top-level ``model`` value
    sections = ()  # tables the model file may have

    # -- declarations -----------------------------------------------------
    @classmethod
    def params(cls):
        """``{field name: Param}`` for every declared parameter (built once per class;
        do not change it)."""
        found = cls.__dict__.get("_param_declarations")
        if found is None:
            found = {f.name: f.metadata["param"] for f in dataclasses.fields(cls)
                     if "param" in f.metadata}
            cls._param_declarations = found
        return found

    @classmethod
    def keys(cls) -> list[str]:
        """Every dotted model-file key this model accepts."""
        keys = [p.key for p in cls.params().values()]
        keys += ["opacity.law"] + [f"opacity.{p}" for p in cls.opacity_parameter_names()]
        return keys

    @staticmethod
    def opacity_parameter_names():
        from .opacity import OPACITY_LAWS
        return sorted({p.name for law in OPACITY_LAWS.values() for p in law.parameters})

    # -- construction -----------------------------------------------------
    def _read_fields(self):
        """Convert every declared field in place (called by __post_init__).

        Fields that :meth:`replace` copied from an already-checked model are
        taken as they are (the cross-field checks of __post_init__ still run).
        """
        trusted = getattr(_REPLACING, "unchanged", ())
        for name, p in self.params().items():
            if name in trusted:
                continue
            value = getattr(self, name)
            if value is None:
                if p.default is REQUIRED:
                    raise ModelError(f"{p.where} is missing: {p.doc}")
                value = None if p.default is None else p.read(p.default)
            else:
                value = p.read(value)
            object.__setattr__(self, name, value)
        opacity = getattr(self, "opacity", None)
        if opacity is None:
            object.__setattr__(self, "opacity", Opacity())
        elif isinstance(opacity, dict):
            table = dict(opacity)
            law = table.pop("law", "electron_scattering")
            object.__setattr__(self, "opacity", Opacity(law, table))
        elif not isinstance(opacity, Opacity):
            raise ModelError("opacity must be an Opacity or a table with a law")

    @classmethod
    def from_dict(cls, data: dict, source: str = "model") -> "WindModel":
        """Build from a parsed model file (nested dicts); unknown keys fail.

        Parameters
        ----------
        data : dict
            The model file's tables (see :func:`windsolve.model_from_dict`).
        source : str
            Names the origin in error messages (the file's path).

        Returns
        -------
        WindModel
            An instance of ``cls``.

        Raises
        ------
        ModelError
            An unknown key (with the nearest valid one) or an invalid value.
        """
        by_key = {p.key: name for name, p in cls.params().items()}
        kwargs = {}
        for top, value in data.items():
            if top == "model":
                continue
            if isinstance(value, dict) and top in by_key:
                kwargs[by_key[top]] = value  # a table where a value belongs: read() says so
                continue
            if not isinstance(value, dict) and top in cls.sections:
                raise ModelError(f"{source}: {top} = {plain(value)}: [{top}] is a table, not "
                                 f"a value; write the line [{top}] and below it its keys "
                                 f"({', '.join(cls._table_keys(top, by_key))})")
            if isinstance(value, dict):
                if top not in cls.sections:
                    raise ModelError(f"{source}: unknown table [{top}]"
                                     f"{nearest(top, cls.sections)}; tables are "
                                     f"{', '.join('[' + s + ']' for s in cls.sections)}")
                if top == "opacity":
                    table = dict(value)
                    # A table file is found relative to the model file.
                    if isinstance(table.get("path"), str) and source != "model":
                        path = Path(table["path"]).expanduser()
                        if not path.is_absolute():
                            path = Path(source).resolve().parent / path
                        table["path"] = str(path)
                    kwargs["opacity"] = table
                    continue
                for key, item in value.items():
                    dotted = f"{top}.{key}"
                    if dotted not in by_key:
                        inside = [k.rpartition(".")[2] for k in by_key if k.startswith(top + ".")]
                        raise ModelError(f"{source}: unknown key \"{key}\" in [{top}]"
                                         f"{nearest(key, inside)}; [{top}] takes "
                                         f"{', '.join(inside)}")
                    kwargs[by_key[dotted]] = item
            else:
                if top not in by_key:
                    owners = [k.rpartition(".")[0] for k in by_key if k.endswith("." + top)]
                    if top in cls.opacity_parameter_names() or top == "law":
                        owners.append("opacity")
                    if owners:
                        raise ModelError(f"{source}: unknown key \"{top}\" at the top level: "
                                         f"it belongs in [{owners[0]}]; write it below the "
                                         f"[{owners[0]}] line (a key above every table "
                                         f"line is a top-level key)")
                    tops = ["model"] + [k for k in by_key if "." not in k]
                    hint = nearest(top, tops + list(cls.sections))
                    raise ModelError(f"{source}: unknown key \"{top}\"{hint}; the top level "
                                     f"takes {', '.join(tops)} and the tables "
                                     f"{', '.join('[' + s + ']' for s in cls.sections)}")
                kwargs[by_key[top]] = value
        try:
            return cls(**kwargs)
        except ModelError as error:  # name the file too
            if source == "model" or str(error).startswith(source):
                raise
            raise ModelError(f"{source}: {error}") from None

    @staticmethod
    def _table_keys(section, by_key):
        if section == "opacity":
            return ["law", "and the law's parameters"]
        return [k.rpartition(".")[2] for k in by_key if k.startswith(section + ".")]

    def replace(self, **changes) -> "WindModel":
        """A copy with some fields changed (validated again).

        Parameters
        ----------
        **changes
            Field names (not model-file keys) and new values, as the
            constructor takes them (Quantities or strings with units).

        Returns
        -------
        WindModel
            A new model of the same class.

        Raises
        ------
        ModelError
            As the constructor.

        Notes
        -----
        Only the changed fields are read again; the cross-field checks run on
        the whole.  A sweep builds every row this way, so it is kept cheap.
        """
        values = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        values.update(changes)
        _REPLACING.unchanged = frozenset(values).difference(changes)
        try:
            return type(self)(**values)
        finally:
            _REPLACING.unchanged = ()

    def cgs(self, name: str) -> float:
        """Field ``name`` as a plain float in cgs (NaN when unset).

        Parameters
        ----------
        name : str
            A field name, e.g. ``"mass"`` (returns grams).

        Returns
        -------
        float
            The value in the field's cgs unit (``params()[name]``).
        """
        value = getattr(self, name)
        return math.nan if value is None else self.params()[name].cgs(value)

    # -- derived checks -----------------------------------------------------
    def _check_outside_horizon(self, r, what, fix):
        """A Newtonian wind needs radius ``r`` [cm] outside 2GM/c^2 (escape speed below c);
        also catches a radius whose escape speed overflows (r tiny or 0).  ``what()``
        gives the message's subject (built only when needed)."""
        rs = 2.0 * G * fast_cgs(self.mass, u.g) / (C_LIGHT * C_LIGHT)
        if not r > rs:
            raise ModelError(f"{what()} lies inside the Schwarzschild radius 2GM/c^2 = "
                             f"{rs:.4g} cm of [star] mass = {plain(self.mass)}: the escape "
                             f"speed there is faster than the speed of light, where a "
                             f"Newtonian wind has no meaning; {fix}")

    # -- output -------------------------------------------------------------
    def to_dict(self) -> dict:
        """The resolved model file as nested dicts (defaults filled in).

        Returns
        -------
        dict
            ``model`` and one dict per table; Quantities as strings in the
            unit they were given (``"50.0 solMass"``), ready for
            :func:`windsolve.modelfile.dumps`.
        """
        out = {"model": self.kind}
        for name, p in self.params().items():
            value = getattr(self, name)
            if value is None:
                continue
            if p.section:
                out.setdefault(p.section, {})[p.name] = p.dump(value)
            else:
                out[p.name] = p.dump(value)
        out["opacity"] = self.opacity.to_toml()
        ordered = {"model": out.pop("model")}
        for key in [k for k in out if not isinstance(out[k], dict)]:
            ordered[key] = out.pop(key)
        for section in self.sections:
            if section in out:
                ordered[section] = out.pop(section)
        return ordered


@dataclass(frozen=True, eq=False)
class IsothermalWind(WindModel):
    """Model A: steady, spherical, isothermal continuum-driven wind.

    The flow has a fixed sound speed ``a`` (or temperature with the mean
    molecular weight of the composition); the radiative force uses the
    flux-mean opacity of the chosen law, optionally reduced by porosity, and
    the luminosity is constant or, with photon tiring, reduced by the work
    done lifting the flow.  See the README ("The physics in brief") and
    :mod:`windsolve.core.isothermal`.

    Parameters
    ----------
    name : str
        A label for the star (``name``).
    mass : Quantity or str [mass]
        Stellar mass M (``[star] mass``), e.g. ``"50 Msun"``.
    radius : Quantity or str [length]
        Base radius R0 (``[star] radius``).
    luminosity : Quantity or str [power]
        Luminosity at the base L0 (``[star] luminosity``).
    X, Z : float
        Hydrogen and metal mass fractions (``[composition]``; default 0.7,
        0.02).
    sound_speed : Quantity or str [speed], optional
        Isothermal sound speed a (``[gas] sound_speed``); give this or
        ``temperature``.
    temperature : Quantity or str [temperature], optional
        Gas temperature (``[gas] temperature``); sets a with the mean
        molecular weight of the composition (docs/physics.md, eqs. 2, 3).
    opacity : Opacity or dict, optional
        The opacity law (``[opacity]``; default electron scattering).
    porosity_length : Quantity or str [length], optional
        Porosity length h0 at R0 (``[porosity] length``); none: no porosity.
    porosity_exponent : float
        q in h(r) = h0 (r/R0)^q (``[porosity] radial_exponent``; default 0).
    base_density : Quantity or str [mass / volume]
        Density at the base rho0 (``[boundary] base_density``).
    photon_tiring : bool
        Let the work of lifting the flow drain the luminosity
        (``[energy] photon_tiring``; default False).
    rtol : float
        Relative tolerance of the integration (``[numerics] rtol``; 1e-8).
    outer_radius : Quantity or str [length], optional
        Outer end of the solution (``[numerics] outer_radius``; 100 R0).

    Raises
    ------
    ModelError
        A value without a unit or of the wrong dimension, a value outside its
        range (the message names the model-file key and the fix), or an
        inconsistent combination.

    References
    ----------
    docs/physics.md, section 4: eqs. 13-16 (equations and critical point),
    eqs. 9, 10 (porosity), eq. 15 (photon tiring), eqs. 17, 18 (the exact
    Parker solution at constant Gamma).
    """

    kind = "isothermal"
    sections = ("star", "composition", "gas", "opacity", "porosity", "boundary",
                "energy", "numerics")

    name: str = param("name", str, "a label for the star", "unnamed star")
    mass: object = param("star.mass", u.g, "stellar mass M, e.g. \"50 Msun\"",
                         check="positive")
    radius: object = param("star.radius", u.cm, "base radius R0, e.g. \"100 Rsun\"",
                           check="positive")
    luminosity: object = param("star.luminosity", u.erg / u.s,
                               "luminosity at the base L0, e.g. \"4e6 Lsun\"", check="nonnegative")
    X: float = param("composition.X", float, "hydrogen mass fraction", 0.7, "fraction")
    Z: float = param("composition.Z", float, "metal mass fraction", 0.02, "fraction")
    sound_speed: object = param("gas.sound_speed", u.cm / u.s,
                                "isothermal sound speed a, e.g. \"20 km/s\"", None, "positive")
    temperature: object = param("gas.temperature", u.K,
                                "gas temperature (sets a with mu), e.g. \"3e4 K\"", None,
                                "positive")
    opacity: object = None
    porosity_length: object = param("porosity.length", u.cm,
                                    "porosity length h0 at R0, e.g. \"10 Rsun\"", None,
                                    "positive")
    porosity_exponent: float = param("porosity.radial_exponent", float,
                                     "q in h(r) = h0 (r/R0)^q", 0.0)
    base_density: object = param("boundary.base_density", u.g / u.cm**3,
                                 "density at the base rho0, e.g. \"1e-9 g/cm3\"",
                                 check="positive")
    photon_tiring: bool = param("energy.photon_tiring", bool,
                                "let the flow's lift drain the luminosity", False)
    rtol: float = param("numerics.rtol", float, "relative tolerance of the integration",
                        1e-8, "rtol")
    outer_radius: object = param("numerics.outer_radius", u.cm,
                                 "outer radius of the solution (default 100 R0)", None,
                                 "positive")

    def __post_init__(self):
        self._read_fields()
        check_composition(self.X, self.Z)
        if (self.sound_speed is None) == (self.temperature is None):
            raise ModelError("[gas] give exactly one of sound_speed (e.g. \"20 km/s\") "
                             "or temperature (e.g. \"3e4 K\")")
        if self.outer_radius is None:
            object.__setattr__(self, "outer_radius", 100.0 * self.radius)
        if not self.outer_radius > self.radius:
            raise ModelError(f"[numerics] outer_radius = {format_quantity(self.outer_radius)} "
                             f"must exceed [star] radius = {format_quantity(self.radius)}")
        R0 = fast_cgs(self.radius, u.cm)
        self._check_outside_horizon(R0, lambda: f"[star] radius = {plain(self.radius)}",
                                    "give a radius far outside it")
        if not self.a < C_LIGHT:
            if self.sound_speed is not None:
                raise ModelError(f"[gas] sound_speed = {plain(self.sound_speed)} is not below "
                                 f"the speed of light (299792 km/s); give e.g. \"20 km/s\"")
            raise ModelError(f"[gas] temperature = {plain(self.temperature)} gives a sound "
                             f"speed sqrt(kT/(mu m_u)) = {self.a / 1e5:.4g} km/s, faster than "
                             f"the speed of light; give e.g. \"3e4 K\"")
        if not math.isfinite(4.0 * math.pi * R0 * R0 * fast_cgs(self.base_density, RHO)
                             * self.a):
            raise ModelError(f"[boundary] base_density = {plain(self.base_density)} at [star] "
                             f"radius = {plain(self.radius)}: the base mass flux "
                             f"4 pi R0^2 rho0 a overflows double precision; give a physical "
                             f"density, e.g. \"1e-9 g/cm3\"")

    # -- derived values (cgs floats) ----------------------------------------
    @cached_property
    def mu(self):
        """Mean molecular weight of the fully ionized composition."""
        return basics.mean_molecular_weight(self.X, self.Z)

    @cached_property
    def a(self):
        """Isothermal sound speed [cm/s] (float)."""
        if self.sound_speed is not None:
            return self.cgs("sound_speed")
        return basics.isothermal_sound_speed(self.cgs("temperature"), self.mu)

    @cached_property
    def T(self):
        """Gas temperature [K] (float) used by temperature-dependent opacities."""
        if self.temperature is not None:
            return self.cgs("temperature")
        return basics.gas_temperature(self.cgs("sound_speed"), self.mu)

    @cached_property
    def kernel_arrays(self):
        """(P, O): the plain-float parameter vectors of the Model A kernels."""
        P = np.zeros(iso_kernels.N_PARAMS)
        P[iso_kernels.I_GM] = G * self.cgs("mass")
        P[iso_kernels.I_A2] = self.a ** 2
        P[iso_kernels.I_R0] = self.cgs("radius")
        P[iso_kernels.I_RHO0] = self.cgs("base_density")
        P[iso_kernels.I_L0] = self.cgs("luminosity")
        P[iso_kernels.I_T] = self.T
        P[iso_kernels.I_TIRING] = 1.0 if self.photon_tiring else 0.0
        P[iso_kernels.I_ROUT] = self.cgs("outer_radius")
        porosity = (0.0, 1.0, 0.0)
        if self.porosity_length is not None:
            porosity = (self.cgs("porosity_length"), self.cgs("radius"),
                        float(self.porosity_exponent))
        O = self.opacity.kernel_vector(self.X, self.Z, porosity)
        return P, O


@dataclass(frozen=True, eq=False)
class DiffusionWind(WindModel):
    """Model B: optically thick wind, gas + radiation, radiative diffusion.

    Pinned either at the base (``[star] radius`` and ``luminosity`` with
    ``[boundary] base_temperature`` or ``base_density``) or at the photosphere
    (``[boundary] photosphere_luminosity`` and ``photosphere_temperature``;
    the profile then runs inward to ``[star] radius`` if given, else down to
    ``base_temperature``, default 1e6 K).  See the README ("The physics in
    brief") and :mod:`windsolve.core.diffusion`.

    Parameters
    ----------
    name : str
        A label for the star (``name``).
    mass : Quantity or str [mass]
        Stellar mass M (``[star] mass``), e.g. ``"10 Msun"``.
    radius : Quantity or str [length], optional
        Base radius R0 (``[star] radius``): required by the base anchor;
        with the photosphere anchor, where the profile stops inward.
    luminosity : Quantity or str [power], optional
        Radiative luminosity at the base L0 (``[star] luminosity``; base
        anchor).
    X, Z : float
        Hydrogen and metal mass fractions (``[composition]``; default 0.7,
        0.02).
    opacity : Opacity or dict, optional
        The opacity law (``[opacity]``; default electron scattering).
    porosity_length : Quantity or str [length], optional
        Porosity length h0 at R0 (``[porosity] length``).
    porosity_exponent : float
        q in h(r) = h0 (r/R0)^q (``[porosity] radial_exponent``; default 0).
    base_temperature : Quantity or str [temperature], optional
        T0 at the base (``[boundary] base_temperature``); with the
        photosphere anchor and no radius, where the profile stops inward
        (default 1e6 K).
    base_density : Quantity or str [mass / volume], optional
        rho0 at the base (``[boundary] base_density``; base anchor, instead
        of ``base_temperature``).
    photosphere_luminosity : Quantity or str [power], optional
        Observed L_ph (``[boundary] photosphere_luminosity``; photosphere
        anchor, with ``photosphere_temperature``).
    photosphere_temperature : Quantity or str [temperature], optional
        Observed effective temperature T_eff
        (``[boundary] photosphere_temperature``).
    rtol : float
        Relative tolerance of the integration (``[numerics] rtol``; 1e-8).

    Raises
    ------
    ModelError
        A value without a unit or of the wrong dimension, a value outside its
        range (the message names the model-file key and the fix), or an
        inconsistent combination.

    References
    ----------
    docs/physics.md, section 5: eqs. 19-21 (equations), eq. 22 (critical
    point), eqs. 23, 24 (photosphere and thin flow), the anchors; eqs. 25, 26
    (slopes and classification).
    """

    kind = "diffusion"
    sections = ("star", "composition", "opacity", "porosity", "boundary", "numerics")

    name: str = param("name", str, "a label for the star", "unnamed star")
    mass: object = param("star.mass", u.g, "stellar mass M, e.g. \"10 Msun\"",
                         check="positive")
    radius: object = param("star.radius", u.cm, "base radius R0, e.g. \"1 Rsun\"", None,
                           "positive")
    luminosity: object = param("star.luminosity", u.erg / u.s,
                               "radiative luminosity at the base L0, e.g. \"2e5 Lsun\"",
                               None, "positive")
    X: float = param("composition.X", float, "hydrogen mass fraction", 0.7, "fraction")
    Z: float = param("composition.Z", float, "metal mass fraction", 0.02, "fraction")
    opacity: object = None
    porosity_length: object = param("porosity.length", u.cm,
                                    "porosity length h0 at R0, e.g. \"0.01 Rsun\"", None,
                                    "positive")
    porosity_exponent: float = param("porosity.radial_exponent", float,
                                     "q in h(r) = h0 (r/R0)^q", 0.0)
    base_temperature: object = param("boundary.base_temperature", u.K,
                                     "temperature at the base, e.g. \"5e5 K\"", None,
                                     "positive")
    base_density: object = param("boundary.base_density", u.g / u.cm**3,
                                 "density at the base, e.g. \"1e-8 g/cm3\"", None,
                                 "positive")
    photosphere_luminosity: object = param(
        "boundary.photosphere_luminosity", u.erg / u.s,
        "observed luminosity at the photosphere, e.g. \"2e5 Lsun\"", None, "positive")
    photosphere_temperature: object = param(
        "boundary.photosphere_temperature", u.K,
        "observed effective temperature, e.g. \"5e4 K\"", None, "positive")
    rtol: float = param("numerics.rtol", float, "relative tolerance of the integration",
                        1e-8, "rtol")

    DEFAULT_BASE_TEMPERATURE = 1e6  # K, inner end of a photosphere-anchored profile

    def __post_init__(self):
        self._read_fields()
        check_composition(self.X, self.Z)
        photo = (self.photosphere_luminosity, self.photosphere_temperature)
        if self.radius is not None:
            self._check_outside_horizon(fast_cgs(self.radius, u.cm),
                                        lambda: f"[star] radius = {plain(self.radius)}",
                                        "give a radius far outside it")
        if any(v is not None for v in photo):
            if any(v is None for v in photo):
                raise ModelError("[boundary] a photosphere anchor needs both "
                                 "photosphere_luminosity and photosphere_temperature")
            self._check_photosphere()
            if self.luminosity is not None or self.base_density is not None:
                extra = "[star] luminosity" if self.luminosity is not None else \
                    "[boundary] base_density"
                raise ModelError(f"over-specified: {extra} belongs to a base-anchored model, "
                                 f"but photosphere_luminosity and photosphere_temperature "
                                 f"anchor this one at the photosphere; remove one of them")
            if self.radius is not None and self.base_temperature is not None:
                raise ModelError("over-specified: a photosphere-anchored profile ends at "
                                 "[star] radius or at [boundary] base_temperature, not both; "
                                 "remove one")
            if self.radius is not None and not self.photosphere_radius > self.radius:
                raise ModelError(
                    f"photosphere_luminosity and photosphere_temperature put the photosphere "
                    f"at {self.photosphere_radius.to_value(u.Rsun):.4g} Rsun, inside "
                    f"[star] radius = {format_quantity(self.radius)}; lower the temperature, "
                    f"raise the luminosity or lower the radius")
        else:
            missing = [key for key, value in (("[star] radius", self.radius),
                                              ("[star] luminosity", self.luminosity))
                       if value is None]
            if missing or (self.base_temperature is None) == (self.base_density is None):
                raise ModelError(
                    "under-specified: anchor the model either at the photosphere "
                    "([boundary] photosphere_luminosity and photosphere_temperature) or at "
                    "the base ([star] radius and luminosity with exactly one of [boundary] "
                    "base_temperature or base_density)"
                    + (f"; missing {', '.join(missing)}" if missing else ""))

    MAX_PHOTOSPHERE_RADIUS = 1e30  # cm (1.4e19 Rsun): larger than any star, or the universe

    def _check_photosphere(self):
        """L_ph and T_eff must put the photosphere where its radius and T^4 can be computed."""
        L = fast_cgs(self.photosphere_luminosity, LUM)
        T = fast_cgs(self.photosphere_temperature, u.K)
        log_r = 0.5 * (math.log(L) - math.log(4.0 * math.pi * SIGMA_SB)) - 2.0 * math.log(T)
        r = math.exp(log_r) if log_r < 700.0 else math.inf

        def where():
            return (f"[boundary] photosphere_luminosity = "
                    f"{plain(self.photosphere_luminosity)} and photosphere_temperature = "
                    f"{plain(self.photosphere_temperature)}")
        if not r < self.MAX_PHOTOSPHERE_RADIUS:
            raise ModelError(f"{where()} put the photosphere at R = sqrt(L/(4 pi sigma T^4)) = "
                             f"{r / R_SUN:.4g} Rsun, larger than any star (the limit is "
                             f"{self.MAX_PHOTOSPHERE_RADIUS:.0e} cm); raise the temperature "
                             f"or lower the luminosity")
        self._check_outside_horizon(
            r, lambda: f"{where()} put the photosphere at {r:.4g} cm, which",
            "lower the temperature or raise the luminosity")

    @property
    def anchor(self) -> str:
        """"photosphere" or "base"."""
        return "photosphere" if self.photosphere_luminosity is not None else "base"

    @cached_property
    def mu(self):
        return basics.mean_molecular_weight(self.X, self.Z)

    @cached_property
    def photosphere_radius(self):
        """R_ph from the observed L_ph and T_eff (photosphere anchor) [Quantity]."""
        if self.photosphere_luminosity is None:
            return None
        L = self.cgs("photosphere_luminosity")
        T = self.cgs("photosphere_temperature")
        return (diff_kernels.photosphere_radius(L, T) * u.cm).to(u.Rsun)

    @cached_property
    def kernel_arrays(self):
        """(P, O): the plain-float parameter vectors of the Model B kernels."""
        P = np.zeros(diff_kernels.N_PARAMS)
        P[diff_kernels.I_GM] = G * self.cgs("mass")
        P[diff_kernels.I_KG] = K_B / (self.mu * M_U)
        P[diff_kernels.I_KES] = basics.electron_scattering_opacity(self.X, self.Z)
        R0 = self.cgs("radius") if self.radius is not None else 0.0
        P[diff_kernels.I_R_IN] = R0
        if self.anchor == "photosphere" and self.radius is None:
            T_in = (self.cgs("base_temperature") if self.base_temperature is not None
                    else self.DEFAULT_BASE_TEMPERATURE)
        else:
            T_in = np.inf
        P[diff_kernels.I_T_IN] = T_in
        scale = (self.photosphere_radius.to_value(u.cm) if self.anchor == "photosphere"
                 else R0)
        porosity = (0.0, 1.0, 0.0)
        if self.porosity_length is not None:
            ref = R0 if R0 > 0 else scale
            porosity = (self.cgs("porosity_length"), ref, float(self.porosity_exponent))
        O = self.opacity.kernel_vector(self.X, self.Z, porosity)
        return P, O


# kind -> model class, for model files and result files.  windsolve.registry.register
# adds every registered model's class (these two are registered there too, with
# everything else the program needs to know about them).
MODELS = {cls.kind: cls for cls in (IsothermalWind, DiffusionWind)}
