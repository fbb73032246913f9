"""The documentation that must follow the code: the methods bibliography (generated from
the arXiv ids the code cites), the troubleshooting page (every invalid-model reason),
CITATION.cff (valid, same version and licence as the package) and the tutorial."""
from __future__ import annotations

import importlib.util
import re
import sys
import tomllib
from pathlib import Path
from types import SimpleNamespace

import yaml

from scan.posterior.reasons import REASONS

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"


def _tool(name: str):
    spec = importlib.util.spec_from_file_location(name, ROOT / "tests" / "tools" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault(name, module)  # dataclasses look their module up by name
    spec.loader.exec_module(module)
    return module


def test_the_bibliography_is_generated_from_the_code_and_up_to_date():
    bib = _tool("bibliography")
    ids = bib.cited()
    assert len(ids) >= 30 and set(ids) <= set(bib.REFERENCES)
    assert (DOCS / "bibliography.md").read_text(encoding="utf-8") == bib.render(), \
        "run: python tests/tools/bibliography.py --write"
    assert set(bib.REFERENCES) == set(ids), "REFERENCES holds ids the code no longer cites"


#: Where the solver's invalid-model reasons are written (the stage's own texts).
REASON_SOURCES = ("scan/background/solve.py", "scan/background/pivot.py",
                  "scan/modes/spectrum.py")
#: Calls and assignments whose string argument is a reason text.
REASON_TEXT = re.compile(r"(?:_invalid\(model, N_start, |why = \(?|invalid_spectrum\(|"
                         r"_invalid_pivot\(|return False, \(?|return \(?)f?\"([a-zA-Z][^\"{]*)")


def solver_reason_heads() -> set[str]:
    """The fixed beginning of every reason text the solver stages can give."""
    heads = set()
    for name in REASON_SOURCES:
        text = (ROOT / name).read_text(encoding="utf-8")
        for match in REASON_TEXT.finditer(text):
            head = match.group(1).strip()
            if len(head) > 8 and " " in head:  # a sentence, not an identifier
                heads.add(head)
    return heads


def test_troubleshooting_explains_every_invalid_model_reason():
    page = (DOCS / "troubleshooting.md").read_text(encoding="utf-8")
    for name in REASONS:
        assert f"`{name}`" in page, name
    heads = solver_reason_heads()
    assert len(heads) >= 15, heads
    missing = [h for h in sorted(heads) if h.rstrip(":(= ").lower() not in page.lower()]
    assert not missing, f"docs/troubleshooting.md lacks: {missing}"


def test_citation_file_is_valid_and_matches_the_package():
    cff = yaml.safe_load((ROOT / "CITATION.cff").read_text(encoding="utf-8"))
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    assert cff["cff-version"] == "1.2.0" and cff["type"] == "software"
    assert cff["version"] == project["version"] and cff["license"] == project["license"]
    assert cff["authors"] and cff["title"].startswith("zetascan") and cff["message"]
    assert "bibliography" in cff["message"]


def test_the_tutorial_config_and_plugin_are_the_ones_it_shows(monkeypatch):
    """docs/tutorial/pole_plugin.toml loads from any folder, names its curves relative to
    itself, and its plug-in potential is the alpha = 1 T-model it says it is (the built-in
    family V/V0 = tanh^2(phi/sqrt(6 alpha)), Kallosh & Linde 2013, arXiv:1306.5220, from
    memory); both are closed forms in double precision, so they agree to rounding."""
    import numpy as np

    from scan.config import load_config
    from scan.likelihood.from_config import curve_paths_of
    from scan.models import model_from_section

    monkeypatch.syspath_prepend(str(DOCS / "tutorial"))
    monkeypatch.chdir(ROOT.parent)
    config = load_config(DOCS / "tutorial" / "pole_plugin.toml")
    assert all(Path(p).is_file() for p in curve_paths_of(config))
    text = (DOCS / "tutorial.md").read_text(encoding="utf-8")
    for verb in ("solve", "train", "grid", "plot"):
        assert f"$ zetascan {verb} docs/tutorial/pole_plugin.toml" in text or \
            f"$ zetascan {verb} results/pole_plugin" in text, verb
    plugin = model_from_section(config.model)
    builtin = model_from_section(load_config(ROOT / "configs" / "tmodel_pole.toml").model)
    phi = np.linspace(0.5, 7.0, 50)
    assert np.allclose(plugin.V(phi), builtin.V(phi), rtol=1e-13, atol=0)
    assert np.allclose(plugin.dV(phi), builtin.dV(phi), rtol=1e-13, atol=0)


def _lognormal_stand_in(regime, ln_k0: float, sigma: float, tool):
    """A made-up solve of ``regime``: P_ζ a log-normal in k of width ``sigma`` (e-folds),
    Ω_GW h² the same shape on f = ck/2π; no solver runs."""
    import astropy.units as u
    import numpy as np

    from scan.observables import cosmo

    k = np.logspace(-2, 16, 721)
    P = 1e-2 * np.exp(-((np.log(k) - ln_k0) ** 2) / (2 * sigma**2)) + 2e-9
    observables = SimpleNamespace(f_hz=cosmo.k_to_f(k), omega_gw_h2=1e-8 * P)
    solution = SimpleNamespace(k=k / u.Mpc, P_zeta=P * u.one,
                               scalars={"P_peak": P.max() * u.one, "n_s": 0.96 * u.one},
                               record=SimpleNamespace(observables=observables))
    return tool.Found(regime, None, "", solution)


def test_the_regimes_figure_draws_three_powers_with_units_and_their_legend_first():
    """tests/tools/regimes_figure.py (docs/regimes.png) on stand-in spectra: two panels
    with k in Mpc^-1 and f in Hz, one line per power in each, the powers' legend entries
    in the first legend row.  ``decades_within`` of a log-normal of width σ (e-folds):
    P > P_max/10 where |ln k − ln k0| < σ √(2 ln 10), i.e. 2σ √(2 ln 10)/ln 10 decades
    (algebra), to within the grid's spacing of 0.025 decades at either end."""
    import numpy as np

    from scan.curves import load_curve

    tool = _tool("regimes_figure")
    found = [_lognormal_stand_in(r, 10.0 + 5 * i, 1.0 + i, tool)
             for i, r in enumerate(tool.REGIMES)]
    curves = [load_curve(ROOT / c) for c in tool.CURVES]
    fig = tool.regimes_figure(found, curves)
    left, right = fig.axes[:2]
    assert "Mpc" in left.get_xlabel() and "Hz" in right.get_xlabel()
    powers = [f"$p = {r.power:g}$" for r in tool.REGIMES]
    assert [ln.get_label().split(":")[0] for ln in left.get_lines()
            if ln.get_label().startswith("$p")] == powers
    assert sum(ln.get_linestyle() in ("--", "-", "-.") and ln.get_color() in
               [r.colour for r in tool.REGIMES] for ln in right.get_lines()) == 3
    texts = [t.get_text() for t in fig.legends[0].get_texts()]
    assert len(texts) == 2 * len(powers)  # 3 columns filled column by column:
    assert [t.split(":")[0] for t in texts[0::2]] == powers  # entries 0, 2, 4 = row 1
    for i, item in enumerate(found):
        decades = tool.decades_within(item.solution.k.value, item.solution.P_zeta.value)
        sigma = 1.0 + i
        assert abs(decades - 2 * sigma * np.sqrt(2 * np.log(10)) / np.log(10)) <= 0.05
