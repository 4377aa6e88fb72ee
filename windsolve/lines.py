"""Line profiles from a solved wind, and the widths an observer quotes.

Two profiles are computed from a wind's tabulated radius, velocity and
density (a :class:`~windsolve.result.WindResult`, or a dict of Quantities, so
that profiles not written by windsolve work too):

* :func:`emission_profile` -- an optically thin emission line with
  emissivity j proportional to rho**n (n = 2: recombination or collisional
  excitation; n = 1: a process linear in the density), docs/physics.md, eq. 27:

  .. math:: F(w) = 2\\pi \\int_{v(r) > |w|} j(r) \\frac{r^2}{v(r)} \\, dr

  A shell of radius r and speed v spreads its light evenly over
  -v < w < v (Lamers & Cassinelli 1999, Introduction to Stellar Winds,
  ch. 2, from memory), so a constant-velocity wind gives a flat-topped line
  of half-width v.  With ``occultation`` the opaque core of radius R_c hides
  the gas inside it (r < R_c is not seen at all) and, for r > R_c, the
  hemisphere cap behind its disk: the red part w > v(r) sqrt(1 - (R_c/r)**2).
  Without ``occultation`` every tabulated shell is seen whole (R_c unused).
* :func:`pcygni_profile` -- a P Cygni profile of a pure-scattering resonance
  line in the Sobolev approximation: the uniformly bright core of radius R_c
  is absorbed by the gas in front of its disk, with Sobolev optical depth
  tau(r, mu), and every resonance point scatters with source function
  S = (beta_c / beta) I_c, beta and beta_c the escape and core-penetration
  probabilities built from beta(tau) = (1 - exp(-tau)) / tau (Castor 1970,
  MNRAS 149, 111; Lamers & Cassinelli 1999, ch. 2 and ch. 8; Castor &
  Lamers 1979, ApJS 39, 481 -- all from memory).  Approximations: the
  Sobolev approximation (no thermal or turbulent width in the line
  transfer; the velocity gradient along the ray is mu**2 dv/dr +
  (1 - mu**2) v/r), core-halo geometry (a sharp, uniformly bright core, no
  limb darkening, no continuum opacity in the wind, photons scattered back
  onto the core are lost), one resonance point per ray (v(r) must
  not fall outward outside R_c; a ModelError says where it does).  Only gas
  at r >= R_c takes part.

Line strength.  The Sobolev optical depth is

.. math::

    \\tau(r, \\mu) = k_0 \\, \\frac{\\rho(r)}{\\rho_{\\rm ref}}
        \\frac{v_{\\max} / R_c}{\\mu^2\\, dv/dr + (1 - \\mu^2)\\, v / r},
    \\qquad \\rho_{\\rm ref} = \\frac{\\langle r^2 \\rho v \\rangle}{R_c^2 v_{\\max}}

with k_0 = ``line_strength``, v_max the largest tabulated velocity and
<r^2 rho v> the median over the profile (the mass flux Mdot / 4 pi of a
steady wind).  For a steady wind the radial optical depth is then the
familiar tau_rad = k_0 / (x**2 w dw/dx), x = r / R_c, w = v / v_max (as in
Castor & Lamers 1979, from memory); k_0 >> 1 is a strong (saturated) line.

Broadening.  ``turbulence`` and ``resolution`` are both Gaussians given by
their FULL WIDTH AT HALF MAXIMUM (FWHM = 2 sqrt(2 ln 2) sigma = 2.3548
sigma); the line is convolved once with a Gaussian of FWHM
sqrt(turbulence**2 + instrument**2).  A plain number as ``resolution`` is a
resolving power R, instrument FWHM = c / R.  The convolution is the exact
convolution of the piecewise-linear sampled profile, so a width far below
the grid step changes the profile very little instead of not at all.

Velocity grid.  ``n_velocity`` evenly spaced points over
[-H, H], H = 1.2 v_max + 2 FWHM_broadening (just 1.2 v_max without
broadening), v_max the largest tabulated velocity; beyond the grid the line
is at the continuum.  Velocities are Doppler velocities, positive = red.

The emitting (or scattering) region is the tabulated profile, from R_c to
its last point, with one addition: a Model B (diffusion) profile stops at
the photosphere, and above it the flow is optically thin and ballistic
(docs/physics.md, eq. 23), v^2 = v_inf^2 + (v_ph^2 - v_inf^2) R_ph / r; that thin
flow is appended out to 100 R_ph.  Nothing else is extrapolated.

Core radius (the disk that occults and, for P Cygni, emits the continuum):
the photosphere of a Model B result; for a Model A result the radius where
the optical depth integrated inward with the profile's own opacity reaches
2/3 (the wind of the demo is opaque near its base), or the base R0 if the
whole profile is thin.  ``core_radius`` overrides it.

Caveat: the slow base.  With continuity (rho v r^2 = const) the emission
integrand j r^2 / v is proportional to rho^(n-1) / v^2, so dense, slow gas
just outside the core dominates an optically thin line: a core radius deep
in a nearly hydrostatic base gives a narrow central spike whose FWHM is set
by the base -- often well under the sound speed, which no line observed
from gas at that temperature can be: give a ``turbulence`` of about the
sound speed to stand in for the thermal broadening the model leaves out.
In a sweep over porosity length, say, the FWHM then drops from hundreds of
km/s to a few once the optical core reaches the base.  Likewise the
Sobolev approximation fails where v is not much larger than the thermal
speed, so P Cygni features within a few sound speeds of w = 0 are not
reliable.

Numerical accuracy.  The widths are exact for the tabulated profile as
interpolated above; what limits them is the sampling of the profile.  On
40 demo winds (luminosity 2.5-8e6 Lsun, porosity length 1-100 Rsun),
against profiles sampled four times more densely than ``solve`` stores
them, FWHM and HWZI move by a median of 2e-6 and 6e-7 relative (90 % of
the models below 1e-4), at most 4e-3 for a line tens of km/s wide whose
core lies just outside the sonic point and 2e-2 for a spike a few km/s
wide from the subsonic base; the blue edge by less than 1e-6.

Normalisation.  Emission: continuum 0, the line's peak = 1 (without
broadening the exact peak F(0), which a grid point need not hit).  P Cygni:
continuum 1 (F / F_c, F_c the core's flux).

Measurements (on the final, broadened profile; NaN when not measurable).
Without broadening they are made on the exact profile, so they do not
depend on ``n_velocity``: FWHM and HWZI when v(r) and the occultation edge
rise outward (the normal case; there the flux seen at w is a sum over an
outer part of the wind, so the radius where it falls to a level follows
from the sums, and w_- = -v, w_+ = v or the occultation edge there), the
blue edge always (below).  With broadening, or for FWHM and HWZI when v(r)
falls somewhere outward, they are read off the grid profile with linear
interpolation between grid points:

FWHM
    Full width at half maximum of the emission line: w_+ - w_-, where w_-
    and w_+ are the smallest and largest w at which the normalised flux is
    >= 0.5 (the outermost half-maximum crossings; for a single-peaked line
    these are the usual ones).  NaN for a P Cygni profile.
HWZI
    Half width at "zero" intensity of the emission line: the largest |w| at
    which the normalised flux is >= ``hwzi_fraction``, i.e.
    max(-w_-, w_+) at that level, measured from the rest velocity w = 0.
    NaN for a P Cygni profile.
Blue-edge velocity
    Of the P Cygni profile: the most negative w at which the absorption
    depth 1 - F/F_c reaches ``edge_depth`` (a negative number; about
    -v_infinity for a strong line).  NaN when the trough never reaches
    ``edge_depth``, and for an emission profile.  Without broadening it is
    measured on the exact (unsampled) Sobolev profile: scanning from -v_max
    (beyond which F = F_c exactly) inward -- at -v_max + g/2^j, j = 24 ... 1,
    g the distance to the first grid point inside -v_max, then at the grid
    points -- the first point with depth >= ``edge_depth`` brackets the edge
    with the point before it, and the crossing between them is found to
    1e-9 v_max (kernel :func:`windsolve.core.lines.pcygni_edge`).  So a
    strong line's edge lies just inside -v_max, not up to a grid step
    beyond it as linear interpolation across the jump at -v_max would put
    it.  With broadening the profile exists only on the grid, and the edge
    is linearly interpolated between the first grid point that reaches
    ``edge_depth`` and the one before it.  Either way a dip that reaches
    ``edge_depth`` only between two scan points is not seen.

One implementation.  :func:`emission_profile`, :func:`pcygni_profile`,
:func:`line_widths` (and so ``windsolve lines``, ``compare`` and sweeps)
measure with the same kernels; :func:`line_widths` resolves its input and
calls :func:`widths_cgs`, the astropy-free entry point for sweep workers.
A Model A sweep worker goes one step further: the kernel that finishes the
solution also measures its widths
(:func:`windsolve.core.isothermal_lines.outer_state_and_widths`), from the
same profile points, so its numbers are those of ``line_widths(solve(m))``.
The emission profile is a suffix sum of exact per-sub-interval integrals
when v(r) rises outward (O(m + N_w) for m sub-intervals and N_w
velocities), the general loop otherwise; the exact widths need only the
sums (O(m)); the blue edge evaluates the Sobolev profile only where the
search needs it.
"""

