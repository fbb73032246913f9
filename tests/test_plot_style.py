"""The figure palette and looks: colour arithmetic against published data, the palette's
separation under simulated colour-vision deficiency, one look per curve, visible artists.

Sources of the check values are written beside them.
"""
from __future__ import annotations

import itertools
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pytest

from matplotlib.colors import to_hex

from scan.curves import load_curve
from scan.plots import colour
from scan.plots.exclusion import exclusion_figure
from scan.plots.grid_data import GridData, GridTerm
from scan.plots.gw import omega_gw_figure
from scan.plots.looks import (CURVE_LOOKS, MODEL_COLOUR, OKABE_ITO, PALETTE, POSTERIOR_COLOUR,
                              look_of, readable)
from scan.plots.visible import in_view, shown_entries

# Sharma, Wu & Dalal 2005, Color Res. Appl. 30, 21, Table 1 (all 34 pairs):
# (L1, a1, b1), (L2, a2, b2), ΔE00 with k_L = k_C = k_H = 1, published to 4 decimals.
SHARMA_2005 = [
    ((50.0, 2.6772, -79.7751), (50.0, 0.0, -82.7485), 2.0425),
    ((50.0, 3.1571, -77.2803), (50.0, 0.0, -82.7485), 2.8615),
    ((50.0, 2.8361, -74.0200), (50.0, 0.0, -82.7485), 3.4412),
    ((50.0, -1.3802, -84.2814), (50.0, 0.0, -82.7485), 1.0000),
    ((50.0, -1.1848, -84.8006), (50.0, 0.0, -82.7485), 1.0000),
    ((50.0, -0.9009, -85.5211), (50.0, 0.0, -82.7485), 1.0000),
    ((50.0, 0.0, 0.0), (50.0, -1.0, 2.0), 2.3669),
    ((50.0, -1.0, 2.0), (50.0, 0.0, 0.0), 2.3669),
    ((50.0, 2.49, -0.001), (50.0, -2.49, 0.0009), 7.1792),
    ((50.0, 2.49, -0.001), (50.0, -2.49, 0.0010), 7.1792),
    ((50.0, 2.49, -0.001), (50.0, -2.49, 0.0011), 7.2195),
    ((50.0, 2.49, -0.001), (50.0, -2.49, 0.0012), 7.2195),
    ((50.0, -0.001, 2.49), (50.0, 0.0009, -2.49), 4.8045),
    ((50.0, -0.001, 2.49), (50.0, 0.0010, -2.49), 4.8045),
    ((50.0, -0.001, 2.49), (50.0, 0.0011, -2.49), 4.7461),
    ((50.0, 2.5, 0.0), (50.0, 0.0, -2.5), 4.3065),
    ((50.0, 2.5, 0.0), (73.0, 25.0, -18.0), 27.1492),
    ((50.0, 2.5, 0.0), (61.0, -5.0, 29.0), 22.8977),
    ((50.0, 2.5, 0.0), (56.0, -27.0, -3.0), 31.9030),
    ((50.0, 2.5, 0.0), (58.0, 24.0, 15.0), 19.4535),
    ((50.0, 2.5, 0.0), (50.0, 3.1736, 0.5854), 1.0000),
    ((50.0, 2.5, 0.0), (50.0, 3.2972, 0.0), 1.0000),
    ((50.0, 2.5, 0.0), (50.0, 1.8634, 0.5757), 1.0000),
    ((50.0, 2.5, 0.0), (50.0, 3.2592, 0.3350), 1.0000),
    ((60.2574, -34.0099, 36.2677), (60.4626, -34.1751, 39.4387), 1.2644),
    ((63.0109, -31.0961, -5.8663), (62.8187, -29.7946, -4.0864), 1.2630),
    ((61.2901, 3.7196, -5.3901), (61.4292, 2.2480, -4.9620), 1.8731),
    ((35.0831, -44.1164, 3.7933), (35.0232, -40.0716, 1.5901), 1.8645),
    ((22.7233, 20.0904, -46.6940), (23.0331, 14.9730, -42.5619), 2.0373),
    ((36.4612, 47.8580, 18.3852), (36.2715, 50.5065, 21.2231), 1.4146),
    ((90.8027, -2.0831, 1.4410), (91.1528, -1.6435, 0.0447), 1.4441),
    ((90.9257, -0.5406, -0.9208), (88.6381, -0.8985, -0.7239), 1.5381),
    ((6.7747, -0.2908, -2.4247), (5.8714, -0.0985, -2.2286), 0.6377),
    ((2.0776, 0.0795, -1.1350), (0.9033, -0.0636, -0.5514), 0.9082),
]
DEFICIENCIES = tuple(colour.MACHADO_2009)
#: The palette we replaced (kept here only to show the check tells palettes apart).
OLD_PALETTE = ("#1b4f8a", "#e08a1e", "#3aa7a3", "#b8336a", "#7a6bbf", "#6b8e23", "#8c5a3c",
               "#5f6b73")


