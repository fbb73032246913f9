"""``zetascan grid``: resumable exclusion grids whose verdicts are the likelihood terms' own.

The surrogate is the stand-in one of tests/test_sampler_posterior.py (a real surrogate
trained in a second on the analytic TEST DOUBLE of tests/test_surrogate_standin.py); the
exact-solve test runs the real pipeline on a 2 x 2 grid.
"""
from __future__ import annotations

import math
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import h5py
import numpy as np
import pytest
from kill_support import sigkill_after_progress
from scipy.stats import chi2, norm
from test_sampler_posterior import CURVES, make_config, trained  # noqa: F401  (fixture)

from scan.cli import main
from scan.config import load_config_text
from scan.errors import InputFileError, ZetascanError
from scan.posterior.reasons import REASONS
from scan.grid import (CHI2_95_1DOF, CHI2_95_2DOF, install_worker, plan_grid,
                       plan_grid_run, read_grid, relative_status, run_grid)
from scan.grid.plan import key_units
from scan.likelihood import GaussianPrior, OneSidedLimit, integrated_omega_h2, total_loglike
from scan.pool import choose_pool

TESTS = Path(__file__).resolve().parent
#: Width x position at alpha = 0.5: f_PBH bounds exclude the upper right, the stand-in is
#: invalid (P_peak > 0.1) in the corner, LISA sees part of the plane (probed beforehand).
GRID = """
[grid]
x = "model.poles[0].width"
y = "model.poles[0].position"
x_points = 6
y_points = 5
x_range = [0.012, 0.03]
y_range = [1.5, 1.6]
"""
SETS = ("parameters[2].start=0.5",)
NUISANCE = {"A_smbhb": 1e-15}  # the log_uniform prior's median, sqrt(1e-16 * 1e-14)


def grid_text(out: Path, surrogate: Path, extra: str = GRID) -> str:
    """The stand-in posterior config with a [grid] table, output under ``out``."""
    return make_config(out, surrogate=surrogate, extra=extra).text


def grid_config(out: Path, surrogate: Path, *sets: str, extra: str = GRID):
    return load_config_text(grid_text(out, surrogate, extra), "grid_test.toml",
                            overrides=SETS + sets)


def compute(config, group: int | None = None, **options):
    run = plan_grid_run(config)
    with choose_pool(None, False, initializer=install_worker, initargs=(run.worker,)) as pool:
        return run, run_grid(run, pool, group=group, **options)


@pytest.fixture(scope="module")
def surrogate(trained):  # noqa: F811
    return trained[0] / "standin" / "surrogate.h5"


@pytest.fixture(scope="module")
def full_grid(surrogate, tmp_path_factory):
    """The uninterrupted 6 x 5 grid (one in-process run)."""
    out = tmp_path_factory.mktemp("grid_full")
    run, outcome = compute(grid_config(out, surrogate))
    assert outcome.status == "complete" and outcome.done == outcome.total == 30
    return run, read_grid(outcome.path)


def grid_datasets(path: Path) -> dict[str, np.ndarray]:
    """Every dataset under ``grid/`` by path."""
    found: dict[str, np.ndarray] = {}
    with h5py.File(path, "r") as handle:
        handle["grid"].visititems(lambda name, obj: found.__setitem__(name, obj[()])
                                  if isinstance(obj, h5py.Dataset) else None)
    return found


