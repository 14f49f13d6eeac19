"""Hostile inputs to batch, saved profiles and outputs: how many are handled cleanly.

Each case builds small files in a fresh directory, runs one ``bondscope`` command
(as a subprocess, with the bondscope found on PYTHONPATH) and judges the outcome:
*handled* means a documented exit status, at most one ``error:`` line naming the
file and no traceback, nothing written over an input, no raw control character on
the terminal, no formula cell in a CSV, and a result that is right (a refused
missing source, a redone stale result).

    python scripts/hostile_outputs.py                 # this checkout
    PYTHONPATH=/other/src python scripts/hostile_outputs.py --tree /other/src

prints one line per case and the figure "handled / tried" (docs/hostile-inputs.md).
"""

import argparse
import csv
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parents[1]
FORMULA = ("=", "+", "-", "@", "\t", "\r")
CONTROL = ("\x1b", "\x07", "\u202e")


def chain(path, seed=0, attrs=None, pattern="psi/T{site}", libver=None):
    rng = np.random.default_rng(seed)
    bonds = [1, 2, 4, 4, 4, 2, 1]
    with h5py.File(path, "w", libver=libver) as f:
        f.attrs.update(attrs or {})
        for i in range(6):
            f[pattern.format(site=i)] = rng.standard_normal((bonds[i], 2, bonds[i + 1]))
    return path


def run(tree, *args, cwd):
    env = dict(os.environ, PYTHONPATH=str(tree), OMP_NUM_THREADS="1")
    r = subprocess.run([sys.executable, "-m", "bondscope", *map(str, args)], cwd=cwd, env=env,
                       capture_output=True, text=True, timeout=120, check=False)
    return r.returncode, r.stdout, r.stderr


def clean_error(result, code, words):
    rc, _, err = result
    lines = [line for line in err.splitlines() if line.startswith("error: ")]
    return (rc == code and len(lines) == 1 and "Traceback" not in err and "--debug" not in err
            and all(w in lines[0] for w in words))


def no_control(result):
    return not any(c in result[1] + result[2] for c in CONTROL)


def profile_doc(d, tree):
    chain(d / "ck.h5")
    run(tree, "profile", "ck.h5", "--spectrum", "-o", "p.json", cwd=d)
    run(tree, "profile", "ck.h5", "--spectrum", "-o", "p.h5", cwd=d)
    run(tree, "profile", "ck.h5", "--spectrum", "-o", "p.csv", cwd=d)
    return json.loads((d / "p.json").read_text())


def saved_case(kind, edit, words):
    def case(d, tree):
        doc = profile_doc(d, tree)
        name = f"bad.{kind}"
        if kind == "json":
            text = edit(doc)
            (d / name).write_text(text if isinstance(text, str) else json.dumps(text))
        elif kind == "h5":
            os.replace(d / "p.h5", d / name)
            with h5py.File(d / name, "a") as f:
                edit(f["bondscope_profile"])
        else:
            (d / name).write_text(edit((d / "p.csv").read_text()))
        return clean_error(run(tree, "budget", name, "--total", "1e-6", cwd=d), 3,
                           [name, *words])
    return case


def _offsets(group):
    del group["schmidt_offsets"]
    group["schmidt_offsets"] = np.array([0, 5, 99999])


def vds(d, source_dataset="psi"):
    rng = np.random.default_rng(1)
    amps = rng.standard_normal(2**8)
    with h5py.File(d / "amps.h5", "w") as f:
        f["psi"] = amps
    layout = h5py.VirtualLayout(shape=amps.shape, dtype="f8")
    layout[:] = h5py.VirtualSource("amps.h5", source_dataset, shape=amps.shape)
    with h5py.File(d / "state.h5", "w") as f:
        f.create_virtual_dataset("psi", layout, fillvalue=0.0)


def case_vds_missing(d, tree):
    vds(d)
    (d / "amps.h5").unlink()
    return clean_error(run(tree, "profile", "state.h5", cwd=d), 3, ["amps.h5"])


def case_vds_dataset(d, tree):
    vds(d, source_dataset="nothere")
    return clean_error(run(tree, "profile", "state.h5", cwd=d), 3, ["nothere"])


def redone_after_change(d, tree, make, target, *flags):
    make(d)
    run(tree, "batch", "state.h5", "--out", "out", "--workers", "1", "--quiet", *flags, cwd=d)
    stamp = os.stat(d / target).st_mtime_ns + 10**9
    with h5py.File(d / target, "a") as f:
        f.attrs["edited"] = 1
    os.utime(d / target, ns=(stamp, stamp))
    _, out, _ = run(tree, "batch", "state.h5", "--out", "out", "--workers", "1", "--quiet",
                     *flags, cwd=d)
    return "1 done, 0 skipped" in out


