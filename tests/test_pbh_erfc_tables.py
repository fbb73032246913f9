"""The compiled erfcx and ln Phi tables (scan/observables/pbh/erfc_tables.py) against
scipy.special over the whole range the capped closed form uses them on.

Tolerances: each piece is a degree-12 polynomial in t in [-1, 1] evaluated by Estrin's
scheme, whose terms pass through fewer roundings (<= 12) than Horner's rule's, so
Horner's bound gamma_24 sum_d |p_d| ~ 24 eps sum_d |p_d| (Higham 2002, Accuracy and
Stability of Numerical Algorithms, eq. 5.3, from memory) bounds it too; the tables
have sum_d |p_d| <= 1.3 erfcx(y) on each piece (erfcx) and <= 0.7 (ln Phi), checked below,
so ~7e-15 relative and ~4e-15 absolute, plus scipy's own few ulp: asserted 1e-14 relative
(erfcx) and 5e-15 absolute (ln Phi; its logarithm enters ln g additively).  The
interpolation error itself (12th-degree Chebyshev interpolation on pieces of width 0.25
of functions analytic near the real axis) is far below these (common practice; the
measured error, ~13 ulp at worst, is what that bound allows)."""
from __future__ import annotations

import numpy as np
from scipy import special

from scan.observables.pbh.erfc_tables import (
    ERFCX_PIECES,
    ERFCX_TABLE,
    ERFCX_TOP,
    LN_NDTR_TABLE,
    NDTR_TOP,
    erfcx_table,
    ln_ndtr_positive,
)
from scan.observables.pbh.ng_capped import X0_COMPILED, Z_COMPILED


def test_table_ranges_cover_the_capped_form():
    """erfcx is needed for x0 in (0, X0_COMPILED) and w = -z/sqrt 2 up to -Z_COMPILED/sqrt 2;
    the rounding bound of the module doc holds for these tables."""
    assert ERFCX_TOP >= X0_COMPILED
    assert ERFCX_TOP >= -Z_COMPILED / np.sqrt(2.0)
    width = ERFCX_TOP / ERFCX_PIECES
    piece_min = special.erfcx((np.arange(ERFCX_PIECES) + 1) * width)
    assert np.max(np.abs(ERFCX_TABLE).sum(axis=1) / piece_min) < 1.3
    assert np.max(np.abs(LN_NDTR_TABLE).sum(axis=1)) < 0.7


def test_erfcx_table_matches_scipy():
    """erfcx on a dense grid of [0, ERFCX_TOP] (and the piece edges) vs scipy's erfcx."""
    y = np.concatenate([np.linspace(0.0, ERFCX_TOP, 200_001),
                        np.arange(ERFCX_PIECES + 1) * (ERFCX_TOP / ERFCX_PIECES)])
    y = np.minimum(y, ERFCX_TOP)
    got = np.array([erfcx_table(v) for v in y])
    np.testing.assert_allclose(got, special.erfcx(y), rtol=1e-14, atol=0)


def test_ln_ndtr_table_matches_scipy():
    """ln Phi(z) for z >= 0 (table below NDTR_TOP, 0 above: |ln Phi| < 1.2e-19 there) vs
    scipy's log_ndtr."""
    z = np.concatenate([np.linspace(0.0, NDTR_TOP, 200_001), np.linspace(NDTR_TOP, 60, 50)])
    got = np.array([ln_ndtr_positive(v) for v in z])
    np.testing.assert_allclose(got, special.log_ndtr(z), rtol=0, atol=5e-15)
