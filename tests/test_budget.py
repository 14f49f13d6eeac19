"""The bond budget: per-cut and whole-state targets, costs, the bound, and the verb."""

import json

import numpy as np
import pytest

import bondscope
from bondscope._analyses.budget import bond_budget
from bondscope._cli import main
from builders import contract, random_chain, write_chain
from reference import states


def spectra_doc(spectra, *, local_dims=None, **top):
    """A minimal external document holding the given Schmidt values at cuts 1..N-1."""
    out = {"format": "bondscope-profile", "version": 1, "sites": len(spectra) + 1,
           "log_base": "e", "kind": "mps",
           "cuts": [{"position": l, "entropy": 0.0, "schmidt_values": list(map(float, v))}
                    for l, v in enumerate(spectra, 1)]}
    if local_dims is not None:
        out["local_dims"] = local_dims
    out.update(top)
    return out


def geometric(q, K):
    """Schmidt values with weights q^k / sum, k = 0..K-1.

    The tail after chi is (q^chi - q^K)/(1 - q^K).
    """
    w = q ** np.arange(K)
    return np.sqrt(w / w.sum())


def chain(seed, dims, bonds):
    """Random site tensors of a normalised state."""
    tensors = random_chain(np.random.default_rng(seed), dims, bonds)
    tensors[0] = tensors[0] / np.linalg.norm(contract(tensors))
    return tensors


# exact spectra: GHZ has d weights 1/d at every cut, W has l/N and (N-l)/N (common
# practice); a product state has one weight 1
PER_CUT = [
    ("ghz", 0.4, [2, 2, 2], [0.0, 0.0, 0.0]),        # dropping 1/2 is too much
    ("ghz", 0.51, [1, 1, 1], [0.5, 0.5, 0.5]),       # 1/2 may be dropped
    ("w", 0.2, [2, 2, 2], [0.0, 0.0, 0.0]),          # min(l, N-l)/N = 1/4 > 0.2
    ("w", 0.3, [1, 2, 1], [0.25, 0.0, 0.25]),        # only the middle keeps two
    ("product", 1e-12, [1, 1, 1], [0.0, 0.0, 0.0]),  # nothing to drop
]


@pytest.mark.parametrize("state, eps, chis, weights", PER_CUT)
def test_per_cut_target_on_exact_spectra(state, eps, chis, weights):
    tensors = {"ghz": lambda: states.ghz(4), "w": lambda: states.w_state(4),
               "product": lambda: states.product([2] * 4, np.random.default_rng(5))}[state]()
    res = bond_budget(bondscope.profile(tensors, spectrum=True), target=eps)
    assert [c["bond_dimension"] for c in res["cuts"]] == chis
    assert [c["discarded_weight"] for c in res["cuts"]] == pytest.approx(weights, abs=1e-12)
    assert res["max_bond_dimension"] == max(chis)


@pytest.mark.parametrize("eps, chi", [
    (1e-3, 10),    # 2^-10 = 9.8e-4 <= 1e-3 < 2^-9
    (2 ** -5, 5),  # an exact tail value
    (0.6, 1),      # the largest weight alone leaves 1/2
    (0.0, 20),     # keep everything
])
def test_geometric_spectrum(eps, chi):
    # tail after keeping chi of K = 20 weights 2^-k: (2^-chi - 2^-20) / (1 - 2^-20)
    res = bond_budget(spectra_doc([geometric(0.5, 20)] * 3), target=eps)
    assert [c["bond_dimension"] for c in res["cuts"]] == [chi] * 3
    tail = (2.0 ** -chi - 2.0 ** -20) / (1 - 2.0 ** -20)
    assert res["cuts"][0]["discarded_weight"] == pytest.approx(tail, rel=1e-9, abs=1e-15)