def external(d):
    with h5py.File(d / "target.h5", "w") as f:
        f["amps"] = np.random.default_rng(3).standard_normal(2**8)
    with h5py.File(d / "state.h5", "w") as f:
        f["psi"] = h5py.ExternalLink("target.h5", "/amps")


def case_fifo(d, tree):
    chain(d / "good.h5")
    os.mkfifo(d / "stuck.h5")
    try:
        rc, _, err = run(tree, "batch", "good.h5", "stuck.h5", "--out", "out", "--workers",
                           "1", "--quiet", "--time-limit", "2", cwd=d)
    except subprocess.TimeoutExpired:
        return False
    return rc == 5 and "failed: stuck.h5: " in err  # refused or stopped, never a hang


def case_big_attr(d, tree):
    chain(d / "big.h5", attrs={"time": np.arange(200000.0)}, libver="latest")
    run(tree, "batch", "big.h5", "--out", "out", "--workers", "1", "--quiet", cwd=d)
    size = sum(p.stat().st_size for p in (d / "out").rglob("*") if p.is_file())
    return size < 200_000  # the attribute alone is 1.6 MB


def formula_free(path):
    with open(path, newline="", encoding="utf-8") as f:
        for cell in (c for r in csv.reader(f) for c in r):
            if cell.startswith(FORMULA):
                try:
                    float(cell)
                except ValueError:
                    return False
    return True


def case_csv_attr(d, tree):
    chain(d / "a.h5", attrs={"label": '=HYPERLINK("http://x","y")', "time_unit": "-2+cmd"})
    run(tree, "batch", "a.h5", "--out", "out", "--workers", "1", "--quiet", "--group-attr",
        "label", cwd=d)
    return formula_free(d / "out" / "summary.csv")


def case_csv_name(d, tree):
    chain(d / "=cmd.h5")
    chain(d / "@sum.h5", 1)
    run(tree, "batch", "=cmd.h5", "@sum.h5", "--out", "out", "--workers", "1", "--quiet",
        cwd=d)
    return formula_free(d / "out" / "summary.csv")


ESC = "esc\x1b]0;owned\x07\x1b[2J.h5"


def case_esc_error(d, tree):
    (d / ESC).write_bytes(b"garbage")
    result = run(tree, "profile", ESC, cwd=d)
    return result[0] == 3 and no_control(result)


def case_name_table(name):
    def case(d, tree):
        chain(d / name)
        result = run(tree, "profile", name, cwd=d)
        return result[0] == 0 and no_control(result)
    return case


def case_esc_dataset(d, tree):
    chain(d / "ck.h5", pattern="psi\x1b[2J/T{site}")
    result = run(tree, "profile", "ck.h5", cwd=d)
    return result[0] == 0 and no_control(result)


def case_batch_esc(d, tree):
    (d / ESC).write_bytes(b"garbage")
    chain(d / "ok.h5")
    result = run(tree, "batch", ESC, "ok.h5", "--out", "out", "--workers", "1", "--quiet",
                 cwd=d)
    return no_control(result)


def case_output_parent_file(d, tree):
    chain(d / "ck.h5")
    (d / "afile").write_text("x")
    result = run(tree, "profile", "ck.h5", "-o", "afile/p.json", "--quiet", cwd=d)
    return clean_error(result, 3, ["afile/p.json"]) and ".part" not in result[2]


def case_stale_part(d, tree):
    chain(d / "ck.h5")
    stale = d / ".p.json.abcd1234.part"
    stale.write_text("{")
    old = time.time() - 2 * 3600
    os.utime(stale, (old, old))
    run(tree, "profile", "ck.h5", "-o", "p.json", "--quiet", cwd=d)
    return not stale.exists()


def case_concurrent(d, tree):
    chain(d / "a.h5")
    run(tree, "batch", "a.h5", "--out", "out", "--workers", "1", "--quiet", cwd=d)
    live = next((d / "out" / "profiles").glob("*.json"))
    other = live.parent / f".{live.name}.zz99yy88.part"  # another batch writing it now
    other.write_text("{")
    run(tree, "batch", "a.h5", "--out", "out", "--workers", "1", "--quiet", "--force", cwd=d)
    return other.exists()


def case_exit_status(d, tree):
    chain(d / "a.h5")
    (d / "b.h5").write_bytes(b"garbage")
    rc, out, _ = run(tree, "batch", "a.h5", "b.h5", "--out", "out", "--workers", "1",
                     "--quiet", cwd=d)
    return rc not in (1, 2, 3, 4) and rc != 0 and "1 failed" in out


def case_profile_saved(d, tree):
    profile_doc(d, tree)
    rc, out, _ = run(tree, "profile", "p.json", cwd=d)
    return rc == 0 and "max S =" in out


def case_profile_dir(d, tree):
    (d / "scan").mkdir()
    chain(d / "scan" / "a.h5")
    return clean_error(run(tree, "profile", "scan", cwd=d), 2, ["bondscope batch"])


