"""The physics posterior target of ``zetascan sample``: surrogate observables vs bound curves.

The surrogate is a real one (``scan.surrogate`` training, file and loader), trained in a
second on the analytic stand-in solver — a TEST DOUBLE of the exact solver
(tests/test_surrogate_standin.py), never the product.  No fake predictor is injected: the
target under test is exactly what ``plan_run`` builds from a config.
"""
from __future__ import annotations

import dataclasses
import math
import pickle
import warnings
from pathlib import Path

import h5py
import numpy as np
import pytest
from test_surrogate_standin import SPACE, StandinSolve, standin_truth

from scan.config import load_config_text
from scan.errors import ConfigError, InputFileError
from scan.likelihood import total_loglike
from scan.observables import Observables
from scan.observables.cosmo import k_to_f
from scan.observables.pbh import f_pbh
from scan.observables.sigw import TruncationWarning, omega_gw_h2
from scan.observables.settings import conventions_of
from scan.pool import choose_pool
from scan.posterior.exact import observables_from_table
from scan.posterior.target import BLOB_FIELDS, PosteriorTarget
from scan.sampler import plan_run, run_chain
from scan.sampler.evaluate import Evaluator
from scan.sampler.runfile import load_chain
from scan.surrogate.identity import identity
from scan.surrogate.record import shape_grid
from scan.surrogate.surrogate_file import read_report, read_surrogate, write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from scan.surrogate.validate import validate

ROOT = Path(__file__).resolve().parents[1]
C = ROOT / "constraints"
CURVES = [C / "demo" / name for name in (
    "pta_excess_kestrel.csv", "pta_free_spectrum_osprey.csv", "ground_upper_limit_heron.csv",
    "fpbh_evaporation_demo.csv", "fpbh_microlensing_demo.csv", "fpbh_accretion_demo.csv",
    "scalars.toml")] + [C / "lisa_noise_4yr.csv"]

BASE = """
[run]
name = "standin"
seed = 3
output_dir = "{out}"
[model]
potential = "t_model"
kinetic = "poles"
[[model.poles]]
position = 1.6
width = 0.02
power = 1.0
[surrogate]
points = 64
holdout = 8
refine_rounds = 0
[[parameters]]
key = "model.poles[0].width"
prior = "log_uniform"
low = 0.01
high = 0.03
[[parameters]]
key = "model.poles[0].position"
prior = "uniform"
low = 1.5
high = 1.7
[[parameters]]
key = "model.alpha"
prior = "uniform"
low = 0.5
high = 2.0
[[nuisance]]
name = "{nuisance}"
prior = "log_uniform"
low = 1e-16
high = 1e-14
[sampler]
target = "posterior"
walkers = 16
max_steps = 30
check_every = 1000
vectorize = true
[likelihood]
curves = [{curves}]
surrogate = "{surrogate}"
"""


def make_config(tmp: Path, nuisance: str = "A_smbhb", surrogate: Path | None = None,
                extra: str = ""):
    text = BASE.format(out=tmp, nuisance=nuisance,
                       curves=", ".join(f'"{p}"' for p in CURVES),
                       surrogate=surrogate or tmp / "standin" / "surrogate.h5") + extra
    return load_config_text(text, "posterior_test.toml")


@pytest.fixture(scope="module")
def trained(tmp_path_factory):
    """A 64-point stand-in surrogate written to its default path (well under a second)."""
    tmp = tmp_path_factory.mktemp("posterior")
    cfg = make_config(tmp)
    (tmp / "standin").mkdir()
    em, train, hold = run_training(tmp / "standin" / "training.h5", cfg, SPACE,
                                   StandinSolve(shape_grid(3.0, 41)), serial_map,
                                   TrainingPlan.from_config(cfg))
    write_surrogate(tmp / "standin" / "surrogate.h5", cfg, SPACE, em,
                    validate(em, train, hold), identity(cfg, SPACE))
    plan = plan_run(cfg, tmp / "chain.h5")
    return tmp, cfg, plan


