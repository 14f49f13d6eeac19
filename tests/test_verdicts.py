"""Honest scaling verdicts on realistic data: finite-chi ground states, gapped and critical
chains, quench snapshots, truncated exact profiles; "inconclusive" where the data cannot decide.
"""

import functools
import json
from pathlib import Path

import h5py
import numpy as np
import pytest
from threadpoolctl import threadpool_limits

import bondscope
import groundstate
from bondscope._analyses.scaling import ScalingFit, fit_scaling
from bondscope._cli import main
from bondscope._cli.fit import text_lines
from reference import freefermion, spin

HEISENBERG_L = 32


@functools.lru_cache(maxsize=None)
def heisenberg():
    """Open spin-1/2 Heisenberg chain by two-site DMRG (scripts/groundstate.py), chi = L."""
    with threadpool_limits(limits=1):
        run = groundstate.two_site_ground_state(groundstate.xxz_mpo(HEISENBERG_L, 1.0),
                                                bond_dim=HEISENBERG_L, sweeps=8, energy_tol=1e-9)
    return bondscope.profile(run.tensors, spectrum=True)


@functools.lru_cache(maxsize=None)
def spin_one(L=12, chi=16):
    """Open spin-1 Heisenberg chain by DMRG: gapped (Haldane, PRL 50, 1153 (1983))."""
    sz = np.diag([1.0, 0.0, -1.0])
    sp = np.diag([np.sqrt(2.0)] * 2, 1)
    mpo = groundstate.chain_mpo(L, np.zeros((3, 3)), [(1.0, sz, sz), (0.5, sp, sp.T),
                                                      (0.5, sp.T, sp)])
    with threadpool_limits(limits=1):
        run = groundstate.two_site_ground_state(mpo, bond_dim=chi, sweeps=6, energy_tol=1e-9)
    return bondscope.profile(run.tensors, spectrum=True)


