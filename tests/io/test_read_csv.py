"""The CSV reader on damaged files: stray quotes, encodings, NUL bytes, long fields, invisible characters, names.

Invented data (tests/factory.py); the expected messages are grantval's own (common practice).
"""

import pytest

from grantval.cli import main
from grantval.errors import LedgerError, Problem
from grantval.io.csv_read import _longest_line, read_csv_table
from grantval.io.ledger_files import missing_table, read_ledger_files
from grantval.ledger.load import KNOWN_COLUMNS
from grantval.ledger.schema import TABLE_NAMES
from tests.factory import BASE, tables, write_ledger

EVENTS = [{"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100",
           "share_price": "15"}]


def run(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([str(a) for a in argv])
    out = capsys.readouterr()
    return exit_info.value.code, out.out + out.err


def _many_grants(n=70):
    return [dict(BASE["grants"][i % 3], grant_id=f"G{i + 1}") for i in range(n)]


def test_stray_quote_is_reported_once_at_the_row_it_opens(tmp_path, capsys):
    # before: 26 errors at row 63 (the quoted field swallowed rows 4 to 63), none about quoting
    folder = write_ledger(tmp_path / "l", tables(grants=_many_grants()))
    lines = (folder / "grants.csv").read_text().split("\n")
    lines[3] = lines[3].replace(",eng,", ',"eng,', 1)  # row 4 (G3) opens a quote
    lines[62] = lines[62].replace(",ops,", '",ops,', 1)  # row 63 happens to close one
    (folder / "grants.csv").write_text("\n".join(lines))
    code, text = run(["check", folder], capsys)
    assert code == 1, text
    errors = [ln for ln in text.splitlines() if ln.startswith("grants.csv")]
    assert errors == [('grants.csv, row 4: a quoted field opens on this line and runs to line 63: a quote (") is '
                      "unbalanced; remove the stray quote or close it on the same line (no ledger cell may hold a "
                      "line break)")]


def test_quote_left_open_to_the_end_of_the_file(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_text('grant_id,holder_id\nG1,H1\nG2,"H2\nG3,H3\n')
    t = read_csv_table(path, "grants", frozenset({"grant_id", "holder_id"}))
    assert t.fatal and [(p.row, "runs to line 4" in p.message) for p in t.problems] == [(3, True)]


def test_line_break_in_an_ignored_column_is_not_a_stray_quote(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_text('grant_id,notes,holder_id\nG1,"two\nlines",H1\nG2,,H2\n')
    t = read_csv_table(path, "grants", frozenset({"grant_id", "holder_id"}))
    assert not t.fatal and t.problems == [] and t.rows == [2, 4] and t.cells[0] == ["G1", "two\nlines", "H1"]
    t = read_csv_table(path, "grants", frozenset({"grant_id", "notes", "holder_id"}))
    assert t.fatal and t.problems[0].row == 2


def test_quoted_commas_on_one_line_are_still_read(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_text('grant_id,holder_id\nG1,"Smith, J."\n')
    t = read_csv_table(path, "grants")
    assert not t.fatal and t.cells == [["G1", "Smith, J."]] and t.problems == []


@pytest.mark.parametrize("content, fragment, row", [
    ("nul", "the file is not a CSV text file: it holds a NUL byte (byte ", 3),
    ("cp1252", "the file is not UTF-8 text (byte ", 3),
    ("utf16le", "it looks like UTF-16 text without a byte-order mark", 1),
    ("utf16be", "it looks like UTF-16 text without a byte-order mark", 1),
    ("empty", "the table is empty: no header row was found", None),
])
def test_unreadable_grants_beside_events_is_a_clear_error(tmp_path, capsys, content, fragment, row):
    # before: each of these ended every command in an internal error (IndexError, exit 70) since events had rows
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    data = (folder / "grants.csv").read_bytes()
    data = {"nul": data.replace(b"H2", b"H\x002"), "cp1252": data.replace(b"H2", "H\u20192".encode("cp1252")),
            "utf16le": data.decode().encode("utf-16-le"), "utf16be": data.decode().encode("utf-16-be"),
            "empty": b""}[content]
    (folder / "grants.csv").write_bytes(data)
    for command in (["check", folder], ["value", folder, "-o", tmp_path / "v.xlsx"],
                    ["expense", folder, "--through", "2028-12-31", "-o", tmp_path / "e.xlsx"]):
        code, text = run(command, capsys)
        assert code == 1, text
        where = "grants.csv" + (f", row {row}" if row else "") + ": "
        assert any(ln.startswith(where) and fragment in ln for ln in text.splitlines()), text
        assert "internal error" not in text and "is not a grant" not in text
    assert not list(tmp_path.glob("*.xlsx"))


def test_cp1252_message_names_the_byte(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_bytes(b"grant_id,holder_id\nG1,Jos\xe9\n")
    t = read_csv_table(path, "grants")
    assert [str(p) for p in t.problems] == [("grants.csv, row 2: the file is not UTF-8 text (byte 26, 0xE9) (it may be "
                                            "Windows-1252 or Latin-1 text); save it as CSV UTF-8")]


def test_header_only_grants_beside_events_reports_the_events(tmp_path, capsys):
    # a header-only grants table is a valid empty table (an empty ledger checks clean); with events it must
    # give "is not a grant", not an internal error (IndexError, exit 70)
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").write_text((folder / "grants.csv").read_text().splitlines()[0] + "\n")
    code, text = run(["check", folder], capsys)
    assert code == 1 and "events.csv, row 2, grant_id: 'G1' is not a grant in the grants table" in text, text


def test_missing_grants_table_beside_events_lists_the_files_found(tmp_path, capsys):
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").rename(folder / "Grant register.csv")
    code, text = run(["check", folder], capsys)
    assert code == 1 and "the required table grants.csv is missing (the CSV files found: 'Grant register.csv', " \
        "'assumptions.csv', 'events.csv')" in text, text


def test_missing_table_problem_lists_what_was_found(tmp_path):
    # the message ledger/load.py is to use for a missing required table (see the reader report)
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").rename(folder / "Grant register.csv")
    raw = read_ledger_files(folder, TABLE_NAMES, KNOWN_COLUMNS)
    assert "grants" not in raw.tables and raw.found == ["Grant register.csv", "assumptions.csv", "events.csv"]
    p = missing_table(raw, "grants")
    assert p.message == ("the required table grants.csv is missing (the CSV files found: 'Grant register.csv', "
                         "'assumptions.csv', 'events.csv')")


@pytest.mark.parametrize("names", [("Grants.csv", "ASSUMPTIONS.csv"), (" grants .csv", "Assumptions .CSV")])
def test_table_files_match_whatever_their_case_and_surrounding_spaces(tmp_path, capsys, names):
    # before: Grants.csv was "not a ledger table name", and with events present the run was an internal error
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").rename(folder / names[0])
    (folder / "assumptions.csv").rename(folder / names[1])
    code, text = run(["check", folder], capsys)
    assert code == 0 and "3 grants, 14 tranches, 1 events; no errors, 0 warning(s)" in text, text


def test_two_files_for_one_table_are_refused(tmp_path):
    folder = write_ledger(tmp_path / "l", tables())
    (folder / "Grants.csv").write_bytes((folder / "grants.csv").read_bytes())
    raw = read_ledger_files(folder, TABLE_NAMES, KNOWN_COLUMNS)
    assert [p.message for p in raw.problems if p.severity == "error"] == [
        "two files, 'Grants.csv' and 'grants.csv', are named like the table 'grants'; keep one"]


def test_title_row_beside_events_is_the_only_error(tmp_path, capsys):
    # before: internal error (IndexError, exit 70): the misplaced header left the grants table empty
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").write_text("Corvane grant export\n\n" + (folder / "grants.csv").read_text())
    code, text = run(["check", folder], capsys)
    assert code == 1
    errors = [ln for ln in text.splitlines() if ln.startswith(("grants.csv", "events.csv", "assumptions.csv"))]
    assert errors == [("grants.csv, row 3: the header must be the first row of the table; it was found in row 3 "
                      "(delete the rows above it)")]


@pytest.mark.parametrize("n", [131_073, 40_000])
def test_long_fields_are_located(tmp_path, capsys, n):
    # before: over 131,072 characters, "field larger than field limit" (exit 70); under it, an id longer than
    # a spreadsheet cell passed and was cut when written to a workbook
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").write_text((folder / "grants.csv").read_text().replace("G3,", "G" * n + ",", 1))
    code, text = run(["check", folder], capsys)
    assert code == 1
    assert f"grants.csv, row 4, grant_id: the text is {n:,} characters long, more than 32,767" in text
    assert "internal error" not in text


def test_longest_line():
    assert _longest_line(b"") == 0 and _longest_line(b"ab\nabcd\n") == 4 and _longest_line(b"abc") == 3
    assert _longest_line(b"a\n\n" + b"x" * 9) == 9


@pytest.mark.parametrize("header, char", [("holder\u200b_id", "U+200B ZERO WIDTH SPACE"),
                                          ("\ufeffholder_id", "U+FEFF ZERO WIDTH NO-BREAK SPACE"),
                                          ("holder_id\u2060", "U+2060 WORD JOINER")])
def test_invisible_character_in_a_header_is_named(tmp_path, header, char):
    # before: only "required column is missing" for holder_id, with nothing visible wrong in the file
    path = tmp_path / "grants.csv"
    path.write_text(f"grant_id,{header}\nG1,H1\n", encoding="utf-8")
    t = read_csv_table(path, "grants")
    hits = [p for p in t.problems if "invisible characters" in p.message]
    assert len(hits) == 1 and hits[0].severity == "error" and hits[0].row == 1 and char in hits[0].message


def test_no_break_space_in_a_header_is_read_as_a_space_with_a_warning(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_text("grant\u00a0id,holder_id\nG1,H1\n", encoding="utf-8")
    t = read_csv_table(path, "grants")
    assert t.headers == ["grant_id", "holder_id"]
    assert [(p.severity, "U+00A0 NO-BREAK SPACE" in p.message) for p in t.problems] == [("warning", True)]


def test_problem_text_cannot_drive_the_terminal():
    p = Problem("gr\x1b[2Jants.csv", 3, "grant\u200b_id", "'G\x1b]0;owned\x07' is not a grant \u202e")
    assert str(p) == "gr\\x1b[2Jants.csv, row 3, grant\\u200b_id: 'G\\x1b]0;owned\\x07' is not a grant \\u202e"
    plain = Problem("grants.csv", 2, "quantity", "must be a number")
    assert str(plain) == "grants.csv, row 2, quantity: must be a number"


def test_file_names_and_cells_are_escaped_in_command_output(tmp_path, capsys):
    # before: the escape sequences of the file name and of the header cell reached the terminal as they were
    folder = write_ledger(tmp_path / "l", tables())
    (folder / "notes\x1b[31m.csv").write_text("x\n")
    text = (folder / "grants.csv").read_text().replace("assumption_set\n", "assumption_set,\x1b[2Jnote\n", 1)
    (folder / "grants.csv").write_text(text)
    code, text = run(["check", folder], capsys)
    assert code == 1, text  # the header cell holding ESC is an error of its own
    assert "\x1b" not in text
    assert "notes\\x1b[31m.csv: warning: not a ledger table name" in text
    assert "grants.csv, row 1, \\x1b[2jnote: warning: unknown column" in text
    assert "the header cell '\\x1b[2Jnote' holds invisible characters (U+001B control character)" in text


def test_fatal_tables_stop_reading_with_every_reader_problem(tmp_path):
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    (folder / "grants.csv").write_bytes(b"")
    (folder / "events.csv").write_bytes(b"\xff\xfeg\x00")
    with pytest.raises(LedgerError) as info:
        read_ledger_files(folder, TABLE_NAMES, KNOWN_COLUMNS)
    assert sorted(p.source for p in info.value.problems) == ["events.csv", "grants.csv"]
