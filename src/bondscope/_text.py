"""Plain-text output: the per-cut table, the inspect summary, and names made visible."""

import math
import re
import unicodedata

from ._estimate import format_bytes
from ._exponent import norm_text

__all__ = ["profile_table", "inspect_text", "entropy_unit", "natural_key", "visible"]

# control, format (bidi overrides and isolates, zero-width marks), line and paragraph
# separators, and lone surrogates (undecodable bytes of a file name)
_HIDDEN = frozenset({"Cc", "Cf", "Zl", "Zp", "Cs"})


def _mark(ch):
    code = ord(ch)
    if 0xDC80 <= code <= 0xDCFF:  # a byte that was not UTF-8 (surrogateescape)
        return f"<0x{code - 0xDC00:02X}>"
    return f"<U+{code:04X}>"


def visible(text):
    """``text`` with every invisible or reordering character spelled out as <U+XXXX>.

    Examples
    --------
    >>> visible("run\\u202e5h.h5"), visible("tab\\there"), visible("plain name.h5")
    ('run<U+202E>5h.h5', 'tab<U+0009>here', 'plain name.h5')
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(_mark(ch) if unicodedata.category(ch) in _HIDDEN else ch for ch in text)


def natural_key(text):
    """Sort key putting 'run2' before 'run10' (numbers in names compared as numbers).

    Examples
    --------
    >>> sorted(["chi16", "chi4", "chi8"], key=natural_key)
    ['chi4', 'chi8', 'chi16']
    """
    return [int(t) if t.isdigit() else t for t in re.split(r"(\d+)", str(text))]


def entropy_unit(log_base):
    """'nats', 'bits' or 'log base b' for a profile's logarithm base."""
    if abs(log_base - math.e) < 1e-12:
        return "nats"
    if log_base == 2:
        return "bits"
    return f"log base {log_base:g}"


def profile_table(profile):
    """A readable per-cut table of a Profile, with a header and a truncation summary."""
    cuts = profile.cuts
    dims = profile.local_dims or []
    dim_text = str(dims[0]) if dims and len(set(dims)) == 1 else ",".join(map(str, dims))
    lines = [visible(profile.source),
             f"  {profile.kind}, {profile.sites} sites, local dims {dim_text}, "
             f"{profile.get('dtype', '?')}, "
             f"norm {norm_text(profile.norm, profile.get('norm_exponent', 0))}, "
             f"route {profile.get('route', '?')}, entropies in {entropy_unit(profile.log_base)}"]
    if profile.get("cut_spectra"):
        lines.append(f"  S, S_a, rank and floor per cut: {profile['cut_spectra']}; S2_A, S2_B, "
                     "I2: the physical state's blocks")
    orders = profile.renyi_orders
    trunc = profile.truncation
    head = ["cut", "bond", "rank", "S"] + [f"S_{a}" for a in orders] + ["floor"]
    if trunc:
        head += ["kept", "discarded"]
    charged = bool(cuts) and "number_entropy" in cuts[0]
    if charged:
        head += ["S_num", "S_conf", "leading sectors (charge:p)"]
    mixed = [k for k, _ in _MIXED_COLUMNS if cuts and k in cuts[0]]
    head += [h for k, h in _MIXED_COLUMNS if k in mixed]
    rows = []
    for c in cuts:
        row = [str(c["position"]), str(c.get("bond_dimension", "")),
               str(c.get("schmidt_rank", "")), f"{c['entropy']:.10f}"]
        row += [f"{c['renyi'][a]:.10f}" for a in orders]
        row.append(f"{c.get('resolution_floor', float('nan')):.1e}")
        if trunc:
            row += [str(c.get("kept", "")), f"{c.get('discarded_weight', 0.0):.3e}"]
        if charged:
            row += [f"{c['number_entropy']:.6f}", f"{c['configurational_entropy']:.6f}",
                    _leading_sectors(c["sectors"])]
        row += [_mixed_cell(c[k]) for k in mixed]
        rows.append(row)
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    fmt = "  ".join(f"{{:>{w}}}" for w in widths)
    lines.append(fmt.format(*head))
    lines += [fmt.format(*r) for r in rows]
    if cuts:
        peak = max(cuts, key=lambda c: c["entropy"])
        lines.append(f"max S = {peak['entropy']:.10f} at cut {peak['position']}; "
                     f"max bond {max(c.get('bond_dimension', 0) for c in cuts)}")
    if trunc:
        infid = trunc["infidelity"]
        lines.append(f"truncation bond_dim={trunc['bond_dim']} weight_tol={trunc['weight_tol']}: "
                     f"infidelity {'not tracked' if infid is None else f'{infid:.6e}'} (bound: "
                     f"sum of discarded weights {trunc['bound']:.6e})")
    if profile.get("purity") is not None:
        lines.append(f"purity Tr rho^2 = {profile['purity']:.10g} (+- "
                     f"{profile['purity_error']:.1e}), S_2 of the state "
                     f"{profile['renyi2_state']:.10f}")
    if profile.get("disentangle"):
        dis = profile["disentangle"]
        settled = "settled" if dis.get("sweeps_converged") else "not settled"
        lines.append(f"disentangling: {dis['converged_cuts']} of {dis['cuts']} cuts converged, "
                     f"{dis.get('sweeps', '?')} sweep(s), {settled} ({dis['window']})")
    charges = profile.get("charges")
    if charges:
        moduli = ",".join(map(str, charges["moduli"]))
        lines.append(f"charges {charges['local']} (moduli {moduli}): total charge "
                     f"{charges['total']}, weight outside it {charges['outside_weight']:.1e}")
    return "\n".join(lines)