def fine_spectrum(pred, i: int) -> tuple[np.ndarray, np.ndarray]:
    """Sample ``i`` of a surrogate prediction on a fine ln k grid (step 0.02, two e-folds
    beyond the shape grid on each side, P = 0 there): (k [Mpc^-1], P_zeta [1])."""
    x, lnkp = pred.x, pred.ln_k_peak[i]
    lnk = np.arange(lnkp + x[0] - 2.0, lnkp + x[-1] + 2.0, 0.02)
    log10_p = np.interp(lnk, lnkp + x, pred.log10_P_peak[i] + pred.shape[i],
                        left=-np.inf, right=-np.inf)
    return np.exp(lnk), 10.0 ** log10_p


def exact_side_of_first(cfg, target: PosteriorTarget, thetas: np.ndarray):
    """verify's exact observables (:func:`observables_from_table`, the config's
    conventions) of the surrogate spectrum of ``thetas[0]``, with the walker's blobs."""
    _, blobs = target.log_and_blobs(thetas[:1])
    pred = target.loaded["surrogate"].predict(thetas[:1, :3])
    k, p = fine_spectrum(pred, 0)
    out = observables_from_table(cfg, k, p, k_peak=np.exp(pred.ln_k_peak[0]),
                                 P_peak=10.0**pred.log10_P_peak[0], n_s=0.96, r=0.01,
                                 N_star=55.0)
    return out, blobs


def reason_of(target: PosteriorTarget, blob: tuple) -> str:
    return target.reasons[int(blob[-1])]


def test_plausible_point_is_finite_with_all_blobs(trained):
    _, _, plan = trained
    target = plan.target
    assert isinstance(target, PosteriorTarget)
    assert target.blob_dtype.names[-1] == "reason"
    assert target.blob_dtype.names[:len(BLOB_FIELDS)] == BLOB_FIELDS
    assert target.snr_curves == ("lisa_noise_snr10_4yr",)
    theta = np.array([0.012, 1.55, 1.0, 1e-15])  # P_peak ~ 3e-3: far from the boundary
    log_p, blob = target(theta)
    assert np.isfinite(log_p) and reason_of(target, blob) == "ok"
    row = dict(zip(target.blob_dtype.names, blob))
    # no peak mass where f_PBH is negligible everywhere (M_pbh_peak is then NaN)
    need = [n for n in target.blob_dtype.names[:-1]
            if n != "M_pbh_peak" or row["f_pbh_total"] > 1e-200]
    assert all(np.isfinite(row[name]) for name in need), row
    pred = target.loaded["surrogate"].predict(theta[None, :3])
    assert row["k_peak"] == pytest.approx(math.exp(pred.ln_k_peak[0]), rel=1e-12)
    assert row["P_peak"] == pytest.approx(10.0 ** pred.log10_P_peak[0], rel=1e-12)
    assert row["n_s"] == pred.n_s[0] and row["N_star"] == pred.N_star[0]
    assert row["r"] == pytest.approx(10.0 ** pred.log10_r[0], rel=1e-12)
    truth = standin_truth(theta[:3])  # the surrogate follows the stand-in it was trained on
    assert abs(np.log(row["k_peak"]) - truth["ln_k_peak"][0]) < 0.5
    assert row["log_like"] + plan.priors.log_prior(theta) == pytest.approx(log_p, rel=1e-12)
    assert row["snr_lisa_noise_snr10_4yr"] > 0.0


