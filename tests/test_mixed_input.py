"""Mixed-state checkpoints: layouts, auto-detection, refusals, the CLI, batch and saved forms."""

import json
import os
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest
from reference import mixed as ref
from reference import spin

import bondscope
from bondscope import CheckpointError

DM_WORDS = ("left", "ket", "bra", "right")
PUR_WORDS = ("left", "phys", "ancilla", "right")
L = 4


def _thermal():
    return ref.thermal(spin.tfim(L, 1.0), 1.0)


def _write(path, tensors, axes, *, attrs=None, group_attrs=None, rank3_ends=False,
           canon=DM_WORDS):
    """Site tensors stored under /rho/W{site} in the ``axes`` order."""
    perm = [canon.index(w) for w in axes]
    with h5py.File(path, "w") as f:
        g = f.create_group("rho")
        for k, v in (group_attrs or {}).items():
            g.attrs[k] = v
        for i, t in enumerate(tensors):
            a = t.transpose(perm)
            if rank3_ends and i in (0, len(tensors) - 1):
                drop = "left" if i == 0 else "right"
                a = a.reshape([s for w, s in zip(axes, a.shape) if w != drop])
            d = g.create_dataset(f"W{i}", data=a)
            for k, v in (attrs or {}).items():
                d.attrs[k] = v
    return path


def _mpo(transform=None):
    rho = _thermal()
    return ref.mpo_from_dense(rho if transform is None else transform(rho), [2] * L)


def _purification():
    return ref.purification_from_dense(_thermal(), [2] * L)


def _reference_blocks():
    rho = _thermal()
    return [ref.renyi2(ref.partial_trace(rho, [2] * L, list(range(l)))) for l in range(1, L)]


def _non_hermitian(rho):
    return rho + 0.3j * np.triu(np.ones_like(rho), 1)


def _traceless(rho):
    return np.diag(np.tile([1.0, -1.0], 2 ** (L - 1)))


# (writer, options, expected kind or error type, message fragment)
LAYOUTS = [
    # density matrix, permuted axes named by a group attribute: auto-detected
    (lambda p: _write(p, _mpo(), ("ket", "left", "right", "bra"),
                      group_attrs={"axes": "ket,left,right,bra"}), {}, "density-matrix", None),
    # density matrix marked by a kind attribute only: bonds found by chaining
    (lambda p: _write(p, _mpo(), ("bra", "left", "ket", "right"),
                      attrs={"kind": "density-matrix"}), {}, "density-matrix", None),
    # purification with an axes attribute on the datasets and rank-3 ends
    (lambda p: _write(p, _purification(), ("left", "ancilla", "phys", "right"),
                      attrs={"axes": "left,ancilla,phys,right"}, rank3_ends=True,
                      canon=PUR_WORDS), {}, "purified", None),
    # purification with no metadata, axes given
    (lambda p: _write(p, _purification(), PUR_WORDS, canon=PUR_WORDS),
     {"axes": "left,phys,ancilla,right"}, "purified", None),
    # rank 4 and nothing says which kind: refused, saying what to set
    (lambda p: _write(p, _purification(), PUR_WORDS, canon=PUR_WORDS), {},
     CheckpointError, "name their axes with --axes left,ket,bra,right"),
    # ancilla of another size than the physical leg, read as a density matrix
    (lambda p: _write(p, [t[:, :, :1, :] for t in _purification()], PUR_WORDS,
                      canon=PUR_WORDS), {"axes": "left,ket,bra,right"}, CheckpointError,
     "ket axis has size 2 but bra axis 1"),
    # an ancilla of size 0
    (lambda p: _write(p, [np.zeros((1, 2, 0, 1))] * L, PUR_WORDS, canon=PUR_WORDS),
     {"axes": "left,phys,ancilla,right"}, CheckpointError, "ancilla axis has size 0"),
    # not Hermitian
    (lambda p: _write(p, _mpo(_non_hermitian), DM_WORDS, attrs={"kind": "density-matrix"}),
     {}, CheckpointError, "not Hermitian"),
    # negative trace
    (lambda p: _write(p, _mpo(lambda r: -r), DM_WORDS, attrs={"kind": "density-matrix"}),
     {}, CheckpointError, "is negative"),
    # zero trace (Hermitian, traceless)
    (lambda p: _write(p, _mpo(_traceless), DM_WORDS, attrs={"kind": "density-matrix"}),
     {}, CheckpointError, "is zero"),
    # a purification of zero norm
    (lambda p: _write(p, [np.zeros_like(t) for t in _purification()], PUR_WORDS,
                      canon=PUR_WORDS), {"axes": "left,phys,ancilla,right"}, CheckpointError,
     "zero norm"),
    # words from two sets
    (lambda p: _write(p, _mpo(), DM_WORDS), {"axes": "left,ket,ancilla,right"}, ValueError,
     "not a permutation of one word set"),
    # three words for rank-4 tensors
    (lambda p: _write(p, _mpo(), DM_WORDS), {"axes": "left,phys,right"}, CheckpointError,
     "name three axes"),
    # a malformed stored axes attribute
    (lambda p: _write(p, _mpo(), DM_WORDS, attrs={"axes": "left,ket,bra,up"}), {},
     CheckpointError, "stored 'axes' attribute"),
    # disentangling asks for a purification
    (lambda p: _write(p, _mpo(), DM_WORDS, attrs={"kind": "density-matrix"}),
     {"disentangle": True}, ValueError, "applies to purifications"),
    # no charge-resolved spectra for mixed states
    (lambda p: _write(p, _mpo(), DM_WORDS, attrs={"kind": "density-matrix"}),
     {"charges": "0,1"}, ValueError, "not available for a density-matrix"),
]


