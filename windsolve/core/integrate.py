"""Adaptive Dormand-Prince 8(5,3) integrator as a numba kernel.

The layout follows ``scipy.integrate._ivp``: a stepper owns one step, a
driver owns the loop and the result, and tuning constants are the upper-case
module names scipy uses.  Unlike ``solve_ivp`` the right-hand side and the
stop test are compiled in: :func:`make_integrator` (array state) and
:func:`make_scalar_integrator` (one float) build, once per model at
import time, an integrator closed over that model's ``rhs`` and ``monitor``,
so a whole shooting leg runs without touching the interpreter (a few
microseconds instead of about a millisecond).  (Passing the functions as
arguments instead stops numba from caching the callers on disk.)  Both
are the one driver :func:`_make_driver` -- one loop, one step-size control,
one output -- compiled with the state's operations of their kind.

Signatures expected from the model:

``rhs(x, y, P, O, dydx)``
    write dy/dx into ``dydx``; ``P`` holds the model's parameters and ``O`` the
    opacity vector (:mod:`windsolve.core.opacity`).
``monitor(x, y, P, O) -> int``
    called after every accepted step; a non-zero return stops the integration
    and becomes the returned status.

Reference: Hairer, Norsett & Wanner (1993), Solving Ordinary Differential
Equations I, 2nd ed., sections II.4 (step-size control) and II.10 (DOP853).
"""

import math

import numpy as np
from numba import njit

from ._dop853_tableau import (
    A_EXTRA,
    C_EXTRA,
    E3,
    E5,
    ERROR_ESTIMATOR_ORDER,
    INTERPOLATOR_POWER,
    N_STAGES,
    N_STAGES_EXTENDED,
    A,
    B,
    C,
    D,
)

SAFETY = 0.9  # multiply the optimal step by this
MIN_FACTOR = 0.2  # never shrink a step by more than this
MAX_FACTOR = 10.0  # never grow a step by more than this
MAX_STEPS = 100000  # give up after this many accepted + rejected steps
ERROR_EXPONENT = -1.0 / (ERROR_ESTIMATOR_ORDER + 1)

# Return status of ``integrate`` (positive values come from the monitor).
REACHED_END = 0
STEP_TOO_SMALL = -1
TOO_MANY_STEPS = -2


@njit(cache=True, error_model="numpy")
def error_norm(K, h, y, y_new, rtol, atol):
    """DOP853's blended 5th/3rd-order error estimate (as scipy's DOP853).

    Parameters
    ----------
    K : ndarray (N_STAGES + 1, n)
        The step's stage derivatives.
    h : float
        Step size (x's unit).
    y, y_new : ndarray (n,)
        State before and after the step.
    rtol, atol : float
        Relative and absolute tolerance.

    Returns
    -------
    float
        Error norm; below 1 accepts the step.

    References
    ----------
    Hairer, Norsett & Wanner (1993), section II.10.
    """
    n = y.shape[0]
    err5 = 0.0
    err3 = 0.0
    for j in range(n):
        scale = atol + max(abs(y[j]), abs(y_new[j])) * rtol
        e5 = 0.0
        e3 = 0.0
        for m in range(N_STAGES + 1):
            e5 += K[m, j] * E5[m]
            e3 += K[m, j] * E3[m]
        err5 += (e5 / scale) ** 2
        err3 += (e3 / scale) ** 2
    if err5 == 0.0 and err3 == 0.0:
        return 0.0
    denom = err5 + 0.01 * err3
    return abs(h) * err5 / math.sqrt(denom * n)


@njit(cache=True, error_model="numpy")
def step_bounds(x, direction, h_abs, max_step):
    """(min_step, h_abs): the smallest step resolvable at x, and h_abs kept within
    [min_step, max_step] before a step is tried.

    Parameters
    ----------
    x : float
        Current abscissa.
    direction : float
        +1 or -1, the direction of integration.
    h_abs : float
        Proposed step size (> 0).
    max_step : float
        Largest step allowed.

    Returns
    -------
    min_step, h_abs : float
    """
    min_step = 10.0 * abs(np.nextafter(x, direction * np.inf) - x)
    if h_abs > max_step:
        h_abs = max_step
    elif h_abs < min_step:
        h_abs = min_step
    return min_step, h_abs


