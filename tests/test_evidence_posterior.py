"""The evidence of the physics posterior: the foreground-only hypothesis and ln B, and the
importance-sampled change of ln Z under exact solves (``verify --nested``).

The posterior is the stand-in one of tests/test_sampler_posterior.py (a real surrogate
trained on the analytic TEST DOUBLE of the exact solver).
"""
from __future__ import annotations

import math

import h5py
import numpy as np
import pytest
from test_sampler_posterior import trained  # noqa: F401  (fixture)
from test_verify import SurrogateAsExact

from scan.evidence.nested import NestedSettings
from scan.evidence.reweight import evidence_shift, open_nested, write_shift
from scan.evidence.run import plan_evidence, run_evidence
from scan.pool import SerialPool
from scan.verify.compare import Evaluated
from scan.verify.run import verify_run


def test_foreground_hypothesis_zeroes_only_the_models_omega_gw(trained):  # noqa: F811
    _, _, plan = trained
    target = plan.target
    foreground = target.without_model_gw()
    assert foreground.omega_gw_off and not target.omega_gw_off
    thetas = plan.priors.sample(np.random.default_rng(11), 48)
    _, blobs = target.log_and_blobs(thetas)
    _, blobs_fg = foreground.log_and_blobs(thetas)
    reason, rows, batch = target.predict(thetas)
    assert len(rows) > 10
    nuisance_names = plan.priors.names[plan.priors.n_model:]
    changed = set()
    for j, i in enumerate(rows):
        obs = batch.row(j)
        silent = obs.replace(omega_gw_h2=np.zeros_like(obs.omega_gw_h2))
        nuisance = dict(zip(nuisance_names, thetas[i, plan.priors.n_model:]))
        for term in target.terms:
            with_gw, without = term(obs, nuisance), term(silent, nuisance)
            got = blobs_fg[f"lnL_{term.name}"][i]
            # the planned terms equal the direct ones to rounding (tests/test_likelihood_grid)
            assert math.isclose(got, without, rel_tol=1e-9, abs_tol=1e-9) or \
                got == without, (term.name, got, without)
            if with_gw != without:
                changed.add(term.name)
            else:   # a term that does not read Omega_GW (PBH, CMB pivot) is unchanged
                assert got == blobs[f"lnL_{term.name}"][i] or math.isclose(
                    got, blobs[f"lnL_{term.name}"][i], rel_tol=1e-12, abs_tol=1e-12)
    assert changed  # the GW terms did see the model before
    assert np.array_equal(blobs_fg["reason"], blobs["reason"])


@pytest.fixture(scope="module")
def evidence(trained):  # noqa: F811
    """An evidence run of the stand-in posterior (plumbing only: a call budget keeps it
    short, so ln Z is not converged)."""
    tmp, cfg, _ = trained
    plan = plan_evidence(cfg, tmp / "ev" / "evidence.h5")
    with SerialPool() as pool:
        outcome = run_evidence(plan, pool, NestedSettings(live_points=40, seed=3,
                                                          max_ncalls=800))
    return plan, outcome


def test_evidence_of_the_posterior_writes_ln_b_against_the_foreground(evidence):
    plan, outcome = evidence
    assert list(plan.likelihoods) == ["model", "foreground"]
    model, fg = outcome.results["model"], outcome.results["foreground"]
    with h5py.File(outcome.path, "r") as handle:
        attrs = dict(handle["evidence"].attrs)
        assert handle["evidence/foreground/points"].shape[1] == len(plan.priors.names)
    assert attrs["ln_Z"] == model.ln_Z and attrs["ln_Z_err"] == model.ln_Z_err
    assert attrs["ln_B_vs_foreground"] == model.ln_Z - fg.ln_Z
    assert math.isclose(attrs["ln_B_vs_foreground_err"], math.hypot(model.ln_Z_err,
                                                                    fg.ln_Z_err))
    assert "Kass & Raftery 1995" in attrs["scale_note"]
    assert "PBH and CMB-pivot terms still see the model" in attrs["foreground_note"]


def test_verify_nested_with_the_surrogate_as_exact_side_leaves_ln_z(evidence):
    _, outcome = evidence
    run = open_nested(outcome.path)
    assert run.status == "nested" and len(run.samples) >= 10
    with SerialPool() as pool:
        result = verify_run(run, 10, pool, exact=SurrogateAsExact(run.target))
    shift = evidence_shift(result.evaluated)
    # the direct terms equal the planned ones to rounding (tests/test_likelihood_grid.py)
    assert abs(shift["delta_ln_Z"]) < 1e-9 and math.isclose(shift["ess"], 10)
    write_shift(outcome.path, shift)
    with h5py.File(outcome.path, "r") as handle:
        attrs = handle["evidence"].attrs
        assert attrs["ln_Z_exact"] == attrs["ln_Z"] + attrs["delta_ln_Z_exact"]
        assert int(handle["verify"].attrs["samples"]) == 10


def _evaluated(log_s: np.ndarray, log_e: np.ndarray) -> Evaluated:
    m = len(log_s)
    empty = np.zeros(m, dtype=[("reason", np.int16)])
    return Evaluated(np.zeros((m, 1)), log_s, empty, log_e, empty, ("",) * m,
                     np.zeros(m, bool))


def test_evidence_shift_of_known_likelihood_ratios():
    rng = np.random.default_rng(5)
    log_s = rng.normal(size=400)
    # exact = surrogate x e^0.7 everywhere: delta ln Z = 0.7 exactly, every draw counts
    shift = evidence_shift(_evaluated(log_s, log_s + 0.7))
    assert math.isclose(shift["delta_ln_Z"], 0.7, rel_tol=1e-12)
    assert shift["delta_ln_Z_err"] < 1e-12 and math.isclose(shift["ess"], 400)
    # the exact model invalid on a quarter of the draws: Z_e / Z_s = 3/4
    log_e = np.where(np.arange(400) % 4 == 0, -np.inf, log_s)
    shift = evidence_shift(_evaluated(log_s, log_e))
    assert math.isclose(shift["delta_ln_Z"], math.log(0.75), rel_tol=1e-12)
    assert math.isclose(shift["ess"], 300)


def test_evidence_shift_of_a_tilted_gaussian_posterior():
    # draws x ~ N(0, 1) of the surrogate posterior and L_e / L_s = exp(a x): Z_e / Z_s is
    # the normal moment-generating function E[e^{a x}] = e^{a^2 / 2}
    a = 0.5
    x = np.random.default_rng(8).normal(size=4000)
    shift = evidence_shift(_evaluated(np.zeros_like(x), a * x))
    assert abs(shift["delta_ln_Z"] - a * a / 2) < 3 * shift["delta_ln_Z_err"]
    assert shift["ess"] < 4000
