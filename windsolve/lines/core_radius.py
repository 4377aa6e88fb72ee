"""The core radius R_c of line synthesis: given, or the rule of the result's ModelSpec.

The rules themselves are plain-float functions below the registry
(:func:`windsolve.core.profile.default_core_radius_cgs`, which the registry's
``default_core_radius`` and ``photosphere_core_radius`` call); this module finds a
result's rule and the arrays it needs (docs/lines.md, "Core radius").
"""

import math

import astropy.units as u
import numpy as np

from .._units import to_quantity
from ..core.profile import optical_core_radius_cgs
from ..errors import ModelError
from ..result import PROFILE_UNITS, WindResult
from .thin_flow import thin_extension


def _values_in(q, unit):
    """q in ``unit`` as an ndarray; no conversion when q already carries that unit object
    (profiles made by :func:`windsolve.solve` do)."""
    return q.value if q.unit is unit else q.to_value(unit)


def _line_rules(result):
    """(core_radius, extend_profile) of a result: its ModelSpec's.  A result without
    a (registered) model, e.g. read from a file without a complete model, gets rules
    that follow its summary: the ballistic flow is added above a finite photosphere
    where the profile ends, and the core is that photosphere, else as for a model
    without one (:func:`windsolve.registry.photosphere_core_radius`)."""
    from ..registry import MODEL_SPECS, photosphere_core_radius
    spec = MODEL_SPECS.get(getattr(result.model, "kind", None))
    if spec is None:
        return photosphere_core_radius, thin_extension
    return spec.core_radius, spec.extend_profile


def _optical_core(result):
    """Radius where tau = integral of kappa rho dr from outside reaches 2/3, or None.

    The disk an observer sees (and that hides the red side of the line) is
    where the gas becomes optically thick; for an isothermal (Model A)
    result that is not the base R0 when the wind itself is opaque near the
    base.  Uses the profile's own opacity; None if the whole profile is
    optically thin (tau(R0) < 2/3).  See :func:`windsolve.core.profile.optical_core_radius_cgs`.
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
