"""What every wind model shares: frozen dataclasses, one declaration per parameter.

Each field declares, once, its key in the model file, its unit, its default
and its check (:func:`param`).  The model-file reader, the resolved-model
writer, ``windsolve check`` and sweeps all read these declarations.  Values
are stored as astropy Quantities in cgs units (plain floats for fractions
and flags); kernels get plain floats from :meth:`WindModel.kernel_arrays`.

The model classes themselves live in their own packages
(:mod:`windsolve.models.isothermal`, :mod:`windsolve.models.diffusion`).
"""

import dataclasses
import math
import threading
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u

from .._units import fast_cgs, format_quantity, plain, to_quantity
from ..core.constants import C_LIGHT, M_SUN, R_SUN, YEAR, G
from ..errors import ModelError
from ..opacity import Opacity, nearest
from ..result import PROFILE_UNITS
from ..tables import packaged_table

__all__ = ["WindModel", "Param", "param", "format_value", "REQUIRED"]

# -- what every model's solver shares -------------------------------------------------
FOUR_PI = 4.0 * math.pi
# Units built once: composing them on every call costs more than a solve.
# (the profile's are the very objects of PROFILE_UNITS: readers that find
# them can skip the conversion)
G_S = u.g / u.s
CM_S = PROFILE_UNITS["velocity"]
G_CM3 = PROFILE_UNITS["density"]
CM2_G = PROFILE_UNITS["opacity"]
ERG_S = PROFILE_UNITS["luminosity"]
DELTA = 1e-6  # start this fraction of r_c off the critical point (docs/physics.md, section 8)
MAX_STEP = 0.02  # largest step in ln r of a stored profile (~115 points per decade)
CAPACITY = 200000  # stored points per leg


INWARD_PROFILE_FAILED = ("the stored inward profile did not reach R0 although the shooting "
                         "did; tighten numerics.rtol")


MSUN_YR = M_SUN / YEAR  # g/s in 1 Msun/yr
RSUN = R_SUN

# -- model declarations ---------------------------------------------------------------
REQUIRED = object()
RHO = u.g / u.cm**3  # unit objects made once: fast_cgs caches by identity
LUM = u.erg / u.s


@dataclass(frozen=True)
class Param:
    """Declaration of one model parameter (see :func:`param`)."""

    key: str  # dotted key in the model file, e.g. "star.mass"
    kind: object  # an astropy unit, or float, bool, str
    doc: str
    default: object = REQUIRED
    check: str = ""  # "", "positive", "nonnegative", "fraction", "rtol"

    @property
    def section(self) -> str:
        """The model-file table of the key (``"star"`` for ``"star.mass"``)."""
        return self.key.rpartition(".")[0]

    @property
    def name(self) -> str:
        """The key's name inside its table (``"mass"`` for ``"star.mass"``)."""
        return self.key.rpartition(".")[2]

    @property
    def where(self) -> str:
        """The key as messages name it, e.g. ``"[star] mass"``."""
        return f"[{self.section}] {self.name}" if self.section else self.name

    def read(self, value: "u.Quantity | float | str | bool") -> "u.Quantity | float | str | bool":
        """Convert and check one value.

        Parameters
        ----------
        value : str, float, Quantity or bool
            As written in the model file or passed as a keyword (a string with
            units such as ``"50 Msun"``, a Quantity, a number, a flag, a string).

        Returns
        -------
        Quantity, float, bool or str
            A Quantity (in the value's own unit, checked against :attr:`kind`),
            or the plain value for ``float``, ``bool`` and ``str`` parameters.

        Raises
        ------
        ModelError
            Wrong type or unit, not finite, or outside what :attr:`check` allows;
            the message names the key.
        """
        where = self.where
        if self.kind is bool:
            if not isinstance(value, bool):
                raise ModelError(f"{where} = {plain(value)}: write true or false")
            return value
        if self.kind is str:
            if not isinstance(value, str):
                raise ModelError(f"{where} = {plain(value)}: write a quoted string")
            return value
        if self.kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ModelError(f"{where} = {plain(value)}: write a plain number")
            value = float(value)
            number = value
        else:
            value = to_quantity(value, self.kind, where, convert=False)
            number = float(value.value)
        if not math.isfinite(number):
            raise ModelError(f"{where} = {plain(value)}: must be finite")
        if self.check == "positive" and not number > 0:
            raise ModelError(f"{where} = {format_value(value)}: must be positive")
        if self.check == "nonnegative" and not number >= 0:
            raise ModelError(f"{where} = {format_value(value)}: must not be negative")
        if self.check == "fraction" and not 0.0 <= number <= 1.0:
            raise ModelError(f"{where} = {plain(number)}: a mass fraction lies between 0 and 1")
        if self.check == "rtol" and not 1e-13 <= number <= 1e-3:
            raise ModelError(f"{where} = {plain(number)}: choose a relative tolerance "
                             f"between 1e-13 and 1e-3 (1e-8 is the default)")
        return value

    def cgs(self, value) -> float:
        """Plain float in the declared (cgs) unit.

        Parameters
        ----------
        value : Quantity or float
            A value returned by :meth:`read`.

        Returns
        -------
        float
            The value in :attr:`kind` (a plain number is returned as a float).
        """
        if isinstance(value, u.Quantity):
            return float(value.to_value(self.kind))
        return float(value)

    def dump(self, value: "u.Quantity | float | str | bool") -> "str | float | bool":
        """Value as written in a model file.

        Parameters
        ----------
        value : Quantity, float, bool or str
            A value returned by :meth:`read`.

        Returns
        -------
        str, float, bool
            A Quantity as a string with units (``"50.0 solMass"``); anything else as it is.
        """
        if isinstance(value, u.Quantity):
            return format_quantity(value)
        return value


