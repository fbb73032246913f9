"""``zetascan plot`` and the figure builders: every kind from a small result file.

Inputs: a real solve of configs/tmodel_pole.toml (coarse k grid); a real 30-step chain
of the physics posterior on the stand-in surrogate of tests/test_sampler_posterior.py
(its ``trained`` fixture, a TEST DOUBLE of the exact solver); and a SYNTHETIC grid file
written below in the layout of ``zetascan grid`` (made-up verdicts, labelled synthetic).
"""
from __future__ import annotations

import dataclasses
import itertools
import math
import struct
from pathlib import Path

import h5py
import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.colors import to_rgba
from scipy.stats import norm
from test_sampler_posterior import trained  # noqa: F401  (fixture: the stand-in surrogate)
from test_surrogate_standin import LIMIT, standin_log10_peak

from scan import store
from scan.cli import main
from scan.plots.exclusion import exclusion_figure
from scan.plots.grid_data import read_grid
from scan.plots.inputs import Inputs
from scan.plots.levels import CREDIBLE_MASS, histogram2d, mass_thresholds
from scan.plots.make import BUILDERS
from scan.plots.sources import resolve, supported_kinds
from scan.pool import choose_pool
from scan.sampler import run_chain
from scan.sampler.bands import (PERCENTILES, chain_target, draw_indices, percentile_bands,
                                posterior_bands)
from scan.sampler.summary import posterior_samples

ROOT = Path(__file__).resolve().parents[1]
DEMO = sorted(str(p) for p in (ROOT / "constraints" / "demo").glob("*.csv"))
LISA = str(ROOT / "constraints" / "lisa_pli_snr10_4yr.csv")
DPI = 200  # scan.plots.style.save
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


# --------------------------------------------------------------------------- helpers
def png_size_in(path: Path) -> tuple[float, float]:
    """Width and height [in] of a PNG written at DPI (from its IHDR chunk)."""
    data = path.read_bytes()
    assert data[:8] == PNG_MAGIC, path
    width, height = struct.unpack(">II", data[16:24])
    return width / DPI, height / DPI


def assert_figure_files(paths: list[Path], max_width_in: float) -> None:
    """Non-empty PDF + PNG pairs; PNGs no wider than ``max_width_in``."""
    pngs = [p for p in paths if p.suffix == ".png"]
    assert pngs and len(paths) == 2 * len(pngs)
    for png in pngs:
        pdf = png.with_suffix(".pdf")
        assert pdf.read_bytes()[:5] == b"%PDF-" and pdf.stat().st_size > 2000
        assert png.stat().st_size > 5000
        width, height = png_size_in(png)
        assert width <= max_width_in and 0.25 * width < height < 2.0 * width, (png, width)


def printed_paths(text: str) -> list[Path]:
    return [Path(line.split("figure: ", 1)[1]) for line in text.splitlines()
            if line.startswith("figure: ")]


def legend_texts(fig) -> list[str]:
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    return [t.get_text() for legend in legends for t in legend.get_texts()]


def secondary_labels(ax) -> list[str]:
    return [child.get_xlabel() for child in ax.child_axes]


# --------------------------------------------------------------------------- result files
@pytest.fixture(scope="module")
def solve_file(tmp_path_factory) -> Path:
    """A real solve of the T-model with one pole (coarse k grid, no solve figures)."""
    out = tmp_path_factory.mktemp("plot_solve") / "pole.h5"
    assert main(["solve", str(ROOT / "configs" / "tmodel_pole.toml"), "--out", str(out),
                 "--set", "modes.n_k=32", "--no-figures"]) == 0
    return out


@pytest.fixture(scope="module")
def run_folder(trained) -> Path:  # noqa: F811
    """A 30-step posterior chain in <output_dir>/standin/chain.h5 (the run-folder layout)."""
    tmp, cfg, plan = trained
    plan = dataclasses.replace(plan, path=tmp / "standin" / "chain.h5")
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool, restart=True)
    assert len(posterior_samples(plan.path)["samples"]) >= 40
    return plan.path.parent


