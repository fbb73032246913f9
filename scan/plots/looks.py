"""One look per curve: colour, marker and readable label, fixed by the curve's name.

The colours are the eight of Okabe & Ito 2008 ("Color Universal Design", common practice
for colour-blind-safe figures).  Roles keep theirs in every figure: a solved model is
black, posterior bands are blue.  A bound curve's colour and marker come from
:data:`CURVE_LOOKS` for the curves shipped with zetascan and otherwise from a checksum of
its name, so one curve has one look in the Ω_GW, f_PBH and exclusion figures alike.
``tests/test_plot_style.py`` checks the palette's closest pair under simulated
protanomaly and deuteranomaly (:mod:`scan.plots.colour`).
"""
from __future__ import annotations

import dataclasses
import re
import zlib

#: Okabe & Ito 2008, in their order.
OKABE_ITO: dict[str, str] = {
    "black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9",
    "bluish green": "#009E73", "yellow": "#F0E442", "blue": "#0072B2",
    "vermillion": "#D55E00", "reddish purple": "#CC79A7",
}
#: The palette in the order figures use it (roles first, yellow — weakest on white — last).
PALETTE: tuple[str, ...] = tuple(OKABE_ITO[n] for n in (
    "black", "blue", "orange", "sky blue", "bluish green", "vermillion", "reddish purple",
    "yellow"))
#: Role colours.
MODEL_COLOUR: str = OKABE_ITO["black"]
POSTERIOR_COLOUR: str = OKABE_ITO["blue"]
#: Neutral grey for guides (pivot marks, P_peak contours); not a curve colour.
GUIDE_GREY: str = "#777777"
#: Colours and markers left for bound curves.
CURVE_COLOURS: tuple[str, ...] = PALETTE[2:]
MARKERS: tuple[str, ...] = ("o", "s", "D", "^", "v", "P", "X")


@dataclasses.dataclass(frozen=True)
class Look:
    """How one curve is drawn: colour, marker (for points) and legend label."""

    colour: str
    marker: str
    label: str = ""


def _named(colour: str, marker: str, label: str = "") -> Look:
    return Look(OKABE_ITO[colour], marker, label)


#: Curves and scalar bounds shipped with zetascan (real and demo), by name.
CURVE_LOOKS: dict[str, Look] = {
    "demo_kestrel_excess": _named("vermillion", "o"),
    "demo_osprey_free_spectrum": _named("reddish purple", "s"),
    "demo_heron_ul": _named("bluish green", "D"),
    "lisa_noise_snr10_4yr": _named("orange", "^"),
    "lisa_pli_snr10_4yr": _named("orange", "^"),
    "lisa_pli_snr10_4yr_confusion": _named("sky blue", "v"),
    "demo_evaporation": _named("vermillion", "o"),
    "demo_microlensing": _named("sky blue", "s"),
    "demo_accretion": _named("bluish green", "D"),
    "planck2018_n_s": _named("sky blue", "o", r"Planck 2018 $n_s$"),
    "planck2018_ln_As": _named("bluish green", "s", r"Planck 2018 $\ln(10^{10}A_s)$"),
    "bk18_r": _named("orange", "D", r"BICEP/Keck 2018 $r$"),
    "demo_neff": _named("yellow", "^", r"$\Delta N_{\rm eff}$ (demo)"),
}


def look_of(name: str) -> Look:
    """The look of the curve or bound called ``name`` (the same in every figure)."""
    if name in CURVE_LOOKS:
        return CURVE_LOOKS[name]
    code = zlib.crc32(name.encode("utf-8"))
    return Look(CURVE_COLOURS[code % len(CURVE_COLOURS)],
                MARKERS[(code // len(CURVE_COLOURS)) % len(MARKERS)])


_MATH = {"f_PBH": r"$f_{\rm PBH}$", "N_eff": r"$N_{\rm eff}$", "n_s": r"$n_s$",
         "Omega_GW": r"$\Omega_{\rm GW}$"}


def readable(name: str, label: str = "") -> str:
    """Legend text of a curve or bound: its label unless that is just the identifier.

    Known identifiers get their :data:`CURVE_LOOKS` label; other raw identifiers
    (``snake_case``) become words; ``f_PBH`` and friends become mathtext.
    """
    text = label or name
    if text == name and look_of(name).label:
        return look_of(name).label
    pieces = re.split(r"(\$[^$]*\$)", text)  # keep mathtext as it is
    return "".join(p if p.startswith("$") else _words(p, text == name) for p in pieces)


def _words(piece: str, identifier: bool) -> str:
    """Known quantities as mathtext; underscores of an identifier as spaces."""
    found: list[str] = []
    for raw, math in _MATH.items():
        def keep(_, m=math):
            found.append(m)
            return f"\x00{len(found) - 1}\x00"
        piece = re.sub(rf"(?<![A-Za-z0-9]){re.escape(raw)}(?![A-Za-z0-9])", keep, piece)
    if identifier:
        piece = piece.replace("_", " ")
    return re.sub("\x00(\\d+)\x00", lambda m: found[int(m.group(1))], piece)