def format_value(value) -> str:
    """A value as messages show it (:func:`windsolve._units.plain`).

    Parameters
    ----------
    value : Quantity, float, str or object
        Any parameter value.

    Returns
    -------
    str
    """
    return plain(value)


def param(key: str, kind, doc: str, default=REQUIRED, check: str = ""):
    """A dataclass field that declares a model-file parameter.

    Parameters
    ----------
    key : str
        Dotted key in the model file, e.g. ``"star.mass"``.
    kind : astropy unit or type
        The cgs unit of a dimensional value (``u.g``, ``u.cm / u.s``), or
        ``float``, ``bool`` or ``str``.
    doc : str
        One line saying what it is (used in messages about a missing key).
    default : object
        Value when omitted; :data:`REQUIRED` for none (the key must be given),
        None for an optional parameter without a value.
    check : str
        ``""``, ``"positive"``, ``"nonnegative"``, ``"fraction"`` or ``"rtol"``.

    Returns
    -------
    dataclasses.Field
        A field defaulting to None, with the :class:`Param` in its metadata.
    """
    meta = {"param": Param(key, kind, doc, default, check)}
    return field(default=None, metadata=meta)


# The fields WindModel.replace copies unchanged from a checked model (per
# thread: dask workers may build models in several threads at once).
_REPLACING = threading.local()


