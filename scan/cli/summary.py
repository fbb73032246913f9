"""``zetascan summary RUN``: quantiles, convergence and invalid-model counts of a chain."""
from __future__ import annotations

import argparse
from pathlib import Path

from scan.cli.output import Output, add_output_options
from scan.evidence.compare import nested_summary
from scan.observables.pbh.qcd import qcd_lines
from scan.observables.sigw_kernel_table import kernel_lines
from scan.sampler.summary import posterior_samples, summarize

EXAMPLE = """examples:
  zetascan summary results/gaussian_test            # the run folder or its chain.h5
  zetascan summary results/gaussian_test/chain.h5 --json
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``summary``."""
    parser = subparsers.add_parser(
        "summary", help="summarise a posterior run (medians, intervals, convergence)",
        description="Medians and 68 % / 95 % intervals of the parameters and derived "
                    "quantities after burn-in and thinning, the autocorrelation times, "
                    "and the counts of invalid-model reasons.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("run", help="run folder (containing chain.h5) or chain file")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Print the summary."""
    info = summarize(args.run)
    chain = Path(info["file"])
    post = posterior_samples(chain)
    info["nested"] = nested_summary(chain.parent, post["names"], post["samples"])
    Output.of(args).result(info, format_summary(info))
    return 0


def _row(name: str, q: dict[str, float]) -> str:
    lo68, hi68 = q["q16"] - q["median"], q["q84"] - q["median"]
    return (f"  {name:<28} {q['median']:>12.5g}  68%: [{q['q16']:.5g}, {q['q84']:.5g}] "
            f"({lo68:+.3g}/{hi68:+.3g})  95%: [{q['q02.5']:.5g}, {q['q97.5']:.5g}]")


def format_summary(info: dict) -> str:
    """Human-readable summary lines."""
    state = "converged" if info["converged"] else f"NOT converged ({info['status']})"
    ratio = "-" if info["n_over_tau"] is None else f"{info['n_over_tau']:.1f}"
    if info.get("tau_discard") and info["n_over_tau"] is not None:
        ratio += f" (last {100 * (1 - info['tau_discard']):.0f} % of the chain)"
    acc = "-" if info["acceptance_fraction"] is None else f"{info['acceptance_fraction']:.3f}"
    lines = [f"{info['file']}: {info['steps']} steps x {info['walkers']} walkers, {state}",
             f"N/max tau {ratio}; burn-in {info['burn_in']}, thin {info['thin']}, "
             f"{info['samples_used']} samples; acceptance {acc}"]
    if info["tau"]:
        lines.append("tau: " + ", ".join(f"{k} {v:.1f}" for k, v in info["tau"].items()))
    lines.append("parameters (median, 68 % and 95 % intervals):")
    lines += [_row(k, q) for k, q in info["parameters"].items()]
    if info["derived"]:
        lines.append("derived:")
        lines += [_row(k, q) for k, q in info["derived"].items()]
    lines += convention_lines(info.get("pbh_convention") or {}, info["derived"])
    lines += kernel_lines(info.get("gw_convention") or {})
    if info.get("binding"):
        b = info["binding"]
        top = [f"{name} {100 * share:.0f} %" for name, share in b["fractions"].items()
               if share > 0]
        lines.append("binding constraint (most negative ln L term, share of samples): "
                     + (", ".join(top) if top else "none")
                     + (f"; none binding {100 * b['none']:.0f} %" if b["none"] else ""))
    lines.append("evaluations by reason: " + ", ".join(
        f"{k} {v}" for k, v in info["invalid_reasons"].items()))
    if info.get("nested"):
        lines += nested_lines(info["nested"])
    return "\n".join(lines)


#: What ``model`` means on the surrogate's path (summary note).
MODEL_NOTE: str = ("  each sample's map is the surrogate's emulated fit of its model's delta-N map "
                   "({}: F' = 1/(1 - lambda zeta_G) capped at slope_max), not the map itself: "
                   "the fit was measured 0.0-0.8 dex from the tabulated map's f_PBH and its "
                   "emulation adds to that (docs/ng_model_representation.md; the surrogate's "
                   "report gives the hold-out errors); 'zetascan verify' recomputes samples "
                   "with their own delta-N map")
#: Recorded convention attributes that are not parameters of the zeta map.
QCD_KEYS: tuple[str, ...] = ("qcd_threshold", "qcd_collapse", "qcd_notes")


def convention_lines(conv: dict, derived: dict) -> list[str]:
    """Which zeta statistics and QCD-era conventions f_pbh_total used (with their
    limitation notes), and the Gaussian total beside a non-Gaussian one."""
    lines = qcd_lines(conv)
    kind = conv.get("non_gaussianity")
    if kind in (None, "gaussian"):                      # Gaussian, or not recorded
        return lines
    params = ", ".join(f"{k} = {v:g}" for k, v in conv.items()
                       if k not in ("non_gaussianity", "model_map") and k not in QCD_KEYS)
    lines += [f"PBH abundance: non-Gaussian zeta, non_gaussianity = '{kind}'"
              + (f" ({params})" if params else "") + "; f_pbh_total uses it, "
              "f_pbh_total_gaussian is the same spectra with Gaussian zeta"]
    if kind == "model":
        lines.append(MODEL_NOTE.format(conv.get("model_map", "capped_logarithmic")))
    ng, gauss = derived.get("f_pbh_total"), derived.get("f_pbh_total_gaussian")
    if ng and gauss:
        lines.append(f"  f_PBH median: {gauss['median']:.3e} Gaussian -> {ng['median']:.3e} "
                     f"non-Gaussian; 95 % upper: {gauss['q97.5']:.3e} -> {ng['q97.5']:.3e}")
    return lines


def nested_lines(nested: dict) -> list[str]:
    """The evidence file's numbers and the nested-vs-emcee agreement."""
    lines = [(f"nested sampling (evidence.h5): ln Z = {nested['ln_Z']:.3f} +- "
              f"{nested['ln_Z_err']:.3f}")]
    if nested["ln_B_vs_foreground"] == nested["ln_B_vs_foreground"]:
        lines.append(f"  ln B vs foreground only = {nested['ln_B_vs_foreground']:.3f} +- "
                     f"{nested['ln_B_vs_foreground_err']:.3f}; {nested['scale_note']}")
    if "error" in nested:
        return lines + [f"  not compared with the chain: {nested['error']}"]
    verdict = "agree" if nested["agree"] else "DISAGREE"
    lines.append(f"  nested vs emcee: {verdict} (|median shift| < {nested['agree_shift']:g} "
                 "of the emcee 68 % half-width for every parameter)")
    lines += [f"  {name:<28} median shift {row['median_shift']:+.3f}, KS {row['ks']:.3f}"
              for name, row in nested["agreement"].items()]
    return lines
