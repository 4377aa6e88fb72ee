"""The model registry: one :class:`ModelSpec` per wind model.

Everything the rest of the program needs to know about a wind model lives in
its entry: the model class, its solvers (with units and unit-free), what
``windsolve check`` prints, the summary values it reports and their units,
the sweep batch size, and what line synthesis needs (the default core radius
and any flow added above the end of the profile).  ``solve``, sweeps, the
result writer, the command line, lines and families look the entry up by the
model's ``kind``; none of them branches on the kind itself.

A new model is one folder (kernels, model class, solver) plus one
:func:`register` call; see DEVELOPERS.md, "Adding a wind model".
"""

import importlib
import math
from dataclasses import dataclass, field

import astropy.units as u

__all__ = ["ModelSpec", "register", "unregister", "spec_for", "plugin_modules", "MODEL_SPECS",
           "default_core_radius", "photosphere_core_radius"]

MODEL_SPECS = {}  # kind -> ModelSpec, in registration order
MODELS = {}  # kind -> model class, for model files and result files (kept by register)

# The cgs unit of every summary value a solver reports; a model's entry adds the
# keys new to windsolve (register), so result and sweep files can carry them.
SUMMARY_UNITS = {
    "mass_loss_rate": u.g / u.s,
    "terminal_velocity": u.cm / u.s,
    "sonic_radius": u.cm,
    "sonic_velocity": u.cm / u.s,
    "photosphere_radius": u.cm,
    "photosphere_temperature": u.K,
    "photosphere_luminosity": u.erg / u.s,
    "energy_flux": u.erg / u.s,
    "base_eddington_factor": u.dimensionless_unscaled,
    "outer_radius": u.cm,
    "photosphere_velocity": u.cm / u.s,
    "sonic_temperature": u.K,
    "base_radius": u.cm,
    "base_temperature": u.K,
    "base_density": u.g / u.cm**3,
    "base_luminosity": u.erg / u.s,
    "base_density_efolds": u.dimensionless_unscaled,
}

# The line widths windsolve measures (windsolve.lines.line_widths), in the order its
# measuring kernels return them [cm/s]; observations name them so (windsolve.observe) and
# sweep tables store them as columns of these names.
LINE_WIDTHS = ("fwhm", "hwzi", "edge_velocity")


def lazy(module: str, name: str):
    """A function that imports ``module`` and calls its ``name`` on first use.

    An entry can so name code of a layer above the model's room (a sweep row's
    solve) or code that is slow to import, without importing it.

    Parameters
    ----------
    module : str
        Absolute module name, e.g. ``"windsolve.models.isothermal.solve"``.
    name : str
        Name of the function in that module.

    Returns
    -------
    callable
        Forwards its arguments to ``module.name``, imported on the first call.
    """
    found = []

    def call(*args, **kwargs):
        if not found:
            found.append(getattr(importlib.import_module(module), name))
        return found[0](*args, **kwargs)
    call.__name__ = call.__qualname__ = name
    call.__doc__ = f"{module}.{name}"
    return call


def _cm(q):
    return float(q.to_value(u.cm)) if isinstance(q, u.Quantity) else math.nan


def default_core_radius(r, optical: "tuple | None", summary: dict,
                        model_radius: float) -> float:
    """The default R_c [cm] of line synthesis for a model without a photosphere.

    The tau = 2/3 radius of ``optical`` (:func:`windsolve.core.profile.optical_core_radius_cgs`),
    else ``model_radius``, else the summary's ``base_radius``, else ``r[0]``
    (docs/physics.md, section 7, "Core radius").

    Parameters
    ----------
    r : ndarray
        Radii of the profile [cm].
    optical : tuple of ndarray or None
        (radius [cm], density [g cm^-3], opacity [cm^2 g^-1]), or None to skip the
        optical-depth rule.
    summary : dict
        The result's summary (Quantities); ``base_radius`` is used if present.
    model_radius : float
        The model's radius [cm], NaN for none.

    Returns
    -------
    float
        Core radius R_c [cm].
    """
    from .core.profile import default_core_radius_cgs
    return default_core_radius_cgs(r, optical, math.nan, model_radius,
                                   _cm(summary.get("base_radius")))


def photosphere_core_radius(r, optical: "tuple | None", summary: dict,
                            model_radius: float) -> float:
    """The default R_c [cm] of a model whose profile ends at its photosphere.

    The summary's ``photosphere_radius`` when finite, else as
    :func:`default_core_radius`.

    Parameters
    ----------
    r : ndarray
        Radii of the profile [cm].
    optical : tuple of ndarray or None
        (radius [cm], density [g cm^-3], opacity [cm^2 g^-1]), or None.
    summary : dict
        The result's summary (Quantities): ``photosphere_radius``, ``base_radius``.
    model_radius : float
        The model's radius [cm], NaN for none.

    Returns
    -------
    float
        Core radius R_c [cm].
    """
    from .core.profile import default_core_radius_cgs
    return default_core_radius_cgs(r, optical, _cm(summary.get("photosphere_radius")),
                                   model_radius, _cm(summary.get("base_radius")))


