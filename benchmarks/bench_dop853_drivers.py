"""Model A's inward leg with the one-equation DOP853 driver and with the array driver.

Run by hand from the repository root::

    PYTHONPATH=. python benchmarks/bench_dop853_drivers.py

The same right-hand side and monitor (``models.isothermal.kernels.rhs_radius``,
``monitor_inward``) wrapped for ``make_integrator`` (state as a 1-element
array), integrated from the converged critical point of each config down to
R0.  Prints the evaluation counts (equal), whether the end states agree bit
for bit, and the best-of-5 time per leg of each driver: the reason
``make_scalar_integrator`` exists.
"""

import functools
import math
import time

import numpy as np
from numba import njit

import windsolve
from windsolve.core.integrate import make_integrator
from windsolve.models.isothermal import kernels as K


@njit(error_model="numpy")
def rhs_array(x, y, P, O, dydx):
    dydx[0] = K.rhs_radius(x, y[0], P, O)


@njit(error_model="numpy")
def monitor_array(x, y, P, O):
    return K.monitor_inward(x, y[0], P, O)


integrate_array = make_integrator(rhs_array, monitor_array)


def best_us(fn, n=2000, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        times.append((time.perf_counter() - t0) / n)
    return 1e6 * min(times)


def main():
    delta = 1e-6
    for name in ("demo", "porous_tiring", "parker_reference"):
        model = windsolve.load_model(f"configs/{name}.toml")
        P, O = model.kernel_arrays
        ln_mdot = K.solve(P, O, model.rtol, delta)[1]
        Q = P.copy()
        K.fill_mass_loss_rate(Q, P, ln_mdot)
        code, rc, slope = K.innermost_saddle(Q, O)
        y0 = math.log(math.sqrt(Q[K.I_A2]) - slope * delta * rc)
        head = (rc * (1.0 - delta), y0, Q[K.I_R0], Q, O, 0.0, model.rtol,
                K.FIRST_STEP * delta * rc, np.inf)
        y0a = np.array([y0])
        none, none2 = np.empty(0), np.empty((0, 1))

        scalar = functools.partial(K.integrate_inward, *head, none, none, 0.0)
        array = functools.partial(integrate_array, head[0], y0a, *head[2:], none, none2, 0.0)

        s, a = scalar(), array()
        t_s, t_a = best_us(scalar), best_us(array)
        print(f"{name:17s} nfev {s[4]} / {a[4]}, end state bit for bit: {s[2] == a[2][0]}; "
              f"scalar {t_s:.2f} us, array {t_a:.2f} us per leg: array/scalar {t_a / t_s:.2f}")


if __name__ == "__main__":
    main()
