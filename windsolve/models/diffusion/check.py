"""What ``windsolve check`` shows of a Model B file: derived numbers and notes."""

import math

from ...errors import WindsolveError


def _span(values):
    """"lo .. hi" of the finite ``values``, or why there is none."""
    finite = [v for v in values if math.isfinite(v)]
    if not finite:
        return "not defined (no finite opacity there)"
    return f"{min(finite):.4g} .. {max(finite):.4g}"


LOG_R_COLUMNS = (-8.0, -7.0, -6.0, -5.0, -4.0)  # log10 R of the columns check shows


def _temperature_range(model):
    """(T_lo, T_hi) [K]: the temperatures between the photosphere and the base."""
    if model.anchor == "photosphere":
        T_lo = model.cgs("photosphere_temperature")
        T_hi = 1e7 if model.radius is not None else (
            model.cgs("base_temperature") if model.base_temperature is not None else 1e6)
    else:
        T_lo = 3e3
        T_hi = model.cgs("base_temperature") if model.base_temperature is not None else 1e7
    return T_lo, max(T_hi, T_lo * 1.01)


def opacity_along(model):
    """kappa and Gamma on the temperatures a Model B wind crosses, at fixed log10 R.

    The photosphere's to the base's temperature (as ``windsolve check``
    shows them): on a table, its log10 T nodes in that range (so the kappa
    shown are the table's own numbers), else steps of 0.05 dex; at the
    log10 R of :data:`LOG_R_COLUMNS` (R = rho / T6^3, docs/physics.md, eq. 8).

    Parameters
    ----------
    model : DiffusionWind
        The model.

    Returns
    -------
    dict
        ``log_T`` (n,), ``log_R`` (m,), ``kappa`` (n, m) [cm2 g-1, NaN off a
        table], ``gamma`` (n, m) = kappa L / (4 pi c G M) [dimensionless],
        ``kappa_es`` [cm2 g-1], ``luminosity`` [erg s-1], ``mass`` [g], ``law``,
        ``T_range`` (T_lo, T_hi) [K].
    """
    import numpy as np

    from ...core import basics
    from ...core import opacity as OP
    from ...core.constants import C_LIGHT, G

    P, O = model.kernel_arrays
    M = model.cgs("mass")
    L = (model.cgs("photosphere_luminosity") if model.anchor == "photosphere"
         else model.cgs("luminosity"))
    T_lo, T_hi = _temperature_range(model)
    lo, hi = np.log10(T_lo), np.log10(T_hi)
    if O[OP.SLOT_LAW] == OP.LAW_TABLE:
        nT = int(O[OP.SLOT_NT])
        grid = O[OP.SLOT_GRID:OP.SLOT_GRID + nT]
        log_T = grid[(grid >= lo - 1e-9) & (grid <= hi + 1e-9)]
        if log_T.size < 2:
            log_T = np.linspace(lo, hi, 11)
    else:
        log_T = np.arange(np.floor(lo * 20) / 20, hi + 1e-9, 0.05)
    log_R = np.array(LOG_R_COLUMNS)
    kappa = np.empty((log_T.size, log_R.size))
    for i, t in enumerate(log_T):
        for j, r in enumerate(log_R):
            kappa[i, j] = OP.opacity(O, 10.0 ** (r + 3.0 * t - 18.0), 10.0 ** t)
    gamma = kappa * L / (4.0 * np.pi * C_LIGHT * G * M)
    return {"log_T": log_T, "log_R": log_R, "kappa": kappa, "gamma": gamma,
            "kappa_es": basics.electron_scattering_opacity(model.X, model.Z),
            "luminosity": L, "mass": M, "law": model.opacity.law, "T_range": (T_lo, T_hi)}


def _opacity_rows(model):
    """The rows and notes of kappa and Gamma along the wind's temperatures (tables)."""
    import numpy as np
    d = opacity_along(model)
    cols = " ".join(f"{r:g}" for r in d["log_R"])
    rows = [("kappa [cm2/g] | Gamma along T", f"at log R = {cols} (R = rho / T6^3)")]
    for t, k, g in zip(d["log_T"], d["kappa"], d["gamma"], strict=True):
        ks = " ".join(f"{x:6.3g}" if np.isfinite(x) else "   off" for x in k)
        gs = " ".join(f"{x:6.3g}" if np.isfinite(x) else "   off" for x in g)
        rows.append((f"  log T = {t:.2f}", f"{ks} | {gs}"))
    notes = []
    peaks = []
    for j, r in enumerate(d["log_R"]):
        col = d["kappa"][:, j]
        if np.isfinite(col).any():
            i = int(np.nanargmax(col))
            peaks.append(f"log T = {d['log_T'][i]:.2f} at log R = {r:g} "
                         f"({col[i] / d['kappa_es']:.3g} kappa_es, Gamma {d['gamma'][i, j]:.3g})")
    if peaks:
        notes.append("kappa peaks at " + "; ".join(peaks))
    over = [f"{r:g}" for j, r in enumerate(d["log_R"]) if np.nanmax(
        np.where(np.isfinite(d["gamma"][:, j]), d["gamma"][:, j], -np.inf)) > 1.0]
    if over:
        notes.append(f"Gamma exceeds 1 on this range at log R = {', '.join(over)}")
    else:
        notes.append("Gamma stays below 1 on this range at every log R shown")
    off = int(np.count_nonzero(~np.isfinite(d["kappa"])))
    if off:
        notes.append(f"{off} of the {d['kappa'].size} points shown lie off the table ('off')")
    return rows, notes