def write_synthetic_grid(path: Path, config_text: str, x_key: str = "model.poles[0].width",
                         missing: int = 3) -> Path:
    """SYNTHETIC test data in the layout of ``zetascan grid``: a 24 x 20 scan over the pole
    width (log) and alpha, whose verdicts are made-up cuts on the stand-in's log10 P_peak
    (tests/test_surrogate_standin.py) — not the output of any likelihood."""
    x, y = np.geomspace(0.01, 0.03, 24), np.linspace(0.5, 2.0, 20)
    W, A = np.meshgrid(x, y)
    log_p = standin_log10_peak(np.column_stack([W.ravel(), np.full(W.size, 1.6),
                                                A.ravel()])).reshape(W.shape)
    valid = log_p < math.log10(LIMIT)
    done = np.ones(W.shape, bool)
    done[-1, -missing:] = False  # a grid still being written
    cuts = {"ul": ("upper_limit", "Heron-like UL (synthetic)", log_p > -1.6),
            "fpbh": ("pbh", "f_PBH bounds (synthetic)", log_p > -1.3),
            "ns": ("prior", "n_s prior (synthetic)", A > 1.8),
            "neff": ("neff", "N_eff bound (synthetic)", np.zeros(W.shape, bool))}
    with h5py.File(path, "w") as handle:
        store.write_attrs(handle, store.provenance(config_text, 1))
        store.write_config(handle, config_text)
        g = handle.create_group("grid")
        store.write_attrs(g, {"x_key": x_key, "y_key": "model.alpha",
                              "x_label": r"pole width $w$ [$M_p$]", "y_label": r"$\alpha$",
                              "x_scale": "log", "y_scale": "linear", "source": "synthetic",
                              "profile": "none"})
        store.write_dataset(g, "x", x, "M_p")
        store.write_dataset(g, "y", y, "1")
        store.write_dataset(g, "done", done, "1")
        store.write_dataset(g, "valid", valid & done, "1")
        reason = g.create_dataset("reason", data=np.where(valid, 0, 3).astype(np.int16))
        reason.attrs["units"], reason.attrs["reason_names"] = "1", ["ok", "", "", "invalid"]
        p_peak = np.where(valid & done, 10.0 ** log_p, np.nan)
        for name, values, units in (("k_peak", np.full(W.shape, 1e6), "Mpc^-1"),
                                    ("P_peak", p_peak, "1"), ("f_pbh_total", p_peak, "1"),
                                    ("f_gw_peak", np.full(W.shape, 1e-9), "Hz"),
                                    ("omega_gw_h2_peak", p_peak ** 2, "1"),
                                    ("log_like", -log_p, "1")):
            store.write_dataset(g, name, values, units)
        terms = g.create_group("terms")
        for name, (kind, label, cut) in cuts.items():
            t = terms.create_group(name)
            store.write_attrs(t, {"kind": kind, "label": label})
            status = np.where(cut, 1, 0)
            store.write_dataset(t, "status", np.where(valid & done, status, -1).astype(np.int8),
                                "1")
            store.write_dataset(t, "log_like", np.where(cut, -50.0, 0.0), "1")
        t = terms.create_group("lisa")
        store.write_attrs(t, {"kind": "sensitivity", "label": "LISA-like (synthetic)",
                              "snr_threshold": 10.0})
        snr = 10.0 ** (2.0 * (log_p + 1.9)) * 10.0
        status = np.where(snr >= 10.0, 2, 3)
        store.write_dataset(t, "status", np.where(valid & done, status, -1).astype(np.int8), "1")
        store.write_dataset(t, "snr", snr, "1")
        store.write_dataset(t, "log_like", np.zeros(W.shape), "1")
    return path


