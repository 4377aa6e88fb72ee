"""Model A: the isothermal continuum-driven wind (docs/physics.md, section 4).

``model.py`` the parameters, ``kernels.py`` the compiled shooting (numba),
``width_kernels.py`` a sweep row's line widths in the same compiled call,
``solve.py`` kernels -> WindResult, ``check.py`` what ``windsolve check`` shows.
"""

from ...registry import SUMMARY_UNITS, ModelSpec, default_core_radius, lazy, register
from .check import check_isothermal
from .model import IsothermalWind
from .solve import solve_isothermal, solve_isothermal_cgs

__all__ = ["IsothermalWind", "solve_isothermal", "solve_isothermal_cgs", "check_isothermal",
           "ENTRY"]

ENTRY = register(ModelSpec(
    kind="isothermal",
    model_class=IsothermalWind,
    solve=solve_isothermal,
    solve_row=lazy("windsolve.sweep", "isothermal_row"),
    check=check_isothermal,
    summary_units={key: SUMMARY_UNITS[key] for key in (
        "mass_loss_rate", "terminal_velocity", "sonic_radius", "sonic_velocity",
        "base_eddington_factor", "outer_radius", "base_density_efolds")},
    sweep_batch=200,
    terminal_label="v at the outer radius",
    converged_note="(an isothermal flow keeps accelerating slowly: the 'terminal' "
                   "velocity is v at the outer radius)",
    core_radius=default_core_radius,
))
