"""Surrogate: GP maths against brute force, training on the analytic stand-in, accuracy,
classifier, store identity and resume.  The stand-in is a test double
(tests/test_surrogate_standin.py), never the product."""
from __future__ import annotations

import numpy as np
import pytest
from test_surrogate_standin import SPACE, StandinSolve, standin_truth

from scan.config import load_config_text
from scan.errors import InputFileError
from scan.surrogate import Surrogate, design
from scan.surrogate.emulator import predict_unit
from scan.surrogate.gp import fit_gp, predict_gp
from scan.surrogate.identity import identity
from scan.surrogate.record import shape_grid
from scan.surrogate.shape import decode, encode, fit_basis
from scan.surrogate.store import read_plan, read_points
from scan.surrogate.surrogate_file import read_surrogate, write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from scan.surrogate.validate import validate

BASE = """
[run]
name = "standin"
seed = 3
[model]
potential = "t_model"
kinetic = "poles"
[[model.poles]]
position = 1.6
width = 0.02
power = 1.0
"""
X = shape_grid(3.0, 41)


def config(*overrides):
    return load_config_text(BASE, "standin.toml", overrides=tuple(overrides))


@pytest.fixture(scope="module")
def trained(tmp_path_factory):
    """128 design + 1 x 32 refinement points, 200 held out (about 3 s)."""
    cfg = config("surrogate.points=128", "surrogate.holdout=200", "surrogate.refine_rounds=1",
                 "surrogate.refine_points=32")
    path = tmp_path_factory.mktemp("train") / "training.h5"
    em, train, hold = run_training(path, cfg, SPACE, StandinSolve(X), serial_map,
                                   TrainingPlan.from_config(cfg))
    return cfg, path, em, train, hold


def test_loo_residuals_equal_explicit_refits():
    rng = np.random.default_rng(1)
    z = rng.random((30, 2))
    y = np.sin(4 * z[:, :1]) + z[:, 1:] ** 2
    fit = fit_gp(z, y, iterations=0, length0=np.array([0.4, 0.6]))
    for i in (0, 7, 29):
        keep = np.arange(30) != i
        # same kernel, mean and noise, refit without point i (closed form: R&W 2006 eq. 5.12)
        sub = fit_gp(z[keep], y[keep], iterations=0, length0=fit.length)
        assert sub.noise == pytest.approx(fit.noise)
        brute = y[i, 0] - predict_gp(sub, z[i:i + 1])[0, 0]
        # the linear mean is refit too, so agreement is to the mean's leverage, not rounding
        assert fit.loo[i, 0] == pytest.approx(brute, rel=0.2, abs=2e-3)


def test_gp_interpolates_its_training_points():
    z = design.sobol_points(3, 0, 64, 0)
    y = np.cos(3 * z.sum(1))
    fit = fit_gp(z, y, iterations=10)
    assert np.max(np.abs(predict_gp(fit, z)[:, 0] - y)) < 1e-3


def test_shape_basis_reproduces_training_shapes():
    shapes = np.array([-2 * np.log10(1 + (X / w) ** 2) for w in np.linspace(0.6, 1.2, 40)])
    basis = fit_basis(X, shapes, 8, 1e-4)
    assert np.max(np.abs(decode(basis, encode(basis, shapes)) - shapes)) <= 1e-4
    assert basis.components.shape[0] < 8  # a one-parameter family needs few components


def test_design_is_deterministic_and_extendable():
    a = design.sobol_points(3, 0, 20, 5)
    b = np.vstack([design.sobol_points(3, 0, 12, 5), design.sobol_points(3, 12, 8, 5)])
    assert np.array_equal(a, b)
    assert not np.array_equal(a, design.sobol_points(3, 0, 20, 6))


def test_emulator_accuracy_on_standin(trained):
    """Thresholds: ~10x above what was measured (median 4e-5 dex for P_peak), and
    well inside what a posterior needs (0.005 dex median, common practice)."""
    _, _, em, train, hold = trained
    errs = validate(em, train, hold)["errors"]
    assert errs["log10_P_peak [dex]"]["median"] <= 5e-4
    assert errs["log10_P_peak [dex]"]["p95"] <= 2e-3
    assert errs["ln_k_peak"]["median"] <= 5e-4
    assert errs["shape: max |d log10 P| near peak [dex]"]["p95"] <= 5e-3
    assert errs["n_s"]["max"] <= 1e-4
    assert errs["log10_r [dex]"]["p95"] <= 1e-3
    assert errs["log10_P_peak [dex]"]["n"] >= 100