def test_invalid_and_outside_points_are_minus_inf_and_counted(trained):
    _, _, plan = trained
    target = plan.target
    invalid = np.array([0.029, 1.65, 1.9, 1e-15])  # stand-in P_peak ~ 0.6 > 0.1: invalid
    assert not standin_truth(invalid[:3])["valid"][0]
    assert not target.loaded["surrogate"].predict(invalid[None, :3]).valid[0]
    outside = np.array([0.05, 1.6, 1.0, 1e-15])  # width above the prior's high = 0.03
    good = np.array([0.012, 1.55, 1.0, 1e-15])
    with choose_pool(None, False, vectorized=True) as pool:
        evaluator = Evaluator(target, pool)
        results = evaluator(np.array([invalid, outside, good, invalid]))
    assert [r[0] for r in results[:2]] == [-np.inf, -np.inf] and results[3][0] == -np.inf
    assert np.isfinite(results[2][0])
    counts = dict(zip(target.reasons, evaluator.counts.tolist()))
    assert counts["invalid_model"] == 2 and counts["outside_prior"] == 1 and counts["ok"] == 1
    blob = results[0][1:]
    assert reason_of(target, blob) == "invalid_model"
    assert all(np.isnan(v) for v in blob[:-1])  # nothing derived for an invalid model


def test_batch_equals_single_calls_and_pickling_keeps_results(trained):
    _, _, plan = trained
    target = plan.target
    thetas = plan.priors.sample(np.random.default_rng(7), 24)
    batch = target.batch(thetas)
    assert sum(np.isfinite(lp) for lp, _ in batch) >= 3  # the draw has valid points
    # one walker vs 24 in the surrogate's matrix products: equal up to BLAS rounding
    for theta, (lp, blob) in zip(thetas, batch):
        lp1, blob1 = target(theta)
        assert lp1 == pytest.approx(lp, rel=1e-12, abs=0.0) or lp1 == lp == -np.inf
        assert blob1[-1] == blob[-1]
        a, b = np.array(blob1[:-1]), np.array(blob[:-1])
        j = target.blob_dtype.names.index("f_pbh_total")  # exp(-C^2/sigma^2) amplifies
        a[j], b[j] = np.log(a[j]), np.log(b[j])             # rounding: compare its log
        # per-term ln L near a term's maximum is ~0: compare those absolutely
        atol = np.array([1e-10 if n.startswith("lnL_") else 0.0
                         for n in target.blob_dtype.names[:-1]])
        bad = ~np.isclose(a, b, rtol=1e-10, atol=atol, equal_nan=True)
        assert not bad.any(), [(n, x, y) for n, x, y, q in
                               zip(target.blob_dtype.names, a, b, bad) if q]
    clone = pickle.loads(pickle.dumps(target))
    assert "_loaded" not in clone.__dict__  # the loaded data is not shipped to workers
    again = clone.batch(thetas)
    for (lp, blob), (lp2, blob2) in zip(batch, again):
        assert lp == lp2 and np.array_equal(np.array(blob), np.array(blob2), equal_nan=True)


def test_loglike_equals_total_loglike_on_independently_computed_observables(trained):
    """Ω_GW from the one-shot scan.observables.sigw call on absolute k, f_PBH from scan.observables.pbh.f_pbh on a
    finer table of our own: the posterior's ln L must be total_loglike of them."""
    _, cfg, plan = trained
    target = plan.target
    thetas = np.array([[0.012, 1.55, 1.0, 1e-15], [0.015, 1.62, 1.4, 3e-15],
                       [0.011, 1.68, 0.7, 5e-16]])
    log_p, blobs = target.log_and_blobs(thetas)
    pred = target.loaded["surrogate"].predict(thetas[:, :3])
    for i, theta in enumerate(thetas):
        assert blobs["reason"][i] == 0
        x, lnkp = pred.x, pred.ln_k_peak[i]
        k, p = np.exp(lnkp + x), 10.0 ** (pred.log10_P_peak[i] + pred.shape[i])
        f_peak = k_to_f(math.exp(lnkp))
        f_out = np.geomspace(f_peak * np.exp(x[0]), f_peak * np.exp(x[-1]) * 2.0, 60)
        with warnings.catch_warnings():  # P at the grid ends is ~1 % of the peak: the
            warnings.simplefilter("ignore", TruncationWarning)  # target truncates there too
            omega = omega_gw_h2(k, p, f_out)
        masses = target.loaded["plan"].pbh.M
        pbh = f_pbh(*fine_spectrum(pred, i), masses, conventions_of(cfg.observables))
        obs = Observables(f_hz=f_out, omega_gw_h2=omega, m_msun=masses,
                               f_pbh_per_lnm=pbh.f_pbh, n_s=pred.n_s[i],
                               ln_1e10_as=cfg.pivot.ln_1e10_As, r=10.0 ** pred.log10_r[i])
        expected, per_term = total_loglike(target.terms, obs, {"A_smbhb": theta[3]})
        assert math.isfinite(expected) and per_term["planck2018_n_s"] < 0.0
        assert blobs["log_like"][i] == pytest.approx(expected, rel=1e-6, abs=1e-6)
        assert log_p[i] == pytest.approx(expected + plan.priors.log_prior(theta), rel=1e-6)
        # f_PBH ~ exp(-C_th^2 / sigma^2): its log carries the relative error of sigma^2
        # from the two formation-epoch tables (ours 256 epochs, the target's its own)
        assert np.log10(blobs["f_pbh_total"][i]) == pytest.approx(np.log10(pbh.f_pbh_total),
                                                                  rel=1e-3)