@pytest.fixture(scope="module")
def grid_file(run_folder) -> Path:
    with h5py.File(run_folder / "chain.h5", "r") as handle:
        config_text = handle["config"][()].decode()
    return write_synthetic_grid(run_folder / "grid.h5", config_text)


# --------------------------------------------------------------------------- pure parts
def test_band_percentiles_of_gaussian_scattered_power_laws():
    """log10 y_i = a_i + 2 log10 f with a_i ~ N(mu, s): at every f the p-th percentile of
    log10 y is mu + 2 log10 f + s Phi^-1(p) (normal quantiles), within 5 asymptotic standard
    errors s sqrt(p(1-p)/N) / phi(z_p) of a sample quantile (common practice)."""
    rng = np.random.default_rng(11)
    n, mu, s = 6000, -10.0, 0.5
    a = rng.normal(mu, s, n)
    xs = [np.geomspace(10 ** rng.uniform(-9.0, -8.5), 10 ** rng.uniform(-6.5, -6.0),
                       int(rng.integers(8, 40))) for _ in range(n)]  # each on its own grid
    ys = [10.0 ** (ai + 2.0 * np.log10(x)) for ai, x in zip(a, xs)]
    grid = np.geomspace(10 ** -8.5, 10 ** -6.5, 30)
    bands = percentile_bands(xs, ys, grid, floor=1e-40)
    assert bands.n_samples == n and bands.values.shape == (5, 30)
    for p in PERCENTILES:
        q = p / 100.0
        z = norm.ppf(q)
        expected = mu + 2.0 * np.log10(grid) + s * z
        se = s * math.sqrt(q * (1 - q) / n) / norm.pdf(z)
        assert np.max(np.abs(np.log10(bands.percentile(p)) - expected)) < 5 * se, p
    assert np.all(np.diff(bands.values, axis=0) > 0)  # 2.5 < 16 < 50 < 84 < 97.5


def test_band_floor_is_exact_above_it_and_out_of_range_counts_at_it():
    rng = np.random.default_rng(3)
    x = np.geomspace(1.0, 10.0, 5)
    a = rng.normal(-20.0, 1.0, 999)
    ys = [np.full(5, 10.0 ** ai) for ai in a]
    bands = percentile_bands([x] * len(ys), ys, x, floor=1e-20)
    # clipping is monotone: percentiles above the floor are those of the unclipped values
    for p in (84.0, 97.5):
        assert np.allclose(np.log10(bands.percentile(p)), np.percentile(a, p), rtol=0,
                           atol=1e-12)
    assert np.all(bands.percentile(2.5) == 1e-20) and np.all(bands.percentile(16.0) == 1e-20)
    # 6 curves cover all of [1, 100], 4 only [1, 10]: beyond 10 those 4 count at the floor
    short, full = np.geomspace(1.0, 10.0, 4), np.geomspace(1.0, 100.0, 7)
    xs = [full] * 6 + [short] * 4
    ys = [np.full(7, 1e-10)] * 6 + [np.full(4, 1e-10)] * 4
    grid = np.array([2.0, 50.0])
    b = percentile_bands(xs, ys, grid, floor=1e-30)
    assert np.all(b.median == 1e-10) and b.percentile(16.0)[0] == 1e-10
    assert b.percentile(16.0)[1] == 1e-30 and b.percentile(97.5)[1] == 1e-10
    assert list(b.coverage) == [1.0, 0.6]  # beyond 10 the percentiles are lower bounds
    # on a shared grid, exact zeros mark "not computed" (zeros_unknown): same values,
    # same coverage as the short abscissae above
    zeros = [np.full(7, 1e-10)] * 6 + [np.where(full <= 10.0, 1e-10, 0.0)] * 4
    z = percentile_bands([full] * 10, zeros, grid, floor=1e-30, zeros_unknown=True)
    assert np.array_equal(z.values, b.values) and list(z.coverage) == [1.0, 0.6]
    assert list(percentile_bands([full] * 10, zeros, grid, floor=1e-30).coverage) == [1, 1]
    with pytest.raises(ValueError, match="floor"):
        percentile_bands(xs, ys, grid, floor=0.0)