def check_against_terms(data: dict, target) -> dict[str, int]:
    """Every stored verdict, ln L and derived value equals the term evaluated directly on
    the observables of the stored parameters (one surrogate call per row, as the grid
    does: identical numbers).  Returns the number of excluded points per term."""
    ny, nx = data["done"].shape
    terms = {t.name: t for t in target.terms}
    names = list(data["grid_attrs"]["parameter_keys"])
    excluded: dict[str, int] = {name: 0 for name in terms}
    detection_ll = {n: np.full((ny, nx), np.nan) for n, t in data["terms"].items()
                    if t["attrs"]["kind"] == "detection"}
    for j in range(ny):
        thetas = np.column_stack([data["params"][j], np.full(nx, NUISANCE["A_smbhb"])])
        assert thetas.shape[1] == len(names) + 1
        reason, obs = target.observables(thetas)
        for i in range(nx):
            assert REASONS[data["reason"][j, i]] == target.reasons[reason[i]]
            assert data["valid"][j, i] == (reason[i] == 0) and data["done"][j, i]
            ob = obs[i]
            if ob is None:
                assert np.isnan(data["log_like"][j, i]) and np.isnan(data["k_peak"][j, i])
                assert all(t["status"][j, i] == -1 for t in data["terms"].values())
                continue
            total, per_term = total_loglike(target.terms, ob, NUISANCE)
            assert data["log_like"][j, i] == total
            top = int(np.argmax(ob.omega_gw_h2))
            assert (data["k_peak"][j, i], data["P_peak"][j, i], data["f_pbh_total"][j, i],
                    data["f_gw_peak"][j, i], data["omega_gw_h2_peak"][j, i]) == (
                ob.k_peak, ob.P_peak, ob.f_pbh_total, ob.f_hz[top], ob.omega_gw_h2[top])
            f, omega = ob.f_hz, ob.omega_gw_h2
            for name, stored in data["terms"].items():
                term, kind = terms[name], stored["attrs"]["kind"]
                ll, status = term(ob, NUISANCE), stored["status"][j, i]
                assert stored["log_like"][j, i] == ll == per_term[name]
                if kind == "upper_limit":
                    bad = term.worst_log10_ratio(f, omega) > 0.0
                    if term.method == "half_normal":  # y/U = 1 is -z^2/2 (the CL's quantile)
                        assert bad == (ll < -0.5 * term.z ** 2)
                elif kind == "pbh":
                    bad = term.statistic(ob.m_msun, ob.f_pbh_per_lnm) > 1.0
                    assert term.method == "step" and bad == (ll == -math.inf)
                elif kind == "neff":
                    bad = integrated_omega_h2(f, omega, term.f_min_hz, term.f_max_hz) \
                        > term.limit
                    assert term.method == "step" and bad == (ll == -math.inf)
                elif kind == "sensitivity":
                    snr = term.snr(f, omega)
                    assert stored["snr"][j, i] == snr
                    assert status == (2 if snr >= term.snr_threshold else 3)
                    assert status == (2 if term.detectable(f, omega) else 3)
                    continue
                elif kind == "detection":
                    detection_ll[name][j, i] = ll
                    continue
                elif isinstance(term, GaussianPrior):
                    # outside the central 95 % interval (norm.ppf(0.975) = 1.95996)
                    bad = abs(getattr(ob, term.key) - term.mean) / term.sigma > norm.ppf(0.975)
                else:
                    assert isinstance(term, OneSidedLimit)
                    bad = getattr(ob, term.key) > term.limit
                assert status == int(bad), (name, j, i)
                excluded[name] += int(bad)
    for name, ll in detection_ll.items():
        ok = data["valid"]
        best = ll[ok].max()
        # Delta chi^2 for the two grid parameters at 95 % (Wilks 1938, Ann. Math. Statist. 9, 60)
        expected = np.where(ok, (-2.0 * (ll - best) > chi2.ppf(0.95, 2)).astype(int), -1)
        assert np.array_equal(data["terms"][name]["status"], expected)
        assert data["terms"][name]["reference_log_like"] == best
        excluded[name] = int((expected == 1).sum())
    return excluded


# --------------------------------------------------------------------------- pure parts
def test_chi2_thresholds_and_the_relative_rule():
    # chi^2 with 2 dof has CDF 1 - exp(-x/2): the 95 % point is -2 ln 0.05 (closed form);
    # with 1 dof it is the square of the normal 97.5 % point (common practice: 3.841)
    assert CHI2_95_2DOF == pytest.approx(-2.0 * math.log(0.05), rel=1e-12)
    assert CHI2_95_1DOF == pytest.approx(norm.ppf(0.975) ** 2, rel=1e-12)
    ll = np.array([[-1.0, -3.0, -3.99], [-4.01, -np.inf, 7.0]])
    evaluated = np.array([[True, True, True], [True, True, False]])
    status, best = relative_status(ll, evaluated, threshold=6.0)
    assert best == -1.0  # the 7.0 is not evaluated and does not count
    assert status.tolist() == [[0, 0, 0], [1, 1, -1]]  # -2 (-4.01 + 1) = 6.02 > 6


