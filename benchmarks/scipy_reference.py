"""A deliberately plain scipy reference for the Model A (isothermal) solve.

This module solves the same eigenvalue problem as
:func:`windsolve.models.isothermal.kernels.solve`, from the same parameter vectors
``P`` and ``O``, the way a one-off shooting script would: a Python
right-hand side handed to :func:`scipy.integrate.solve_ivp` (``DOP853``), the
critical point found by a numpy scan refined with :func:`scipy.optimize.brentq`,
and the mass-loss rate by ``brentq`` on ln Mdot.  It is an independent check
of the compiled kernel (nothing compiled is called from here) and the
baseline that ``bench_isothermal.py`` times.
It is not tuned, but avoids handicaps a careful script would not have (the
scalar right-hand side uses :mod:`math` on plain floats, not numpy scalars).

The algorithm is the kernel's as it first was (docs/physics.md, sections 4 and 8); the
kernel has since moved on in two places the reference keeps plain: it
integrates the inward leg against r (not ln r), and it walks to the sign
change with secant steps from the value g takes, without a shot, where the
saddle sits on the base (not with doubling steps from a first shot).

1. for a trial Mdot, scan N(r, a) on ``N_GRID`` log-spaced radii in
   [R0, r_out]; refine each rising zero with ``brentq``, outward, and take
   the first that is a saddle (dN/dr > 0 at v = a);
2. slope p from l'Hopital, 2 p^2 - N_v p - N_r = 0 (central differences,
   positive root);
3. start at r_c (1 - delta), v = a - p delta r_c, integrate
   d ln v / d ln r = r N / (v^2 - a^2) inward to ln R0 with terminal events
   for "far too dense" (g is then clamped at ``DENSE_MARGIN``) and "turns back
   to v = a" (a failed shot); g = ln rho(R0) - ln rho0;
4. bracket g in ln Mdot with the kernel's own strategy re-written in Python
   (find an admissible Mdot by bisecting between trials that failed for
   different reasons, walk with doubling steps to a sign change, bisect onto
   the admissible boundary when a step leaves it; the kernel's last-resort
   widening search is left out), then ``brentq`` with ``xtol = 0.1 rtol``.
   The bracket search is part of the timed work unless a ``bracket`` is
   passed in.

One deliberate difference: ``solve_ivp`` gets ``rtol = atol = rtol`` on
y = ln v; the kernel uses a pure absolute tolerance on ln v.  As |ln v| is
10-200 in cgs, the reference is the looser (larger Mdot errors; if anything
this flatters its timing).
"""

import math

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from windsolve.core import opacity as op
from windsolve.core.constants import C_LIGHT
from windsolve.models.isothermal import kernels as iso

FOUR_PI = 4.0 * math.pi
N_GRID = iso.N_GRID
SONIC_GAP = iso.SONIC_GAP
DENSE_MARGIN = iso.DENSE_MARGIN
LN_RANGE = iso.LN_RANGE
XTOL_BOUNDARY = 1e-9  # resolution of the admissible-window edge in ln Mdot
OK, BOUND, UNBOUND = iso.OK, iso.NO_CRITICAL_POINT_BOUND, iso.NO_CRITICAL_POINT_UNBOUND
NO_SADDLE, INWARD_SINGULAR, FAILED = iso.NO_SADDLE, iso.INWARD_SINGULAR, iso.INTEGRATION_FAILED


