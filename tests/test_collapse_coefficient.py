"""The critical-collapse coefficient K as a sampled nuisance parameter (``pbh.collapse_K``).

Physics: with M = K M_H (C - C_th)^gamma_c (Niemeyer & Jedamzik 1998, astro-ph/9709072)
K enters the mass function only through M/K and multiplies the mass-weighted abundance,
so f_K(M) = (K/K_0) f_K0(M K_0/K) exactly (d f / d ln M) and f_total is proportional to
K.  The posterior applies that identity per walker (a scale and a ln M shift) instead of
recomputing f_PBH; these tests check the identity against scan.observables.pbh with K changed, the
planned bounds on shifted masses against the direct integral, and the posterior against
runs whose fixed observables.collapse_K is the walker's value.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from test_sampler_posterior import make_config, nuisance_config, trained  # noqa: F401

from scan.config import load_config_text
from scan.curves import load_curve
from scan.errors import ConfigError
from scan.likelihood import PBHBounds
from scan.likelihood.pbh import SHIFT_MAX, PBHBoundsOnGrid
from scan.observables.pbh import PBHConventions, f_pbh
from scan.posterior.exact import with_nuisance_conventions
from scan.sampler import plan_run

ROOT = Path(__file__).resolve().parents[1]
DEMO_PBH = sorted((ROOT / "constraints" / "demo").glob("fpbh_*.csv"))


def test_mass_function_for_another_K_is_a_scaled_shifted_copy():
    """f_{2 K0}(M) = 2 f_K0(M / 2) on masses one octave apart (grid nodes, no
    interpolation), and f_total doubles (identity above; rounding-level tolerance,
    common practice)."""
    k = np.geomspace(1e5, 1e9, 600)
    P = 0.02 * np.exp(-np.log(k / 1e7) ** 2 / (2 * 0.5 ** 2))
    steps_per_octave = 8
    M = 2.0 ** (np.arange(-20 * steps_per_octave, 4 * steps_per_octave) / steps_per_octave)
    base = f_pbh(k, P, M, PBHConventions(K=3.3))
    double = f_pbh(k, P, M, PBHConventions(K=6.6))
    assert double.f_pbh_total == pytest.approx(2.0 * base.f_pbh_total, rel=1e-12)
    shifted = 2.0 * base.f_pbh[:-steps_per_octave]          # at M/2 = M[i - 8]
    live = shifted > 1e-6 * shifted.max()
    assert live.sum() > 20
    np.testing.assert_allclose(double.f_pbh[steps_per_octave:][live], shifted[live],
                               rtol=1e-10)


def test_planned_bounds_on_shifted_masses_equal_the_direct_integral():
    """The planned integrals on masses m * exp(s) (a table over s) agree with the direct
    Carr et al. 2017 integral on those masses to 1e-3 (the table's stated accuracy),
    beyond the table too (integrated directly), and equal the unshifted plan at s = 0."""
    term = PBHBounds.from_curves([load_curve(p) for p in DEMO_PBH])
    m = np.geomspace(1e-20, 1e5, 64)
    planned = term.on_grid(None, m)
    rng = np.random.default_rng(1)
    ln_m = np.log(m)
    centre = rng.uniform(-30.0, 5.0, (120, 1))
    width = rng.uniform(0.5, 3.0, (120, 1))
    f = np.exp(-0.5 * ((ln_m - centre) / width) ** 2)
    shift = rng.uniform(-SHIFT_MAX - 0.5, SHIFT_MAX + 0.5, 120)
    assert np.any(np.abs(shift) > SHIFT_MAX)
    got = planned.shifted_integrals(f, shift)
    want = term.integrals(m, f, shift)
    significant = want > 1e-6 * want.max(axis=1, keepdims=True)
    np.testing.assert_allclose(got[significant], want[significant], rtol=1e-3)
    np.testing.assert_allclose(planned.shifted_integrals(f, np.zeros(120)), f @ planned.V,
                               rtol=1e-12, atol=1e-300)


def k_config(tmp: Path, sur: Path, low: float, high: float, extra: str = ""):
    return nuisance_config(tmp, sur, "pbh.collapse_K", low, high, extra)


def test_sampled_K_equals_runs_with_that_fixed_K(trained):  # noqa: F811
    """Each walker's f_total equals that of a run without the nuisance whose
    observables.collapse_K is the walker's K (the kernel recomputed; linear in K: 1e-10),
    its peak mass agrees to one step of the shared mass grid, and the per-walker
    observables (their own shifted masses, scored by the terms directly) give the same
    posterior as the planned batch."""
    tmp, _, _ = trained
    sur = tmp / "standin" / "surrogate.h5"
    target = plan_run(k_config(tmp, sur, 1.0, 10.0)).target
    models = ([0.0257, 1.5494, 0.7119], [0.0187, 1.6652, 1.2982])  # f_total ~1e-10, ~2e-3
    values = (1.5, 3.3, 8.0)
    thetas = np.array([model + [K] for model in models for K in values])
    log_p, blobs = target.log_and_blobs(thetas)
    assert np.all(blobs["f_pbh_total"] > 1e-12) and np.all(np.isfinite(blobs["M_pbh_peak"]))
    step = math.log(target.loaded["plan"].pbh.M[1] / target.loaded["plan"].pbh.M[0])
    base = make_config(tmp, surrogate=sur)
    for K, model, blob in zip(values * 2, np.repeat(models, 3, axis=0), blobs):
        fixed_cfg = load_config_text(base.text, base.source,
                                     overrides=(f"observables.collapse_K={K}",))
        _, ref = plan_run(fixed_cfg).target.log_and_blobs(np.array([[*model, 1e-15]]))
        assert blob["f_pbh_total"] == pytest.approx(ref["f_pbh_total"][0], rel=1e-10)
        assert abs(math.log(blob["M_pbh_peak"] / ref["M_pbh_peak"][0])) <= step * 1.001
    assert blobs["f_pbh_total"][2] == pytest.approx(blobs["f_pbh_total"][0] * 8.0 / 1.5,
                                                    rel=1e-12)
    _, _, batch = target.predict(thetas)
    planned = target.loaded["planned"]
    on_grid = next(p for p in planned.planned if isinstance(p, PBHBoundsOnGrid))
    got = on_grid.integrals(planned.spectra(batch))
    want = on_grid.term.integrals(batch.m_msun, batch.f_pbh_per_lnm, batch.ln_mass_shift)
    assert want.max() > 1e-4                      # the bounds see these mass functions
    np.testing.assert_allclose(got, want, rtol=1e-3, atol=1e-6 * want.max())
    reason, obs = target.observables(thetas)
    log_p_direct, blobs_direct = target.score(thetas, reason, obs)
    np.testing.assert_allclose(log_p_direct, log_p, rtol=1e-9)
    np.testing.assert_allclose(blobs_direct["M_pbh_peak"], blobs["M_pbh_peak"], rtol=1e-12)
    np.testing.assert_allclose(blobs_direct["f_pbh_total"], blobs["f_pbh_total"], rtol=1e-12)


def test_K_prior_and_mass_function_are_checked(trained, tmp_path):  # noqa: F811
    tmp, _, _ = trained
    sur = tmp / "standin" / "surrogate.h5"
    with pytest.raises(ConfigError, match=r"nuisance\[0\].*positive and bounded"):
        plan_run(k_config(tmp, sur, 0.0, 5.0))
    mono = k_config(tmp, sur, 1.0, 5.0)
    mono = load_config_text(mono.text, mono.source,
                            overrides=('observables.mass_function="monochromatic"',))
    with pytest.raises(ConfigError, match=r"nuisance\[0\].*critical"):
        plan_run(mono)


def test_exact_solves_use_the_sampled_K(trained):  # noqa: F811
    """verify's exact side solves each sample with its own K (and threshold)."""
    tmp, _, _ = trained
    cfg = k_config(tmp, tmp / "standin" / "surrogate.h5", 1.0, 10.0)
    out = with_nuisance_conventions(cfg, np.array([0.012, 1.55, 1.0, 7.25]))
    assert out.observables.collapse_K == 7.25
    assert out.observables.threshold == cfg.observables.threshold
