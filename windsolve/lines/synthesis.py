"""Line synthesis from a solved wind: :func:`emission_profile`, :func:`pcygni_profile`,
:func:`line_widths` and its astropy-free twins :func:`result_widths_cgs` and
:func:`widths_cgs`, and :func:`broaden`.

Reads a profile (a WindResult, with Model B's thin flow appended, or a dict of
Quantities), resolves the core radius and calls the kernels of
:mod:`windsolve.core.lines` once; what is computed and measured is in docs/lines.md.
"""

import io
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from .._units import to_quantity
from ..core import lines as kernels
from ..errors import ModelError
from ..result import PROFILE_UNITS, WindResult
from .core_radius import _core_radius, _line_rules, _values_in
from .settings import (
    CM_PER_KM,
    FWHM_PER_SIGMA,
    KM_S,
    LineSettings,
    LineSettingsCGS,
    _check_settings,
)

if TYPE_CHECKING:
    from pathlib import Path

GRID_MARGIN = kernels.GRID_MARGIN  # the grid spans this many v_max ...
BROADENING_MARGIN = kernels.BROADENING_MARGIN  # ... plus this many broadening FWHM
MONOTONIC_RTOL = kernels.MONOTONIC_RTOL  # a fall of v by less than this * v_max is noise
DEFAULT_SETTINGS = LineSettings()  # the default of every function here (frozen: shared)


class _NoGasOutsideCore(ModelError):
    """No tabulated point lies outside the core radius (line_widths gives NaN)."""