def test_axes_follow_the_prior_and_the_config(surrogate, tmp_path):
    cfg = grid_config(tmp_path, surrogate)
    plan = plan_grid(cfg)
    assert plan.x.scale == "log" and plan.y.scale == "linear"  # auto: log_uniform -> log
    assert np.allclose(plan.x.values, np.geomspace(0.012, 0.03, 6), rtol=1e-14)
    assert plan.x.values[0] == 0.012 and plan.x.values[-1] == 0.03
    assert plan.shape == (5, 6) and [len(b) for b in plan.blocks()] == [6] * 5
    theta = plan.thetas(np.array([7]))[0]  # row 1, column 1
    assert theta.tolist() == [plan.x.values[1], plan.y.values[1], 0.5, pytest.approx(1e-15)]
    assert key_units(cfg, "model.poles[0].width") == "M_p" and key_units(cfg, "model.alpha") == "1"
    default = plan_grid(grid_config(tmp_path, surrogate, "grid.x_range=[]", "grid.y_range=[]"))
    assert (default.x.values[0], default.x.values[-1]) == (0.01, 0.03)  # the prior bounds
    exact = plan_grid(grid_config(tmp_path, surrogate, 'grid.source="exact"'))
    assert [len(b) for b in exact.blocks()] == [1] * 30


# --------------------------------------------------------------------------- acceptance
def test_every_point_agrees_with_the_terms_evaluated_directly(full_grid):
    run, data = full_grid
    excluded = check_against_terms(data, run.worker.target)
    valid = int(data["valid"].sum())
    assert 0 < valid < 30  # the stand-in's invalid corner is on the grid
    assert 0 < excluded["pbh_bounds"] < valid  # both sides of the f_PBH exclusion
    lisa = data["terms"]["lisa_noise_snr10_4yr"]["status"]
    assert (lisa == 2).any() and (lisa == 3).any()


SCRIPT = textwrap.dedent("""
    import sys, time
    sys.path.insert(0, {tests!r})
    from scan.config import load_config_text
    from scan.grid import evaluate, install_worker, plan_grid_run, run_grid
    from scan.pool import choose_pool
    evaluate_block = evaluate.GridWorker.__call__
    def slowly(self, points):  # only slower, so the kill lands midway
        time.sleep(0.25)
        return evaluate_block(self, points)
    evaluate.GridWorker.__call__ = slowly
    cfg = load_config_text({text!r}, "grid_test.toml", overrides={sets!r})
    run = plan_grid_run(cfg)
    with choose_pool(None, False, initializer=install_worker, initargs=(run.worker,)) as pool:
        run_grid(run, pool, group=1)
""")


def test_sigkill_midway_then_resume_equals_the_uninterrupted_grid(full_grid, surrogate,
                                                                   tmp_path):
    text = grid_text(tmp_path, surrogate)
    path = tmp_path / "standin" / "grid.h5"
    sigkill_after_progress(SCRIPT.format(tests=str(TESTS), text=text, sets=SETS),
                           lambda: int(read_grid(path)["done"].sum()), 12,
                           not_ready=(ZetascanError, OSError, KeyError))
    killed = read_grid(path)
    before = killed["done"].copy()
    assert 12 <= before.sum() < 30 and np.all(before.sum(axis=1) % 6 == 0)  # whole rows
    run, outcome = compute(grid_config(tmp_path, surrogate), resume=True)
    assert outcome.resumed and outcome.status == "complete" and outcome.done == 30
    assert outcome.evaluated_now == 30 - before.sum()  # nothing finished is recomputed
    resumed, full = grid_datasets(path), grid_datasets(full_grid[0].path)
    assert sorted(resumed) == sorted(full)
    for name, values in full.items():
        assert np.array_equal(resumed[name], values, equal_nan=values.dtype.kind == "f"), name
    assert np.array_equal(read_grid(path)["params"][before], killed["params"][before])