@dataclass(frozen=True)
class ModelSpec:
    """What the program needs to know about one wind model.

    Parameters
    ----------
    kind : str
        The model file's top-level ``model`` value, e.g. ``"isothermal"``.
    model_class : type
        The frozen dataclass (a :class:`~windsolve.models.WindModel`) whose
        ``kind`` this is.
    solve : callable
        ``solve(model, profile=True) -> WindResult`` (what
        :func:`windsolve.solve` calls).
    check : callable
        ``check(model, source) -> (rows, notes)``: the derived numbers
        ``windsolve check`` prints, as (label, text) pairs, and one-line notes.
    summary_units : dict
        Summary key -> cgs unit (astropy) of every value the solver reports.
        Keys new to windsolve are added to
        :data:`windsolve.result.SUMMARY_UNITS` (after the built-in ones) by
        :func:`register`, so the result file carries them.
    solve_row : callable or None
        The unit-free solve of a sweep row: ``solve_row(model, record,
        observables)`` fills ``record`` (converged, status, message, every
        :data:`windsolve.sweep.SUMMARY_COLUMNS` value in cgs and, with
        ``observables``, the widths).  Used when a sweep stores no profiles;
        None: the row goes through :attr:`solve`.
    sweep_batch : int
        Models per sweep task when the sweep file does not say (a task should
        be tens of milliseconds of work).
    terminal_label : str
        How the text summary names ``terminal_velocity``.
    converged_note : str
        A line the text summary adds under a converged result ("" for none).
    core_radius : callable
        ``core_radius(r, optical, summary, model_radius) -> R_c`` [cm]: the
        occulting core of line synthesis when the caller gives none; ``r`` and
        ``optical`` (radius, density, opacity or None) cgs arrays, ``summary``
        the result's (Quantities), ``model_radius`` [cm] or NaN (see
        :func:`default_core_radius`, :func:`photosphere_core_radius`).
    extend_profile : callable or None
        ``extend_profile(result, r, v, rho) -> (r, v, rho)`` [cgs]: gas the
        lines see beyond the end of the solved profile (Model B: the
        ballistic thin flow above its photosphere); None for none.
    photosphere_family : callable or None
        ``photosphere_family(model) -> bool``: can :func:`windsolve.family.solve_family`
        scan this model at a fixed photosphere luminosity?  None: never.
    base_family : callable or None
        ``base_family(model) -> bool``: can :func:`windsolve.family.solve_family`
        scan this model's base radius or luminosity at a fixed base
        temperature or density?  None: never.
    hint : callable or None
        ``hint(model, budget) -> str``: for a model without a solution, which
        way to move its inputs (a quick scan of at most ``budget`` seconds;
        what ``windsolve run`` adds to its one-line error); None: no hint.
    warm_start : bool
        ``solve`` also takes ``start_from``, a converged result of a nearby
        model to start its search from (sweep workers and families pass the
        previous model's).
    opacity_path : callable or None
        ``opacity_path(model) -> dict``: kappa and Gamma on the temperatures
        the wind crosses (what ``windsolve check --plot`` draws; see
        :func:`windsolve.models.diffusion.check.opacity_along`); None: the
        model has no such path (an isothermal wind).
    """

    kind: str
    model_class: type
    solve: object
    check: object
    summary_units: dict = field(default_factory=dict)
    solve_row: object = None
    sweep_batch: int = 25
    terminal_label: str = "terminal velocity"
    converged_note: str = ""
    core_radius: object = default_core_radius
    extend_profile: object = None
    photosphere_family: object = None
    base_family: object = None
    warm_start: bool = False
    hint: object = None
    opacity_path: object = None


def register(spec: ModelSpec, replace: bool = False) -> ModelSpec:
    """Add a model to the registry (and its class to :data:`windsolve.models.MODELS`).

    Summary keys new to windsolve are appended to :data:`SUMMARY_UNITS`.

    Parameters
    ----------
    spec : ModelSpec
        The model's entry.
    replace : bool
        Replace an entry of the same kind instead of refusing it.

    Returns
    -------
    ModelSpec
        ``spec``.

    Raises
    ------
    ValueError
        The kind is taken (unless ``replace``), the class's ``kind`` differs from
        the entry's, or a summary key comes with a unit other than windsolve's.
    """
    if spec.model_class.kind != spec.kind:
        raise ValueError(f"ModelSpec {spec.kind!r}: its model_class has kind "
                         f"{spec.model_class.kind!r}")
    if spec.kind in MODEL_SPECS and not replace:
        raise ValueError(f"a model of kind {spec.kind!r} is already registered")
    for key, unit in spec.summary_units.items():
        if key in SUMMARY_UNITS and SUMMARY_UNITS[key] != unit:
            raise ValueError(f"ModelSpec {spec.kind!r}: summary {key} in {unit}, but "
                             f"windsolve writes it in {SUMMARY_UNITS[key]}")
        SUMMARY_UNITS.setdefault(key, unit)
    MODEL_SPECS[spec.kind] = spec
    MODELS[spec.kind] = spec.model_class
    return spec


def unregister(kind: str) -> None:
    """Remove a model registered by :func:`register` (tests use it to clean up).

    Summary keys it added stay known; an unknown kind is ignored.

    Parameters
    ----------
    kind : str
        The model's ``kind``.
    """
    MODEL_SPECS.pop(kind, None)
    MODELS.pop(kind, None)


BUILTIN_PACKAGE = "windsolve."


def plugin_modules() -> list:
    """Modules that define registered model classes outside windsolve.

    Sweep pool workers import them (registering their models there too) before
    they solve.

    Returns
    -------
    list of str
        Module names, sorted.
    """
    return sorted({spec.model_class.__module__ for spec in MODEL_SPECS.values()
                   if not spec.model_class.__module__.startswith(BUILTIN_PACKAGE)})


def spec_for(model_or_kind) -> ModelSpec:
    """The :class:`ModelSpec` of a model (or of a kind string).

    Parameters
    ----------
    model_or_kind : WindModel or str
        A model, or its ``kind``.

    Returns
    -------
    ModelSpec

    Raises
    ------
    KeyError
        No model of that kind is registered.
    """
    kind = model_or_kind if isinstance(model_or_kind, str) else model_or_kind.kind
    return MODEL_SPECS[kind]
