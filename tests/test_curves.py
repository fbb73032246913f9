"""The bound-curve format: loading, unit conversion, every validation rule."""
from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest

from scan.constants import GW_OMEGA_PREFACTOR_S2, M_SUN_G, YEAR_S
from scan.curves import CurveWarning, load_curve, parse_text
from scan.errors import InputFileError

ROOT = Path(__file__).resolve().parents[1] / "constraints"
SHIPPED = sorted(ROOT.rglob("*.csv"))

UL = """#: bcf_version = 1
#: name = test_ul
#: kind = upper_limit
#: x_quantity = frequency
#: x_unit = Hz
#: y_quantity = omega_gw_h2
#: y_unit = 1
#: y_scale = linear
#: confidence = 0.95
#: synthetic = true
#: citation = test
x,y
10,1e-8
20,2e-8
40,5e-8
"""
DET = """#: bcf_version = 1
#: name = test_det
#: kind = detection
#: x_quantity = frequency
#: x_unit = nHz
#: y_quantity = omega_gw_h2
#: y_unit = 1
#: y_scale = log10
#: interval = 0.68
#: synthetic = true
#: citation = test
x,y,y_lo,y_hi
2,-9.5,-9.8,-9.3
4,-9.2,-9.5,-9.0
"""


def test_upper_limit_loads_with_header_kept():
    c = parse_text(UL, "ul.csv")
    assert c.kind == "upper_limit" and c.confidence == 0.95 and c.likelihood == "step"
    np.testing.assert_allclose(c.x, [10, 20, 40])
    np.testing.assert_allclose(c.y, [1e-8, 2e-8, 5e-8])
    assert c.header[-1] == "x,y" and c.header[0] == "#: bcf_version = 1"
    assert c.synthetic and c.citation == "test"
    with pytest.raises(ValueError):
        c.x[0] = 1.0  # frozen arrays


def test_detection_log10_and_nhz():
    c = parse_text(DET)
    np.testing.assert_allclose(c.x, [2e-9, 4e-9])
    np.testing.assert_allclose(c.y, [10**-9.5, 10**-9.2])
    np.testing.assert_allclose(c.y_lo, [10**-9.8, 10**-9.5])


def _swap(text: str, old: str, new: str) -> str:
    assert old in text
    return text.replace(old, new, 1)


def test_omega_gw_with_h_converts():
    """LVK-style conversion: Omega = 5.8e-9 at h = 0.679 -> h^2 Omega = 2.674e-9
    (constraints.md Sec. 5a, computed)."""
    t = _swap(UL, "y_quantity = omega_gw_h2", "y_quantity = omega_gw\n#: hubble_h = 0.679")
    t = _swap(t, "10,1e-8", "10,5.8e-9")
    assert parse_text(t).y[0] == pytest.approx(2.674e-9, rel=1e-4)


def test_h_c_and_mass_units_convert():
    t = _swap(UL, "y_quantity = omega_gw_h2", "y_quantity = h_c")
    with pytest.warns(CurveWarning, match="exceeds the critical density"):
        c = parse_text(t)  # h_c = 1e-8 at 10 Hz is far above closure: legal but warned
    assert c.y[0] == pytest.approx(GW_OMEGA_PREFACTOR_S2 * 10**2 * 1e-16, rel=1e-12)
    m = (UL.replace("x_quantity = frequency", "x_quantity = mass").replace("x_unit = Hz",
         "x_unit = g").replace("omega_gw_h2", "f_pbh")
         .replace("10,1e-8\n20,2e-8\n40,5e-8", "1e17,0.5\n1e22,0.2"))
    c = parse_text(m)
    # 1e17 g / 1e22 g = 5.029e-17 / 5.029e-12 M_sun (constraints.md Sec. 6; M_sun = 1.98841e33 g)
    np.testing.assert_allclose(c.x, [5.029e-17, 5.029e-12], rtol=1e-4)
    assert M_SUN_G == pytest.approx(1.98841e33, rel=1e-5)


def test_rho_log10_converts_to_omega():
    """rho -> Omega h^2 = 8 pi^4 T f^5 rho^2 / H100^2 (constraints.md Sec. 5b)."""
    t = (DET.replace("y_quantity = omega_gw_h2", "y_quantity = rho\n#: t_obs_yr = 16.03")
         .replace("y_unit = 1", "y_unit = s")
         .replace("2,-9.5,-9.8,-9.3\n4,-9.2,-9.5,-9.0", "2,-6.2,-6.5,-6.0\n4,-6.8,-7.0,-6.6"))
    c = parse_text(t)
    from scan.constants import H100_S
    want = 8 * math.pi**4 * 16.03 * YEAR_S * (2e-9) ** 5 * 10 ** (-12.4) / H100_S**2
    assert c.y[0] == pytest.approx(want, rel=1e-12)


