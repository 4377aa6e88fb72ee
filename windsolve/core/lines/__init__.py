"""Line-profile kernels (cgs floats): optically thin emission, Sobolev P Cygni, broadening.

These are the compiled twins of :mod:`windsolve.lines`, which validates input,
converts units once and calls them.  Every kernel takes plain float64 arrays in
cgs: radius ``r`` [cm], velocity ``v`` [cm/s], density ``rho`` [g/cm3] on one
increasing radial grid, and observed Doppler velocities ``w`` [cm/s] (positive
= red-shifted, away from the observer).

Geometry.  The observer lies along +z.  A parcel at radius r moving radially
outward with speed v(r), at direction cosine mu = z / r, is seen at
w = -v mu, at impact parameter p = r sqrt(1 - mu^2).  A shell of radius r
therefore spreads its light uniformly over -v(r) < w < v(r) (Lamers &
Cassinelli 1999, Introduction to Stellar Winds, ch. 2, from memory).  Parcels
behind the opaque core of radius R_c (z < 0 and p < R_c) are hidden: for a
shell with r > R_c that is its red part w > v(r) sqrt(1 - (R_c / r)^2).

One job per module:

* :mod:`.grid` -- the sub-divided radial grid (ln v and ln rho linear in r;
  the interpolation is described there), the velocity grid, the checks of
  v(r) the fast paths rely on;
* :mod:`.emission` -- the optically thin emission line F(w);
* :mod:`.sobolev` -- Sobolev optical depth, escape probabilities, the P Cygni
  profile and its blue edge;
* :mod:`.broadening` -- the Gaussian convolution;
* :mod:`.measure` -- FWHM and HWZI, and :func:`measure.line_widths`, everything
  :func:`windsolve.lines.line_widths` does after units in one call.

The optical depth of the profile and the optical-core radius live below these,
in :mod:`windsolve.core.profile`.  This package re-exports the names the rest
of windsolve, the tests and the benchmarks use.
"""

from .broadening import KERNEL_SIGMAS, gaussian_broaden, gaussian_weights
from .emission import emission_flux, emission_flux_general, emission_flux_monotonic
from .grid import (
    BROADENING_MARGIN,
    GRID_MARGIN,
    MONOTONIC_RTOL,
    NSUB,
    monotonic_outside,
    nondecreasing,
    refine,
    velocity_grid,
)
from .measure import emission_line, line_widths, outermost_crossings
from .sobolev import (
    EDGE_XTOL,
    N_EDGE_SCAN,
    escape_probabilities,
    pcygni_edge,
    pcygni_flux,
    pcygni_flux_any,
    sobolev_strength,
    sobolev_tau,
    velocity_gradient,
)

__all__ = [
    "BROADENING_MARGIN", "EDGE_XTOL", "GRID_MARGIN", "KERNEL_SIGMAS", "MONOTONIC_RTOL",
    "NSUB", "N_EDGE_SCAN",
    "emission_flux", "emission_flux_general", "emission_flux_monotonic", "emission_line",
    "escape_probabilities", "gaussian_broaden", "gaussian_weights", "line_widths",
    "monotonic_outside", "nondecreasing", "outermost_crossings", "pcygni_edge", "pcygni_flux",
    "pcygni_flux_any",
    "refine", "sobolev_strength", "sobolev_tau", "velocity_gradient", "velocity_grid",
]
