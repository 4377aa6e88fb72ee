"""How a line profile is computed and measured: :class:`LineSettings`, checked once, and
its plain cgs floats :class:`LineSettingsCGS` (what the kernels and sweep workers take).

What each setting means is in docs/lines.md.
"""

import math
import numbers
from dataclasses import dataclass
from typing import NamedTuple

import astropy.units as u
import numpy as np

from .._units import plain, to_quantity
from ..core.constants import C_LIGHT
from ..errors import ModelError

KM_S = u.km / u.s
CM_PER_KM = 1e5
FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))  # 2.3548: Gaussian FWHM / sigma
MIN_POINTS = 21


class LineSettingsCGS(NamedTuple):
    """A :class:`LineSettings` as plain floats in cgs (what ``widths_cgs`` uses).

    Built once when a LineSettings is made (``settings.cgs``), so workers
    that call :func:`~windsolve.lines.synthesis.widths_cgs` many times pay no astropy cost per call.
    The fields are in the order of the line arguments of the kernels
    :func:`windsolve.core.lines.measure.line_widths` and
    :func:`windsolve.models.isothermal.width_kernels.outer_state_and_widths`.
    """

    emissivity_power: float
    occultation: bool
    broadening_fwhm: float  # cm/s: turbulence and instrument in quadrature
    broadening_sigma: float  # cm/s: broadening_fwhm / 2.3548
    hwzi_fraction: float
    edge_depth: float
    line_strength: float
    n_velocity: int


@dataclass(frozen=True)
class LineSettings:
    """How to compute and measure a line profile.

    Attributes
    ----------
    emissivity_power : int
        n in j proportional to rho**n for the emission line: 1 or 2 (default 2).
    occultation : bool
        Hide what lies behind the core's disk, and (emission) the gas inside
        the core radius.  Default True.
    turbulence : Quantity or str
        Gaussian turbulent broadening, given as its FWHM (not sigma, not the
        1/e half-width), e.g. ``"10 km/s"``.  Default 0.
    resolution : Quantity, str, float or None
        Instrumental broadening, a Gaussian: a speed is its FWHM (``"30 km/s"``),
        a plain number is the resolving power R (FWHM = c / R).  None: no
        instrumental broadening (default).
    hwzi_fraction : float
        HWZI is measured where the line falls to this fraction of its peak
        (0 < f < 1; default 0.05).
    edge_depth : float
        The P Cygni blue edge is the most negative velocity at which the
        absorption depth 1 - F/F_c reaches this (0 < d < 1; default 0.1).
    line_strength : float
        k_0 > 0 in the Sobolev optical depth (docs/lines.md); radially
        tau_rad = k_0 / (x**2 w dw/dx).  Default 100 (a strong line).
    n_velocity : int
        Number of points of the velocity grid (>= 21; default 401).

    Raises
    ------
    ModelError
        A setting out of its range, in one line naming it.

    References
    ----------
    docs/physics.md, eq. 27 (emissivity power), eq. 28 (line strength),
    eq. 30 (broadening), section 7 (HWZI level, edge depth).
    """

    emissivity_power: int = 2
    occultation: bool = True
    turbulence: object = 0.0 * KM_S
    resolution: object = None
    hwzi_fraction: float = 0.05
    edge_depth: float = 0.1
    line_strength: float = 100.0
    n_velocity: int = 401

    def __post_init__(self):
        set_ = object.__setattr__
        n = self.emissivity_power
        if isinstance(n, bool) or not isinstance(n, numbers.Integral) or n not in (1, 2):
            raise ModelError(f"LineSettings.emissivity_power = {plain(n)}: must be 1 (j ~ rho) "
                             f"or 2 (j ~ rho**2)")
        set_(self, "emissivity_power", int(n))
        if not isinstance(self.occultation, bool | np.bool_):
            raise ModelError(f"LineSettings.occultation = {plain(self.occultation)}: must be "
                             f"True or False")
        set_(self, "occultation", bool(self.occultation))
        turbulence = to_quantity(self.turbulence, KM_S, "LineSettings.turbulence")
        if not (np.isfinite(turbulence.value) and turbulence.value >= 0):
            raise ModelError(f"LineSettings.turbulence = {plain(turbulence)}: must be a FWHM "
                             f">= 0, e.g. \"10 km/s\"")
        if not turbulence.value * CM_PER_KM < C_LIGHT:
            raise ModelError(f"LineSettings.turbulence = {plain(turbulence)}: a FWHM faster "
                             f"than the speed of light (299792 km/s) broadens nothing real; "
                             f"give e.g. \"20 km/s\"")
        set_(self, "turbulence", turbulence)
        set_(self, "resolution", _check_resolution(self.resolution))
        for name in ("hwzi_fraction", "edge_depth"):
            value = getattr(self, name)
            if (isinstance(value, bool) or not isinstance(value, numbers.Real)
                    or not 0.0 < value < 1.0):
                raise ModelError(f"LineSettings.{name} = {plain(value)}: must be a number "
                                 f"between 0 and 1 (exclusive)")
            set_(self, name, float(value))
        k0 = self.line_strength
        if (isinstance(k0, bool) or not isinstance(k0, numbers.Real)
                or not (math.isfinite(k0) and k0 > 0)):
            raise ModelError(f"LineSettings.line_strength = {plain(k0)}: must be a positive "
                             f"number (k_0 >> 1 for a strong line)")
        set_(self, "line_strength", float(k0))
        npts = self.n_velocity
        if (isinstance(npts, bool) or not isinstance(npts, numbers.Integral)
                or npts < MIN_POINTS):
            raise ModelError(f"LineSettings.n_velocity = {plain(npts)}: must be a whole number "
                             f">= {MIN_POINTS}")
        set_(self, "n_velocity", int(npts))
        fwhm = float(self.broadening_fwhm.to_value(KM_S)) * CM_PER_KM
        if not fwhm < C_LIGHT:
            raise ModelError(f"LineSettings.turbulence and LineSettings.resolution together "
                             f"broaden by a FWHM of {fwhm / CM_PER_KM:.6g} km/s, faster than "
                             f"the speed of light; lower them")
        set_(self, "_cgs", LineSettingsCGS(
            float(self.emissivity_power), self.occultation, fwhm, fwhm / FWHM_PER_SIGMA,
            self.hwzi_fraction, self.edge_depth, self.line_strength, self.n_velocity))

    @property
    def cgs(self) -> LineSettingsCGS:
        """These settings as a :class:`LineSettingsCGS` (floats, cgs; computed once)."""
        return self._cgs

    @property
    def instrument_fwhm(self) -> u.Quantity:
        """Instrumental FWHM [km/s]: the given speed, c / R, or 0."""
        if self.resolution is None:
            return 0.0 * KM_S
        if isinstance(self.resolution, u.Quantity):
            return self.resolution
        return (C_LIGHT / CM_PER_KM / self.resolution) * KM_S

    @property
    def broadening_fwhm(self) -> u.Quantity:
        """FWHM [km/s] of the one Gaussian applied: turbulence and instrument in quadrature."""
        return np.hypot(self.turbulence, self.instrument_fwhm)


