"""The scaling fit: central charge, window, corrections, scaling law, and the fit verb."""

import functools
import json
import math

import numpy as np
import pytest

import bondscope
from bondscope._cli import main
from bondscope._analyses.scaling import fit_scaling, page_entropy, parse_window
from reference import freefermion, states


def doc(entropies, sites, *, base="e", local_dims=None, **top):
    """A minimal external document: only the fields the schema requires."""
    out = {"format": "bondscope-profile", "version": 1, "sites": sites, "log_base": base,
           "kind": "state-vector",
           "cuts": [{"position": l, "entropy": float(s)} for l, s in enumerate(entropies, 1)]}
    if local_dims is not None:
        out["local_dims"] = local_dims
    out.update(top)
    return out


@functools.lru_cache(maxsize=None)
def exact(model, L, boundary, g=1.0):
    """Exact ground-state entropies in nats (Peschel, J. Phys. A 36, L205 (2003))."""
    if model == "xx":
        return tuple(freefermion.xx_entropies(L, boundary))
    return tuple(freefermion.ising_entropies(L, g, boundary))


@functools.lru_cache(maxsize=None)
def haar_profile(L, seed):
    """Entropies of one Haar-random state of L qubits, by SVD of each cut."""
    psi = states.haar_state(2 ** L, np.random.default_rng(seed))
    out = []
    for l in range(1, L):
        p = np.linalg.svd(psi.reshape(2 ** l, -1), compute_uv=False) ** 2
        p = p[p > 0]
        out.append(float(-(p * np.log(p)).sum()))
    return tuple(out)


# c of the critical XX chain is 1, of the critical transverse-field Ising chain 1/2
# (Calabrese & Cardy, J. Stat. Mech. P06002 (2004)); exact free-fermion profiles
CENTRAL_CHARGES = [
    pytest.param("xx", 200, "open", 1.0, id="xx-open-200"),
    pytest.param("xx", 200, "periodic", 1.0, id="xx-ring-200"),
    pytest.param("xx", 300, "open", 1.0, id="xx-open-300"),          # other parity of L/2
    pytest.param("ising", 100, "open", 0.5, id="ising-open-100"),
    pytest.param("ising", 100, "periodic", 0.5, id="ising-ring-100"),
    pytest.param("ising", 200, "open", 0.5, id="ising-open-200", marks=pytest.mark.slow),
    pytest.param("ising", 200, "periodic", 0.5, id="ising-ring-200", marks=pytest.mark.slow),
]


@pytest.mark.parametrize("model, L, boundary, c", CENTRAL_CHARGES)
def test_central_charge_of_exact_profiles(model, L, boundary, c):
    res = fit_scaling(doc(exact(model, L, boundary), L), boundary=boundary)
    assert abs(res["central_charge"] - c) < 0.01
    # the quoted error is honest: it covers the true value within three errors
    assert abs(res["central_charge"] - c) <= 3 * res["central_charge_error"] + 1e-4
    assert res["law"] == "logarithmic"
    assert res["units"] == "nats" and res["boundary"] == boundary


@pytest.mark.parametrize("base", [
    2,        # bits: c must come out the same after conversion to nats
    10,       # any base > 1
    "e",      # nats as written
])
def test_log_base_is_converted_to_nats(base):
    S = np.array(exact("xx", 200, "open")) / math.log(math.e if base == "e" else base)
    res = fit_scaling(doc(S, 200, base=base))
    assert abs(res["central_charge"] - 1.0) < 0.01


def test_corrections_improve_the_open_xx_fit():
    # the open XX chain has an alternating term (Laflorencie et al., PRL 96, 100603 (2006))
    S = doc(exact("xx", 200, "open"), 200)
    plain = fit_scaling(S, corrections=())
    full = fit_scaling(S)
    assert full["rms_residual"] < plain["rms_residual"] / 5
    assert abs(full["central_charge"] - 1) < abs(plain["central_charge"] - 1)
    assert abs(full["amplitudes"]["parity"]) > 0.01
    assert set(full["amplitudes"]) == {"parity", "smooth"} and plain["amplitudes"] == {}


