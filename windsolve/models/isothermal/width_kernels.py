"""A Model A wind's outer state and its line widths in one compiled call (sweep workers).

What a sweep row with an ``[observables]`` table needs, without handing
arrays back and forth to Python: the outward profile stored from r_c
(:func:`windsolve.models.isothermal.kernels.outward_part`), its density and opacity,
the optical core radius (tau = 2/3 summed from outside), the subsonic part
only when that radius does not lie beyond the first interval outside r_c
(or without occultation, when the P Cygni edge needs the core of the whole
profile), and the widths of :func:`windsolve.core.lines.line_widths`.  The
numbers are those of ``solve(model)`` followed by ``line_widths``, to
rounding: the same points, the same core radius and the same kernel.
"""

import math

import numpy as np
from numba import njit

from ...core.lines import MONOTONIC_RTOL, line_widths
from ...core.profile import optical_core_radius
from . import kernels as K


@njit(cache=True, error_model="numpy")
def outer_state_and_widths(ln_mdot, P, O, rtol, delta, max_step, capacity, n, occult,
                           fwhm, sigma, hwzi_fraction, edge_depth, k0, n_velocity):
    """The outward leg's end and the line widths of the converged solution ``ln_mdot``.

    Returns ``(status_in, status_out, r_end, v_end, fwhm, hwzi, edge)``:
    status_out, r_end and v_end are those of
    :func:`windsolve.models.isothermal.kernels.end_state` (the stored leg takes the
    same steps); status_in is OK unless the subsonic part was needed and
    did not reach R0.  The widths [cm/s] are nan unless both are OK.  The
    line arguments are those of :func:`windsolve.core.lines.line_widths`;
    the core radius is the optical core of the profile, else R0, and
    noise in v(r) is judged with MONOTONIC_RTOL, as there.

    Parameters
    ----------
    ln_mdot : float
        Converged ln Mdot [ln(g s^-1)].
    P, O : ndarray
        Model A parameter and opacity vectors.
    rtol, delta, max_step, capacity
        As :func:`windsolve.models.isothermal.kernels.profile`.
    n, occult, fwhm, sigma, hwzi_fraction, edge_depth, k0, n_velocity
        As :func:`windsolve.core.lines.line_widths` (speeds in cm s^-1).

    Returns
    -------
    tuple
        (status_in, status_out, r_end [cm], v_end [cm s^-1], fwhm, hwzi, edge [cm s^-1]).
    """
    nan = math.nan
    Q = K.set_mass_loss_rate(P, ln_mdot)
    code, rc, slope = K.innermost_saddle(Q, O)
    st_out, r, v = K.outward_part(Q, O, rc, slope, rtol, delta, max_step, capacity)
    r_end = r[r.shape[0] - 1]
    v_end = v[v.shape[0] - 1]
    if st_out != K.OK:
        return K.OK, st_out, r_end, v_end, nan, nan, nan
    rho, _, kappa, _ = K.profile_quantities(ln_mdot, r, v, P, O)
    # With occultation, when the optical core lies beyond r_c the profile
    # from r_c out gives the same widths as the whole (tau is summed from
    # outside and nothing inside the core is seen) -- beyond the first
    # interval, so that the velocity gradients at the points around it are
    # the centred ones of the whole profile, not one-sided ones at r_c.
    Rc = optical_core_radius(r, rho, kappa) if occult else nan
    if not (r.shape[0] > 2 and Rc > r[1]):
        st_in, ri, vi = K.inward_part(Q, O, rc, slope, rtol, delta, max_step, capacity)
        if st_in != K.OK:
            return st_in, st_out, r_end, v_end, nan, nan, nan
        rho_i, _, kappa_i, _ = K.profile_quantities(ln_mdot, ri, vi, P, O)
        r = np.concatenate((ri, r))
        v = np.concatenate((vi, v))
        rho = np.concatenate((rho_i, rho))
        kappa = np.concatenate((kappa_i, kappa))
        Rc = optical_core_radius(r, rho, kappa)
        if math.isnan(Rc):  # optically thin throughout: the base
            Rc = Q[K.I_R0]
    e_fwhm, e_hwzi, edge = line_widths(r, v, rho, Rc, n, occult, fwhm, sigma, hwzi_fraction,
                                       edge_depth, k0, n_velocity, MONOTONIC_RTOL)
    return K.OK, st_out, r_end, v_end, e_fwhm, e_hwzi, edge
