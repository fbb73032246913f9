"""``zetascan verify``: importance weights, ESS, reweighted summaries, flag rule, plumbing.

The math is checked against worked examples (Kish's ESS of known weights; reweighting a
standard normal to a shifted one, whose quantiles and ESS are analytic).  The plumbing
runs on a real posterior chain of the stand-in surrogate (tests/test_sampler_posterior.py,
trained on the analytic TEST DOUBLE tests/test_surrogate_standin.py); the "exact" side
is injected: the surrogate's own observables (errors 0), the stand-in's exact truth
through the product's observables stage (errors small and independently known), and the
surrogate with n_s deliberately shifted (the flag must trigger).
"""
from __future__ import annotations

import dataclasses
import math
import pickle
from pathlib import Path

import h5py
import numpy as np
import pytest
from scipy import stats
from test_sampler_posterior import make_config, trained  # noqa: F401  (fixture)
from test_surrogate_standin import standin_spectrum, standin_truth

from scan.cli import main
from scan.cli.verify import format_report
from scan.config import load_config_text
from scan.pool import SerialPool, choose_pool
from scan.posterior.exact import ExactOutcome, ExactSolve, observables_from_table
from scan.sampler import plan_run, run_chain, runfile
from scan.verify.compare import Evaluated, Thresholds, compare, draw_indices, reason_key
from scan.verify.importance import kish_ess, normalised_weights, weighted_quantiles
from scan.verify.report_file import read_report
from scan.verify.run import open_run, verify_run

ROOT = Path(__file__).resolve().parents[1]
#: Planck 2018 VI (arXiv:1807.06209): n_s = 0.9649 +- 0.0042, the Gaussian CMB prior term.
NS_MEAN, NS_SIGMA = 0.9649, 0.0042
#: Smaller observables grids than the defaults keep the exact side cheap.
OBSERVABLES = "[observables]\nn_f = 32\nn_m = 64\n"


# ------------------------------------------------------------------ the weights math
def test_kish_ess_of_known_weights():
    # Kish (1965), Survey Sampling: ESS = (sum w)^2 / sum w^2
    assert kish_ess(np.ones(4)) == 4.0
    assert kish_ess(np.array([1.0, 0.0, 0.0, 0.0])) == 1.0
    assert kish_ess(np.array([3.0, 1.0])) == pytest.approx(16.0 / 10.0, rel=1e-15)
    assert kish_ess(7.0 * np.array([3.0, 1.0])) == pytest.approx(1.6, rel=1e-15)
    assert kish_ess(np.zeros(3)) == 0.0
    with pytest.raises(ValueError):
        kish_ess(np.array([1.0, -1.0]))


def test_normalised_weights_zero_for_invalid_and_sum_to_one():
    w = normalised_weights(np.array([0.0, math.log(3.0), -np.inf, np.nan]))
    assert w == pytest.approx([0.25, 0.75, 0.0, 0.0], abs=1e-15)
    big = normalised_weights(np.array([1000.0, 1000.0 + math.log(3.0)]))  # no overflow
    assert big == pytest.approx([0.25, 0.75], rel=1e-12)
    assert np.all(normalised_weights(np.full(3, -np.inf)) == 0.0)
    with pytest.raises(ValueError):
        normalised_weights(np.array([0.0, np.inf]))


def test_equal_weight_quantiles_are_hazen_quantiles():
    # Hyndman & Fan (1996), The American Statistician 50, 361: definition 5 (Hazen)
    x = np.random.default_rng(1).normal(size=37)
    q = [0.025, 0.16, 0.5, 0.84, 0.975]
    assert weighted_quantiles(x, None, q) == pytest.approx(np.quantile(x, q, method="hazen"),
                                                           rel=1e-12)
    w = np.ones(37)
    w[:5] = 0.0  # weight-0 samples are left out
    assert weighted_quantiles(x, w, q) == pytest.approx(
        np.quantile(x[5:], q, method="hazen"), rel=1e-12)


