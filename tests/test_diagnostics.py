"""Spectrum diagnostics: entanglement gap, degeneracy pattern and the even-degeneracy flag."""

import json
import math

import numpy as np
import pytest

import bondscope
from bondscope._cli import main
from bondscope._analyses.diagnostics import spectrum_diagnostics
from reference import states


def spectra_doc(spectra, ranks=None):
    """A minimal document with the given Schmidt values at cuts 1..N-1."""
    cuts = []
    for l, v in enumerate(spectra, 1):
        cut = {"position": l, "entropy": 0.0, "schmidt_values": [float(x) for x in v]}
        if ranks is not None:
            cut["schmidt_rank"] = ranks[l - 1]
        cuts.append(cut)
    return {"format": "bondscope-profile", "version": 1, "sites": len(spectra) + 1,
            "log_base": "e", "kind": "mps", "cuts": cuts}


def _profile(name):
    tensors = {
        # AKLT with edge spins: (1/2, 1/2) at every cut (Affleck, Kennedy, Lieb, Tasaki,
        # PRL 59, 799 (1987)), the Haldane phase (Pollmann et al., PRB 81, 064439 (2010))
        "aklt": lambda: states.aklt(6),
        # cluster state: one ebit across every cut (Hein, Eisert, Briegel, PRA 69, 062311
        # (2004)), a Z2 x Z2 symmetry-protected phase (from memory)
        "cluster": lambda: states.cluster(6),
        # GHZ on qutrits: three equal weights (common practice)
        "ghz3": lambda: states.ghz(5, d=3),
        # GHZ on qubits: two equal weights, evenly degenerate without any protected phase
        "ghz2": lambda: states.ghz(5, d=2),
        # W state: weights l/N and (N-l)/N (common practice)
        "w": lambda: states.w_state(4),
        # product state: rank one everywhere
        "product": lambda: states.product([2] * 5, np.random.default_rng(2)),
    }[name]()
    return bondscope.profile(tensors, spectrum=True)


PATTERNS = [
    # state, degeneracies of the lowest level at the first cut, gap at cut 1, all even
    ("aklt", [2], 0.0, True),
    ("cluster", [2], 0.0, True),
    ("ghz3", [3], 0.0, False),
    ("ghz2", [2], 0.0, True),               # even_degeneracy is necessary, not sufficient
    ("w", [1, 1], math.log(3), False),      # -ln(1/4) - (-ln(3/4)) = ln 3
    ("product", [1], None, False),          # one level: no gap
]


@pytest.mark.parametrize("name, degeneracies, gap, even", PATTERNS)
def test_patterns_of_exact_states(name, degeneracies, gap, even):
    res = spectrum_diagnostics(_profile(name))
    first = res["cuts"][0]
    assert first["degeneracies"] == degeneracies
    if gap is None:
        assert first["entanglement_gap"] is None
    else:
        assert first["entanglement_gap"] == pytest.approx(gap, abs=1e-9)
    assert res["all_even"] is even
    assert (res["even_cuts"] == [c["position"] for c in res["cuts"]]) is even


def test_aklt_with_fixed_ends_approaches_the_doublet():
    # fixed boundary vectors: the doublet splits as (1/3)^distance, the subleading transfer
    # matrix eigenvalue (Fannes, Nachtergaele, Werner, Commun. Math. Phys. 144, 443 (1992))
    res = spectrum_diagnostics(bondscope.profile(states.aklt(16, edge_spins=False),
                                                 spectrum=True), tol=1e-2)
    gaps = np.array([c["entanglement_gap"] for c in res["cuts"]])
    # cuts 2..6, far from the right end: each step away from the left end divides by 3
    np.testing.assert_allclose(gaps[1:5] / gaps[2:6], 3.0, rtol=0.05)
    assert res["cuts"][7]["even_degeneracy"]        # middle cut: split below 1e-2
    assert not res["cuts"][0]["even_degeneracy"]    # next to the end: split ~ 1/3
    assert not res["all_even"]


TOLERANCES = [
    (1e-6, [1, 1], False),   # a split of 1e-3 in eps is resolved
    (1e-2, [2], True),       # and merged at a looser tolerance
]


