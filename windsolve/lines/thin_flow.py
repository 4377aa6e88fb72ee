"""The optically thin, ballistic flow above a Model B photosphere, which the lines see.

A diffusion-wind profile stops at the photosphere; above it the flow is
optically thin and ballistic (docs/physics.md, eq. 23).  :func:`thin_extension`
is Model B's ``ModelSpec.extend_profile``.
"""

import astropy.units as u
import numpy as np

THIN_EXTENT = 100.0  # the optically thin flow above a photosphere is followed to 100 R_ph
THIN_POINTS = 200


def thin_extension(result, r: np.ndarray, v: np.ndarray, rho: np.ndarray) -> tuple:
    """Append the ballistic thin flow above a Model B photosphere (its ModelSpec's
    ``extend_profile``).

    A diffusion-wind profile stops at the photosphere; above it the flow is
    optically thin and ballistic (docs/physics.md, eq. 23): v(r)^2 = v_inf^2 + K / r
    with K = (v_ph^2 - v_inf^2) R_ph, and rho from continuity.  That is the
    gas an observer's lines come from, so it is added here (out to
    THIN_EXTENT R_ph); profiles without a photosphere are returned as they are.

    Parameters
    ----------
    result : WindResult
        The result whose summary gives R_ph, v_inf and Mdot.
    r, v, rho : ndarray
        The solved profile: radius [cm], velocity [cm s^-1], density [g cm^-3];
        it must end at R_ph for the thin flow to be added.

    Returns
    -------
    tuple of ndarray
        (r, v, rho) [cgs], with THIN_POINTS - 1 points appended above R_ph.

    References
    ----------
    docs/physics.md, eqs. 13 and 23.
    """
    s = result.summary
    R_ph = s.get("photosphere_radius")
    v_inf = s.get("terminal_velocity")
    mdot = s.get("mass_loss_rate")
    if R_ph is None or v_inf is None or mdot is None:
        return r, v, rho
    R_ph = float(R_ph.to_value(u.cm))
    v_inf = float(v_inf.to_value(u.cm / u.s))
    mdot = float(mdot.to_value(u.g / u.s))
    if not (np.isfinite(R_ph) and np.isfinite(v_inf) and abs(r[-1] / R_ph - 1.0) < 1e-6):
        return r, v, rho
    K = (v[-1] ** 2 - v_inf**2) * R_ph
    r_out = R_ph * np.geomspace(1.0, THIN_EXTENT, THIN_POINTS)[1:]
    v_out = np.sqrt(v_inf**2 + K / r_out)
    rho_out = mdot / (4.0 * np.pi * r_out**2 * v_out)
    return (np.concatenate([r, r_out]), np.concatenate([v, v_out]),
            np.concatenate([rho, rho_out]))