def test_the_nuisance_amplitude_changes_the_pta_terms(trained):
    _, _, plan = trained
    target = plan.target
    low = target(np.array([0.012, 1.55, 1.0, 1e-16]))[1]
    high = target(np.array([0.012, 1.55, 1.0, 3e-15]))[1]
    ll = target.blob_dtype.names.index("log_like")
    assert low[ll] != high[ll]


def test_config_errors_name_the_key(trained, tmp_path):
    tmp, _, _ = trained
    sur = tmp / "standin" / "surrogate.h5"
    with pytest.raises(ConfigError, match=r"nuisance\[0\].*pbh.threshold prior spans"):
        plan_run(threshold_config(tmp, sur, 0.5, 0.7))   # C_th < 2/3 for compaction
    with pytest.raises(ConfigError, match=r"nuisance\[0\]\.name.*A_smbhb"):
        plan_run(make_config(tmp, nuisance="A_smbh", surrogate=sur))
    with pytest.raises(ConfigError, match=r"likelihood\.surrogate.*zetascan train"):
        plan_run(make_config(tmp, surrogate=tmp_path / "none.h5"))
    with pytest.raises(ConfigError, match=r"likelihood\.methods\[0\]\.curve.*demo_heron_ul"):
        plan_run(make_config(tmp, surrogate=sur, extra='[[likelihood.methods]]\n'
                             'curve = "demo_heron"\nmethod = "step"\n'))
    cfg = make_config(tmp, surrogate=sur)
    no_dir = dataclasses.replace(cfg.likelihood, curves=(), directory=str(tmp_path / "no"))
    with pytest.raises(ConfigError, match=r"likelihood\.directory"):
        plan_run(dataclasses.replace(cfg, likelihood=no_dir))


def test_method_override_and_cmb_switch(trained):
    tmp, _, _ = trained
    sur = tmp / "standin" / "surrogate.h5"
    plan = plan_run(make_config(tmp, surrogate=sur, extra='cmb_priors = false\n'
                                '[[likelihood.methods]]\ncurve = "demo_heron_ul"\n'
                                'method = "soft_log"\n'))
    terms = {t.name: t for t in plan.target.terms}
    assert terms["demo_heron_ul"].method == "soft_log"  # the file says half_normal
    assert not {"planck2018_n_s", "planck2018_ln_As", "bk18_r"} & set(terms)
    names = [t.name for t in trained[2].target.terms]  # scalars.toml also asks for them
    assert names.count("planck2018_n_s") == 1 and "bk18_r" in names