def _gaussian_case(delta: float, m: int = 20000) -> Evaluated:
    """x ~ N(0, 1) (the 'surrogate'), reweighted to N(delta, 1) (the 'exact' posterior)."""
    x = np.random.default_rng(11).normal(size=m)
    dtype = np.dtype([("y", np.float64), ("binding", np.int16), ("log_like", np.float64),
                      ("reason", np.int16)])
    blobs = np.zeros(m, dtype)
    blobs["y"], blobs["binding"] = x, (x > 0).astype(np.int16)
    blobs["log_like"] = -0.5 * x ** 2
    exact = blobs.copy()
    exact["log_like"] = -0.5 * (x - delta) ** 2
    exact["binding"][:m // 4] = 1 - exact["binding"][:m // 4]  # a quarter disagrees
    return Evaluated(x[:, None], blobs["log_like"].copy(), blobs, exact["log_like"].copy(),
                     exact, ("",) * m, np.zeros(m, bool))


def test_reweighting_a_gaussian_to_a_shifted_gaussian():
    """w = N(x; delta, 1) / N(x; 0, 1): the reweighted quantiles are delta + Phi^-1(q) and
    E[w^2] / E[w]^2 = exp(delta^2), so ESS/M -> exp(-delta^2) (analytic; common practice
    as the importance-sampling check of an ESS estimator)."""
    for delta, biased in ((0.3, False), (0.8, True)):
        report, w = compare(_gaussian_case(delta), ["x"], ["ok"])
        assert report["ess_fraction"] == pytest.approx(math.exp(-delta ** 2), rel=0.03)
        # ~3 standard errors: rel. s.e. of the ESS estimate sqrt((e^(4 d^2) - 1) / M)
        # <= 0.009; of a quantile sqrt(q(1-q)) / (phi(z_q) sqrt(ESS)) <= 0.013
        rw = report["parameters"]["x"]["reweighted"]
        assert rw["median"] == pytest.approx(delta, abs=0.04)
        assert rw["q16"] == pytest.approx(delta + stats.norm.ppf(0.16), abs=0.05)
        assert rw["q84"] == pytest.approx(delta + stats.norm.ppf(0.84), abs=0.05)
        unw = report["parameters"]["x"]["unweighted"]
        assert unw["median"] == pytest.approx(0.0, abs=0.03)
        assert report["parameters"]["x"]["shift"] == pytest.approx(delta, abs=0.05)
        assert report["derived"]["y"]["shift"] == report["parameters"]["x"]["shift"]
        assert report["biased"] is biased
        assert w.sum() == pytest.approx(1.0, rel=1e-12) and np.all(w > 0)
        assert report["agreement"]["binding"] == 0.75  # integer fields: agreement only
        assert "binding" not in report["errors"] and "binding" not in report["derived"]
        assert report["log_like_difference"]["bias"] == pytest.approx(
            np.median(_gaussian_case(delta).blobs_exact["log_like"]
                      - _gaussian_case(delta).blobs_surrogate["log_like"]), rel=1e-12)
    flagged = compare(_gaussian_case(0.8), ["x"], ["ok"])[0]["flags"]
    assert any(f.startswith("ESS/M = 0.5") for f in flagged)
    assert any(f.startswith("reweighted median of x moved by +0.") for f in flagged)


def test_a_shifted_derived_median_flags_even_with_equal_weights():
    ev = _gaussian_case(0.0, m=2000)
    shifted = ev.blobs_exact.copy()
    shifted["y"] += 0.6  # 0.6 of the unit half-width > 0.5
    report, _ = compare(dataclasses.replace(ev, blobs_exact=shifted), ["x"], ["ok"])
    assert report["ess_fraction"] == pytest.approx(1.0, rel=1e-12)
    q16, q84 = weighted_quantiles(ev.blobs_surrogate["y"], None, [0.16, 0.84])
    shift = 0.6 / (0.5 * (q84 - q16))  # medians differ by exactly 0.6
    assert report["derived"]["y"]["shift"] == pytest.approx(shift, rel=1e-9)
    assert report["flags"] == [f"reweighted median of y moved by {shift:+.2f} x its 68% "
                               "half-width (limit 0.5)"]
    assert report["errors"]["y"]["median"] == pytest.approx(0.6, rel=1e-12)
    assert report["errors"]["y"]["scale"] == "absolute"  # y takes negative values
    relaxed = compare(dataclasses.replace(ev, blobs_exact=shifted), ["x"], ["ok"],
                      Thresholds(shift=0.7))[0]
    assert not relaxed["biased"]


def test_all_weights_zero_is_flagged_with_the_reasons():
    ev = _gaussian_case(0.0, m=20)
    reasons = ("spectrum: stochastic regime: P_zeta reaches 0.31 >= 0.1",) * 12 + \
              ("background: too few e-folds: inflation lasts 41.2 < 60 required",) * 8
    ev = dataclasses.replace(ev, log_p_exact=np.full(20, -np.inf), exact_reason=reasons)
    report, w = compare(ev, ["x"], ["ok"])
    assert report["ess"] == 0.0 and np.all(w == 0.0) and report["biased"]
    assert report["zero_weight"] == {
        "spectrum: stochastic regime: P_zeta reaches # >= #": 12,
        "background: too few e-folds: inflation lasts # < # required": 8}
    assert report["flags"][0].startswith("no sample has a positive weight")
    assert math.isnan(report["parameters"]["x"]["reweighted"]["median"])
    assert reason_key("pole at phi = 5.2e-01 has power 2") == "pole at phi = # has power #"


def test_draw_indices_are_distinct_sorted_and_reproducible():
    a = draw_indices(336, 40, seed=3)
    assert len(set(a.tolist())) == 40 and np.all(np.diff(a) > 0) and a.max() < 336
    assert np.array_equal(a, draw_indices(336, 40, seed=3))
    assert not np.array_equal(a, draw_indices(336, 40, seed=4))
    assert np.array_equal(draw_indices(12, 12, seed=0), np.arange(12))


# ------------------------------------------------------------------ injected exact sides
class SurrogateAsExact:
    """'Exact' = the surrogate's own observables, with n_s shifted by ``shift``."""

    def __init__(self, target, shift: float = 0.0) -> None:
        self.target, self.shift = target, shift

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        reason, obs = self.target.observables(np.asarray(theta)[None])
        if obs[0] is None:
            return ExactOutcome(None, self.target.reasons[int(reason[0])])
        return ExactOutcome(dataclasses.replace(obs[0], n_s=obs[0].n_s + self.shift))

    def describe(self) -> str:
        return f"surrogate observables, n_s + {self.shift:g} (test)"


class StandinExact:
    """'Exact' = the stand-in's truth (TEST DOUBLE), through the product's observables."""

    def __init__(self, config, span: float = 6.0, points: int = 121) -> None:
        self.config, self.span, self.points = config, span, points

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        model = np.asarray(theta, float)[:3]
        t = {key: float(v[0]) for key, v in standin_truth(model).items()}
        if not t["valid"]:
            return ExactOutcome(None, "stand-in: P_zeta above 0.1")
        k = np.exp(t["ln_k_peak"] + np.linspace(-self.span, self.span, self.points))
        return observables_from_table(self.config, k, standin_spectrum(model, k),
                                      k_peak=math.exp(t["ln_k_peak"]),
                                      P_peak=10.0 ** t["log10_P_peak"], n_s=t["n_s"],
                                      r=t["r"], N_star=t["N_star"])

    def describe(self) -> str:
        return "stand-in truth (test)"


@pytest.fixture(scope="module")
def chain(trained):  # noqa: F811
    """A 40-step posterior chain of the stand-in surrogate (burn-in and thinning set)."""
    tmp = trained[0]
    cfg = make_config(tmp, extra=OBSERVABLES)
    cfg = load_config_text(cfg.text, cfg.source, overrides=("sampler.max_steps=40",))
    plan = plan_run(cfg, tmp / "vrun" / "chain.h5")
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool, restart=True)
    return plan.path


