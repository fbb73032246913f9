"""``sampler.moves``: the key reaches emcee, is recorded with the chain, bad values exit 2.

The recovery check (means and widths of a correlated Gaussian within a few standard errors)
follows the plumbing test of tests/test_sampler_gaussian.py (common practice: emcee's own
tests check every move on a multivariate normal; Foreman-Mackey et al. 2013,
arXiv:1202.3665).  The differential-evolution mixture is the one of the emcee tutorial
"Using different moves" (https://emcee.readthedocs.io/en/latest/tutorials/moves/).
"""
from __future__ import annotations

import h5py
import numpy as np
import pytest
from test_sampler_gaussian import (check_means_and_widths, gaussian_config,
                                   independent_samples, run)

from scan.cli import main
from scan.sampler import driver
from scan.sampler.moves import MOVE_SETS, describe, move_mixture


def test_move_sets_are_the_documented_mixtures():
    assert describe("stretch") == "StretchMove 1"
    assert describe("differential_evolution") == "DEMove 0.8 + DESnookerMove 0.2"
    weights = [w for _, w in move_mixture("differential_evolution")]
    assert weights == [0.8, 0.2]
    assert set(MOVE_SETS) == {"stretch", "differential_evolution"}


@pytest.mark.parametrize("moves, classes", [("stretch", ["StretchMove"]),
                                            ("differential_evolution",
                                             ["DEMove", "DESnookerMove"])])
def test_the_key_reaches_emcee_and_the_chain_file(tmp_path, monkeypatch, moves, classes):
    seen = {}
    real = driver.emcee.EnsembleSampler

    def spy(*args, **kwargs):
        sampler = real(*args, **kwargs)
        seen["moves"] = [type(m).__name__ for m in sampler._moves]
        seen["weights"] = list(sampler._weights)
        return sampler

    monkeypatch.setattr(driver.emcee, "EnsembleSampler", spy)
    text = gaussian_config(tmp_path, steps=20, sampler_extra=f'moves = "{moves}"\n')
    _, outcome = run(text)
    assert seen["moves"] == classes
    assert np.isclose(sum(seen["weights"]), 1.0)
    with h5py.File(outcome.path, "r") as handle:
        assert handle["sampler"].attrs["moves"] == moves
        assert handle["sampler"].attrs["moves_detail"] == describe(moves)


def test_default_is_the_stretch_move_so_old_chains_stay_reproducible(tmp_path):
    _, default = run(gaussian_config(tmp_path / "a", steps=30))
    _, stretch = run(gaussian_config(tmp_path / "b", steps=30,
                                     sampler_extra='moves = "stretch"\n'))
    with h5py.File(default.path, "r") as a, h5py.File(stretch.path, "r") as b:
        assert np.array_equal(a["mcmc/chain"][()], b["mcmc/chain"][()])


def test_differential_evolution_recovers_a_correlated_gaussian(tmp_path):
    _, outcome = run(gaussian_config(tmp_path, steps=2000,
                                     sampler_extra='moves = "differential_evolution"\n'))
    samples, _, _ = independent_samples(outcome.path)
    assert len(samples) > 500
    check_means_and_widths(samples)


def test_an_unknown_move_set_is_one_line_exit_2(tmp_path, capsys):
    cfg = tmp_path / "g.toml"
    cfg.write_text(gaussian_config(tmp_path, steps=10, sampler_extra='moves = "walk"\n'))
    assert main(["sample", str(cfg)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "sampler.moves" in err[0] and "differential_evolution" in err[0]
    assert not (tmp_path / "g" / "chain.h5").exists()
