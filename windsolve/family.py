"""Families of optically thick winds: one anchor held, one quantity scanned.

A photosphere-anchored model fixes L_ph and T_eff.  Keeping L_ph and moving
along one other quantity -- the effective temperature, the photospheric
radius, or the mass-loss rate itself -- gives the sequence of photospherically
consistent regular solutions that modellers fit observed stars against
(README, "Families").  A base-anchored model fixes R0, L0 and T0 (or rho0):
its family keeps the base temperature (or density) and one of R0, L0, and
scans the other, each member starting from the previous one's solution.
Each member is a full solve; members that fail keep their status and
message, so the table shows where the family ends and why.
"""

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from .core.constants import L_SUN, R_SUN, SIGMA_SB
from .errors import ModelError

if TYPE_CHECKING:
    from .models import DiffusionWind

__all__ = ["SCANS", "PHOTOSPHERE_SCANS", "BASE_SCANS", "FamilyResult", "solve_family",
           "check_family", "plot_family", "MAX_MEMBERS"]

# Most members a family may have: each is a full solve (~0.01-0.1 s), so this is
# minutes to an hour of work, and the table and plot stay readable.
MAX_MEMBERS = 10_000

# Quantities a family can be scanned in, with the unit of --from/--to:
# photosphere-anchored models ...
PHOTOSPHERE_SCANS = {
    "photosphere_temperature": u.K,
    "photosphere_radius": u.Rsun,
    "mass_loss_rate": u.Msun / u.yr,
}
# ... and base-anchored ones (the model key each scan sets)
BASE_SCANS = {
    "base_luminosity": u.Lsun,
    "base_radius": u.Rsun,
}
BASE_SCAN_KEYS = {"base_luminosity": "luminosity", "base_radius": "radius"}
SCANS = {**PHOTOSPHERE_SCANS, **BASE_SCANS}

COLUMNS = {  # summary key -> unit stored (cgs)
    "mass_loss_rate": u.g / u.s,
    "terminal_velocity": u.cm / u.s,
    "photosphere_radius": u.cm,
    "photosphere_temperature": u.K,
    "photosphere_luminosity": u.erg / u.s,
    "photosphere_velocity": u.cm / u.s,
    "sonic_radius": u.cm,
    "sonic_temperature": u.K,
    "energy_flux": u.erg / u.s,
    "base_radius": u.cm,
    "base_temperature": u.K,
    "base_density": u.g / u.cm**3,
    "base_luminosity": u.erg / u.s,
}

# Columns a family's table and plot need (in every converged member).
REQUIRED = ("mass_loss_rate", "terminal_velocity", "photosphere_radius",
            "photosphere_temperature")


