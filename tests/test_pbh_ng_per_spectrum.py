"""The stacked non-Gaussian f_PBH with a map per spectrum (scan/observables/pbh/ng_stack.py
with a logarithmic ZetaMap whose log_lambda and slope_max are arrays).

The per-spectrum parameters are how the sampler's path represents each sample's own
delta-N map (the capped logarithmic map, scan/observables/pbh/map_fit.py); its closed
form is checked against quad in tests/test_pbh_ng_capped.py.
"""
from __future__ import annotations

import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from scan.observables.pbh import PBHConventions, plan_pbh
from scan.observables.pbh.ng_stack import plan_stacked
from scan.observables.pbh.nongaussian import plan_nongaussian
from scan.observables.pbh.zeta_map import ZetaMap

sys.path.insert(0, str(Path(__file__).parent / "bench"))
from bench_pbh_nongaussian import spectra


@pytest.fixture(scope="module")
def plans():
    """The benchmark's plan (top-hat, C_th = 0.55), smaller, and four of its spectra."""
    k = np.geomspace(1e5, 1e8, 300)
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_pbh(k, np.geomspace(1e-2, 1e3, 24), conv, n_formation=96)
    ng = plan_nongaussian(plan, 96)
    return ng, plan_stacked(ng), spectra(k)[::16]


def _close(got, ref, rtol):
    """f(M) within rtol where it is within 1e-30 of each spectrum's largest value (the
    rest is 30 orders of magnitude below any verdict, common practice), and totals."""
    ref_f, got_f = np.atleast_2d(ref.f_pbh), np.atleast_2d(got.f_pbh)
    big = ref_f >= 1e-30 * ref_f.max(axis=-1, keepdims=True)
    np.testing.assert_allclose(got_f[big], ref_f[big], rtol=rtol)
    np.testing.assert_allclose(got.f_pbh_total, ref.f_pbh_total, rtol=rtol)


def test_equal_capped_parameters_per_spectrum_equal_one_map(plans):
    """Arrays of one (lambda, slope_max) repeated give the one-map stack bitwise: the
    same closed form, element by element."""
    _, stacked, P = plans
    one = ZetaMap("logarithmic", log_lambda=2.0, slope_max=4.0)
    per = ZetaMap("logarithmic", log_lambda=np.full(len(P), 2.0),
                  slope_max=np.full(len(P), 4.0))
    a, b = stacked.evaluate(P, one), stacked.evaluate(P, per)
    np.testing.assert_array_equal(a.f_pbh, b.f_pbh)
    np.testing.assert_array_equal(a.f_pbh_total, b.f_pbh_total)


def test_equal_lambda_per_spectrum_equals_plain_compiled_map(plans):
    """lambda per spectrum without a cap (the array closed form) vs one plain lambda (the
    compiled closed form of ng_closed.py): the same formula evaluated in another order,
    so equal to rounding of exponents of ~100 (|d ln g| ~ 1e-13): rtol 1e-9."""
    _, stacked, P = plans
    plain = ZetaMap("logarithmic", log_lambda=3.0)
    per = ZetaMap("logarithmic", log_lambda=np.full(len(P), 3.0))
    _close(stacked.evaluate(P, per), stacked.evaluate(P, plain), 1e-9)


def test_distinct_parameters_give_each_spectrum_its_own_map(plans):
    """Spectrum j with (lambda_j, cap_j) in the stack == spectrum j alone with that map
    (the variance products of a stack and of one row may round differently: rtol 1e-10)."""
    _, stacked, P = plans
    lam, cap = np.array([0.5, 1.5, 3.0, -1.0]), np.array([2.0, 5.0, np.inf, 3.0])
    got = stacked.evaluate(P, ZetaMap("logarithmic", log_lambda=lam, slope_max=cap))
    for j in range(len(P)):
        ref = stacked.evaluate(P[j], ZetaMap("logarithmic", log_lambda=float(lam[j]),
                                             slope_max=float(cap[j])))
        big = ref.f_pbh >= 1e-30 * ref.f_pbh.max()
        np.testing.assert_allclose(got.f_pbh[j][big], ref.f_pbh[big], rtol=1e-10)
        assert got.f_pbh_total[j] == pytest.approx(ref.f_pbh_total, rel=1e-10)


def test_capped_stack_matches_per_spectrum_path(plans):
    """Stacked vs per-spectrum path (the same closed form at every node): only the
    interpolation of ln g differs, and it converges geometrically with the nodes
    (measured for lambda = 2, slope_max = 3 on these spectra: 3.1e-4 at 9 nodes, 1.1e-6
    at 17, 4.6e-13 at 33).  At 33 nodes the paths agree to the closed form's rounding
    (rtol 1e-10); the default 9 nodes are within their change to 17 (<= 1e-3), 1.3e-4 dex
    in f_PBH: far below the representation's own error (docs/ng_model_representation.md)."""
    ng, stacked, P = plans
    zmap = ZetaMap("logarithmic", log_lambda=2.0, slope_max=3.0)
    refs = [ng.evaluate(p, zmap) for p in P]
    fine = plan_stacked(ng, 33).evaluate(P, zmap)
    for j, ref in enumerate(refs):
        _close(_row(fine, j), ref, 1e-10)
    _close(stacked.evaluate(P, zmap), plan_stacked(ng, 17).evaluate(P, zmap), 1e-3)


def _row(result, j):
    """Spectrum j of a stacked result (its f_pbh and f_pbh_total)."""
    return SimpleNamespace(f_pbh=result.f_pbh[j], f_pbh_total=result.f_pbh_total[j])
