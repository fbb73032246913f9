"""Every peak of P_ζ (issue 14 item 4): the table ``spectrum/peaks``, one row per peak."""
from __future__ import annotations

import math
from types import SimpleNamespace

import h5py
import numpy as np

from scan.cli import main
from scan.pipeline.peaks import PROMINENCE_DEX, peak_table


def _two_bumps(wiggle_dex: float):
    """Two log-normal bumps (1e-2 at k = 1e3, 1e-3 at k = 1e12 Mpc^-1) on a 2.1e-9
    plateau, the first followed by decaying oscillations of ``wiggle_dex``."""
    k = np.geomspace(0.05, 1e15, 600)
    x = np.log(k)
    logp = np.log10(2.1e-9 + 1e-2 * np.exp(-(x - np.log(1e3)) ** 2 / 2.0)
                    + 1e-3 * np.exp(-(x - np.log(1e12)) ** 2 / 2.0))
    after = x > np.log(1e3) + 1.0
    logp[after] += wiggle_dex * np.sin(3.0 * (x[after] - np.log(1e3))) * np.exp(
        -(x[after] - np.log(1e3)) / 4.0)
    N_exit = 10.0 + np.log(k / 0.05)
    crossings = (SimpleNamespace(index=1, N_cross=10.0 + np.log(1e3 / 0.05) - 0.5),
                 SimpleNamespace(index=0, N_cross=10.0 + np.log(1e12 / 0.05) - 0.5))
    spectrum = SimpleNamespace(k=k, P_zeta=10 ** logp, N_exit=N_exit, k_peak=math.nan,
                               P_peak=math.nan)
    return spectrum, SimpleNamespace(crossings=crossings)


def test_two_separate_peaks_are_two_rows_and_wiggles_are_not_peaks():
    """Oscillations of 0.3 dex after a USR peak stay below the 1 dex prominence."""
    spectrum, background = _two_bumps(wiggle_dex=0.3)
    peaks = peak_table(spectrum, background)
    assert PROMINENCE_DEX == 1.0 and len(peaks) == 2
    # the bumps' maxima to the grid's parabolic accuracy (600 points over 37 e-folds)
    assert abs(math.log(peaks[0].k / 1e3)) < 0.02
    assert abs(math.log10(peaks[0].P_zeta) + 2.0) < 0.01
    assert abs(math.log(peaks[1].k / 1e12)) < 0.02
    assert [p.pole for p in peaks] == [1, 0]       # the config numbers of the crossings


def test_solve_prints_and_stores_both_peaks_of_the_two_pole_example(tmp_path, capsys):
    """configs/two_poles.toml (synthetic): the pole listed second (φ = 4.6) is crossed
    first and makes the peak at small k; both rows carry their GW maximum."""
    out = tmp_path / "two.h5"
    assert main(["solve", "configs/two_poles.toml", "--out", str(out), "--no-figures"]) == 0
    printed = capsys.readouterr().out
    assert "peak 0:" in printed and "peak 1:" in printed
    with h5py.File(out, "r") as handle:
        table = handle["spectrum/peaks"][()]
        assert handle["spectrum/peaks"].attrs["units_k"] == "Mpc^-1"
    assert len(table) == 2
    assert list(table["pole"]) == [1, 0]
    assert table["k"][0] < 1e6 and table["k"][1] > 1e10
    assert np.all(table["P_zeta"] > 1e-4) and np.all(np.isfinite(table["f_gw"]))