@pytest.fixture(scope="module")
def opened(chain):
    """The chain opened for verification (target prepared once for the module)."""
    return open_run(chain)


def _mcmc(path: Path) -> dict:
    with h5py.File(path, "r") as f:
        g = f["mcmc"]
        return {**{f"attr {k}": np.asarray(v) for k, v in g.attrs.items()},
                **{k: g[k][...] for k in g}}


def test_surrogate_as_its_own_exact_side_gives_zero_errors_and_full_ess(chain):
    before = _mcmc(chain)
    run = open_run(chain.parent)
    assert len(run.samples) >= 100 and run.burn_in > 0 and run.thin >= 1
    with SerialPool() as pool:
        result = verify_run(run, 100, pool, exact=SurrogateAsExact(run.target))
    r = result.report
    # one walker vs many in the GP's matrix products: equal up to BLAS rounding
    assert r["ess_fraction"] == pytest.approx(1.0, abs=1e-12) and not r["biased"]
    assert r["stored_log_prob_max_abs_diff"] < 1e-8
    assert r["log_like_difference"]["max"] < 1e-8
    assert set(r["errors"]) >= {"k_peak", "P_peak", "f_gw_peak", "omega_gw_h2_peak",
                                "f_pbh_total", "M_pbh_peak", "n_s", "r", "N_star"}
    # log_and_blobs takes the GW peak on each walker's relative output grid, score() on
    # the shared absolute grid (scan.observables.batch): they differ by < one grid step
    step_dex = (6.0 + math.log(2.0)) / 63 / math.log(10.0)  # x_out: 64 points, [-3, 3+ln2]
    assert r["errors"]["f_gw_peak"]["max"] <= step_dex * (1.0 + 1e-9)
    # its height: ln Omega interpolated linearly within one 0.11-e-fold step of the peak
    # node, where Omega changes by ~1 % (common practice bound; 0.006 dex seen)
    assert r["errors"]["omega_gw_h2_peak"]["max"] < 0.01
    for name, e in r["errors"].items():
        if name not in ("f_gw_peak", "omega_gw_h2_peak"):
            assert e["max"] < 1e-6, name  # f_pbh_total: its log10, amplified rounding
    assert r["errors"]["k_peak"]["scale"] == "log10" and r["errors"]["n_s"]["scale"] == \
        "absolute"
    for name, s in r["parameters"].items():
        assert abs(s["shift"]) < 1e-9, name  # the same samples, equal weights
    # the verify group is written; mcmc is untouched
    after = _mcmc(chain)
    assert before.keys() == after.keys() >= {"chain", "log_prob", "blobs", "accepted"}
    for key in before:
        assert before[key].tobytes() == after[key].tobytes(), key
    with h5py.File(chain, "r") as f:
        g = f["verify"]
        assert g.attrs["samples"] == 100 and not g.attrs["biased"]
        names = []
        g.visititems(lambda n, o: names.append(n) if isinstance(o, h5py.Dataset) else None)
        assert {"theta", "weight", "log_post_exact", "exact/k_peak", "surrogate/n_s",
                "report"} <= set(names)
        for name in names:
            assert "units" in g[name].attrs, name
        assert g["exact/k_peak"].attrs["units"] == "Mpc^-1"
        assert np.array_equal(g["theta"][...], run.samples[g["index"][...]])
    assert read_report(chain)["ess"] == r["ess"]