def case_profile_many(d, tree):
    chain(d / "a.h5")
    chain(d / "b.h5", 1)
    return clean_error(run(tree, "profile", "a.h5", "b.h5", cwd=d), 2, ["bondscope batch"])


def case_chi_attr(d, tree):
    for chi in (4, 8, 16, 32):
        chain(d / f"run_chi{chi}.h5", chi, attrs={"chi": str(chi), "run": "A"})
    rc, _, _ = run(tree, "batch", *[f"run_chi{c}.h5" for c in (16, 32, 4, 8)], "--out", "out",
                   "--workers", "1", "--quiet", "--group-attr", "run", "--bond-dim-attr",
                   "chi", cwd=d)
    if rc != 0:
        return False
    members = json.loads((d / "out" / "series.json").read_text())["series"]["A"]
    return [m["bond_dim"] for m in members] == ["4", "8", "16", "32"]


def case_plot(name, attrs, output=None, code=0):
    def case(d, tree):
        chain(d / name, attrs=attrs)
        before = (d / name).read_bytes()
        rc, _, err = run(tree, "plot", name, "--kind", "entropy", "-o",
                           output or "fig.png", cwd=d)
        return rc == code and "Traceback" not in err and (d / name).read_bytes() == before
    return case


CASES = [
    ("saved profile: JSON nested 100000 deep", saved_case(
        "json", lambda doc: '{"a":' * 100000 + "1" + "}" * 100000, ["nested"])),
    ("saved profile: local_dims 0", saved_case(
        "json", lambda doc: dict(doc, local_dims=[0] * 6), ["local_dims"])),
    ("saved profile: sites 1e12", saved_case(
        "json", lambda doc: dict(doc, sites=10**12), ["sites"])),
    ("saved profile: bad schmidt_offsets", saved_case("h5", _offsets, ["schmidt_offsets"])),
    ("saved profile: no header_json", saved_case(
        "h5", lambda g: g.attrs.__delitem__("header_json"), ["header_json"])),
    ("saved profile: bad CSV cell", saved_case(
        "csv", lambda t: t.replace("\n1,", "\nabc,", 1), ["abc"])),
    ("saved profile: CSV header not JSON", saved_case(
        "csv", lambda t: "# {oops\n" + t.split("\n", 1)[1], ["header"])),
    ("virtual dataset, source file missing", case_vds_missing),
    ("virtual dataset, source dataset missing", case_vds_dataset),
    ("batch resume after a VDS source changed", lambda d, t: redone_after_change(
        d, t, vds, "amps.h5")),
    ("batch resume after an external link's file changed", lambda d, t: redone_after_change(
        d, t, external, "target.h5", "--state", "/psi")),
    ("batch: a FIFO named as a checkpoint", case_fifo),
    ("batch: a 1.6 MB time attribute", case_big_attr),
    ("CSV: formula in an attribute", case_csv_attr),
    ("CSV: formula in a file name", case_csv_name),
    ("terminal: escapes in a file name (error)", case_esc_error),
    ("terminal: escapes in a file name (table)", case_name_table(ESC)),
    ("terminal: right-to-left override in a name", case_name_table("run\u202eh5.exe.h5")),
    ("terminal: escapes in a dataset name", case_esc_dataset),
    ("terminal: escapes in a batch failure line", case_batch_esc),
    ("output: folder is a file (names the output)", case_output_parent_file),
    ("output: stale .part of a killed writer", case_stale_part),
    ("output: another batch's live .part", case_concurrent),
    ("batch: exit status with one failure", case_exit_status),
    ("profile on a saved profile", case_profile_saved),
    ("profile on a directory", case_profile_dir),
    ("profile on several files", case_profile_many),
    ("series named by a chi attribute", case_chi_attr),
    ("plot: $\\foo$ in a file name", case_plot("$\\foo$.h5", {})),
    ("plot: boundary = [1, 2]", case_plot("odd.h5", {"boundary": [1, 2], "time": [1, 2]})),
    ("plot: output over the input", case_plot("ck.pdf", {}, output="ck.pdf", code=2)),
]


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--tree", default=str(ROOT / "src"),
                        help="source tree whose bondscope is run (default this checkout)")
    args = parser.parse_args()
    handled = 0
    for name, case in CASES:
        with tempfile.TemporaryDirectory() as tmp:
            try:
                ok = bool(case(Path(tmp), args.tree))
            except Exception as exc:  # noqa: BLE001 (a case that cannot be judged is unhandled)
                ok, name = False, f"{name} ({type(exc).__name__})"
        handled += ok
        print(f"{'handled' if ok else 'NOT    '}  {name}")
    print(f"{handled} / {len(CASES)} handled")


if __name__ == "__main__":
    main()
