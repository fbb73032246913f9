"""Shared-grid helpers of the batched observables (scan.surrogate.observables)."""
from __future__ import annotations

import numpy as np

from scan.surrogate.observables import interp_uniform_shifted


def test_row_shifted_interpolation_equals_numpy_interp_per_row():
    rng = np.random.default_rng(3)
    grid = np.linspace(-3.0, 3.7, 64)
    x = np.arange(10.0, 40.0, 0.05)
    shift = rng.uniform(12.0, 35.0, 17)
    fp = rng.normal(size=(17, grid.size))
    out = interp_uniform_shifted(x, shift, grid, fp)
    for row, s, f in zip(out, shift, fp):
        expected = np.interp(x, s + grid, f, left=-np.inf, right=-np.inf)
        inside = np.isfinite(expected)
        np.testing.assert_allclose(row[inside], expected[inside], rtol=0, atol=1e-12)
        assert np.all(row[~inside] == -np.inf)


def test_parabolic_peak_is_exact_for_a_parabola_and_falls_back_at_the_ends():
    from scan.surrogate.observables import parabolic_peak

    x = np.linspace(-3.0, 3.0, 25)
    centres = np.array([-0.37, 0.1, 1.234])
    y = 2.0 - 3.0 * (x[None, :] - centres[:, None]) ** 2
    xp, yp = parabolic_peak(x, y)
    np.testing.assert_allclose(xp, centres, atol=1e-12)
    np.testing.assert_allclose(yp, 2.0, atol=1e-12)
    edge = parabolic_peak(x, x)               # increasing: the maximum is the last sample
    assert edge == (x[-1], x[-1])