@functools.lru_cache(maxsize=None)
def quench(L=12, t=2.0):
    """Neel state evolved under the XX chain for time t: entropy grows linearly in t inside
    the light cone (Calabrese & Cardy, J. Stat. Mech. P04010 (2005)); no ln x form."""
    from scipy.sparse.linalg import expm_multiply

    neel = np.zeros(2 ** L, dtype=complex)
    neel[int("01" * (L // 2), 2)] = 1.0
    psi = expm_multiply(-1j * t * spin.xx(L), neel)
    return bondscope.profile(psi)


def truncated_xx(L, chi, boundary):
    """Exact XX ground-state spectra (Peschel, J. Phys. A 36, L205 (2003)) kept to the chi
    largest values and renormalised: a profile whose middle saturates as a finite-chi run's."""
    C = freefermion.xx_correlation(L, boundary)
    cuts = []
    for l in range(1, L):
        p = freefermion.spectrum_from_occupations(np.linalg.eigvalsh(C[:l, :l]), 1e-16)[:chi]
        p = p / p.sum()
        cuts.append({"position": l, "entropy": float(-(p * np.log(p)).sum()),
                     "bond_dimension": len(p), "schmidt_rank": len(p),
                     "schmidt_values": np.sqrt(p).tolist()})
    return {"format": "bondscope-profile", "version": 1, "sites": L, "log_base": "e",
            "kind": "mps", "boundary": boundary, "cuts": cuts}


def test_heisenberg_alternation_exponent_is_fitted():
    # the Heisenberg chain's alternating term decays as x^-K with K = 1/2, not the
    # free-fermion 1 (Laflorencie et al., PRL 96, 100603 (2006)); c = 1 (SU(2)_1, from memory)
    res = fit_scaling(heisenberg())
    assert isinstance(res, ScalingFit)
    assert res.law == "logarithmic" and res.parity_form in ("fitted", "su2")
    assert abs(res.parity_exponent - 0.5) < 0.15
    assert abs(res.central_charge - 1.0) <= 2 * res.central_charge_error
    assert res.error_parts["marginal"] > 0   # the SU(2) log factor's share is in the error


@pytest.mark.parametrize("settings", [
    dict(parity_exponent=1.0),      # the free-fermion exponent forced on a Heisenberg chain
    dict(window="5:"),              # the window that flipped the verdict to "area"
    dict(parity_exponent="su2"),    # the SU(2) form chosen by hand
])
def test_heisenberg_verdict_is_right_or_inconclusive(settings):
    res = fit_scaling(heisenberg(), **settings)
    assert res.law in ("logarithmic", "inconclusive")
    if res.law == "logarithmic":
        assert abs(res.central_charge - 1.0) <= 2 * res.central_charge_error


def test_gapped_spin_one_chain_is_not_logarithmic():
    # L = 12 spin-1 chain: gapped, so S saturates (area law) or, with 11 cuts, undecided
    res = fit_scaling(spin_one())
    assert res.law in ("area", "inconclusive"), res.law_reason


def test_quench_snapshot_gets_no_central_charge():
    res = fit_scaling(quench())
    assert res.law != "logarithmic", res.law_reason
    # c is printed only for a logarithmic verdict
    assert not any(line.startswith("central charge") for line in text_lines(res))


# truncated exact XX profiles: the verdict is logarithmic with an error covering c = 1, or
# inconclusive; the smallest chi must be caught as saturated
SATURATION = [
    (100, 4, "open", "saturated"),
    (100, 8, "open", None),
    (100, 16, "open", "saturated"),
    (100, 32, "open", None),
    (100, 64, "open", "logarithmic"),
    (102, 8, "periodic", None),
    (102, 32, "periodic", None),
    (102, 128, "periodic", "logarithmic"),  # rank barely capped: the fit is trusted
]


@pytest.mark.parametrize("L, chi, boundary, expected", SATURATION)
def test_finite_chi_profiles(L, chi, boundary, expected):
    res = fit_scaling(truncated_xx(L, chi, boundary))
    assert res.boundary == boundary and res.boundary_source == "profile field"
    assert res.saturation["capped"] and res.saturation["bond_dimension"] == chi
    if res.law == "logarithmic":
        assert abs(res.central_charge - 1.0) <= 2 * res.central_charge_error
    else:
        assert res.law == "inconclusive"
    if expected == "saturated":
        assert res.law_reason.startswith("saturated")
    elif expected is not None:
        assert res.law == expected


# the same profiles saved without spectra: the bias is unknown, the middle half's curvature
# stands in for it
NO_SPECTRA = [
    (100, 8, "open", "possibly saturated"),
    (100, 16, "open", None),
    (100, 64, "open", "logarithmic"),
    (102, 32, "periodic", "possibly saturated"),
    (102, 64, "periodic", None),
    (102, 128, "periodic", "logarithmic"),
]


@pytest.mark.parametrize("L, chi, boundary, expected", NO_SPECTRA)
def test_finite_chi_profiles_without_spectra(L, chi, boundary, expected):
    doc = truncated_xx(L, chi, boundary)
    for cut in doc["cuts"]:
        del cut["schmidt_values"]
    res = fit_scaling(doc)
    assert res.flags    # the unknown bias is always said
    if res.law == "logarithmic":
        assert abs(res.central_charge - 1.0) <= 2 * res.central_charge_error
    else:
        assert res.law == "inconclusive"
    if expected == "logarithmic":
        assert res.law == expected
    elif expected is not None:
        assert res.law_reason.startswith(expected)


def _xx_doc(L, chain="open", **top):
    S = freefermion.xx_entropies(L, chain)
    return {"format": "bondscope-profile", "version": 1, "sites": L, "log_base": "e",
            "kind": "state-vector", **top,
            "cuts": [{"position": l, "entropy": float(s)} for l, s in enumerate(S, 1)]}


INCONCLUSIVE = [
    # too few cuts to compare three laws with their corrections
    (dict(L=8), {}, "too few cuts"),
    # noise comparable to the signal: c not resolved
    (dict(L=40, noise=0.05), {}, None),
]


@pytest.mark.parametrize("shape, settings, reason", INCONCLUSIVE)
def test_inconclusive_when_the_data_cannot_decide(shape, settings, reason):
    doc = _xx_doc(shape["L"])
    if "noise" in shape:
        rng = np.random.default_rng(5)
        for cut in doc["cuts"]:
            cut["entropy"] += float(shape["noise"] * rng.standard_normal())
    res = fit_scaling(doc, **settings)
    assert res.law == "inconclusive"
    if reason:
        assert reason in res.law_reason


def test_negative_c_is_flagged():
    # an entropy falling with ln x (no physical ground state): never a logarithmic verdict
    doc = _xx_doc(100)
    for cut in doc["cuts"]:
        cut["entropy"] = 2.0 - cut["entropy"]
    res = fit_scaling(doc)
    assert res.central_charge < 0 and res.law == "inconclusive"
    assert any("unphysical" in f for f in res.flags)


# one boundary rule: given > profile field > checkpoint attribute > open
BOUNDARY = [
    ({}, {}, "open", "default"),
    ({"boundary": "periodic"}, {}, "periodic", "profile field"),
    ({"boundary": "periodic"}, {"boundary": "open"}, "open", "given"),
    ({"batch": {"attrs": {"boundary": "periodic"}}}, {}, "periodic", "checkpoint attribute"),
]


@pytest.mark.parametrize("top, settings, boundary, source", BOUNDARY)
def test_boundary_rule(top, settings, boundary, source):
    res = fit_scaling(_xx_doc(102, "periodic", **top), **settings)
    assert (res.boundary, res.boundary_source) == (boundary, source)


def test_fit_verb_reads_the_checkpoint_boundary(tmp_path, capsys):
    # an XX ring (L = 10) with boundary = "periodic" on the file: fit and plot agree
    L = 10
    psi = spin.ground_state(spin.xx(L, "periodic"))[1]
    path = tmp_path / "ring.h5"
    with h5py.File(path, "w") as f:
        f["psi"] = psi
        f.attrs["boundary"] = "periodic"
    assert main(["fit", str(path), "--json", "--quiet"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["boundary"] == "periodic" and res["boundary_source"] == "checkpoint attribute"
    fig = bondscope.entropy_figure(str(path))
    assert fig.bondscope_fits[0]["boundary"] == "periodic"
    assert fig.bondscope_fits[0]["central_charge"] == pytest.approx(res["central_charge"])


# --parity-exponent on every verb with fit settings: a number, su2 or auto
EXPONENT_FLAG = [
    ("su2", 0, "su2"),          # the SU(2) form by hand
    ("auto", 0, None),          # chosen by AICc (the default)
    ("0.5", 0, "fixed"),        # a number fixes K
    ("banana", 2, None),        # usage error, one line
    ("-1", 2, None),            # K must be positive
]


@pytest.mark.parametrize("flag, code, form", EXPONENT_FLAG)
def test_parity_exponent_flag(flag, code, form, tmp_path, capsys):
    path = tmp_path / "xx.json"
    path.write_text(json.dumps(_xx_doc(60)))
    assert main(["fit", str(path), "--json", "--parity-exponent", flag]) == code
    out, err = capsys.readouterr()
    if code:
        assert err.startswith("error: ") and "--parity-exponent" in err and out == ""
        return
    res = json.loads(out)
    assert res["parity_form"] == form or (form is None and res["parity_form"] in
                                          ("fixed", "fitted", "su2"))
    from bondscope._cli import build_parser
    from bondscope._cli.plot import figure_options
    from bondscope._figures._kinds import figure_function

    args = build_parser().parse_args(["plot", str(path), "-o", str(tmp_path / "f.png"),
                                      "--parity-exponent", flag])
    assert figure_options(args, figure_function("entropy"))["fit"] == {
        "parity_exponent": flag if flag in ("su2", "auto") else float(flag)}


@pytest.mark.parametrize("chi, law", [
    (8, "inconclusive"),     # c = 0.47 from a saturated middle: said, not reported
    (32, "logarithmic"),     # converged: c = 1/2 within its error
])
def test_bundled_dmrg_series_at_finite_chi(chi, law):
    # critical Ising chain, L = 64, two-site DMRG runs (data/series); c = 1/2 (Calabrese &
    # Cardy, J. Stat. Mech. P06002 (2004))
    path = Path(__file__).resolve().parent.parent / "data" / "series" / f"kp0417_chi{chi}.h5"
    res = fit_scaling(bondscope.profile(path, spectrum=True), boundary="open")
    assert res.law == law
    if law == "logarithmic":
        assert abs(res.central_charge - 0.5) <= 2 * res.central_charge_error
    else:
        assert res.law_reason.startswith("saturated")
