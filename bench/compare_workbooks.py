"""Compare the expense workbook written by two checkouts of grantval, part by part (sheet XML included).

    python -m bench.compare_workbooks OLD_CHECKOUT [NEW_CHECKOUT] [--ledger sample_grants] [EXPENSE OPTIONS...]

Runs ``grantval expense LEDGER -o expense.xlsx --no-timestamp OPTIONS`` with
each checkout on PYTHONPATH (same output path, since the run sheet records the
command line), unzips both workbooks and reports every part that differs
(exit status 1 if any does).  Used to show that a writer change keeps the
workbook's content byte for byte.
"""

from __future__ import annotations

import argparse
import os
import pathlib
import subprocess
import sys
import tempfile
import zipfile


def _write(checkout: pathlib.Path, ledger: str, extra: list[str], out: pathlib.Path) -> dict[str, bytes]:
    """Write the workbook with ``checkout``'s grantval; its parts by name."""
    env = {**os.environ, "PYTHONPATH": str(checkout)}
    cmd = [sys.executable, "-c", "import sys; from grantval.cli import main; main(sys.argv[1:])", "expense", ledger, "-o", str(out), "--no-timestamp", *extra]
    subprocess.run(cmd, check=True, env=env, cwd=checkout, capture_output=True)
    with zipfile.ZipFile(out) as z:
        return {n: z.read(n) for n in z.namelist()}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("old")
    ap.add_argument("new", nargs="?", default=str(pathlib.Path(__file__).resolve().parents[1]))
    ap.add_argument("--ledger", default="sample_grants")
    args, extra = ap.parse_known_args()
    ledger = pathlib.Path(args.ledger)
    ledger = str(ledger.resolve() if ledger.exists() else pathlib.Path(args.new) / ledger)
    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "expense.xlsx"
        old = _write(pathlib.Path(args.old), ledger, extra, out)
        new = _write(pathlib.Path(args.new), ledger, extra, out)
    names = sorted(old.keys() | new.keys())
    differ = [n for n in names if old.get(n) != new.get(n)]
    for n in names:
        print(f"{'DIFFERS  ' if n in differ else 'identical'} {n} ({len(new.get(n, b'')):,} bytes)")
    print(f"{len(differ)} of {len(names)} parts differ")
    sys.exit(1 if differ else 0)


if __name__ == "__main__":
    main()