import io
import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from typing import NamedTuple

import astropy.units as u
import numpy as np

from ._units import plain, to_quantity
from .core import lines as kernels
from .core.constants import C_LIGHT
from .core.profile import default_core_radius_cgs, optical_core_radius_cgs
from .errors import ModelError
from .result import PROFILE_UNITS, WindResult

__all__ = [
    "LineSettings",
    "LineSettingsCGS",
    "LineProfile",
    "emission_profile",
    "pcygni_profile",
    "line_widths",
    "widths_cgs",
    "optical_core_radius_cgs",
    "default_core_radius_cgs",
    "broaden",
    "FWHM_PER_SIGMA",
]

KM_S = u.km / u.s
CM_PER_KM = 1e5
FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))  # 2.3548: Gaussian FWHM / sigma
GRID_MARGIN = kernels.GRID_MARGIN  # the grid spans this many v_max ...
BROADENING_MARGIN = kernels.BROADENING_MARGIN  # ... plus this many broadening FWHM
MONOTONIC_RTOL = kernels.MONOTONIC_RTOL  # a fall of v by less than this * v_max is noise
MIN_POINTS = 21


class _NoGasOutsideCore(ModelError):
    """No tabulated point lies outside the core radius (line_widths gives NaN)."""


class _NotMonotonic(ModelError):
    """v(r) falls outward outside the core (line_widths gives a NaN blue edge)."""