@dataclass
class FamilyResult:
    """A family of solutions: one row per member, in scan order.

    Attributes
    ----------
    model : DiffusionWind or None
        The model the family was built from (None when read from a file
        without a complete stored model).
    scan : str
        The scanned quantity, a key of ``SCANS``.
    values : numpy.ndarray
        The scanned values, in ``SCANS[scan]`` units (K, Rsun, Msun/yr or Lsun).
    members : list of WindResult
        One solve per value; failed members keep their status and message.
    ends : str
        Where and why the family ends (empty if it does not).

    References
    ----------
    docs/physics.md, section 5 (the photosphere anchor and families).
    """

    model: object
    scan: str
    values: np.ndarray  # scanned values in SCANS[scan] units
    members: list = field(default_factory=list)  # WindResult per member
    ends: str = ""  # where and why the family ends (empty if it does not)

    def column(self, key: str) -> np.ndarray:
        """One summary value of every member, in cgs (``COLUMNS[key]``); NaN where unknown.

        Parameters
        ----------
        key : str
            A summary key of :data:`COLUMNS`, e.g. ``"mass_loss_rate"``.

        Returns
        -------
        ndarray
            One value per member, in the cgs unit of ``COLUMNS[key]``.

        Raises
        ------
        KeyError
            ``key`` is not a family column.
        """
        unit = COLUMNS[key]
        return np.array([m.summary[key].to_value(unit) if key in m.summary else np.nan
                         for m in self.members])

    @property
    def converged(self) -> np.ndarray:
        """Boolean array: which members converged."""
        return np.array([m.converged for m in self.members])

    def to_hdf5(self, path: str | Path, profiles: bool = False) -> Path:
        """Write the table (and optionally each member's profile) to HDF5.

        Parameters
        ----------
        path : str or Path
            The file to write (atomically: a temporary name, then renamed).
        profiles : bool
            Also store every member's profile.

        Returns
        -------
        Path
            The path written.

        Raises
        ------
        OutputError
            The file cannot be written.
        """
        from .io import dataset, stamp, strings, write_hdf5
        from .modelfile import dumps
        from .result import _unit_text, write_profile

        def fill(f):
            stamp(f, self.model.kind)
            f.attrs["model_toml"] = dumps(self.model.to_dict())
            f.attrs["family_scan"] = self.scan
            f.attrs["family_ends"] = self.ends
            g = f.create_group("table")
            scan = self.values * SCANS[self.scan]
            dataset(g, self.scan, scan.cgs.value, _unit_text(scan.cgs.unit))
            for key, unit in COLUMNS.items():
                if key != self.scan:
                    dataset(g, key, self.column(key), _unit_text(unit))
            dataset(g, "converged", self.converged, "1")
            strings(g, "status", (m.status for m in self.members))
            strings(g, "message", (m.message for m in self.members))
            if profiles:
                for i, m in enumerate(self.members):
                    write_profile(f.create_group(f"profiles/{i}"), m.profile)

        return write_hdf5(path, fill)

    @classmethod
    def from_hdf5(cls, path: str | Path) -> "FamilyResult":
        """Read a family file written by :meth:`to_hdf5` (table only).

        Parameters
        ----------
        path : str or Path
            A family file.

        Returns
        -------
        FamilyResult
            ``model`` is None when the file has no complete stored model.

        Raises
        ------
        OutputError
            Every column, unit and value is checked first; a damaged file
            gives a one-line error naming the file and the column.
        """
        from pathlib import Path

        from .errors import OutputError
        from .io import (
            check_photosphere,
            check_values,
            column,
            dataset_unit,
            group,
            open_hdf5,
            require_kind,
            text_attr,
        )
        from .result import WindResult, stored_model

        path = Path(path)
        with open_hdf5(path) as f:
            require_kind(f, path, "family")
            scan = text_attr(f.attrs, "family_scan", path, "the file")
            if scan not in SCANS:
                raise OutputError(f"{path}: the family_scan attribute is \"{scan}\", not one of "
                                  f"{', '.join(SCANS)}")
            model = stored_model(f, path)
            if model is not None and not (_photosphere_family(model) if scan in
                                          PHOTOSPHERE_SCANS else _base_family(model)):
                raise OutputError(f"{path}: the stored model (model_toml) is not a "
                                  f"{'photosphere' if scan in PHOTOSPHERE_SCANS else 'base'}"
                                  f"-anchored diffusion model, as a family along {scan} "
                                  f"needs; the file is damaged")
            g = group(f, "table", path)
            n = column(g, scan, path).size
            if n == 0:
                raise OutputError(f"{path}: /table has no rows (a family has at least one "
                                  f"member); the file is damaged")
            converged = column(g, "converged", path, n).astype(bool)
            status = column(g, "status", path, n, text=True)
            message = (column(g, "message", path, n, text=True) if "message" in g
                       else np.array([""] * n))
            for key in g:  # every column one-dimensional and as long as the scan
                d = g[key] if key in g else None
                text = getattr(d, "dtype", None) is not None and d.dtype.kind in "OSU"
                column(g, key, path, n, text=text)
            cols = {}
            for key in dict.fromkeys([scan, *COLUMNS]):
                if key not in g:
                    continue
                expected = COLUMNS.get(key, SCANS[scan])
                values = column(g, key, path, n)
                unit = dataset_unit(g, key, path, expected)
                where = f"/table/{key}"
                check_values(values, path, where, unit, positive=True, allow_nan=True,
                             cgs=expected)
                if key in REQUIRED and np.isnan(values[converged]).any():
                    i = int(np.flatnonzero(converged & np.isnan(values))[0])
                    raise OutputError(f"{path}: {where} is NaN at index {i}, a converged "
                                      f"member; the file is damaged")
                cols[key] = values * unit
            for key in REQUIRED:
                if key not in cols:
                    column(g, key, path, n)  # says that it is missing
            if all(f"photosphere_{k}" in cols for k in ("luminosity", "radius", "temperature")):
                check_photosphere(path, "/table", *(cols[f"photosphere_{k}"].cgs.value for k in
                                                    ("luminosity", "radius", "temperature")),
                                  rows=converged)
            values = cols[scan].to_value(SCANS[scan])
            if scan not in COLUMNS:
                del cols[scan]
            ends = str(f.attrs.get("family_ends", ""))
        members = [WindResult(model, bool(converged[i]), status[i], message[i],
                              {k: c[i] for k, c in cols.items()})
                   for i in range(len(values))]
        return cls(model, scan, values, members, ends)

    def to_table(self, cgs: bool = False):
        """The family's table as an astropy QTable, every number a Quantity column.

        Parameters
        ----------
        cgs : bool
            Every column in cgs (as the family file stores it); by default the
            scanned column in its scan unit (``SCANS``) and every other in the
            unit the model file used for its physical type (Rsun, Lsun, ...),
            else Msun/yr, km/s (:func:`windsolve._units.chosen_units`).

        Returns
        -------
        astropy.table.QTable
            The scanned quantity, the summary columns some member has (no
            column that is NaN in every member), ``converged``, ``status``,
            ``message``; ``meta``: ``scan``, ``ends``.
        """
        from astropy.table import QTable

        from ._units import chosen_units
        pick = chosen_units(self.model)
        table = QTable(meta={"scan": self.scan, "ends": self.ends})
        scan = np.asarray(self.values, dtype=float) * SCANS[self.scan]
        table[self.scan] = scan.cgs if cgs else scan
        for key, unit in COLUMNS.items():
            if key == self.scan:
                continue
            values = self.column(key)
            if key not in REQUIRED and not np.isfinite(values).any():
                continue
            q = values * unit
            table[key] = q if cgs else q.to(pick(unit))
        table["converged"] = self.converged.astype(bool) if self.members else np.array([], bool)
        table["status"] = [m.status for m in self.members]
        table["message"] = [m.message for m in self.members]
        return table

    def __repr__(self):
        n = len(self.members)
        good = int(self.converged.sum()) if n else 0
        lo, hi = (float(np.min(self.values)), float(np.max(self.values))) if n else (0, 0)
        name = getattr(self.model, "name", "") or ""
        return (f"<FamilyResult {name!r} along {self.scan} {lo:.4g}..{hi:.4g} "
                f"{SCANS[self.scan].to_string()}: {n} members, {good} converged>")

    def __str__(self):
        return "\n".join(self.lines() + ([self.ends] if self.ends else []))

    def _repr_html_(self):
        from html import escape
        caption = escape(repr(self)) + (f"<br>{escape(self.ends)}" if self.ends else "")
        return f"<p>{caption}</p>\n{self.to_table()._repr_html_()}"

    def lines(self) -> list[str]:
        """A printable table: one line per member (Msun/yr, km/s, Rsun, K)."""
        head = (f"{self.scan:>24s} {'Mdot [Msun/yr]':>15s} {'v_inf [km/s]':>13s} "
                f"{'R_ph [Rsun]':>12s} {'T_eff [K]':>10s} {'T_base [K]':>11s}  status")
        out = [head]
        mdot = self.column("mass_loss_rate") * (u.g / u.s).to(u.Msun / u.yr)
        vinf = self.column("terminal_velocity") / 1e5
        rph = self.column("photosphere_radius") / R_SUN
        teff = self.column("photosphere_temperature")
        tb = self.column("base_temperature")
        for i, m in enumerate(self.members):
            out.append(f"{self.values[i]:24.6g} {mdot[i]:15.5g} {vinf[i]:13.5g} "
                       f"{rph[i]:12.5g} {teff[i]:10.5g} {tb[i]:11.5g}  {m.status}")
        return out


