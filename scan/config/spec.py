"""Config keys as dataclass fields with a :class:`Spec`, and their validation.

Every run-config section is a frozen dataclass whose fields carry a :func:`spec` (type,
bounds, choices, documentation).  :func:`build_section` walks a TOML table against those
specs; any unknown key, wrong type, out-of-range value or missing required key raises one
:class:`scan.errors.ConfigError` naming the file, the key path and a fix (with the closest
valid key for a misspelling).  :func:`describe` lists the keys for ``configs/README.md``.
"""
from __future__ import annotations

import dataclasses
import math
import types
import typing
from typing import Any

from scan.errors import ConfigError, did_you_mean

REQUIRED = dataclasses.MISSING


@dataclasses.dataclass(frozen=True)
class Spec:
    """How one config key is checked (see :func:`spec`)."""

    doc: str
    units: str = ""
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    exclusive_maximum: bool = False
    choices: tuple[str, ...] = ()


#: Upper bounds of run-config keys, as time and memory grow with each: ``modes.n_k`` (32 x
#: the default 128), ``modes.x_in`` (a mode oscillates ~x_in times before exit; the
#: de Sitter start is good to a few 1e-6 at 100, inflation.md sect. 2.2),
#: ``observables.n_f``/``n_m`` (the GW quadrature's memory grows as n_f x table rows), and
#: ``run.seed`` (the range of emcee's generator, numpy's RandomState).
N_K_MAX, X_IN_MAX, N_GRID_MAX, SEED_MAX = 4096, 1e4, 1000, 2**32 - 1


def spec(doc: str, default: Any = REQUIRED, *, units: str = "", minimum: float | None = None,
         maximum: float | None = None, exclusive_minimum: bool = False,
         exclusive_maximum: bool = False, choices: tuple[str, ...] = (),
         default_factory: Any = REQUIRED) -> Any:
    """A dataclass field with a :class:`Spec` in its metadata.

    ``default=REQUIRED`` (the default) makes the key mandatory.  Bounds apply to numbers
    (and to every element of a list of numbers); ``choices`` to strings.
    """
    meta = {"spec": Spec(doc, units, minimum, maximum, exclusive_minimum, exclusive_maximum,
                         tuple(choices))}
    if default_factory is not REQUIRED:
        return dataclasses.field(default_factory=default_factory, metadata=meta)
    return dataclasses.field(default=default, metadata=meta)


# --------------------------------------------------------------------------- validation
def _type_name(tp: Any) -> str:
    names = {float: "a number", int: "an integer", str: "a string", bool: "true or false"}
    origin = typing.get_origin(tp)
    if origin is tuple:
        return f"a list of {_type_name(typing.get_args(tp)[0])[2:]}s"
    if origin in (typing.Union, types.UnionType):
        return " or ".join(_type_name(a) for a in typing.get_args(tp) if a is not type(None))
    if dataclasses.is_dataclass(tp):
        return "a table"
    return names.get(tp, str(tp))


def _check_number(value: Any, sp: Spec, where: str, source: str) -> None:
    if not math.isfinite(value):
        raise ConfigError(source, where, f"must be finite, got {value}", "give a finite number")
    lo, hi = sp.minimum, sp.maximum
    if lo is not None and (value < lo or (sp.exclusive_minimum and value == lo)):
        rel = ">" if sp.exclusive_minimum else ">="
        raise ConfigError(source, where, f"must be {rel} {lo}, got {value}",
                          f"choose a value {rel} {lo}" + (f" [{sp.units}]" if sp.units else ""))
    if hi is not None and (value > hi or (sp.exclusive_maximum and value == hi)):
        rel = "<" if sp.exclusive_maximum else "<="
        raise ConfigError(source, where, f"must be {rel} {hi}, got {value}",
                          f"choose a value {rel} {hi}" + (f" [{sp.units}]" if sp.units else ""))


