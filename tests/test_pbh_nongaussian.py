"""Non-Gaussian compaction abundance (scan.observables.pbh.nongaussian, zeta_map)."""
import itertools
import math

import h5py
import numpy as np
import pytest
from scipy import integrate

from scan.cli import main
from scan.config.schema import ObservablesSection
from scan.errors import ConfigError
from scan.observables.pbh import PBHConventions, plan_pbh
from scan.observables.pbh.nongaussian import (
    check_conventions,
    compaction_density,
    plan_nongaussian,
)
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of
from scan.observables.settings import require_batch_conventions
from scan.observables.single import nongaussian_note

K = np.geomspace(1e5, 1e8, 300)
M = np.geomspace(1e-2, 1e3, 60)


def _lognormal(amplitude, width=0.5, k_peak=1e6):
    return amplitude * np.exp(-np.log(K / k_peak)**2 / (2 * width**2)) / (
        math.sqrt(2 * math.pi) * width)


@pytest.mark.parametrize("window, threshold, amplitude",
                         [("gaussian", 0.5, 0.05), ("top-hat", 0.55, 0.006)])
def test_identity_map_reproduces_the_gaussian_abundance(window, threshold, amplitude):
    # Issue 15 acceptance: F(zeta_G) = zeta_G gives today's f_PBH to 1e-10 relative.  By
    # construction (module docstring) the two differ by rounding of exponents up to ~760
    # (~1e-13) and by the weight normalisation (1.8e-15).
    conv = PBHConventions(window=window, threshold=threshold)
    plan = plan_pbh(K, M, conv)
    P = _lognormal(amplitude)
    gauss = plan.evaluate(P)
    ng = plan_nongaussian(plan, 256).evaluate(P, ZetaMap())
    assert gauss.f_pbh_total > 1e-40
    assert ng.f_pbh_total == pytest.approx(gauss.f_pbh_total, rel=1e-10)
    big = gauss.f_pbh > 1e-20 * gauss.f_pbh.max()
    np.testing.assert_allclose(ng.f_pbh[big], gauss.f_pbh[big], rtol=1e-10)


def _brute_density(c, s_c2, s_cr, s_r2, zmap):
    """g(c) = int dz p(c/F'(z), z)/|F'(z)| by adaptive quadrature (scipy.integrate.quad)."""
    det = s_c2 * s_r2 - s_cr**2

    def f(z):
        fp = float(zmap.slope(z))
        if not np.isfinite(fp) or fp == 0:
            return 0.0
        cg = c / fp
        q = (s_r2 * cg * cg - 2 * s_cr * cg * z + s_c2 * z * z) / det
        return math.exp(-0.5 * q) / (2 * math.pi * math.sqrt(det) * abs(fp))

    lim = 14 * math.sqrt(s_r2)
    lo, hi = max(-lim, zmap.domain()[0]), min(lim, zmap.domain()[1])
    return integrate.quad(f, lo, hi, points=[0.0] if lo < 0 < hi else None, epsabs=0,
                          epsrel=1e-11, limit=400)[0]


@pytest.mark.parametrize("zmap", [zeta_map_of("local", f_nl=2.0, g_nl=-1.0),
                                  zeta_map_of("local", f_nl=-1.5),
                                  zeta_map_of("logarithmic", log_lambda=3.0),
                                  zeta_map_of("logarithmic", log_lambda=-2.0)])
def test_density_of_the_compaction_against_adaptive_quadrature(zmap):
    # Reference: scipy's adaptive quad of the same definition (Ferrante et al. 2023,
    # arXiv:2211.01728: C_l = C_G F'(zeta_G), (C_G, zeta_G) jointly Gaussian).  quad runs
    # at epsrel 1e-11; our fixed rules resolve the local maps' integrand to better than
    # 1e-7 here (the logarithmic map's closed form agrees to 1.2e-14).
    s_c2, s_cr, s_r2 = 0.01, 0.006, 0.008
    for c in (0.3, 0.6, 0.9, 1.2):
        ours = float(compaction_density(np.array(c), s_c2, s_cr, s_r2, zmap))
        ref = _brute_density(c, s_c2, s_cr, s_r2, zmap)
        assert ours == pytest.approx(ref, rel=1e-7, abs=1e-300)