def effective_opacity(O, rho, T, r, xp=math):
    """Opacity with porosity [cm2 g-1], plain re-implementation of the kernel's.

    Parameters
    ----------
    O : sequence of float
        Opacity vector (slots of :mod:`windsolve.core.opacity`).
    rho, T, r : float or ndarray
        Density [g cm-3], temperature [K] (scalar), radius [cm].
    xp : module
        :mod:`math` for scalars, :mod:`numpy` for arrays.

    Notes
    -----
    .. math:: \\kappa_{\\rm eff} = \\kappa\\,(1 - e^{-\\tau_b})/\\tau_b,
              \\quad \\tau_b = \\kappa \\rho h_0 (r/R_0)^q

    ``-expm1(-tau)/tau`` is accurate for small tau, so the kernel's series
    branch below tau = 1e-5 is not needed (they differ by O(tau^3)).
    """
    law = int(O[op.SLOT_LAW])
    kes = O[op.SLOT_KES]
    if law == op.LAW_ELECTRON_SCATTERING:
        k = kes + 0.0 * rho
    elif law == op.LAW_KRAMERS:
        k = kes + O[2] * rho * T ** -3.5
    elif law == op.LAW_BUMP:
        d = (xp.log10(T) - O[5]) / O[6]
        k = kes * (1.0 + O[2] * (rho / O[3]) ** O[4] * xp.exp(-0.5 * d * d))
    else:
        raise ValueError(f"opacity law code {law} is not known to the reference")
    if O[op.SLOT_H0] > 0.0:
        tau = k * rho * O[op.SLOT_H0] * (r / O[op.SLOT_R0]) ** O[op.SLOT_Q]
        k = k * (-xp.expm1(-tau) / tau)
    return k


class _Wind:
    """The Model A equations at one trial Mdot, on plain Python floats."""

    def __init__(self, P, O, ln_mdot):
        self.O = [float(v) for v in O]
        self.GM, self.a2, self.R0, self.rho0, self.L0, self.T, tiring, self.r_out = (
            float(P[i]) for i in (iso.I_GM, iso.I_A2, iso.I_R0, iso.I_RHO0, iso.I_L0,
                                  iso.I_T, iso.I_TIRING, iso.I_ROUT))
        self.tiring = tiring > 0.0
        self.a = math.sqrt(self.a2)
        self.mdot = math.exp(ln_mdot)
        self.v0 = self.mdot / (FOUR_PI * self.R0 ** 2 * self.rho0)

    def N(self, r, v, xp=math):
        """Force balance N(r, v) [cm s-2]; ``r``, ``v`` scalars or arrays."""
        rho = self.mdot / (FOUR_PI * r * r * v)
        L = self.L0
        if self.tiring:
            L = L - self.mdot * (0.5 * (v * v - self.v0 ** 2) + self.GM / self.R0 - self.GM / r)
        k = effective_opacity(self.O, rho, self.T, r, xp)
        return 2.0 * self.a2 / r - self.GM / (r * r) + k * L / (FOUR_PI * C_LIGHT * r * r)

    def saddle(self):
        """(code, r_c, slope): the first saddle of N(r, a) outward from R0."""
        x = np.linspace(math.log(self.R0), math.log(self.r_out), N_GRID)
        f = self.N(np.exp(x), self.a, np)
        rising = np.flatnonzero((f[:-1] < 0.0) & (f[1:] >= 0.0))
        a = self.a
        for i in rising:
            xr = brentq(lambda s: self.N(math.exp(s), a), x[i], x[i + 1], xtol=1e-14)
            r = math.exp(xr)
            hr, hv = 1e-5 * r, 1e-5 * a
            n_r = (self.N(r + hr, a) - self.N(r - hr, a)) / (2.0 * hr)
            n_v = (self.N(r, a + hv) - self.N(r, a - hv)) / (2.0 * hv)
            if n_r > 0.0:  # roots of 2p^2 - n_v p - n_r have opposite signs
                return OK, r, (n_v + math.sqrt(n_v * n_v + 8.0 * n_r)) / 4.0
        if rising.size or np.any((f[:-1] > 0.0) & (f[1:] <= 0.0)):
            return NO_SADDLE, math.nan, math.nan
        if np.any(f > 0.0):
            return UNBOUND, math.nan, math.nan
        return BOUND, math.nan, math.nan

    def rhs(self, x, y):
        """d ln v / d ln r = r N / (v^2 - a^2) (plain Python, scalar).

        A wild trial stage can overflow exp or hit v = 0 or v = a exactly;
        NaN makes ``solve_ivp`` reject the step and shrink it.
        """
        try:
            r = math.exp(x)
            v = math.exp(y[0])
            return [r * self.N(r, v) / (v * v - self.a2)]
        except (OverflowError, ZeroDivisionError):
            return [math.nan]


