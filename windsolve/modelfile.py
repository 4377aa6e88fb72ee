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

__all__ = ["load_model", "read_model_file", "model_from_dict", "dumps", "parse_assignment",
           "load_model_with"]


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
    if kind is None and isinstance(data.get("sweep"), dict):
        raise ModelError(f"{source}: this is a sweep file (it has a [sweep] table), not a model "
                         f"file: use windsolve sweep {source} -o OUT.h5")
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


def parse_assignment(text: str) -> tuple[str, object]:
    """``"section.key=value"`` -> ``("section.key", value)``, the value read as a model file would.

    The value is read as a TOML value (``1e-9`` a number, ``true`` a boolean,
    ``"3e6 Lsun"`` a string); anything TOML cannot read is taken as the
    string it is, so ``star.luminosity=3e6 Lsun`` (the shell having removed
    the quotes) means ``luminosity = "3e6 Lsun"`` in ``[star]``.

    Parameters
    ----------
    text : str
        One assignment, as given to ``windsolve run --set``.

    Returns
    -------
    key : str
        The dotted key (``section.key``, or a top-level key such as ``name``).
    value : str, float, int or bool
        The value as a model file would hold it.

    Raises
    ------
    ModelError
        No ``=``, an empty key or value, or a key with more than one dot.
    """
    import tomllib
    key, eq, value = text.partition("=")
    key, value = key.strip(), value.strip()
    example = 'e.g. --set star.luminosity="3e6 Lsun" or --set numerics.rtol=1e-9'
    if not eq or not key or not value:
        raise ModelError(f"--set {text}: write --set section.key=value, {example}")
    parts = key.split(".")
    if len(parts) > 2 or not all(parts):
        raise ModelError(f"--set {text}: \"{key}\" is not a model-file key; write "
                         f"section.key=value (one dot), {example}")
    try:
        value = tomllib.loads(f"v = {value}")["v"]
    except tomllib.TOMLDecodeError:
        pass  # a bare word or a value with a unit: the string as written
    if isinstance(value, (dict, list)):
        raise ModelError(f"--set {text}: give one value (a number, true/false or a string "
                         f"with its unit), {example}")
    return key, value


def load_model_with(path: str | Path, assignments: "list[str]") -> "WindModel":
    """:func:`load_model` with some keys changed: ``windsolve run MODEL --set KEY=VALUE``.

    Parameters
    ----------
    path : str or Path
        A model file (TOML); it must be valid as it stands.
    assignments : list of str
        ``"section.key=value"`` each (:func:`parse_assignment`), applied in
        order; a later one of the same key wins.

    Returns
    -------
    WindModel
        The changed model, validated as a model file with those values would be.

    Raises
    ------
    ModelError
        The file itself is bad (the message names it), or an assignment is
        malformed, names an unknown key or gives a bad value: one line
        starting ``--set KEY=VALUE:`` with the reason and the fix.
    """
    model = load_model(path)
    if not assignments:
        return model
    source = str(path)
    data = read_model_file(path)
    for text in assignments:
        key, value = parse_assignment(text)
        section, _, name = key.rpartition(".")
        if section:
            table = data.get(section)
            if table is not None and not isinstance(table, dict):
                raise ModelError(f"--set {text}: {section} is not a table of a model file")
            data[section] = dict(table or {}, **{name: value})
        else:
            data[name] = value
        try:
            model = model_from_dict(data, source=source)
        except ModelError as error:
            reason = str(error)
            if reason.startswith(source + ": "):
                reason = reason[len(source) + 2:]
            raise ModelError(f"--set {text}: {reason}") from None
    return model
