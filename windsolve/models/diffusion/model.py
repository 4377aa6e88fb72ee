"""Model B's model class: the parameters of an optically thick wind (frozen, declarative)."""

import math
from dataclasses import dataclass
from functools import cached_property

import astropy.units as u
import numpy as np

from ..._units import fast_cgs, format_quantity, plain
from ...core import basics
from ...core.constants import K_B, M_U, R_SUN, SIGMA_SB, G
from ...errors import ModelError
from ...physics import check_composition
from ..base import LUM, WindModel, param
from . import kernels as diff_kernels


@dataclass(frozen=True, eq=False, repr=False)
class DiffusionWind(WindModel):
    """Model B: optically thick wind, gas + radiation, radiative diffusion.

    Pinned either at the base (``[star] radius`` and ``luminosity`` with
    ``[boundary] base_temperature`` or ``base_density``) or at the photosphere
    (``[boundary] photosphere_luminosity`` and ``photosphere_temperature``;
    the profile then runs inward to ``[star] radius`` if given, else down to
    ``base_temperature``, default 1e6 K).  See the README ("The physics in
    brief") and :mod:`windsolve.models.diffusion.kernels`.

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
    def mu(self) -> float:
        """Mean molecular weight [m_u] of the fully ionised gas (docs/physics.md, eq. 2)."""
        return basics.mean_molecular_weight(self.X, self.Z)

    @cached_property
    def photosphere_radius(self) -> "u.Quantity | None":
        """R_ph from the observed L_ph and T_eff, L_ph = 4 pi R_ph^2 sigma T_eff^4
        (docs/physics.md, section 5) [Quantity, Rsun]; None for the base anchor."""
        if self.photosphere_luminosity is None:
            return None
        L = self.cgs("photosphere_luminosity")
        T = self.cgs("photosphere_temperature")
        return (diff_kernels.photosphere_radius(L, T) * u.cm).to(u.Rsun)

    @cached_property
    def kernel_arrays(self) -> tuple:
        """(P, O): the plain-float parameter vectors of the Model B kernels (cgs)."""
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