def test_classifier_away_from_the_boundary(trained):
    _, _, em, train, hold = trained
    truth = standin_truth(SPACE.from_unit(hold.u))
    pred = predict_unit(em, hold.u).valid
    assert np.array_equal(truth["valid"], hold.valid)
    clear = np.abs(truth["log10_P_peak"] + 1.0) > 0.15  # > 0.15 dex from the limit
    assert clear.sum() > 100 and np.all(pred[clear] == truth["valid"][clear])
    report = validate(em, train, hold)["classifier"]
    assert report["accuracy_far"] == 1.0 and report["n_far"] > 50
    assert report["accuracy"] >= 0.9


def test_refinement_goes_to_the_boundary(trained):
    _, path, *_ = trained
    u, stage, _ = read_plan(path)
    gap = np.abs(standin_truth(SPACE.from_unit(u))["log10_P_peak"] + 1.0)
    boundary_half = gap[stage == design.STAGE_REFINE][:16]
    assert np.median(boundary_half) < 0.5 * np.median(gap[stage == design.STAGE_DESIGN])


def test_resume_with_more_points_keeps_everything(tmp_path):
    cfg = config("surrogate.points=16", "surrogate.holdout=4", "surrogate.refine_rounds=0")
    path = tmp_path / "training.h5"
    run_training(path, cfg, SPACE, StandinSolve(X), serial_map, TrainingPlan.from_config(cfg))
    first = read_points(path)
    with pytest.raises(InputFileError, match="--resume"):
        run_training(path, cfg, SPACE, StandinSolve(X), serial_map, TrainingPlan.from_config(cfg))
    run_training(path, cfg, SPACE, StandinSolve(X), serial_map,
                 TrainingPlan.from_config(cfg, points=24), resume=True)
    after = read_points(path)
    assert len(after.index) == 28 and len(set(after.index.tolist())) == 28
    assert np.array_equal(after.params[np.isin(after.index, first.index)], first.params)
    u, stage, _ = read_plan(path)
    assert np.allclose(u[stage == 0], design.sobol_points(3, 0, 24, cfg.run.seed))


@pytest.mark.parametrize("override, key", [("model.poles[0].power=1.5", "model.poles[0].power"),
                                           ("run.seed=9", "run.seed"),
                                           ("surrogate.shape_points=21", "shape_points")])
def test_resume_with_another_model_is_refused(tmp_path, override, key):
    cfg = config("surrogate.points=8", "surrogate.holdout=0", "surrogate.refine_rounds=0")
    path = tmp_path / "training.h5"
    run_training(path, cfg, SPACE, StandinSolve(X), serial_map, TrainingPlan.from_config(cfg))
    other = config("surrogate.points=8", "surrogate.holdout=0", "surrogate.refine_rounds=0",
                   override)
    with pytest.raises(InputFileError, match="different model config") as info:
        run_training(path, other, SPACE, StandinSolve(X), serial_map,
                     TrainingPlan.from_config(other), resume=True)
    assert key in str(info.value)
    # varying a parameter's base value is fine: every point overrides it
    same = config("surrogate.points=8", "surrogate.holdout=0", "surrogate.refine_rounds=0",
                  "model.poles[0].width=0.025")
    run_training(path, same, SPACE, StandinSolve(X), serial_map, TrainingPlan.from_config(same),
                 resume=True)


def test_surrogate_file_round_trip_and_refusal(trained, tmp_path):
    cfg, _, em, train, hold = trained
    out = tmp_path / "surrogate.h5"
    write_surrogate(out, cfg, SPACE, em, validate(em, train, hold), identity(cfg, SPACE))
    back, space = read_surrogate(out, identity(cfg, SPACE))
    theta = SPACE.from_unit(hold.u[:64])
    a, b = predict_unit(em, hold.u[:64]), predict_unit(back, hold.u[:64])
    assert np.array_equal(a.log10_P_peak, b.log10_P_peak)  # arrays stored bit for bit
    assert np.array_equal(a.shape, b.shape) and np.array_equal(a.valid, b.valid)
    c = Surrogate(back, space).predict(theta)  # physical units: only the u <-> theta rounding
    assert np.allclose(a.log10_P_peak, c.log10_P_peak, rtol=0, atol=1e-9)
    with pytest.raises(InputFileError, match=r"model.poles\[0\].power"):
        read_surrogate(out, identity(config("model.poles[0].power=1.5"), SPACE))


