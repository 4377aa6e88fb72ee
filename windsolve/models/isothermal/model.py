"""Model A's model class: the parameters of an isothermal wind (frozen, declarative)."""

import math
from dataclasses import dataclass
from functools import cached_property

import astropy.units as u
import numpy as np

from ..._units import fast_cgs, format_quantity, plain
from ...core import basics
from ...core.constants import C_LIGHT, G
from ...errors import ModelError
from ...physics import check_composition
from ..base import RHO, WindModel, param
from . import kernels as iso_kernels


@dataclass(frozen=True, eq=False, repr=False)
class IsothermalWind(WindModel):
    """Model A: steady, spherical, isothermal continuum-driven wind.

    The flow has a fixed sound speed ``a`` (or temperature with the mean
    molecular weight of the composition); the radiative force uses the
    flux-mean opacity of the chosen law, optionally reduced by porosity, and
    the luminosity is constant or, with photon tiring, reduced by the work
    done lifting the flow.  See the README ("The physics in brief") and
    :mod:`windsolve.models.isothermal.kernels`.

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
    def mu(self) -> float:
        """Mean molecular weight [m_u] of the fully ionised gas (docs/physics.md, eq. 2)."""
        return basics.mean_molecular_weight(self.X, self.Z)

    @cached_property
    def a(self) -> float:
        """Isothermal sound speed [cm/s] (float): given, or eq. 3 of docs/physics.md."""
        if self.sound_speed is not None:
            return self.cgs("sound_speed")
        return basics.isothermal_sound_speed(self.cgs("temperature"), self.mu)

    @cached_property
    def T(self) -> float:
        """Gas temperature [K] (float) used by temperature-dependent opacities."""
        if self.temperature is not None:
            return self.cgs("temperature")
        return basics.gas_temperature(self.cgs("sound_speed"), self.mu)

    @cached_property
    def kernel_arrays(self) -> tuple:
        """(P, O): the plain-float parameter vectors of the Model A kernels (cgs)."""
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
