"""exp_in_place and log_in_place (scan/observables/pbh/vector_math.py) against a reference
that does not depend on the CPU's SIMD paths.

Reference: exp and log in numpy's long double (x87 extended precision on x86-64, 64-bit
mantissa: its libm expl/logl, not the float64 SIMD loops numpy picks per CPU, whose
rounding differs between machines), rounded to double; where long double is no wider
than double, numpy's float64 exp/log.  Tolerance 2 ulp relative (4.4e-16, common
practice): the Taylor remainder (4.1e-18) and the reduction (Cody-Waite with a 32-bit
head of ln 2: r within ~1e-22 for |n| <= 1024) are far below 1 ulp, so the error is the
rounding of the ~16 operations of the polynomial and the scaling (measured 0.86 ulp for
exp, 0.44 eps x max(|ln x|, 1) for log, against the long-double values), plus the
reference's own rounding to double (0.5 ulp).
"""
from __future__ import annotations

import numpy as np

from scan.observables.pbh.vector_math import X_MAX, X_MIN, exp_in_place, log_in_place

ULP2 = 2 * np.finfo(float).eps
_WIDE = np.finfo(np.longdouble).eps < np.finfo(float).eps


def _reference(func, x: np.ndarray) -> np.ndarray:
    """``func`` (np.exp or np.log) of ``x`` in long double, rounded to double (see the
    module doc)."""
    return func(x.astype(np.longdouble)).astype(float) if _WIDE else func(x)


def test_dense_grid_over_the_valid_range():
    x = np.concatenate([np.linspace(X_MIN, X_MAX, 2_000_001),
                        np.random.default_rng(0).uniform(-700.0, 5.0, 500_000),
                        [0.0, -0.0, 1e-300, -1e-300, 0.5 * np.log(2), -0.5 * np.log(2)]])
    got = exp_in_place(x.copy())
    np.testing.assert_allclose(got, _reference(np.exp, x), rtol=ULP2, atol=0)


def test_two_dimensional_blocks_in_place_and_nan():
    x = np.random.default_rng(1).uniform(-700.0, 0.0, (37, 80))
    x[3, 5] = np.nan
    y = x.copy()
    out = exp_in_place(y)
    assert out is y
    assert np.isnan(y[3, 5])
    ok = ~np.isnan(x)
    np.testing.assert_allclose(y[ok], _reference(np.exp, x[ok]), rtol=ULP2, atol=0)


def test_log_over_the_positive_normal_doubles():
    """ln x within 2 ulp of the reference ln x, or 2 ulp of 1 where |ln x| < 1 (the series
    and the k ln 2 sum round at the scale of the larger of ln m ~ 0.35 and k ln 2; common
    practice), x from the smallest to the largest normal double and densely near 1."""
    rng = np.random.default_rng(2)
    x = np.concatenate([np.exp(rng.uniform(-708.0, 709.0, 500_000)),
                        rng.uniform(0.5, 2.0, 500_000),
                        [1.0, 2.0, 0.5, np.sqrt(2.0), np.nextafter(np.sqrt(2.0), 3.0),
                         np.finfo(float).tiny, np.finfo(float).max, 1 + 1e-15, 1 - 1e-16]])
    ref = _reference(np.log, x)
    got = log_in_place(x.copy())
    np.testing.assert_array_less(np.abs(got - ref), ULP2 * np.maximum(np.abs(ref), 1.0))
