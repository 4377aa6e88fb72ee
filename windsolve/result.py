"""The one result object every solve returns, and its HDF5 form.

The writer, the plots and the command line read only :class:`WindResult`.
A result always says what happened: ``converged`` is True only for a
complete transonic solution out to the outer radius; otherwise ``status``
(short, machine-readable) and ``message`` (one line, in words) say what
failed, and the numbers that could not be computed are NaN.
"""

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np

from .errors import OutputError
from .io import dataset, open_hdf5, stamp, strings, write_hdf5
from .registry import SUMMARY_UNITS
from .status import STATUSES, check_statuses

__all__ = ["WindResult", "SolutionCGS", "PROFILE_UNITS", "SUMMARY_UNITS", "STATUSES",
           "CRITICAL_UNITS"]

MSUN_PER_YR = u.Msun / u.yr

# Datasets of /profile and attributes of /summary, with their cgs units.
PROFILE_UNITS = {
    "radius": u.cm,
    "velocity": u.cm / u.s,
    "density": u.g / u.cm**3,
    "temperature": u.K,
    "luminosity": u.erg / u.s,
    "opacity": u.cm**2 / u.g,
    "eddington_factor": u.dimensionless_unscaled,
    "optical_depth": u.dimensionless_unscaled,
}
# (the cgs unit of every summary value: declared with the models, windsolve.registry)

# The numbers of each critical point (WindResult.critical_points), with their units:
# dv/dr along the two separatrices.
CRITICAL_UNITS = {"radius": u.cm, "slope_plus": 1 / u.s, "slope_minus": 1 / u.s}


def _critical_with_units(cp):
    """A critical point's dict with Quantities (cgs floats in: SolutionCGS, the file)."""
    return {key: (value << CRITICAL_UNITS[key] if key in CRITICAL_UNITS else value)
            for key, value in cp.items()}

# A Model A solution is flagged ``hydrostatic`` when its base lies more than
# this many density e-folds below the sonic point: ln(rho0 / rho_c) > 30,
# rho_c = Mdot / (4 pi r_c^2 a), a density contrast above 1e13.  Below the
# sonic point an isothermal flow is in hydrostatic equilibrium to (v/a)^2, so
# its density falls barometrically, and for Parker's wind v(R0)/a =
# (r_c/R0)^2 exp(3/2 - 2 r_c/R0) (Lamers & Cassinelli 1999, "Introduction to
# Stellar Winds", ch. 3, from memory): ln(rho0/rho_c) = 2 r_c/R0 - 3/2, so the
# criterion is r_c > 15.75 R0 there.  Such a base is a static atmosphere; its
# "mass-loss rate" is the exponentially small leak of the atmosphere's top
# (it changes by e for a change of 1/(2 r_c/R0) in ln r_c), not a wind
# launched at R0.  Winds proper stay far below (configs/parker_reference.toml,
# r_c = 4 R0: 6.5 e-folds; the porous demo, r_c = 1.03 R0: 5).
HYDROSTATIC_EFOLDS = 30.0


def base_density_efolds(mdot: float, rc: float, a: float, rho0: float) -> float:
    """Density e-folds from the base to the sonic point, ln(rho0 / rho_c).

    With rho_c = Mdot / (4 pi r_c^2 a) (continuity, docs/physics.md, eq. 13 at the
    critical point of eq. 16); see :data:`HYDROSTATIC_EFOLDS`.

    Parameters
    ----------
    mdot : float
        Mass-loss rate [g s^-1].
    rc : float
        Critical (sonic) radius [cm].
    a : float
        Isothermal sound speed [cm s^-1].
    rho0 : float
        Base density [g cm^-3].

    Returns
    -------
    float
        ln(rho0 / rho_c) [dimensionless]; NaN unless all four are positive.
    """
    if not (mdot > 0.0 and rc > 0.0 and a > 0.0 and rho0 > 0.0):
        return float("nan")
    return float(np.log(rho0 * 4.0 * np.pi * rc * rc * a / mdot))


