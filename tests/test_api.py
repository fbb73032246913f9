"""The Python API (``scan.solve``, ``observe``, ``load_result``, ``load_chain``).

The notebook example ``docs/example_api.py`` runs here on a real solve of
configs/tmodel_pole.toml and on a real 30-step chain of the physics posterior over the
stand-in surrogate of tests/test_sampler_posterior.py (a TEST DOUBLE of the exact solver).
The API is a layer over the library: its numbers are checked to be the library's, bit for
bit, with the units of the public boundary (k [1/Mpc], f [Hz], M [M_sun]).
"""
from __future__ import annotations

import ast
import math
import runpy
import tomllib
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from test_plots import run_folder  # noqa: F401  (fixture: a finished 30-step chain)
from test_sampler_posterior import trained  # noqa: F401  (fixture: the stand-in surrogate)

import scan
from scan.config import load_config
from scan.pipeline import solve_config
from scan.sampler import posterior_samples, runfile

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "docs" / "example_api.py"
POLE = ROOT / "configs" / "tmodel_pole.toml"
N_K = 32


@pytest.fixture(scope="module")
def example(run_folder) -> dict:  # noqa: F811
    namespace = runpy.run_path(str(EXAMPLE))
    return namespace["example"](POLE, run_folder, n_k=N_K)


def test_public_names():
    assert {"solve", "observe", "load_result", "load_chain"} <= set(scan.__all__)
    for name in scan.__all__:
        assert getattr(scan, name) is not None and (name.startswith("__")
                                                    or getattr(scan, name).__doc__)


def test_example_gets_the_observables_as_quantities_in_at_most_ten_lines(example):
    source = EXAMPLE.read_text(encoding="utf-8")
    block = source.split("# --- user code", 1)[1].split("# --- end of user code", 1)[0]
    lines = [ln for ln in block.splitlines()[1:] if ln.strip() and not ln.strip().startswith("#")]
    assert len(lines) <= 10, lines
    ast.parse(source)
    for name, unit in (("k", u.Mpc ** -1), ("P_zeta", u.one), ("f", u.Hz),
                       ("omega_gw_h2", u.one), ("M", u.M_sun), ("f_pbh", u.one)):
        value = example[name]
        assert isinstance(value, u.Quantity) and value.unit == unit, name
        assert value.ndim == 1 and value.size > 8 and np.all(np.isfinite(value.value)), name


def test_solve_is_the_library_solve_with_units(example):
    """Same arrays as scan.pipeline.solve_config of the same config, to the last bit."""
    ref = solve_config(load_config(POLE, overrides=(f"modes.n_k={N_K}",)))
    sol = example["solution"]
    assert sol.valid and ref.valid and sol.reason == ""
    assert np.array_equal(sol.k.to_value(u.Mpc ** -1), ref.spectrum.k)
    assert np.array_equal(sol.P_zeta.value, ref.spectrum.P_zeta)
    assert np.array_equal(sol.f.to_value(u.Hz), ref.observables.f_hz)
    assert np.array_equal(sol.omega_gw_h2.value, ref.observables.omega_gw_h2)
    assert np.array_equal(sol.M.to_value(u.M_sun), ref.observables.m_msun)
    assert np.array_equal(sol.f_pbh.value, ref.observables.f_pbh_per_lnm)
    assert sol.scalars["n_s"].value == ref.spectrum.n_s
    # V0 [M_p^4] as GeV^4 with the reduced Planck mass of astropy's CODATA constants;
    # PDG 2024 (Astrophysical constants): M_p = (8 pi G)^-1/2 = 2.435e18 GeV (4 digits)
    assert scan.api.REDUCED_PLANCK_MASS.to(u.GeV) == pytest.approx(2.435e18, rel=5e-4)
    assert sol.scalars["V0"].unit == u.GeV ** 4
    assert sol.scalars["V0"].value == pytest.approx(
        ref.spectrum.V0 * scan.api.REDUCED_PLANCK_MASS.to(u.GeV) ** 4, rel=1e-13)


