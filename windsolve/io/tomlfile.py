"""TOML: reading text with a one-line error, and the writer of the resolved model
stored with every result (strings, numbers, booleans and one level of tables)."""

import math
import tomllib
from typing import TYPE_CHECKING

from ..errors import ModelError

if TYPE_CHECKING:
    from pathlib import Path


def parse_toml(text: str, path: "str | Path") -> dict:
    """The data of TOML ``text`` read from ``path``, or a one-line ModelError.

    Parameters
    ----------
    text : str
        The file's text.
    path : str or Path
        Names the file in the message.

    Returns
    -------
    dict
        The parsed tables, values as written.

    Raises
    ------
    ModelError
        ``text`` is not valid TOML: "PATH: not valid TOML: " and tomllib's
        reason (which names the line and column).
    """
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise ModelError(f"{path}: not valid TOML: {error}") from None


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


def dumps(data: dict) -> str:
    """Write nested dicts (one level of tables) as TOML text.

    Parameters
    ----------
    data : dict
        Top-level values and one level of tables of strings, numbers and
        booleans (a resolved model's :meth:`~windsolve.models.WindModel.to_dict`).

    Returns
    -------
    str
        TOML text that :mod:`tomllib` reads back to ``data``.

    Raises
    ------
    TypeError
        A value of a type the writer does not cover.
    """
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
