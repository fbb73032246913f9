"""Evidences by nested sampling: closed-form targets, the command, kill and resume.

The closed-form targets (their evidence follows from the normalisation of a Gaussian):

* a correlated Gaussian density N(x; mu, C) inside a uniform prior box of volume V that
  contains it: Z = P(box) / V with 1 - P(box) < 1e-15 for a box beyond 8 sigma of every
  axis, so ln Z = -ln V (e.g. Skilling 2006, Bayesian Anal. 1, 833, the evidence as the
  prior-weighted likelihood integral; Feroz & Hobson 2008, MNRAS 384, 449, Sec. 6 use
  Gaussian shells and mixtures of known evidence the same way);
* an equal-weight mixture of two well-separated Gaussians with L = N_1 + N_2 in the same
  box: Z = 2 / V, and each mode holds half the posterior.

Nested sampling reports a one-sigma error of ln Z; the checks allow 3 reported sigmas
(common practice: a 0.3 % false-alarm rate for a Gaussian error, fixed seeds make each
test deterministic).  Live-point counts are small (100) so the file runs in seconds; the
error the sampler reports grows accordingly (~ sqrt(H / n_live), Skilling 2006).
"""
from __future__ import annotations

import json
import math
import textwrap
from pathlib import Path

import h5py
import numpy as np
import pytest
from kill_support import sigkill_after_progress

from scan.cli import main
from scan.evidence.nested import LOG_L_FLOOR, CountedLogLike, NestedSettings, run_nested
from scan.evidence.scale import grade, kass_raftery

TESTS = Path(__file__).resolve().parent
LIVE = 100


def gaussian_log_density(x: np.ndarray, mean: np.ndarray, cov: np.ndarray) -> np.ndarray:
    """ln N(x; mean, cov) of rows x."""
    inv = np.linalg.inv(cov)
    d = x - mean
    return -0.5 * np.einsum("ij,jk,ik->i", d, inv, d) - 0.5 * np.linalg.slogdet(
        2 * np.pi * cov)[1]


def box(low: np.ndarray, high: np.ndarray):
    return lambda u: low + u * (high - low)


def within_reported_error(result, expected: float, sigmas: float = 3.0) -> bool:
    return abs(result.ln_Z - expected) < sigmas * result.ln_Z_err


def test_correlated_gaussian_in_a_box_has_ln_z_minus_ln_volume(tmp_path):
    mean = np.array([0.3, -1.0, 0.5])
    sigma = np.array([0.5, 0.8, 0.3])
    corr = np.array([[1.0, 0.7, -0.3], [0.7, 1.0, 0.2], [-0.3, 0.2, 1.0]])
    cov = corr * np.outer(sigma, sigma)
    low, high = mean - 10 * sigma, mean + 12 * sigma   # beyond 8 sigma on every axis
    expected = -float(np.sum(np.log(high - low)))
    result = run_nested(lambda x: gaussian_log_density(x, mean, cov), box(low, high),
                        ["a", "b", "c"], tmp_path, NestedSettings(live_points=LIVE, seed=4))
    assert 0.0 < result.ln_Z_err < 1.0
    assert within_reported_error(result, expected), (result.ln_Z, result.ln_Z_err, expected)
    # the weighted points are the Gaussian: mean within 3 standard errors (ESS)
    post_mean = result.weights @ result.points
    assert np.all(np.abs(post_mean - mean) < 3 * sigma / math.sqrt(result.ess))