def test_mass_levels_of_a_2d_gaussian_are_discs_of_the_right_area():
    """The highest-density region of mass m of a 2-D standard normal is the disc
    r^2 = -2 ln(1 - m) (area pi r^2; common practice): 7.16 for 68 %, 18.8 for 95 %."""
    rng = np.random.default_rng(5)
    x, y = rng.standard_normal((2, 400000))
    hist = histogram2d(x, y, bins=80, ranges=((-5, 5), (-5, 5)), smooth=0.0)
    assert hist.fractions == CREDIBLE_MASS == (0.68, 0.95)
    cell = (10.0 / 80) ** 2
    for m, t in zip(hist.fractions, hist.thresholds):
        inside = hist.density >= t
        assert hist.density[inside].sum() >= m > hist.density[inside].sum() - t
        assert inside.sum() * cell == pytest.approx(-2 * math.pi * math.log(1 - m), rel=0.03)
    assert hist.thresholds[0] > hist.thresholds[1]
    assert list(mass_thresholds(np.array([[4.0, 3.0], [2.0, 1.0]]), (0.5, 0.95))) == [3.0, 1.0]


# --------------------------------------------------------------------------- solve result
def test_solve_result_all_figures_from_the_command_line(solve_file, tmp_path, capsys):
    assert main(["plot", str(solve_file), "--out", str(tmp_path / "figs"),
                 "--curves", *DEMO, LISA]) == 0
    paths = printed_paths(capsys.readouterr().out)
    names = sorted(p.name for p in paths)
    assert names == sorted(f"pole_{k}.{e}" for k in ("spectrum", "model", "omega_gw", "f_pbh")
                           for e in ("pdf", "png"))
    column = [p for p in paths if "model" not in p.name]
    assert_figure_files(column, max_width_in=3.6)  # one journal column (3.4 in)
    assert_figure_files([p for p in paths if "model" in p.name], max_width_in=7.2)


def test_solve_figures_have_units_and_name_every_curve(solve_file):
    inputs = Inputs(resolve(solve_file), tuple(DEMO + [LISA]))
    assert supported_kinds(inputs.sources) == ("spectrum", "model", "gw", "pbh")
    fig = BUILDERS["gw"]["omega_gw"](inputs)
    ax = fig.axes[0]
    assert "[Hz]" in ax.get_xlabel() and r"\Omega_{\rm GW}" in ax.get_ylabel()
    assert any(r"[$M_\odot$]" in label for label in secondary_labels(ax))  # f -> M_H axis
    texts = legend_texts(fig)
    gw_curves = [c for c in inputs.curves if c.y_quantity == "omega_gw_h2"]
    assert len(gw_curves) == 4
    for curve in gw_curves:
        assert any(t.startswith(curve.label) for t in texts), (curve.label, texts)
    assert "this model" in texts
    top = ax.child_axes[0]  # the mass axis is the horizon mass at re-entry of k = 2 pi f / c
    from scan.observables.cosmo import horizon_mass_of_f
    assert top._functions[0](np.array([1e-8]))[0] == pytest.approx(
        float(horizon_mass_of_f(1e-8)), rel=1e-12)
    plt.close(fig)
    fig = BUILDERS["pbh"]["f_pbh"](inputs)
    ax = fig.axes[0]
    assert r"[$M_\odot$]" in ax.get_xlabel() and "[g]" in secondary_labels(ax)[0]
    texts = legend_texts(fig)
    assert sum(t.startswith(("evaporation", "microlensing", "accretion")) for t in texts) == 3
    plt.close(fig)
    fig = BUILDERS["spectrum"]["spectrum"](inputs)
    assert "Mpc" in fig.axes[0].get_xlabel()
    plt.close(fig)


