"""Comparison of profiles: convergence over truncated copies, time series, and the verb."""

import json
import math

import h5py
import numpy as np
import pytest

import bondscope
from bondscope._cli import main
from bondscope._analyses.comparison import checkpoint_meta, compare_profiles, extrapolate
from builders import contract, random_chain, write_chain

SITES = 10


def _state(seed=21):
    tensors = random_chain(np.random.default_rng(seed), [2] * SITES,
                           [2, 4, 8, 16, 32, 16, 8, 4, 2])
    psi = contract(tensors)
    return psi / np.linalg.norm(psi)


def truncate(psi, chi):
    """Successive SVD truncation to bond dimension chi; (normalised copy, infidelity)."""
    rest, left = psi.reshape(1, -1), []
    for _ in range(SITES - 1):
        m = rest.reshape(rest.shape[0] * 2, -1)
        u, s, vh = np.linalg.svd(m, full_matrices=False)
        k = min(chi, len(s))
        left.append(u[:, :k])
        rest = s[:k, None] * vh[:k]
    out = rest
    for u in reversed(left):
        out = (u @ out.reshape(u.shape[1], -1)).reshape(-1)
    overlap = abs(np.vdot(psi, out)) ** 2 / np.vdot(out, out).real
    return out / np.linalg.norm(out), 1.0 - overlap


@pytest.fixture(scope="module")
def runs():
    """Profiles of one state truncated to chi = 2, 4, 8 and the exact one (chi = 32)."""
    psi = _state()
    out = []
    for chi in (2, 4, 8, 32):
        phi, infidelity = truncate(psi, chi)
        doc = bondscope.profile(phi, local_dim=2).to_dict()
        doc["discarded_weight"] = max(infidelity, 0.0)
        out.append(doc)
    return out


def test_bond_series_is_ordered_by_bond_dimension(runs):
    shuffled = [runs[2], runs[0], runs[3], runs[1]]
    res = compare_profiles(shuffled, names=["c8", "c2", "c32", "c4"])
    assert res["series"] == "bond" and res["runs"] == ["c2", "c4", "c8", "c32"]
    S = np.array([[c["entropy"] for c in r["cuts"]] for r in runs])
    np.testing.assert_allclose(res["entropies"], S, rtol=0, atol=1e-14)
    diffs = np.diff(S, axis=0)
    step, cut = np.unravel_index(np.argmax(np.abs(diffs)), diffs.shape)
    assert res["largest_difference"]["value"] == pytest.approx(diffs[step, cut])
    assert res["largest_difference"]["position"] == cut + 1
    assert res["last_difference"] == pytest.approx(np.abs(diffs[-1]).max())


@pytest.mark.parametrize("tol_scale, converged", [
    (2.0, True),    # threshold above the last change
    (0.5, False),   # threshold below it
])
def test_convergence_verdict(runs, tol_scale, converged):
    last = compare_profiles(runs)["last_difference"]
    res = compare_profiles(runs, tol=tol_scale * last)
    assert res["converged"] is converged
    assert res["verdict"] == ("converged" if converged else "not converged")
    assert res["tol"] == tol_scale * last


def test_extrapolation_brackets_the_exact_state(runs):
    # the truncated runs alone (chi = 2, 4, 8): every cut's error bar covers the exact
    # entropies of the untruncated state (chi = 32, numpy SVD of each cut as reference)
    res = compare_profiles(runs[:3])
    ext = res["extrapolation"]
    exact = [c["entropy"] for c in runs[3]["cuts"]]
    assert ext["weight_sources"] == ["discarded_weight"] * 3 and ext["form"] == "wlogw"
    for value, error, truth in zip(ext["entropies"], ext["errors"], exact):
        assert abs(value - truth) <= error
    # with the exact run (weight 0) in the series, its entropies are the answer
    res = compare_profiles(runs)
    assert res["extrapolation"]["methods"] == ["exact run"] * len(exact)
    assert res["extrapolation"]["entropies"] == pytest.approx(exact, abs=1e-12)


@pytest.mark.parametrize("form", ["linear", "wlogw"])
def test_weighted_fit_matches_numpy(form):
    # numpy's weighted polynomial fit in g(w) as reference
    from bondscope._analyses.extrapolation import correction

    w = np.array([1e-2, 3e-3, 1e-3, 2e-4])
    S = 0.7 - 3.0 * correction(w, form) + np.array([1e-5, -2e-6, 1e-6, 0.0])
    sigma = correction(w, form)
    fit = extrapolate(w, S, form=form, sigma=sigma)
    slope, intercept = np.polyfit(correction(w, form), S, 1, w=1.0 / sigma)
    assert fit.value == pytest.approx(intercept, rel=1e-10)
    assert fit.slope == pytest.approx(slope, rel=1e-8)