@njit(cache=True, error_model="numpy")
def trial_point(x, h_abs, direction, x_end):
    """(x_new, h) of a trial step of size h_abs, not past x_end.

    Parameters
    ----------
    x : float
        Current abscissa.
    h_abs : float
        Step size (> 0).
    direction : float
        +1 or -1.
    x_end : float
        End of the interval.

    Returns
    -------
    x_new, h : float
        The trial point and the signed step.
    """
    x_new = x + h_abs * direction
    if direction * (x_new - x_end) > 0.0:
        x_new = x_end
    return x_new, x_new - x


@njit(cache=True, error_model="numpy")
def error_norm_scalar(K, h, y, y_new, rtol, atol):
    """:func:`error_norm` for one component (K one-dimensional).

    Parameters
    ----------
    K : ndarray (N_STAGES + 1,)
        The step's stage derivatives.
    h : float
        Step size.
    y, y_new : float
        State before and after the step.
    rtol, atol : float
        Relative and absolute tolerance.

    Returns
    -------
    float
        Error norm.
    """
    scale = atol + max(abs(y), abs(y_new)) * rtol
    e5 = 0.0
    e3 = 0.0
    for m in range(N_STAGES + 1):
        e5 += K[m] * E5[m]
        e3 += K[m] * E3[m]
    err5 = (e5 / scale) ** 2
    err3 = (e3 / scale) ** 2
    if err5 == 0.0 and err3 == 0.0:
        return 0.0
    return abs(h) * err5 / math.sqrt(err5 + 0.01 * err3)


@njit(cache=True, error_model="numpy")
def interpolate_scalar(F, y_old, t):
    """:func:`interpolate` for one component: the dense-output value at t.

    Parameters
    ----------
    F : ndarray (INTERPOLATOR_POWER,)
        The step's interpolant coefficients.
    y_old : float
        State at the start of the step.
    t : float
        (x - x_old) / h, in [0, 1].

    Returns
    -------
    float
    """
    acc = 0.0
    for i in range(INTERPOLATOR_POWER - 1, -1, -1):
        acc += F[i]
        if (INTERPOLATOR_POWER - 1 - i) % 2 == 0:
            acc *= t
        else:
            acc *= 1.0 - t
    return acc + y_old


@njit(cache=True, error_model="numpy")
def next_step(en, h_abs, rejected):
    """Step-size control after a trial step with error norm ``en``.

    Returns ``(h_abs, accepted, rejected)``: the next step size, whether the
    trial step is accepted, and whether a step has been rejected since the
    last accepted one (then the step may not grow; Hairer, Norsett & Wanner
    1993, II.4).  A non-finite norm (e.g. a stage across a singular point)
    is an infinitely bad step.

    Parameters
    ----------
    en : float
        Error norm of the trial step (:func:`error_norm`).
    h_abs : float
        Its size.
    rejected : bool
        A step has been rejected since the last accepted one.

    Returns
    -------
    h_abs : float
    accepted, rejected : bool
    """
    if not math.isfinite(en):
        return h_abs * MIN_FACTOR, False, True
    if en < 1.0:
        if en == 0.0:
            factor = MAX_FACTOR
        else:
            factor = min(MAX_FACTOR, SAFETY * en ** ERROR_EXPONENT)
        if rejected:
            factor = min(1.0, factor)
        return h_abs * factor, True, rejected
    return h_abs * max(MIN_FACTOR, SAFETY * en ** ERROR_EXPONENT), False, True


@njit(cache=True, error_model="numpy")
def interpolate(F, y_old, t, out_y, row):
    """out_y[row] = the dense-output polynomial F at t = (x - x_old) / h.

    Parameters
    ----------
    F : ndarray (INTERPOLATOR_POWER, n)
        The step's interpolant coefficients.
    y_old : ndarray (n,)
        State at the start of the step.
    t : float
        (x - x_old) / h, in [0, 1].
    out_y : ndarray (m, n)
        Output, written in place.
    row : int
        The row of ``out_y`` written.
    """
    n = y_old.shape[0]
    for j in range(n):
        acc = 0.0
        for i in range(INTERPOLATOR_POWER - 1, -1, -1):
            acc += F[i, j]
            if (INTERPOLATOR_POWER - 1 - i) % 2 == 0:
                acc *= t
            else:
                acc *= 1.0 - t
        out_y[row, j] = acc + y_old[j]