def test_a_kind_the_file_cannot_make_exits_2_naming_the_kinds(solve_file, tmp_path, capsys):
    assert main(["plot", str(solve_file), "--kind", "corner", "exclusion"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cannot make corner, exclusion" in err[0]
    assert "support: spectrum, model, gw, pbh" in err[0] and str(solve_file) in err[0]
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as handle:
        handle.create_group("something")
    assert main(["plot", str(other)]) == 2
    assert "not a zetascan solve, chain or grid file" in capsys.readouterr().err
    assert main(["plot", str(tmp_path / "missing.h5")]) == 2
    assert "no such file" in capsys.readouterr().err


# --------------------------------------------------------------------------- chain
def test_posterior_bands_are_reproducible_and_bounded_by_the_samples_peaks(run_folder):
    chain = run_folder / "chain.h5"
    target = chain_target(chain)  # rebuilt from the chain's stored config
    first = posterior_bands(chain, 60, seed=4, target=target)
    again = posterior_bands(chain, 60, seed=4, target=target)
    assert np.array_equal(first.gw.values, again.gw.values) and first.used == 60
    post = posterior_samples(chain)
    assert first.available == len(post["samples"])
    drawn = post["blobs"][draw_indices(len(post["samples"]), 60, 4)]
    # Omega_i(f) <= max_f Omega_i for every sample, so every percentile curve lies below
    # the same percentile of the samples' peak heights (quantiles are monotone)
    for p in PERCENTILES:
        assert first.gw.percentile(p).max() <= np.percentile(drawn["omega_gw_h2_peak"], p) \
            * (1 + 1e-9)
    assert first.gw.x.min() < drawn["f_gw_peak"].min() <= drawn["f_gw_peak"].max() \
        < first.gw.x.max()
    assert first.gw.median.max() > 1e3 * first.gw.floor  # the band is not all floor
    assert np.all(np.diff(first.pbh.values, axis=0) >= 0)
    other = posterior_bands(chain, 60, seed=5, target=target)
    assert not np.array_equal(first.gw.values, other.gw.values)


def test_run_folder_all_figures_and_corner_levels(run_folder, capsys, monkeypatch):
    import corner

    calls = []
    original = corner.corner

    def spy(*args, **kwargs):
        calls.append(kwargs)
        return original(*args, **kwargs)

    monkeypatch.setattr(corner, "corner", spy)
    assert main(["plot", str(run_folder), "--samples", "60"]) == 0
    out = capsys.readouterr().out
    paths = printed_paths(out)
    assert sorted(p.name for p in paths if p.suffix == ".png") == [
        "standin_corner.png", "standin_f_pbh.png", "standin_lnp_trace.png",
        "standin_omega_gw.png"]
    assert all(p.parent == run_folder for p in paths)
    assert_figure_files(paths, max_width_in=7.2)
    assert png_size_in(run_folder / "standin_omega_gw.png")[0] <= 3.6
    assert "bands: 60 of 60 drawn samples" in out
    assert len(calls) == 1 and calls[0]["levels"] == (0.68, 0.95)  # mass, not sigma, levels


def test_chain_figures_state_levels_and_band_legends(run_folder):
    inputs = Inputs(resolve(run_folder), tuple(DEMO), samples=40)
    assert supported_kinds(inputs.sources) == ("gw", "pbh", "corner", "trace", "bands")
    fig = BUILDERS["corner"]["corner"](inputs)
    text = " ".join(t.get_text() for t in fig.texts)
    assert "68 % and 95 % of the 2-D posterior mass" in text and "burn-in" in text
    labels = [ax.get_xlabel() for ax in fig.axes if ax.get_xlabel()]
    assert any(r"$\log_{10}$(model.poles[0].width / $M_p$)" == lab for lab in labels), labels
    assert "model.poles[0].position [$M_p$]" in labels
    plt.close(fig)
    fig = BUILDERS["bands"]["omega_gw"](inputs)
    texts = legend_texts(fig)
    assert any(t.startswith("posterior: median") and t.endswith("68 %, 95 %") for t in texts)
    assert "this model" not in texts
    plt.close(fig)


# --------------------------------------------------------------------------- grid
def test_exclusion_map_from_a_grid_with_the_posterior(grid_file, run_folder, tmp_path, capsys):
    assert main(["plot", str(grid_file), "--kind", "exclusion", "--chain", str(run_folder),
                 "--out", str(tmp_path)]) == 0
    paths = printed_paths(capsys.readouterr().out)
    assert [p.name for p in paths] == ["standin_exclusion.png", "standin_exclusion.pdf"]
    assert_figure_files(paths, max_width_in=3.6)
    inputs = Inputs(resolve(grid_file, run_folder))
    assert "exclusion" in supported_kinds(inputs.sources)
    fig = BUILDERS["exclusion"]["exclusion"](inputs)
    texts = legend_texts(fig)
    assert texts[:2] == ["invalid model", "not computed (3 of 480 points)"]
    assert {"Heron-like UL (synthetic): excluded",
            r"$f_{\rm PBH}$ bounds (synthetic): excluded",
            r"$n_s$ prior (synthetic): disfavoured",
            "LISA-like (synthetic): detectable (SNR ≥ 10)", "posterior 68 %",
            "posterior 95 %"} == set(texts[2:])
    # a constraint with nothing to draw has no legend entry; the legend's title names it
    assert fig.legends[0].get_title().get_text().splitlines() == [
        "ticks on an outline point into the region it rules out",
        r"excluding no grid point: $N_{\rm eff}$ bound (synthetic)"]
    ax = fig.axes[0]
    assert ax.get_xscale() == "log" and "[$M_p$]" in ax.get_xlabel()
    plt.close(fig)


def test_a_chain_over_other_axes_is_refused(run_folder, tmp_path, capsys):
    with h5py.File(run_folder / "chain.h5", "r") as handle:
        text = handle["config"][()].decode()
    grid = write_synthetic_grid(tmp_path / "grid.h5", text, x_key="model.exponent")
    assert main(["plot", str(grid), "--chain", str(run_folder), "--kind", "exclusion"]) == 2
    err = capsys.readouterr().err
    assert "no parameter or derived quantity 'model.exponent'" in err and "chain.h5" in err
    assert main(["plot", str(grid), "--kind", "corner"]) == 2
    assert "support: exclusion" in capsys.readouterr().err


# --------------------------------------------------------------------------- referee checks
def drawn_texts(fig) -> list:
    """Every text the figure draws: titles, axis labels, drawn tick labels, offset texts,
    annotations, figure texts, legend entries and titles."""
    fig.canvas.draw()
    texts = list(fig.texts)
    for ax in fig.axes + [c for a in fig.axes for c in a.child_axes]:
        texts += [ax.title, ax._left_title, ax._right_title] + list(ax.texts)
        for axis in (ax.xaxis, ax.yaxis):
            texts += [axis.label, axis.get_offset_text()]
            for tick in axis._update_ticks():  # the ticks inside the view (drawn)
                texts += [tick.label1, tick.label2]
    for legend in list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]:
        texts += list(legend.get_texts()) + [legend.get_title()]
    return [t for t in texts if t.get_visible() and t.get_text().strip()]


def overlapping_texts(fig) -> list[tuple[str, str]]:
    """Pairs of drawn texts whose boxes overlap by more than one pixel each way."""
    renderer = fig.canvas.get_renderer()
    boxes = [(t.get_text(), t.get_window_extent(renderer).padded(-1.0))
             for t in drawn_texts(fig)]
    return [(a, b) for (a, box_a), (b, box_b) in itertools.combinations(boxes, 2)
            if box_a.overlaps(box_b)]


def visible_in(ax, x, y) -> bool:
    """Independent of the figure code: does a curve have a point inside ``ax``'s view?"""
    (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
    x, y = np.asarray(x, float), np.asarray(y, float)
    return bool(np.any((x >= x0) & (x <= x1) & (y >= y0) & (y <= y1)))


def test_demo_like_figures_draw_no_overlapping_text(solve_file, run_folder, grid_file):
    solve = Inputs(resolve(solve_file), tuple(DEMO + [LISA]))
    chain = Inputs(resolve(run_folder), tuple(DEMO), samples=40)
    grid = Inputs(resolve(grid_file, run_folder))
    figures = {"omega_gw": BUILDERS["gw"]["omega_gw"](solve),
               "f_pbh": BUILDERS["pbh"]["f_pbh"](solve),
               "bands": BUILDERS["bands"]["omega_gw"](chain),
               "corner": BUILDERS["corner"]["corner"](chain),
               "trace": BUILDERS["trace"]["lnp_trace"](chain),
               "exclusion": BUILDERS["exclusion"]["exclusion"](grid)}
    for name, fig in figures.items():
        assert overlapping_texts(fig) == [], name
        plt.close(fig)


def test_gw_legend_names_exactly_the_curves_that_show(solve_file):
    inputs = Inputs(resolve(solve_file), tuple(DEMO + [LISA]))
    fig = BUILDERS["gw"]["omega_gw"](inputs)
    main_ax, pta_ax = fig.axes[0], fig.axes[1]  # the PTA panel: pulsar-timing curves given
    assert "pulsar-timing" in pta_ax.get_xlabel()
    texts = legend_texts(fig)
    assert len(texts) == len(set(texts)) and not any("SNR" in t for t in texts if "noise" in t)
    for curve in (c for c in inputs.curves if c.y_quantity == "omega_gw_h2"):
        shows = any(visible_in(ax, curve.x, curve.y) for ax in (main_ax, pta_ax))
        named = any(t.startswith(curve.label) for t in texts)
        assert shows == named, (curve.label, shows, named)
    assert texts[0] == "this model"
    plt.close(fig)


def test_band_entries_only_when_the_band_shows(run_folder):
    inputs = Inputs(resolve(run_folder), tuple(DEMO), samples=40)
    for kind, bands in (("omega_gw", inputs.bands.gw), ("f_pbh", inputs.bands.pbh)):
        fig = BUILDERS["bands"][kind](inputs)
        ax = fig.axes[0]
        shows = visible_in(ax, bands.x, bands.percentile(97.5))
        assert shows == any(t.startswith("posterior: median") for t in legend_texts(fig)), kind
        plt.close(fig)
    # the f_PBH peaks of the drawn samples are resolved (scan.sampler.bands.PEAK_POINTS)
    assert inputs.bands.peak_points >= 15


def test_exclusion_legend_matches_the_grid(grid_file):
    grid = read_grid(grid_file)
    blind = tuple(dataclasses.replace(t, status=np.where(t.status == 2, 3, t.status))
                  if t.kind == "sensitivity" else t for t in grid.terms)
    for data, detectable in ((grid, True), (dataclasses.replace(grid, terms=blind), False)):
        fig = exclusion_figure(data)
        legend = fig.legends[0]
        texts = [t.get_text() for t in legend.get_texts()]
        assert any("detectable" in t for t in texts) == detectable
        assert ("detecting no grid point: LISA-like (synthetic)" in
                legend.get_title().get_text()) == (not detectable)
        drawn = {tuple(np.round(c, 3)) for coll in fig.axes[0].collections
                 for c in list(coll.get_edgecolor()) + list(coll.get_facecolor())}
        for handle in legend.legend_handles:  # every key has a drawn artist of its colour
            colour = handle.get_color() if hasattr(handle, "get_color") else \
                handle.get_edgecolor()
            key = tuple(np.round(to_rgba(colour), 3))
            key_face = tuple(np.round(to_rgba(getattr(handle, "get_facecolor",
                                                      lambda: "none")()), 3))
            assert key in drawn or key_face in drawn, handle
        plt.close(fig)