def test_standin_truth_errors_are_the_surrogates_own(chain, opened):
    run = opened
    with SerialPool() as pool:
        result = verify_run(run, 16, pool, exact=StandinExact(run.config), write=False)
    r, ev = result.report, result.evaluated
    # the errors verify reports are the emulator's errors against the known truth
    ok = (ev.blobs_surrogate["reason"] == 0) & (ev.blobs_exact["reason"] == 0)
    pred = run.target.loaded["surrogate"].predict(ev.thetas[ok, :3])
    truth = standin_truth(ev.thetas[ok, :3])
    expected = {"k_peak": np.abs(pred.ln_k_peak - truth["ln_k_peak"]) / math.log(10.0),
                "P_peak": np.abs(pred.log10_P_peak - truth["log10_P_peak"]),
                "n_s": np.abs(pred.n_s - truth["n_s"]),
                "r": np.abs(pred.log10_r - np.log10(truth["r"])),
                "N_star": np.abs(pred.N_star - truth["N_star"])}
    for name, err in expected.items():
        assert r["errors"][name]["n"] == ok.sum()
        assert r["errors"][name]["max"] == pytest.approx(err.max(), rel=1e-6, abs=1e-12)
        assert r["errors"][name]["median"] == pytest.approx(np.median(err), rel=1e-6,
                                                            abs=1e-12)
    # f_gw_peak is the argmax of two log grids: off by at most half of each spacing
    # (surrogate: 64 points over 6 + ln 2 e-folds; exact: n_f = 32 over 12 + ln 2)
    half = 0.5 * ((6.0 + math.log(2.0)) / 63 + (12.0 + math.log(2.0)) / 31) / math.log(10)
    assert r["errors"]["f_gw_peak"]["max"] <= half + r["errors"]["k_peak"]["max"]
    # a good surrogate: the acceptance criterion of issue 7 holds, nothing is flagged
    assert r["ess_fraction"] >= 0.8 and not r["biased"], r["flags"]
    assert r["exact_solver"] == "stand-in truth (test)"
    text = format_report(r)
    assert "verdict: ok" in text and "ESS/M = " in text and "k_peak" in text