def make_integrator(rhs, monitor):
    """Return a compiled ``integrate`` closed over ``rhs`` and ``monitor``.

    The state ``y`` is a float64 array (``rhs(x, y, P, O, dydx)`` writes
    into ``dydx``); the loop is :func:`_make_driver`'s, the steps below.

    Parameters
    ----------
    rhs : numba dispatcher
        Compiled ``rhs(x, y, P, O, dydx)``.
    monitor : numba dispatcher
        Compiled ``monitor(x, y, P, O) -> int``, called after every accepted step.

    Returns
    -------
    numba dispatcher
        ``integrate(x0, y0, x_end, P, O, rtol, atol, h_start, max_step, out_x,
        out_y, dx_out=0.0)`` (see its docstring).
    """

    @njit(cache=True, error_model="numpy")
    def dense_coefficients(x, y, y_new, f_new, h, P, O, K, F, y_stage, f_stage):
        """The step's 7th-order interpolant (DOP853 dense output) into F.

        Three more stages go into K[13:16]; the polynomial is evaluated by
        :func:`interpolate` (layout of scipy's ``DOP853`` dense output).
        """
        n = y.shape[0]
        for e in range(N_STAGES_EXTENDED - N_STAGES - 1):
            s = N_STAGES + 1 + e
            for j in range(n):
                acc = 0.0
                for m in range(s):
                    acc += A_EXTRA[e, m] * K[m, j]
                y_stage[j] = y[j] + h * acc
            rhs(x + C_EXTRA[e] * h, y_stage, P, O, f_stage)
            for j in range(n):
                K[s, j] = f_stage[j]
        for j in range(n):
            dy = y_new[j] - y[j]
            F[0, j] = dy
            F[1, j] = h * K[0, j] - dy
            F[2, j] = 2.0 * dy - h * (f_new[j] + K[0, j])
            for i in range(INTERPOLATOR_POWER - 3):
                acc = 0.0
                for m in range(N_STAGES_EXTENDED):
                    acc += D[i, m] * K[m, j]
                F[3 + i, j] = h * acc

    @njit(cache=True, error_model="numpy")
    def dop853_step(x, y, f, h, P, O, K, y_new, f_new, y_stage, f_stage):
        """One DOP853 step from (x, y) with derivative f; fills K, y_new, f_new."""
        n = y.shape[0]
        for j in range(n):
            K[0, j] = f[j]
        for s in range(1, N_STAGES):
            for j in range(n):
                acc = 0.0
                for m in range(s):
                    acc += A[s, m] * K[m, j]
                y_stage[j] = y[j] + h * acc
            # Through a work vector, not the row view K[s]: building a view
            # per stage costs more than the right-hand side itself.
            rhs(x + C[s] * h, y_stage, P, O, f_stage)
            for j in range(n):
                K[s, j] = f_stage[j]
        for j in range(n):
            acc = 0.0
            for m in range(N_STAGES):
                acc += B[m] * K[m, j]
            y_new[j] = y[j] + h * acc
        rhs(x + h, y_new, P, O, f_new)
        for j in range(n):
            K[N_STAGES, j] = f_new[j]

    @njit(cache=True, error_model="numpy")
    def begin(x, y0, P, O):
        """(y, f, y_new, f_new, K, F, y_stage, f_stage): a copy of the state,
        its derivative, and the buffers of the steps."""
        n = y0.shape[0]
        y = y0.copy()
        f = np.empty(n)
        rhs(x, y, P, O, f)
        return (y, f, np.empty(n), np.empty(n), np.empty((N_STAGES_EXTENDED, n)),
                np.empty((INTERPOLATOR_POWER, n)), np.empty(n), np.empty(n))

    # The driver calls the steps themselves, not wrappers around them: a
    # compiled wrapper that passes arrays on counts their references on every
    # call, which cost Model B's legs 6-12 % (benchmarks/bench_diffusion.py).
    return _make_driver(monitor, True, begin, dop853_step, error_norm, dense_coefficients,
                        interpolate)


