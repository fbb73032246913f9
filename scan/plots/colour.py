"""Colour arithmetic for checking a palette: sRGB → CIELAB, CIEDE2000, simulated CVD.

* sRGB (IEC 61966-2-1) → linear RGB → XYZ (D65) → CIELAB (CIE 15:2004);
* ΔE00: the CIEDE2000 colour difference, k_L = k_C = k_H = 1, written after the
  implementation notes of Sharma, Wu & Dalal 2005 (Color Res. Appl. 30, 21; their
  Table 1 is the test data of ``tests/test_plot_style.py``);
* colour-vision deficiency: the 3 × 3 matrices of Machado, Oliveira & Fernandes 2009
  (IEEE TVCG 15, 1291, doi:10.1109/TVCG.2009.113; supplementary table) applied to linear
  RGB, severity 0.6 (anomalous trichromacy) and 1.0 (dichromacy).

Pure functions over floats; used by the palette test and :func:`closest_pair`.
"""
from __future__ import annotations

import itertools
import math
from collections.abc import Sequence

import numpy as np
from matplotlib.colors import to_rgb

#: linear sRGB → XYZ (D65), IEC 61966-2-1.
_RGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805],
                        [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])
#: D65 reference white (X_n, Y_n, Z_n) of the matrix above (its row sums).
_WHITE = _RGB_TO_XYZ.sum(axis=1)

#: Machado, Oliveira & Fernandes 2009, supplementary table: (kind, severity) → matrix on
#: linear RGB.
MACHADO_2009: dict[tuple[str, float], np.ndarray] = {
    ("protanomaly", 0.6): np.array([[0.385450, 0.769005, -0.154455],
                                    [0.100526, 0.829802, 0.069673],
                                    [-0.007442, -0.022190, 1.029632]]),
    ("protanomaly", 1.0): np.array([[0.152286, 1.052583, -0.204868],
                                    [0.114503, 0.786281, 0.099216],
                                    [-0.003882, -0.048116, 1.051998]]),
    ("deuteranomaly", 0.6): np.array([[0.498864, 0.674741, -0.173604],
                                      [0.205199, 0.754872, 0.039929],
                                      [-0.011131, 0.030969, 0.980162]]),
    ("deuteranomaly", 1.0): np.array([[0.367322, 0.860646, -0.227968],
                                      [0.280085, 0.672501, 0.047413],
                                      [-0.011820, 0.042940, 0.968881]]),
}


def linear_rgb(colour) -> np.ndarray:
    """Linear-light RGB in [0, 1] of a matplotlib colour (sRGB transfer undone)."""
    c = np.asarray(to_rgb(colour), float)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def lab_of_linear(rgb: np.ndarray) -> np.ndarray:
    """CIELAB (L*, a*, b*) of linear RGB (clipped to [0, 1]), D65 white."""
    xyz = _RGB_TO_XYZ @ np.clip(rgb, 0.0, 1.0) / _WHITE
    delta = 6.0 / 29.0
    f = np.where(xyz > delta**3, np.cbrt(xyz), xyz / (3 * delta**2) + 4.0 / 29.0)
    return np.array([116.0 * f[1] - 16.0, 500.0 * (f[0] - f[1]), 200.0 * (f[1] - f[2])])


def lab(colour, deficiency: tuple[str, float] | None = None) -> np.ndarray:
    """CIELAB of a colour as seen normally or with ``deficiency`` (a MACHADO_2009 key)."""
    rgb = linear_rgb(colour)
    if deficiency is not None:
        rgb = MACHADO_2009[deficiency] @ rgb
    return lab_of_linear(rgb)


def ciede2000(lab1: Sequence[float], lab2: Sequence[float]) -> float:
    """CIEDE2000 colour difference ΔE00 of two CIELAB colours (k_L = k_C = k_H = 1)."""
    L1, a1, b1 = map(float, lab1)
    L2, a2, b2 = map(float, lab2)
    c_bar = 0.5 * (math.hypot(a1, b1) + math.hypot(a2, b2))
    g = 0.5 * (1.0 - math.sqrt(c_bar**7 / (c_bar**7 + 25.0**7)))
    a1p, a2p = (1.0 + g) * a1, (1.0 + g) * a2
    c1p, c2p = math.hypot(a1p, b1), math.hypot(a2p, b2)
    h1p, h2p = _hue_deg(a1p, b1), _hue_deg(a2p, b2)
    dLp, dCp = L2 - L1, c2p - c1p
    dhp = _hue_difference(h1p, h2p, c1p * c2p)
    dHp = 2.0 * math.sqrt(c1p * c2p) * math.sin(math.radians(dhp / 2.0))
    Lp, Cp = 0.5 * (L1 + L2), 0.5 * (c1p + c2p)
    hp = _mean_hue(h1p, h2p, c1p * c2p)
    t = (1.0 - 0.17 * math.cos(math.radians(hp - 30.0)) + 0.24 * math.cos(math.radians(2 * hp))
         + 0.32 * math.cos(math.radians(3 * hp + 6.0))
         - 0.20 * math.cos(math.radians(4 * hp - 63.0)))
    s_l = 1.0 + 0.015 * (Lp - 50.0) ** 2 / math.sqrt(20.0 + (Lp - 50.0) ** 2)
    s_c, s_h = 1.0 + 0.045 * Cp, 1.0 + 0.015 * Cp * t
    r_c = 2.0 * math.sqrt(Cp**7 / (Cp**7 + 25.0**7))
    r_t = -math.sin(math.radians(60.0 * math.exp(-(((hp - 275.0) / 25.0) ** 2)))) * r_c
    return math.sqrt((dLp / s_l) ** 2 + (dCp / s_c) ** 2 + (dHp / s_h) ** 2
                     + r_t * (dCp / s_c) * (dHp / s_h))


def _hue_deg(a: float, b: float) -> float:
    return 0.0 if a == 0.0 and b == 0.0 else math.degrees(math.atan2(b, a)) % 360.0


def _hue_difference(h1: float, h2: float, chroma_product: float) -> float:
    if chroma_product == 0.0:
        return 0.0
    d = h2 - h1
    return d - 360.0 if d > 180.0 else d + 360.0 if d < -180.0 else d


def _mean_hue(h1: float, h2: float, chroma_product: float) -> float:
    if chroma_product == 0.0:
        return h1 + h2
    if abs(h1 - h2) <= 180.0:
        return 0.5 * (h1 + h2)
    return 0.5 * (h1 + h2 + 360.0) if h1 + h2 < 360.0 else 0.5 * (h1 + h2 - 360.0)


def closest_pair(colours: Sequence, deficiency: tuple[str, float] | None = None
                 ) -> tuple[float, int, int]:
    """Smallest ΔE00 between two of ``colours`` (as seen with ``deficiency``), and which."""
    labs = [lab(c, deficiency) for c in colours]
    return min((ciede2000(labs[i], labs[j]), i, j)
               for i, j in itertools.combinations(range(len(labs)), 2))