def test_short_chain_runs_with_blobs(trained):
    tmp, _, plan = trained
    with choose_pool(None, False, vectorized=True) as pool:
        outcome = run_chain(plan, pool, restart=True)
    assert outcome.status == "max_steps" and outcome.steps == 30
    assert sum(outcome.reason_counts.values()) >= 16 * 31
    chain = load_chain(plan.path)
    blobs = chain["blobs"]
    assert blobs.shape == (30, 16) and np.all(blobs["reason"] == 0)  # the chain holds valid
    assert np.all(np.isfinite(blobs["k_peak"])) and np.all(np.isfinite(chain["log_prob"]))
    # which constraint binds: shares of the most negative lnL_<term> blob, from the file
    from scan.sampler.summary import binding_counts

    counts = binding_counts(blobs.reshape(-1))
    names = [t.name for t in plan.target.terms]
    assert set(counts["fractions"]) == set(names)
    assert sum(counts["fractions"].values()) + counts["none"] == pytest.approx(1.0)
    values = np.column_stack([blobs.reshape(-1)[f"lnL_{n}"] for n in names])
    top = names[int(np.bincount(np.argmin(values, axis=1)).argmax())]
    assert max(counts["fractions"], key=counts["fractions"].get) == top
    np.testing.assert_allclose(values.sum(axis=1), blobs.reshape(-1)["log_like"], rtol=1e-12)


def nuisance_config(tmp: Path, sur: Path, name: str, low: float, high: float,
                    extra: str = ""):
    """The test config with the nuisance ``name`` (uniform on [low, high]) in place of
    A_smbhb."""
    text = make_config(tmp, surrogate=sur).text.replace(
        'name = "A_smbhb"\nprior = "log_uniform"\nlow = 1e-16\nhigh = 1e-14',
        f'name = "{name}"\nprior = "uniform"\nlow = {low}\nhigh = {high}')
    assert f'name = "{name}"' in text
    return load_config_text(text + extra, "nuisance_test.toml")


def threshold_config(tmp: Path, sur: Path, low: float, high: float, extra: str = ""):
    return nuisance_config(tmp, sur, "pbh.threshold", low, high, extra)


def test_threshold_nuisance_equals_a_fixed_threshold_run(trained):
    """Per-walker C_th: each walker's f_PBH equals that of a run without the nuisance
    whose observables.threshold is that walker's value (the exact per-row plan)."""
    tmp, _, _ = trained
    sur = tmp / "standin" / "surrogate.h5"
    target = plan_run(threshold_config(tmp, sur, 0.45, 0.55)).target
    model = [0.012, 1.55, 1.0]
    values = (0.45, 0.5, 0.55)
    _, blobs = target.log_and_blobs(np.array([model + [c] for c in values]))
    assert np.all(np.diff(blobs["f_pbh_total"]) < 0)     # a higher threshold, fewer PBHs
    for c, blob in zip(values, blobs):
        base = make_config(tmp, surrogate=sur)
        fixed_cfg = load_config_text(base.text, base.source,
                                     overrides=(f"observables.threshold={c}",))
        fixed = plan_run(fixed_cfg).target                # nuisance: A_smbhb only
        _, ref = fixed.log_and_blobs(np.array([model + [1e-15]]))
        assert blob["f_pbh_total"] == pytest.approx(ref["f_pbh_total"][0], rel=1e-10)
        np.testing.assert_equal(blob["M_pbh_peak"], ref["M_pbh_peak"][0])  # NaN == NaN


def test_planned_terms_on_the_shared_grids_equal_the_terms_themselves(trained):
    """The vectorised call scores the batch through terms planned once on the shared
    grids (scan.likelihood.grid); the terms called directly on the same batch give the
    same ln L and SNR to rounding (common practice: 1e-12 relative, sums reordered)."""
    _, _, plan = trained
    target = plan.target
    thetas = plan.priors.sample(np.random.default_rng(4), 48)
    reason, rows, batch = target.predict(thetas)
    assert rows.size >= 10
    assert target.loaded["planned"].covers(batch)
    n = target.priors.n_model
    nuisance = {name: thetas[rows, n + j] for j, name in enumerate(target.priors.names[n:])}
    per_term, snr = target._scores(batch, nuisance, rows.size)
    assert list(per_term) == [t.name for t in target.terms]
    for term in target.terms:
        direct = np.broadcast_to(np.asarray(term(batch, nuisance), float), (rows.size,))
        np.testing.assert_allclose(per_term[term.name], direct, rtol=1e-12, atol=0.0)
    for name, term in zip(target.snr_curves, target.loaded["snr"]):
        np.testing.assert_allclose(snr[name], term.snr(batch.f_hz, batch.omega_gw_h2),
                                   rtol=1e-12, atol=0.0)
        assert np.any(snr[name] > 0.0)
    # and the vectorised call stores them
    _, blobs = target.log_and_blobs(thetas)
    np.testing.assert_array_equal(blobs["lnL_demo_heron_ul"][rows], per_term["demo_heron_ul"])