def test_observe_arrays_and_conventions(example):
    """observe(k, P) of the solve's own spectrum with another threshold: the same GWs
    (conventions move only f_PBH), the threshold recorded, and a lower threshold makes
    more black holes (the abundance falls with the threshold, e.g. Young, Musco & Byrnes
    2019, arXiv:1904.00984)."""
    own, sol = example["own"], example["solution"]
    assert np.array_equal(own.omega_gw_h2, sol.omega_gw_h2)
    assert own.conventions["threshold"] == 0.45 and sol.observed.conventions["threshold"] == 0.5
    assert own.f_pbh_total > sol.observed.f_pbh_total
    k_in_m = sol.k.to(1 / u.m)  # any length unit converts
    again = scan.observe(k_in_m, sol.P_zeta, criterion="compaction", threshold=0.45)
    assert np.allclose(again.f_pbh.value, own.f_pbh.value, rtol=1e-12, atol=0)
    with pytest.raises(scan.errors.InputFileError, match="increase strictly"):
        scan.observe(sol.k[::-1], sol.P_zeta[::-1])


def test_load_result_round_trips_a_written_solve(example, tmp_path):
    sol = example["solution"]
    path = tmp_path / "pole.h5"
    scan.solve(POLE, [f"modes.n_k={N_K}"], out=path)
    back = scan.load_result(path)
    for name in ("k", "P_zeta", "P_tensor", "f", "omega_gw_h2", "M", "f_pbh"):
        a, b = getattr(back, name), getattr(sol, name)
        assert a.unit == b.unit and np.array_equal(a.value, b.value), name
    assert back.valid and back.observed.f_pbh_total == sol.observed.f_pbh_total
    for key in ("n_s", "r", "N_star", "k_peak", "P_peak"):
        assert back.scalars[key] == sol.scalars[key], key
    assert back.scalars["V0"].value == pytest.approx(sol.scalars["V0"].value, rel=1e-15)
    with pytest.raises(scan.errors.InputFileError, match="no such file"):
        scan.load_result(tmp_path / "missing.h5")


@pytest.mark.parametrize("name", sorted(p.name for p in (ROOT / "configs").glob("*.toml")))
def test_a_config_given_as_a_dict_is_the_file(name, monkeypatch):
    """A dict's relative paths resolve against the working folder: run from configs/."""
    path = ROOT / "configs" / name
    monkeypatch.chdir(path.parent)
    tables = tomllib.loads(path.read_text(encoding="utf-8"))
    from_dict = scan.api.as_config(tables)
    from_file = load_config(path)
    assert from_dict == from_file and from_dict.text == scan.api.toml_text(tables)
    assert tomllib.loads(scan.api.toml_text(tables)) == tables


def test_load_chain_is_inference_data_with_every_name(example, run_folder):  # noqa: F811
    idata, table = example["idata"], example["summary"]
    stored = runfile.read(run_folder / "chain.h5")
    post = posterior_samples(run_folder / "chain.h5")
    names = list(stored.extras.names)
    derived = [f for f in post["blobs"].dtype.names if f != "reason"
               and not f.startswith("lnL_")]
    assert {"k_peak", "P_peak", "f_pbh_total", "n_s", "r", "N_star"} <= set(derived)
    assert list(table.index) == names + derived  # az.summary: every one, by name
    # walkers kept by the library's one reader (stray walkers dropped by their ln p)
    assert idata.posterior.sizes["chain"] == post["walkers"] and 0 < post["walkers"] <= 16
    draws = math.ceil((stored.iteration - post["burn_in"]) / post["thin"])
    assert post["samples"].shape[0] == draws * post["walkers"]
    assert idata.posterior.sizes["draw"] == draws and idata.attrs["burn_in"] == post["burn_in"]
    # the same samples as the library's burn-in and thinning (walker-major here)
    flat = np.stack([idata.posterior[n].values.T.ravel() for n in names], axis=1)
    assert np.array_equal(flat, post["samples"])
    assert np.array_equal(idata.posterior["k_peak"].values.T.ravel(), post["blobs"]["k_peak"])
    assert idata.posterior["k_peak"].attrs["units"] == "Mpc^-1"
    assert "lp" in idata.sample_stats and "reason" in idata.sample_stats
    whole = scan.load_chain(run_folder, burn_in=0, thin=1)
    assert whole.posterior.sizes["draw"] == stored.iteration
    assert whole.posterior.sizes["chain"] == 16  # explicit burn-in: every walker