@pytest.mark.parametrize("lab1, lab2, expected", SHARMA_2005)
def test_ciede2000_reproduces_the_published_test_data(lab1, lab2, expected):
    # published to 4 decimals: agreement within half a unit of the last digit
    assert colour.ciede2000(lab1, lab2) == pytest.approx(expected, abs=5e-5)
    assert colour.ciede2000(lab2, lab1) == pytest.approx(expected, abs=5e-5)  # symmetric


def test_srgb_to_lab_of_white_grey_and_red():
    # white is the reference white (L* = 100, a* = b* = 0 by definition, CIE 15:2004);
    # greys have a* = b* = 0; sRGB red (1, 0, 0): L* 53.24, a* 80.09, b* 67.20 (common
    # practice reference values from a full-precision matrix, e.g. Lindbloom's calculator —
    # from memory).  IEC 61966-2-1 prints the matrix to 4 decimals (±5e-5 per entry);
    # through f = t^(1/3) at X, Y ~ 0.2-0.4 that moves a*, b* (500 and 200 x Δf) by up to
    # ~0.025 and L* by ~0.005, plus 0.005 rounding of the reference: 0.03 allowed
    np.testing.assert_allclose(colour.lab("#ffffff"), [100.0, 0.0, 0.0], atol=1e-9)
    assert np.abs(colour.lab("#808080")[1:]).max() < 1e-9
    np.testing.assert_allclose(colour.lab("#ff0000"), [53.24, 80.09, 67.20], atol=0.03)


@pytest.mark.parametrize("deficiency", DEFICIENCIES)
def test_machado_matrices_keep_greys_grey(deficiency):
    # every row of the published matrices sums to 1 (Machado, Oliveira & Fernandes 2009:
    # achromatic colours are seen unchanged), to the table's 6 decimals
    np.testing.assert_allclose(colour.MACHADO_2009[deficiency].sum(axis=1), 1.0, atol=2e-6)
    assert colour.ciede2000(colour.lab("#808080"), colour.lab("#808080", deficiency)) < 0.01


def test_palette_is_okabe_ito_and_stays_apart_under_simulated_deficiencies():
    # Okabe & Ito 2008, "Color Universal Design": the eight colours, in any order
    assert sorted(PALETTE) == sorted(OKABE_ITO.values()) and len(set(PALETTE)) == 8
    # measured closest pairs (ΔE00): normal 21.7; protanomaly 0.6 / 1.0: 15.0 / 12.2;
    # deuteranomaly 0.6 / 1.0: 12.8 / 11.6.  A floor of 10 (common practice: ΔE00 ~10
    # and more reads as a different category) holds for every one; the palette we
    # replaced fails it (5.1 under protanopia).
    for deficiency in (None, *DEFICIENCIES):
        assert colour.closest_pair(PALETTE, deficiency)[0] > 10.0, deficiency
    assert colour.closest_pair(OLD_PALETTE, ("protanomaly", 1.0))[0] < 10.0