def _nan_speed():
    return np.nan * KM_S


class LineSettingsCGS(NamedTuple):
    """A :class:`LineSettings` as plain floats in cgs (what :func:`widths_cgs` uses).

    Built once when a LineSettings is made (``settings.cgs``), so workers
    that call :func:`widths_cgs` many times pay no astropy cost per call.
    The fields are in the order of the line arguments of the kernels
    :func:`windsolve.core.lines.line_widths` and
    :func:`windsolve.core.isothermal_lines.outer_state_and_widths`.
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
        k_0 > 0 in the Sobolev optical depth (module docstring); radially
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
    def cgs(self):
        """These settings as a :class:`LineSettingsCGS` (floats, cgs; computed once)."""
        return self._cgs

    @property
    def instrument_fwhm(self):
        """Instrumental FWHM [km/s]: the given speed, c / R, or 0."""
        if self.resolution is None:
            return 0.0 * KM_S
        if isinstance(self.resolution, u.Quantity):
            return self.resolution
        return (C_LIGHT / CM_PER_KM / self.resolution) * KM_S

    @property
    def broadening_fwhm(self):
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


@dataclass
class LineProfile:
    """A computed line profile and its measured widths.

    Attributes
    ----------
    velocity : Quantity
        Doppler velocity [km/s], increasing, evenly spaced (positive = red).
    flux : ndarray
        Emission: continuum 0, peak 1.  P Cygni: F / F_c, continuum 1.
    kind : str
        ``"emission"`` or ``"pcygni"``.
    fwhm, hwzi, edge_velocity : Quantity
        [km/s] as defined in :mod:`windsolve.lines`; NaN where not defined
        (fwhm and hwzi for P Cygni, edge_velocity for emission) or not
        measurable.
    """

    velocity: object
    flux: object
    kind: str
    fwhm: object
    hwzi: object
    edge_velocity: object

    def to_csv(self, path):
        """Write ``velocity_km_s,flux`` (one header line, then one row per point).

        Written under a temporary name and renamed when complete.
        """
        from ._io import write_text
        data = np.column_stack([self.velocity.to_value(KM_S), np.asarray(self.flux)])
        buffer = io.StringIO()
        np.savetxt(buffer, data, delimiter=",", header="velocity_km_s,flux", comments="",
                   fmt="%.10g")
        return write_text(path, buffer.getvalue())


# -- input ------------------------------------------------------------------

_INPUT_UNITS = tuple((key, PROFILE_UNITS[key]) for key in ("radius", "velocity", "density"))


def _values_in(q, unit):
    """q in ``unit`` as an ndarray; no conversion when q already carries that unit object
    (profiles made by :func:`windsolve.solve` do)."""
    return q.value if q.unit is unit else q.to_value(unit)


def _read_profile(source, what):
    """(r, v, rho) in cgs from a WindResult or a dict of Quantities; ModelError if unusable."""
    if isinstance(source, WindResult):
        if not source.converged or not source.profile:
            raise ModelError(f"{what}: the result has no converged profile "
                             f"(status {source.status}: {source.message})")
        profile = source.profile
    elif isinstance(source, Mapping):
        profile = source
    else:
        raise ModelError(f"{what}: expected a WindResult or a dict of radius, velocity and "
                         f"density Quantities, not {type(source).__name__}")
    arrays = []
    for key, unit in _INPUT_UNITS:
        if key not in profile:
            raise ModelError(f"{what}: the profile has no '{key}'")
        q = profile[key]
        if not isinstance(q, u.Quantity) or not (q.unit is unit or q.unit.is_equivalent(unit)):
            raise ModelError(f"{what}: profile['{key}'] must be a Quantity array in units of "
                             f"{unit.physical_type} (e.g. {unit.to_string()})")
        a = np.asarray(_values_in(q, unit), dtype=np.float64)
        if a.ndim != 1:
            raise ModelError(f"{what}: profile['{key}'] must be one-dimensional")
        if not np.all(np.isfinite(a)) or not np.all(a > 0):
            raise ModelError(f"{what}: profile['{key}'] must be finite and > 0 everywhere")
        arrays.append(a)
    r, v, rho = arrays
    if not (r.size == v.size == rho.size):
        raise ModelError(f"{what}: radius, velocity and density have different lengths "
                         f"({r.size}, {v.size}, {rho.size})")
    if r.size < 3:
        raise ModelError(f"{what}: the profile needs at least 3 points, not {r.size}")
    if not np.all(np.diff(r) > 0):
        raise ModelError(f"{what}: profile['radius'] must increase strictly")
    if isinstance(source, WindResult):
        extend = _line_rules(source)[1]
        if extend is not None:
            r, v, rho = extend(source, r, v, rho)
    return r, v, rho


def _line_rules(result):
    """(core_radius, extend_profile) of a result: its ModelSpec's.  A result without
    a (registered) model, e.g. read from a file without a complete model, gets rules
    that follow its summary: the ballistic flow is added above a finite photosphere
    where the profile ends, and the core is that photosphere, else as for a model
    without one (:func:`windsolve.registry.photosphere_core_radius`)."""
    from .registry import MODEL_SPECS, photosphere_core_radius
    spec = MODEL_SPECS.get(getattr(result.model, "kind", None))
    if spec is None:
        return photosphere_core_radius, thin_extension
    return spec.core_radius, spec.extend_profile


THIN_EXTENT = 100.0  # the optically thin flow above a photosphere is followed to 100 R_ph
THIN_POINTS = 200


def thin_extension(result, r, v, rho):
    """Append the ballistic thin flow above a Model B photosphere (its ModelSpec's
    ``extend_profile``).

    A diffusion-wind profile stops at the photosphere; above it the flow is
    optically thin and ballistic (docs/physics.md, eq. 23): v(r)^2 = v_inf^2 + K / r
    with K = (v_ph^2 - v_inf^2) R_ph, and rho from continuity.  That is the
    gas an observer's lines come from, so it is added here (out to
    THIN_EXTENT R_ph); profiles without a photosphere are returned as they are.
    """
    s = result.summary
    R_ph = s.get("photosphere_radius")
    v_inf = s.get("terminal_velocity")
    mdot = s.get("mass_loss_rate")
    if R_ph is None or v_inf is None or mdot is None:
        return r, v, rho
    R_ph = float(R_ph.to_value(u.cm))
    v_inf = float(v_inf.to_value(u.cm / u.s))
    mdot = float(mdot.to_value(u.g / u.s))
    if not (np.isfinite(R_ph) and np.isfinite(v_inf) and abs(r[-1] / R_ph - 1.0) < 1e-6):
        return r, v, rho
    K = (v[-1] ** 2 - v_inf**2) * R_ph
    r_out = R_ph * np.geomspace(1.0, THIN_EXTENT, THIN_POINTS)[1:]
    v_out = np.sqrt(v_inf**2 + K / r_out)
    rho_out = mdot / (4.0 * np.pi * r_out**2 * v_out)
    return (np.concatenate([r, r_out]), np.concatenate([v, v_out]),
            np.concatenate([rho, rho_out]))


def _optical_core(result):
    """Radius where tau = integral of kappa rho dr from outside reaches 2/3, or None.

    The disk an observer sees (and that hides the red side of the line) is
    where the gas becomes optically thick; for an isothermal (Model A)
    result that is not the base R0 when the wind itself is opaque near the
    base.  Uses the profile's own opacity; None if the whole profile is
    optically thin (tau(R0) < 2/3).  See :func:`optical_core_radius_cgs`.
    """
    arrays = _optical_arrays(result)
    return None if arrays is None else optical_core_radius_cgs(*arrays)


def _optical_arrays(result):
    """(radius, density, opacity) of a result's profile in cgs, or None without opacity."""
    p = result.profile
    if "opacity" not in p or "density" not in p:
        return None
    return tuple(_values_in(p[key], PROFILE_UNITS[key]) for key in ("radius", "density",
                                                                    "opacity"))