def test_profile_is_never_worse_than_the_fixed_values(surrogate, tmp_path):
    small = GRID.replace("x_points = 6", "x_points = 3").replace("y_points = 5", "y_points = 3")
    _, fixed = compute(grid_config(tmp_path / "fixed", surrogate, extra=small))
    prof_cfg = grid_config(tmp_path / "prof", surrogate, "grid.profile=true",
                           "grid.profile_starts=2", "grid.profile_evaluations=12", extra=small)
    run, outcome = compute(prof_cfg)
    assert run.plan.free == (2,) and run.plan.starts[0][0] == pytest.approx(0.0, abs=1e-8)
    a, b = read_grid(fixed.path), read_grid(outcome.path)
    assert b["grid_attrs"]["profile"]
    ok = a["valid"]
    # the search starts at the fixed values and keeps the best point it saw (up to the
    # rounding of the surrogate's matrix products over rows of other content)
    worse = b["log_like"][ok] < a["log_like"][ok] - 1e-9 * np.abs(a["log_like"][ok])
    assert np.all(b["valid"][ok]) and not worse.any()
    assert np.all((b["params"][..., 2] >= 0.5) & (b["params"][..., 2] <= 2.0))
    assert np.array_equal(b["params"][..., :2], a["params"][..., :2])
    fixed_pbh, prof_pbh = a["terms"]["pbh_bounds"]["status"], b["terms"]["pbh_bounds"]["status"]
    assert not np.any((prof_pbh == 1) & (fixed_pbh == 0))  # a step term: finite stays finite
    # alpha = 0.5 overproduces PBHs at the widest pole of the middle row; a larger alpha
    # does not (stand-in probed beforehand): the profile moves there
    assert fixed_pbh[1, 2] == 1 and prof_pbh[1, 2] == 0 and b["params"][1, 2, 2] > 0.5
    check_against_terms(b, run.worker.target)


# --------------------------------------------------------------------------- command line
def write_config(tmp: Path, surrogate: Path, extra: str = GRID) -> Path:
    path = tmp / "grid.toml"
    path.write_text(grid_text(tmp / "results", surrogate, extra)
                    + "\n# alpha fixed at 0.5 through --set parameters[2].start=0.5\n")
    return path


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    return err[0]


def test_config_errors_are_one_line_exit_2(surrogate, tmp_path, capsys):
    cfg = str(write_config(tmp_path, surrogate))
    assert main(["grid", cfg, "--set", 'grid.x="model.poles[0].widht"']) == 2
    line = one_error_line(capsys)
    assert "grid.x" in line and "did you mean 'model.poles[0].width'" in line
    assert main(["grid", cfg, "--set", 'grid.x_spacing="log"', "--set",
                 "grid.x_range=[-1.0, 1.0]"]) == 2
    line = one_error_line(capsys)
    assert "grid.x_spacing" in line and "positive" in line
    assert main(["grid", cfg, "--set", 'grid.x="model.alpha"', "--set",
                 'grid.y="model.alpha"']) == 2
    assert "grid.y" in one_error_line(capsys)
    assert main(["grid", cfg, "--set", "grid.y_range=[1.4, 1.6]"]) == 2
    assert "grid.y_range" in one_error_line(capsys)  # leaves the prior of the surrogate
    assert main(["grid", cfg, "--exact", "--set", "grid.profile=true"]) == 2
    assert "grid.profile" in one_error_line(capsys)
    bare = tmp_path / "bare.toml"
    bare.write_text(grid_text(tmp_path, surrogate, extra=""))
    assert main(["grid", str(bare)]) == 2
    assert "grid.x" in one_error_line(capsys)


