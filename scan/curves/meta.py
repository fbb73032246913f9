"""Validate the ``#:`` metadata of a bound-curve file (constraints.md Sec. 7.3)."""
from __future__ import annotations

import warnings
from dataclasses import dataclass

from scan.curves import schema as S
from scan.curves.reader import RawFile
from scan.errors import InputFileError, closest, did_you_mean
from scan.store import name_problem


class CurveWarning(UserWarning):
    """Suspicious but legal content in a bound-curve file."""


@dataclass(frozen=True)
class Meta:
    """Typed metadata of one file (values already checked)."""

    text: dict[str, str]
    numbers: dict[str, float]
    synthetic: bool
    citation: str

    def get(self, key: str) -> str | None:
        """The string value of ``key`` or None."""
        return self.text.get(key)


class _Checker:
    """Raise errors that name the file and the line of a key."""

    def __init__(self, raw: RawFile) -> None:
        self.raw = raw

    def line(self, key: str) -> int | None:
        return self.raw.meta[key][1] if key in self.raw.meta else None

    def fail(self, key: str | None, problem: str) -> None:
        raise InputFileError(self.raw.path, problem, line=self.line(key) if key else None)

    def warn(self, key: str | None, problem: str) -> None:
        where = f"line {self.line(key)}: " if key and self.line(key) else ""
        warnings.warn(f"{self.raw.path}: {where}{problem}", CurveWarning, stacklevel=4)


def check_meta(raw: RawFile) -> Meta:
    """All key-level rules; return the typed metadata.

    Raises
    ------
    InputFileError
        Unknown key close to a known one, missing key, unknown value, percent instead of a
        fraction, unit that does not fit its quantity, missing conditional keys.
    """
    chk = _Checker(raw)
    text = {k: v for k, (v, _) in raw.meta.items()}
    _check_known_keys(chk, text)
    for key, allowed in S.REQUIRED.items():
        if key not in text:
            chk.fail(None, f"missing header key '{key}' (allowed: {allowed}); add a line "
                           f"'#: {key} = ...' at the top")
    for key, options in S.CHOICES.items():
        if key in text:
            _check_choice(chk, key, text[key], options)
    problem = name_problem(text["name"]) if "name" in text else None
    if problem is not None:  # the name becomes a group of the grid file and blob names
        chk.fail("name", f"curve name {problem}; give a short identifier such as "
                         "demo_pta_excess")
    numbers = {key: _number(chk, key, text[key]) for key in S.NUMERIC if key in text}
    _check_units(chk, text)
    _check_conditional(chk, text)
    synthetic = S.BOOLEANS[text["synthetic"]]
    citation = text.get("citation", "")
    if not citation and not synthetic:
        chk.fail("synthetic", "no citation: add '#: citation = Author et al. (year), "
                              "arXiv:...' (or mark invented data '#: synthetic = true')")
    if not citation:
        chk.warn("synthetic", "synthetic curve without a citation; say where it comes from")
    return Meta(text, numbers, synthetic, citation)


def _check_known_keys(chk: _Checker, text: dict[str, str]) -> None:
    for key in text:
        if key in S.KNOWN_KEYS:
            continue
        best = closest(key, S.KNOWN_KEYS)
        if best is not None and best not in text:
            chk.fail(key, f"unknown key '{key}'; did you mean '{best}'?")
        chk.warn(key, f"unknown key '{key}' is kept but not used")


def _check_choice(chk: _Checker, key: str, value: str, options: tuple[str, ...]) -> None:
    if value in options:
        return
    hint = did_you_mean(value, options)
    if key == "y_quantity" and value.startswith("log10"):
        hint = f"; did you mean '{value[6:]}' with '#: y_scale = log10'?"
    elif value.lower() in options:
        hint = f"; did you mean '{value.lower()}'?"
    chk.fail(key, f"unknown {key} '{value}'{hint} (allowed: {', '.join(options)})")


def _number(chk: _Checker, key: str, value: str) -> float:
    low, high = S.NUMERIC[key]
    try:
        number = float(value)
    except ValueError:
        chk.fail(key, f"{key} = {value!r} is not a number")
    if number != number:  # NaN
        chk.fail(key, f"{key} = {value!r} is not a number")
    if not low < number < high:
        fix = ""
        if key in ("confidence", "interval", "hubble_h") and 1.0 < number <= 100.0:
            fix = f" (did you mean {number / 100:g}?)"
        what = "a fraction in (0,1)" if high == 1.0 else f"in ({low:g}, {high:g})"
        chk.fail(key, f"{key} must be {what}; got {value}{fix}")
    return number


def _check_units(chk: _Checker, text: dict[str, str]) -> None:
    xq, xunit = text["x_quantity"], text["x_unit"]
    if S.X_UNITS[xunit][0] != xq:
        chk.fail("x_unit", f"x_unit '{xunit}' is a {S.X_UNITS[xunit][0]} unit but "
                           f"x_quantity is '{xq}'")
    yq, yunit = text["y_quantity"], text["y_unit"]
    if S.Y_NEEDS_X[yq] != xq:
        chk.fail("y_quantity", f"y_quantity '{yq}' needs x_quantity = {S.Y_NEEDS_X[yq]} "
                               f"(found '{xq}')")
    if S.Y_UNITS[yq] != yunit:
        chk.fail("y_unit", f"y_quantity '{yq}' requires y_unit = {S.Y_UNITS[yq]} "
                           f"(found '{yunit}')")
    kind = text["kind"]
    if yq not in S.KIND_Y[kind]:
        chk.fail("y_quantity", f"kind '{kind}' takes y_quantity {', '.join(S.KIND_Y[kind])}"
                               f" (found '{yq}')")


def _needs(chk: _Checker, text: dict[str, str], anchor: str, why: str,
           keys: tuple[str, ...]) -> None:
    missing = [k for k in keys if k not in text]
    if missing:
        chk.fail(anchor, f"{why} needs {' and '.join(missing)}; add "
                         + ", ".join(f"'#: {k} = ...'" for k in missing))


def _check_conditional(chk: _Checker, text: dict[str, str]) -> None:
    kind, yq = text["kind"], text["y_quantity"]
    if yq == "omega_gw":
        _needs(chk, text, "y_quantity", "y_quantity 'omega_gw' (plain, not h^2)", ("hubble_h",))
    elif "hubble_h" in text:
        chk.warn("hubble_h", f"hubble_h is ignored for y_quantity '{yq}'")
    if yq == "rho":
        _needs(chk, text, "y_quantity", "y_quantity 'rho' (bin width 1/T)", ("t_obs_yr",))
    needs = {"upper_limit": ("confidence",), "detection": ("interval",),
             "sensitivity": ("curve_form", "snr_threshold", "t_obs_yr", "snr_convention")}
    _needs(chk, text, "kind", f"kind '{kind}'", needs.get(kind, ()))
    if "likelihood" in text and kind != "upper_limit":
        chk.fail("likelihood", f"likelihood applies to upper_limit curves, not '{kind}'; "
                               "remove the line")
    if text.get("likelihood") == "soft_log":
        _needs(chk, text, "likelihood", "likelihood 'soft_log'", ("soft_width_dex",))
    if kind == "posterior_grid" and text["y_scale"] != "log10":
        chk.fail("y_scale", "posterior_grid needs y_scale = log10 (densities per log10 of "
                            "the quantity)")
    if "density_floor" in text and kind != "posterior_grid":
        chk.warn("density_floor", "density_floor is used only by posterior_grid curves")