def _core_radius(source, core_radius, r, what):
    """R_c [cm]: given, else the rule of the result's ModelSpec (``core_radius``):
    the photosphere (Model B), else where the profile's own optical depth reaches
    2/3 (Model A with an opaque inner wind), else the base R0, else r[0]."""
    if core_radius is not None:
        q = to_quantity(core_radius, u.cm, f"{what}: core_radius")
        if not (np.isfinite(q.value) and q.value > 0):
            raise ModelError(f"{what}: core_radius = {q:g} must be > 0")
        return float(q.value)
    if isinstance(source, WindResult):
        radius = getattr(source.model, "radius", None)
        model_radius = (float(radius.to_value(u.cm)) if isinstance(radius, u.Quantity)
                        else math.nan)
        return _line_rules(source)[0](r, _optical_arrays(source), source.summary,
                                      model_radius)
    return float(r[0])


def _check_settings(settings):
    if settings is None:
        return LineSettings()
    if not isinstance(settings, LineSettings):
        raise ModelError(f"settings must be a LineSettings, not {type(settings).__name__}")
    return settings


def _velocity_grid(v, c):
    """Evenly spaced w [cm/s] over +-(1.2 v_max + 2 FWHM_broadening); c = settings.cgs."""
    return kernels.velocity_grid(float(v.max()), c.broadening_fwhm, c.n_velocity)