def test_positive_fnl_raises_and_negative_lowers_the_abundance():
    # Sign of the effect: f_NL > 0 fattens the positive tail (e.g. Young & Byrnes 2013,
    # arXiv:1307.4995, abstract: "the sign of the non-linearity parameters ... particularly
    # important").
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_nongaussian(plan_pbh(K, M, conv), 256)
    P = _lognormal(0.006)
    f0 = plan.evaluate(P, ZetaMap()).f_pbh_total
    assert plan.evaluate(P, zeta_map_of("local", f_nl=1.0)).f_pbh_total > 1e3 * f0
    assert plan.evaluate(P, zeta_map_of("local", f_nl=-1.0)).f_pbh_total < 1e-3 * f0


def test_bad_combinations_are_refused():
    with pytest.raises(ConfigError, match="f_nl"):
        zeta_map_of("gaussian", f_nl=1.0)
    with pytest.raises(ConfigError, match="log_lambda"):
        zeta_map_of("logarithmic")
    with pytest.raises(ConfigError, match="compaction"):
        check_conventions(PBHConventions(criterion="press-schechter", threshold=0.45),
                          zeta_map_of("local", f_nl=1.0))
    with pytest.raises(ConfigError, match="model"):
        ZetaMap("model")


def test_logarithmic_map_closed_form_and_fnl():
    # f_NL = 5 lambda/6 from the expansion of -ln(1 - lambda x)/lambda (exact algebra).
    zmap = zeta_map_of("logarithmic", log_lambda=3.0)
    assert zmap.f_nl_equivalent() == pytest.approx(2.5, rel=1e-15)
    x = np.array([-0.2, 0.0, 0.1, 0.3])
    np.testing.assert_allclose(zmap.value(x), -np.log1p(-3 * x) / 3, rtol=1e-15)
    assert np.isnan(zmap.slope(np.array(0.4)))


@pytest.fixture
def lognormal_csv(tmp_path):
    path = tmp_path / "spectrum.csv"
    np.savetxt(path, np.column_stack([K, _lognormal(0.006)]), delimiter=",",
               header="k,P_zeta", comments="")
    return path


def test_observe_takes_the_non_gaussianity_key_and_records_it(lognormal_csv, tmp_path,
                                                              capsys):
    # issue 15: `zetascan observe` accepts --set observables.KEY=VALUE like solve; the
    # result records the choice as pbh attributes and keeps the Gaussian total beside it
    out = tmp_path / "obs.h5"
    assert main(["observe", str(lognormal_csv), "--out", str(out), "--n-f", "16",
                 "--n-m", "40", "--window", "top-hat", "--threshold", "0.55",
                 "--set", "observables.non_gaussianity=local",
                 "--set", "observables.f_nl=1.0"]) == 0
    assert "moves f_PBH from" in capsys.readouterr().out
    with h5py.File(out) as handle:
        attrs = handle["pbh"].attrs
        assert attrs["non_gaussianity"] == "local" and attrs["f_nl"] == 1.0
        assert attrs["f_pbh_total"] > 1e3 * attrs["f_pbh_total_gaussian"] > 0


@pytest.mark.parametrize("sets, key", [
    (["observables.f_nl=1"], "observables.f_nl"),
    (["observables.non_gaussianity=logarithmic"], "observables.log_lambda"),
    (["observables.non_gaussianity=model"], "observables.non_gaussianity"),
    (["observables.non_gaussianity=local", "observables.criterion=peaks"],
     "observables.non_gaussianity"),
    (["model.alpha=2"], "model.alpha"),
])
def test_observe_refuses_bad_combinations_with_exit_2(lognormal_csv, tmp_path, capsys, sets,
                                                      key):
    args = ["observe", str(lognormal_csv), "--out", str(tmp_path / "x.h5")]
    for text in sets:
        args += ["--set", text]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert key in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "x.h5").exists()


def test_no_live_epoch_gives_exactly_zero():
    # a spectrum far too small to form anything: every epoch is skipped, f_PBH = 0
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_nongaussian(plan_pbh(K, M, conv, n_formation=64), 64)
    res = plan.evaluate(_lognormal(1e-6), zeta_map_of("local", f_nl=1.0))
    assert res.f_pbh_total == 0.0 and not res.f_pbh.any()