def test_cli_end_to_end(surrogate, tmp_path, capsys):
    small = GRID.replace("x_points = 6", "x_points = 4").replace("y_points = 5", "y_points = 3")
    cfg = str(write_config(tmp_path, surrogate, small))
    args = ["grid", cfg, "--set", SETS[0]]
    assert main(args) == 0
    out = capsys.readouterr().out
    path = tmp_path / "results" / "standin" / "grid.h5"
    assert f"grid file: {path}" in out
    with h5py.File(path, "r") as handle:
        assert handle.attrs["config_sha256"] and handle.attrs["zetascan_version"]
        assert "[grid]" in handle["config"][()].decode()
        g = handle["grid"]
        assert {k: g.attrs[k] for k in ("x_key", "y_key", "x_scale", "y_scale", "source")} == {
            "x_key": "model.poles[0].width", "y_key": "model.poles[0].position",
            "x_scale": "log", "y_scale": "linear", "source": "surrogate"}
        assert not g.attrs["profile"] and g["x"].attrs["units"] == "M_p"
        for name in ("done", "valid", "reason", "k_peak", "P_peak", "f_pbh_total",
                     "f_gw_peak", "omega_gw_h2_peak", "log_like"):
            assert g[name].shape == (3, 4), name
        assert g["reason"].dtype == np.int16 and list(g["reason"].attrs["reason_names"])
        units = []
        g.visititems(lambda n, o: units.append((n, o.attrs.get("units")))
                     if isinstance(o, h5py.Dataset) else None)
        assert all(u for _, u in units), units  # every dataset has units
        kinds = {n: t.attrs["kind"] for n, t in g["terms"].items()}
        assert kinds["demo_heron_ul"] == "upper_limit" and kinds["pbh_bounds"] == "pbh"
        assert kinds["demo_neff"] == "neff" and kinds["planck2018_n_s"] == "prior"
        assert kinds["lisa_noise_snr10_4yr"] == "sensitivity"
        assert kinds["demo_kestrel_excess"] == "detection"
        assert g["terms/demo_heron_ul"].attrs["label"] == "Heron detector pair UL (demo)"
        assert g["terms/lisa_noise_snr10_4yr/status"].dtype == np.int8
        assert "snr" in g["terms/lisa_noise_snr10_4yr"] and "snr" not in g["terms/pbh_bounds"]
        pbh = g["terms/pbh_bounds/status"][()]
        share = 100.0 * (pbh == 1).sum() / g["valid"][()].sum()
    assert "f_PBH: " in out and f"[pbh]: excluded at {share:.1f} %" in out
    assert main(args) == 2  # exists: neither --resume nor --restart
    assert "--resume" in one_error_line(capsys)
    assert main(args + ["--resume"]) == 0
    capsys.readouterr()
    assert main(args + ["--resume", "--set", "grid.x_points=5"]) == 2
    assert "grid.x_points: 4 -> 5" in one_error_line(capsys)
    assert main(args + ["--restart", "--set", "grid.x_points=5"]) == 0
    assert read_grid(path)["done"].shape == (3, 5) and read_grid(path)["done"].all()


def test_help_has_an_example(capsys):
    with pytest.raises(SystemExit):
        main(["grid", "--help"])
    assert "zetascan grid configs/pole_scan.toml --set" in capsys.readouterr().out


# --------------------------------------------------------------------------- exact solves
solver = pytest.mark.skipif(bool(os.environ.get("ZETASCAN_SKIP_SOLVER")),
                            reason="ZETASCAN_SKIP_SOLVER set")
POLE = """
[run]
name = "pole_grid"
output_dir = "{out}"
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.2
width = 0.026
power = 1.0
[modes]
n_k = 48
[observables]
n_f = 60
n_m = 60
[[parameters]]
key = "model.poles[0].width"
prior = "log_uniform"
low = 0.025
high = 0.027
[[parameters]]
key = "model.poles[0].position"
prior = "uniform"
low = 5.19
high = 5.21
[likelihood]
curves = [{curves}]
[grid]
x = "model.poles[0].width"
y = "model.poles[0].position"
x_points = 2
y_points = 2
"""