def _no_gas(what, Rc, r):
    rsun = u.Rsun.to(u.cm)
    return _NoGasOutsideCore(
        f"{what}: no tabulated gas outside the core radius (R_c = {Rc / rsun:.4g} Rsun, the "
        f"profile ends at {r[-1] / rsun:.4g} Rsun; a Model B profile ends at the "
        f"photosphere), so there is no line; pass a smaller core_radius"
        + (" or occultation=False" if what == "emission_profile" else ""))


# -- profiles -----------------------------------------------------------------

def emission_profile(result_or_profile: WindResult | Mapping,
                     settings: LineSettings = LineSettings(),
                     core_radius: u.Quantity | str | None = None) -> LineProfile:
    """Optically thin emission line (j proportional to rho**n) of a solved wind.

    Parameters
    ----------
    result_or_profile : WindResult or dict
        A converged result, or a dict with ``radius`` [length], ``velocity``
        [speed] and ``density`` [mass density] Quantity arrays on an
        increasing radial grid (e.g. ``WindResult.from_hdf5(path)``).
    settings : LineSettings
        Emissivity power, occultation, broadening, grid, HWZI level.
    core_radius : Quantity or str, optional
        Radius R_c of the occulting core [length].  Default for a
        WindResult: the photosphere radius (Model B), else the radius where
        the profile's own optical depth reaches 2/3 (Model A with an opaque
        inner wind), else the base radius R0; for a dict, the first
        tabulated radius (:func:`default_core_radius_cgs`).

    Returns
    -------
    LineProfile
        ``kind="emission"``, peak 1, with ``fwhm`` and ``hwzi`` (km/s).

    Raises
    ------
    ModelError
        Unusable input, or (with occultation) no tabulated gas outside R_c.

    Notes
    -----
    .. math:: F(w) = 2\\pi \\int_{v(r) > |w|} \\rho^n \\frac{r^2}{v} \\, dr

    minus, with occultation, the part behind the disk (module docstring;
    kernel :func:`windsolve.core.lines.emission_flux`).  The profile is not
    extrapolated beyond its last point.

    References
    ----------
    docs/physics.md, eq. 27 (the profile), eq. 30 (broadening), section 7
    (core radius, FWHM and HWZI).
    Lamers, H. J. G. L. M. & Cassinelli, J. P. 1999, Introduction to Stellar
    Winds (Cambridge University Press), ch. 2 (from memory).
    """
    what = "emission_profile"
    settings = _check_settings(settings)
    r, v, rho = _read_profile(result_or_profile, what)
    Rc = _core_radius(result_or_profile, core_radius, r, what)
    if settings.occultation and Rc >= r[-1]:
        raise _no_gas(what, Rc, r)
    c = settings.cgs
    w = _velocity_grid(v, c)
    f, fwhm, hwzi, ok = kernels.emission_line(r, v, rho, c.emissivity_power, Rc,
                                              c.occultation, w, c.broadening_sigma,
                                              c.hwzi_fraction)
    if not ok:
        raise _no_gas(what, Rc, r)
    return LineProfile(velocity=(w / CM_PER_KM) << KM_S, flux=f, kind="emission",
                       fwhm=(fwhm / CM_PER_KM) * KM_S, hwzi=(hwzi / CM_PER_KM) * KM_S,
                       edge_velocity=_nan_speed())


