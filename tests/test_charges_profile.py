"""Charges through the whole job: options, document fields, saved forms, CLI."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest

import blockdata
from reference import charges as ref

import bondscope
from bondscope import CheckpointError, ProfileOptions


def run(*args):
    return subprocess.run([sys.executable, "-m", "bondscope", *map(str, args)],
                          capture_output=True, text=True)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The bundled example chain (8 sites, 4 particles) in every form, and a non-eigenstate."""
    out = tmp_path_factory.mktemp("charges")
    paths = blockdata.example_files(out)
    psi = np.sqrt(0.9) * ref.slater_state(np.ones(5), 3) + \
        np.sqrt(0.1) * ref.slater_state(np.ones(5), 2)
    import h5py

    with h5py.File(out / "mixed.h5", "w") as f:
        f["psi"] = psi
    paths["mixed"] = out / "mixed.h5"
    return paths


@pytest.mark.parametrize("base", ["e", 2])
def test_document_fields(base):
    """Per cut: S = S_num + S_conf and sum p = 1 (Lukin et al., Science 364, 256 (2019));
    p(q) from prod (1 - nu + nu z) (Peschel, J. Phys. A 36, L205 (2003))."""
    t = np.ones(9)
    psi, corr = ref.slater_state(t, 4), ref.hopping_correlation(t, 4)
    p = bondscope.profile(psi, charges="0,1", renyi=["2"], spectrum=True, base=base)
    assert p["charges"] == {"local": "0,1", "moduli": [0], "quantities": 1, "total": 4,
                            "outside_weight": 0.0}
    for cut in p.cuts:
        assert cut["number_entropy"] + cut["configurational_entropy"] == \
            pytest.approx(cut["entropy"], abs=1e-12)
        assert sum(s["probability"] for s in cut["sectors"]) == pytest.approx(1, abs=1e-12)
        pq = ref.number_distribution(np.linalg.eigvalsh(corr[:cut["position"],
                                                             :cut["position"]]))
        for s in cut["sectors"]:
            assert s["probability"] == pytest.approx(pq[s["charge"]], abs=1e-12)
            v = np.array(s["schmidt_values"])         # normalised within the sector
            assert float(v @ v) == pytest.approx(1.0, abs=1e-10)
            assert s["renyi"]["2"] <= s["entropy"] + 1e-12
        scale = 1 / math.log(2) if base == 2 else 1.0
        assert cut["number_entropy"] == pytest.approx(
            -sum(s["probability"] * math.log(s["probability"]) for s in cut["sectors"])
            * scale, abs=1e-12)


@pytest.mark.parametrize("suffix", [".json", ".h5", ".csv"])
def test_saved_forms_keep_the_split(tmp_path, suffix):
    psi = ref.slater_state(np.ones(7), 3)
    p = bondscope.profile(psi, charges="0,1")
    p.save(tmp_path / f"p{suffix}")
    q = bondscope.load_profile(tmp_path / f"p{suffix}")
    for a, b in zip(p.cuts, q.cuts):
        assert b["number_entropy"] == pytest.approx(a["number_entropy"], abs=1e-15)
        assert b["configurational_entropy"] == pytest.approx(a["configurational_entropy"],
                                                             abs=1e-15)
        if suffix != ".csv":                        # CSV keeps the scalar columns only
            assert b["sectors"] == json.loads(json.dumps(a["sectors"]))


def test_block_files_profile_as_the_dense_file(files):
    dense = bondscope.profile(files["dense"], charges="0,1", spectrum=True)
    for form in ("blocks", "packed", "labelled"):
        p = bondscope.profile(files[form], spectrum=True)          # charges from the file
        assert p["route"] == "block-sweep" and p["charges"]["total"] == 4
        np.testing.assert_allclose(p.entropies, dense.entropies, atol=1e-13)
        for a, b in zip(p.cuts, dense.cuts):
            assert [s["charge"] for s in a["sectors"]] == [s["charge"] for s in b["sectors"]]


@pytest.mark.parametrize("kwargs, error, fragment", [
    # good: parity, and per-site groups
    ({"charges": "0,1", "modulus": 2}, None, None),
    ({"charges": "1*0,1/*0,1"}, None, None),
    # errors name the parameter and the flag
    ({"charges": "0,1,2"}, ValueError, "charges (--charges): site 0 has local dimension 2"),
    ({"modulus": 2}, ValueError, "modulus (--modulus) needs local charges"),
    ({"charges": "0,1", "modulus": "2,2"}, ValueError, "modulus (--modulus): 2 value(s)"),
    ({"charges": "0,a"}, ValueError, "charges (--charges): 'a' is not an integer"),
    ({"blocks": "/x"}, ValueError, "blocks (--blocks) '/x' needs a {site}"),
    ({"block_form": "dense"}, ValueError, "block_form (--block-form) must be one of"),
    ({"charge_flow": "up"}, ValueError, "charge_flow (--charge-flow) must be one of"),
    ({"chargez": "0,1"}, TypeError, "did you mean 'charges'"),
])
def test_options(files, kwargs, error, fragment):
    if error is None:
        p = bondscope.profile(files["dense"], **kwargs)
        assert "sectors" in p.cuts[0]
        return
    with pytest.raises(error) as err:
        bondscope.profile(files["dense"], **kwargs)
    assert fragment in str(err.value)


def test_refuses_a_non_eigenstate(files):
    with pytest.raises(CheckpointError, match=r"mixed\.h5:/psi: not an eigenstate of the "
                                              r"total charge: weight 0\.1 lies outside"):
        bondscope.profile(files["mixed"], charges="0,1")
    assert ProfileOptions(charges=[0, 1]).recorded()["charges"] == "0,1"


@pytest.mark.parametrize("args, status, out", [
    # the table gains the sector summary and the total charge
    (["profile", "{packed}"], 0, "S_num"),
    (["profile", "{dense}", "--charges", "0,1"], 0, "total charge 4"),
    (["profile", "{blocks}", "--block-form", "blocks", "--blocks", "/state/site{{site}}"], 0,
     "leading sectors"),
    (["profile", "{dense}", "--charges", "0,1", "--modulus", "2"], 0, "total charge 0"),
    # refusals: exit 3 for the checkpoint, 2 for a bad option
    (["profile", "{mixed}", "--charges", "0,1"], 3, "error: "),
    (["profile", "{dense}", "--charges", "0,1,2"], 2, "error: charges (--charges)"),
    (["profile", "{packed}", "--charge-flow", "leftward"], 3, "pass --charge-flow rightward"),
])
def test_cli(files, args, status, out):
    proc = run(*[a.format(**files) for a in args])
    assert proc.returncode == status, proc.stderr
    text = proc.stdout if status == 0 else proc.stderr
    assert out in text
    if status:
        assert len(proc.stderr.strip().splitlines()) == 1