class WindModel:
    """Shared machinery of the model dataclasses (not a model itself)."""

    kind = ""  # the model file's top-level ``model`` value
    sections = ()  # tables the model file may have

    # -- declarations -----------------------------------------------------
    @classmethod
    def params(cls) -> dict:
        """``{field name: Param}`` for every declared parameter (built once per class;
        do not change it)."""
        found = cls.__dict__.get("_param_declarations")
        if found is None:
            found = {f.name: f.metadata["param"] for f in dataclasses.fields(cls)
                     if "param" in f.metadata}
            cls._param_declarations = found
        return found

    @classmethod
    def keys(cls) -> list[str]:
        """Every dotted model-file key this model accepts."""
        keys = [p.key for p in cls.params().values()]
        keys += ["opacity.law"] + [f"opacity.{p}" for p in cls.opacity_parameter_names()]
        return keys

    @staticmethod
    def opacity_parameter_names() -> list[str]:
        """Names of every opacity-law parameter (all laws), sorted."""
        from ..opacity import OPACITY_LAWS
        return sorted({p.name for law in OPACITY_LAWS.values() for p in law.parameters})

    # -- construction -----------------------------------------------------
    def _read_fields(self):
        """Convert every declared field in place (called by __post_init__).

        Fields that :meth:`replace` copied from an already-checked model are
        taken as they are (the cross-field checks of __post_init__ still run).
        """
        trusted = getattr(_REPLACING, "unchanged", ())
        for name, p in self.params().items():
            if name in trusted:
                continue
            value = getattr(self, name)
            if value is None:
                if p.default is REQUIRED:
                    raise ModelError(f"{p.where} is missing: {p.doc}")
                value = None if p.default is None else p.read(p.default)
            else:
                value = p.read(value)
            object.__setattr__(self, name, value)
        opacity = getattr(self, "opacity", None)
        if opacity is None:
            object.__setattr__(self, "opacity", Opacity())
        elif isinstance(opacity, dict):
            table = dict(opacity)
            law = table.pop("law", "electron_scattering")
            object.__setattr__(self, "opacity", Opacity(law, table))
        elif not isinstance(opacity, Opacity):
            raise ModelError("opacity must be an Opacity or a table with a law")

    @classmethod
    def from_dict(cls, data: dict, source: str = "model") -> "WindModel":
        """Build from a parsed model file (nested dicts); unknown keys fail.

        Parameters
        ----------
        data : dict
            The model file's tables (see :func:`windsolve.model_from_dict`).
        source : str
            Names the origin in error messages (the file's path).

        Returns
        -------
        WindModel
            An instance of ``cls``.

        Raises
        ------
        ModelError
            An unknown key (with the nearest valid one) or an invalid value.
        """
        by_key = {p.key: name for name, p in cls.params().items()}
        kwargs = {}
        for top, value in data.items():
            if top == "model":
                continue
            if isinstance(value, dict) and top in by_key:
                kwargs[by_key[top]] = value  # a table where a value belongs: read() says so
                continue
            if not isinstance(value, dict) and top in cls.sections:
                raise ModelError(f"{source}: {top} = {plain(value)}: [{top}] is a table, not "
                                 f"a value; write the line [{top}] and below it its keys "
                                 f"({', '.join(cls._table_keys(top, by_key))})")
            if isinstance(value, dict):
                if top not in cls.sections:
                    raise ModelError(f"{source}: unknown table [{top}]"
                                     f"{nearest(top, cls.sections)}; tables are "
                                     f"{', '.join('[' + s + ']' for s in cls.sections)}")
                if top == "opacity":
                    table = dict(value)
                    # A table file is found relative to the model file.
                    # A bare name of a shipped table (e.g. "GN93hz") names that
                    # table; write "./GN93hz" for a file of that name.
                    if (isinstance(table.get("path"), str) and source != "model"
                            and packaged_table(table["path"]) is None):
                        path = Path(table["path"]).expanduser()
                        if not path.is_absolute():
                            path = Path(source).resolve().parent / path
                        table["path"] = str(path)
                    kwargs["opacity"] = table
                    continue
                for key, item in value.items():
                    dotted = f"{top}.{key}"
                    if dotted not in by_key:
                        inside = [k.rpartition(".")[2] for k in by_key if k.startswith(top + ".")]
                        raise ModelError(f"{source}: unknown key \"{key}\" in [{top}]"
                                         f"{nearest(key, inside)}; [{top}] takes "
                                         f"{', '.join(inside)}")
                    kwargs[by_key[dotted]] = item
            else:
                if top not in by_key:
                    owners = [k.rpartition(".")[0] for k in by_key if k.endswith("." + top)]
                    if top in cls.opacity_parameter_names() or top == "law":
                        owners.append("opacity")
                    if owners:
                        raise ModelError(f"{source}: unknown key \"{top}\" at the top level: "
                                         f"it belongs in [{owners[0]}]; write it below the "
                                         f"[{owners[0]}] line (a key above every table "
                                         f"line is a top-level key)")
                    tops = ["model"] + [k for k in by_key if "." not in k]
                    hint = nearest(top, tops + list(cls.sections))
                    raise ModelError(f"{source}: unknown key \"{top}\"{hint}; the top level "
                                     f"takes {', '.join(tops)} and the tables "
                                     f"{', '.join('[' + s + ']' for s in cls.sections)}")
                kwargs[by_key[top]] = value
        try:
            return cls(**kwargs)
        except ModelError as error:  # name the file too
            if source == "model" or str(error).startswith(source):
                raise
            raise ModelError(f"{source}: {error}") from None

    @staticmethod
    def _table_keys(section, by_key):
        if section == "opacity":
            return ["law", "and the law's parameters"]
        return [k.rpartition(".")[2] for k in by_key if k.startswith(section + ".")]

    def replace(self, **changes) -> "WindModel":
        """A copy with some fields changed (validated again).

        Parameters
        ----------
        **changes
            Field names (``luminosity="3e6 Lsun"``) or dotted model-file keys
            (``**{"star.luminosity": "3e6 Lsun"}``, ``**{"opacity.law":
            "kramers"}``) and new values, as the constructor or a model file
            takes them (Quantities, or strings with units).

        Returns
        -------
        WindModel
            A new model of the same class.

        Raises
        ------
        ModelError
            As the constructor; or a key that is neither a field nor a model-file
            key of this model (naming the nearest one).

        Notes
        -----
        Only the changed fields are read again; the cross-field checks run on
        the whole.  A sweep builds every row this way, so it is kept cheap.

        Examples
        --------
        >>> model = windsolve.load_model(windsolve.demo_model_path())  # doctest: +SKIP
        >>> brighter = model.replace(**{"star.luminosity": "5e6 Lsun"})  # doctest: +SKIP
        """
        if any("." in key for key in changes):
            changes = self._field_changes(changes)
        values = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        values.update(changes)
        _REPLACING.unchanged = frozenset(values).difference(changes)
        try:
            return type(self)(**values)
        finally:
            _REPLACING.unchanged = ()

    def _field_changes(self, changes):
        """``changes`` with dotted model-file keys turned into field names."""
        by_key = {p.key: name for name, p in self.params().items()}
        fields = {f.name for f in dataclasses.fields(self)}
        out, opacity = {}, {}
        for key, value in changes.items():
            if key in fields and "." not in key:
                out[key] = value
            elif key in by_key:
                out[by_key[key]] = value
            elif key.startswith("opacity.") and (key.partition(".")[2] == "law" or
                                                 key.partition(".")[2]
                                                 in self.opacity_parameter_names()):
                opacity[key.partition(".")[2]] = value
            else:
                keys = [*by_key, "opacity.law"]
                raise ModelError(f"replace: unknown key \"{key}\"{nearest(key, keys)}; "
                                 f"give a field name or a dotted model-file key "
                                 f"({', '.join(keys[:6])}, ...; {type(self).__name__}.keys() "
                                 f"lists them all)")
        if opacity:
            if "opacity" in out:
                raise ModelError("replace: give either opacity or opacity.* keys, not both")
            table = dict(self.opacity.to_toml())
            if "law" in opacity and opacity["law"] != table.get("law"):
                table = {}  # another law: its own parameters only
            out["opacity"] = dict(table, **opacity)
        return out

    # -- text ---------------------------------------------------------------
    def __repr__(self):
        shown = []
        for name, p in self.params().items():
            value = getattr(self, name, None)
            if value is None or p.section != "star":
                continue
            shown.append(f"{p.key} = {format_value(value)}")
        return (f"<{type(self).__name__} {getattr(self, 'name', '')!r} ({self.kind}): "
                f"{', '.join(shown)}>")

    def _repr_html_(self):
        from .._units import html_summary
        rows = [("model", self.kind)]
        for name, p in self.params().items():
            value = getattr(self, name, None)
            if value is not None:
                rows.append((p.key, value))
        rows += [(f"opacity.{k}", v) for k, v in self.opacity.to_toml().items()]
        return html_summary(f"{type(self).__name__} {getattr(self, 'name', '')}", rows)

    def cgs(self, name: str) -> float:
        """Field ``name`` as a plain float in cgs (NaN when unset).

        Parameters
        ----------
        name : str
            A field name, e.g. ``"mass"`` (returns grams).

        Returns
        -------
        float
            The value in the field's cgs unit (``params()[name]``).
        """
        value = getattr(self, name)
        return math.nan if value is None else self.params()[name].cgs(value)

    # -- derived checks -----------------------------------------------------
    def _check_outside_horizon(self, r, what, fix):
        """A Newtonian wind needs radius ``r`` [cm] outside 2GM/c^2 (escape speed below c);
        also catches a radius whose escape speed overflows (r tiny or 0).  ``what()``
        gives the message's subject (built only when needed)."""
        rs = 2.0 * G * fast_cgs(self.mass, u.g) / (C_LIGHT * C_LIGHT)
        if not r > rs:
            raise ModelError(f"{what()} lies inside the Schwarzschild radius 2GM/c^2 = "
                             f"{rs:.4g} cm of [star] mass = {plain(self.mass)}: the escape "
                             f"speed there is faster than the speed of light, where a "
                             f"Newtonian wind has no meaning; {fix}")

    # -- output -------------------------------------------------------------
    def to_dict(self) -> dict:
        """The resolved model file as nested dicts (defaults filled in).

        Returns
        -------
        dict
            ``model`` and one dict per table; Quantities as strings in the
            unit they were given (``"50.0 solMass"``), ready for
            :func:`windsolve.modelfile.dumps`.
        """
        out = {"model": self.kind}
        for name, p in self.params().items():
            value = getattr(self, name)
            if value is None:
                continue
            if p.section:
                out.setdefault(p.section, {})[p.name] = p.dump(value)
            else:
                out[p.name] = p.dump(value)
        out["opacity"] = self.opacity.to_toml()
        ordered = {"model": out.pop("model")}
        for key in [k for k in out if not isinstance(out[k], dict)]:
            ordered[key] = out.pop(key)
        for section in self.sections:
            if section in out:
                ordered[section] = out.pop(section)
        return ordered