def test_two_mode_mixture_finds_both_modes_and_their_evidence(tmp_path):
    cov = np.diag([0.2, 0.3]) ** 2
    modes = (np.array([-2.0, 1.0]), np.array([2.5, -1.5]))
    low, high = np.array([-6.0, -6.0]), np.array([6.0, 6.0])

    def log_like(x):
        return np.logaddexp(*(gaussian_log_density(x, m, cov) for m in modes))

    result = run_nested(log_like, box(low, high), ["a", "b"], tmp_path,
                        NestedSettings(live_points=LIVE, seed=2))
    expected = math.log(2.0) - float(np.sum(np.log(high - low)))
    assert within_reported_error(result, expected), (result.ln_Z, result.ln_Z_err, expected)
    share = float(np.sum(result.weights[result.points[:, 0] < 0.0]))
    assert abs(share - 0.5) < 3 * math.sqrt(0.25 / result.ess)  # binomial error of a share


def test_likelihood_wrapper_floors_zero_likelihood_and_refuses_nan():
    counted = CountedLogLike(lambda x: np.array([0.0, -np.inf, -3.0])[: len(x)])
    assert counted(np.zeros((3, 1))).tolist() == [0.0, LOG_L_FLOOR, -3.0]
    assert counted.calls == 3
    with pytest.raises(ValueError, match="NaN"):
        CountedLogLike(lambda x: np.full(len(x), np.nan))(np.zeros((2, 1)))


def test_kass_raftery_grades_two_ln_b():
    # Kass & Raftery 1995, J. Am. Stat. Assoc. 90, 773, Sec. 3.2: 2 ln B in 0-2, 2-6,
    # 6-10, > 10
    assert grade(0.9) == "not worth more than a bare mention"
    assert grade(1.1) == "positive"
    assert grade(-4.0) == "strong"
    assert grade(5.1) == "very strong"
    assert "over the model" in kass_raftery(-2.0)


GAUSSIAN = """
[run]
name = "ev"
seed = 5
output_dir = "{out}"
[model]
potential = "t_model"
[[parameters]]
key = "model.alpha"
prior = "gaussian"
mean = 1.0
sigma = 0.1
low = 0.0
high = 2.0
[[nuisance]]
name = "x"
prior = "gaussian"
mean = 0.0
sigma = 2.0
low = -20.0
high = 20.0
[sampler]
target = "gaussian_test"
test_correlation = 0.6
"""


def gaussian_config(tmp_path: Path) -> Path:
    path = tmp_path / "ev.toml"
    path.write_text(GAUSSIAN.format(out=tmp_path))
    return path


#: ln Z of GAUSSIAN: the box [0, 2] x [-20, 20] holds the Gaussian beyond 10 sigma.
GAUSSIAN_LN_Z = -math.log(2.0 * 40.0)


def evidence_attrs(path: Path) -> dict:
    with h5py.File(path, "r") as handle:
        return dict(handle["evidence"].attrs)