@pytest.mark.parametrize("writer,options,expected,fragment", LAYOUTS)
def test_layouts_and_refusals(tmp_path, writer, options, expected, fragment):
    path = writer(tmp_path / "mixed.h5")
    before = path.read_bytes()
    if isinstance(expected, str):
        p = bondscope.profile(path, **options)
        assert p.kind == expected
        # dense partial traces of the same thermal state (tests/reference/mixed.py)
        np.testing.assert_allclose(p.column("renyi2_left"), _reference_blocks(), atol=1e-10)
    else:
        with pytest.raises(expected) as info:
            bondscope.profile(path, **options)
        message = str(info.value)
        assert fragment in message and "\n" not in message
    assert path.read_bytes() == before


def test_four_words_for_a_pure_chain():
    """Mixed-state words on rank-3 site tensors are refused, naming the fix."""
    tensors = [np.ones((1, 2, 2)), np.ones((2, 2, 1))]
    with pytest.raises(CheckpointError, match="name four axes"):
        bondscope.profile(tensors, axes="left,ket,bra,right")


def test_saved_forms_keep_the_mixed_fields(tmp_path):
    p = bondscope.profile(_purification(), axes="left,phys,ancilla,right", disentangle=True,
                          bond_dim=4)
    for suffix in (".json", ".h5", ".csv"):
        back = bondscope.load_profile(p.save(tmp_path / f"p{suffix}"))
        assert back.kind == "purified" and back["purity"] == p["purity"]
        np.testing.assert_allclose(back.column("renyi2_left"), p.column("renyi2_left"))
        np.testing.assert_allclose(back.column("disentangled_entropy"),
                                   p.column("disentangled_entropy"))


def test_inspect_estimates_the_mixed_work():
    info = bondscope.inspect(_purification(), axes="left,phys,ancilla,right", disentangle=True)
    assert info["kind"] == "purified" and info["bond_dims"] == [4, 16, 4]
    assert info["estimate"]["detail"]["environment_bytes"] == 16 ** 4 * 8


def _cli(*args):
    env = dict(os.environ, PYTHONWARNINGS="")
    return subprocess.run([sys.executable, "-m", "bondscope", *map(str, args)],
                          capture_output=True, text=True, env=env, timeout=120)