def solve_family(model: "DiffusionWind", scan: str, start: float, stop: float, num: int,
                 progress: Callable[[int, int], object] | None = None) -> FamilyResult:
    """Solve the family of ``model`` along ``scan``.

    Photosphere-anchored: the photospheric luminosity stays that of
    ``model``; each member is a full photosphere-anchored solve at its own
    effective temperature.  Base-anchored: the base temperature (or density)
    and the other of R0, L0 stay; each member is a full base-anchored solve
    started from the previous converged member (``solve(start_from=...)``).

    Parameters
    ----------
    model : DiffusionWind
        Anchored at the photosphere (``[boundary] photosphere_luminosity``
        and ``photosphere_temperature``) for the scans of
        ``PHOTOSPHERE_SCANS``, or at the base (``[star] radius`` and
        ``luminosity`` with a base temperature or density) for those of
        ``BASE_SCANS``.
    scan : str
        ``"photosphere_temperature"``, ``"photosphere_radius"`` or
        ``"mass_loss_rate"``; ``"base_luminosity"`` or ``"base_radius"``
        (the keys of ``SCANS``).
    start, stop : float
        First and last value, plain numbers in the unit of ``SCANS[scan]``
        (K, Rsun, Msun/yr or Lsun); members are spaced logarithmically.
    num : int
        Number of members, 2 to ``MAX_MEMBERS``.
    progress : callable, optional
        Called as ``progress(done, total)`` after every member.

    Returns
    -------
    FamilyResult
        Every member, failed ones with their status and message; ``ends``
        says where and why the family ends.

    Raises
    ------
    ModelError
        Arguments :func:`check_family` refuses.

    References
    ----------
    docs/physics.md, section 5 (photosphere anchor, eqs. 23 and 24; families).
    """
    from .solve import solve

    check_family(model, scan, start, stop, num)
    values = np.geomspace(start, stop, int(num))
    if scan in BASE_SCANS:
        return _base_family_solve(model, scan, values, progress)
    L_ph = model.photosphere_luminosity
    sigma = SIGMA_SB

    def member_at_temperature(T):
        return solve(model.replace(photosphere_temperature=T * u.K))

    members = []
    if scan == "photosphere_temperature":
        temps = values
    elif scan == "photosphere_radius":
        L = L_ph.to_value(u.erg / u.s)
        temps = (L / (4 * math.pi * sigma * (values * R_SUN) ** 2)) ** 0.25
    else:
        temps = _temperatures_for_mass_loss_rates(model, values, member_at_temperature)
    for i, T in enumerate(temps):
        if not np.isfinite(T):
            members.append(_unreachable(model, values[i]))
        else:
            try:
                members.append(member_at_temperature(float(T)))
            except ModelError as error:  # e.g. photosphere inside R0
                members.append(_failed(model, str(error)))
        if progress is not None:
            progress(i + 1, len(temps))
    result = FamilyResult(model, scan, values, members)
    result.ends = _ends(result)
    return result