@pytest.mark.parametrize("tol, degeneracies, even", TOLERANCES)
def test_tolerance(tol, degeneracies, even):
    w = np.array([1.0, math.exp(-1e-3)])
    res = spectrum_diagnostics(spectra_doc([np.sqrt(w / w.sum())]), tol=tol)
    assert res["cuts"][0]["degeneracies"] == degeneracies
    assert res["cuts"][0]["entanglement_gap"] == pytest.approx(1e-3, rel=1e-6)
    assert res["all_even"] is even


def test_top_k_list_leaves_its_last_group_out():
    # weights 0.3, 0.3, 0.1 x 4 stored as the top 5 of 6: the cut-short group is not judged
    w = np.array([0.3, 0.3, 0.1, 0.1, 0.1])
    res = spectrum_diagnostics(spectra_doc([np.sqrt(w)], ranks=[6]))
    assert res["cuts"][0]["degeneracies"] == [2, 3]
    assert res["all_even"]
    full = spectrum_diagnostics(spectra_doc([np.sqrt(w)], ranks=[5]))
    assert not full["all_even"]


def test_levels_and_floor():
    w = np.array([0.5, 0.25, 0.125, 0.0625, 0.0625 - 1e-13, 1e-13])
    res = spectrum_diagnostics(spectra_doc([np.sqrt(w)]), levels=2)
    cut = res["cuts"][0]
    assert cut["levels"] == pytest.approx([math.log(2), math.log(4)])
    assert cut["degeneracies"] == [1, 1] and cut["resolved_values"] == 5  # 1e-13 is floored


ERRORS = [
    (dict(levels=0), "levels"),            # at least one level
    (dict(tol=-1.0), "tol"),               # negative tolerance
    (dict(weight_floor=1.0), "weight_floor"),  # floor must be below 1
]


@pytest.mark.parametrize("kwargs, match", ERRORS)
def test_diagnostics_errors(kwargs, match):
    with pytest.raises(ValueError, match=match):
        spectrum_diagnostics(spectra_doc([[1.0]]), **kwargs)


def test_needs_spectra():
    doc = spectra_doc([[1.0]])
    del doc["cuts"][0]["schmidt_values"]
    with pytest.raises(ValueError, match="rerun `bondscope profile --spectrum`"):
        spectrum_diagnostics(doc)


def test_fit_spectrum_report_cli(tmp_path, capsys):
    path = tmp_path / "aklt.json"
    _profile("aklt").save(path)
    assert main(["fit", str(path), "--spectrum-report", "--json"]) == 0
    diag = json.loads(capsys.readouterr().out)["diagnostics"]
    assert diag["all_even"] and diag["cuts"][2]["degeneracies"] == [2]
    assert main(["fit", str(path), "--spectrum-report"]) == 0
    assert "evenly degenerate at 7 of 7 cuts" in capsys.readouterr().out


def _noisy_multiplets(split):
    """Weights of a spin-1-like spectrum: doublets at 0.45, 0.04, 0.01 and one at 6e-12
    split by an eigensolver's own error (relative ``split``)."""
    w = np.array([0.45, 0.45, 0.04, 0.04, 0.01, 0.01 - 1.2e-11,
                  6e-12 * (1 + split), 6e-12 * (1 - split)])
    return np.sqrt(w / w.sum())


# split multiplets at the solver's accuracy are not judged; asked to, they break the pattern
SOLVER_NOISE = [
    (0.3, None, True),      # default accuracy 1e-10: the 6e-12 pair is below it, left out
    (0.3, 0.0, False),      # exact data claimed: the split pair is two levels
    (0.0, 0.0, True),       # no split at all
    (0.3, 1e-11, True),     # accuracy given: the pair sits within 2 accuracy / lambda^2
]


@pytest.mark.parametrize("split, accuracy, even", SOLVER_NOISE)
def test_degeneracy_tolerance_follows_the_data_accuracy(split, accuracy, even):
    doc = spectra_doc([_noisy_multiplets(split)] * 3)
    kwargs = {} if accuracy is None else {"accuracy": accuracy,
                                          "weight_floor": 1e-13 if accuracy == 1e-11 else 0.0}
    res = spectrum_diagnostics(doc, **kwargs)
    assert res["all_even"] is even
    assert res["accuracy"] == (1e-10 if accuracy is None else accuracy)


def test_run_discarded_weight_sets_the_accuracy():
    doc = spectra_doc([_noisy_multiplets(0.3)] * 3)
    doc["max_discarded_weight"] = 1e-8
    assert spectrum_diagnostics(doc)["accuracy"] == 1e-8