def make_scalar_integrator(rhs, monitor):
    """:func:`make_integrator` for one equation, with plain floats for the state.

    ``rhs(x, y, P, O) -> dy/dx`` and ``monitor(x, y, P, O) -> int`` take a
    float ``y``; the returned ``integrate`` has the signature and results of
    the general one with ``y0``, ``y`` floats and ``out_y`` one-dimensional.
    The same driver (:func:`_make_driver`: the same loop, step-size control
    and output), specialised with steps on floats: no arrays in the inner
    loop.  A one-element array state through :func:`make_integrator` gives
    the same numbers bit for bit but takes 1.1-1.3x as long per Model A leg
    (benchmarks/bench_dop853_drivers.py).

    Parameters
    ----------
    rhs : numba dispatcher
        Compiled ``rhs(x, y, P, O) -> float``.
    monitor : numba dispatcher
        Compiled ``monitor(x, y, P, O) -> int``.

    Returns
    -------
    numba dispatcher
        ``integrate``, as :func:`make_integrator` gives it.
    """

    @njit(cache=True, error_model="numpy")
    def begin(x, y0, P, O):
        """(y, f, y_new, f_new, K, F, y_stage, f_stage): the state, its
        derivative and the buffers of the steps (y_new, f_new are returned by
        ``step`` and y_stage, f_stage unused for a float state)."""
        f = rhs(x, y0, P, O)
        return (y0, f, y0, f, np.empty(N_STAGES_EXTENDED), np.empty(INTERPOLATOR_POWER),
                0.0, 0.0)

    @njit(cache=True, error_model="numpy")
    def step(x, y, f, h, P, O, K, y_new, f_new, y_stage, f_stage):
        """One DOP853 step from (x, y) with derivative f: (y_new, f_new); fills K."""
        K[0] = f
        for s in range(1, N_STAGES):
            acc = 0.0
            for m in range(s):
                acc += A[s, m] * K[m]
            K[s] = rhs(x + C[s] * h, y + h * acc, P, O)
        acc = 0.0
        for m in range(N_STAGES):
            acc += B[m] * K[m]
        y_new = y + h * acc
        f_new = rhs(x + h, y_new, P, O)
        K[N_STAGES] = f_new
        return y_new, f_new

    @njit(cache=True, error_model="numpy")
    def dense(x, y, y_new, f_new, h, P, O, K, F, y_stage, f_stage):
        """The step's interpolant into F (as ``dense_coefficients``, one component)."""
        for e in range(N_STAGES_EXTENDED - N_STAGES - 1):
            s = N_STAGES + 1 + e
            acc = 0.0
            for m in range(s):
                acc += A_EXTRA[e, m] * K[m]
            K[s] = rhs(x + C_EXTRA[e] * h, y + h * acc, P, O)
        dy = y_new - y
        F[0] = dy
        F[1] = h * K[0] - dy
        F[2] = 2.0 * dy - h * (f_new + K[0])
        for i in range(INTERPOLATOR_POWER - 3):
            acc = 0.0
            for m in range(N_STAGES_EXTENDED):
                acc += D[i, m] * K[m]
            F[3 + i] = h * acc

    @njit(cache=True, error_model="numpy")
    def store_dense(F, y, t, out_y, row):
        """out_y[row] = the interpolated state at t = (x - x_old) / h."""
        out_y[row] = interpolate_scalar(F, y, t)

    return _make_driver(monitor, False, begin, step, error_norm_scalar, dense, store_dense)


@njit(cache=True, error_model="numpy", inline="always")
def store_row(y, out_y, row):
    """out_y[row, :] = y, element by element.

    ``out_y[row] = y`` means the same, but numba compiles its broadcasting
    with a shape-mismatch error message, and the string formatting that
    message needs took about 2 s of a first Model B run's compile
    (benchmarks/bench_startup.py).

    Parameters
    ----------
    y : ndarray (n,)
        The state.
    out_y : ndarray (m, n)
        Output, written in place.
    row : int
        The row written.
    """
    for j in range(y.shape[0]):
        out_y[row, j] = y[j]


@njit(cache=True, error_model="numpy", inline="always")
def store_float(y, out_y, row):
    """out_y[row] = y, for a float state (:func:`store_row`'s twin).

    Parameters
    ----------
    y : float
        The state.
    out_y : ndarray (m,)
        Output, written in place.
    row : int
        The row written.
    """
    out_y[row] = y


