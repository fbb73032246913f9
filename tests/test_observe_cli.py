"""``zetascan observe``: good tables give a complete file; bad tables exit 2 naming the line."""
import math

import h5py
import numpy as np
import pytest

from scan.cli import main


def _good_rows(n=64):
    k = np.geomspace(1e4, 1e8, n)
    P = 2e-2 * np.exp(-np.log(k / 1e6)**2 / (2 * 0.5**2))
    return [f"{a:.8e},{b:.8e}" for a, b in zip(k, P)]


@pytest.fixture
def good_csv(tmp_path):
    path = tmp_path / "spec.csv"
    path.write_text("# my spectrum\n# units: k in Mpc^-1\nk,P_zeta\n" + "\n".join(_good_rows()) + "\n")
    return path


def test_good_csv_writes_groups_with_units(good_csv, tmp_path, capsys):
    out = tmp_path / "obs.h5"
    figs = tmp_path / "figs"
    assert main(["observe", str(good_csv), "--out", str(out), "--figures", str(figs),
                 "--n-f", "50", "--n-m", "40", "--criterion", "press-schechter",
                 "--threshold", "0.45"]) == 0
    with h5py.File(out, "r") as h:
        assert h["gw/f"].attrs["units"] == "Hz" and h["gw/f"].shape == (50,)
        assert h["gw/omega_gw_h2"].attrs["units"] == "1"
        assert h["pbh/M"].attrs["units"] == "M_sun" and h["pbh/f_pbh"].shape == (40,)
        assert h["pbh/f_pbh"].attrs["units"] == "1"
        assert h["pbh"].attrs["criterion"] == "press-schechter"
        assert h["pbh"].attrs["threshold"] == 0.45 and h["pbh"].attrs["window"] == "gaussian"
        assert math.isfinite(h["pbh"].attrs["f_pbh_total"]) and h["pbh"].attrs["f_pbh_total"] > 0
        assert np.max(h["gw/omega_gw_h2"][()]) > 0
        assert "zetascan_version" in h.attrs
        for name in ("gw/f", "gw/k", "gw/omega_gw_h2", "pbh/M", "pbh/M_g", "pbh/f_pbh"):
            assert "units" in h[name].attrs
    assert (figs / "omega_gw.png").exists() and (figs / "f_pbh.pdf").exists()


def test_hdf5_input(tmp_path):
    src = tmp_path / "run.h5"
    k = np.geomspace(1e4, 1e8, 40)
    with h5py.File(src, "w") as h:
        h["spectrum/k"] = k
        h["spectrum/P_zeta"] = 1e-2 * np.exp(-np.log(k / 1e6)**2 / 0.5)
    out = tmp_path / "o.h5"
    assert main(["observe", str(src), "--out", str(out), "--n-f", "10", "--n-m", "10"]) == 0
    with h5py.File(src, "w") as h:
        h["spectrum/k"] = k[::-1]
        h["spectrum/P_zeta"] = np.ones(40)
    assert main(["observe", str(src), "--out", str(out)]) == 2


def _bad(rows):
    good = _good_rows(20)
    return "# comment\nk,P_zeta\n" + "\n".join(rows(good)) + "\n"


@pytest.mark.parametrize("text, expect", [
    (_bad(lambda g: g[:5] + [g[6]] + [g[5]] + g[7:]), "line 9, column 'k'"),      # non-increasing
    (_bad(lambda g: g[:3] + [g[3].split(",")[0] + ",-1e-3"] + g[4:]), "line 6, column 'P_zeta'"),  # negative P
    (_bad(lambda g: g[:7] + [g[7].split(",")[0] + ",nan"] + g[8:]), "line 10, column 'P_zeta'"),  # NaN
    ("k,P_zeta\n1,1\n2,1\n3,1\n", "only 3 data points"),                          # too few
    ("x,y\n" + "\n".join(_good_rows(20)) + "\n", "line 1: header must name"),     # columns
    (_bad(lambda g: g[:4] + [g[4].split(",")[0]] + g[5:]), "line 7: expected at least 2"),  # ragged
    (_bad(lambda g: g[:4] + [g[4].split(",")[0] + ",abc"] + g[5:]), "line 7: not a number"),     # text
])
def test_bad_tables_exit_2_naming_line(tmp_path, capsys, text, expect):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    assert main(["observe", str(path), "--out", str(tmp_path / "x.h5")]) == 2
    err = capsys.readouterr().err
    assert expect in err and "Traceback" not in err
    assert not (tmp_path / "x.h5").exists()


def test_missing_file_and_bad_convention(tmp_path, capsys, good_csv):
    assert main(["observe", str(tmp_path / "nope.csv")]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["observe", str(good_csv), "--criterion", "compaction",
                 "--threshold", "0.8", "--out", str(tmp_path / "y.h5")]) == 2
    assert "2/3" in capsys.readouterr().err
