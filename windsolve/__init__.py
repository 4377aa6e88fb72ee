"""windsolve: steady continuum-driven stellar winds, solved through their critical point.

Quick start::

    >>> import windsolve
    >>> model = windsolve.load_model("configs/demo.toml")
    >>> result = windsolve.solve(model)
    >>> result.summary["mass_loss_rate"].to("Msun/yr")
    >>> result.to_hdf5("demo.h5")
"""

from typing import TYPE_CHECKING

from ._version import __version__
from .errors import ModelError, NoSolutionError, OutputError, WindsolveError
from .modelfile import load_model, model_from_dict
from .models import MODELS, DiffusionWind, IsothermalWind
from .opacity import OPACITY_LAWS, Opacity
from .result import WindResult
from .solve import solve

if TYPE_CHECKING:
    from importlib.resources.abc import Traversable
    from pathlib import Path

__all__ = [
    "__version__",
    "load_model",
    "model_from_dict",
    "solve",
    "IsothermalWind",
    "DiffusionWind",
    "Opacity",
    "WindResult",
    "MODELS",
    "OPACITY_LAWS",
    "WindsolveError",
    "ModelError",
    "NoSolutionError",
    "OutputError",
    "demo_model_path",
    "read_result",
    "read_table",
]


def __getattr__(name):
    # windsolve.read_table imports astropy.table (0.15 s) only when first used
    if name == "read_table":
        from .tabular import read_table
        return read_table
    raise AttributeError(f"module 'windsolve' has no attribute {name!r}")


def demo_model_path() -> "Traversable":
    """Path of the built-in demo model file (an invented star).

    Returns
    -------
    importlib.resources.abc.Traversable
        ``windsolve/data/demo.toml``, which :func:`load_model` reads.
    """
    from importlib.resources import files
    return files("windsolve") / "data" / "demo.toml"


def read_result(path: "str | Path") -> WindResult:
    """Read a result file written by :meth:`WindResult.to_hdf5`.

    Parameters
    ----------
    path : str or Path
        An HDF5 result file (layout: docs/physics.md, section 9).

    Returns
    -------
    WindResult

    Raises
    ------
    OutputError
        A missing or damaged file, in one line naming the file and the
        dataset or attribute (see :meth:`WindResult.from_hdf5`).
    """
    return WindResult.from_hdf5(path)