def _make_driver(monitor, in_place, begin, step, norm, dense, store_dense):
    """The one DOP853 driver: the loop, step-size control and output, compiled
    with the state's operations (array or float) chosen by the caller.

    ``begin(x0, y0, P, O) -> (y, f, y_new, f_new, K, F, y_stage, f_stage)``
    makes the state, its derivative and the steps' buffers;
    ``step(x, y, f, h, P, O, K, y_new, f_new, y_stage, f_stage)`` makes one
    trial step; ``norm(K, h, y, y_new, rtol, atol)`` is its error norm;
    ``dense(x, y, y_new, f_new, h, P, O, K, F, y_stage, f_stage)`` puts the
    step's interpolant into F; ``store_dense(F, y, t, out_y, row)`` writes
    the interpolated state into ``out_y[row]``.

    ``in_place`` (a compile-time constant) says how a state moves: True, an
    array state -- ``step`` writes into ``y_new`` and ``f_new`` and the
    accepted step is copied into ``y`` and ``f``; False, a float state --
    ``step`` returns ``(y_new, f_new)`` and they become ``y`` and ``f``.  No
    array reference is rebound inside the loop, so numba counts none there.
    """
    store = store_row if in_place else store_float

    @njit(cache=True, error_model="numpy")
    def integrate(x0, y0, x_end, P, O, rtol, atol, h_start, max_step,
                  out_x, out_y, dx_out=0.0):
        """Integrate y' = rhs(x, y) from x0 to x_end (either direction).

        Parameters
        ----------
        x0, x_end : float
            Start and end of the interval; ``x_end < x0`` integrates backwards.
        y0 : float64[n] (or float, one-equation driver)
            Initial state (copied).
        rtol, atol : float
            Error tolerances, per component ``atol + rtol * |y|``.
        h_start : float
            First trial step size (positive; the direction is taken from x_end).
        max_step : float
            Largest step size allowed (use ``np.inf`` for none).  Limits the
            spacing of stored points.
        out_x, out_y : float64[m], float64[m, n] (float64[m], one equation)
            Storage for accepted points, starting with (x0, y0).  Pass arrays of
            length 0 to store nothing.  Storage stops silently when full.
        dx_out : float
            0 (default): store every accepted step.  > 0: store, besides
            the steps, the points x0 + k dx_out (in the direction of
            integration) from the steps' 7th-order dense output, so that
            the output is at least that fine without limiting the steps.

        Returns
        -------
        status : int
            ``REACHED_END``, ``STEP_TOO_SMALL``, ``TOO_MANY_STEPS`` or the
            monitor's non-zero code.
        x, y : float, float64[n] (or float)
            The last accepted point.
        n_out : int
            Number of points stored.
        nfev : int
            Right-hand-side evaluations.
        """
        direction = 1.0 if x_end >= x0 else -1.0
        x = x0
        y, f, y_new, f_new, K, F, y_stage, f_stage = begin(x, y0, P, O)
        nfev = 1
        capacity = out_x.shape[0]
        n_out = 0
        if capacity > 0:
            out_x[0] = x
            store(y, out_y, 0)
            n_out = 1
        with_dense = dx_out > 0.0
        k_next = 1  # index of the next dense output point x0 + k dx_out
        h_abs = min(abs(h_start), max_step)
        steps = 0
        while direction * (x_end - x) > 0.0:
            min_step, h_abs = step_bounds(x, direction, h_abs, max_step)
            accepted = False
            rejected = False
            while not accepted:
                steps += 1
                if steps > MAX_STEPS:
                    return TOO_MANY_STEPS, x, y, n_out, nfev
                if h_abs < min_step:
                    return STEP_TOO_SMALL, x, y, n_out, nfev
                x_new, h = trial_point(x, h_abs, direction, x_end)
                h_abs = abs(h)
                if in_place:
                    step(x, y, f, h, P, O, K, y_new, f_new, y_stage, f_stage)
                else:
                    y_new, f_new = step(x, y, f, h, P, O, K, y_new, f_new, y_stage, f_stage)
                nfev += N_STAGES
                en = norm(K, h, y, y_new, rtol, atol)
                h_abs, accepted, rejected = next_step(en, h_abs, rejected)
            if with_dense and n_out < capacity:
                x_k = x0 + direction * k_next * dx_out
                if direction * (x_new - x_k) > 0.0:
                    dense(x, y, y_new, f_new, h, P, O, K, F, y_stage, f_stage)
                    nfev += N_STAGES_EXTENDED - N_STAGES - 1
                while direction * (x_new - x_k) > 0.0 and n_out < capacity:
                    store_dense(F, y, (x_k - x) / h, out_y, n_out)
                    out_x[n_out] = x_k
                    n_out += 1
                    k_next += 1
                    x_k = x0 + direction * k_next * dx_out
            x = x_new
            if in_place:
                for j in range(y.shape[0]):
                    y[j] = y_new[j]
                    f[j] = f_new[j]
            else:
                y = y_new
                f = f_new
            code = monitor(x, y, P, O)
            if n_out < capacity:
                out_x[n_out] = x
                store(y, out_y, n_out)
                n_out += 1
            if code != 0:
                return code, x, y, n_out, nfev
        return REACHED_END, x, y, n_out, nfev

    return integrate