def test_default_window_and_residuals():
    res = fit_scaling(doc(exact("xx", 200, "periodic"), 200), boundary="periodic")
    assert res["window"] == [25, 175]  # L // 8 dropped at each end
    assert res["positions"] == list(range(25, 176))
    assert len(res["residuals"]) == len(res["positions"])
    assert res["corrections"] == []  # rings take no correction by default
    assert res["error_parts"]["windows"]  # the spread was measured on other windows


def _page(L, seed):
    return doc(haar_profile(L, seed), L, local_dims=[2] * L)


# the scaling law: gapped chains saturate (area), critical ones grow as ln l, random
# states follow the Page curve (Page, PRL 71, 1291 (1993))
LAWS = [
    ("ising", dict(L=60, g=1.5), "area"),          # paramagnet, xi = 1/ln g ~ 2.5 (from memory)
    ("ising", dict(L=60, g=1.2), "area"),          # closer to the critical point
    ("xx", dict(L=200), "logarithmic"),            # critical, c = 1
    ("page", dict(L=12, seed=3), "volume"),        # Haar-random state of 12 qubits
    ("page-nodims", dict(L=12, seed=4), "volume"),  # same, minimal document (shape alone)
    ("product", dict(L=10), "area"),               # no entanglement at all
]


@pytest.mark.parametrize("kind, opts, law", LAWS)
def test_scaling_law(kind, opts, law):
    L = opts["L"]
    if kind == "ising":
        d = doc(exact("ising", L, "open", opts["g"]), L, local_dims=[2] * L)
    elif kind == "xx":
        d = doc(exact("xx", L, "open"), L)
    elif kind == "page":
        d = _page(L, opts["seed"])
    elif kind == "page-nodims":
        d = doc(haar_profile(L, opts["seed"]), L)
    else:
        d = doc(np.zeros(L - 1), L)
    res = fit_scaling(d)
    assert res["law"] == law
    if kind == "page":
        # a random state's middle cut sits at the Page value
        ev = res["law_evidence"]
        assert ev["page_entropy"] == pytest.approx(states.page_entropy(2 ** 6, 2 ** 6))
        assert ev["page_ratio"] == pytest.approx(1.0, abs=0.02)


PAGE = [
    (2, 2),        # one qubit pair: 1/3 + 1/4 - 1/4 = 1/3
    (8, 32),       # unequal parts
    (64, 64),      # the middle cut of 12 qubits
    (3, 1000),     # a small part next to a large bath
]


@pytest.mark.parametrize("dA, dB", PAGE)
def test_page_entropy_matches_the_exact_sum(dA, dB):
    # Page, PRL 71, 1291 (1993), exact finite sum in tests/reference/states.py
    assert page_entropy(math.log(dA), math.log(dB)) == pytest.approx(
        states.page_entropy(dA, dB), rel=1e-12)


def test_page_entropy_asymptotic_for_huge_parts():
    # S -> ln m - m / (2n) for large parts (Page, PRL 71, 1291 (1993)); 2^400 per side
    log_m = 400 * math.log(2)
    assert page_entropy(log_m, log_m) == pytest.approx(log_m - 0.5, rel=1e-15)


WINDOWS = [
    ("10:90", 100, (10, 90)),           # both ends given
    ("10:", 100, (10, 99)),             # open right end
    (":50", 100, (1, 50)),              # open left end
    ((5, 20), 100, (5, 20)),            # a tuple
    (None, 100, None),                  # default window
    ("90:10", 100, ValueError),         # A > B
    ("0:50", 100, ValueError),          # A below 1
    ("10:100", 100, ValueError),        # B beyond L - 1
    ("a:b", 100, ValueError),           # not integers
    ("10-20", 100, ValueError),         # no colon
    ((1.5, 20), 100, ValueError),       # float ends
]


@pytest.mark.parametrize("window, sites, expected", WINDOWS)
def test_parse_window(window, sites, expected):
    if expected is ValueError:
        with pytest.raises(ValueError, match="window"):
            parse_window(window, sites)
    else:
        assert parse_window(window, sites) == expected