def test_per_cut_weights_take_precedence(runs):
    docs = json.loads(json.dumps(runs[:2]))
    for k, d in enumerate(docs):
        for c in d["cuts"]:
            c["discarded_weight"] = 0.1 * (2 - k)
    res = compare_profiles(docs)
    assert res["extrapolation"]["weight_sources"] == ["cuts.discarded_weight"] * 2
    # equal weights at every cut of a run: the weights alone say nothing about the ends
    assert set(res["extrapolation"]["methods"]) <= {"fit", "not asymptotic", "converged"}
    assert all(e > 0 for e in res["extrapolation"]["errors"])


def test_what_if_truncation_fields_are_not_the_runs_weight(runs):
    # `profile --bond-dim` writes per-cut weights of a truncation it did not apply
    docs = json.loads(json.dumps(runs[:2]))
    for k, d in enumerate(docs):
        d["truncation"] = {"bond_dim": 1, "infidelity": 0.5, "bound": 0.6}
        for c in d["cuts"]:
            c["discarded_weight"] = 0.5
    res = compare_profiles(docs)
    assert res["extrapolation"]["weight_sources"] == ["discarded_weight"] * 2
    assert res["extrapolation"]["weights"][0][0] == runs[0]["discarded_weight"]


def test_no_weights_no_extrapolation(runs):
    docs = json.loads(json.dumps(runs[:2]))
    for d in docs:
        del d["discarded_weight"]
    res = compare_profiles(docs)
    assert res["extrapolation"] is None
    assert res["extrapolation_note"] == "no discarded weight for every run"


def test_log_bases_are_compared_in_nats(runs):
    bits = json.loads(json.dumps(runs[3]))
    bits["log_base"] = 2
    for c in bits["cuts"]:
        c["entropy"] /= math.log(2)
    res = compare_profiles([runs[3], bits])
    assert res["last_difference"] == pytest.approx(0.0, abs=1e-14)


def _timed(S_rows, times=None, sites=8):
    docs = []
    for k, row in enumerate(S_rows):
        d = {"format": "bondscope-profile", "version": 1, "sites": sites, "log_base": "e",
             "kind": "state-vector",
             "cuts": [{"position": l, "entropy": float(s)} for l, s in enumerate(row, 1)]}
        if times is not None:
            d["time"] = times[k]
        docs.append(d)
    return docs


def _linear_growth(times, rate=0.3):
    """S(l, t) = min(rate * t, l ln 2): growth until the block saturates (invented)."""
    l = np.arange(1, 8)
    dist = np.minimum(l, 8 - l)
    return [np.minimum(rate * t, dist * math.log(2)) for t in times]


TIME_ORDER = [
    # (how the times are given, expected source, expected order of run names)
    ("field", "time field", ["a", "b", "c", "d"]),
    ("names", "file name", ["t0.5.json", "t1.json", "t2.json", "t10.json"]),
    ("none", "order", ["p", "q", "r", "s"]),
]


@pytest.mark.parametrize("given, source, order", TIME_ORDER)
def test_time_series(given, source, order):
    times = [0.5, 1.0, 2.0, 10.0]
    rows = _linear_growth(times)
    perm = [2, 0, 3, 1] if given != "none" else [0, 1, 2, 3]
    docs = _timed([rows[i] for i in perm], [times[i] for i in perm] if given == "field" else None)
    names = {"field": ["c", "a", "d", "b"],
             "names": [["t0.5.json", "t1.json", "t2.json", "t10.json"][i] for i in perm],
             "none": ["p", "q", "r", "s"]}[given]
    res = compare_profiles(docs, series="time", names=names)
    assert res["series"] == "time" and res["time_source"] == source and res["runs"] == order
    assert res["middle_position"] == 4
    if given != "none":
        np.testing.assert_allclose(res["entropies"], rows)
        # before saturation the middle cut grows at the rate put in
        assert res["middle_growth_rates"][:2] == pytest.approx([0.3, 0.3])
        slope = np.polyfit(times, [r[3] for r in rows], 1)[0]  # numpy reference
        assert res["middle_growth_rate"] == pytest.approx(slope)
        assert res["verdict"] == "evolving"


def test_auto_series_picks_time_when_every_document_has_one():
    docs = _timed(_linear_growth([1.0, 2.0]), [1.0, 2.0])
    assert compare_profiles(docs)["series"] == "time"
    del docs[1]["time"]
    assert compare_profiles(docs)["series"] == "bond"