def shoot(ln_mdot, P, O, rtol, delta):
    """One trial Mdot: ``(code, g, r_c)`` with g = ln rho(R0) - ln rho0."""
    w = _Wind(P, O, ln_mdot)
    code, rc, slope = w.saddle()
    if code != OK:
        return code, math.nan, rc
    ln_rho0 = math.log(w.rho0)
    if rc * (1.0 - delta) <= w.R0:  # sonic point on the base (as the kernel)
        v_base = w.a - slope * (rc - w.R0)
        return OK, math.log(w.mdot / (FOUR_PI * w.R0 ** 2 * v_base)) - ln_rho0, rc
    ln_k = ln_mdot - math.log(FOUR_PI)

    def too_dense(x, y):
        return ln_k - 2.0 * x - y[0] - (ln_rho0 + DENSE_MARGIN)

    def back_to_sonic(x, y):
        return math.expm1(2.0 * y[0] - math.log(w.a2)) + SONIC_GAP

    too_dense.terminal = back_to_sonic.terminal = True
    too_dense.direction = back_to_sonic.direction = 1.0
    sol = solve_ivp(w.rhs, (math.log(rc * (1.0 - delta)), math.log(w.R0)),
                    [math.log(w.a - slope * delta * rc)], method="DOP853",
                    rtol=rtol, atol=rtol, first_step=delta,
                    events=(too_dense, back_to_sonic))
    if sol.status == 0:
        return OK, ln_k - 2.0 * math.log(w.R0) - sol.y[0, -1] - ln_rho0, rc
    if sol.status == 1 and sol.t_events[0].size:
        return OK, DENSE_MARGIN, rc
    if sol.status == 1:
        return INWARD_SINGULAR, math.nan, rc
    return FAILED, math.nan, rc


def first_guess(P, O):
    """(guess, ln Mdot_max): Parker's subsonic asymptote, as the kernel's."""
    GM, a2, R0, rho0, L0, T = (float(P[i]) for i in (iso.I_GM, iso.I_A2, iso.I_R0,
                                                     iso.I_RHO0, iso.I_L0, iso.I_T))
    ln_max = math.log(FOUR_PI * R0 * R0 * rho0 * math.sqrt(a2))
    gamma0 = effective_opacity([float(v) for v in O], rho0, T, R0) * L0 / (FOUR_PI * C_LIGHT * GM)
    guess = ln_max - 1.0
    if gamma0 < 1.0:
        rcg = GM * (1.0 - gamma0) / (2.0 * a2)
        if rcg > R0:
            guess = ln_max + min(2.0 * math.log(rcg / R0) + 1.5 - 2.0 * rcg / R0, -1.0)
    return max(guess, ln_max - LN_RANGE), ln_max


def base_boundary(P, O, x_min, x_max):
    """(guess, first step): start just inside the admissible window.

    Mirrors the kernel's step 0: where N(R0, a) changes sign with Mdot, its
    root (found with brentq) is where the saddle sits on the base.
    """
    def n_base(x):
        w = _Wind(P, O, x)
        return w.N(w.R0, w.a)

    lo, hi = n_base(x_min), n_base(x_max)
    if lo == 0.0 or hi == 0.0 or (lo > 0.0) == (hi > 0.0):
        return None, 1.0
    xb = brentq(n_base, x_min, x_max, xtol=1e-14)
    side = 1.0 if hi < 0.0 else -1.0
    return min(max(xb + side * 1e-6 * (1.0 + abs(xb)), x_min), x_max), 0.02


