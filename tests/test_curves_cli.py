"""``zetascan curves check | plot | sensitivity`` through the real dispatcher."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

import scan.cli as cli
from scan.curves import load_curve

ROOT = Path(__file__).resolve().parents[1] / "constraints"
ALL_CSV = sorted(ROOT.rglob("*.csv"))


@pytest.fixture
def zetascan(monkeypatch):
    """``scan.cli.main`` with only the curves verb registered (other verbs are other
    engineers' work in progress and must not break these tests)."""
    monkeypatch.setattr(cli, "VERBS", ("curves",))
    return cli.main


def test_curves_in_verbs_tuple():
    assert "curves" in cli.VERBS


def test_check_prints_one_line_per_file(zetascan, capsys):
    assert zetascan(["curves", "check", *map(str, ALL_CSV)]) == 0
    out = capsys.readouterr().out.strip().splitlines()
    assert len([l for l in out if l.startswith("ok  ")]) == len(ALL_CSV)


def test_check_bad_file_exits_2_with_message(zetascan, capsys, tmp_path):
    bad = tmp_path / "bad.csv"
    text = (ROOT / "demo" / "ground_upper_limit_heron.csv").read_text()
    bad.write_text(re.sub(r"(#: confidence\s*=) 0\.95", r"\1 95", text))
    assert text != bad.read_text()
    assert zetascan(["curves", "check", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "bad.csv: line" in err and "did you mean 0.95?" in err and "Traceback" not in err


def test_plot_every_shipped_curve(zetascan, tmp_path, capsys):
    stem = tmp_path / "fig" / "curves"
    assert zetascan(["curves", "plot", *map(str, ALL_CSV), "--out", str(stem)]) == 0
    for suffix in (".pdf", ".png"):
        assert stem.with_suffix(suffix).stat().st_size > 1000


def test_legend_names_each_curve():
    from scan.plots.curves import curves_figure
    curves = [load_curve(p) for p in ALL_CSV]
    fig = curves_figure(curves)
    texts = [t.get_text() for ax in fig.axes for t in ax.get_legend().get_texts()]
    for c in curves:
        assert any(t.startswith(c.label) for t in texts), c.label


def test_sensitivity_reproduces_shipped_file(zetascan, tmp_path):
    out = tmp_path / "lisa.csv"
    assert zetascan(["curves", "sensitivity", "--snr", "10", "--years", "4", "--out",
                     str(out)]) == 0
    assert out.read_text() == (ROOT / "lisa_pli_snr10_4yr.csv").read_text()
    c = load_curve(out)
    assert c.kind == "sensitivity" and c.snr_threshold == 10.0
    assert c.y.min() == pytest.approx(8.33e-14, rel=0.01)  # constraints.md Sec. 3.3


def test_sensitivity_options(zetascan, tmp_path):
    one = tmp_path / "one.csv"
    assert zetascan(["curves", "sensitivity", "--snr", "1", "--years", "1", "--confusion",
                     "--out", str(one)]) == 0
    # SNR 1, T = 1 yr, with confusion noise: PLI minimum 2.00e-14 (Sec. 3.3, computed)
    assert load_curve(one).y.min() == pytest.approx(2.00e-14, rel=0.02)
    assert zetascan(["curves", "sensitivity", "--confusion", "--years", "3", "--out",
                     str(tmp_path / "x.csv")]) == 2
