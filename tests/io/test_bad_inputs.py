"""Every command on every case of the bad-input corpus (tests/bad_inputs/, built by its build.py).

Each rejected case must make every ledger-reading command exit 1 (data) or 2
(usage), print the expected message at the expected file or sheet, row and
column, print no traceback and write no output file.  Accepted cases must give
the clean ledger's fair values.
"""

import json
import pathlib

import pytest

from grantval import api
from grantval.cli import main

CORPUS = pathlib.Path(__file__).resolve().parents[1] / "bad_inputs"
REJECTED = sorted(p for p in (CORPUS / "rejected").iterdir() if p.is_dir())
ACCEPTED = sorted(p for p in (CORPUS / "accepted").iterdir() if p.is_dir())


def ledger_of(case: pathlib.Path) -> pathlib.Path:
    book = case / "ledger.xlsx"
    return book if book.exists() else case


def run(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([str(a) for a in argv])
    out = capsys.readouterr()
    return exit_info.value.code, out.out + out.err


COMMANDS = {
    "check": lambda led, out: ["check", led],
    "value": lambda led, out: ["value", led, "-o", out / "v.xlsx", "--csv-dir", out / "csv"],
    "expense": lambda led, out: ["expense", led, "--through", "2028-12-31", "-o", out / "e.xlsx", "--csv-dir", out / "csv"],
    "disclose": lambda led, out: ["disclose", led, "--from", "2027-01-01", "--through", "2028-12-31",
                                  "-o", out / "d.xlsx", "--csv-dir", out / "csv"],
    "whatif": lambda led, out: ["whatif", led, "--vary", "volatility=+0.05", "-o", out / "w.xlsx"],
}


def test_corpus_size():
    # README ("Robustness"): 111 rejected ledgers (87 CSV, 24 xlsx) and 7 accepted ones; an
    # empty ACCEPTED list would otherwise leave the parametrized test below with no cases
    assert len(REJECTED) == 111
    assert sum((p / "ledger.xlsx").exists() for p in REJECTED) == 24
    assert len(ACCEPTED) == 7


@pytest.mark.parametrize("case", REJECTED, ids=[p.name for p in REJECTED])
def test_rejected_case(case, tmp_path, capsys):
    expect = json.loads((case / "expect.json").read_text())

    def located(line: str) -> bool:
        """The line names the expected file or sheet first, then the row and column given."""
        ok = expect["source"] is None or line.startswith(expect["source"] + ",") or \
            line.startswith(expect["source"] + ":")
        if expect["row"] is not None:
            ok &= f", row {expect['row']}" in line
        if expect["column"] is not None:
            ok &= f", {expect['column']}:" in line
        return ok
    for name, argv in COMMANDS.items():
        out = tmp_path / name
        out.mkdir()
        code, text = run(argv(ledger_of(case), out), capsys)
        assert code in (1, 2), f"{name}: exit {code}\n{text}"
        assert "Traceback" not in text and "internal error" not in text, f"{name}:\n{text}"
        lines = [ln for ln in text.splitlines() if expect["fragment"] in ln]
        assert lines, f"{name}: {expect['fragment']!r} not in\n{text}"
        assert any(located(ln) for ln in lines), f"{name}: not at {expect}:\n" + "\n".join(lines)
        assert not [p for p in out.rglob("*") if p.is_file()], f"{name} wrote a file"


@pytest.mark.parametrize("case", ACCEPTED, ids=[p.name for p in ACCEPTED])
def test_accepted_case_gives_the_clean_results(case, tmp_path):
    from tests.factory import tables, write_ledger

    clean = api.value(write_ledger(tmp_path / "clean", tables())).fair_values.table
    got = api.value(case).fair_values.table
    assert got.equals(clean)


def test_hundred_megabyte_file_is_refused_quickly(tmp_path, capsys):
    import time

    from tests.factory import tables, write_ledger

    folder = write_ledger(tmp_path / "big", tables())
    with open(folder / "grants.csv", "ab") as fh:
        line = b"G" * 99 + b"\n"
        for _ in range(100 * 2**20 // len(line) // 1024 + 1):
            fh.write(line * 1024)
    assert (folder / "grants.csv").stat().st_size >= 100 * 2**20
    t0 = time.perf_counter()
    code, text = run(["check", folder], capsys)
    assert code == 1 and "larger than the limit" in text and "grants.csv" in text
    assert time.perf_counter() - t0 < 10


def test_entity_expansion_workbook_is_refused_with_bounded_memory(capsys):
    import resource
    import time

    case = CORPUS / "rejected" / "xlsx_entity_expansion" / "ledger.xlsx"
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t0 = time.perf_counter()
    code, text = run(["check", case], capsys)
    assert code == 1 and "declares XML entities" in text
    assert time.perf_counter() - t0 < 5
    assert resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before < 200 * 1024  # KiB


def _workbook_declaring_an_entity(folder: pathlib.Path, declare: bool) -> pathlib.Path:
    """The clean ledger as a workbook; with ``declare``, its sheets declare one small, harmless XML entity."""
    import io
    import zipfile

    from grantval.io.convert import csv_folder_to_workbook
    from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS
    from tests.factory import tables, write_ledger

    book = folder / "ledger.xlsx"
    csv_folder_to_workbook(write_ledger(folder / "csv", tables()), book, TABLE_NAMES, TEXT_COLUMNS)
    out = io.BytesIO()
    with zipfile.ZipFile(book) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = src.read(info.filename)
            if declare and info.filename.startswith("xl/worksheets/"):
                data = data.replace(b"<worksheet ", b'<!DOCTYPE worksheet [<!ENTITY e "x">]><worksheet ', 1)
            dst.writestr(info, data)
    book.write_bytes(out.getvalue())
    return book


def test_entities_past_grantvals_part_scan_are_still_refused_by_its_reader(tmp_path, monkeypatch, capsys):
    # the second line of defence (README, "Bad input"): with grantval's own part scan
    # (grantval.io.read.inspect_xlsx) blinded to entity declarations, grantval's reader
    # still refuses the workbook, because openpyxl parses sheet XML through defusedxml,
    # and reports it as grantval's own located message, exit 1, no traceback
    import grantval.io.xlsx.safety as R

    clean = _workbook_declaring_an_entity(tmp_path / "clean", declare=False)
    assert run(["check", clean], capsys)[0] == 0  # the same ledger without the declaration is clean
    book = _workbook_declaring_an_entity(tmp_path / "declared", declare=True)
    code, text = run(["check", book], capsys)
    assert code == 1 and "ledger.xlsx: the workbook part xl/worksheets/sheet1.xml declares XML entities" in text
    scan = R._scan_part
    monkeypatch.setattr(R, "_scan_part", lambda zf, name, needles: set() if b"<!ENTITY" in needles
                        else scan(zf, name, needles))
    code, text = run(["check", book], capsys)
    assert code == 1, text
    assert "ledger.xlsx: the workbook cannot be read (" in text, text
    assert "declares XML entities" not in text and "Traceback" not in text