def test_every_curve_has_one_look_and_shipped_figures_keep_colours_apart():
    assert look_of("some_user_curve") == look_of("some_user_curve")  # fixed by the name
    assert look_of("some_user_curve").colour not in (MODEL_COLOUR, POSTERIOR_COLOUR)
    groups = [("demo_kestrel_excess", "demo_osprey_free_spectrum", "demo_heron_ul",
               "lisa_noise_snr10_4yr"),
              ("demo_evaporation", "demo_microlensing", "demo_accretion"),
              ("planck2018_n_s", "planck2018_ln_As", "bk18_r", "demo_neff")]
    for group in groups:  # curves drawn together never share a colour
        colours = [look_of(n).colour for n in group] + [MODEL_COLOUR, POSTERIOR_COLOUR]
        assert len(set(colours)) == len(colours), group
    assert all(look.colour in PALETTE for look in CURVE_LOOKS.values())


def test_readable_labels_replace_raw_identifiers():
    assert readable("bk18_r", "bk18_r") == "BICEP/Keck 2018 $r$"
    assert readable("planck2018_n_s", "") == "Planck 2018 $n_s$"
    assert readable("my_new_bound", "my_new_bound") == "my new bound"
    assert readable("x", "f_PBH: a, b") == r"$f_{\rm PBH}$: a, b"
    assert readable("x", r"Heron UL $\Omega$ (demo)") == r"Heron UL $\Omega$ (demo)"


def test_in_view_sees_what_the_axes_show():
    fig, ax = plt.subplots()
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    inside, = ax.plot([0.2, 0.5], [0.5, 0.6])
    below, = ax.plot([0.2, 0.5], [-2, -1])
    crossing, = ax.plot([-1, 2], [0.5, 0.5])  # both points outside, segment inside
    fill_below = ax.fill_between([0.0, 1.0], [-3, -3], [-2, -2])
    fill_over = ax.fill_between([-1.0, 2.0], [-1, -1], [2, 2])  # covers the whole view
    assert in_view(inside, ax) and in_view(crossing, ax) and in_view(fill_over, ax)
    assert not in_view(below, ax) and not in_view(fill_below, ax)
    assert in_view((fill_below, inside), ax) and not in_view((fill_below, below), ax)
    entries = [(inside, "a"), (below, "b"), (fill_below, "c")]
    assert [t for _, t in shown_entries(entries, [ax])] == ["a"]
    plt.close(fig)


def test_colour_pairs_are_symmetric_and_zero_on_identity():
    for a, b in itertools.combinations(PALETTE[:4], 2):
        assert colour.ciede2000(colour.lab(a), colour.lab(b)) == pytest.approx(
            colour.ciede2000(colour.lab(b), colour.lab(a)), abs=1e-12)
        assert colour.ciede2000(colour.lab(a), colour.lab(a)) == 0.0


def test_one_curve_has_one_colour_in_the_gw_figure_and_the_exclusion_map():
    heron = load_curve(str(Path(__file__).resolve().parents[1] / "constraints" / "demo"
                           / "ground_upper_limit_heron.csv"))
    fig = omega_gw_figure(curves=[heron], pta_panel=False)
    gw_colours = {to_hex(line.get_color()) for line in fig.axes[0].lines}
    plt.close(fig)
    x, y = np.linspace(0.0, 1.0, 6), np.linspace(0.0, 1.0, 5)  # SYNTHETIC 6 x 5 grid
    status = np.where(np.meshgrid(x, y)[0] > 0.5, 1, 0).astype(np.int8)
    ones = np.ones((5, 6), bool)
    grid = GridData("synthetic.h5", x, y, "a", "b", "a", "b", "linear", "linear", ones, ones,
                    np.full((5, 6), np.nan), (GridTerm(heron.name, "upper_limit",
                                                       heron.label, status),))
    fig = exclusion_figure(grid, p_peak_contours=False)
    map_colours = {to_hex(c) for coll in fig.axes[0].collections for c in coll.get_edgecolor()}
    plt.close(fig)
    expected = look_of(heron.name).colour.lower()
    assert gw_colours == {expected} and expected in map_colours