def pcygni_profile(result_or_profile: WindResult | Mapping,
                   settings: LineSettings = LineSettings(),
                   core_radius: u.Quantity | str | None = None) -> LineProfile:
    """Sobolev P Cygni profile of a pure-scattering resonance line in a solved wind.

    Parameters
    ----------
    result_or_profile : WindResult or dict
        As for :func:`emission_profile`; v(r) must not fall outward outside
        the core radius.
    settings : LineSettings
        ``line_strength`` (k_0), occultation, broadening, grid, ``edge_depth``.
    core_radius : Quantity or str, optional
        Radius R_c of the uniformly bright core [length]; defaults as for
        :func:`emission_profile`.

    Returns
    -------
    LineProfile
        ``kind="pcygni"``, F / F_c (continuum 1), with ``edge_velocity`` (km/s,
        negative).

    Raises
    ------
    ModelError
        Unusable input, no tabulated gas outside R_c, or v(r) falling outward.

    Notes
    -----
    .. math::

        \\frac{F(w)}{F_c} = 1 + \\frac{1}{R_c^2} \\int \\left[\\frac{\\beta_c}{\\beta}
            - \\mathbb{1}_{p < R_c,\\ w < 0}\\right] (1 - e^{-\\tau}) \\, dp^2

    over the resonance surface mu = -w / v(r) outside the core, with
    tau(r, mu) as in the module docstring (kernel
    :func:`windsolve.core.lines.pcygni_flux`).

    References
    ----------
    docs/physics.md, eqs. 28 and 29 (Sobolev optical depth, escape
    probability), eq. 30 (broadening), section 7 (the blue edge).
    Sobolev, V. V. 1960, Moving Envelopes of Stars (Harvard University
    Press) (the Sobolev approximation, from memory).
    Castor, J. I. 1970, MNRAS 149, 111 (escape probabilities, from memory).
    Castor, J. I. & Lamers, H. J. G. L. M. 1979, ApJS 39, 481 (from memory).
    Lamers & Cassinelli 1999, Introduction to Stellar Winds, ch. 2 and ch. 8
    (from memory).
    """
    what = "pcygni_profile"
    settings = _check_settings(settings)
    r, v, rho = _read_profile(result_or_profile, what)
    Rc = _core_radius(result_or_profile, core_radius, r, what)
    if Rc >= r[-1]:
        raise _no_gas(what, Rc, r)
    v = _monotonic_outside(r, v, Rc, what)
    c = settings.cgs
    w = _velocity_grid(v, c)
    K = kernels.sobolev_strength(r, v, rho, Rc, c.line_strength)
    F = kernels.pcygni_flux(r, v, rho, K, Rc, c.occultation, w)
    F = kernels.gaussian_broaden(F, w[1] - w[0], c.broadening_sigma, 1.0)
    edge = kernels.pcygni_edge(r, v, rho, K, Rc, c.occultation, w, c.broadening_sigma,
                               c.edge_depth)
    return LineProfile(velocity=(w / CM_PER_KM) << KM_S, flux=F, kind="pcygni",
                       fwhm=_nan_speed(), hwzi=_nan_speed(),
                       edge_velocity=(edge / CM_PER_KM) * KM_S)