def _coerce(value: Any, tp: Any, sp: Spec, where: str, source: str) -> Any:
    """Check ``value`` against the field type ``tp`` and its spec; return the clean value."""
    origin = typing.get_origin(tp)
    args = typing.get_args(tp)
    if origin in (typing.Union, types.UnionType):
        members = [a for a in args if a is not type(None)]
        errors = []
        for member in members:
            try:
                return _coerce(value, member, sp, where, source)
            except ConfigError as err:
                errors.append(err)
        raise errors[0] if len(errors) == 1 else ConfigError(
            source, where, f"must be {_type_name(tp)}, got {value!r}")
    if origin is tuple:
        if not isinstance(value, list):
            raise ConfigError(source, where, f"must be a list, got {value!r}",
                              f"write it as [{value!r}]")
        return tuple(_coerce(v, args[0], sp, f"{where}[{i}]", source) for i, v in enumerate(value))
    if dataclasses.is_dataclass(tp):
        if not isinstance(value, dict):
            raise ConfigError(source, where, f"must be a table, got {value!r}")
        return build_section(tp, value, where, source)
    if tp is bool:
        if not isinstance(value, bool):
            raise ConfigError(source, where, f"must be true or false, got {value!r}")
        return value
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(source, where, f"must be a number, got {value!r}",
                              "write a number without quotes")
        value = float(value)
        _check_number(value, sp, where, source)
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ConfigError(source, where, f"must be an integer, got {value!r}")
        _check_number(value, sp, where, source)
        return value
    if tp is str:
        if not isinstance(value, str):
            raise ConfigError(source, where, f"must be a string, got {value!r}",
                              "put the value in quotes")
        if sp.choices and value not in sp.choices:
            raise ConfigError(source, where,
                              f"unknown value '{value}'{did_you_mean(value, sp.choices)}",
                              "allowed: " + ", ".join(sp.choices))
        return value
    raise TypeError(f"unsupported config field type {tp!r}")  # schema bug, not user error


def build_section(cls: type, table: dict[str, Any], where: str, source: str) -> Any:
    """Validate a TOML table against the dataclass ``cls`` and build it."""
    hints = typing.get_type_hints(cls)
    fields = {f.name: f for f in dataclasses.fields(cls) if "spec" in f.metadata}
    for key in table:
        if key not in fields:
            path = f"{where}.{key}" if where else key
            raise ConfigError(source, path, f"unknown key{did_you_mean(key, fields)}",
                              "valid keys here: " + ", ".join(sorted(fields)))
    values = {}
    for name, fld in fields.items():
        path = f"{where}.{name}" if where else name
        if name in table:
            values[name] = _coerce(table[name], hints[name], fld.metadata["spec"], path, source)
        elif fld.default is REQUIRED and fld.default_factory is REQUIRED:
            raise ConfigError(source, path, "required key is missing",
                              f"add it: {fld.metadata['spec'].doc}")
    try:
        obj = cls(**values)
    except ConfigError:
        raise
    except ValueError as err:  # cross-field checks in __post_init__
        raise ConfigError(source, where, str(err)) from None
    check = getattr(obj, "validate", None)
    if check is not None:
        check(where, source)
    return obj



def as_dict(obj: Any) -> Any:
    """A config (or section) as plain dicts/lists, for storing and hashing."""
    if dataclasses.is_dataclass(obj):
        return {f.name: as_dict(getattr(obj, f.name)) for f in dataclasses.fields(obj)
                if "spec" in f.metadata}
    if isinstance(obj, tuple):
        return [as_dict(v) for v in obj]
    return obj


def describe(cls: type, prefix: str = "") -> list[tuple[str, str, str, str, str]]:
    """Every key of a schema section as ``(path, type, default, units, doc)`` rows.

    Nested tables are flattened (``model.poles[].width``); used to write and check
    ``configs/README.md``.
    """
    rows = []
    hints = typing.get_type_hints(cls)
    for fld in dataclasses.fields(cls):
        if "spec" not in fld.metadata:
            continue
        sp: Spec = fld.metadata["spec"]
        tp = hints[fld.name]
        path = f"{prefix}{fld.name}"
        inner = typing.get_args(tp)[0] if typing.get_origin(tp) is tuple else tp
        if typing.get_origin(tp) in (typing.Union, types.UnionType):  # an optional table
            inner = next(a for a in typing.get_args(tp) if a is not type(None))
        if dataclasses.is_dataclass(inner):
            sub = f"{path}[]." if typing.get_origin(tp) is tuple else f"{path}."
            rows.extend(describe(inner, sub))
            continue
        if fld.default is not REQUIRED:
            default = "(see doc)" if fld.default is None else repr(fld.default)
        elif fld.default_factory is not REQUIRED:
            default = "[]"
        else:
            default = "required"
        doc = sp.doc + (f"; one of {', '.join(sp.choices)}" if sp.choices else "")
        rows.append((path, _type_name(tp), default, sp.units, doc))
    return rows