def write_profile(group, profile: dict) -> None:
    """Write profile columns as cgs datasets with units (results, families, sweeps).

    Parameters
    ----------
    group : h5py.Group
        The group to write into.
    profile : dict
        Column name (a key of :data:`PROFILE_UNITS`) -> Quantity or cgs values.
    """
    for key, q in profile.items():
        unit = PROFILE_UNITS[key]
        values = q.to_value(unit) if hasattr(q, "to_value") else q  # sweeps send cgs lists
        dataset(group, key, np.asarray(values, dtype=np.float64), _unit_text(unit))


def _unit_text(unit):
    text = u.Unit(unit).to_string()
    return text if text else "1"  # CF convention for dimensionless


@dataclass(slots=True)
class SolutionCGS:
    """A solve's outcome in plain cgs floats and arrays: what :class:`WindResult` wraps in units.

    A solver builds one and :meth:`WindResult.from_cgs` puts the units on
    (once, at the boundary); a sweep worker reads its numbers directly, so a
    row costs no unit handling.

    Attributes
    ----------
    converged : bool
        As :attr:`WindResult.converged`.
    status : str
        One of :data:`windsolve.status.STATUSES`.
    message : str
        One line, in words.
    summary : dict of float
        Summary key -> value in the cgs unit of :data:`SUMMARY_UNITS`
        [g/s, cm/s, cm, K, erg/s, or dimensionless]; NaN when unknown.
    profile : dict of ndarray
        Profile key -> float array in the cgs unit of :data:`PROFILE_UNITS`,
        on one increasing radial grid; empty when none was computed.
    critical_points : list of dict
        As :attr:`WindResult.critical_points` (``radius`` in cm).
    counters : dict
        ``shots`` (trial integrations), ``seconds`` (wall time) and
        model-specific counts.
    ln_mdot : float
        ln of the mass-loss rate [g/s] the shooting converged to (NaN if none).
    widths : tuple of float or None
        (FWHM, HWZI, blue edge) [cm/s] when the solver measured them in the
        same compiled call (Model A sweep rows), else None.
    """

    converged: bool
    status: str
    message: str
    summary: dict
    profile: dict = field(default_factory=dict)
    critical_points: list = field(default_factory=list)
    counters: dict = field(default_factory=dict)
    ln_mdot: float = math.nan
    widths: tuple | None = None