def _base_family_solve(model, scan, values, progress):
    """The members of a base-anchored family, each started from the last converged one."""
    from .solve import solve

    key = BASE_SCAN_KEYS[scan]
    members = []
    previous = None
    for i, value in enumerate(values):
        try:
            member = solve(model.replace(**{key: float(value) * BASE_SCANS[scan]}),
                           start_from=previous)
        except ModelError as error:  # e.g. the photosphere inside R0
            member = _failed(model, str(error))
        if member.converged:
            previous = member
        members.append(member)
        if progress is not None:
            progress(i + 1, len(values))
    result = FamilyResult(model, scan, values, members)
    result.ends = _ends(result)
    return result


def _base_family(model):
    """Can this model be scanned at a fixed base temperature or density (its ModelSpec says)?"""
    from .registry import MODEL_SPECS
    spec = MODEL_SPECS.get(getattr(model, "kind", None))
    return bool(spec is not None and spec.base_family is not None and spec.base_family(model))


def _photosphere_family(model):
    """Can this model be scanned at a fixed photosphere luminosity (its ModelSpec says)?"""
    from .registry import MODEL_SPECS
    spec = MODEL_SPECS.get(getattr(model, "kind", None))
    return bool(spec is not None and spec.photosphere_family is not None
                and spec.photosphere_family(model))


