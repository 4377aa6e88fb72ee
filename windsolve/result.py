"""The one result object every solve returns, and its HDF5 form.

The writer, the plots and the command line read only :class:`WindResult`.
A result always says what happened: ``converged`` is True only for a
complete transonic solution out to the outer radius; otherwise ``status``
(short, machine-readable) and ``message`` (one line, in words) say what
failed, and the numbers that could not be computed are NaN.
"""

import json
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np

from ._io import dataset, open_hdf5, stamp, strings, write_hdf5
from .errors import OutputError

__all__ = ["WindResult", "PROFILE_UNITS", "SUMMARY_UNITS"]

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


def base_density_efolds(mdot, rc, a, rho0):
    """ln(rho0 / rho_c), rho_c = Mdot / (4 pi r_c^2 a): density e-folds from base to sonic point."""
    if not (mdot > 0.0 and rc > 0.0 and a > 0.0 and rho0 > 0.0):
        return float("nan")
    return float(np.log(rho0 * 4.0 * np.pi * rc * rc * a / mdot))


def write_profile(group, profile):
    """Profile Quantities as cgs datasets with units (results, families, sweeps)."""
    for key, q in profile.items():
        unit = PROFILE_UNITS[key]
        values = q.to_value(unit) if hasattr(q, "to_value") else q  # sweeps send cgs lists
        dataset(group, key, np.asarray(values, dtype=np.float64), _unit_text(unit))


def _unit_text(unit):
    text = u.Unit(unit).to_string()
    return text if text else "1"  # CF convention for dimensionless


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
        Short code: ``converged``, ``no_critical_point``, ``no_saddle``,
        ``stalled``, ``second_singular_point``, ``no_bracket``,
        ``sonic_point_on_base`` (the only candidate has no subsonic part),
        ``no_solution``, ``off_table``, ``failed``.  A converged Model A
        solution may also be flagged :attr:`hydrostatic`.
    message : str
        One line saying, in words, what happened.
    summary : dict of Quantity
        ``mass_loss_rate``, ``terminal_velocity``, ``sonic_radius``,
        ``sonic_velocity`` and model-specific extras (NaN when unknown).
    profile : dict of Quantity arrays
        On one increasing radial grid: ``radius``, ``velocity``, ``density``,
        ``temperature``, ``luminosity``, ``opacity``, ``eddington_factor``.
        Empty when no solution was found.
    critical_points : list of dict
        Every root of the critical condition on the radial range (for the
        converged mass-loss rate): ``radius``, ``kind``, ``slopes``.
    counters : dict
        ``shots`` (trial integrations), ``seconds`` (wall time of the solve).
    hydrostatic : bool (property)
        True when the base lies more than :data:`HYDROSTATIC_EFOLDS` density
        e-folds below the sonic point (summary ``base_density_efolds``):
        the base is a static atmosphere and the mass-loss rate its
        exponentially small leak, not a wind (Model A only; see the README).
    """

    model: object
    converged: bool
    status: str
    message: str
    summary: dict = field(default_factory=dict)
    profile: dict = field(default_factory=dict)
    critical_points: list = field(default_factory=list)
    counters: dict = field(default_factory=dict)

    @property
    def hydrostatic(self):
        """Is the base a hydrostatic atmosphere rather than a wind? (see HYDROSTATIC_EFOLDS)"""
        q = self.summary.get("base_density_efolds")
        return bool(q is not None and np.isfinite(q.value) and q.value > HYDROSTATIC_EFOLDS)

    # -- text ---------------------------------------------------------------
    def summary_lines(self):
        """Short human summary (list of lines)."""
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
        key = "terminal velocity"
        if self.model.kind == "isothermal":
            key = "velocity at outer radius"
        show(key, "terminal_velocity", u.km / u.s)
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
        show("base Eddington factor", "base_eddington_factor", u.dimensionless_unscaled)
        show("density e-folds base->r_c", "base_density_efolds", u.dimensionless_unscaled,
             ".4g")
        if self.hydrostatic:
            lines.append(f"  HYDROSTATIC: the base lies more than {HYDROSTATIC_EFOLDS:g} density "
                         f"e-folds below the sonic point; it is a static atmosphere and the "
                         f"mass-loss rate its exponentially small leak, not a wind")
        if self.model.kind == "isothermal" and self.converged:
            lines.append("  (an isothermal flow keeps accelerating slowly: the 'terminal' "
                         "velocity is v at the outer radius)")
        return lines

    def __str__(self):
        return "\n".join(self.summary_lines())

    # -- HDF5 ---------------------------------------------------------------
    def to_hdf5(self, path):
        """Write the result as SPEC section 7 lays out (cgs, units on every dataset).

        The file is written under a temporary name in the same directory and
        renamed when complete, so an interrupted write never leaves a
        half-written file at ``path``.
        """
        from .modelfile import dumps

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
                dataset(c, key, np.array([cp[key] for cp in self.critical_points],
                                         dtype=np.float64).reshape(n), unit)
            strings(c, "kind", (cp["kind"] for cp in self.critical_points))

        return write_hdf5(path, fill)

    @classmethod
    def from_hdf5(cls, path):
        """Read a result file written by :meth:`to_hdf5` (or laid out the same way).

        The model is rebuilt from the stored model file; datasets come back
        as Quantities in the units their ``units`` attribute names.
        """
        import tomllib

        from .modelfile import model_from_dict

        path = Path(path)
        with open_hdf5(path) as f:
            if "summary" not in f or "profile" not in f:
                raise OutputError(f"{path}: no /summary and /profile groups; is this a "
                                  f"windsolve result file?")
            try:
                model = model_from_dict(tomllib.loads(f.attrs["model_toml"]), source=str(path))
            except (KeyError, tomllib.TOMLDecodeError):
                model = None
            g = f["summary"]
            units = json.loads(g.attrs.get("units", "{}"))
            summary = {k: g.attrs[k] * u.Unit(units.get(k, SUMMARY_UNITS.get(k, "")))
                       for k in SUMMARY_UNITS if k in g.attrs}
            profile = {}
            for key, d in f["profile"].items():
                unit = d.attrs.get("units", _unit_text(PROFILE_UNITS.get(key, "")))
                profile[key] = d[()] * u.Unit(unit)
            cps = []
            if "critical_points" in f:
                c = f["critical_points"]
                for i in range(c["radius"].shape[0]):
                    cps.append({"radius": float(c["radius"][i]),
                                "kind": c["kind"][i].decode() if isinstance(c["kind"][i], bytes)
                                else str(c["kind"][i]),
                                "slope_plus": float(c["slope_plus"][i]),
                                "slope_minus": float(c["slope_minus"][i])})
            return cls(model=model, converged=bool(g.attrs["converged"]),
                       status=str(g.attrs["status"]), message=str(g.attrs.get("message", "")),
                       summary=summary, profile=profile, critical_points=cps,
                       counters={"shots": int(g.attrs.get("shots", 0)),
                                 "seconds": float(g.attrs.get("solve_seconds", 0.0))})