@dataclass
class WindResult:
    """Outcome of :func:`windsolve.solve`.

    Attributes
    ----------
    model : WindModel
        The model that was solved (resolved, defaults filled in).
    converged : bool
        True for a complete transonic solution out to the outer radius.
    status : str
        Short code, one of :data:`STATUSES` (which gives each one's meaning):
        ``converged``, ``no_critical_point``, ``no_saddle``, ``stalled``,
        ``second_singular_point``, ``no_bracket``, ``sonic_point_on_base``,
        ``no_solution``, ``off_table``, ``fallback``, ``failed`` (and, for sweep
        rows only, ``error``).  A converged Model A solution may also be
        flagged :attr:`hydrostatic`.
    message : str
        One line saying, in words, what happened.
    summary : dict of Quantity
        ``mass_loss_rate`` [g/s], ``terminal_velocity`` [cm/s; Model A: v at
        the outer radius], ``sonic_radius`` [cm], ``sonic_velocity`` [cm/s]
        and model-specific extras (Model B: ``photosphere_radius`` [cm],
        ``photosphere_temperature`` [K], ``photosphere_luminosity`` [erg/s],
        ``energy_flux`` [erg/s], ...; units in ``SUMMARY_UNITS``); NaN when
        unknown.
    profile : dict of Quantity arrays
        On one increasing radial grid: ``radius`` [cm], ``velocity`` [cm/s],
        ``density`` [g/cm3], ``temperature`` [K], ``luminosity`` [erg/s,
        radiative, comoving], ``opacity`` [cm2/g, kappa_eff],
        ``eddington_factor`` [dimensionless] and, for Model B,
        ``optical_depth``.  Empty when no solution was found.
    critical_points : list of dict
        Every root of the critical condition on the radial range (for the
        converged mass-loss rate): ``radius`` [Quantity, cm], ``kind`` (text:
        ``saddle``, ``node``, ...), ``slope_plus`` and ``slope_minus``
        [Quantity, 1/s: dv/dr along the two separatrices].
    counters : dict
        ``shots`` (trial integrations), ``seconds`` (wall time of the solve).
    hydrostatic : bool (property)
        True when the base lies more than :data:`HYDROSTATIC_EFOLDS` density
        e-folds below the sonic point (summary ``base_density_efolds``):
        the base is a static atmosphere and the mass-loss rate its
        exponentially small leak, not a wind (Model A only; see the README).

    References
    ----------
    docs/physics.md: section 4 (Model A), section 5 (Model B), eq. 12
    (``eddington_factor``), section 9 (the file layout).
    """

    model: object
    converged: bool
    status: str
    message: str
    summary: dict = field(default_factory=dict)
    profile: dict = field(default_factory=dict)
    critical_points: list = field(default_factory=list)
    counters: dict = field(default_factory=dict)

    @classmethod
    def from_cgs(cls, model, solution: SolutionCGS) -> "WindResult":
        """The result of ``model`` from its unit-free :class:`SolutionCGS`.

        Parameters
        ----------
        model : WindModel
            The model that was solved.
        solution : SolutionCGS
            Its outcome in cgs; the summary values get the units of
            :data:`SUMMARY_UNITS`, the profile arrays (not copied) those of
            :data:`PROFILE_UNITS`, in that order.

        Returns
        -------
        WindResult
        """
        summary = {key: value * SUMMARY_UNITS[key] for key, value in solution.summary.items()}
        profile = {key: solution.profile[key] << unit for key, unit in PROFILE_UNITS.items()
                   if key in solution.profile}
        return cls(model, solution.converged, solution.status, solution.message, summary,
                   profile, [_critical_with_units(cp) for cp in solution.critical_points],
                   solution.counters)

    def to_cgs(self) -> SolutionCGS:
        """This result without units: a :class:`SolutionCGS` (the inverse of :meth:`from_cgs`).

        ``ln_mdot`` is ln of the summary's mass-loss rate [g/s]; ``widths`` None.
        """
        summary = {key: float(q.to_value(SUMMARY_UNITS[key])) for key, q in self.summary.items()}
        profile = {key: q.to_value(PROFILE_UNITS[key]) for key, q in self.profile.items()}
        mdot = summary.get("mass_loss_rate", math.nan)
        cps = [{key: (float(q.to_value(CRITICAL_UNITS[key])) if key in CRITICAL_UNITS else q)
                for key, q in cp.items()} for cp in self.critical_points]
        return SolutionCGS(self.converged, self.status, self.message, summary, profile,
                           cps, dict(self.counters),
                           math.log(mdot) if mdot > 0 else math.nan)

    @property
    def hydrostatic(self) -> bool:
        """Is the base a hydrostatic atmosphere rather than a wind? (see HYDROSTATIC_EFOLDS)"""
        q = self.summary.get("base_density_efolds")
        return bool(q is not None and np.isfinite(q.value) and q.value > HYDROSTATIC_EFOLDS)

    # -- text ---------------------------------------------------------------
    def summary_lines(self) -> list[str]:
        """Short human summary.

        Returns
        -------
        list of str
            One line per known summary value, in astronomers' units
            (Msun/yr, Rsun, km/s, K, Lsun), after a line with the message.
        """
        from .registry import spec_for

        s = self.summary
        name = getattr(self.model, "name", "")
        lines = [f"{name} ({self.model.kind} wind): {self.message}"]

        def show(label, key, unit, fmt=".4g"):
            q = s.get(key)
            if q is not None and np.isfinite(q.value):
                lines.append(f"  {label:<26s} {q.to_value(unit):{fmt}} {u.Unit(unit).to_string()}")

        show("mass-loss rate", "mass_loss_rate", MSUN_PER_YR)
        show("mass-loss rate", "mass_loss_rate", u.g / u.s)
        show("sonic (critical) radius", "sonic_radius", u.Rsun)
        show("sonic velocity", "sonic_velocity", u.km / u.s)
        spec = spec_for(self.model)
        show(spec.terminal_label, "terminal_velocity", u.km / u.s)
        show("sonic temperature", "sonic_temperature", u.K)
        show("photosphere radius", "photosphere_radius", u.Rsun)
        show("photosphere temperature", "photosphere_temperature", u.K)
        show("photosphere luminosity", "photosphere_luminosity", u.Lsun)
        show("photosphere velocity", "photosphere_velocity", u.km / u.s)
        show("energy flux Edot", "energy_flux", u.Lsun)
        show("base radius", "base_radius", u.Rsun)
        show("base temperature", "base_temperature", u.K)
        show("base density", "base_density", u.g / u.cm**3)
        show("base luminosity", "base_luminosity", u.Lsun)
        show("outer radius", "outer_radius", u.Rsun)
        porous = getattr(self.model, "porosity_length", None) is not None
        show("base Gamma_eff (porous)" if porous else "base Gamma_eff", "base_eddington_factor",
             u.dimensionless_unscaled)
        gamma_es = self._base_gamma_es()
        if gamma_es is not None:
            lines.append(f"  {'base Gamma_es':<26s} {gamma_es:.4g}   (electron scattering "
                         f"alone: L0 / L_Edd)")
        show("density e-folds base->r_c", "base_density_efolds", u.dimensionless_unscaled,
             ".4g")
        if self.hydrostatic:
            lines.append(f"  HYDROSTATIC: the base lies more than {HYDROSTATIC_EFOLDS:g} density "
                         f"e-folds below the sonic point; it is a static atmosphere and the "
                         f"mass-loss rate its exponentially small leak, not a wind")
        if spec.converged_note and self.converged:
            lines.append(f"  {spec.converged_note}")
        return lines

    def _base_gamma_es(self):
        """L0 / L_Edd(kappa_es) of a model with a base Eddington factor (Model A), else None."""
        from .physics import eddington_factor, electron_scattering_opacity
        model = self.model
        if "base_eddington_factor" not in self.summary:
            return None
        try:
            kes = electron_scattering_opacity(model.X, model.Z)
            return float(eddington_factor(model.luminosity, model.mass, kes))
        except (AttributeError, TypeError, ValueError):
            return None  # a file without a model, or a model without these values

    def __str__(self):
        return "\n".join(self.summary_lines())

    def __repr__(self):
        name = getattr(self.model, "name", "") or ""
        kind = getattr(self.model, "kind", "?")
        mdot = self.summary.get("mass_loss_rate")
        rate = (f", Mdot = {mdot.to_value(MSUN_PER_YR):.4g} Msun/yr"
                if mdot is not None and np.isfinite(mdot.value) else "")
        n = len(self.profile.get("radius", ()))
        return (f"<WindResult {name!r} ({kind}): {self.status}{rate}, "
                f"{n} profile points>")

    def _repr_html_(self):
        from ._units import chosen_units, html_summary
        pick = chosen_units(self.model)
        rows = [("status", self.status), ("message", self.message)]
        for key, q in self.summary.items():
            if np.isfinite(q.value):
                rows.append((key, q.to(pick(q.unit))))
        for i, cp in enumerate(self.critical_points):
            rows.append((f"critical point {i + 1} ({cp['kind']}): radius",
                         u.Quantity(cp["radius"]).to(pick(u.cm))))
        return html_summary(repr(self), rows)

    def profile_table(self, cgs: bool = False):
        """The profile as an astropy QTable, one Quantity column per profile quantity.

        Parameters
        ----------
        cgs : bool
            Every column in cgs (as :attr:`profile`); by default each in the
            unit the model file used for its physical type (radius in Rsun when
            ``star.radius`` was written in Rsun, ...), else Rsun, km/s, Lsun
            (:func:`windsolve._units.chosen_units`).

        Returns
        -------
        astropy.table.QTable
            Columns ``radius``, ``velocity``, ``density``, ... in profile order;
            ``meta["summary"]`` holds the summary (Quantities), ``meta["status"]``.
        """
        from astropy.table import QTable

        from ._units import chosen_units
        pick = chosen_units(self.model)
        table = QTable(meta={"status": self.status, "message": self.message,
                             "summary": dict(self.summary)})
        for key, q in self.profile.items():
            table[key] = q if cgs else q.to(pick(q.unit))
        return table

    # -- HDF5 ---------------------------------------------------------------
    def to_hdf5(self, path: str | Path) -> Path:
        """Write the result as docs/physics.md, section 9 lays out (cgs, units on every dataset).

        Parameters
        ----------
        path : str or Path
            The HDF5 file to write (replaced if it exists).

        Returns
        -------
        Path
            The path written.

        Raises
        ------
        OutputError
            ``path`` is a directory, its directory does not exist, or the
            file cannot be written.

        Notes
        -----
        The file is written under a temporary name in the same directory and
        renamed when complete, so an interrupted write never leaves a
        half-written file at ``path``.
        """
        from .modelfile import dumps

        check_statuses([self.status])
        path = Path(path)
        if path.is_dir():
            raise OutputError(f"{path} is a directory; give a file name such as wind.h5")
        if not path.parent.exists():
            raise OutputError(f"{path}: directory {path.parent} does not exist")

        def fill(f):
            stamp(f, self.model.kind)
            f.attrs["model_toml"] = dumps(self.model.to_dict())
            g = f.create_group("summary")
            g.attrs["converged"] = bool(self.converged)
            g.attrs["status"] = self.status
            g.attrs["message"] = self.message
            g.attrs["hydrostatic"] = self.hydrostatic
            units = {}
            for key, q in self.summary.items():
                g.attrs[key] = float(q.to_value(SUMMARY_UNITS[key]))
                units[key] = _unit_text(SUMMARY_UNITS[key])
            g.attrs["units"] = json.dumps(units)
            g.attrs["shots"] = int(self.counters.get("shots", 0))
            g.attrs["solve_seconds"] = float(self.counters.get("seconds", 0.0))
            write_profile(f.create_group("profile"), self.profile)
            c = f.create_group("critical_points")
            n = len(self.critical_points)
            for key, unit in (("radius", "cm"), ("slope_plus", "1/s"),
                              ("slope_minus", "1/s")):
                dataset(c, key, np.array([u.Quantity(cp[key], CRITICAL_UNITS[key]).value
                                          for cp in self.critical_points],
                                         dtype=np.float64).reshape(n), unit)
            strings(c, "kind", (cp["kind"] for cp in self.critical_points))

        return write_hdf5(path, fill)

    @classmethod
    def from_hdf5(cls, path: str | Path) -> "WindResult":
        """Read a result file written by :meth:`to_hdf5` (or laid out the same way).

        Parameters
        ----------
        path : str or Path
            An HDF5 file laid out as docs/physics.md, section 9 describes.

        Returns
        -------
        WindResult
            The model is rebuilt from the stored model file when there is a
            complete one (``model`` is None otherwise); datasets come back as
            Quantities in the units their ``units`` attribute names.

        Raises
        ------
        OutputError
            Every dataset, unit and value is checked first
            (:func:`read_result`): a damaged file gives a one-line error
            naming the file and what is wrong.
        """
        return read_result(path, cls)