def test_cli_profile_and_refusal(tmp_path):
    good = _write(tmp_path / "dm.h5", _mpo(), DM_WORDS, attrs={"kind": "density-matrix"})
    r = _cli("profile", good)
    assert r.returncode == 0, r.stderr
    assert "operator-space Schmidt decomposition" in r.stdout and "S2_A" in r.stdout
    pur = _write(tmp_path / "pur.h5", _purification(), PUR_WORDS, canon=PUR_WORDS)
    r = _cli("profile", pur, "--axes", "left,phys,ancilla,right", "--disentangle", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["kind"] == "purified" and "disentangled_entropy" in doc["cuts"][0]
    bad = _write(tmp_path / "bad.h5", _mpo(lambda x: -x), DM_WORDS,
                 attrs={"kind": "density-matrix"})
    r = _cli("profile", bad)
    assert r.returncode == 3 and r.stderr.startswith("error:") and "negative" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
    pytest.importorskip("matplotlib")
    r = _cli("plot", pur, "--kind", "mixed", "--axes", "left,phys,ancilla,right",
             "--disentangle", "-o", tmp_path / "m.svg")
    assert r.returncode == 0, r.stderr
    assert "after disentangling" in (tmp_path / "m.svg").read_text()


def test_batch_profiles_mixed_checkpoints(tmp_path):
    scan = tmp_path / "scan"
    scan.mkdir()
    _write(scan / "a.h5", _mpo(), DM_WORDS, attrs={"kind": "density-matrix"})
    _write(scan / "b.h5", _purification(), PUR_WORDS, attrs={"axes": ",".join(PUR_WORDS)},
           canon=PUR_WORDS)
    summary = bondscope.run_batch(scan, tmp_path / "out", workers=1)
    assert [r["status"] for r in summary.rows] == ["done", "done"]
    for row in summary.rows:
        doc = json.loads((Path(summary.out) / row["profile"]).read_text())
        np.testing.assert_allclose([c["renyi2_left"] for c in doc["cuts"]],
                                   _reference_blocks(), atol=1e-10)


def test_mixed_figure_and_report(tmp_path):
    """The mixed figure draws S_2, I_2 and the cut entropies; the report shows it for a
    batch of mixed checkpoints; a pure profile is refused by the figure."""
    pytest.importorskip("matplotlib")
    p = bondscope.profile(_purification(), axes="left,phys,ancilla,right", disentangle=True)
    fig = bondscope.plot([p], kind="mixed", output=tmp_path / "m.png")
    physical, stored = fig.axes[:2]
    np.testing.assert_allclose(physical.lines[0].get_ydata(), p.column("renyi2_left"))
    np.testing.assert_allclose(stored.lines[1].get_ydata(), p.column("disentangled_entropy"))
    assert (tmp_path / "m.png").stat().st_size > 0
    pure = bondscope.profile([np.ones((1, 2, 2)) / 2, np.ones((2, 2, 1)) / 2])
    with pytest.raises(CheckpointError, match="not a mixed state"):
        bondscope.plot([pure], kind="mixed")
    scan = tmp_path / "scan"
    scan.mkdir()
    _write(scan / "a.h5", _mpo(), DM_WORDS, attrs={"kind": "density-matrix"})
    bondscope.run_batch(scan, tmp_path / "out", workers=1)
    page = bondscope.write_report(tmp_path / "out", tmp_path / "r.html").read_text()
    assert "mutual information I_2 of the physical state" in page
    assert "not drawn" not in page.split("mutual information I_2")[0][-400:]


def test_preflight_refuses_a_purification_that_does_not_fit():
    """The replica environment (chi^4) is in the estimate: a limit that the same tensors
    read as an MPS (ancilla merged into the physical leg) fit under refuses the
    purification before any tensor is read."""
    pur = _purification()
    merged = [t.reshape(t.shape[0], -1, t.shape[3]) for t in pur]
    as_mps = bondscope.inspect(merged)["estimate"]["memory_bytes"]
    mixed = bondscope.inspect(pur, axes="left,phys,ancilla,right")["estimate"]["memory_bytes"]
    assert mixed > as_mps
    limit = (as_mps + mixed) // 2
    bondscope.profile(merged, max_memory=limit)
    with pytest.raises(bondscope.MemoryLimitError, match="max-memory"):
        bondscope.profile(pur, axes="left,phys,ancilla,right", max_memory=limit)


def test_float32_checkpoint_carries_its_precision(tmp_path):
    """A density matrix stored in float32: its block S_2 agree with the float64 ones within
    the (larger) bounds the stored precision gives (float32 eps ~ 1.2e-7, common practice)."""
    exact = bondscope.profile(_mpo(), axes="left,ket,bra,right")
    single = bondscope.profile([t.astype(np.float32) for t in _mpo()],
                               axes="left,ket,bra,right")
    err = single.column("renyi2_error")
    assert np.all(err > 1e-7) and np.all(err < 0.05)
    assert np.all(np.abs(single.column("renyi2_left") - exact.column("renyi2_left")) <= err)