def test_evidence_command_writes_the_file_with_the_closed_form_ln_z(tmp_path, capsys):
    cfg = gaussian_config(tmp_path)
    assert main(["evidence", str(cfg), "--live-points", str(LIVE)]) == 0
    out = capsys.readouterr().out
    assert "ln Z" in out
    attrs = evidence_attrs(tmp_path / "ev" / "evidence.h5")
    assert abs(attrs["ln_Z"] - GAUSSIAN_LN_Z) < 3 * attrs["ln_Z_err"]
    assert math.isnan(attrs["ln_B_vs_foreground"])   # no foreground for gaussian_test
    with h5py.File(tmp_path / "ev" / "evidence.h5", "r") as handle:
        assert handle.attrs["config_sha256"]
        assert handle["evidence/model/samples"].shape[1] == 2
        assert handle["evidence/model/weights"].attrs["units"] == "1"
        assert math.isclose(float(np.sum(handle["evidence/model/weights"][...])), 1.0)
    # --compare of a run with itself: ln B = 0 exactly, error sqrt(2) x ln_Z_err
    assert main(["evidence", "--compare", str(tmp_path / "ev"), str(tmp_path / "ev")]) == 0
    out = capsys.readouterr().out
    assert "ln B (A vs B) = 0.000" in out and "Kass & Raftery 1995" in out
    # summary of an emcee chain of the same run compares it with the nested posterior
    # (the same density: N restricted to the box).  The medians agree within 0.2 emcee
    # half-widths (issue 20; the median's standard error is 1.25 sigma / sqrt(n), so
    # 0.2 is > 3 standard errors of the difference at the ESS here), and the KS statistic
    # stays below the two-sample critical value at alpha = 0.001,
    # 1.95 sqrt(1/n + 1/m) (Smirnov 1948, Ann. Math. Stat. 19, 279, table), with the
    # nested ESS and the thinned chain (thin >= tau / 2: half its samples independent)
    assert main(["sample", str(cfg), "--set", "sampler.max_steps=3000",
                 "--set", "sampler.check_every=500"]) == 0
    capsys.readouterr()
    assert main(["summary", str(tmp_path / "ev"), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    nested = info["nested"]
    assert nested["agree"], nested
    with h5py.File(tmp_path / "ev" / "evidence.h5", "r") as handle:
        ess = float(handle["evidence/model"].attrs["ess"])
    critical = 1.95 * math.sqrt(1.0 / ess + 2.0 / info["samples_used"])
    assert all(row["ks"] < critical for row in nested["agreement"].values()), nested


def test_bad_evidence_input_exits_2_with_one_line(tmp_path, capsys):
    assert main(["evidence", "--compare", str(tmp_path), str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "evidence.h5" in err and len(err.splitlines()) == 1
    text = GAUSSIAN.format(out=tmp_path).replace("low = -20.0\nhigh = 20.0\n", "")
    (tmp_path / "open.toml").write_text(text)
    assert main(["evidence", str(tmp_path / "open.toml")]) == 2
    err = capsys.readouterr().err.strip()
    assert "nuisance[0]" in err and "bounded box" in err and len(err.splitlines()) == 1
    # checkpoints made with another config are not resumed
    cfg = gaussian_config(tmp_path)
    stamp = tmp_path / "ev" / "nested" / "model" / "config_sha256.txt"
    stamp.parent.mkdir(parents=True)
    stamp.write_text("0" * 64 + "\n")
    assert main(["evidence", str(cfg), "--resume"]) == 2
    err = capsys.readouterr().err.strip()
    assert "another config" in err and len(err.splitlines()) == 1


SCRIPT = textwrap.dedent("""
    import sys
    sys.path.insert(0, {tests!r})
    from scan.cli import main
    main(["evidence", {cfg!r}, "--live-points", "{live}"])
""")


def stored_rows(points: Path) -> int:
    with h5py.File(points, "r", locking=False) as handle:
        return int(handle["points"].shape[0])


def test_sigkill_then_resume_keeps_the_checkpoint_and_ln_z(tmp_path, capsys):
    cfg = gaussian_config(tmp_path)
    points = tmp_path / "ev" / "nested" / "model" / "results" / "points.hdf5"
    seen = 0

    def progress() -> int:
        nonlocal seen
        seen = stored_rows(points)
        return seen

    sigkill_after_progress(SCRIPT.format(tests=str(TESTS), cfg=str(cfg), live=LIVE),
                           progress, 3 * LIVE)
    kept = stored_rows(points)
    assert kept >= seen >= 3 * LIVE          # every flushed point survived the kill
    assert not (tmp_path / "ev" / "evidence.h5").exists()
    assert main(["evidence", str(cfg), "--resume", "--live-points", str(LIVE), "--json"]) == 0
    resumed = json.loads(capsys.readouterr().out)["hypotheses"]["model"]
    # the kept points are replayed, not recomputed: this run called the likelihood for
    # the rest only (plus the sampler's consistency checks of the stored points)
    assert resumed["ncall"] >= kept
    assert resumed["ncall_this_run"] <= resumed["ncall"] - kept + 10
    attrs = evidence_attrs(tmp_path / "ev" / "evidence.h5")
    assert abs(attrs["ln_Z"] - GAUSSIAN_LN_Z) < 3 * attrs["ln_Z_err"]
