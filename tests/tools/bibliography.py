"""Print (or, with ``--write``, refresh) docs/bibliography.md from the arXiv ids the code cites.

Every ``arXiv:NNNN.NNNNN`` and old-style ``astro-ph/NNNNNNN`` (gr-qc, hep-ph, hep-th) id
in ``scan/`` becomes one entry, with the files that cite it; the reference details come
from :data:`REFERENCES` below, so an id the code starts citing without an entry fails
``tests/test_docs.py`` until one is added::

    python tests/tools/bibliography.py --write
"""
from __future__ import annotations

import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PACKAGE = ROOT / "scan"
OUT = ROOT / "docs" / "bibliography.md"
ID = re.compile(r"arXiv:(\d{4}\.\d{4,5})|\b((?:astro-ph|gr-qc|hep-ph|hep-th)/\d{7})")

#: id -> (authors, year, title, journal, checked).  checked: title and authors compared
#: with the arXiv listing in this project (December 2026); False: written from memory.
REFERENCES: dict[str, tuple[str, int, str, str, bool]] = {
    "astro-ph/9709072": ("J. C. Niemeyer, K. Jedamzik", 1998, "Near-critical gravitational "
                         "collapse and the initial mass function of primordial black holes",
                         "Phys. Rev. Lett. 80, 5481", False),
    "gr-qc/9302019": ("E. D. Stewart, D. H. Lyth", 1993, "A more accurate analytic calculation "
                      "of the spectrum of cosmological perturbations produced during "
                      "inflation", "Phys. Lett. B 302, 171", False),
    "gr-qc/9909001": ("M. Maggiore", 2000, "Gravitational wave experiments and early universe "
                      "cosmology", "Phys. Rept. 331, 283", False),
    "astro-ph/0106020": ("D. J. Schwarz, C. A. Terrero-Escalante, A. A. García", 2001,
                         "Higher order corrections to primordial spectra from cosmological "
                         "inflation", "Phys. Lett. B 517, 243", True),
    "astro-ph/0305263": ("A. R. Liddle, S. M. Leach", 2003, "How long before the end of "
                         "inflation were observable perturbations produced?",
                         "Phys. Rev. D 68, 103503", False),
    "gr-qc/9402041": ("C. R. Evans, J. S. Coleman", 1994, "Observation of critical phenomena "
                      "and self-similarity in the gravitational collapse of radiation fluid",
                      "Phys. Rev. Lett. 72, 1782", False),
    "gr-qc/9503007": ("T. Koike, T. Hara, S. Adachi", 1995, "Critical behavior in "
                      "gravitational collapse of radiation fluid: a renormalization group "
                      "(linear perturbation) analysis", "Phys. Rev. Lett. 74, 5170", False),
    "gr-qc/9504008": ("D. Maison", 1996, "Non-universality of critical behaviour in "
                      "spherically symmetric gravitational collapse",
                      "Phys. Lett. B 366, 82", False),
    "gr-qc/0207096": ("P. R. Brady, M. W. Choptuik, C. Gundlach, D. W. Neilsen", 2002,
                      "Black-hole threshold solutions in stiff fluid collapse",
                      "Class. Quant. Grav. 19, 6359", False),
    "gr-qc/9906124": ("C. Gundlach", 2002, "Critical gravitational collapse of a perfect "
                      "fluid: nonspherical perturbations", "Phys. Rev. D 65, 084021", False),
    "gr-qc/0109095": ("H. Maeda, T. Harada", 2001, "Critical phenomena in Newtonian gravity",
                      "Phys. Rev. D 64, 124024", True),
    "gr-qc/0210027": ("T. Harada, H. Maeda, B. Semelin", 2003, "Criticality and convergence "
                      "in Newtonian collapse", "Phys. Rev. D 67, 084003", True),
    "0811.1452": ("I. Musco, J. C. Miller, A. G. Polnarev", 2009, "Primordial black hole "
                  "formation in the radiative era: investigation of the critical nature of "
                  "the collapse", "Class. Quant. Grav. 26, 235001", True),
    "1201.2379": ("I. Musco, J. C. Miller", 2013, "Primordial black hole formation in the "
                  "early universe: critical behaviour and self-similarity",
                  "Class. Quant. Grav. 30, 145009", True),
    "0911.1955": ("D. J. Fixsen", 2009, "The temperature of the cosmic microwave background",
                  "Astrophys. J. 707, 916", False),
    "0912.5297": ("B. J. Carr, K. Kohri, Y. Sendouda, J. Yokoyama", 2010, "New cosmological "
                  "constraints on primordial black holes", "Phys. Rev. D 81, 104019", False),
    "1202.3665": ("D. Foreman-Mackey, D. W. Hogg, D. Lang, J. Goodman", 2013,
                  "emcee: the MCMC hammer", "Publ. Astron. Soc. Pac. 125, 306", False),
    "1309.4201": ("T. Harada, C.-M. Yoo, K. Kohri", 2013, "Threshold of primordial black hole "
                  "formation", "Phys. Rev. D 88, 084051", True),
    "1310.5300": ("E. Thrane, J. D. Romano", 2013, "Sensitivity curves for searches for "
                  "gravitational-wave backgrounds", "Phys. Rev. D 88, 124032", False),
    "1405.7023": ("S. Young, C. T. Byrnes, M. Sasaki", 2014, "Calculating the mass spectrum "
                  "of primordial black holes", "JCAP 07 (2014) 045", True),
    "1606.07494": ("S. Borsanyi et al.", 2016, "Calculation of the axion mass based on "
                   "high-temperature lattice quantum chromodynamics", "Nature 539, 69", True),
    "1705.05567": ("B. Carr, M. Raidal, T. Tenkanen, V. Vaskonen, H. Veermäe", 2017,
                   "Primordial black hole constraints for extended mass functions",
                   "Phys. Rev. D 96, 023514", True),
    "1802.06393": ("K. Ando, K. Inomata, M. Kawasaki", 2018, "Primordial black holes and "
                   "uncertainties in the choice of the window function",
                   "Phys. Rev. D 97, 103528", True),
    "1803.01038": ("K. Saikawa, S. Shirai", 2018, "Primordial gravitational waves, precisely: "
                   "the role of thermodynamics in the Standard Model", "JCAP 05 (2018) 035",
                   True),
    "1803.01944": ("T. Robson, N. J. Cornish, C. Liu", 2019, "The construction and use of "
                   "LISA sensitivity curves", "Class. Quantum Grav. 36, 105011", False),
    "1804.07732": ("J. R. Espinosa, D. Racco, A. Riotto", 2018, "A cosmological signature of "
                   "the SM Higgs instability: gravitational waves", "JCAP 09 (2018) 012",
                   False),
    "2010.06193": ("K. T. Abe, Y. Tada, I. Ueda", 2021, "Induced gravitational waves as a "
                   "cosmological probe of the sound speed during the QCD phase transition",
                   "arXiv preprint (journal version not checked)", True),
    "1804.08577": ("K. Kohri, T. Terada", 2018, "Semianalytic calculation of gravitational "
                   "wave spectrum nonlinearly induced from primordial curvature "
                   "perturbations", "Phys. Rev. D 97, 123532", False),
    "1507.02704": ("Planck Collaboration (N. Aghanim et al.)", 2016, "Planck 2015 results. XI. "
                   "CMB power spectra, likelihoods, and robustness of parameters",
                   "Astron. Astrophys. 594, A11", False),
    "1807.06209": ("Planck Collaboration (N. Aghanim et al.)", 2020, "Planck 2018 results. VI. "
                   "Cosmological parameters", "Astron. Astrophys. 641, A6", False),
    "1807.06211": ("Planck Collaboration (Y. Akrami et al.)", 2020, "Planck 2018 results. X. "
                   "Constraints on inflation", "Astron. Astrophys. 641, A10", False),
    "1904.00970": ("V. De Luca, G. Franciolini, A. Kehagias, M. Peloso, A. Riotto, C. Ünal",
                   2019, "The ineludible non-Gaussianity of the primordial black hole "
                   "abundance", "JCAP 07 (2019) 048", True),
    "1904.00984": ("S. Young, I. Musco, C. T. Byrnes", 2019, "Primordial black hole formation "
                   "and abundance: contribution from the non-linear relation between the "
                   "density and curvature perturbation", "JCAP 11 (2019) 012", False),
    "2110.00483": ("BICEP/Keck Collaboration (P. A. R. Ade et al.)", 2021, "Improved "
                   "constraints on primordial gravitational waves using Planck, WMAP, and "
                   "BICEP/Keck observations through the 2018 observing season",
                   "Phys. Rev. Lett. 127, 151301", False),
    "1104.2612": ("J. Hou, J. Goodman, D. W. Hogg, J. Goldberg, E. Weinberg", 2012,
                  "Affine-invariant sampler for exoplanet fitting and discovery in radial "
                  "velocity data", "Astrophys. J. 745, 198", False),
    "1210.3692": ("M. H. Namjoo, H. Firouzjahi, M. Sasaki", 2013, "Violation of "
                  "non-Gaussianity consistency relation in a single field inflationary model",
                  "EPL 101, 39001", False),
    "1712.09998": ("Y.-F. Cai, X. Chen, M. H. Namjoo, M. Sasaki, D.-G. Wang, Z. Wang", 2018,
                   "Revisiting non-Gaussianity from non-attractor inflation models",
                   "JCAP 05 (2018) 012", False),
    "2209.05959": ("G. Franciolini, I. Musco, P. Pani, A. Urbano", 2022, "From inflation to "
                   "black hole mergers and back again: gravitational-wave data-driven "
                   "constraints on inflationary scenarios with a first-principle model of "
                   "primordial black holes across the QCD epoch", "Phys. Rev. D 106, 123526",
                   False),
    "2211.01728": ("G. Ferrante, G. Franciolini, A. Iovino Jr., A. Urbano", 2023,
                   "Primordial non-Gaussianity up to all orders: theoretical aspects and "
                   "implications for primordial black hole models", "Phys. Rev. D 107, 043520",
                   False),
    "2211.08348": ("A. D. Gow, H. Assadullahi, J. H. P. Jackson, K. Koyama, V. Vennin, "
                   "D. Wands", 2023, "Non-perturbative non-Gaussianity and primordial black "
                   "holes", "EPL 142, 49001", True),
    "2211.13932": ("S. Pi, M. Sasaki", 2023, "Logarithmic duality of the curvature "
                   "perturbation", "Phys. Rev. Lett. 131, 011002", False),
    "2303.07980": ("I. Musco, K. Jedamzik, S. Young", 2024, "Primordial black hole formation "
                   "during the QCD phase transition: threshold, mass distribution and "
                   "abundance", "Phys. Rev. D 109, 083506", False),
    "astro-ph/0411220": ("D. H. Lyth, K. A. Malik, M. Sasaki", 2005, "A general proof of the "
                         "conservation of the curvature perturbation", "JCAP 05 (2005) 004",
                         False),
    "astro-ph/9507001": ("M. Sasaki, E. D. Stewart", 1996, "A general analytic formula for "
                         "the spectral index of the density perturbations produced during "
                         "inflation", "Prog. Theor. Phys. 95, 71", False),
    "1407.5459": ("J. Buchner", 2016, "A statistical test for nested sampling algorithms",
                  "Stat. Comput. 26, 383", False),
    "1707.00537": ("V. Vennin, H. Assadullahi, D. Wands (as the code cites it)", 2017,
                   "title not yet recorded", "journal not yet recorded", False),
    "2101.09604": ("J. Buchner", 2021, "UltraNest — a robust, general purpose Bayesian "
                   "inference engine", "J. Open Source Softw. 6, 3001", False),
}


