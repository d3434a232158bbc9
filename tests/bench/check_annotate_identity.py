"""Check (by hand) that the annotated figures of this tree equal those of a git revision to the bit.

    python tests/bench/check_annotate_identity.py [--baseline REV] [--big PATH] [--no-touch] [--table]

Annotates the same chains with this working tree's core/ and with the core/ of
``REV`` (default ``main``, exported with ``git archive`` and imported in a child
process), then compares every column of the contract table and of the expiry
table: float columns with ``np.array_equal(..., equal_nan=True)`` on their bit
patterns (so -0.0 and 0.0, and any NaN payload, count as different), other
columns with ``Series.equals``; also the findings' texts. Chains: the demo
chains (on the three time bases, and with the file's vols), a 20,000-contract
synthetic chain (bench_pipeline.synthetic_snapshot) and, if ``--big`` names a
file (tests/bench/bench_table.write_chain makes one), that file. Touch figures
(``fill_touch``) are compared too (``--no-touch`` leaves them out). ``--table`` also runs ``chaintriage table`` of both revisions (core/,
tui/, themes/ and demo_chains/ of REV) on the demo chains (csv, plain and json, on the
default and the calendar basis) and on the big file (csv and plain) and compares the
output byte for byte. Exits 1 if anything differs, printing each difference.
"""

from __future__ import annotations

import argparse
import os
import pickle
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))


def _chains(big: str | None, touch: bool):
    """(name, snapshot loader, settings kwargs, fill touch) for every chain compared."""
    demo = REPO / "demo_chains"
    out = []
    for f in ("tsbh_2026-12-01.csv", "ospx_2026-12-01.csv", "messy_export.csv"):
        for kw in ({}, {"basis": "365"}, {"basis": "250"}, {"use_file_iv": True}):
            out.append((f"{f} {kw}", ("file", str(demo / f)), kw, touch))
    out.append(("synthetic 20k", ("synthetic", 20_000), {}, touch))
    if big:
        out.append((f"{big}", ("file", big), {}, touch))
    return out


def dump(big: str | None, touch: bool, path: str) -> None:
    """Annotate every chain with the chaintriage importable here; pickle the figures to ``path``."""
    from chaintriage.core.loading import load_files
    from chaintriage.core import pipeline
    from chaintriage.core.pipeline import PipelineSettings, annotate

    print(f"annotating with {pipeline.__file__}", file=sys.stderr)
    got = {}
    for name, (kind, arg), kw, fill in _chains(big, touch):
        if kind == "file":
            snaps = load_files([arg]).snapshots
        else:
            from bench_pipeline import synthetic_snapshot

            snaps = [synthetic_snapshot(arg, 50)]
        for i, snap in enumerate(snaps):
            a = annotate(snap, PipelineSettings(**kw))
            if fill:
                a.fill_touch()
            got[f"{name} [{i}]"] = (a.contracts, a.expiries, [str(f) for f in a.findings])
    with open(path, "wb") as fh:
        pickle.dump(got, fh)


def _same_column(a: pd.Series, b: pd.Series) -> bool:
    if a.dtype != b.dtype or len(a) != len(b):
        return False
    if a.dtype == np.float64:
        x, y = a.to_numpy(), b.to_numpy()
        return bool(np.array_equal(np.isnan(x), np.isnan(y))
                    and np.array_equal(x.view(np.int64)[~np.isnan(x)], y.view(np.int64)[~np.isnan(y)]))
    return bool(a.reset_index(drop=True).equals(b.reset_index(drop=True)))


def compare(before: dict, after: dict) -> list[str]:
    bad = []
    for key in before:
        if key not in after:
            bad.append(f"{key}: missing")
            continue
        for part, tb, ta in (("contracts", before[key][0], after[key][0]), ("expiries", before[key][1], after[key][1])):
            if list(tb.columns) != list(ta.columns):
                bad.append(f"{key} {part}: columns differ")
                continue
            for c in tb.columns:
                if not _same_column(tb[c], ta[c]):
                    bad.append(f"{key} {part}.{c} differs")
        if before[key][2] != after[key][2]:
            bad.append(f"{key}: findings differ")
    return bad


def table_runs(big: str | None) -> list[list[str]]:
    demo = REPO / "demo_chains"
    runs = [[str(demo / f), "--format", fmt, *extra]
            for f in ("tsbh_2026-12-01.csv", "ospx_2026-12-01.csv", "messy_export.csv")
            for fmt in ("csv", "plain", "json") for extra in ([], ["--basis", "365"])]
    runs.append([str(demo / "tsbh_2026-12-01.csv"), str(demo / "ospx_2026-12-01.csv"), "--format", "csv"])
    if big:
        runs += [[big, "--format", "csv", "--quiet"], [big, "--format", "plain", "--quiet"]]
    return runs


def compare_tables(root: str, big: str | None) -> list[str]:
    """``chaintriage table`` of the package under ``root`` against this tree's, byte for byte (stdout and exit status)."""
    bad = []
    for args in table_runs(big):
        got = []
        for where in (root, None):
            pre = f"import sys; sys.path.insert(0, {where!r}); " if where else "import sys; "
            code = pre + "from chaintriage.tui.cli.main import main; sys.exit(main(sys.argv[1:]))"
            r = subprocess.run([sys.executable, "-c", code, "table", *args], capture_output=True)
            got.append((r.returncode, r.stdout))
        if got[0] != got[1]:
            bad.append("table " + " ".join(Path(a).name for a in args) + ": output differs")
    print(f"{len(table_runs(big))} table runs compared byte for byte")
    return bad


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--baseline", default="main", metavar="REV")
    ap.add_argument("--big", metavar="PATH", help="a big chain file to compare too")
    ap.add_argument("--no-touch", action="store_true")
    ap.add_argument("--table", action="store_true", help="compare `chaintriage table` output byte for byte too")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        pkg = Path(tmp) / "rev" / "chaintriage"
        pkg.mkdir(parents=True)
        (pkg / "__init__.py").write_text("")
        parts = ["core", "tui", "themes", "demo_chains"] if args.table else ["core"]
        archive = subprocess.run(["git", "-C", str(REPO), "archive", args.baseline, *parts], capture_output=True,
                                 check=True)
        subprocess.run(["tar", "-x", "-C", str(pkg)], input=archive.stdout, check=True)
        files = {}
        for label, root in (("baseline", str(pkg.parent)), ("now", None)):
            env = dict(os.environ)
            if root:
                env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
            files[label] = os.path.join(tmp, label + ".pkl")
            code = (f"import sys; sys.path.insert(0, {str(HERE)!r}); import check_annotate_identity as c; "
                    f"c.dump({args.big!r}, {not args.no_touch!r}, {files[label]!r})")
            subprocess.run([sys.executable, "-c", code], check=True, env=env)
        with open(files["baseline"], "rb") as fh:
            before = pickle.load(fh)
        with open(files["now"], "rb") as fh:
            after = pickle.load(fh)
        bad = compare(before, after)
        if args.table:
            bad += compare_tables(str(pkg.parent), args.big)
    n_cols = sum(len(v[0].columns) + len(v[1].columns) for v in before.values())
    for line in bad:
        print(line)
    print(f"{len(before)} annotated chains, {n_cols} columns compared against {args.baseline}: "
          f"{'all identical to the bit' if not bad else f'{len(bad)} differences'}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