def test_ghz_cost():
    # GHZ on 4 qubits at chi = 2: 1*2*2 + 2*2*2 + 2*2*2 + 2*2*1 = 24 numbers (hand count)
    res = bond_budget(bondscope.profile(states.ghz(4), spectrum=True), target=1e-9,
                      dtype="complex128")
    assert res["memory_bytes"] == 24 * 16 and res["memory_ratio"] == 1.0
    assert res["sweep_cost_ratio"] == 1.0
    # sweep model sum m n min(m, n): (1*2)*2*2 + (2*2)*2*2 * 2 + (2*2)*1*1 = 8 + 32 + 4
    assert res["sweep_cost"] == 44


def test_cost_of_a_smaller_budget():
    tensors = chain(7, [2] * 10, [2, 4, 8, 16, 32, 16, 8, 4, 2])
    prof = bondscope.profile(tensors, spectrum=True)
    res = bond_budget(prof, target=1e-2)
    assert res["max_bond_dimension"] < 32
    assert 0 < res["memory_ratio"] < 1 and 0 < res["sweep_cost_ratio"] < res["memory_ratio"]
    assert res["current_memory_bytes"] == sum(a.size for a in tensors) * 8


@pytest.mark.parametrize("eps", [1e-1, 1e-3, 1e-6])
def test_per_cut_budget_matches_the_profiles_truncation(eps):
    # the same rule as `profile --weight-tol`; Oseledets, SIAM J. Sci. Comput. 33, 2295
    # (2011), Thm 2.2: the infidelity of successive truncation is <= the sum of weights
    tensors = chain(11, [2] * 10, [2, 4, 8, 16, 24, 16, 8, 4, 2])
    truncated = bondscope.profile(tensors, spectrum=True, weight_tol=eps)
    res = bond_budget(truncated, target=eps)
    assert [c["bond_dimension"] for c in res["cuts"]] == [c["kept"] for c in truncated.cuts]
    assert [c["discarded_weight"] for c in res["cuts"]] == pytest.approx(
        [c["discarded_weight"] for c in truncated.cuts], abs=1e-13)
    assert truncated.truncation["infidelity"] <= res["discarded_weight_sum"] + 1e-13


@pytest.mark.parametrize("split", ["equal", "pooled"])
def test_total_target(split):
    tensors = chain(13, [2] * 10, [2, 4, 8, 16, 24, 16, 8, 4, 2])
    prof = bondscope.profile(tensors, spectrum=True)
    total = 1e-2
    res = bond_budget(prof, total=total, split=split)
    assert res["discarded_weight_sum"] <= total
    assert res["total"] == total and res["split"] == split and res["target"] is None
    if split == "equal":
        # each of the 9 cuts gets total / 9 (Oseledets 2011, Algorithm 1)
        per = bond_budget(prof, target=total / 9)
        assert [c["bond_dimension"] for c in res["cuts"]] == [
            c["bond_dimension"] for c in per["cuts"]]
    else:
        # pooling the smallest weights never needs more bonds than the equal split
        equal = bond_budget(prof, total=total)
        assert (sum(c["bond_dimension"] for c in res["cuts"])
                <= sum(c["bond_dimension"] for c in equal["cuts"]))


def test_zero_target_keeps_every_stored_value():
    # the squares of a computed spectrum sum to 1 up to rounding, which is not a dropped weight
    prof = bondscope.profile(chain(19, [2] * 8, [2, 4, 8, 16, 8, 4, 2]), spectrum=True)
    res = bond_budget(prof, target=0.0)
    assert [c["bond_dimension"] for c in res["cuts"]] == [len(v) for v in prof.spectra]


def test_top_k_spectrum_counts_the_unstored_weight():
    # weights 0.5, 0.3 stored, 0.2 left out of the list
    d = spectra_doc([np.sqrt([0.5, 0.3])], local_dims=[2, 2])
    res = bond_budget(d, target=0.25)
    assert res["cuts"][0]["bond_dimension"] == 2
    assert res["cuts"][0]["discarded_weight"] == pytest.approx(0.2)


