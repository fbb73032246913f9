"""The posterior target with a non-Gaussian zeta (issue 15 step 4): local and logarithmic
maps in the vectorised f_PBH, ``model`` with a surrogate that does not emulate the map and
per-walker thresholds refused (``model`` itself: tests/test_sampler_model_map.py), the convention
recorded.  The surrogate is the stand-in of tests/test_sampler_posterior.py (trained in
well under a second); the reference is the per-spectrum non-Gaussian path
(scan/observables/pbh/nongaussian.py, checked against scipy quad in
tests/test_pbh_nongaussian.py).
"""
from __future__ import annotations

import numpy as np
import pytest
from test_sampler_posterior import exact_side_of_first, make_config, trained  # noqa: F401

from scan.cli.summary import format_summary
from scan.errors import ConfigError
from scan.observables.settings import pbh_convention_attrs
from scan.observables.window import spectra_on_table
from scan.pool import choose_pool
from scan.sampler import plan_run, run_chain, runfile
from scan.sampler.runfile import load_chain
from scan.sampler.summary import summarize

THETAS = np.array([[0.012, 1.55, 1.0, 1e-15], [0.015, 1.62, 1.4, 3e-15]])
LOCAL = '[observables]\nnon_gaussianity = "local"\nf_nl = 1.0\n'


def _plan(trained, extra):  # noqa: F811
    tmp, _, _ = trained
    cfg = make_config(tmp, surrogate=tmp / "standin" / "surrogate.h5", extra=extra)
    return cfg, plan_run(cfg, tmp / f"chain_{abs(hash(extra))}.h5")


def _target(trained, extra):  # noqa: F811
    cfg, plan = _plan(trained, extra)
    return cfg, plan.target


@pytest.mark.parametrize("extra", [LOCAL, LOCAL + "g_nl = 10.0\n",
                                   ('[observables]\nnon_gaussianity = '
                                    '"logarithmic"\nlog_lambda = 3.0\n')])
def test_posterior_f_pbh_is_the_per_spectrum_non_gaussian_one(trained, extra):  # noqa: F811
    """The walkers' f_PBH total equals the per-spectrum path on the same table spectra
    (rtol 1e-4: the stack's Gauss-Hermite error in ln g, <= 5e-5, tests/test_pbh_ng_stack.py;
    for the logarithmic map the per-spectrum density's own edge error, <= 7e-6 in the
    totals) and is not the Gaussian one."""
    _, gauss_target = _target(trained, "")
    _, target = _target(trained, extra)
    _, blobs = target.log_and_blobs(THETAS)
    _, gauss_blobs = gauss_target.log_and_blobs(THETAS)
    plan, pbh = target.loaded["plan"], target.loaded["plan"].pbh
    pred = target.loaded["surrogate"].predict(THETAS[:, :3])
    log10_p = pred.log10_P_peak[:, None] + pred.shape
    table = spectra_on_table(plan.lnk_table, pred.ln_k_peak, plan.x, log10_p)
    for i, row in enumerate(table):
        ref = pbh.stacked.ng.evaluate(row, pbh.zmap).f_pbh_total
        assert blobs["f_pbh_total"][i] == pytest.approx(ref, rel=1e-4)
        assert blobs["f_pbh_total"][i] > 10 * gauss_blobs["f_pbh_total"][i]


def test_model_map_and_sampled_threshold_are_refused_naming_the_key(trained):  # noqa: F811
    with pytest.raises(ConfigError, match=r"observables\.non_gaussianity.*delta-N map"):
        _target(trained, '[observables]\nnon_gaussianity = "model"\n')
    extra = LOCAL.replace("[observables]", "[[nuisance]]\nname = \"pbh.threshold\"\n"
                          "prior = \"uniform\"\nlow = 0.4\nhigh = 0.6\n[observables]")
    with pytest.raises(ConfigError, match=r"nuisance\[1\].*gaussian"):
        _target(trained, extra)


def test_runs_record_the_convention(trained):  # noqa: F811
    cfg, _ = _target(trained, LOCAL)
    off = {"qcd_threshold": "off", "qcd_collapse": "off"}
    assert pbh_convention_attrs(cfg.observables) == {"non_gaussianity": "local",
                                                     "f_nl": 1.0, "g_nl": 0.0, **off}
    gauss, _ = _target(trained, "")
    assert pbh_convention_attrs(gauss.observables) == {"non_gaussianity": "gaussian", **off}


def test_chain_records_the_convention_and_summary_shows_both_totals(trained):  # noqa: F811
    """A 30-step chain with local f_NL = 1: the file's attributes name the map, every
    valid sample carries both totals, and the summary says which is which."""
    _, plan = _plan(trained, LOCAL)
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool, restart=True)
    assert runfile.pbh_convention(plan.path) == {"non_gaussianity": "local", "f_nl": 1.0,
                                                 "g_nl": 0.0, "qcd_threshold": "off",
                                                 "qcd_collapse": "off"}
    blobs = load_chain(plan.path)["blobs"].reshape(-1)
    ok = blobs["reason"] == 0
    assert ok.any() and np.all(blobs["f_pbh_total"][ok] >= blobs["f_pbh_total_gaussian"][ok])
    text = format_summary(summarize(plan.path))
    assert "non_gaussianity = 'local' (f_nl = 1, g_nl = 0)" in text
    assert "f_pbh_total_gaussian" in text and "Gaussian ->" in text


def test_exact_side_uses_the_same_convention(trained):  # noqa: F811
    """verify's exact observables of a tabulated spectrum (the per-spectrum path with the
    config's map) agree with the walker's stacked value.  The two formation-epoch tables
    discretise sigma^2 differently: the Gaussian log10 f_PBH (~ -1/sigma^2) agrees to 1e-3
    relative, as in tests/test_sampler_posterior.py (measured 2.3e-4); the non-Gaussian
    log10 f_PBH depends on sigma^2 less steeply, so its difference is bounded by the same
    1e-3 times the Gaussian |log10 f_PBH| (measured 0.059 dex against a bound of 0.23)."""
    cfg, target = _target(trained, LOCAL)
    out, blobs = exact_side_of_first(cfg, target, THETAS)
    obs = out.observables
    assert obs.zeta_map.kind == "local" and obs.f_pbh_total_gaussian is not None
    log_g = np.log10(obs.f_pbh_total_gaussian)
    assert log_g == pytest.approx(np.log10(blobs["f_pbh_total_gaussian"][0]), rel=1e-3)
    assert abs(np.log10(obs.f_pbh_total) - np.log10(blobs["f_pbh_total"][0])) \
        <= 1e-3 * abs(log_g)
    assert obs.f_pbh_total > 1e100 * obs.f_pbh_total_gaussian