PROFILE_POSITIVE = ("radius", "velocity", "density", "temperature")
PROFILE_FLOW = ("radius", "velocity", "density")
PROFILE_NONNEGATIVE = ("opacity", "optical_depth")
PROFILE_NONNEGATIVE_CONVERGED = ("luminosity", "eddington_factor")  # photon tiring: L -> 0
SUMMARY_POSITIVE = ("mass_loss_rate", "sonic_radius", "sonic_velocity", "photosphere_radius",
                    "photosphere_temperature", "outer_radius", "sonic_temperature",
                    "base_radius", "base_temperature", "base_density")


def stored_model(f, path: str | Path):
    """The model of a file's ``model_toml`` attribute.

    Parameters
    ----------
    f : h5py.File
        An open windsolve HDF5 file.
    path : str or Path
        The file's name, for messages.

    Returns
    -------
    WindModel or None
        None when the file has no complete model (absent, empty, not TOML,
        incomplete: a file written by another program is read for what it has).

    Raises
    ------
    OutputError
        The ``model`` stamp is not a model kind, or contradicts the stored model.
    """
    from .errors import WindsolveError
    from .io import parse_toml, text_attr
    from .modelfile import model_from_dict
    from .registry import MODELS

    kind = text_attr(f.attrs, "model", path, "the file", default="")
    if "model" in f.attrs and kind not in MODELS:
        raise OutputError(f"{path}: the model attribute is \"{kind}\", not a windsolve model "
                          f"kind (one of: {', '.join(MODELS)})")
    text = f.attrs.get("model_toml")
    if isinstance(text, bytes):
        text = text.decode(errors="replace")
    if not isinstance(text, str) or not text.strip():
        return None
    try:
        model = model_from_dict(parse_toml(text, path), source=str(path))
    except (WindsolveError, KeyError, TypeError, ValueError):  # parse_toml: a ModelError
        return None
    if kind and model.kind != kind:
        raise OutputError(f"{path}: the model attribute says \"{kind}\" but the stored model "
                          f"file (model_toml) is of kind \"{model.kind}\"; the file is damaged")
    return model