def find_bracket(trial, guess, x_min, x_max, step0=1.0):
    """``(lo, hi)`` in ln Mdot with g(lo) <= 0 <= g(hi), both admissible.

    ``trial(x) -> (code, g)``.  Same strategy as the kernel, in Python.
    """
    x, (code, g) = guess, trial(guess)
    if code != OK:
        # Probe both ends; failing that, bisect between two trials that failed
        # for different reasons (e.g. "unbound" below the window, "bound" above).
        xs = [x_min, guess, x_max]
        cs = [trial(x_min)[0], code, trial(x_max)[0]]
        ok = [k for k in (2, 0) if cs[k] == OK]
        if ok:
            x, g = xs[ok[0]], trial(xs[ok[0]])[1]
        for k in (0, 1):
            if ok or cs[k] == cs[k + 1]:
                continue
            left, right = xs[k], xs[k + 1]
            while right - left > XTOL_BOUNDARY and not ok:
                m = 0.5 * (left + right)
                c2, g2 = trial(m)
                if c2 == OK:
                    x, g, ok = m, g2, [k]
                elif c2 == cs[k]:
                    left = m
                else:
                    right = m
        if not ok:
            raise RuntimeError("no admissible mass-loss rate found")
    sgn = 1.0 if g > 0.0 else -1.0  # walk down from g > 0, up from g <= 0
    good, step = x, step0
    while True:
        xt = good - sgn * step
        if not x_min <= xt <= x_max:
            xt = x_max if sgn < 0.0 else x_min
            if xt == good:
                raise RuntimeError("g does not change sign in the allowed range")
        c2, g2 = trial(xt)
        if c2 == OK and sgn * g2 <= 0.0:
            return tuple(sorted((good, xt)))
        if c2 == OK:
            good, step = xt, 2.0 * step
            continue
        bad = xt  # left the admissible window: bisect onto its edge
        while abs(good - bad) > XTOL_BOUNDARY:
            m = 0.5 * (good + bad)
            c3, g3 = trial(m)
            if c3 != OK:
                bad = m
            elif sgn * g3 <= 0.0:
                return tuple(sorted((good, m)))
            else:
                good = m
        raise RuntimeError("g does not change sign inside the admissible window")


def solve_reference(P, O, rtol=1e-8, delta=1e-6, bracket=None):
    """Mass-loss rate of the Model A transonic wind, the plain scipy way.

    Parameters
    ----------
    P : ndarray of float64
        Model A parameter vector (slots ``I_*`` of
        :mod:`windsolve.models.isothermal.kernels`, cgs); the trial slots are ignored.
    O : ndarray of float64
        Opacity vector (:mod:`windsolve.core.opacity`).
    rtol : float
        Integration tolerance, used as ``rtol`` and ``atol`` on y = ln v;
        ``brentq`` on ln Mdot uses ``xtol = 0.1 rtol``.
    delta : float
        Relative offset of the start point from the sonic radius.
    bracket : (float, float), optional
        ln Mdot [ln(g s-1)] bracket of the root.  When None (the default, and
        what the benchmark uses) the bracket is searched for, so the full
        shooting root-find is done here.

    Returns
    -------
    dict
        ``mass_loss_rate`` [g s-1], ``sonic_radius`` [cm] and ``n_shots``
        (number of distinct trial Mdot).
    """
    shots = {}

    def trial(x):
        if x not in shots:
            shots[x] = shoot(x, P, O, rtol, delta)
        return shots[x][:2]

    def g(x):
        code, value = trial(x)
        if code != OK:
            raise RuntimeError(f"shot at ln Mdot = {x} failed with code {code}")
        return value

    guess, ln_max = first_guess(P, O)
    if bracket is None:
        x_min, x_max = ln_max - LN_RANGE, ln_max - 1e-9
        start, step0 = base_boundary(P, O, x_min, x_max)
        bracket = find_bracket(trial, guess if start is None else start, x_min, x_max, step0)
    x = brentq(g, bracket[0], bracket[1], xtol=0.1 * rtol)
    trial(x)
    return dict(mass_loss_rate=math.exp(x), sonic_radius=shots[x][2], n_shots=len(shots))