# mixed-state per-cut fields shown: key, heading
_MIXED_COLUMNS = (("renyi2_left", "S2_A"), ("renyi2_right", "S2_B"),
                  ("mutual_information_2", "I2"), ("renyi2_error", "S2 err"),
                  ("disentangled_entropy", "S_dis"), ("disentangled_rank", "rank_dis"),
                  ("disentangled_kept", "kept_dis"), ("disentangle_converged", "conv"))


def _mixed_cell(value):
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    return f"{value:.1e}" if abs(value) < 1e-3 and value else f"{value:.8f}"


def _leading_sectors(sectors, shown=3):
    """'2:0.412 3:0.351 1:0.118' -- the sectors of largest probability."""
    top = sorted(sectors, key=lambda s: -s["probability"])[:shown]
    text = " ".join(f"{_charge_text(s['charge'])}:{s['probability']:.3f}" for s in top)
    return text + (" ..." if len(sectors) > shown else "")


def _charge_text(charge):
    return f"({','.join(map(str, charge))})" if isinstance(charge, list) else str(charge)


def inspect_text(info):
    """Human-readable summary of :func:`bondscope.inspect`."""
    dims = info["local_dims"]
    dim_text = str(dims[0]) if len(set(dims)) == 1 else ",".join(map(str, dims))
    est = info["estimate"]
    lines = [visible(info["source"]),
             f"  kind          {info['kind']}",
             f"  sites         {info['sites']}",
             f"  local dims    {dim_text}",
             f"  dtype         {info['dtype']}"]
    if info["kind"] == "unit-cell":
        how = "--unit-cell asked" if info["unit_cell"] == "requested" else \
            "detected: first left bond = last right bond != 1"
        lines.append(f"  unit cell     {info['sites']} sites repeating ({how})")
    if "bond_dims" in info:
        bonds = info["bond_dims"]
        shown = " ".join(map(str, bonds)) if len(bonds) <= 24 else \
            " ".join(map(str, bonds[:10])) + " ... " + " ".join(map(str, bonds[-10:]))
        lines += [f"  axes          {info['axes']}",
                  f"  bond dims     {shown} (max {info['max_bond_dim']})"]
    else:
        lines.append(f"  route         {info['route']}")
    size = format_bytes(info["data_bytes"])
    if "file_bytes" in info:
        size += f" of data in a {format_bytes(info['file_bytes'])} file"
    avail = info.get("available_memory")
    lines += [f"  size          {size}",
              f"  estimate      {format_bytes(est['memory_bytes'])} memory, "
              f"about {est['seconds']:.2g} s"
              + (f" (available memory {format_bytes(avail)})" if avail is not None else "")]
    buffer = est.get("detail", {}).get("read_buffer_bytes")
    if buffer:
        lines.append(f"  of which      {format_bytes(buffer)} per read for HDF5 chunks "
                     "decompressed whole")
    if "mutual_estimate" in info:
        mut = info["mutual_estimate"]
        lines.append(f"  mutual        {format_bytes(mut['memory_bytes'])} memory, about "
                     f"{mut['seconds']:.2g} s for {mut['detail']['pairs']} pairs "
                     "(bondscope mutual, without reordering)")
    return "\n".join(lines)