def read_result(path: str | Path, cls: "type | None" = None) -> "WindResult":
    """A :class:`WindResult` from a result file, after checking every dataset, unit and value.

    The one reader of result files: the layout (groups, 1-D numeric datasets of
    one length), the units (each a unit of the right dimension), the values
    (finite, radius strictly increasing, radius, velocity, density and
    temperature > 0, opacity and optical depth >= 0, every speed below the speed
    of light, continuity 4 pi r^2 rho v = Mdot) and the model stamp.  Only
    /summary (converged, status) and /profile radius, velocity and density are
    required.

    Parameters
    ----------
    path : str or Path
        An HDF5 result file (docs/physics.md, section 9).
    cls : type or None
        The class to build (a subclass of :class:`WindResult`); None for WindResult.

    Returns
    -------
    WindResult

    Raises
    ------
    OutputError
        In one line naming the file and the dataset or attribute at fault.
    """
    from .io import (
        check_photosphere,
        check_values,
        column,
        dataset_unit,
        group,
        parse_unit,
        plain,
        require_kind,
        text_attr,
    )

    cls = cls or WindResult
    path = Path(path)
    with open_hdf5(path) as f:
        require_kind(f, path, "result", "; lines and compare read one solved model")
        model = stored_model(f, path)
        g = group(f, "summary", path)
        p = group(f, "profile", path)
        for key in ("converged", "status"):
            if key not in g.attrs:
                raise OutputError(f"{path}: /summary has no {key} attribute; the file is "
                                  f"incomplete")
        converged = plain(g.attrs["converged"])
        if not isinstance(converged, (bool, int)):
            raise OutputError(f"{path}: the converged attribute of /summary is "
                              f"{plain(converged)!r}, not true or false")
        status = text_attr(g.attrs, "status", path, "/summary")
        message = text_attr(g.attrs, "message", path, "/summary", default="")
        units_text = text_attr(g.attrs, "units", path, "/summary", default="{}")
        try:
            units = json.loads(units_text)
        except json.JSONDecodeError:
            units = None
        if not isinstance(units, dict):
            raise OutputError(f"{path}: the units attribute of /summary is not a JSON table "
                              f"of unit names ({units_text[:40]!r})")
        summary = {}
        for key, expected in SUMMARY_UNITS.items():
            if key not in g.attrs:
                continue
            where = f"/summary attribute {key}"
            value = plain(g.attrs[key])
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise OutputError(f"{path}: {where} is {value!r}, not a number")
            unit = (parse_unit(units[key], path, where, expected) if key in units
                    else expected)
            check_values(value, path, where, unit, positive=key in SUMMARY_POSITIVE,
                         allow_nan=True, cgs=expected)
            summary[key] = float(value) * unit
        profile = {}
        if len(p):
            n = column(p, "radius", path).size
            if converged and n < 3:
                raise OutputError(f"{path}: /profile/radius has {n} points; a converged "
                                  f"result's profile has at least 3")
            for key in ("radius", "velocity", "density", *p.keys()):
                if key in profile:
                    continue
                values = column(p, key, path, length=n)
                unit = dataset_unit(p, key, path, PROFILE_UNITS.get(key))
                # A partial result may lack derived values where its flow stopped
                # (an opacity off its table); the flow itself is always there.
                check_values(values, path, f"/profile/{key}", unit,
                             positive=key in PROFILE_POSITIVE,
                             allow_nan=not converged and key not in PROFILE_FLOW,
                             cgs=PROFILE_UNITS.get(key),
                             nonnegative=key in PROFILE_NONNEGATIVE or (
                                 converged and key in PROFILE_NONNEGATIVE_CONVERGED))
                profile[key] = values * unit
            if n and not np.all(np.diff(profile["radius"].value) > 0):
                i = int(np.flatnonzero(~(np.diff(profile["radius"].value) > 0))[0])
                raise OutputError(f"{path}: /profile/radius does not increase at index {i + 1} "
                                  f"(it must increase strictly); the file is damaged")
        _check_continuity(path, profile, summary.get("mass_loss_rate"))
        if all(f"photosphere_{k}" in summary for k in ("luminosity", "radius", "temperature")):
            check_photosphere(path, "/summary", *(summary[f"photosphere_{k}"].cgs.value
                                                  for k in ("luminosity", "radius",
                                                            "temperature")))
        cps = []
        if "critical_points" in f:
            c = group(f, "critical_points", path)
            n = column(c, "radius", path).size
            radius = column(c, "radius", path, n)
            slopes = {key: column(c, key, path, n) for key in ("slope_plus", "slope_minus")}
            kinds = column(c, "kind", path, n, text=True)
            check_values(radius, path, "/critical_points/radius", PROFILE_UNITS["radius"],
                         positive=True)
            cps = [_critical_with_units({"radius": float(radius[i]), "kind": str(kinds[i]),
                                         "slope_plus": float(slopes["slope_plus"][i]),
                                         "slope_minus": float(slopes["slope_minus"][i])})
                   for i in range(n)]
        counters = {}
        for key, name, kind in (("shots", "shots", int), ("seconds", "solve_seconds", float)):
            value = plain(g.attrs.get(name, 0))  # counters: informative only
            counters[key] = kind(value) if isinstance(value, (int, float)) else kind(0)
        return cls(model=model, converged=bool(converged), status=status, message=message,
                   summary=summary, profile=profile, critical_points=cps, counters=counters)