def test_a_shifted_exact_n_s_flags_the_run(chain, opened):
    """n_s + 3 sigma on the exact side: only the Planck n_s term changes, so
    ln p_exact - ln p_surrogate = -[(n + d - mu)^2 - (n - mu)^2] / (2 sigma^2)."""
    run = opened
    delta = 3.0 * NS_SIGMA
    with SerialPool() as pool:
        result = verify_run(run, 100, pool, exact=SurrogateAsExact(run.target, delta))
    r, ev = result.report, result.evaluated
    n = ev.blobs_surrogate["n_s"]
    analytic = -((n + delta - NS_MEAN) ** 2 - (n - NS_MEAN) ** 2) / (2.0 * NS_SIGMA ** 2)
    assert ev.log_p_exact - ev.log_p_surrogate == pytest.approx(analytic, rel=1e-6,
                                                                abs=1e-8)
    w = np.exp(analytic - analytic.max())
    assert r["ess"] == pytest.approx(w.sum() ** 2 / np.sum(w ** 2), rel=1e-6)
    assert result.weights == pytest.approx(w / w.sum(), rel=1e-6)
    assert r["errors"]["n_s"]["median"] == pytest.approx(delta, rel=1e-6)
    assert r["biased"] and any("median of n_s moved" in f for f in r["flags"])
    assert r["ess_fraction"] < 0.8 and any(f.startswith("ESS/M") for f in r["flags"])
    assert "verdict: BIASED" in format_report(r)
    assert read_report(chain)["biased"]  # the stored group was replaced


def test_exact_side_pickles_for_process_and_mpi_pools(chain, opened):
    """Pool workers receive the exact solver and return outcomes by pickling."""
    run = opened
    solver = pickle.loads(pickle.dumps(ExactSolve(run.config)))
    assert solver.config == run.config
    exact = StandinExact(run.config)
    outcome = exact(run.samples[0])
    back = pickle.loads(pickle.dumps(outcome))
    assert back.reason == outcome.reason == ""
    assert np.array_equal(back.observables.omega_gw_h2, outcome.observables.omega_gw_h2)


def _pole_config(key: str, low: float, high: float):
    text = (ROOT / "configs" / "tmodel_pole.toml").read_text() + OBSERVABLES + f"""
[[parameters]]
key = "{key}"
prior = "uniform"
low = {low}
high = {high}
[[nuisance]]
name = "A_smbhb"
prior = "log_uniform"
low = 1e-16
high = 1e-14
"""
    return load_config_text(text, "tmodel_pole.toml", overrides=("modes.n_k=64",))


def test_exact_solve_maps_a_real_pole_model_solve():
    """The product's exact side on one real solve (configs/tmodel_pole.toml): the model
    parameter is applied, the nuisance entry is not, and every field is the solve's."""
    from scan.config.priors import apply_parameters
    from scan.pipeline import solve_config
    from scan.posterior.exact import exact_outcome

    cfg = _pole_config("model.poles[0].width", 0.02, 0.03)
    applied = apply_parameters(cfg, {"model.poles[0].width": 0.027})
    ref = solve_config(applied)
    calls = []

    def solve(config, **options):
        calls.append((config, options))
        return ref

    out = exact_outcome(cfg, np.array([0.027, 3e-15]), solve=solve)
    assert calls == [(applied, {"with_modes": True, "with_observables": True})]
    assert ref.valid and out.reason == "" and out.observables is not None
    ob, s = out.observables, ref.spectrum
    assert (ob.k_peak, ob.P_peak, ob.n_s, ob.r, ob.N_star) == \
        (s.k_peak, s.P_peak, s.n_s, s.r, s.N_star)
    assert np.array_equal(ob.omega_gw_h2, ref.observables.omega_gw_h2)
    assert np.array_equal(ob.f_hz, ref.observables.f_hz) and len(ob.f_hz) == 32
    assert np.array_equal(ob.f_pbh_per_lnm, ref.observables.f_pbh_per_lnm)
    assert ob.f_pbh_total == ref.observables.f_pbh_total
    assert ob.ln_1e10_as == pytest.approx(cfg.pivot.ln_1e10_As, rel=1e-12)