def check_family(model: "DiffusionWind", scan: str, start: float, stop: float,
                 num: int) -> None:
    """Raise a one-line ModelError unless :func:`solve_family` can run these arguments.

    Parameters
    ----------
    model, scan, start, stop, num
        As for :func:`solve_family`.

    Raises
    ------
    ModelError
        ``scan`` is unknown or does not suit the model's anchor (photosphere
        scans need a photosphere-anchored diffusion model, base scans a
        base-anchored one), ``start`` or ``stop`` is not finite and
        positive, or ``num`` is outside 2 to ``MAX_MEMBERS``.
    """
    if scan not in SCANS:
        raise ModelError(f"--scan {scan}: choose one of {', '.join(SCANS)}")
    if scan in PHOTOSPHERE_SCANS and not _photosphere_family(model):
        base = _base_family(model)
        raise ModelError(f"--scan {scan}: a family along it keeps the photosphere luminosity "
                         f"fixed: give a diffusion model anchored at the photosphere "
                         f"([boundary] photosphere_luminosity and photosphere_temperature)"
                         + (f", or scan a base-anchored one along "
                            f"{' or '.join(BASE_SCANS)}" if base else ""))
    if scan in BASE_SCANS and not _base_family(model):
        raise ModelError(f"--scan {scan}: a family along it keeps the base temperature (or "
                         f"density) fixed: give a diffusion model anchored at the base "
                         f"([star] radius and luminosity, [boundary] base_temperature or "
                         f"base_density)"
                         + (f", or scan a photosphere-anchored one along "
                            f"{', '.join(PHOTOSPHERE_SCANS)}" if _photosphere_family(model)
                            else ""))
    for option, value in (("--from", start), ("--to", stop)):
        if not (math.isfinite(value) and value > 0):
            raise ModelError(f"{option} {float(value)!r}: the members are log-spaced; give a "
                             f"finite positive value in {SCANS[scan].to_string()}")
    if not 2 <= num <= MAX_MEMBERS:
        raise ModelError(f"--num {num}: a family has from 2 to {MAX_MEMBERS} members (each "
                         f"one a full solve)")


def _failed(model, message):
    from .result import WindResult
    return WindResult(model, False, "failed", message, {})


def _unreachable(model, value):
    return _failed(model, f"no member of the family has a mass-loss rate of {value:.4g} "
                          f"Msun/yr (outside the range the family covers)")


def _temperatures_for_mass_loss_rates(model, mdots, member_at_temperature):
    """T_eff giving each target Mdot: a coarse scan, then secant refinement."""
    grid = np.geomspace(5e3, 5e5, 25)
    known = []
    for T in grid:
        r = member_at_temperature(float(T))
        if r.converged:
            known.append((math.log(T), math.log(r.summary["mass_loss_rate"].to_value(
                u.Msun / u.yr))))
    temps = np.full(len(mdots), np.nan)
    if len(known) < 2:
        return temps
    for k, target in enumerate(np.log(mdots)):
        for (x0, f0), (x1, f1) in zip(known[:-1], known[1:], strict=True):
            if (f0 - target) * (f1 - target) <= 0 and f1 != f0:
                a, fa, b, fb = x0, f0 - target, x1, f1 - target
                for _ in range(30):
                    m = a - fa * (b - a) / (fb - fa)
                    r = member_at_temperature(math.exp(m))
                    if not r.converged:
                        break
                    fm = math.log(r.summary["mass_loss_rate"].to_value(u.Msun / u.yr)) - target
                    if abs(fm) < 1e-9:
                        break
                    if (fm > 0) == (fa > 0):
                        a, fa = m, fm
                        fb *= 0.5
                    else:
                        b, fb = m, fm
                        fa *= 0.5
                temps[k] = math.exp(m)
                break
    return temps


def _ends(result):
    """Say where the family stops having solutions, and why."""
    ok = result.converged
    if ok.all() or not ok.any():
        if not ok.any() and len(result.members):
            return f"no member converged: {result.members[0].message}"
        return ""
    notes = []
    for i in range(1, len(ok)):
        if ok[i - 1] and not ok[i]:
            notes.append(f"the family ends between {result.scan} = {result.values[i - 1]:.5g} "
                         f"and {result.values[i]:.5g}: {result.members[i].message}")
        if not ok[i - 1] and ok[i]:
            notes.append(f"the family starts between {result.scan} = "
                         f"{result.values[i - 1]:.5g} and {result.values[i]:.5g} "
                         f"(before it: {result.members[i - 1].message})")
    return "; ".join(notes)