def _nan_speed():
    return np.nan * KM_S


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
        [km/s] as defined in docs/lines.md; NaN where not defined
        (fwhm and hwzi for P Cygni, edge_velocity for emission) or not
        measurable.
    fastest : Quantity or None
        [km/s] the largest v of the gas that makes the line (outside the core
        radius); the blue edge and the HWZI trace this speed.
    slows_outward : bool
        True when v(r) falls outward somewhere outside the core radius (by
        more than MONOTONIC_RTOL v_max): the fastest gas is not the outermost,
        and the edge traces ``fastest``, not the terminal velocity; the P
        Cygni profile then sums every resonance point of each ray
        (docs/physics.md, section 7).
    """

    velocity: object
    flux: object
    kind: str
    fwhm: object
    hwzi: object
    edge_velocity: object
    fastest: object = None
    slows_outward: bool = False

    def to_csv(self, path: "str | Path") -> "Path":
        """Write ``velocity_km_s,flux`` (one header line, then one row per point).

        Written under a temporary name and renamed when complete.

        Parameters
        ----------
        path : str or Path
            The CSV file.

        Returns
        -------
        Path
            The file written.

        Raises
        ------
        OutputError
            The file cannot be written.
        """
        from ..io import write_text
        data = np.column_stack([self.velocity.to_value(KM_S), np.asarray(self.flux)])
        buffer = io.StringIO()
        np.savetxt(buffer, data, delimiter=",", header="velocity_km_s,flux", comments="",
                   fmt="%.10g")
        return write_text(path, buffer.getvalue())


# -- input ------------------------------------------------------------------

_INPUT_UNITS = tuple((key, PROFILE_UNITS[key]) for key in ("radius", "velocity", "density"))


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
                     settings: LineSettings = DEFAULT_SETTINGS,
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

    minus, with occultation, the part behind the disk (docs/lines.md;
    kernel :func:`windsolve.core.lines.emission.emission_flux`).  The profile is not
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
    fastest, slows = _fastest(r, v, Rc if settings.occultation else r[0])
    return LineProfile(velocity=(w / CM_PER_KM) << KM_S, flux=f, kind="emission",
                       fwhm=(fwhm / CM_PER_KM) * KM_S, hwzi=(hwzi / CM_PER_KM) * KM_S,
                       edge_velocity=_nan_speed(), fastest=fastest, slows_outward=slows)


def pcygni_profile(result_or_profile: WindResult | Mapping,
                   settings: LineSettings = DEFAULT_SETTINGS,
                   core_radius: u.Quantity | str | None = None) -> LineProfile:
    """Sobolev P Cygni profile of a pure-scattering resonance line in a solved wind.

    Parameters
    ----------
    result_or_profile : WindResult or dict
        As for :func:`emission_profile`; v(r) may rise and fall outward.
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
        Unusable input, or no tabulated gas outside R_c.

    Notes
    -----
    .. math::

        \\frac{F(w)}{F_c} = 1 + \\frac{1}{R_c^2} \\int \\left[\\frac{\\beta_c}{\\beta}
            - \\mathbb{1}_{p < R_c,\\ w < 0}\\right] (1 - e^{-\\tau}) \\, dp^2

    over the resonance surface mu = -w / v(r) outside the core, with
    tau(r, mu) as in docs/lines.md (kernel
    :func:`windsolve.core.lines.sobolev.pcygni_flux`).  Where v(r) falls
    outward the surface folds and a ray meets it more than once; then every
    resonance point is summed in order along the ray, each dimming the light
    behind it (kernel :func:`windsolve.core.lines.sobolev.pcygni_flux_any`;
    Rybicki & Hummer 1978 without their non-local coupling), and the blue
    edge lies near -v_max (``LineProfile.fastest``), not -v_inf.

    References
    ----------
    docs/physics.md, eqs. 28 and 29 (Sobolev optical depth, escape
    probability), eq. 30 (broadening), section 7 (the blue edge).
    Sobolev, V. V. 1960, Moving Envelopes of Stars (Harvard University
    Press) (the Sobolev approximation, from memory).
    Castor, J. I. 1970, MNRAS 149, 111 (escape probabilities, from memory).
    Castor, J. I. & Lamers, H. J. G. L. M. 1979, ApJS 39, 481 (from memory).
    Rybicki, G. B. & Hummer, D. G. 1978, ApJ 219, 654 (several resonance
    points per ray, from memory).
    Lamers & Cassinelli 1999, Introduction to Stellar Winds, ch. 2 and ch. 8
    (from memory).
    """
    what = "pcygni_profile"
    settings = _check_settings(settings)
    r, v, rho = _read_profile(result_or_profile, what)
    Rc = _core_radius(result_or_profile, core_radius, r, what)
    if Rc >= r[-1]:
        raise _no_gas(what, Rc, r)
    clean, _, fall = kernels.monotonic_outside(r, v, Rc, MONOTONIC_RTOL)
    slows = fall >= 0
    if not slows:
        v = clean  # outward noise below MONOTONIC_RTOL v_max removed: one point per ray
    c = settings.cgs
    w = _velocity_grid(v, c)
    K = kernels.sobolev_strength(r, v, rho, Rc, c.line_strength)
    flux = kernels.pcygni_flux_any if slows else kernels.pcygni_flux
    F = flux(r, v, rho, K, Rc, c.occultation, w)
    F = kernels.gaussian_broaden(F, w[1] - w[0], c.broadening_sigma, 1.0)
    edge = kernels.pcygni_edge(r, v, rho, K, Rc, c.occultation, w, c.broadening_sigma,
                               c.edge_depth)
    fastest, _ = _fastest(r, v, Rc)
    return LineProfile(velocity=(w / CM_PER_KM) << KM_S, flux=F, kind="pcygni",
                       fwhm=_nan_speed(), hwzi=_nan_speed(),
                       edge_velocity=(edge / CM_PER_KM) * KM_S, fastest=fastest,
                       slows_outward=slows)


def _fastest(r, v, r_start):
    """(largest v outside r_start [km/s Quantity], whether v falls outward there)."""
    _, i0, fall = kernels.monotonic_outside(r, v, r_start, MONOTONIC_RTOL)
    return (v[i0:].max() / CM_PER_KM) * KM_S, bool(fall >= 0)


def line_widths(result: WindResult | Mapping, settings: LineSettings = DEFAULT_SETTINGS,
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
        (a Model B profile with the default core radius, the photosphere).
        Where v(r) falls outward outside the core (Model B's thin flow when
        Gamma_es < 1) the edge and the HWZI trace the fastest gas, v_max,
        not the terminal velocity.

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


def result_widths_cgs(result: WindResult | Mapping, settings: LineSettings,
                      core_radius: "u.Quantity | str | None" = None) -> tuple:
    """(fwhm, hwzi, edge_velocity) [cm/s] of a result: :func:`line_widths` without units.

    Reads the arrays (appending Model B's thin flow) and resolves the core
    radius exactly as :func:`line_widths`, then calls :func:`widths_cgs`;
    what a sweep worker records.

    Parameters
    ----------
    result : WindResult or mapping
        A result, or a profile mapping of radius, velocity and density Quantities.
    settings : LineSettings
        The line settings.
    core_radius : Quantity [length], str or None
        R_c; None for the model's default (docs/physics.md, section 7).

    Returns
    -------
    tuple of float
        (fwhm, hwzi, edge_velocity) [cm s^-1], NaN where not measurable.

    Raises
    ------
    ModelError
        The profile or the core radius is unusable (as :func:`line_widths`).
    """
    what = "line_widths"
    r, v, rho = _read_profile(result, what)
    Rc = _core_radius(result, core_radius, r, what)
    return widths_cgs(r, v, rho, settings, Rc)


def widths_cgs(r: np.ndarray, v: np.ndarray, rho: np.ndarray,
               settings: LineSettings | LineSettingsCGS, core_radius: float) -> tuple:
    """The widths of :func:`line_widths` from plain cgs arrays, without astropy.

    For sweep workers: one compiled call (kernel
    :func:`windsolve.core.lines.measure.line_widths`), no unit handling and no
    checks of the arrays beyond what the kernels need.
    :func:`line_widths` resolves its input and calls this, so both give
    identical numbers.

    Parameters
    ----------
    r, v, rho : ndarray
        float64 radius [cm] (strictly increasing), velocity [cm/s] (> 0) and
        density [g/cm3] (> 0), finite, at least 3 points; for a Model B
        result the optically thin flow above the photosphere must already be
        appended (as :func:`line_widths` does; docs/lines.md).
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
        As defined in docs/lines.md; nan where not measurable: fwhm
        and hwzi when (with occultation) no point lies outside R_c or the
        line has no flux; edge_velocity when no point lies outside R_c, when
        v(r) falls outward outside R_c (by more than 1e-6 v_max), or when the
        trough never reaches ``edge_depth``.

    Raises
    ------
    ModelError
        ``settings`` is neither a LineSettings nor a LineSettingsCGS.
    """
    c = settings._cgs if isinstance(settings, LineSettings) else settings
    if not isinstance(c, LineSettingsCGS):
        raise ModelError(f"settings must be a LineSettings, not {type(settings).__name__}")
    return kernels.line_widths(r, v, rho, float(core_radius), c.emissivity_power,
                               c.occultation, c.broadening_fwhm, c.broadening_sigma,
                               c.hwzi_fraction, c.edge_depth, c.line_strength, c.n_velocity,
                               MONOTONIC_RTOL)


def broaden(velocity: u.Quantity, flux: "np.ndarray | list", fwhm: "u.Quantity | str",
            continuum: float = 0.0) -> np.ndarray:
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
        profile; kernel :func:`windsolve.core.lines.broadening.gaussian_broaden`).

    Raises
    ------
    ModelError
        The arrays differ in shape or are not 1-D, the grid is not evenly spaced
        and increasing, or ``fwhm`` is negative or not finite.

    References
    ----------
    docs/physics.md, eq. 30.
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
