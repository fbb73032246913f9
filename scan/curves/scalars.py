"""Scalar bounds as a small TOML file (Delta N_eff limit, which CMB priors to use).

Example (``constraints/demo/scalars.toml``)::

    [neff]
    name = "demo_neff"
    delta_neff = 0.2        # upper limit on Delta N_eff
    confidence = 0.95
    f_min_hz = 1e-10        # integrate int d ln f Omega_GW h^2 from here up
    method = "step"         # or "half_normal"
    synthetic = true
    citation = "invented for the zetascan demo"

    [cmb]
    planck2018_pivot = true # Gaussian n_s, ln(10^10 A_s)
    bicep_keck_2021_r = true
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from scan.errors import InputFileError, did_you_mean

_NEFF_KEYS = {"name": str, "delta_neff": float, "confidence": float, "f_min_hz": float,
              "f_max_hz": float, "method": str, "synthetic": bool, "citation": str}
_CMB_KEYS = {"planck2018_pivot": bool, "bicep_keck_2021_r": bool}


@dataclass(frozen=True)
class NeffSpec:
    """A Delta N_eff limit as read from the file."""

    name: str
    delta_neff: float
    confidence: float = 0.95
    f_min_hz: float = 1e-10
    f_max_hz: float = math.inf
    method: str = "step"
    synthetic: bool = False
    citation: str = ""


@dataclass(frozen=True)
class ScalarBounds:
    """Everything a scalar-bounds file asks for."""

    path: str
    neff: NeffSpec | None
    planck2018_pivot: bool = False
    bicep_keck_2021_r: bool = False


def _table(path: str, doc: dict, name: str, schema: dict) -> dict:
    table = doc.get(name, {})
    if not isinstance(table, dict):
        raise InputFileError(path, f"'{name}' must be a table ([{name}])")
    for key, value in table.items():
        if key not in schema:
            raise InputFileError(path, f"unknown key '{name}.{key}'"
                                       f"{did_you_mean(key, schema)}")
        want = schema[key]
        ok = isinstance(value, want) or (want is float and isinstance(value, int)
                                         and not isinstance(value, bool))
        if not ok:
            raise InputFileError(path, f"'{name}.{key}' must be a {want.__name__}, got "
                                       f"{value!r}")
    return table


def load_scalar_bounds(path: str | Path) -> ScalarBounds:
    """Read a scalar-bounds TOML file.

    Raises
    ------
    InputFileError
        Unreadable TOML, unknown key or section, wrong type, no citation on real data.
    """
    p = str(path)
    try:
        doc = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as err:
        raise InputFileError(p, f"cannot read as TOML ({err})") from None
    for section in doc:
        if section not in ("neff", "cmb"):
            raise InputFileError(p, f"unknown section [{section}]"
                                    f"{did_you_mean(section, ('neff', 'cmb'))}")
    neff = _table(p, doc, "neff", _NEFF_KEYS)
    cmb = _table(p, doc, "cmb", _CMB_KEYS)
    spec = None
    if neff:
        if "delta_neff" not in neff or neff["delta_neff"] <= 0:
            raise InputFileError(p, "[neff] needs delta_neff > 0 (the upper limit on "
                                    "Delta N_eff)")
        if not 0 < neff.get("confidence", 0.95) < 1:
            raise InputFileError(p, f"neff.confidence must be a fraction in (0,1); got "
                                    f"{neff['confidence']} (did you mean "
                                    f"{neff['confidence'] / 100:g}?)")
        if neff.get("method", "step") not in ("step", "half_normal"):
            raise InputFileError(p, f"neff.method must be 'step' or 'half_normal'"
                                    f"{did_you_mean(neff['method'], ('step', 'half_normal'))}")
        if not neff.get("citation") and not neff.get("synthetic", False):
            raise InputFileError(p, "[neff] needs a citation (or synthetic = true)")
        spec = NeffSpec(**({"name": "neff"} | neff))
    return ScalarBounds(p, spec, cmb.get("planck2018_pivot", False),
                        cmb.get("bicep_keck_2021_r", False))
