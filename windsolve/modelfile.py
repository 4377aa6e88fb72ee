"""Model files: TOML in, TOML out.

Reading uses :mod:`tomllib`; writing (the resolved model stored with every
result) uses the small writer below, which covers the value types a model
file holds: strings, numbers, booleans and one level of tables.
"""

import math
import tomllib
from pathlib import Path

from ._io import read_input_text
from ._units import plain
from .errors import ModelError
from .opacity import nearest

__all__ = ["load_model", "read_model_file", "model_from_dict", "dumps"]


def read_model_file(path):
    """Parse a TOML file into nested dicts, with one-line errors."""
    path = Path(path)
    text = read_input_text(path, "a model file",
                           "give the path of a model file (see configs/ for examples)",
                           "a model file is TOML text, saved as UTF-8")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise ModelError(f"{path}: not valid TOML: {error}") from None


def model_from_dict(data, source="model"):
    """Build the model object a parsed model file describes."""
    from .models import MODELS
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


def load_model(path):
    """Read and validate a model file; returns a frozen model object.

    Raises :class:`~windsolve.errors.ModelError` with a one-line message
    naming the file, the key and the fix when anything is wrong.
    """
    return model_from_dict(read_model_file(path), source=str(path))


def _value(value):
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        escaped = value.replace("\\", "\\\\").replace('"', '\\"')
        return f'"{escaped}"'
    raise TypeError(f"cannot write {type(value).__name__} to TOML")


def dumps(data):
    """Write nested dicts (one level of tables) as TOML text."""
    lines = []
    for key, value in data.items():
        if not isinstance(value, dict):
            lines.append(f"{key} = {_value(value)}")
    for key, value in data.items():
        if isinstance(value, dict):
            lines.append("")
            lines.append(f"[{key}]")
            for k, v in value.items():
                lines.append(f"{k} = {_value(v)}")
    return "\n".join(lines) + "\n"
