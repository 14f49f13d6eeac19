"""Equipartition of sector entropies on exact free-fermion chains."""

import math

import numpy as np
import pytest

from reference import charges as ref

import bondscope


def _document(L, filling, hoppings=None):
    """An exact profile document of the open hopping chain, cut by cut from mode occupations
    (Peschel, J. Phys. A 36, L205 (2003))."""
    t = np.ones(L - 1) if hoppings is None else hoppings
    corr = ref.hopping_correlation(t, filling)
    cuts = []
    for l in range(1, L):
        nu = np.linalg.eigvalsh(corr[:l, :l])
        sectors = []
        for q, w in sorted(ref.occupation_sectors(nu, 1e-13).items()):
            p = float(w.sum())
            v = w / p
            sectors.append({"charge": q, "probability": p,
                            "entropy": float(-(v * np.log(v)).sum())})
        spec = np.concatenate([s for s in ref.occupation_sectors(nu, 1e-13).values()])
        cuts.append({"position": l, "entropy": float(-(spec * np.log(spec)).sum()),
                     "sectors": sectors, "charge_mean": float(nu.sum()),
                     "charge_variance": float(np.sum(nu * (1 - nu)))})
    return {"format": "bondscope-profile", "version": 1, "sites": L, "log_base": "e",
            "kind": "mps", "cuts": cuts,
            "charges": {"local": "0,1", "moduli": [0], "quantities": 1, "total": filling}}


def test_critical_chain_is_near_equipartition():
    """XX chain at half filling: S(q) near the mean charge is S - ln(2 pi e var)/2 at leading
    order (Goldstein & Sela, PRL 120, 200602 (2018); Xavier, Alcaraz, Sierra, PRB 98,
    041106 (2018)), and the spread over q shrinks with l (Bonsignori, Ruggiero, Calabrese,
    J. Phys. A 52, 475302 (2019): breaking terms of order 1/(ln l)^2)."""
    res = bondscope.charge_equipartition(_document(96, 48), window="8:48")
    assert res.verdict == "equipartition" and res.middle == 28
    at = {p: i for i, p in enumerate(res.positions)}
    for l in (16, 32, 48):
        assert res.central_entropy[at[l]] == pytest.approx(res.prediction[at[l]], abs=0.03)
    assert res.spread[at[48]] < res.spread[at[32]] < res.spread[at[16]]
    assert res.charges[at[32]] == [15, 16, 17]
    assert res.to_dict()["verdict"] == "equipartition"


@pytest.mark.parametrize("make, verdict", [
    # an exact 14-site Slater determinant through profile(): four sectors near the mean
    (lambda: bondscope.profile(ref.slater_state(np.ones(13), 7), charges="0,1"),
     "equipartition"),
    # a Bell pair: two sectors, too few to judge
    (lambda: bondscope.profile(np.array([0.0, 1.0, 1.0, 0.0]) / np.sqrt(2), charges="0,1"),
     "inconclusive"),
    # no charges in the profile
    (lambda: bondscope.profile(ref.slater_state(np.ones(7), 4)), "not applicable"),
    # a parity (Z_2) charge: not a U(1) statement
    (lambda: bondscope.profile(ref.slater_state(np.ones(7), 4), charges="0,1", modulus=2),
     "not applicable"),
    # a tight tolerance turns the measured spread into "broken"
    (lambda: dict(_document(64, 32), tolerance=1e-3), "broken"),
])
def test_verdicts(make, verdict):
    source = make()
    tol = source.pop("tolerance", 0.1) if isinstance(source, dict) else 0.1
    assert bondscope.charge_equipartition(source, tolerance=tol).verdict == verdict


@pytest.mark.parametrize("kwargs, fragment", [
    ({"tolerance": 0}, "tolerance must be a number > 0"),       # bad tolerance
    ({"window": "9:2"}, "window (--window) 9:2"),               # bad window
])
def test_bad_arguments(kwargs, fragment):
    with pytest.raises(ValueError, match=None) as err:
        bondscope.charge_equipartition(_document(12, 6), **kwargs)
    assert fragment in str(err.value)


def test_base_two_profiles_are_read_in_nats():
    psi = ref.slater_state(np.ones(11), 6)
    a = bondscope.charge_equipartition(bondscope.profile(psi, charges="0,1"))
    b = bondscope.charge_equipartition(bondscope.profile(psi, charges="0,1", base=2))
    np.testing.assert_allclose(a.central_entropy, b.central_entropy, atol=1e-12)
    assert math.isclose(a.prediction[0], b.prediction[0], abs_tol=1e-12)