CONTINUITY_RTOL = 0.05  # windsolve's own profiles hold 4 pi r^2 rho v = Mdot to roundoff


def _check_continuity(path, profile, mdot):
    """OutputError unless 4 pi r^2 rho v along the profile is the stated mass-loss rate.

    Continuity holds to roundoff in every profile windsolve writes; a mismatch means a
    units attribute (of radius, velocity, density or the mass-loss rate) that does not
    describe its numbers (e.g. velocities in cm/s labelled m/s), which the dimension check
    cannot see.
    """
    if mdot is None or not np.isfinite(mdot.value) or "radius" not in profile:
        return
    r, v, rho = (profile[k].to_value(PROFILE_UNITS[k]) for k in ("radius", "velocity",
                                                                  "density"))
    if r.size == 0:
        return
    with np.errstate(over="ignore", invalid="ignore"):
        ratio = 4.0 * np.pi * r**2 * rho * v / mdot.to_value(SUMMARY_UNITS["mass_loss_rate"])
    bad = ~(np.abs(ratio - 1.0) <= CONTINUITY_RTOL)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise OutputError(f"{path}: 4 pi r^2 rho v from /profile is {ratio[i]:.4g} times the "
                          f"/summary mass_loss_rate at index {i}; a units attribute of "
                          f"/profile/radius, velocity or density (or of the mass-loss rate) "
                          f"does not describe its numbers")