@pytest.mark.parametrize("changes, key", [
    ({"non_gaussianity": "model"}, "observables.non_gaussianity"),
])
def test_sampler_paths_refuse_conventions_they_do_not_compute(changes, key):
    # a spectrum given as arrays (no model) cannot have its delta-N map: 'model' stops
    # there instead of being silently ignored; sample/grid/verify take it (with a
    # surrogate that emulates the map, tests/test_sampler_model_map.py) and the QCD-era
    # conventions (tests/test_sampler_qcd.py)
    with pytest.raises(ConfigError, match=key):
        require_batch_conventions(ObservablesSection(**changes), "run.toml", exact_only=True)
    require_batch_conventions(ObservablesSection(**changes), "run.toml")
    require_batch_conventions(ObservablesSection(), "run.toml")
    require_batch_conventions(ObservablesSection(qcd_threshold="harada-scaled",
                                                 qcd_collapse="gamma-of-w"), "run.toml")
    require_batch_conventions(ObservablesSection(qcd_threshold="harada-scaled",
                                                 non_gaussianity="local", f_nl=1.0),
                              "run.toml")
    require_batch_conventions(ObservablesSection(non_gaussianity="local", f_nl=1.0), "run.toml")
    require_batch_conventions(ObservablesSection(non_gaussianity="local", f_nl=1.0, g_nl=2.0),
                              "run.toml")
    require_batch_conventions(ObservablesSection(non_gaussianity="logarithmic",
                                                 log_lambda=3.0), "run.toml")


@pytest.mark.parametrize("log_lambda", [3.0, -2.0])
def test_density_resolves_the_ridge_at_the_logarithmic_edge(log_lambda):
    # Far from the peak sigma_c^2 << sigma_r^2 (zeta_G keeps the long modes, C_G does
    # not): then C_l is large only next to lambda zeta_G = 1, on a ridge of width
    # ~ sigma_c/(C_l |lambda|) ~ 1e-3 (values from a log-normal spectrum's epoch).
    # Reference: scipy quad on 60 geometric sub-intervals towards the edge, epsrel 1e-10,
    # asserted 1e-9.  The tool's density is the closed form of ng_density (it agrees to
    # 3e-14); the fixed graded quadrature it replaced agreed to <= 7e-6 here.
    s_c2, s_cr, s_r2 = 3.03e-6, 8.19e-5, 5.93e-3
    zmap = zeta_map_of("logarithmic", log_lambda=log_lambda)
    edge = 1 / log_lambda
    det = s_c2 * s_r2 - s_cr**2

    def f(z, c):
        fp = float(zmap.slope(z))
        if not np.isfinite(fp):
            return 0.0
        cg = c / fp
        q = (s_r2 * cg * cg - 2 * s_cr * cg * z + s_c2 * z * z) / det
        return math.exp(-0.5 * q) / (2 * math.pi * math.sqrt(det) * abs(fp))

    far = 14 * math.sqrt(s_r2) * (-1 if log_lambda > 0 else 1)
    cuts = edge + (far - edge) * np.concatenate([[0.0], np.geomspace(1e-9, 1, 60)])
    cuts = np.sort(cuts)
    for c in (0.7, 1.0, 1.3):
        ref = sum(integrate.quad(f, a, b, args=(c,), epsabs=0, epsrel=1e-10, limit=200)[0]
                  for a, b in itertools.pairwise(cuts))
        ours = float(compaction_density(np.array(c), s_c2, s_cr, s_r2, zmap))
        assert ours == pytest.approx(ref, rel=1e-9)


def test_negative_log_lambda_is_flagged_in_the_note():
    """The logarithmic map with lambda < 0 has an edge where zeta -> -inf and F' diverges;
    its f_PBH comes from there (measured ~1e52 above Gaussian at lambda = -2, against
    ~1e-67 for the local map with the same f_NL = -5/3): the printed note must say so,
    and must not for lambda > 0."""
    down = nongaussian_note(zeta_map_of("logarithmic", log_lambda=-2.0), 1e-60, 1e-8, "top-hat")
    up = nongaussian_note(zeta_map_of("logarithmic", log_lambda=3.0), 1e-60, 1e-8, "top-hat")
    assert "map's edge" in down and "'model'" in down
    assert "map's edge" not in up
