"""Model files: TOML in, TOML out.

Reading uses :mod:`tomllib`; writing (the resolved model stored with every
result) uses the small writer :func:`windsolve.io.tomlfile.dumps` (imported
here), which covers the value types a model file holds: strings, numbers,
booleans and one level of tables.
"""

from pathlib import Path
from typing import TYPE_CHECKING

from ._units import plain
from .errors import ModelError
from .io import dumps, parse_toml, read_input_text
from .opacity import nearest

if TYPE_CHECKING:
    from .models import WindModel

__all__ = ["load_model", "read_model_file", "model_from_dict", "dumps"]


def read_model_file(path: str | Path) -> dict:
    """Parse a TOML file into nested dicts, with one-line errors.

    Parameters
    ----------
    path : str or Path
        A model file (TOML, UTF-8).

    Returns
    -------
    dict
        The parsed tables, values as written (strings with units unparsed).

    Raises
    ------
    ModelError
        The file is missing, unreadable, not UTF-8 or not valid TOML.
    """
    path = Path(path)
    text = read_input_text(path, "a model file",
                           "give the path of a model file (see configs/ for examples)",
                           "a model file is TOML text, saved as UTF-8")
    return parse_toml(text, path)


def model_from_dict(data: dict, source: str = "model") -> "WindModel":
    """Build the model object a parsed model file describes.

    Parameters
    ----------
    data : dict
        Nested tables as a model file holds them: the top-level key
        ``model`` (``"isothermal"`` or ``"diffusion"``) and tables such as
        ``star``, ``composition``, ``opacity``, ``boundary``; dimensioned
        values as strings (``"1.2 Msun"``) or Quantities.
    source : str
        Names the origin of ``data`` in error messages.

    Returns
    -------
    WindModel
        An :class:`~windsolve.models.IsothermalWind` or
        :class:`~windsolve.models.DiffusionWind`, validated and frozen.

    Raises
    ------
    ModelError
        A missing or unknown model kind, an unknown key (the message suggests
        the nearest valid one), a value without a unit or with the wrong
        dimension, or an inconsistent model.
    """
    from .registry import MODELS
    kind = data.get("model")
    if kind is None:
        raise ModelError(f"{source}: the top-level key model is missing; add e.g. "
                         f"model = \"isothermal\" (one of: {', '.join(MODELS)})")
    if not isinstance(kind, str):
        raise ModelError(f"{source}: model = {plain(kind)}: write the model kind as a quoted "
                         f"string, one of: {', '.join(MODELS)}")
    if kind not in MODELS:
        raise ModelError(f"{source}: model = \"{kind}\" is not known{nearest(str(kind), MODELS)}; "
                         f"choose one of: {', '.join(MODELS)}")
    return MODELS[kind].from_dict(data, source=source)


def load_model(path: str | Path) -> "WindModel":
    """Read and validate a model file; returns a frozen model object.

    Parameters
    ----------
    path : str or Path
        A model file (TOML); relative table paths in it are resolved against
        its directory.

    Returns
    -------
    WindModel
        :class:`~windsolve.models.IsothermalWind` (``model = "isothermal"``,
        docs/physics.md, section 4) or :class:`~windsolve.models.DiffusionWind`
        (``model = "diffusion"``, docs/physics.md, section 5).

    Raises
    ------
    ModelError
        A one-line message naming the file, the key and the fix when
        anything is wrong (see :func:`read_model_file`, :func:`model_from_dict`).
    """
    return model_from_dict(read_model_file(path), source=str(path))