def plot_family(result: FamilyResult, path: str | Path) -> str | Path:
    """Mdot, v_inf, T_eff and the base (or, base-anchored, L_ph) against R_ph (or the scan).

    Parameters
    ----------
    result : FamilyResult
        The family (its converged members are plotted).
    path : str or Path
        The figure file; the format follows the suffix (.png, .pdf, ...).

    Returns
    -------
    str or Path
        ``path``, as given.

    Raises
    ------
    OutputError
        The figure cannot be written.
    """
    from .plotting import label_log_ticks, pyplot, save

    plt = pyplot()

    ok = result.converged
    rph = result.column("photosphere_radius")[ok] / R_SUN
    panels = [
        (result.column("mass_loss_rate")[ok] * (u.g / u.s).to(u.Msun / u.yr),
         r"mass-loss rate  $\dot M$  [M$_\odot$ yr$^{-1}$]", "log"),
        (result.column("terminal_velocity")[ok] / 1e5,
         r"terminal velocity  $v_\infty$  [km s$^{-1}$]", "linear"),
        (result.column("photosphere_temperature")[ok], r"effective temperature  $T_{\rm eff}$  [K]",
         "log"),
    ]
    tb = result.column("base_temperature")[ok]
    fixed_radius = (result.model.radius is not None if result.model is not None
                    else not np.allclose(tb, tb[0], rtol=1e-9) if tb.size else False)
    base_scan = result.scan in BASE_SCANS
    if base_scan:  # the base is held: what the photosphere's luminosity does
        panels.append((result.column("photosphere_luminosity")[ok] / L_SUN,
                       r"photosphere luminosity  $L_{\rm ph}$  [L$_\odot$]", "log"))
    elif fixed_radius:  # fixed base radius: its temperature varies
        panels.append((result.column("base_temperature")[ok], "base temperature  [K]", "log"))
    else:  # fixed base temperature: where the envelope reaches it varies
        panels.append((result.column("base_radius")[ok] / R_SUN,
                       r"radius at the base temperature  [R$_\odot$]", "linear"))
    fig, axes = plt.subplots(2, 2, figsize=(10, 7), sharex=True, constrained_layout=True)
    x = result.values[ok] if base_scan else rph  # a base family: against what it scans
    for ax, (y, label, scale) in zip(axes.flat, panels, strict=True):
        ax.plot(x, y, "o-", color="#1f4e79", ms=3, lw=1.2)
        ax.set_xscale("log")
        ax.set_yscale(scale)
        ax.set_ylabel(label)
        ax.grid(True, which="both", alpha=0.25)
    for ax in axes[-1]:
        ax.set_xlabel({"base_luminosity": r"base luminosity  $L_0$  [L$_\odot$]",
                       "base_radius": r"base radius  $R_0$  [R$_\odot$]"}.get(
            result.scan, r"photosphere radius  $R_{\rm ph}$  [R$_\odot$]"))
    for ax in axes.flat:  # labelled ticks on short log axes, no offset text
        label_log_ticks(ax, "x")
        label_log_ticks(ax, "y")
    name = result.model.name if result.model is not None else "family"
    n_bad = int((~ok).sum())
    counts = f"({ok.sum()} solutions{f', {n_bad} without' if n_bad else ''})"
    if base_scan:
        fig.suptitle(f"{name} — base-anchored family along {result.scan} "
                     f"[{BASE_SCANS[result.scan].to_string()}] {counts}")
    else:
        if result.model is not None:
            L = result.model.photosphere_luminosity.to_value(u.Lsun)
        else:
            L = np.nanmedian(result.column("photosphere_luminosity")) / L_SUN
        fig.suptitle(f"{name} — family at L$_{{\\rm ph}}$ = {L:.3g} L$_\\odot$ {counts}")
    return save(plt, fig, path)
