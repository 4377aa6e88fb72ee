"""Wind models: one package per model, each with its own room.

Each model package holds its model class (``model.py``: frozen dataclass, one
declaration per parameter), its compiled kernels (``kernels.py``: numba,
plain floats, cgs), its solver (``solve.py``: kernels -> WindResult), what
``windsolve check`` prints (``check.py``) and, in ``__init__.py``, its
:class:`~windsolve.registry.ModelSpec`, registered when the package is
imported.  Shared declarations (:class:`Param`, :func:`param`,
:class:`WindModel`) are in :mod:`windsolve.models.base`.

Build a model from keywords (strings with units or Quantities)::

    >>> from windsolve import IsothermalWind
    >>> m = IsothermalWind(mass="50 Msun", radius="100 Rsun", luminosity="4e6 Lsun",
    ...                    sound_speed="20 km/s", base_density="1e-9 g/cm3")

and variants with :meth:`WindModel.replace`.
"""

from ..registry import MODELS
from .base import REQUIRED, Param, WindModel, format_value, param

# Registration order (model-file messages list the kinds in it): Model A, then B.
from .isothermal import IsothermalWind  # isort: split

from .diffusion import DiffusionWind

__all__ = ["MODELS", "REQUIRED", "Param", "WindModel", "format_value", "param",
           "IsothermalWind", "DiffusionWind"]
