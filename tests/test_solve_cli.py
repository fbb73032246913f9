"""``zetascan solve``: the result file layout, units, provenance, summary and figures."""
from __future__ import annotations

from pathlib import Path

import h5py
import numpy as np
import pytest

from scan.cli import main

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def solved(tmp_path_factory):
    out = tmp_path_factory.mktemp("solve") / "staro.h5"
    code = main(["solve", str(ROOT / "configs" / "starobinsky.toml"), "--out", str(out),
                 "--set", "modes.n_k=48"])
    assert code == 0
    return out


def test_result_layout_and_units(solved):
    with h5py.File(solved, "r") as f:
        for name in ("N", "phi", "chi", "dchi_dN", "H", "eps1", "eps2"):
            assert "units" in f["background"][name].attrs
        for name in ("k", "P_zeta", "P_tensor"):
            assert "units" in f["spectrum"][name].attrs
        assert f["spectrum/k"].attrs["units"] == "Mpc^-1"
        for key in ("N_star", "n_s", "r", "V0", "k_star"):
            assert np.isfinite(f["cmb"].attrs[key])
        assert f.attrs["config_sha256"]
        assert list(f["config"].attrs["overrides"]) == ["modes.n_k=48"]
        assert bool(f.attrs["valid"])
        # Starobinsky, N* = 55: exact-mode n_s = 0.964898, r = 3.5496e-3
        # (shared physics notes, computed; second-order slow roll of Stewart & Lyth 1993,
        # gr-qc/9302019); the modes tests check these at 3e-5, here only the plumbing.
        assert abs(f["cmb"].attrs["n_s"] - 0.964898) < 1e-4
        assert abs(f["cmb"].attrs["r"] / 3.5496e-3 - 1) < 1e-3
        assert f["cmb"].attrs["source"] == "exact Mukhanov-Sasaki modes"
        assert f["gw/f"].attrs["units"] == "Hz" and f["pbh/M"].attrs["units"] == "M_sun"
        assert f["gw/omega_gw_h2"].shape == f["gw/f"].shape
        assert f["pbh"].attrs["criterion"] == "compaction"
        assert np.isfinite(f["pbh"].attrs["f_pbh_total"])


def test_summary_and_figures(tmp_path, capsys):
    out = tmp_path / "pole.h5"
    code = main(["solve", str(ROOT / "configs" / "tmodel_pole.toml"), "--out", str(out),
                 "--set", "modes.n_k=48"])
    text = capsys.readouterr().out
    assert code == 0
    assert "pole 0 at phi = 5.2" in text and "ultra-slow roll" in text
    assert "N* =" in text and "n_s =" in text
    assert "max Omega_GW h^2" in text and "f_PBH total" in text
    for suffix in ("_model.png", "_spectrum.png", "_spectrum.pdf", "_omega_gw.png",
                   "_f_pbh.png"):
        assert (tmp_path / f"pole{suffix}").stat().st_size > 1000


def test_invalid_model_is_reported_not_raised(tmp_path, capsys):
    out = tmp_path / "bad.h5"
    # power >= 2: infinite field distance to the pole, an invalid model (not an error)
    code = main(["solve", str(ROOT / "configs" / "tmodel_pole.toml"), "--out", str(out),
                 "--set", "model.poles[0].power=2.5", "--no-figures"])
    text = capsys.readouterr().out
    assert code == 0
    assert "INVALID" in text
    with h5py.File(out, "r") as f:
        assert not bool(f.attrs["valid"]) and f.attrs["reason"]


def test_other_tools_read_the_groups_with_coordinates_and_units(solved):
    """xarray (netCDF over HDF5, engine h5netcdf) opens spectrum, gw and pbh with k, f and
    M as coordinates (HDF5 dimension scales), and every units attribute parses with
    astropy to the intended unit — M_p is the reduced Planck mass (8 pi G)^-1/2, about
    2.435e18 GeV (PDG 2024, Astrophysical constants), not the proton mass."""
    import astropy.units as u
    import xarray as xr

    for group, coord, names in (("spectrum", "k", ("P_zeta", "P_tensor", "N_exit")),
                                ("gw", "f", ("omega_gw_h2", "k")),
                                ("pbh", "M", ("f_pbh", "M_g"))):
        with xr.open_dataset(solved, group=group, engine="h5netcdf") as ds:
            assert coord in ds.coords and ds[coord].dims == (coord,), group
            for name in names:
                assert ds[name].dims == (coord,), (group, name)
            with h5py.File(solved, "r") as f:
                assert np.array_equal(ds[coord].values, f[group][coord][()])
    expected = {"spectrum/k": u.Mpc ** -1, "gw/f": u.Hz, "gw/k": u.Mpc ** -1,
                "pbh/M": u.M_sun, "pbh/M_g": u.g, "spectrum/N_exit": u.one,
                "background/N": u.one, "background/phi": u.GeV}
    with h5py.File(solved, "r") as f:
        units = {}
        f.visititems(lambda name, obj: units.update(
            {name: obj.attrs["units"]} if isinstance(obj, h5py.Dataset) else {}))
        for name, text in units.items():
            unit = u.Unit(text)  # raises on a string astropy cannot read
            if name in expected:
                assert unit.is_equivalent(expected[name]), (name, text)
        m_p = u.Unit(f["background/phi"].attrs["units"]).to(u.GeV)
        assert m_p == pytest.approx(2.435e18, rel=5e-4)
        v0 = u.Unit(f["cmb"].attrs["units_V0"])
        assert v0.to(u.GeV ** 4) == pytest.approx(m_p ** 4, rel=4e-6)  # 7 digits: 4 x 5e-7 + 5e-7
