"""What ``windsolve check`` shows of a Model B file: derived numbers and notes."""

import math

from ...errors import WindsolveError


def _span(values):
    """"lo .. hi" of the finite ``values``, or why there is none."""
    finite = [v for v in values if math.isfinite(v)]
    if not finite:
        return "not defined (no finite opacity there)"
    return f"{min(finite):.4g} .. {max(finite):.4g}"


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
    return rows, notes
