"""Run configuration: TOML files read with ``tomllib`` into the frozen schema.

:func:`load_config` reads a file, applies ``--set section.key=value`` overrides to the raw
tables (recorded in :attr:`RunConfig.overrides`) and validates the result against the
schema (:mod:`scan.config.schema`, keys checked by :mod:`scan.config.spec`).  The keys are
documented in ``configs/README.md``.
"""
from __future__ import annotations

import dataclasses
import re
import tomllib
from pathlib import Path
from typing import Any

from scan.config.schema import RunConfig
from scan.config.spec import build_section
from scan.errors import ConfigError

# --------------------------------------------------------------------------- overrides
_KEY_PATH = re.compile(r"^[A-Za-z_][\w]*(\[\d+\])?(\.[A-Za-z_][\w]*(\[\d+\])?)*$")


def parse_override(text: str) -> tuple[list[str | int], Any]:
    """Split ``"model.poles[0].width=0.03"`` into a key path and a TOML-parsed value."""
    if "=" not in text:
        raise ConfigError("--set", text, "expected section.key=value",
                          "e.g. --set model.alpha=2.0")
    key, raw = (part.strip() for part in text.split("=", 1))
    if not _KEY_PATH.match(key):
        raise ConfigError("--set", key, "malformed key path", "e.g. model.poles[0].width")
    try:
        value = tomllib.loads(f"v = {raw}")["v"]
    except tomllib.TOMLDecodeError:
        value = raw  # an unquoted string such as t_model
    path: list[str | int] = []
    for part in key.split("."):
        name, _, index = part.partition("[")
        path.append(name)
        if index:
            path.append(int(index.rstrip("]")))
    return path, value


def apply_override(raw: dict[str, Any], text: str) -> None:
    """Apply one ``--set`` override to the raw TOML tables in place."""
    path, value = parse_override(text)
    node: Any = raw
    for step, nxt in zip(path[:-1], path[1:]):
        if isinstance(step, int):
            if not isinstance(node, list) or step >= len(node):
                raise ConfigError("--set", text, f"index [{step}] does not exist",
                                  "define the entry in the config file first")
            node = node[step]
        else:
            _require_table(node, step, text)
            node = node.setdefault(step, [] if isinstance(nxt, int) else {})
            if not isinstance(node, (dict, list)):
                raise ConfigError("--set", text, f"'{step}' is a value, not a table")
    last = path[-1]
    if isinstance(last, int):
        if not isinstance(node, list) or last >= len(node):
            raise ConfigError("--set", text, f"index [{last}] does not exist")
    else:
        _require_table(node, last, text)
    node[last] = value


def _require_table(node: Any, key: str, text: str) -> None:
    """A named key needs a table; a list of tables needs an index first."""
    if not isinstance(node, dict):
        raise ConfigError("--set", text, f"'{key}' is looked up in a list of tables",
                          "give the entry's index, e.g. model.poles[0].width=0.02")


# --------------------------------------------------------------------------- loading
def load_config(path: str | Path, overrides: tuple[str, ...] | list[str] = ()):
    """Read and validate a run config.

    Parameters
    ----------
    path : str or Path
        The TOML file.
    overrides : sequence of str
        ``section.key=value`` strings applied before validation.

    Returns
    -------
    scan.config.schema.RunConfig
        The frozen configuration, with its source text and overrides attached; relative
        input paths resolved against the file's folder (``base_dir``).
    """
    source = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig")  # a byte-order mark is no error
    except FileNotFoundError:
        raise ConfigError(source, "", "file not found", "check the path") from None
    except (OSError, UnicodeDecodeError) as err:
        raise ConfigError(source, "", f"cannot read the file ({err})") from None
    return load_config_text(text, source=source, overrides=tuple(overrides),
                            default_name=Path(path).stem,
                            base_dir=str(Path(path).resolve().parent))


#: Input-file keys whose relative paths resolve against the config file's folder.
INPUT_PATH_KEYS: tuple[tuple[str, str], ...] = (
    ("likelihood", "curves"), ("likelihood", "directory"), ("likelihood", "surrogate"),
    ("observables", "gstar_table"))


def resolve_path(name: str, base_dir: str | Path) -> str:
    """``name`` made absolute against ``base_dir`` ("" = the working directory); an empty
    name (an unset key) stays empty."""
    if not name:
        return name
    path = Path(name).expanduser()
    return str(path if path.is_absolute() else (Path(base_dir or ".") / path).resolve())


def with_resolved_paths(config: RunConfig, base_dir: str | Path):
    """``config`` with every input path of :data:`INPUT_PATH_KEYS` absolute."""
    for section_name, key in INPUT_PATH_KEYS:
        section = getattr(config, section_name)
        value = getattr(section, key)
        value = (tuple(resolve_path(v, base_dir) for v in value) if isinstance(value, tuple)
                 else resolve_path(value, base_dir))
        config = dataclasses.replace(
            config, **{section_name: dataclasses.replace(section, **{key: value})})
    return dataclasses.replace(config, base_dir=str(base_dir))


def load_config_text(text: str, source: str = "<config>", overrides: tuple[str, ...] = (),
                     default_name: str = "run", base_dir: str | Path = ""):
    """Validate config ``text`` (see :func:`load_config`).

    Relative input paths (``likelihood.curves``, ``likelihood.directory``,
    ``likelihood.surrogate``, ``observables.gstar_table``) resolve against ``base_dir``,
    the folder of the file the text came from ("" = the working directory);
    ``run.output_dir`` stays relative to the working directory.
    """
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise ConfigError(source, "", f"not valid TOML: {err}",
                          "check quotes, brackets and '=' signs on that line") from None
    for item in overrides:
        apply_override(raw, item)
    run = raw.setdefault("run", {})
    if not isinstance(run, dict):
        raise ConfigError(source, "run", f"must be a table, got {run!r}",
                          "write a [run] section, or --set run.name=... for one key")
    run.setdefault("name", default_name)
    config = build_section(RunConfig, raw, "", source)
    config = dataclasses.replace(config, source=source, text=text, overrides=tuple(overrides))
    return with_resolved_paths(config, base_dir)