def _check_resolution(value):
    """None, a velocity FWHM (Quantity in km/s) or a resolving power (float)."""
    where = "LineSettings.resolution"
    if value is None:
        return None
    if isinstance(value, str):
        try:
            parsed = u.Quantity(value)
        except (TypeError, ValueError):
            raise ModelError(f"{where} = \"{value}\": give a FWHM such as \"30 km/s\" or a "
                             f"resolving power such as 20000") from None
        value = parsed.value.item() if parsed.unit == u.dimensionless_unscaled else parsed
    if isinstance(value, u.Quantity) and value.unit == u.dimensionless_unscaled:
        value = float(value.value)
    if isinstance(value, u.Quantity):
        q = to_quantity(value, KM_S, where)
        if not (np.isfinite(q.value) and q.value > 0):
            raise ModelError(f"{where} = {plain(q)}: an instrumental FWHM must be > 0")
        if not q.value * CM_PER_KM < C_LIGHT:
            raise ModelError(f"{where} = {plain(q)}: an instrumental FWHM faster than the "
                             f"speed of light (299792 km/s) resolves nothing; give e.g. "
                             f"\"30 km/s\" or a resolving power such as 20000")
        return q
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ModelError(f"{where} = {plain(value)}: give a FWHM such as \"30 km/s\" or a "
                         f"resolving power such as 20000")
    if not (math.isfinite(value) and value > 0):
        raise ModelError(f"{where} = {plain(value)}: a resolving power R must be > 0")
    if not value > 1:
        raise ModelError(f"{where} = {plain(value)}: a resolving power R <= 1 means an "
                         f"instrumental FWHM c/R of at least the speed of light; give R > 1, "
                         f"e.g. 20000 (or a FWHM such as \"30 km/s\")")
    return float(value)


def _check_settings(settings):
    if settings is None:
        return LineSettings()
    if not isinstance(settings, LineSettings):
        raise ModelError(f"settings must be a LineSettings, not {type(settings).__name__}")
    return settings