@solver
def test_exact_two_by_two_grid(tmp_path, capsys):
    """Four exact solves of the pole model (a few seconds each), one repeated directly."""
    from scan.posterior.exact import exact_outcome

    cfg = tmp_path / "pole.toml"
    cfg.write_text(POLE.format(out=tmp_path, curves=", ".join(f'"{p}"' for p in CURVES)))
    assert main(["grid", str(cfg), "--exact", "--processes", "1"]) == 0
    data = read_grid(tmp_path / "pole_grid" / "grid.h5")
    assert data["grid_attrs"]["source"] == "exact" and data["done"].all()
    # measured beforehand: (w, phi0) = (0.027, 5.21) crosses the stochastic limit
    # P_zeta = 0.1 (modes.stochastic_limit); the other three corners are valid
    assert data["valid"].tolist() == [[True, True], [True, False]]
    assert REASONS[data["reason"][1, 1]] == "invalid_spectrum"
    config = load_config_text(cfg.read_text(), str(cfg), overrides=('grid.source="exact"',))
    direct = exact_outcome(config, np.array([0.025, 5.19])).observables
    run = plan_grid_run(config)
    terms = {t.name: t for t in run.worker.terms}
    assert data["P_peak"][0, 0] == direct.P_peak and data["k_peak"][0, 0] == direct.k_peak
    for name, stored in data["terms"].items():
        assert stored["log_like"][0, 0] == terms[name](direct, {})
    # measured beforehand: P_peak 1.2e-3 at w = 0.025 and 3.6e-2 at w = 0.027 (phi0 = 5.19)
    assert data["P_peak"][0, 1] > data["P_peak"][0, 0]


def test_restart_is_refused_while_another_process_writes_the_grid(surrogate, tmp_path,
                                                                   capsys):
    # issue 19 item 4: --restart never deletes a grid file under a running writer
    small = GRID.replace("x_points = 6", "x_points = 3").replace("y_points = 5", "y_points = 2")
    cfg = str(write_config(tmp_path, surrogate, small))
    assert main(["grid", cfg, "--set", SETS[0]]) == 0
    path = tmp_path / "results" / "standin" / "grid.h5"
    before = path.read_bytes()
    script = (f"import time; from scan.store import RunLock; lock = RunLock({str(path)!r}); "
              "print('held', flush=True); time.sleep(60)")
    holder = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        capsys.readouterr()
        assert main(["grid", cfg, "--set", SETS[0], "--restart"]) == 2
        line = one_error_line(capsys)
        assert f"process {holder.pid} is writing this run file" in line
    finally:
        holder.kill()
        holder.wait()
    assert path.read_bytes() == before  # neither deleted nor touched


def test_resume_refuses_a_changed_curve_and_follows_a_moved_folder(surrogate, tmp_path):
    # issue 19 item 5: the grid's identity holds each curve file's contents (a changed
    # one is named), not where its folder sits
    small = GRID.replace("x_points = 6", "x_points = 3").replace("y_points = 5", "y_points = 2")
    text = grid_text(tmp_path / "old", surrogate, small)
    (tmp_path / "curves").mkdir()
    for path in CURVES:
        copy = tmp_path / "curves" / path.name
        copy.write_bytes(path.read_bytes())
        text = text.replace(f'"{path}"', f'"{copy}"')
    config = load_config_text(text, "grid_test.toml", overrides=SETS)
    run, first = compute(config)
    assert first.status == "complete" and not first.resumed
    edited = tmp_path / "curves" / "ground_upper_limit_heron.csv"
    original = edited.read_bytes()
    edited.write_text(edited.read_text().replace("1.0000e+01,8.1137e-07",
                                                 "1.0000e+01,8.1138e-07"))
    with pytest.raises(InputFileError, match=f"bound-curve file {edited} changed"):
        compute(config, resume=True)
    edited.write_bytes(original)
    (tmp_path / "new").mkdir()
    (tmp_path / "old" / "standin").rename(tmp_path / "new" / "standin")
    moved = load_config_text(text, "grid_test.toml",
                             overrides=SETS + (f"run.output_dir='{tmp_path / 'new'}'",))
    _, again = compute(moved, resume=True)
    assert again.resumed and again.status == "complete" and again.evaluated_now == 0
