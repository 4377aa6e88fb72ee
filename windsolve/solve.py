"""``solve(model) -> WindResult``: the one entry to every model's solver.

The solver is the model's registry entry's (:mod:`windsolve.registry`); each
lives in its model's room (e.g. :mod:`windsolve.models.isothermal.solve`),
where units are converted once and the compiled kernels' status codes become
words.
"""

from typing import TYPE_CHECKING

from .registry import spec_for
from .result import WindResult

if TYPE_CHECKING:
    from .models import WindModel

__all__ = ["solve"]


def solve(model: "WindModel", profile: bool = True,
          start_from: "WindResult | None" = None) -> WindResult:
    """Solve a wind model; returns a :class:`~windsolve.result.WindResult`.

    Model A (:class:`~windsolve.models.IsothermalWind`) finds the mass-loss
    rate for which the solution through the innermost saddle meets the base
    density; Model B (:class:`~windsolve.models.DiffusionWind`) the regular
    solution through its critical point that meets the photosphere (or base)
    anchor.

    Parameters
    ----------
    model : WindModel
        For example from :func:`windsolve.load_model` or
        ``IsothermalWind(...)``.
    profile : bool
        Store the profiles (default).  Sweeps that only need the summary
        pass False, which skips the stored profile (Model A: the second
        inward integration and the dense output); the summary values agree
        to the integration tolerance.
    start_from : WindResult, optional
        A converged result of a nearby model (the previous one of a sweep or
        a scan), for solvers that can start from it: a base-anchored Model B
        solve then skips its first search for the photosphere (docs/physics.md,
        section 8).  The answer is the same to the solution's tolerance
        (about 1e-9 relative); ignored by the other solvers.

    Returns
    -------
    WindResult
        Always returned; ``result.converged`` says whether the transonic
        solution was found out to the outer radius, ``result.message`` why not.
        Summary and profile values carry units (cgs).

    Raises
    ------
    ModelError
        Only for input that can be checked before solving and was not when
        the model was built (e.g. an opacity table that cannot be read).
        A model without a solution is not an error: see ``converged``.

    References
    ----------
    docs/physics.md, eqs. 13-16 (Model A, section 4), eqs. 19-24 (Model B,
    section 5), eqs. 25, 26 (critical points) and section 8 (numerical method).
    """
    spec = spec_for(model)
    if start_from is not None and spec.warm_start:
        return spec.solve(model, profile, start_from=start_from)
    return spec.solve(model, profile)
