"""Compiled kernels: numba, plain float64, cgs.  Nothing here imports astropy.

The user-facing layer (``windsolve.physics``, ``windsolve.models``,
``windsolve.solve``) validates input, converts units once and calls these.
"""