def test_resume_refuses_a_changed_curve_file_naming_it(trained, tmp_path):
    # issue 19 item 5: the run identity holds the contents of every curve file read;
    # an edited curve between two invocations would mix two likelihoods in one chain
    tmp, cfg, _ = trained
    curves = []
    for path in CURVES:
        copy = tmp_path / path.name
        copy.write_bytes(path.read_bytes())
        curves.append(copy)
    text = BASE.format(out=tmp_path, nuisance="A_smbhb",
                       curves=", ".join(f'"{p}"' for p in curves),
                       surrogate=tmp / "standin" / "surrogate.h5")
    plan = plan_run(load_config_text(text, "curves_test.toml"))
    with choose_pool(None, False, vectorized=True) as pool:
        assert run_chain(plan, pool).steps == 30
        edited = tmp_path / "ground_upper_limit_heron.csv"
        original = edited.read_bytes()
        edited.write_text(edited.read_text().replace("1.0000e+01,8.1137e-07",
                                                     "1.0000e+01,8.1138e-07"))
        longer = plan_run(load_config_text(text.replace("max_steps = 30", "max_steps = 35"),
                                           "curves_test.toml"))
        with pytest.raises(InputFileError, match=f"bound-curve file {edited} changed") as err:
            run_chain(longer, pool)
        assert "--restart" in str(err.value)
        assert load_chain(plan.path)["iteration"] == 30  # the chain is untouched
        edited.write_bytes(original)
        again = plan_run(load_config_text(text.replace("max_steps = 30", "max_steps = 35"),
                                          "curves_test.toml"))
        assert again.curves == plan.curves
        outcome = run_chain(again, pool)
    assert outcome.resumed and outcome.steps == 35  # the same contents again: it resumes


def test_resume_refuses_a_refitted_surrogate_but_not_a_rewritten_one(trained, tmp_path):
    # a chain continued on a refitted surrogate (train --refine-from) would join two
    # posteriors in one chain; the same emulator written again must still resume
    tmp, cfg, _ = trained
    surrogate = tmp_path / "surrogate.h5"
    surrogate.write_bytes((tmp / "standin" / "surrogate.h5").read_bytes())
    text_of = (lambda steps: BASE.format(
        out=tmp_path, nuisance="A_smbhb", curves=", ".join(f'"{p}"' for p in CURVES),
        surrogate=surrogate).replace("max_steps = 30", f"max_steps = {steps}"))
    em, space = read_surrogate(surrogate)
    with choose_pool(None, False, vectorized=True) as pool:
        assert run_chain(plan_run(load_config_text(text_of(30), "s.toml")), pool).steps == 30
        write_surrogate(surrogate, cfg, space, em, read_report(surrogate),
                        identity(cfg, SPACE))                      # rewritten, same emulator
        outcome = run_chain(plan_run(load_config_text(text_of(35), "s.toml")), pool)
        assert outcome.resumed and outcome.steps == 35
        with h5py.File(surrogate, "a") as handle:                  # refitted: one weight
            handle["surrogate/peak/weights"][0] *= 1.0 + 1e-9
        longer = plan_run(load_config_text(text_of(40), "s.toml"))
        with pytest.raises(InputFileError, match="refitted since this chain started") as err:
            run_chain(longer, pool)
    assert "--restart" in str(err.value)
    assert load_chain(longer.path)["iteration"] == 35              # the chain is untouched