def cited() -> dict[str, list[str]]:
    """arXiv id -> the files under scan/ that cite it (relative paths, sorted)."""
    out: dict[str, set[str]] = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        for match in ID.finditer(path.read_text(encoding="utf-8")):
            key = match.group(1) or match.group(2)
            out.setdefault(key, set()).add(str(path.relative_to(ROOT)))
    return {key: sorted(files) for key, files in out.items()}


def render() -> str:
    """The text of docs/bibliography.md.

    Raises
    ------
    KeyError
        The code cites an id with no :data:`REFERENCES` entry.
    """
    ids = cited()
    missing = sorted(set(ids) - set(REFERENCES))
    if missing:
        raise KeyError(f"add {missing} to REFERENCES in tests/tools/bibliography.py")
    order = sorted(ids, key=lambda k: (REFERENCES[k][1], REFERENCES[k][0]))
    lines = ["# Methods bibliography", "",
             "The papers whose methods, formulas or data the code uses, generated from the "
             "arXiv ids cited in `scan/` by `tests/tools/bibliography.py` "
             "(`python tests/tools/bibliography.py --write`; `tests/test_docs.py` checks it "
             "is up to date). Cite the ones behind the results you publish, and zetascan "
             "itself (`CITATION.cff`).", ""]
    for key in order:
        authors, year, title, journal, checked = REFERENCES[key]
        mark = "" if checked else " †"
        prefix = "arXiv:" if "/" not in key else ""
        where = ", ".join(f"`{f}`" for f in ids[key])
        lines.append(f"- {authors} ({year}), *{title}*, {journal}, {prefix}{key}{mark}. "
                     f"Used in {where}.")
    lines += ["", "Authors and titles without a mark were compared with their arXiv listing "
              "(December 2026); † marks entries written from memory, not yet compared. "
              "Journal references are from memory throughout; the arXiv id is the one the "
              "code cites.", ""]
    return "\n".join(lines)


def main(argv: list[str]) -> int:
    text = render()
    if "--write" in argv:
        OUT.write_text(text, encoding="utf-8")
        print(f"wrote {OUT} ({len(cited())} references)")
    else:
        print(text)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
