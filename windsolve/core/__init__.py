"""Compiled kernels: numba, plain float64, cgs.  Nothing here imports astropy.

The user-facing layer (``windsolve.physics``, ``windsolve.models``,
``windsolve.solve``) validates input, converts units once and calls these.
"""

from ._cachelock import install as _install_cache_lock

# Before any kernel below is compiled or loaded from numba's cache (see _cachelock).
CACHE_LOCKED = _install_cache_lock()