def test_minimal_document_has_no_cost():
    res = bond_budget(spectra_doc([geometric(0.5, 8)] * 3), target=1e-2)
    assert res["memory_bytes"] is None and res["sweep_cost_ratio"] is None
    with_dims = bond_budget(spectra_doc([geometric(0.5, 8)] * 3), target=1e-2, local_dim=2)
    assert with_dims["memory_bytes"] > 0


ERRORS = [
    (dict(), "exactly one"),                                   # no target
    (dict(target=1e-3, total=1e-3), "exactly one"),            # both targets
    (dict(target=1.0), r"\[0, 1\)"),                           # target out of range
    (dict(target=-1e-3), r"\[0, 1\)"),                         # negative target
    (dict(total=1e-3, split="lazy"), "split"),                 # unknown split
    (dict(target=1e-3, local_dim=[2, 2]), "local dimensions"),  # wrong count
]


@pytest.mark.parametrize("kwargs, match", ERRORS)
def test_budget_errors(kwargs, match):
    with pytest.raises(ValueError, match=match):
        bond_budget(spectra_doc([geometric(0.5, 8)] * 3), **kwargs)


@pytest.mark.parametrize("d, match", [
    # no spectra at all: rerun with --spectrum
    ({"format": "bondscope-profile", "version": 1, "sites": 3, "log_base": "e",
      "kind": "mps", "cuts": [{"position": 1, "entropy": 0.1}, {"position": 2, "entropy": 0.1}]},
     "--spectrum"),
    # squares sum to 1.25: not a normalised state
    (spectra_doc([[1.0, 0.5]]), "sum to 1.25"),
    # top-2 list leaving 0.2 cannot reach 1e-3
    (spectra_doc([np.sqrt([0.5, 0.3])]), "weight left out 0.2"),
])
def test_budget_rejects_unusable_spectra(d, match):
    with pytest.raises(ValueError, match=match):
        bond_budget(d, target=1e-3)


# --- the budget verb ----------------------------------------------------------------------
@pytest.fixture(scope="module")
def checkpoint(tmp_path_factory):
    path = tmp_path_factory.mktemp("budget") / "run.h5"
    return write_chain(path, chain(17, [2] * 8, [2, 4, 8, 16, 8, 4, 2]))


CLI = [
    (["--target", "1e-3"], 0, None),                        # per-cut target
    (["--total", "1e-3", "--split", "pooled"], 0, None),    # whole-state target
    (["--target", "2"], 2, "[0, 1)"),                       # target out of range
    ([], 2, "required"),                                    # no target at all
    (["--target", "1e-3", "--total", "1e-3"], 2, "not allowed"),  # both
    (["--target", "1e-3", "--dtype", "float-ish"], 2, "--dtype"),  # bad dtype
]


@pytest.mark.parametrize("extra, code, message", CLI)
def test_budget_cli_on_a_checkpoint(extra, code, message, checkpoint, capsys):
    assert main(["budget", str(checkpoint), "--json", "--quiet", *extra]) == code
    out, err = capsys.readouterr()
    if code:
        assert message in err
    else:
        res = json.loads(out)
        assert res["cuts"][3]["current_bond_dimension"] == 16
        assert res["discarded_weight_sum"] <= 8 * 1e-3


def test_budget_cli_profile_without_spectra(checkpoint, tmp_path, capsys):
    path = tmp_path / "p.json"
    bondscope.profile(str(checkpoint)).save(path)
    assert main(["budget", str(path), "--target", "1e-3"]) == 2
    assert "rerun `bondscope profile --spectrum`" in capsys.readouterr().err


def test_budget_cli_text_in_a_subprocess(checkpoint):
    import subprocess
    import sys

    r = subprocess.run([sys.executable, "-m", "bondscope", "budget", str(checkpoint),
                        "--target", "0.5", "--quiet"], capture_output=True, text=True,
                       timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.startswith("target 0.5 per cut: max bond dimension")
    assert "x current" in r.stdout
