"""Line profiles from a solved wind, and the widths an observer quotes.

The manual -- the two profiles (:func:`emission_profile`, :func:`pcygni_profile`),
line strength, broadening, the velocity grid, the core radius, how the widths
(:func:`line_widths`) are measured and how accurate they are -- is docs/lines.md;
the physics is docs/physics.md, section 7.

One job per module: :mod:`.settings` (:class:`LineSettings`), :mod:`.synthesis`
(the profiles and the widths), :mod:`.core_radius` (a result's core radius),
:mod:`.thin_flow` (Model B's thin flow above the photosphere).  The compiled
kernels are :mod:`windsolve.core.lines` and :mod:`windsolve.core.profile`.  This
package re-exports every name used outside it.
"""

from ..core.profile import default_core_radius_cgs, optical_core_radius_cgs
from .settings import FWHM_PER_SIGMA, LineSettings, LineSettingsCGS
from .synthesis import (
    LineProfile,
    broaden,
    emission_profile,
    line_widths,
    pcygni_profile,
    result_widths_cgs,
    widths_cgs,
)
from .thin_flow import THIN_EXTENT, THIN_POINTS, thin_extension

__all__ = [
    "LineSettings",
    "LineSettingsCGS",
    "LineProfile",
    "emission_profile",
    "pcygni_profile",
    "line_widths",
    "widths_cgs",
    "result_widths_cgs",
    "optical_core_radius_cgs",
    "default_core_radius_cgs",
    "broaden",
    "FWHM_PER_SIGMA",
    "THIN_EXTENT",
    "THIN_POINTS",
    "thin_extension",
]
