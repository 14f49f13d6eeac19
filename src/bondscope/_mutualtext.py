"""The mutual-information document as text for a terminal."""

import numpy as np

from ._document import parse_log_base
from ._text import entropy_unit

__all__ = ["mutual_text"]


def _number(value, floor):
    return f"{value:.6f}" if value > floor else f"<= {floor:.1e}"


def _law(decay):
    if decay["law"] == "exponential":
        e = decay["exponential"]
        return f"exponential, correlation length {e['correlation_length']:.4g} ± {e['error']:.2g}"
    if decay["law"] == "power law":
        p = decay["power_law"]
        return f"power law, exponent {p['exponent']:.4g} ± {p['error']:.2g}"
    return "inconclusive"


def mutual_text(result, pairs=8):
    """A table of s_i, the strongest pairs, the decay verdict, the ordering and selection."""
    unit = entropy_unit(parse_log_base(result.log_base))
    kind = "fermionic modes (parity " + ",".join(map(str, result.parity)) + ")" \
        if result.parity else "distinguishable sites"
    lines = [f"{result.source}: {result.kind}, {result.sites} {kind}, entropies in {unit}"]
    if result.total_parity is not None:
        lines.append(f"total parity <P> = {result.total_parity:+.12f}")
    lines.append(f"gauge growth of the error bound: {result.gauge_growth:.3g}")
    lines.append("")
    lines.append("site   s_i          floor")
    for i, (s, f) in enumerate(zip(result.site_entropies, result.site_entropy_floors)):
        lines.append(f"{i + 1:>4}   {_number(s, f):<12} {f:.1e}")
    mi, fl = result.matrix, np.asarray(result.mutual_information_floors)
    iu = np.triu_indices(result.sites, 1)
    strongest = np.argsort(-mi[iu], kind="stable")[:pairs]
    lines.append("")
    lines.append(f"strongest pairs (of {len(iu[0])}):  i    j   I(i, j)")
    for k in strongest:
        i, j = iu[0][k], iu[1][k]
        lines.append(f"{'':>19}{i + 1:>4} {j + 1:>4}   {_number(mi[i, j], fl[i, j])}")
    lines.append("")
    lines.append(f"decay of I(r): {_law(result.decay)} ({result.decay['reason']})")
    o = result.ordering
    lines.append(f"ordering: {o['verdict']} ({o['reason']}); cost sum I(i,j)|i-j|^2 "
                 f"{o['current_cost']:.4g} now, {o['suggested_cost']:.4g} suggested")
    lines.append("suggested order: " + " ".join(map(str, result.suggested_order)))
    r = result.reordered
    if r:
        b, a = r["before"], r["after"]
        lines.append(f"in that order ({r['method']}): max S {b['max_entropy']:.4f} -> "
                     f"{a['max_entropy']:.4f}, bond budget at weight {a['budget_target']:g} "
                     f"{b['budget_max']} -> {a['budget_max']}")
        if r["method"] == "swap gates":
            lines.append(f"  swaps {r['swaps']} capped at chi = {r['swap_bond_dim']}: "
                         f"discarded {r['discarded_weight_sum']:.2e}, infidelity <= "
                         f"{r['infidelity_bound']:.2e}, entropies within "
                         f"{r['entropy_error_bound']:.2e}")
    sel = result.selection
    lines.append(f"selection: {sel['reason']}")
    if sel["sites"]:
        lines.append("  sites by s_i: " + " ".join(map(str, sel["sites"]))
                     + (f" (borderline: {' '.join(map(str, sel['borderline']))})"
                        if sel["borderline"] else ""))
    return "\n".join(lines)
