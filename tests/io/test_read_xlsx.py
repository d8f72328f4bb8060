"""The workbook reader on awkward workbooks: sheet names, title rows, array formulas, hidden rows and columns,
stray formatting far from the data, unused shared strings, oversized files.

Invented data (tests/factory.py); the expected messages are grantval's own (common practice).
"""

import io
import pathlib
import zipfile

import openpyxl
import pytest

import grantval.io.xlsx.read as R
from grantval import api
from grantval.cli import main
from grantval.errors import LedgerError
from grantval.io import limits
from grantval.io.convert import csv_folder_to_workbook
from grantval.io.ledger_files import missing_table, read_ledger_files
from grantval.ledger.load import KNOWN_COLUMNS
from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS
from tests.factory import tables, write_ledger

EVENTS = [{"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100",
           "share_price": "15"}]


def run(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([str(a) for a in argv])
    out = capsys.readouterr()
    return exit_info.value.code, out.out + out.err


def book(tmp_path: pathlib.Path, edit=None, events=True, name="ledger.xlsx") -> pathlib.Path:
    """The invented ledger (with one event) as a workbook, edited with openpyxl when ``edit`` is given."""
    target = tmp_path / name
    csv_folder_to_workbook(write_ledger(tmp_path / "csv", tables(**({"events": EVENTS} if events else {}))),
                           target, TABLE_NAMES, TEXT_COLUMNS)
    if edit is not None:
        wb = openpyxl.load_workbook(target)
        edit(wb)
        wb.save(target)
    return target


def rezip(path: pathlib.Path, edit) -> pathlib.Path:
    """Rewrite the workbook's parts with ``edit({name: bytes})``."""
    with zipfile.ZipFile(path) as src:
        parts = {i.filename: src.read(i.filename) for i in src.infolist()}
    edit(parts)
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for name, data in parts.items():
            dst.writestr(name, data)
    path.write_bytes(out.getvalue())
    return path


def sheet_part(path: pathlib.Path, title: str) -> str:
    from grantval.io.xlsx.safety import inspect_xlsx

    return next(s.part for s in inspect_xlsx(path)[0] if s.name == title)


def _rename(title):
    def edit(wb):
        wb["grants"].title = "x"  # openpyxl would make "Grants" "Grants1" beside the sheet "grants" itself
        wb["x"].title = title
    return edit


@pytest.mark.parametrize("title", ["Grants", " GRANTS ", "grants "])
def test_sheet_names_match_whatever_their_case_and_surrounding_spaces(tmp_path, capsys, title):
    path = book(tmp_path, _rename(title))
    assert title in openpyxl.load_workbook(path, read_only=True).sheetnames
    code, text = run(["check", path], capsys)
    assert code == 0 and "3 grants, 14 tranches, 1 events; no errors" in text, text


def test_missing_grants_sheet_lists_the_sheets_found(tmp_path):
    path = book(tmp_path, lambda wb: setattr(wb["grants"], "title", "Grant register"))
    raw = read_ledger_files(path, TABLE_NAMES, KNOWN_COLUMNS)
    assert "grants" not in raw.tables
    assert missing_table(raw, "grants").message == (
        "the required table sheet grants is missing (the sheets found: 'Grant register', 'assumptions', 'events')")


def test_missing_grants_sheet_beside_events_is_a_clear_error(tmp_path, capsys):
    # before: internal error (IndexError, exit 70)
    path = book(tmp_path, lambda wb: setattr(wb["grants"], "title", "Grant register"))
    code, text = run(["check", path], capsys)
    assert code == 1 and "the required table sheet grants is missing (the sheets found: 'Grant register'" in text


def _title(merge):
    def edit(wb):
        ws = wb["grants"]
        ws.insert_rows(1)
        ws["A1"] = "Corvane grant export"
        if merge:
            ws.merge_cells("A1:F1")
    return edit


@pytest.mark.parametrize("merge", [False, True])
def test_title_row_gives_one_true_message(tmp_path, capsys, merge):
    # before: with events, an internal error (IndexError, exit 70) without the merge; with the merge,
    # the false messages "the required table sheet grants is missing" and "... sheet assumptions is missing"
    path = book(tmp_path, _title(merge))
    for command in (["check", path], ["value", path, "-o", tmp_path / "v.xlsx"]):
        code, text = run(command, capsys)
        assert code == 1, text
        assert "is missing" not in text and "internal error" not in text, text
        want = "sheet grants: the sheet has merged cells (A1:F1)" if merge else \
            "sheet grants, row 2: the header must be the first row of the table; it was found in row 2"
        assert any(ln.startswith(want) for ln in text.splitlines()), text


def _put_value(parts, part, ref, value: bytes):
    """Give the formula cell ``ref`` a saved value (openpyxl writes an empty ``<v />``)."""
    data = parts[part]
    start = data.index(f'<c r="{ref}"'.encode())
    end = data.index(b"</c>", start)
    cell = data[start:end].replace(b"<v />", b"")
    parts[part] = data[:start] + cell + b"<v>" + value + b"</v>" + data[end:]


def _array(wb):
    from openpyxl.worksheet.formula import ArrayFormula

    wb["assumptions"]["F2"] = ArrayFormula("F2", "=0.008")


def test_array_formula_without_saved_value_is_refused(tmp_path, capsys):
    # before: read as blank, so the dividend yield 0.008 silently became 0
    path = book(tmp_path, _array)
    code, text = run(["check", path], capsys)
    assert code == 1
    assert "sheet assumptions, row 2, dividend_yield: the cell holds a formula (array formula {=0.008}) with no " \
        "saved value" in text, text


def test_array_formula_with_saved_value_is_used_with_a_warning(tmp_path):
    path = book(tmp_path, _array)
    rezip(path, lambda parts: _put_value(parts, sheet_part(path, "assumptions"), "F2", b"0.008"))
    report = api.check(path)
    assert report.ok, report.errors
    assert [str(p) for p in report.warnings] == [
        ("sheet assumptions, row 2, dividend_yield: warning: the cell holds a formula (array formula {=0.008}); its "
        "saved value 0.008 was used")]
    assert report.ledger.assumptions["dividend_yield"].iloc[0] == 0.008


def _hide_fair_value(wb):
    ws = wb["assumptions"]
    ws["K2"] = 0.01
    ws.column_dimensions["K"].hidden = True


def test_hidden_column_with_data_is_named_in_a_warning(tmp_path, capsys):
    # before: a hidden fair_value of 0.01 revalued every grant of that date without a word
    path = book(tmp_path, _hide_fair_value)
    code, text = run(["check", path], capsys)
    assert code == 0, text
    assert "sheet assumptions, fair_value: warning: column K is hidden; its data was read and is used" in text


def _hide_rows(wb):
    ws = wb["grants"]
    ws.row_dimensions[3].hidden = True
    ws.auto_filter.ref = "A1:M4"
    ws.row_dimensions[4].hidden = True  # filtered out
    ws.column_dimensions["Z"].hidden = True  # hidden but empty: no warning


def test_hidden_and_filtered_rows_are_named_in_a_warning(tmp_path):
    path = book(tmp_path, _hide_rows)
    report = api.check(path)
    assert report.ok, report.errors
    assert [str(p) for p in report.warnings] == [
        ("sheet grants: warning: rows 3-4 are hidden or filtered out; the data was read and is used like that of "
        "the visible rows")]
    assert report.ledger.n_grants == 3


def _styled(ref):
    def edit(wb):
        from openpyxl.styles import Font

        wb["grants"][ref].font = Font(bold=True)  # formatted, no value
    return edit


def _counting(monkeypatch):
    """Record how many rows and cells the workbook reader hands to the table builder."""
    seen = {"rows": 0, "cells": 0}
    build = R._table_from_rows

    def counting(name, source, rows, *args, **kw):
        def each():
            for number, row in rows:
                seen["rows"] += 1
                seen["cells"] += len(row)
                yield number, row
        return build(name, source, each(), *args, **kw)
    monkeypatch.setattr(R, "_table_from_rows", counting)
    return seen


def test_formatted_empty_cell_far_away_costs_nothing(tmp_path, monkeypatch):
    # small-scale form of the 12 KB workbook with a formatted cell at XFD1048576: before, every empty row up
    # to the cell was handed on, each padded to the cell's column
    path = book(tmp_path, _styled("AZ3000"), events=False)
    seen = _counting(monkeypatch)
    assert api.check(path).ok
    assert seen["rows"] <= 4 + 3 and seen["cells"] <= 13 * 4 + 11 * 3  # grants and assumptions rows only


def test_formatted_cell_at_the_last_cell_of_a_sheet(tmp_path, monkeypatch):
    path = book(tmp_path, _styled("XFD1048576"))
    assert path.stat().st_size < 20_000
    seen = _counting(monkeypatch)
    report = api.check(path)
    assert report.ok and report.ledger.n_grants == 3
    assert seen["rows"] <= 4 + 3 + 2


def test_value_past_the_column_limit_is_refused(tmp_path, monkeypatch):
    monkeypatch.setattr(limits, "MAX_COLUMNS", 20)
    path = book(tmp_path, lambda wb: wb["grants"].cell(3, 25, "stray"))
    report = api.check(path)
    assert [str(p) for p in report.errors] == [
        "sheet grants: cells beyond column T hold values (Y3); a table has at most 20 columns"]


def _shared_strings(path: pathlib.Path, unused: int) -> pathlib.Path:
    """Store grant id G1 as a shared string, with ``unused`` more strings no cell refers to."""
    part = sheet_part(path, "grants")

    def edit(parts):
        data = parts[part]
        start = data.index(b'<c r="A2"')
        end = data.index(b"</c>", start) + 4
        assert b"G1" in data[start:end]
        parts[part] = data[:start] + b'<c r="A2" t="s"><v>0</v></c>' + data[end:]
        parts["xl/sharedStrings.xml"] = (b'<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
                                         b"<si><t>G1</t></si>" + b"<si><t>x</t></si>" * unused + b"</sst>")
        parts["[Content_Types].xml"] = parts["[Content_Types].xml"].replace(b"</Types>", (
            b'<Override PartName="/xl/sharedStrings.xml" ContentType="application/vnd.openxmlformats-'
            b'officedocument.spreadsheetml.sharedStrings+xml"/></Types>'))
    return rezip(path, edit)


def test_unused_shared_strings_are_refused_before_loading(tmp_path, monkeypatch):
    # small-scale form of the workbook with 8 million unused shared strings (115 s, 1.35 GB before)
    monkeypatch.setattr(limits, "SHARED_STRING_SLACK", 50)
    path = _shared_strings(book(tmp_path), 500)
    with pytest.raises(LedgerError) as info:
        api.check(path)
    assert "ledger.xlsx: the workbook's shared-string table holds 501 strings but its sheets have only" in \
        str(info.value)


def test_used_shared_strings_are_read(tmp_path, monkeypatch):
    monkeypatch.setattr(limits, "SHARED_STRING_SLACK", 50)
    path = _shared_strings(book(tmp_path), 20)
    report = api.check(path)
    assert report.ok, report.errors
    assert list(report.ledger.grants["grant_id"]) == ["G1", "G2", "G3"]


def test_oversized_workbook_message_shows_real_sizes(tmp_path, monkeypatch, capsys):
    import os

    path = rezip(book(tmp_path), lambda parts: parts.update({"xl/media/padding.bin": os.urandom(3 * 2**19)}))
    size = path.stat().st_size
    monkeypatch.setenv("GRANTVAL_MAX_FILE_MB", "1")
    code, text = run(["check", path], capsys)
    assert code == 1
    assert f"ledger.xlsx: the file is 1.5 MiB ({size:,} bytes), larger than the limit of 1.0 MiB" in text, text


@pytest.mark.parametrize("written, read", [("G_x000C_1", "G\f1"), ("G_x005F_x000C_1", "G_x000C_1"), ("G_x1", "G_x1")])
def test_office_escapes_are_decoded(tmp_path, written, read):
    # ECMA-376 Part 1, 22.9.2.19 (ST_Xstring): _xHHHH_ stands for the character U+HHHH; before, the escape was
    # read literally, so a form feed Excel wrote in an id passed every check
    path = book(tmp_path, events=False)
    part = sheet_part(path, "grants")
    rezip(path, lambda parts: parts.update({part: parts[part].replace(b"<t>G1</t>", f"<t>{written}</t>".encode())}))
    tables, problems = R.read_xlsx(path, ("grants",))
    assert tables["grants"].cells[0][0] == read


def test_saved_values_are_shown_as_a_person_types_them():
    # close-ready issue, item 6: warnings showed datetime.date(2033, 3, 14)
    import datetime as dt

    from grantval.io.xlsx.read import _as_typed

    assert _as_typed(dt.datetime(2033, 3, 14)) == "2033-03-14"
    assert _as_typed(dt.date(2033, 3, 14)) == "2033-03-14"
    assert _as_typed(0.008) == "0.008"