ERRORS = [
    ("sites", "sites differ"),              # 8 and 6 sites
    ("single", "at least two"),             # one profile
    ("series", "series"),                   # unknown series
    ("tol", "tol"),                         # negative threshold
    ("names", "2 names for 3"),             # names of the wrong length
    ("disjoint", "no cut position"),        # no shared cut
]


@pytest.mark.parametrize("case, match", ERRORS)
def test_compare_errors(case, match):
    docs = _timed(_linear_growth([1.0, 2.0, 3.0]))
    kwargs = {}
    if case == "sites":
        docs[1] = _timed([np.zeros(5)], sites=6)[0]
    elif case == "single":
        docs = docs[:1]
    elif case == "series":
        kwargs["series"] = "space"
    elif case == "tol":
        kwargs["tol"] = -1.0
    elif case == "names":
        kwargs["names"] = ["a", "b"]
    else:
        docs[0]["cuts"] = docs[0]["cuts"][:2]
        docs[1]["cuts"] = docs[1]["cuts"][3:]
    with pytest.raises(ValueError, match=match):
        compare_profiles(docs, **kwargs)


@pytest.mark.parametrize("x, y, value, error", [
    ([0.1, 0.2, 0.3], [1.1, 1.2, 1.3], 1.0, 0.0),   # exact line: intercept 1, no scatter
    ([1.0, 3.0], [2.0, 4.0], 1.0, None),            # two points: no error estimate
    ([1.0, 1.0], [2.0, 3.0], ValueError, None),     # all x equal
    ([1.0], [2.0], ValueError, None),               # a single point
])
def test_extrapolate(x, y, value, error):
    if value is ValueError:
        with pytest.raises(ValueError):
            extrapolate(x, y)
        return
    fit = extrapolate(x, y)
    assert fit.value == pytest.approx(value)
    assert fit.error == (None if error is None else pytest.approx(error, abs=1e-12))
    assert fit.curve([0.0])[0] == pytest.approx(value)
    assert set(fit.to_dict()) == {"value", "slope", "error"}


# --- the compare verb ---------------------------------------------------------------------
def _write(tmp_path, docs, names):
    paths = []
    for d, n in zip(docs, names):
        p = tmp_path / n
        p.write_text(json.dumps(d))
        paths.append(str(p))
    return paths


def test_compare_cli_bond_series(runs, tmp_path, capsys):
    paths = _write(tmp_path, runs, ["c2.json", "c4.json", "c8.json", "c32.json"])
    assert main(["compare", *paths, "--json", "--tol", "1"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["runs"] == ["c2.json", "c4.json", "c8.json", "c32.json"]
    assert res["converged"] and res["extrapolation"] is not None


def test_compare_cli_mismatched_sites(tmp_path, capsys):
    docs = [_timed([np.zeros(7)])[0], _timed([np.zeros(5)], sites=6)[0]]
    assert main(["compare", *_write(tmp_path, docs, ["a.json", "b.json"])]) == 2
    err = capsys.readouterr().err
    assert "sites differ (a.json: 8, b.json: 6)" in err


def test_compare_cli_needs_two(tmp_path, capsys):
    assert main(["compare", *_write(tmp_path, _timed([np.zeros(7)]), ["a.json"])]) == 2
    assert "at least two" in capsys.readouterr().err


def test_compare_checkpoints_with_time_attributes(tmp_path):
    # a product state evolving into a chain with growing bonds (invented snapshots)
    import subprocess
    import sys

    paths = []
    for k, t in enumerate([2.0, 0.0, 1.0]):
        bonds = [1 + (k != 1) * (1 + (t > 1.5))] * 5
        tensors = random_chain(np.random.default_rng(30 + k), [2] * 6, bonds)
        tensors[0] = tensors[0] / np.linalg.norm(contract(tensors))
        path = write_chain(tmp_path / f"snap{k}.h5", tensors)
        with h5py.File(path, "a") as f:
            f.attrs["time"] = t
        assert checkpoint_meta(path) == {"time": t}
        paths.append(str(path))
    r = subprocess.run([sys.executable, "-m", "bondscope", "compare", *paths, "--json",
                        "--quiet"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    res = json.loads(r.stdout)
    assert res["series"] == "time" and res["times"] == [0.0, 1.0, 2.0]
    assert res["runs"] == ["snap1.h5", "snap2.h5", "snap0.h5"]
    assert res["entropies"][0] == pytest.approx([0.0] * 5, abs=1e-12)  # product state at t = 0
