"""``non_gaussianity = 'model'`` through the sampler's path and verify (issue 15 item 4).

The surrogate is the stand-in of tests/test_sampler_posterior.py (a test double, trained
in about a second) with a made-up smooth delta-N map per point (the capped logarithmic
map's lambda and ln(slope_max - 1), common practice for a test double: smooth analytic
functions); the reference is the per-spectrum non-Gaussian path with each sample's
emulated map (scan/observables/pbh/nongaussian.py, the capped map's closed form checked
against quad in tests/test_pbh_ng_capped.py).  The exact side of verify solves a real
pole model with its own delta-N map.
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import h5py
import numpy as np
import pytest
from test_sampler_posterior import make_config, trained  # noqa: F401
from test_surrogate_standin import SPACE, StandinSolve

from scan.api.calls import as_config
from scan.cli.summary import format_summary
from scan.config import load_config_text
from scan.errors import ConfigError
from scan.grid import install_worker, plan_grid_run, read_grid, run_grid
from scan.observables.pbh.map_fit import NG_LEVEL, fit_capped
from scan.observables.pbh.zeta_map import ZetaMap
from scan.observables.settings import settings_of
from scan.observables.window import spectra_on_table
from scan.pipeline.solve import solve_config
from scan.pool import choose_pool
from scan.posterior.exact import exact_outcome
from scan.posterior.reasons import Reason
from scan.sampler import plan_run, run_chain, runfile
from scan.sampler.summary import summarize
from scan.surrogate.adapter import solve_point
from scan.surrogate.identity import identity
from scan.surrogate.record import shape_grid
from scan.surrogate.surrogate_file import read_report, write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from scan.surrogate.validate import validate

MODEL = '[observables]\nnon_gaussianity = "model"\n'
GRID = """
[grid]
x = "model.poles[0].width"
y = "model.poles[0].position"
x_points = 3
y_points = 2
x_range = [0.012, 0.03]
y_range = [1.5, 1.6]
"""
THETAS = np.array([[0.012, 1.55, 1.0, 1e-15], [0.015, 1.62, 1.4, 3e-15]])
ROOT = Path(__file__).resolve().parents[1]


def standin_map(theta: np.ndarray) -> tuple[float, float]:
    """Made-up (lambda, ln(slope_max - 1)) of the stand-in (smooth in theta)."""
    w, pos, alpha = theta[:3]
    return 0.8 + 0.4 * (alpha - 1.0) + 5.0 * (w - 0.02), math.log(2.0 + 10.0 * (pos - 1.5))


class StandinModelSolve(StandinSolve):
    """The stand-in with the map columns a ``model`` training fills above NG_LEVEL."""

    def __call__(self, theta):
        record = super().__call__(theta)
        if not record.valid or record.log10_P_peak < NG_LEVEL:
            return record
        lam, ln_cap = standin_map(np.asarray(theta, float))
        return dataclasses.replace(record, ng_log_lambda=lam, ng_ln_cap=ln_cap)


@pytest.fixture(scope="module")
def model_trained(tmp_path_factory):
    """A 64-point stand-in surrogate that emulates the map, and its ``model`` config."""
    tmp = tmp_path_factory.mktemp("model_map")
    cfg = make_config(tmp, extra=MODEL)
    (tmp / "standin").mkdir()
    em, train, hold = run_training(tmp / "standin" / "training.h5", cfg, SPACE,
                                   StandinModelSolve(shape_grid(3.0, 41)), serial_map,
                                   TrainingPlan.from_config(cfg))
    write_surrogate(tmp / "standin" / "surrogate.h5", cfg, SPACE, em,
                    validate(em, train, hold), identity(cfg, SPACE))
    return tmp, cfg


def test_walkers_use_each_samples_emulated_map(model_trained):
    """f_PBH of every walker == the per-spectrum path with that walker's emulated
    (lambda, slope_max) on the same table spectrum; rtol 1e-3: the stack's 9-node
    interpolation of ln g (measured 3.1e-4 for a cap of 3, tests/test_pbh_ng_per_spectrum.py)."""
    tmp, cfg = model_trained
    target = plan_run(cfg, tmp / "chain_w.h5").target
    _, blobs = target.log_and_blobs(THETAS)
    plan, pbh = target.loaded["plan"], target.loaded["plan"].pbh
    pred = target.loaded["surrogate"].predict(THETAS[:, :3])
    assert np.all(np.isfinite(pred.ng_log_lambda)) and np.all(pred.ng_slope_max > 1)
    table = spectra_on_table(plan.lnk_table, pred.ln_k_peak, plan.x,
                             pred.log10_P_peak[:, None] + pred.shape)
    for i, row in enumerate(table):
        zmap = ZetaMap("logarithmic", log_lambda=float(pred.ng_log_lambda[i]),
                       slope_max=float(pred.ng_slope_max[i]))
        ref = pbh.mapped.stacked.ng.evaluate(row, zmap).f_pbh_total
        assert blobs["reason"][i] in (0, Reason.EXCLUDED)       # computed either way
        assert blobs["f_pbh_total"][i] == pytest.approx(ref, rel=1e-3)
        assert blobs["f_pbh_total"][i] > blobs["f_pbh_total_gaussian"][i] > 0


def test_surrogate_without_the_map_is_refused(trained):  # noqa: F811
    """A surrogate trained without ``model`` has no map: refused naming the key."""
    tmp, _, _ = trained
    cfg = make_config(tmp, surrogate=tmp / "standin" / "surrogate.h5", extra=MODEL)
    with pytest.raises(ConfigError, match=r"observables\.non_gaussianity.*delta-N map"):
        plan_run(cfg, tmp / "chain_refused.h5")


def test_chain_records_the_representation_and_summary_names_it(model_trained):
    tmp, cfg = model_trained
    plan = plan_run(cfg, tmp / "chain.h5")
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool, restart=True)
    conv = runfile.pbh_convention(plan.path)
    assert conv["non_gaussianity"] == "model" and conv["model_map"] == "capped_logarithmic"
    text = format_summary(summarize(plan.path))
    assert "non_gaussianity = 'model'" in text and "capped_logarithmic" in text
    assert "emulated fit of its model's delta-N map" in text and "Gaussian ->" in text


def test_verify_exact_side_uses_the_models_own_delta_n_map():
    """verify's exact side (exact_outcome: a full solve) of a wide_scan_low pole model
    with a high peak computes f_PBH with the model's tabulated delta-N map, and the capped fit of that
    map reproduces it within the representation's measured error (<= 0.73 dex over 42
    wide_scan and pole_scan models, docs/ng_model_representation.md; asserted <= 1 dex)."""
    cfg = as_config(ROOT / "configs" / "wide_scan_low.toml",
                    {"modes.n_k": 96, "observables.non_gaussianity": "model"})
    solved = []

    def solve(config, **kw):
        solved.append(solve_config(config, **kw))
        return solved[-1]

    # log10 P_peak = -1.6: f_PBH ~ 1e-55 Gaussian, ~0.4 with the map (measured)
    out = exact_outcome(cfg, np.array([4.647, 2.59e-3, 0.8937]), solve=solve)
    obs, spectrum = solved[0].observables, solved[0].spectrum
    assert out.reason == "" and obs.zeta_map.kind == "model"
    assert out.observables.f_pbh_total == pytest.approx(obs.f_pbh_total, rel=1e-12)
    assert obs.f_pbh_total > 1e10 * obs.f_pbh_total_gaussian
    capped = fit_capped(obs.zeta_map, math.sqrt(spectrum.P_peak)).zeta_map()
    from_fit = settings_of(cfg.observables).compute(spectrum.k, spectrum.P_zeta, capped)
    assert abs(math.log10(from_fit.f_pbh_total / obs.f_pbh_total)) <= 1.0


def test_grid_runs_with_each_points_map(model_trained):
    """A 3 x 2 grid with ``model``: complete, the file records the representation, and each
    stored f_PBH total is the target's (the same emulated map) for that point."""
    tmp, _ = model_trained
    config = load_config_text(make_config(tmp, extra=MODEL + GRID).text, "grid_model.toml",
                              overrides=("parameters[2].start=0.5",))
    run = plan_grid_run(config)
    with choose_pool(None, False, initializer=install_worker, initargs=(run.worker,)) as pool:
        outcome = run_grid(run, pool)
    assert outcome.status == "complete" and outcome.done == outcome.total == 6
    with h5py.File(outcome.path, "r") as handle:
        assert handle.attrs["non_gaussianity"] == "model"
        assert handle.attrs["model_map"] == "capped_logarithmic"
    data = read_grid(outcome.path)
    target = plan_run(make_config(tmp, extra=MODEL), tmp / "chain_g.h5").target
    for j, row in enumerate(data["params"]):           # one surrogate call per row, as the grid
        thetas = np.column_stack([row, np.full(len(row), 1e-15)])
        _, blobs = target.log_and_blobs(thetas)
        ok = np.isfinite(data["f_pbh_total"][j])
        assert ok.any()
        np.testing.assert_allclose(data["f_pbh_total"][j][ok], blobs["f_pbh_total"][ok],
                                   rtol=1e-12)