def test_a_spectrum_with_its_feature_at_cmb_scales_is_outside_the_surrogate():
    """|n_s - 1| > 0.5 at the pivot: the stall sits at CMB scales (measured on the pole
    scan: such models have n_s = 2.2-4.2; the CMB priors exclude them anyway)."""
    from types import SimpleNamespace

    from scan.surrogate.record import CMB_FEATURE_REASON, record_from_spectrum

    k = np.geomspace(1e-3, 1e3, 50)
    base = dict(k=k, P_zeta=np.exp(-np.log(k) ** 2), k_peak=1.0, P_peak=1.0, r=1e-3,
                V0=1e-10, N_star=55.0, valid=True, reason="")
    x = np.linspace(-1.0, 1.0, 5)
    bad = record_from_spectrum(np.zeros(2), SimpleNamespace(**base, n_s=3.0), x)
    good = record_from_spectrum(np.zeros(2), SimpleNamespace(**base, n_s=0.96), x)
    assert not bad.valid and bad.reason == CMB_FEATURE_REASON
    assert good.valid and good.n_s == 0.96


def test_validation_compares_fpbh_only_where_either_side_makes_pbhs(trained):
    """Rows where both the exact and the emulated f_PBH are below NEGLIGIBLE_FPBH (1e-30)
    are left out of the f_PBH error (an error between 1e-170 and 1e-174 means nothing)."""
    _, _, em, train, hold = trained
    n_valid = int(hold.valid.sum())
    calls = []

    def observables(ln_k, log10_p, shape, x):
        calls.append(len(ln_k))
        exact = len(calls) == 1                    # validate asks for the exact side first
        fpbh = np.full(len(ln_k), -170.0 if exact else -174.0)
        fpbh[:3] = (-5.0, -40.0, -29.0) if exact else (-5.1, -20.0, -31.0)
        return {"log10_omega_gw_h2_peak": np.zeros(len(ln_k)), "log10_fpbh_total": fpbh}

    report = validate(em, train, hold, observables)
    row = report["errors"]["log10_fpbh_total where f_PBH > 1e-30 [dex]"]
    assert calls == [n_valid, n_valid]
    assert row["n"] == 3                           # (-5, -5.1), (-40, -20), (-29, -31)
    assert row["max"] == pytest.approx(20.0) and row["median"] == pytest.approx(2.0)


def test_peak_holdout_points_sit_where_the_peak_is_high_and_stay_out_of_training(tmp_path):
    """``peak_holdout`` places held-out points where the final emulator predicts a valid
    model with log10 P_peak >= peak_holdout_min; they are solved and validated, never
    trained on.  The stand-in is valid below log10 P_peak = -1 (its stochastic limit)."""
    cfg = config("surrogate.points=64", "surrogate.holdout=8", "surrogate.refine_rounds=0",
                 "surrogate.peak_holdout=6", "surrogate.peak_holdout_min=-1.5")
    path = tmp_path / "training.h5"
    _, train, hold = run_training(path, cfg, SPACE, StandinSolve(X), serial_map,
                                  TrainingPlan.from_config(cfg))
    u, stage, _ = read_plan(path)
    peak_u = u[stage == design.STAGE_HOLDOUT_PEAK]
    assert len(peak_u) == 6 and len(train.u) == 64 and len(hold.u) == 14
    truth = standin_truth(SPACE.from_unit(peak_u))["log10_P_peak"]
    # chosen by the emulator: its error on this stand-in is ~1e-3 dex at 64 points (the
    # accuracy test above), so every pick is truly above the threshold minus a margin far
    # larger than that error (common practice: margin >> emulator error)
    assert np.all(truth >= -1.5 - 0.05)
    assert not np.any([np.any(np.all(np.isclose(train.u, p), axis=1)) for p in peak_u])