def check_diffusion(model, source):
    """Derived numbers of a Model B file, and whether Gamma can exceed 1: ``(rows, notes)``.

    Parameters
    ----------
    model : DiffusionWind
        The model read from the file.
    source : str
        The file's name, shown in the first row.

    Returns
    -------
    rows : list of tuple
        (label, text) pairs that ``windsolve check`` prints.
    notes : list of str
        One-line notes.

    Raises
    ------
    WindsolveError
        The opacity is nowhere finite between the model's photosphere and base
        temperatures (densities 1e-16 to 1e-2 g cm^-3).
    """
    import astropy.units as u
    import numpy as np

    from ...core import basics
    from ...core import opacity as OP
    from ...core.constants import C_LIGHT, G

    P, O = model.kernel_arrays
    M = model.cgs("mass")
    L = (model.cgs("photosphere_luminosity") if model.anchor == "photosphere"
         else model.cgs("luminosity"))
    kes = basics.electron_scattering_opacity(model.X, model.Z)
    L_edd = basics.eddington_luminosity(M, kes)
    rows = [
        ("model", f"diffusion, anchored at the {model.anchor} ({source})"),
        ("star", model.name),
        ("mean molecular weight mu", f"{model.mu:.4f}"),
        ("electron-scattering opacity", f"{kes:.4f} cm2/g"),
        ("Eddington luminosity (kappa_es)",
         f"{(L_edd * u.erg / u.s).to_value(u.Lsun):.4g} Lsun"),
        ("Gamma_es = L / L_Edd", f"{L / L_edd:.4g}"),
    ]
    gamma_of = 4 * np.pi * G * M * C_LIGHT / L  # Gamma = kappa / gamma_of
    law_is_table = model.opacity.law == "table"
    if model.anchor == "photosphere":
        rows.append(("photosphere radius from L_ph, T_eff",
                     f"{model.photosphere_radius.to_value(u.Rsun):.4g} Rsun"))
        T_lo = model.cgs("photosphere_temperature")
        T_hi = 1e7 if model.radius is not None else (
            model.cgs("base_temperature") if model.base_temperature is not None else 1e6)
    else:
        T_lo = 3e3
        T_hi = model.cgs("base_temperature") if model.base_temperature is not None else 1e7
    T_base = (model.cgs("base_temperature") if model.base_temperature is not None
              else (T_hi if model.radius is None else None))
    # Largest Gamma the opacity allows between the photosphere and the base
    # temperatures, over densities 1e-16 to 1e-2 g/cm3.
    temps = np.geomspace(T_lo, max(T_hi, T_lo * 1.01), 200)
    dens = np.geomspace(1e-16, 1e-2, 60)
    kappas = [k for k in (OP.opacity(O, d, t) for t in temps for d in dens) if np.isfinite(k)]
    if not kappas:
        law = model.opacity.law
        where = (f"[opacity] path = \"{model.opacity.params['path']}\"" if law == "table"
                 else f"[opacity] law = \"{law}\"")
        fix = ("extend the table over that range or set [opacity] clamp = true"
               if law == "table" else "check the law's parameters")
        raise WindsolveError(f"{where}: no finite opacity anywhere between {T_lo:.3g} K and "
                             f"{T_hi:.3g} K (densities 1e-16 to 1e-2 g/cm3), where this model "
                             f"lives; {fix}")
    gmax = max(kappas) / gamma_of
    if T_base is not None:
        g_base = [OP.opacity(O, d, T_base) / gamma_of for d in np.geomspace(1e-14, 1e-2, 25)]
        rows.append((f"Gamma at the base temperature {T_base:.3g} K",
                     f"{_span(g_base)} (for rho 1e-14 .. 1e-2 g/cm3)"))
    elif model.base_density is not None:
        rho0 = model.cgs("base_density")
        g_base = [OP.opacity(O, rho0, t) / gamma_of for t in np.geomspace(1e4, 1e7, 25)]
        rows.append(("Gamma at the base density", f"{_span(g_base)} (for T 1e4 .. 1e7 K)"))
    rows.append((f"largest Gamma for {T_lo:.3g} K < T < {T_hi:.3g} K", f"{gmax:.4g}"))
    notes = []
    if gmax < 1.0:
        notes.append("Gamma never exceeds 1 on the path between the photosphere and the base: "
                     "no continuum-driven wind can launch")
    if law_is_table:
        from ...tables import load_table
        p = model.opacity.params
        table = load_table(p["path"], None, p["format"], model.X, model.Z,
                           p["mixture"] or None)[0]
        if table.description:
            rows.append(("opacity table", table.description[0]))
        more, more_notes = _opacity_rows(model)
        rows.extend(more)
        notes.extend(more_notes)
    return rows, notes