def test_exact_solve_returns_an_invalid_model_as_a_reason():
    """A pole of power >= 2 cannot be crossed (infinite field distance): the background
    stage says so at once; ExactSolve passes the applied value through in the reason."""
    out = ExactSolve(_pole_config("model.poles[0].power", 0.5, 2.5))(np.array([2.25, 1e-15]))
    assert out.observables is None and "power 2.25 >= 2" in out.reason


# ------------------------------------------------------------------ bad input: exit 2
def _one_line_error(capsys, argv: list[str]) -> str:
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    return err


def test_bad_input_exits_2_with_one_line(chain, tmp_path, capsys):
    err = _one_line_error(capsys, ["verify", str(tmp_path / "nowhere")])
    assert "nowhere: no such chain file" in err and "zetascan sample" in err
    err = _one_line_error(capsys, ["verify", str(chain), "--samples", "100000"])
    assert "fewer than --samples 100000" in err and "use --samples" in err
    err = _one_line_error(capsys, ["verify", str(chain), "--samples", "3"])
    assert "at least 10" in err
    err = _one_line_error(capsys, ["verify", str(chain), "--min-ess", "1.5"])
    assert "--min-ess" in err
    # an unfinished run: created, never stepped (no burn-in / thinning stored)
    cfg = load_config_text((ROOT / "configs" / "gaussian_test.toml").read_text(), "g.toml")
    extras = runfile.Extras(("a",), ("a",), ("ok",), np.zeros(1, np.int64))
    runfile.create(tmp_path / "new" / "chain.h5", cfg, extras, np.zeros((2, 1)))
    err = _one_line_error(capsys, ["verify", str(tmp_path / "new")])
    assert "no burn-in" in err and "zetascan sample CONFIG" in err
    # a finished run of the Gaussian test target has no surrogate to verify
    extras = dataclasses.replace(extras, burn_in=0, thin=1, status="max_steps")
    runfile.create(tmp_path / "g" / "chain.h5", cfg, extras, np.zeros((2, 1)))
    err = _one_line_error(capsys, ["verify", str(tmp_path / "g")])
    assert "sampler.target" in err and "posterior" in err


def test_the_peak_mass_of_a_negligible_pbh_abundance_does_not_flag():
    """f_PBH ~ 1e-120: where its (meaningless) peak mass lies is no bias (rule in
    scan.verify.compare: skipped below NEGLIGIBLE_FPBH); with f_PBH ~ 1e-3 it flags."""
    from scan.verify.compare import NEGLIGIBLE_FPBH, Thresholds, flags

    def report(log10_f: float) -> dict:
        pbh = {"scale": "log10", "shift": 0.0,
               "unweighted": {"q16": log10_f - 1, "median": log10_f, "q84": log10_f + 1},
               "reweighted": {"q16": log10_f - 1, "median": log10_f, "q84": log10_f + 1}}
        mass = {"scale": "log10", "shift": -1.25}
        return {"positive_weight": 12, "samples": 12, "ess_fraction": 0.99,
                "parameters": {}, "derived": {"f_pbh_total": pbh, "M_pbh_peak": mass}}

    assert NEGLIGIBLE_FPBH == 1e-30
    assert flags(report(-120.0), Thresholds()) == []
    assert len(flags(report(-3.0), Thresholds())) == 1
    # an SNR of ~3e-9 (far below any threshold) moving is no bias; an SNR of ~8 is
    faint = report(-120.0)
    faint["derived"]["snr_x"] = {"scale": "log10", "shift": -2.4,
                                 "unweighted": {"q84": -8.5}, "reweighted": {"q84": -8.4}}
    assert flags(faint, Thresholds()) == []
    faint["derived"]["snr_x"]["unweighted"]["q84"] = 0.9
    assert len(flags(faint, Thresholds())) == 1