FIT_ERRORS = [
    (dict(boundary="twisted"), ValueError, "boundary"),              # unknown boundary
    (dict(corrections=("wiggle",)), ValueError, "correction"),       # unknown correction
    (dict(window="40:42"), ValueError, "holds 3 cuts"),              # too few cuts to fit
    (dict(parity_exponent=0), ValueError, "parity_exponent"),        # exponent must be > 0
    (dict(spectrum_report=True), ValueError, "--spectrum"),          # no spectra stored
    (dict(local_dim=[2, 2]), ValueError, "local dimensions"),        # wrong count
]


@pytest.mark.parametrize("kwargs, error, match", FIT_ERRORS)
def test_fit_errors(kwargs, error, match):
    with pytest.raises(error, match=match):
        fit_scaling(doc(exact("xx", 200, "open"), 200), **kwargs)


@pytest.mark.parametrize("source, error", [
    (42, TypeError),                                  # not a profile at all
    ({"format": "other"}, bondscope.CheckpointError),  # not a bondscope document
])
def test_fit_rejects_bad_sources(source, error):
    with pytest.raises(error):
        fit_scaling(source)


def test_fit_accepts_profile_path_and_dict(tmp_path):
    d = doc(exact("xx", 200, "periodic"), 200)
    path = tmp_path / "ring.json"
    path.write_text(json.dumps(d))
    results = [fit_scaling(s, boundary="periodic")
               for s in (d, bondscope.Profile.from_dict(d), path, str(path))]
    assert len({r["central_charge"] for r in results}) == 1


def test_fit_of_a_checkpoint_with_spectrum_report(tmp_path):
    # AKLT with edge spins: spectrum (1/2, 1/2) at every cut (Affleck, Kennedy, Lieb,
    # Tasaki, PRL 59, 799 (1987)): flat profile, evenly degenerate everywhere
    prof = bondscope.profile(states.aklt(8), spectrum=True)
    res = fit_scaling(prof, spectrum_report=True)
    assert res["law"] == "area"
    assert res["constant"] == pytest.approx(math.log(2), abs=1e-12)
    assert res["diagnostics"]["all_even"]


# --- the fit verb -------------------------------------------------------------------------
@pytest.fixture
def saved(tmp_path):
    def write(d, name="p.json"):
        path = tmp_path / name
        path.write_text(json.dumps(d))
        return path
    return write


CLI = [
    (["--boundary", "periodic"], 0, None),                 # a plain fit
    (["--boundary", "periodic", "--window", "20:180"], 0, None),  # explicit window
    (["--window", "180:20"], 2, "--window"),               # bad window: usage error
    (["--window", "1:x"], 2, "--window"),                  # non-integer window
    (["--corrections", "wiggle"], 2, "--corrections"),     # unknown correction
    (["--spectrum-report"], 2, "--spectrum"),              # no spectra in the profile
    (["--boundary", "moebius"], 2, "boundary (--boundary)"),  # unknown boundary
]


@pytest.mark.parametrize("extra, code, message", CLI)
def test_fit_cli(extra, code, message, saved, capsys):
    path = saved(doc(exact("xx", 200, "periodic"), 200))
    assert main(["fit", str(path), "--json", *extra]) == code
    out, err = capsys.readouterr()
    if code:
        assert message in err and out == ""
    else:
        res = json.loads(out)
        assert abs(res["central_charge"] - 1.0) < 0.01
        assert res["law"] == "logarithmic"


def test_fit_cli_text_output(saved, capsys):
    assert main(["fit", str(saved(doc(exact("xx", 200, "open"), 200)))]) == 0
    out = capsys.readouterr().out
    assert out.startswith("scaling law     logarithmic") and "central charge  0.99" in out


def test_fit_cli_in_a_subprocess(saved):
    import subprocess
    import sys

    path = saved(doc(exact("xx", 200, "periodic"), 200))
    r = subprocess.run([sys.executable, "-m", "bondscope", "fit", str(path), "--boundary",
                        "periodic", "--json"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert abs(json.loads(r.stdout)["central_charge"] - 1.0) < 0.01