def test_training_record_carries_the_capped_fit_of_the_delta_n_map():
    """``zetascan train`` with ``model`` (the product's solve_point) stores the capped fit
    of the point's delta-N map; the same point trained Gaussian has none (NaN)."""
    theta = [4.647, 2.59e-3, 0.8937]                     # log10 P_peak = -1.6
    sets = {"modes.n_k": 96}
    model = solve_point(as_config(ROOT / "configs" / "wide_scan_low.toml",
                                  {**sets, "observables.non_gaussianity": "model"}), theta)
    gauss = solve_point(as_config(ROOT / "configs" / "wide_scan_low.toml", sets), theta)
    assert model.valid and model.log10_P_peak >= NG_LEVEL
    # lambda ~ 1 and slope_max ~ 4.3 for this model (measured, docs/ng_model_representation.md)
    assert 0.5 < model.ng_log_lambda < 2.0 and 1.0 < math.exp(model.ng_ln_cap) + 1 < 10.0
    assert math.isnan(gauss.ng_log_lambda) and math.isnan(gauss.ng_ln_cap)
    np.testing.assert_array_equal(model.scalar_targets()[:6], gauss.scalar_targets()[:6])


def test_validation_report_has_the_maps_hold_out_error(model_trained):
    """The surrogate's report gives the hold-out error of the emulated map (the stand-in's
    made-up map is linear in alpha and w and logarithmic in position: smooth, so a GP on 64
    points gets it far below its spread of ~1 over the box; measured median 4.8e-7 for
    lambda and 1.1e-5 for ln(slope_max - 1) over 8 hold-out points; asserted < 1e-3).
    Real maps are rougher: their emulation error is what a ``model`` training reports."""
    tmp, _ = model_trained
    errs = read_report(tmp / "standin" / "surrogate.h5")["errors"]
    for key in ("delta-N map: lambda", "delta-N map: ln(slope_max - 1)"):
        assert errs[key]["n"] > 0 and errs[key]["median"] < 1e-3
