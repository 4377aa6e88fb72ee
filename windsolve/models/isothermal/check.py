"""What ``windsolve check`` shows of a Model A file: derived numbers and notes."""

import math


def check_isothermal(model, source):
    """Derived numbers of a Model A file: ``(rows, notes)`` for ``windsolve check``.

    Parameters
    ----------
    model : IsothermalWind
        The model read from the file.
    source : str
        The file's name, shown in the first row.

    Returns
    -------
    rows : list of tuple
        (label, text) pairs that ``windsolve check`` prints.
    notes : list of str
        One-line notes.
    """
    import astropy.units as u

    from ...core import basics
    from ...core.constants import G
    from ...core.opacity import effective_opacity
    from . import kernels as K

    M = model.cgs("mass")
    R0 = model.cgs("radius")
    L0 = model.cgs("luminosity")
    kes = basics.electron_scattering_opacity(model.X, model.Z)
    L_edd = basics.eddington_luminosity(M, kes)
    gamma_es = L0 / L_edd
    P, O = model.kernel_arrays
    gamma_base = K.base_eddington_factor(P, O)
    kappa_base = effective_opacity(O, model.cgs("base_density"), model.T, R0)
    a = model.a
    v_esc = basics.escape_speed(M, R0)
    rows = [
        ("model", f"{model.kind} ({source})"),
        ("star", model.name),
        ("mean molecular weight mu", f"{model.mu:.4f}"),
        ("mean mass per electron mu_e",
         f"{basics.mean_mass_per_electron(model.X, model.Z):.4f}"),
        ("electron-scattering opacity", f"{kes:.4f} cm2/g"),
        ("Eddington luminosity (kappa_es)", f"{(L_edd * u.erg / u.s).to_value(u.Lsun):.4g} Lsun"
                                            f" = {L_edd:.4g} erg/s"),
        ("Gamma_es = L0 / L_Edd", f"{gamma_es:.4g}"),
        (f"opacity at the base ({model.opacity.law}"
         f"{', porous' if model.porosity_length is not None else ''})",
         f"{kappa_base:.4g} cm2/g at rho0, T = {model.T:.4g} K"),
        ("Gamma at the base (that opacity)", f"{gamma_base:.4g}"),
        ("sound speed a", f"{a / 1e5:.4g} km/s (T = {model.T:.4g} K)"),
        ("escape speed at R0", f"{v_esc / 1e5:.4g} km/s"),
    ]
    notes = []
    if gamma_base < 1.0:
        rc = G * M * (1.0 - gamma_base) / (2.0 * a * a)
        rows.append(("expected sonic radius", f"{rc / R0:.4g} R0 = GM(1 - Gamma_base)/(2a^2) "
                                              f"(exact for constant opacity)"))
        if rc <= R0:
            notes.append("the expected sonic radius lies inside R0: the base would already "
                         "be supersonic for constant opacity")
    else:
        rows.append(("expected sonic radius", "none: Gamma >= 1 at the base"))
        if model.opacity.law == "electron_scattering" and model.porosity_length is None:
            notes.append("Gamma_es >= 1 with electron scattering alone: the base is unbound "
                         "and no steady transonic wind exists; add porosity or change L0")
    mdot_max = 4 * math.pi * R0**2 * model.cgs("base_density") * a * u.g / u.s
    rows.append(("largest mass-loss rate 4 pi R0^2 rho0 a",
                 f"{mdot_max.to_value(u.Msun / u.yr):.4g} Msun/yr"))
    if model.photon_tiring:
        rows.append(("photon-tiring limit L0 R0 / GM",
                     f"{(L0 * R0 / (G * M) * u.g / u.s).to_value(u.Msun / u.yr):.4g} Msun/yr"))
    if model.porosity_length is not None and model.porosity_exponent >= 2.0:
        notes.append("porosity radial_exponent >= 2: porosity cannot set the sonic point "
                     "(needs q < 2)")
    return rows, notes