def _monotonic_outside(r, v, Rc, what):
    """v with outward noise below MONOTONIC_RTOL v_max removed; ModelError for a real fall."""
    clean, i0, k = kernels.monotonic_outside(r, v, Rc, MONOTONIC_RTOL)
    if k >= 0:
        rsun = u.Rsun.to(u.cm)
        raise _NotMonotonic(
            f"{what}: v(r) falls outward outside the core radius (to {v[i0 + k] / 1e5:.4g} "
            f"km/s at r = {r[i0 + k] / rsun:.4g} Rsun after {clean[i0 + k - 1] / 1e5:.4g} "
            f"km/s further in); the Sobolev profile here needs v rising outward outside the "
            f"core radius (one resonance point per ray)")
    return clean


def line_widths(result: WindResult | Mapping, settings: LineSettings = LineSettings(),
                core_radius: u.Quantity | str | None = None) -> dict[str, u.Quantity]:
    """The widths an observer quotes, from one solved wind.

    Parameters
    ----------
    result : WindResult or dict
        As for :func:`emission_profile`.
    settings : LineSettings
        Used for both profiles.
    core_radius : Quantity or str, optional
        As for :func:`emission_profile`.

    Returns
    -------
    dict of Quantity [km/s]
        ``fwhm`` and ``hwzi`` of the emission line, ``edge_velocity`` (negative)
        of the P Cygni profile, and ``terminal_velocity`` from the result's
        summary (or the dict's ``terminal_velocity`` entry).  NaN where not
        measurable -- also when no tabulated gas lies outside the core radius
        (a Model B profile with the default core radius, the photosphere) and,
        for ``edge_velocity``, when v(r) falls outward outside the core.

    Raises
    ------
    ModelError
        Unusable input or settings.

    Notes
    -----
    Reads the arrays (appending Model B's thin flow), resolves the core
    radius, then calls :func:`widths_cgs`: the numbers are those of a sweep
    worker calling :func:`widths_cgs` on the same arrays.

    References
    ----------
    docs/physics.md, section 7: eqs. 27-30 and the observables (FWHM, HWZI,
    blue edge); eq. 23 (Model B's thin flow above the photosphere).
    """
    settings = _check_settings(settings)
    fwhm, hwzi, edge = result_widths_cgs(result, settings, core_radius)
    out = {"fwhm": (fwhm / CM_PER_KM) * KM_S, "hwzi": (hwzi / CM_PER_KM) * KM_S,
           "edge_velocity": (edge / CM_PER_KM) * KM_S}
    if isinstance(result, WindResult):
        vinf = result.summary.get("terminal_velocity")
    else:
        vinf = result.get("terminal_velocity")
    if isinstance(vinf, u.Quantity) and vinf.unit.is_equivalent(KM_S) and vinf.isscalar:
        out["terminal_velocity"] = vinf.to(KM_S)
    else:
        out["terminal_velocity"] = _nan_speed()
    return out


