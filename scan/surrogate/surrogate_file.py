"""The surrogate file ``results/<run>/surrogate.h5``: emulator arrays and validation report.

Layout: root provenance and ``identity_json``; ``config`` (text); group ``surrogate``
with ``space`` attributes and one sub-group per kernel block (``classifier``, ``peak``,
``shape``, ``cmb``, ``wall`` when a pole is given by a wall coordinate, and ``ng`` when
trained with ``non_gaussianity = "model"``: the delta-N map's capped logarithmic fit; files
without it load, and a run with ``model`` refuses them) plus
``basis`` and, if any block uses it, ``bottleneck`` (the extra input of
:mod:`scan.surrogate.bottleneck`; attribute ``blocks``) and, if fitted, ``high_peak``
(:mod:`scan.surrogate.highpeak`: sub-group ``shape``, attribute ``floor``); group ``validation`` with the
report (JSON attribute and the printable text).  Written atomically (:func:`scan.store.atomic_h5`).
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path

import h5py
import numpy as np

from scan.errors import InputFileError
from scan.store import KIND_ATTRS, atomic_h5, provenance, require, write_config, write_dataset
from scan.surrogate.bottleneck import Bottleneck
from scan.surrogate.emulator import Emulator
from scan.surrogate.gp import GPFit
from scan.surrogate.highpeak import HighPeak
from scan.surrogate.identity import differences
from scan.surrogate.shape import ShapeBasis
from scan.surrogate.space import ParameterSpace
from scan.surrogate.validate import format_report

KIND = KIND_ATTRS["surrogate"]
_GP_ARRAYS = ("centres", "weights", "mean_coef", "scale", "length", "loo", "centre_norms")


def _write_gp(group: h5py.Group, fit: GPFit) -> None:
    for name in _GP_ARRAYS:
        write_dataset(group, name, getattr(fit, name), "1")
    group.attrs["noise"] = fit.noise
    group.attrs["kernel"] = fit.kernel


def _read_gp(group: h5py.Group) -> GPFit:
    arrays = {name: group[name][()] for name in _GP_ARRAYS}
    return GPFit(noise=float(group.attrs["noise"]), kernel=str(group.attrs["kernel"]), **arrays)


def _write_bottleneck(group: h5py.Group, emulator: Emulator) -> None:
    bn = emulator.bottleneck
    write_dataset(group, "normal", bn.normal, "1", "unit normal of the boundary plane")
    for name in ("offset", "s_min", "softening"):
        group.attrs[name] = float(getattr(bn, name))
    group.attrs["blocks"] = list(emulator.bottleneck_blocks)


def _read_bottleneck(grp: h5py.Group) -> tuple[Bottleneck | None, tuple[str, ...]]:
    if "bottleneck" not in grp:  # files written before the bottleneck input existed
        return None, ()
    g = grp["bottleneck"]
    bn = Bottleneck(g["normal"][()], float(g.attrs["offset"]), float(g.attrs["s_min"]),
                    float(g.attrs["softening"]))
    return bn, tuple(str(b) for b in g.attrs["blocks"])


def _write_high_peak(group: h5py.Group, block: HighPeak) -> None:
    group.attrs["floor"] = float(block.floor)
    _write_gp(group.create_group("shape"), block.shape)


def _read_high_peak(grp: h5py.Group) -> HighPeak | None:
    if "high_peak" not in grp:  # none fitted, or a file written before the block existed
        return None
    g = grp["high_peak"]
    return HighPeak(_read_gp(g["shape"]), float(g.attrs["floor"]))


def _json_default(value):
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    raise TypeError(type(value))


def write_surrogate(path: str | Path, config, space: ParameterSpace, emulator: Emulator,
                    report: dict, ident: dict) -> None:
    """Write the emulator and its validation report (atomically)."""
    with atomic_h5(path) as handle:
        for key, value in provenance(config.effective_text, config.run.seed).items():
            handle.attrs[key] = value
        handle.attrs["kind"] = KIND
        handle.attrs["identity_json"] = json.dumps(ident, sort_keys=True)
        write_config(handle, config.effective_text, config.overrides, config.base_dir)
        grp = handle.create_group("surrogate")
        grp.attrs["parameter_keys"] = list(space.keys)
        grp.attrs["parameter_priors"] = list(space.kinds)
        grp.attrs["parameter_low"] = np.array(space.low)
        grp.attrs["parameter_high"] = np.array(space.high)
        grp.attrs["constant_valid"] = emulator.constant_valid
        grp.attrs["has_classifier"] = emulator.classifier is not None
        for name in ("classifier", "peak", "shape", "cmb", "wall", "ng"):
            fit = getattr(emulator, name)
            if fit is not None:
                _write_gp(grp.create_group(name), fit)
        basis = grp.create_group("basis")
        write_dataset(basis, "x", emulator.basis.x, "1", "ln(k/k_peak)")
        write_dataset(basis, "mean", emulator.basis.mean, "dex")
        write_dataset(basis, "components", emulator.basis.components, "1")
        basis.attrs["max_error"] = emulator.basis.max_error
        if emulator.bottleneck is not None:
            _write_bottleneck(grp.create_group("bottleneck"), emulator)
        if emulator.high_peak is not None:
            _write_high_peak(grp.create_group("high_peak"), emulator.high_peak)
        val = handle.create_group("validation")
        val.attrs["report_json"] = json.dumps(report, default=_json_default)
        val.create_dataset("text", data="\n".join(format_report(report)),
                           dtype=h5py.string_dtype()).attrs["units"] = "1"


def _open(path: str | Path) -> h5py.File:
    if not Path(path).is_file():
        raise InputFileError(str(path), "no such surrogate file (make one with 'zetascan "
                             "train CONFIG')")
    require(path, "surrogate")
    try:
        return h5py.File(path, "r")
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None


def emulator_digest(path: str | Path) -> str:
    """SHA-256 [hex] of what a surrogate file predicts: the ``surrogate`` group's arrays and
    attributes, in name order.

    Unlike the file's bytes it does not change when the same emulator is written again
    (provenance, creation time and the validation report are left out), so a chain can
    tell "refitted" from "rewritten".
    """
    digest = hashlib.sha256()

    def feed(name: str, obj) -> None:
        digest.update(name.encode())
        for key in sorted(obj.attrs):
            digest.update(key.encode() + repr(np.asarray(obj.attrs[key]).tolist()).encode())
        if isinstance(obj, h5py.Dataset):
            digest.update(np.ascontiguousarray(obj[()]).tobytes())

    with _open(path) as handle:
        grp = handle["surrogate"]
        names: list[str] = []
        grp.visit(names.append)
        feed("", grp)
        for name in sorted(names):
            feed(name, grp[name])
    return digest.hexdigest()


def read_report(path: str | Path) -> dict:
    """The validation report stored in a surrogate file."""
    with _open(path) as handle:
        return json.loads(handle["validation"].attrs["report_json"])


def read_surrogate(path: str | Path, ident: dict | None = None
                   ) -> tuple[Emulator, ParameterSpace]:
    """The emulator and parameter space of a surrogate file.

    Parameters
    ----------
    ident : dict, optional
        :func:`scan.surrogate.identity.identity` of the config that wants to use it;
        a different model config is refused (InputFileError naming the differences).
    """
    with _open(path) as handle:
        if ident is not None:
            diff = differences(json.loads(handle.attrs["identity_json"]), ident)
            if diff:
                raise InputFileError(str(path), "surrogate was trained on a different model "
                                     "config (" + "; ".join(diff) + ")")
        grp = handle["surrogate"]
        space = ParameterSpace(tuple(str(k) for k in grp.attrs["parameter_keys"]),
                               tuple(str(k) for k in grp.attrs["parameter_priors"]),
                               tuple(float(v) for v in grp.attrs["parameter_low"]),
                               tuple(float(v) for v in grp.attrs["parameter_high"]))
        b = grp["basis"]
        basis = ShapeBasis(b["x"][()], b["mean"][()], b["components"][()],
                           float(b.attrs["max_error"]))
        classifier = _read_gp(grp["classifier"]) if grp.attrs["has_classifier"] else None
        emulator = Emulator(classifier, bool(grp.attrs["constant_valid"]), _read_gp(grp["peak"]),
                            _read_gp(grp["shape"]), _read_gp(grp["cmb"]), basis,
                            *_read_bottleneck(grp),
                            _read_gp(grp["wall"]) if "wall" in grp else None,
                            _read_high_peak(grp),
                            _read_gp(grp["ng"]) if "ng" in grp else None)
    return emulator, space
