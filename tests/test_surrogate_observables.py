"""Shared-grid helpers of the batched observables (scan.observables.batch)."""
from __future__ import annotations

import numpy as np

from scan.observables.batch import interp_uniform_shifted


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
    from scan.observables.batch import parabolic_peak

    x = np.linspace(-3.0, 3.0, 25)
    centres = np.array([-0.37, 0.1, 1.234])
    y = 2.0 - 3.0 * (x[None, :] - centres[:, None]) ** 2
    xp, yp = parabolic_peak(x, y)
    np.testing.assert_allclose(xp, centres, atol=1e-12)
    np.testing.assert_allclose(yp, 2.0, atol=1e-12)
    edge = parabolic_peak(x, x)               # increasing: the maximum is the last sample
    assert edge == (x[-1], x[-1])


def test_spectra_on_table_equals_the_full_row_shifted_interpolation():
    # 10^(log10 P) on the table evaluated near each window only: the same brackets and
    # fractions as 10.0 ** interp_uniform_shifted, exponentiated as exp(ln 10 log10 P).
    # Tolerance: |ln P| <= 70 here; each path rounds its interpolated exponent about 3
    # times and its power once, ln 10 * log10 P once more: <= 7 * 70 * 1.1e-16 = 5.4e-14
    # relative in P (IEEE 754 rounding, common practice).
    from scan.observables.window import spectra_on_table

    rng = np.random.default_rng(11)
    grid = np.linspace(-3.0, 3.0, 41)
    x = np.arange(10.0, 40.0, 0.05)
    shift = np.concatenate([rng.uniform(12.0, 35.0, 20), [10.5, 39.0, 5.0, 50.0, np.nan]])
    log10_p = rng.uniform(-30.0, 0.0, (shift.size, grid.size))
    log10_p[3, 7] = -np.inf                                  # P = 0 at one node
    with np.errstate(invalid="ignore"):          # -inf - -inf: NaN next to P = 0, as before
        fast = spectra_on_table(x, shift, grid, log10_p)
        ref = 10.0 ** interp_uniform_shifted(x, shift, grid, log10_p)
    np.testing.assert_array_equal(fast == 0, ref == 0)
    np.testing.assert_allclose(fast, ref, rtol=6e-14, atol=0)
    assert np.all(fast[-3:] == 0) and np.any(fast[-5] > 0)  # outside the table / NaN


def test_pbh_on_table_equals_the_direct_path():
    # the shared-table f_PBH of emulated-like spectra equals the previous path: the full
    # interpolation and a plan without the beta table.  P differs by <= 6e-14 (above),
    # sigma^2 alike, and f ~ exp(-y^2 / (2 sigma^2)) with y^2/(2 sigma^2) < 760 turns that
    # into <= 760 * 6e-14 = 4.6e-11 relative (IEEE 754 rounding, common practice)
    from scan.observables.batch import pbh_on_table, plan_batch
    from scan.observables.pbh import PBHConventions, plan_pbh

    x = np.linspace(-3.0, 3.0, 41)
    rng = np.random.default_rng(2)
    ln_k_peak = rng.uniform(14.0, 30.0, 24)
    log10_p = rng.uniform(-2.0, -0.8, 24)[:, None] - 0.5 * (x / rng.uniform(0.5, 1.5, 24)
                                                            [:, None]) ** 2
    for conv in (PBHConventions(), PBHConventions(criterion="peaks", threshold=0.45)):
        plan = plan_batch(x, (12.0, 32.0), conv, n_mass=32)
        res = pbh_on_table(plan, ln_k_peak, log10_p)
        slow = plan_pbh(np.exp(plan.lnk_table), plan.pbh.M, conv, tabulate=False)
        ref = slow.evaluate(10.0 ** interp_uniform_shifted(plan.lnk_table, ln_k_peak,
                                                           plan.x, log10_p))
        assert ref.f_pbh_total.max() > 1e-3 and (ref.f_pbh_total > 1e-250).sum() >= 8
        np.testing.assert_allclose(res.f_pbh_total, ref.f_pbh_total, rtol=5e-11, atol=1e-250)
        np.testing.assert_allclose(res.f_pbh, ref.f_pbh, rtol=5e-11, atol=1e-250)
