"""The command line end to end, in subprocesses."""

import hashlib
import json
import os
import subprocess
import sys

import h5py
import numpy as np
import pytest

from builders import random_chain, write_chain


def run(*args, cwd=None):
    env = dict(os.environ, PYTHONWARNINGS="")
    return subprocess.run([sys.executable, "-m", "bondscope", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=120)


@pytest.fixture(scope="module")
def checkpoint(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "run.h5"
    tensors = random_chain(np.random.default_rng(12), [2] * 8, [2, 4, 8, 8, 8, 4, 2])
    return write_chain(path, [t / np.linalg.norm(t) for t in tensors], pattern="/run/psi/T{site}")


def _digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns


def test_profile_json_is_the_only_stdout(checkpoint, tmp_path):
    before = _digest(checkpoint)
    r = run("profile", checkpoint, "--json", "--renyi", "2,inf", "--bond-dim", "4",
            "--spectrum", "3", "-o", tmp_path / "p.h5")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["format"] == "bondscope-profile" and doc["sites"] == 8
    assert list(doc["cuts"][3]["renyi"]) == ["2", "inf"]
    assert len(doc["cuts"][3]["schmidt_values"]) == 3
    assert doc["truncation"]["infidelity"] <= doc["truncation"]["bound"]
    assert "norm is" in r.stderr and r.stderr.startswith("warning:")
    assert _digest(checkpoint) == before          # the checkpoint's bytes are unchanged
    with h5py.File(tmp_path / "p.h5") as f:
        assert f["bondscope_profile"].attrs["format"] == "bondscope-profile"


@pytest.mark.parametrize("suffix", [".json", ".csv", ".h5"])
def test_profile_writes_output_and_table(checkpoint, tmp_path, suffix):
    out = tmp_path / f"p{suffix}"
    r = run("profile", checkpoint, "--quiet", "-o", out)
    assert r.returncode == 0 and r.stderr == ""
    assert "cut" in r.stdout.splitlines()[2] and f"profile written to {out}" in r.stdout
    assert out.is_file()


def test_inspect_and_help(checkpoint):
    r = run("inspect", checkpoint)
    assert r.returncode == 0
    assert "mps" in r.stdout and "2 4 8 8 8 4 2" in r.stdout
    info = json.loads(run("inspect", checkpoint, "--json").stdout)
    assert info["bond_dims"] == [2, 4, 8, 8, 8, 4, 2]
    assert run("--help").returncode == 0


def test_help_and_inspect_import_no_heavy_modules(checkpoint):
    code = ("import sys\nfrom bondscope._cli import main\ntry:\n    main(sys.argv[1:])\n"
            "finally:\n    print([m for m in ('scipy', 'numba', 'matplotlib', 'dask') "
            "if m in sys.modules])")
    for args in (["--help"], ["inspect", str(checkpoint)]):
        r = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True)
        assert r.stdout.strip().splitlines()[-1] == "[]", (args, r.stdout, r.stderr)


def test_demo_runs(tmp_path):
    r = run("demo", "-o", tmp_path / "demo.json", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert "profile written to" in r.stdout
    assert json.loads((tmp_path / "demo.json").read_text())["kind"] == "mps"


def _bad_bonds(tmp_path):
    path = write_chain(tmp_path / "bad.h5", random_chain(np.random.default_rng(0), [2] * 6,
                                                         [2, 4, 4, 4, 2]))
    with h5py.File(path, "a") as f:
        del f["psi/T4"]
        f["psi/T4"] = np.ones((3, 2, 2))
    return path


CLI_ERRORS = [
    # (arguments built from tmp_path, exit status, stderr fragment)
    (lambda t: ["profile", t / "none.h5"], 3, "no such file"),
    (lambda t: ["profile", _bad_bonds(t), "--tensors", "/psi/T{site}"], 3,
     "site 4: left bond 3 does not meet site 3's right bond 4"),
    (lambda t: ["profile", _bad_bonds(t), "--axes", "left,up,right"], 2,
     "unknown axis word 'up'"),
    (lambda t: ["profile", _bad_bonds(t), "--renyi", "two"], 2, "order 'two'"),
    (lambda t: ["profile", _bad_bonds(t), "--max-memory", "12Q"], 2, "size '12Q'"),
    (lambda t: ["profile", _bad_bonds(t), "--bond-dim", "0"], 2, "bond_dim (--bond-dim) must be"),
    (lambda t: ["profile"], 2, "the following arguments are required: FILE"),
    (lambda t: ["frobnicate"], 2, "invalid choice: 'frobnicate'"),
]


@pytest.mark.parametrize("make_args, status, fragment", CLI_ERRORS)
def test_cli_errors(tmp_path, make_args, status, fragment):
    r = run(*make_args(tmp_path))
    assert r.returncode == status, r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and fragment in lines[0]
    assert "Traceback" not in r.stderr and r.stdout == ""


def test_memory_refusal_exit_status(checkpoint):
    r = run("profile", checkpoint, "--max-memory", "1K")
    assert r.returncode == 4 and "needs about" in r.stderr


def test_debug_shows_traceback(tmp_path):
    r = run("profile", tmp_path / "none.h5", "--debug")
    assert r.returncode != 0 and "Traceback" in r.stderr
