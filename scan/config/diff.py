"""Key-level differences between two run configs (why a run cannot be resumed)."""
from __future__ import annotations

from pathlib import Path
from typing import Any

from scan.config.load import load_config_text
from scan.config.schema import RunConfig
from scan.config.spec import as_dict
from scan.store import LOCATION_KEYS, read_stored_config

#: Keys that may change between invocations of the same run: they do not change the
#: chain's steps, only when it stops, how often it is written and what is printed.
RESUMABLE_KEYS: frozenset[str] = frozenset({
    "sampler.max_steps", "sampler.check_every", "sampler.progress_every_s",
    "sampler.write_every"})
#: Sections the chain never reads (the exclusion grid's own settings).
RESUMABLE_SECTIONS: tuple[str, ...] = ("grid.",)


def resumable(key: str) -> bool:
    """True if a change of ``key`` does not prevent resuming a chain (where the run
    folder sits, :data:`scan.store.LOCATION_KEYS`, is not part of a run's identity)."""
    return key in RESUMABLE_KEYS or key in LOCATION_KEYS or key.startswith(RESUMABLE_SECTIONS)


def flatten(value: Any, prefix: str = "") -> dict[str, Any]:
    """``{"model.poles[0].width": 0.02, ...}`` from nested dicts and lists."""
    if isinstance(value, dict):
        out: dict[str, Any] = {}
        for key, item in value.items():
            out.update(flatten(item, f"{prefix}.{key}" if prefix else key))
        return out
    if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        out = {}
        for i, item in enumerate(value):
            out.update(flatten(item, f"{prefix}[{i}]"))
        return out
    return {prefix: value}


def config_diff(old: RunConfig, new: RunConfig) -> list[tuple[str, Any, Any]]:
    """Every key whose value differs, as ``(key, old, new)`` (``None`` when absent)."""
    a, b = flatten(as_dict(old)), flatten(as_dict(new))
    missing = object()
    rows = []
    for key in sorted(set(a) | set(b)):
        va, vb = a.get(key, missing), b.get(key, missing)
        if va != vb:
            rows.append((key, None if va is missing else va, None if vb is missing else vb))
    return rows


def stored_config(text: str, overrides: tuple[str, ...], run_name: str,
                  base_dir: str = "") -> RunConfig:
    """Rebuild the config a run file was made with (relative input paths against
    ``base_dir``, the stored config file's folder)."""
    return load_config_text(text, source="<stored config>", overrides=overrides,
                            default_name=run_name, base_dir=base_dir)


def result_config(path: str | Path) -> RunConfig:
    """The config stored in a result file, rebuilt (:func:`scan.store.read_stored_config`;
    nothing is imported: plug-ins are only named)."""
    stored = read_stored_config(path)
    return load_config_text(stored.text, f"{path} (stored config)", stored.overrides,
                            stored.run_name, stored.base_dir)


def format_diff(rows: list[tuple[str, Any, Any]]) -> str:
    """``"sampler.walkers: 32 -> 40; model.alpha: 1.0 -> 2.0"``."""
    def show(value: Any) -> str:
        return "(absent)" if value is None else repr(value)

    return "; ".join(f"{key}: {show(old)} -> {show(new)}" for key, old, new in rows)
