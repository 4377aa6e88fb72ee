"""Model B: the optically thick wind with radiative diffusion (docs/physics.md, section 5).

``model.py`` the parameters, ``kernels.py`` the compiled right-hand side and
legs (numba), ``shooting.py`` the photosphere- and base-anchored shooting on
the kernels (plain floats), ``solve.py`` shooting -> WindResult, ``check.py``
what ``windsolve check`` shows.
"""

from ...registry import SUMMARY_UNITS, ModelSpec, lazy, photosphere_core_radius, register
from .check import check_diffusion, opacity_along
from .model import DiffusionWind
from .solve import diffusion_hint, solve_diffusion

__all__ = ["DiffusionWind", "solve_diffusion", "check_diffusion", "ENTRY"]

ENTRY = register(ModelSpec(
    kind="diffusion",
    model_class=DiffusionWind,
    solve=solve_diffusion,
    check=check_diffusion,
    summary_units={key: SUMMARY_UNITS[key] for key in (
        "mass_loss_rate", "terminal_velocity", "sonic_radius", "sonic_velocity",
        "photosphere_radius", "photosphere_temperature", "photosphere_luminosity",
        "energy_flux", "photosphere_velocity", "sonic_temperature", "base_radius",
        "base_temperature", "base_density", "base_luminosity")},
    sweep_batch=10,
    core_radius=photosphere_core_radius,
    extend_profile=lazy("windsolve.lines", "thin_extension"),
    photosphere_family=lambda model: model.anchor == "photosphere",
    base_family=lambda model: model.anchor == "base",
    warm_start=True,
    hint=diffusion_hint,
    opacity_path=opacity_along,
))
