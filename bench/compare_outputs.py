"""Compare the CSV outputs (and workbooks) that two checkouts of grantval write, file by file, byte for byte.

    python -m bench.compare_outputs OLD_CHECKOUT [NEW_CHECKOUT] [--ledger DIR ...] [--through DATE]

For each ledger (default: the demo ledger ``sample_grants``) it runs, with each
checkout on PYTHONPATH and the same output paths (the run sheet and the
manifest record the command line): ``expense`` (CSV files and workbook, with
the disclosure sheets), ``value``, ``disclose`` (window ``--from``..``--through``) and ``whatif`` (a small volatility and rate grid), all with
``--no-timestamp``; then it reports every output file that differs, the
workbooks part by part (exit status 1 if any differs).  Used to show that a
writer or reader change keeps every output byte for byte.
"""

from __future__ import annotations

import argparse
import os
import pathlib
import shutil
import subprocess
import sys
import tempfile
import zipfile

ROOT = pathlib.Path(__file__).resolve().parents[1]


def commands(ledger: str, start: str, through: str, out: pathlib.Path, workbooks: bool) -> dict[str, list[str]]:
    """The runs compared, by name: arguments of the ``grantval`` command line."""
    book = (lambda name: ["-o", str(out / f"{name}.xlsx")]) if workbooks else (lambda name: [])
    return {
        "expense": ["expense", ledger, "--through", through, "--csv-dir", str(out / "expense"), "--no-timestamp",
                    "--share-price", "30", *(book("expense") or ["--no-workbook"])],
        "value": ["value", ledger, "--csv-dir", str(out / "value"), "--no-timestamp", *book("value")],
        "disclose": ["disclose", ledger, "--from", start, "--through", through, "--share-price", "30", "--csv-dir",
                     str(out / "disclose"), "--no-timestamp", *book("disclose")],
        "whatif": ["whatif", ledger, "--vary", "volatility=-0.05,+0.05", "--vary", "risk_free_rate=+0.01",
                   "--through", through, "--csv-dir", str(out / "whatif"), "--no-timestamp",
                   *book("whatif")],
    }


def _files(folder: pathlib.Path) -> dict[str, bytes]:
    """Every output file under ``folder`` by relative name; a workbook as one entry per part."""
    out: dict[str, bytes] = {}
    for p in sorted(folder.rglob("*")):
        if not p.is_file():
            continue
        rel = str(p.relative_to(folder))
        if p.suffix == ".xlsx":
            with zipfile.ZipFile(p) as z:
                out.update({f"{rel}:{n}": z.read(n) for n in z.namelist()})
        else:
            out[rel] = p.read_bytes()
    return out


def run_all(checkout: pathlib.Path, ledger: str, start: str, through: str, out: pathlib.Path, workbooks: bool,
            only: list[str]) -> dict[str, bytes]:
    """Run every compared command with ``checkout``'s grantval; the files written."""
    if out.exists():
        shutil.rmtree(out)
    out.mkdir(parents=True)
    env = {**os.environ, "PYTHONPATH": str(checkout)}
    for name, args in commands(ledger, start, through, out, workbooks).items():
        if only and name not in only:
            continue
        cmd = [sys.executable, "-c", "import sys; from grantval.cli import main; main(sys.argv[1:])", *args]
        done = subprocess.run(cmd, env=env, cwd=checkout, capture_output=True, text=True)
        if done.returncode not in (0, 1):  # 1: a check failed, still compared
            raise SystemExit(f"{checkout}: grantval {' '.join(args)} exited {done.returncode}:\n{done.stderr}")
    return _files(out)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("old")
    ap.add_argument("new", nargs="?", default=str(ROOT))
    ap.add_argument("--ledger", action="append", help="ledger folder or workbook (repeatable; default the demo)")
    ap.add_argument("--from", dest="start", default="2026-01-01", help="first day of the disclosure window")
    ap.add_argument("--through", default="2026-12-31")
    ap.add_argument("--no-workbooks", action="store_true", help="compare the CSV files only")
    ap.add_argument("--only", action="append", default=[], help="run only this command (repeatable)")
    ap.add_argument("--keep", type=pathlib.Path, help="keep both checkouts' outputs in this folder (old/, new/)")
    args = ap.parse_args()
    differ = 0
    for ledger in args.ledger or [str(ROOT / "sample_grants")]:
        ledger = str(pathlib.Path(ledger).resolve())
        with tempfile.TemporaryDirectory() as tmp:
            out = pathlib.Path(tmp) / "out"
            old = run_all(pathlib.Path(args.old), ledger, args.start, args.through, out, not args.no_workbooks, args.only)
            if args.keep:
                shutil.copytree(out, args.keep / pathlib.Path(ledger).name / "old", dirs_exist_ok=True)
            new = run_all(pathlib.Path(args.new), ledger, args.start, args.through, out, not args.no_workbooks, args.only)
            if args.keep:
                shutil.copytree(out, args.keep / pathlib.Path(ledger).name / "new", dirs_exist_ok=True)
        names = sorted(old.keys() | new.keys())
        bad = [n for n in names if old.get(n) != new.get(n)]
        for n in names:
            print(f"{'DIFFERS  ' if n in bad else 'identical'} {n} ({len(new.get(n, b'')):,} bytes)")
        print(f"{ledger}: {len(bad)} of {len(names)} files or workbook parts differ")
        differ += len(bad)
    sys.exit(1 if differ else 0)


if __name__ == "__main__":
    main()