def result_widths_cgs(result, settings, core_radius=None):
    """(fwhm, hwzi, edge_velocity) [cm/s] of a result: :func:`line_widths` without units.

    Reads the arrays (appending Model B's thin flow) and resolves the core
    radius exactly as :func:`line_widths`, then calls :func:`widths_cgs`;
    what a sweep worker records.
    """
    what = "line_widths"
    r, v, rho = _read_profile(result, what)
    Rc = _core_radius(result, core_radius, r, what)
    return widths_cgs(r, v, rho, settings, Rc)


def widths_cgs(r, v, rho, settings, core_radius):
    """The widths of :func:`line_widths` from plain cgs arrays, without astropy.

    For sweep workers: one compiled call (kernel
    :func:`windsolve.core.lines.line_widths`), no unit handling and no
    checks of the arrays beyond what the kernels need.
    :func:`line_widths` resolves its input and calls this, so both give
    identical numbers.

    Parameters
    ----------
    r, v, rho : ndarray
        float64 radius [cm] (strictly increasing), velocity [cm/s] (> 0) and
        density [g/cm3] (> 0), finite, at least 3 points; for a Model B
        result the optically thin flow above the photosphere must already be
        appended (as :func:`line_widths` does; module docstring).
    settings : LineSettings or LineSettingsCGS
        The settings, or their ``settings.cgs`` (computed once when the
        LineSettings is made: nothing derived from the settings is
        recomputed per call).
    core_radius : float
        R_c [cm] (e.g. the photosphere, :func:`optical_core_radius_cgs`, or
        the base radius; see :func:`line_widths`).

    Returns
    -------
    (fwhm, hwzi, edge_velocity) : floats [cm/s]
        As defined in the module docstring; nan where not measurable: fwhm
        and hwzi when (with occultation) no point lies outside R_c or the
        line has no flux; edge_velocity when no point lies outside R_c, when
        v(r) falls outward outside R_c (by more than 1e-6 v_max), or when the
        trough never reaches ``edge_depth``.
    """
    c = settings._cgs if isinstance(settings, LineSettings) else settings
    if not isinstance(c, LineSettingsCGS):
        raise ModelError(f"settings must be a LineSettings, not {type(settings).__name__}")
    return kernels.line_widths(r, v, rho, float(core_radius), c.emissivity_power,
                               c.occultation, c.broadening_fwhm, c.broadening_sigma,
                               c.hwzi_fraction, c.edge_depth, c.line_strength, c.n_velocity,
                               MONOTONIC_RTOL)


def broaden(velocity, flux, fwhm, continuum=0.0):
    """Convolve a profile on an evenly spaced velocity grid with a Gaussian of given FWHM.

    Parameters
    ----------
    velocity : Quantity
        Evenly spaced, increasing velocities [speed].
    flux : array_like
        The profile at those velocities.
    fwhm : Quantity or str
        FWHM of the Gaussian [speed] (sigma = FWHM / 2.3548).
    continuum : float
        The profile's value outside the grid (0 for an emission line, 1 for
        a normalised absorption or P Cygni profile).

    Returns
    -------
    ndarray
        The broadened profile (exact convolution of the piecewise-linear
        profile; kernel :func:`windsolve.core.lines.gaussian_broaden`).
    """
    w = np.asarray(_speed_array(velocity, "broaden: velocity"))
    f = np.asarray(flux, dtype=np.float64)
    if f.shape != w.shape or w.ndim != 1 or w.size < 2:
        raise ModelError("broaden: velocity and flux must be 1-D arrays of the same length")
    dw = np.diff(w)
    if not (np.all(dw > 0) and np.allclose(dw, dw[0], rtol=1e-6, atol=0)):
        raise ModelError("broaden: the velocity grid must be evenly spaced and increasing")
    q = to_quantity(fwhm, KM_S, "broaden: fwhm")
    if not (np.isfinite(q.value) and q.value >= 0):
        raise ModelError(f"broaden: fwhm = {q:g} must be >= 0")
    sigma = q.to_value(KM_S) / FWHM_PER_SIGMA
    return kernels.gaussian_broaden(f, float(dw.mean()), sigma, float(continuum))


def _speed_array(q, where):
    """A velocity array in km/s as floats; ModelError unless a speed Quantity."""
    if not isinstance(q, u.Quantity) or not q.unit.is_equivalent(KM_S):
        raise ModelError(f"{where} must be a Quantity array of speeds (e.g. km/s)")
    return np.asarray(q.to_value(KM_S), dtype=np.float64)