def test_warnings_for_suspicious_input():
    t = (UL.replace("x_quantity = frequency", "x_quantity = mass").replace("x_unit = Hz",
         "x_unit = Msun").replace("omega_gw_h2", "f_pbh").replace("1e-8\n", "2\n")
         + "#: my_private_note = x\n" * 0)
    with pytest.warns(CurveWarning, match="no constraint there"):
        parse_text(t)
    with pytest.warns(CurveWarning, match="unknown key 'observer'"):
        parse_text("#: observer = somebody\n" + UL)


# --- malformed files: (mutation, expected line, text that the message must contain) ---
BAD = {
    "percent_confidence": (lambda t: _swap(t, "confidence = 0.95", "confidence = 95"), 9,
                           "did you mean 0.95?"),
    "unsorted_x": (lambda t: _swap(t, "20,2e-8\n40", "40,2e-8\n20"), 15, "sort or split"),
    "log_marked_linear": (lambda t: _swap(t, "10,1e-8\n20,2e-8\n40,5e-8",
                                          "10,-8\n20,-7.7\n40,-7.3"), 13, "look log10"),
    "linear_marked_log": (lambda t: _swap(t, "y_scale = linear", "y_scale = log10"), 13,
                          "look linear"),
    "mass_unit_for_frequency": (lambda t: _swap(t, "x_unit = Hz", "x_unit = Msun"), 5,
                                "mass unit but x_quantity is 'frequency'"),
    "rho_unit": (lambda t: _swap(t, "y_quantity = omega_gw_h2", "y_quantity = rho\n"
                                 "#: t_obs_yr = 10"), 8, "requires y_unit = s"),
    "missing_hubble_h": (lambda t: _swap(t, "y_quantity = omega_gw_h2",
                                         "y_quantity = omega_gw"), 6, "needs hubble_h"),
    "missing_confidence": (lambda t: _swap(t, "#: confidence = 0.95\n", ""), 3,
                           "needs confidence"),
    "missing_kind": (lambda t: _swap(t, "#: kind = upper_limit\n", ""), None,
                     "missing header key 'kind' (allowed: upper_limit"),
    "unknown_kind": (lambda t: _swap(t, "kind = upper_limit", "kind = upperlimit"), 3,
                     "did you mean 'upper_limit'?"),
    "typo_key": (lambda t: _swap(t, "confidence = 0.95", "confidense = 0.95"), 9,
                 "did you mean 'confidence'?"),
    "too_few_rows": (lambda t: _swap(t, "20,2e-8\n40,5e-8\n", ""), 12,
                     "at least 2 data rows (found 1)"),
    "non_numeric": (lambda t: _swap(t, "20,2e-8", "20,n/a"), 14, "cannot read 'n/a'"),
    "nan_cell": (lambda t: _swap(t, "20,2e-8", "20,nan"), 14, "not a finite number"),
    "x_zero": (lambda t: _swap(t, "10,1e-8", "0,1e-8"), 13, "x must be > 0"),
    "negative_y": (lambda t: _swap(t, "20,2e-8", "20,-2e-8"), 14, "y must be > 0"),
    "wrong_header": (lambda t: _swap(t, "x,y\n", "f,omega\n"), 12, "needs columns x,y"),
    "cell_count": (lambda t: _swap(t, "20,2e-8", "20,2e-8,3"), 14, "row has 3 cells"),
    "no_citation": (lambda t: _swap(_swap(t, "synthetic = true", "synthetic = false"),
                                    "#: citation = test\n", ""), 10, "no citation"),
    "bad_boolean": (lambda t: _swap(t, "synthetic = true", "synthetic = True"), 10,
                    "did you mean 'true'?"),
    "duplicate_key": (lambda t: _swap(t, "#: citation = test", "#: citation = a\n"
                                      "#: citation = b"), 12, "given twice"),
    "meta_after_header": (lambda t: t + "#: label = late\n", 16, "metadata line after"),
    "no_equals": (lambda t: _swap(t, "#: citation = test", "#: citation test"), 11,
                  "has no '='"),
    "no_header": (lambda t: t.split("x,y")[0], None, "no header row"),
    "log10_quantity": (lambda t: _swap(t, "y_quantity = omega_gw_h2",
                                       "y_quantity = log10_rho"), 6, "y_scale = log10"),
    "hubble_percent": (lambda t: _swap(t, "y_quantity = omega_gw_h2", "y_quantity = omega_gw"
                                       "\n#: hubble_h = 67.4"), 7, "did you mean 0.674?"),
    "fpbh_needs_mass": (lambda t: _swap(t, "y_quantity = omega_gw_h2", "y_quantity = f_pbh"),
                        6, "needs x_quantity = mass"),
    "sensitivity_keys": (lambda t: _swap(_swap(t, "kind = upper_limit", "kind = sensitivity"),
                                         "#: confidence = 0.95\n", ""), 3,
                         "needs curve_form and snr_threshold and t_obs_yr"),
    # issue 19 item 7: the name becomes an HDF5 group of grid files and blob names
    "name_separator": (lambda t: _swap(t, "name = test_ul", "name = ../x"), 2,
                       "curve name '../x' contains a path separator"),
    "name_dotdot": (lambda t: _swap(t, "name = test_ul", "name = .."), 2,
                    "curve name '..' names a folder"),
    "soft_needs_width": (lambda t: _swap(t, "#: confidence = 0.95", "#: confidence = 0.95\n"
                                         "#: likelihood = soft_log"), 10, "soft_width_dex"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_malformed_file_gives_clear_error(case, tmp_path):
    mutate, line, needle = BAD[case]
    path = tmp_path / f"{case}.csv"
    path.write_text(mutate(UL), encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurveWarning)
        with pytest.raises(InputFileError) as info:
            load_curve(path)
    err = info.value
    assert needle in str(err), str(err)
    assert err.line == line, str(err)
    assert str(path) in str(err)
    if line is not None:
        assert f"line {line}" in str(err)


def test_detection_ordering_error():
    t = _swap(DET, "4,-9.2,-9.5,-9.0", "4,-9.2,-9.0,-9.5")
    with pytest.raises(InputFileError, match="need y_lo <= y <= y_hi") as info:
        parse_text(t)
    assert info.value.line == 14


def test_column_named_in_cell_error():
    with pytest.raises(InputFileError) as info:
        parse_text(_swap(UL, "20,2e-8", "20,abc"))
    assert info.value.column == "y" and "column 'y'" in str(info.value)


def test_not_utf8_and_missing_file(tmp_path):
    p = tmp_path / "latin.csv"
    p.write_bytes(UL.encode() + b"\xff\xfe")
    with pytest.raises(InputFileError, match="not UTF-8"):
        load_curve(p)
    with pytest.raises(InputFileError, match="cannot read the file"):
        load_curve(tmp_path / "nope.csv")


POSTERIOR = """#: bcf_version = 1
#: name = grid
#: kind = posterior_grid
#: x_quantity = frequency
#: x_unit = nHz
#: y_quantity = omega_gw_h2
#: y_unit = 1
#: y_scale = log10
#: synthetic = true
#: citation = test
x,y,density
2,-10,0.1
2,-9,1.0
2,-8,0.1
4,-10,0.2
4,-9,0.5
"""


def test_posterior_grid_blocks_normalised():
    c = parse_text(POSTERIOR)
    np.testing.assert_allclose(c.x, [2e-9, 4e-9])
    for grid, dens in zip(c.grid_log10_y, c.grid_density):
        assert np.trapezoid(dens, grid) == pytest.approx(1.0, rel=1e-12)
    assert c.y[0] == pytest.approx(1e-9)
    bad = POSTERIOR.replace("4,-10,0.2\n4,-9,0.5\n", "1,-10,0.2\n1,-9,0.5\n")
    with pytest.raises(InputFileError, match="not above the previous bin"):
        parse_text(bad)


@pytest.mark.parametrize("path", SHIPPED, ids=lambda p: p.name)
def test_every_shipped_curve_loads_and_declares_source(path):
    with warnings.catch_warnings():
        warnings.simplefilter("error", CurveWarning)
        c = load_curve(path)
    assert c.synthetic or c.citation
    if "demo" in path.parts:
        assert c.synthetic and "invented for the zetascan demo" in c.citation


def test_demo_scalars_file_loads():
    from scan.curves.scalars import load_scalar_bounds
    spec = load_scalar_bounds(ROOT / "demo" / "scalars.toml")
    assert spec.neff.delta_neff == 0.2 and spec.neff.synthetic
    assert spec.planck2018_pivot and spec.bicep_keck_2021_r
