"""What a training store or surrogate is *of*: the model config, seed, parameter space, grid.

Two runs may share training points only if everything that changes a solve or the design
agrees.  :func:`identity` collects those values as flat ``key path -> value`` pairs;
:func:`differences` says which ones differ, for the refusal message.  The base values of
the varied parameters are left out (every point overrides them), as are the run name,
output folder and the ``[surrogate]`` sizes (more points may be added on resume).  A
config with a wall coordinate also records the wall's bisection tolerance
(:data:`scan.pipeline.wall.WALL_RTOL`): stores made with a coarser wall are refused.
"""
from __future__ import annotations

import json
from typing import Any

from scan.config.spec import as_dict
from scan.pipeline.wall import WALL_RTOL

#: Config sections that change an exact solve.
PHYSICS_SECTIONS: tuple[str, ...] = ("model", "background", "pivot", "modes")


def flatten(value: Any, prefix: str = "") -> dict[str, Any]:
    """Nested dicts/lists as ``{"model.poles[0].width": 0.02, ...}``."""
    out: dict[str, Any] = {}
    if isinstance(value, dict):
        for key, item in value.items():
            out.update(flatten(item, f"{prefix}.{key}" if prefix else str(key)))
    elif isinstance(value, list) and value and isinstance(value[0], (dict, list)):
        for i, item in enumerate(value):
            out.update(flatten(item, f"{prefix}[{i}]"))
    else:
        out[prefix] = list(value) if isinstance(value, (list, tuple)) else value
    return out


def identity(config, space) -> dict[str, Any]:
    """The values that must agree between a store and a config (JSON-serialisable).

    Parameters
    ----------
    config : scan.config.schema.RunConfig
    space : scan.surrogate.space.ParameterSpace
    """
    varied = set(space.keys)
    out: dict[str, Any] = {}
    for section in PHYSICS_SECTIONS:
        flat = flatten(as_dict(getattr(config, section)), section)
        out.update({k: v for k, v in flat.items() if k not in varied})
    if uses_wall(config):  # the wall's bisection tolerance sets the coordinate's accuracy
        out["wall.rtol"] = WALL_RTOL
    out["run.seed"] = config.run.seed
    out["surrogate.shape_span"] = config.surrogate.shape_span
    out["surrogate.shape_points"] = config.surrogate.shape_points
    for i, (key, kind, low, high) in enumerate(space.as_table()):
        out[f"parameters[{i}]"] = f"{key} {kind} [{low!r}, {high!r}]"
    return json.loads(json.dumps(out))


def uses_wall(config) -> bool:
    """Whether a pole of ``config`` is given by a wall coordinate (wall_ratio, wall_distance)."""
    model = getattr(config, "model", None)
    return any(getattr(p, "wall_ratio", None) is not None
               or getattr(p, "wall_distance", None) is not None
               for p in getattr(model, "poles", ()) or ())


def differences(stored: dict[str, Any], wanted: dict[str, Any]) -> list[str]:
    """Human-readable lines ``key: stored X, config Y`` for every differing key."""
    lines = []
    for key in sorted(set(stored) | set(wanted)):
        a, b = stored.get(key, "(absent)"), wanted.get(key, "(absent)")
        if a != b:
            lines.append(f"{key}: store has {a!r}, config has {b!r}")
    return lines
