"""Build the bad-input corpus (invented data): run from the project root.

    python tests/bad_inputs/build.py

``rejected/<case>/`` holds a ledger with one defect (CSV files, or
``ledger.xlsx``) and ``expect.json``: the message fragment every command must
print, and where it must point (file or sheet, row, column).
``accepted/<case>/`` holds ledgers with quirks the reader accepts; they must
give the same fair values as the clean ledger.
"""

from __future__ import annotations

import copy
import csv
import io
import json
import pathlib
import shutil
import sys
import zipfile

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from tests.factory import BASE  # noqa: E402

EV = {"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100", "share_price": "15"}


def base(**extra):
    t = copy.deepcopy(BASE)
    t.update(copy.deepcopy(extra))
    return t


def cell(t, table, i, col, value):
    t[table][i][col] = value
    return t


def csv_bytes(rows: list[dict] | list[list], delimiter=",") -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n", delimiter=delimiter)
    if rows and isinstance(rows[0], dict):
        header = list(rows[0])
        w.writerow(header)
        for r in rows:
            w.writerow([r.get(h, "") for h in header])
    else:
        w.writerows(rows)
    return buf.getvalue().encode("utf-8")


# name: (tables, expected fragment, source, row, column); tables may hold bytes for raw files
CSV_CASES: dict[str, tuple] = {}


def case(name, tables, fragment, source=None, row=None, column=None):
    CSV_CASES[name] = (tables, fragment, source, row, column)


def _no(table):
    t = base()
    del t[table]
    return t


case("missing_grants_table", _no("grants"), "the required table grants.csv is missing")
case("missing_assumptions_table", _no("assumptions"), "the required table assumptions.csv is missing")
t = base()
for r in t["grants"]:
    del r["quantity"]
case("missing_required_column", t, "required column is missing", "grants.csv", 1, "quantity")
case("empty_grant_id", cell(base(), "grants", 1, "grant_id", ""), "is required and is empty", "grants.csv", 3, "grant_id")
case("duplicate_grant_id", cell(base(), "grants", 1, "grant_id", "G1"), "is used twice", "grants.csv", 3, "grant_id")
case("date_day_first", cell(base(), "grants", 0, "grant_date", "15/03/2027"), "is not an ISO date", "grants.csv", 2, "grant_date")
case("date_us_text", cell(base(), "grants", 0, "grant_date", "March 15, 2027"), "is not an ISO date", "grants.csv", 2, "grant_date")
case("date_impossible", cell(base(), "grants", 0, "grant_date", "2027-02-30"), "is not a calendar date", "grants.csv", 2, "grant_date")
case("excel_serial_date_in_csv", cell(base(), "grants", 0, "grant_date", "46388"), "is not an ISO date", "grants.csv", 2, "grant_date")
case("number_as_words", cell(base(), "grants", 0, "exercise_price", "ten"), "is not a number", "grants.csv", 2, "exercise_price")
case("thousands_separator", cell(base(), "grants", 0, "quantity", "1,000"), "thousands separators", "grants.csv", 2, "quantity")
case("percent_volatility", cell(base(), "assumptions", 0, "volatility", "35%"), "is a percentage", "assumptions.csv", 2, "volatility")
case("percent_rate", cell(base(), "assumptions", 0, "risk_free_rate", "4 %"), "is a percentage", "assumptions.csv", 2, "risk_free_rate")
case("quantity_zero", cell(base(), "grants", 0, "quantity", "0"), "positive whole number", "grants.csv", 2, "quantity")
case("quantity_fraction", cell(base(), "grants", 0, "quantity", "10.5"), "whole number", "grants.csv", 2, "quantity")
case("quantity_huge", cell(base(), "grants", 0, "quantity", "1e15"), "too large", "grants.csv", 2, "quantity")
case("exercise_price_negative", cell(base(), "grants", 0, "exercise_price", "-1"), "greater than zero", "grants.csv", 2, "exercise_price")
case("option_without_price", cell(base(), "grants", 0, "exercise_price", ""), "required for an option grant", "grants.csv", 2, "exercise_price")
case("option_without_expiration", cell(base(), "grants", 0, "expiration_date", ""), "required for an option grant", "grants.csv", 2, "expiration_date")
case("expiration_before_grant", cell(base(), "grants", 0, "expiration_date", "2026-01-01"), "is not after the grant date", "grants.csv", 2, "expiration_date")
case("last_vest_after_expiration", cell(base(), "grants", 0, "expiration_date", "2030-06-30"), "after the expiration date", "grants.csv", 2, "expiration_date")
case("cliff_above_vest_months", cell(base(), "grants", 0, "cliff_months", "60"), "more than vest_months", "grants.csv", 2, "cliff_months")
case("vest_months_not_multiple", cell(base(), "grants", 0, "vest_every_months", "5"), "not a multiple", "grants.csv", 2, "vest_months")
case("vest_every_zero", cell(base(), "grants", 0, "vest_every_months", "0"), "at least 1", "grants.csv", 2, "vest_every_months")
case("vest_months_negative", cell(base(), "grants", 0, "vest_months", "-12"), "zero or more", "grants.csv", 2, "vest_months")
case("award_type_unknown", cell(base(), "grants", 0, "award_type", "warrant"), "is not one of", "grants.csv", 2, "award_type")
case("no_assumptions_for_date", cell(base(), "grants", 0, "grant_date", "2027-01-02"), "no assumptions row has grant_date", "grants.csv", 2, "grant_date")
case("unknown_assumption_set", cell(base(), "grants", 2, "assumption_set", "nope"), "is not an assumption_set", "grants.csv", 4, "assumption_set")
case("share_price_zero", cell(base(), "assumptions", 0, "share_price", "0"), "greater than zero", "assumptions.csv", 2, "share_price")
case("volatility_zero", cell(base(), "assumptions", 0, "volatility", "0"), "greater than 0 and at most 5", "assumptions.csv", 2, "volatility")
case("volatility_as_percent_number", cell(base(), "assumptions", 0, "volatility", "35"), "at most 5", "assumptions.csv", 2, "volatility")
case("rate_out_of_range", cell(base(), "assumptions", 0, "risk_free_rate", "0.6"), "between -0.05 and 0.5", "assumptions.csv", 2, "risk_free_rate")
case("dividend_negative", cell(base(), "assumptions", 0, "dividend_yield", "-0.01"), "zero or more", "assumptions.csv", 2, "dividend_yield")
case("expected_term_too_long", cell(base(), "assumptions", 0, "expected_term_years", "11"), "longer than the contractual term", "assumptions.csv", 2, "expected_term_years")
case("lattice_parameter_on_bsm", cell(base(), "assumptions", 0, "exercise_multiple", "2"), "lattice parameter", "assumptions.csv", 2, "exercise_multiple")
case("exit_rate_on_bsm", cell(base(), "assumptions", 0, "post_vest_exit_rate", "0.1"), "lattice parameter", "assumptions.csv", 2, "post_vest_exit_rate")
case("option_without_volatility", cell(base(), "assumptions", 0, "volatility", ""), "required for option grants", "assumptions.csv", 2, "volatility")
case("model_unknown", cell(base(), "assumptions", 0, "model", "montecarlo"), "is not one of", "assumptions.csv", 2, "model")
t = base()
t["assumptions"].append(dict(t["assumptions"][0]))
case("duplicate_assumption_date", t, "has two rows of assumptions", "assumptions.csv", 4, "grant_date")
t = base()
t["assumptions"].append(dict(t["assumptions"][0], grant_date=""))
case("assumption_row_without_key", t, "needs an assumption_set name or a grant_date", "assumptions.csv", 4, "assumption_set")
case("event_unknown_grant", base(events=[dict(EV, grant_id="G9")]), "is not a grant", "events.csv", 2, "grant_id")
case("event_before_grant", base(events=[dict(EV, event_date="2026-12-31")]), "before the grant date", "events.csv", 2, "event_date")
case("exercise_more_than_vested", base(events=[dict(EV, quantity="300")]), "are vested and outstanding", "events.csv", 2, "quantity")
case("exercise_without_quantity", base(events=[dict(EV, quantity="")]), "is required for an exercise", "events.csv", 2, "quantity")
case("forfeit_vested", base(events=[dict(EV, event_type="forfeit", quantity="800")]), "vested options cannot be forfeited", "events.csv", 2, "quantity")
case("expire_more_than_vested", base(events=[dict(EV, event_type="expire", quantity="900")]), "are vested and outstanding", "events.csv", 2, "quantity")
case("cancel_more_than_outstanding", base(events=[dict(EV, event_type="cancel", quantity="5000")]), "are outstanding", "events.csv", 2, "quantity")
case("rsu_exercised", base(events=[dict(EV, grant_id="G2")]), "RSUs are not exercised", "events.csv", 2, "event_type")
case("event_after_expiration", base(events=[dict(EV, event_date="2038-01-01")]), "after the expiration date", "events.csv", 2, "event_date")
case("event_type_unknown", base(events=[dict(EV, event_type="vest")]), "is not one of", "events.csv", 2, "event_type")
case("event_quantity_negative", base(events=[dict(EV, quantity="-5")]), "positive whole number", "events.csv", 2, "quantity")
case("tranches_do_not_sum", base(tranches=[{"grant_id": "G1", "vest_date": "2028-01-01", "quantity": "500"}]),
     "sum to 500, not its quantity 1000", "tranches.csv", 2, "quantity")
case("tranche_unknown_grant", base(tranches=[{"grant_id": "G7", "vest_date": "2028-01-01", "quantity": "5"}]),
     "is not a grant", "tranches.csv", 2, "grant_id")
EST = {"applies_to": "*", "effective_date": "2027-01-01", "annual_forfeiture_rate": "0.05", "expected_vest_fraction": ""}
case("estimate_both_columns", base(estimates=[dict(EST, expected_vest_fraction="0.9")]), "not both", "estimates.csv", 2, "annual_forfeiture_rate")
case("estimate_neither_column", base(estimates=[dict(EST, annual_forfeiture_rate="")]), "give one of", "estimates.csv", 2, "annual_forfeiture_rate")
case("estimate_rate_too_high", base(estimates=[dict(EST, annual_forfeiture_rate="1.2")]), "below 1", "estimates.csv", 2, "annual_forfeiture_rate")
case("estimate_unknown_target", base(estimates=[dict(EST, applies_to="legal")]), "not a grant_id, a group", "estimates.csv", 2, "applies_to")
case("policy_bad_value", base(policy=[["key", "value"], ["period", "week"]]), "is not one of", "policy.csv", 2, "value")
case("policy_unknown_key", base(policy=[["key", "value"], ["currency", "EUR"]]), "is not a policy key", "policy.csv", 2, "key")
case("policy_ifrs2_straight_line", base(policy=[["key", "value"], ["standard", "ifrs2"], ["attribution", "straight-line"]]),
     "cannot be combined with standard ifrs2", "policy.csv", 3, "value")
t = base()
t["grants"] = [list(t["grants"][0]) + ["quantity"]] + [list(r.values()) + ["5"] for r in t["grants"]]
case("duplicate_header", t, "the column appears twice", "grants.csv", 1, "quantity")
t = base()
t["grants"] = [["Corvane grant export"], []] + [list(t["grants"][0])] + [list(r.values()) for r in t["grants"]]
case("header_not_first_row", t, "the header must be the first row", "grants.csv", None, None)
t = base()
t["grants"] = [list(t["grants"][0])] + [list(r.values()) for r in t["grants"]]
t["grants"][2] = t["grants"][2] + ["extra"]
case("row_longer_than_header", t, "cells but the header has", "grants.csv", 3, None)
# raw files
t = base(); t["grants"] = b""
case("empty_file", t, "the table is empty", "grants.csv", None, None)
t = base(); t["grants"] = b"Quarterly board minutes\nNothing to see here.\n"
case("not_a_ledger", t, "required column is missing", "grants.csv", 1, "grant_id")
t = base(); t["grants"] = csv_bytes(BASE["grants"]).replace(b"H1", "Jos\u00e9".encode("latin-1"))
case("latin1_encoding", t, "is not UTF-8 text", "grants.csv", None, None)
t = base(); t["grants"] = csv_bytes(BASE["grants"], delimiter=";")
case("semicolon_delimited", t, "';' as its delimiter", "grants.csv", 1, None)
t = base(); t["grants"] = csv_bytes(BASE["grants"]).decode().encode("utf-16")
case("utf16_encoding", t, "is not UTF-8 text", "grants.csv", None, None)
t = base(); t["grants"] = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR" + bytes(range(256))
case("binary_file", t, "not", "grants.csv", None, None)

# readers: whole files that cannot be read, while other tables (events) have rows
def _with_events(grants):
    t = base(events=[dict(EV)])
    t["grants"] = grants
    return t


GRANTS_CSV = csv_bytes(BASE["grants"])
t = base(events=[dict(EV)])
t["grants"] = [["Corvane grant export"], []] + [list(t["grants"][0])] + [list(r.values()) for r in t["grants"]]
case("header_not_first_row_with_events", t, "the header must be the first row", "grants.csv", None, None)
t = base(); t["Grants"] = copy.deepcopy(BASE["grants"])
case("two_files_same_table", t, "are named like the table 'grants'", None, None, None)
lines = GRANTS_CSV.split(b"\n")
case("nul_byte_with_events", _with_events(b"\n".join(lines[:2] + [lines[2].replace(b"H2", b"H\x002")] + lines[3:])),
     "holds a NUL byte", "grants.csv", 3, None)
case("cp1252_with_events", _with_events(GRANTS_CSV.replace(b"H2", "H\u20192".encode("cp1252"))),
     "is not UTF-8 text", "grants.csv", 3, None)
case("utf16_without_bom_with_events", _with_events(GRANTS_CSV.decode().encode("utf-16-le")),
     "UTF-16 text without a byte-order mark", "grants.csv", 1, None)
case("empty_grants_with_events", _with_events(b""), "the table is empty", "grants.csv", None, None)
# control and invisible characters in text cells
case("form_feed_in_grant_id", cell(base(), "grants", 0, "grant_id", "G\f1"), "holds control or invisible characters",
     "grants.csv", 2, "grant_id")
case("vertical_tab_in_holder_id", cell(base(), "grants", 1, "holder_id", "H\v2"), "holds control or invisible characters",
     "grants.csv", 3, "holder_id")
case("escape_sequence_in_group", cell(base(), "grants", 2, "group", "\x1b[2Jeng"), "holds control or invisible characters",
     "grants.csv", 4, "group")
case("tab_after_assumption_set", cell(base(), "grants", 2, "assumption_set", "lat\t"),
     "holds control or invisible characters", "grants.csv", 4, "assumption_set")
case("delete_in_grant_id", cell(base(), "grants", 1, "grant_id", "G2\x7f"), "holds control or invisible characters",
     "grants.csv", 3, "grant_id")
case("zero_width_space_in_event_grant_id", base(events=[dict(EV, grant_id="G1\u200b")]),
     "holds control or invisible characters", "events.csv", 2, "grant_id")
case("byte_order_mark_inside_grant_id", cell(base(), "grants", 2, "grant_id", "\ufeffG3"),
     "holds control or invisible characters", "grants.csv", 4, "grant_id")
# long cells: over the csv module's default field limit (131,072) and over a spreadsheet cell (32,767)
case("field_over_csv_field_limit", cell(base(events=[dict(EV)]), "grants", 0, "holder_id", "H" * 140_000),
     "characters long, more than 32,767", "grants.csv", 2, "holder_id")
case("grant_id_longer_than_a_cell", cell(base(), "grants", 0, "grant_id", "G" * 40_000),
     "characters long, more than 32,767", "grants.csv", 2, "grant_id")
# a stray quote on row 4 of a longer table
t = base()
t["grants"] += [dict(r, grant_id=f"G{i + 4}") for i, r in enumerate(copy.deepcopy(BASE["grants"]))]
data = csv_bytes(t["grants"]).split(b"\n")
data[3] = data[3].replace(b",eng,", b',"eng,', 1)
t["grants"] = b"\n".join(data)
case("stray_quote", t, "a quote (\") is unbalanced", "grants.csv", 4, None)
case("zero_width_space_in_header", base(grants=GRANTS_CSV.replace(b"grant_id", "grant\u200b_id".encode(), 1)),
     "holds invisible characters", "grants.csv", 1, None)
case("second_byte_order_mark", base(grants=b"\xef\xbb\xbf\xef\xbb\xbf" + GRANTS_CSV), "holds invisible characters",
     "grants.csv", 1, None)


def write_csv_case(folder: pathlib.Path, tables: dict) -> None:
    folder.mkdir(parents=True)
    for name, rows in tables.items():
        (folder / f"{name}.csv").write_bytes(rows if isinstance(rows, bytes) else csv_bytes(rows))


def workbook(tables: dict, edit=None) -> bytes:
    """A workbook of the tables (dates as date cells), optionally edited with openpyxl first."""
    import datetime as dt

    from openpyxl import Workbook

    wb = Workbook()
    wb.remove(wb.active)
    for name, rows in tables.items():
        ws = wb.create_sheet(name)
        header = list(rows[0])
        ws.append(header)
        for r in rows:
            out = []
            for h in header:
                v = r[h]
                if len(v) == 10 and v[4] == "-" and v[7] == "-":
                    out.append(dt.date.fromisoformat(v))
                else:
                    try:
                        out.append(float(v) if "." in v else int(v))
                    except ValueError:
                        out.append(v if v else None)
            ws.append(out)
    if edit:
        edit(wb)
    wb.properties.created = wb.properties.modified = dt.datetime(2000, 1, 1)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _set(sheet, ref, value):
    def edit(wb):
        wb[sheet][ref] = value
        if not hasattr(value, "year"):
            wb[sheet][ref].number_format = "General"  # a plain number, as an export writes it
    return edit


def _merge(wb):
    wb["grants"].merge_cells("B2:C2")


def _hide(wb):
    wb["assumptions"].sheet_state = "hidden"


def _extra_sheet(wb):
    ws = wb.create_sheet("Grants ")
    ws.append(["grant_id"])


def _header_down(wb):
    wb["grants"].insert_rows(1)
    wb["grants"]["A1"] = "Export of 2027-01-05"


def _dup_header(wb):
    wb["grants"]["N1"] = "Quantity"
    wb["grants"]["N2"] = 5


XLSX_CASES = {
    # name: (workbook bytes, fragment, source, row, column)
    "xlsx_serial_number_in_date_column": (workbook(base(), _set("grants", "E2", 46388)),
                                          "is a number, not a date", "sheet grants", 2, "grant_date"),
    "xlsx_text_date_other_format": (workbook(base(), _set("grants", "E2", "03/15/2027")),
                                    "is not an ISO date", "sheet grants", 2, "grant_date"),
    "xlsx_date_with_time": (workbook(base(), _set("grants", "E2", __import__("datetime").datetime(2027, 1, 1, 13, 30))),
                            "has a time of day", "sheet grants", 2, "grant_date"),
    "xlsx_percent_string": (workbook(base(), _set("assumptions", "D2", "40%")), "is a percentage",
                            "sheet assumptions", 2, "volatility"),
    "xlsx_boolean_in_number": (workbook(base(), _set("grants", "F2", True)), "must be a number", "sheet grants", 2, "quantity"),
    "xlsx_merged_cells": (workbook(base(), _merge), "merged cells", "sheet grants", None, None),
    "xlsx_hidden_sheet": (workbook(base(), _hide), "the sheet is hidden", "sheet assumptions", None, None),
    "xlsx_formula_without_saved_value": (workbook(base(), _set("grants", "F2", "=500*2")), "formula",
                                         "sheet grants", 2, "quantity"),
    "xlsx_two_sheets_same_table": (workbook(base(), _extra_sheet), "are named like the table", "ledger.xlsx", None, None),
    "xlsx_header_not_first_row": (workbook(base(), _header_down), "the header must be the first row",
                                  "sheet grants", None, None),
    "xlsx_duplicate_header": (workbook(base(), _dup_header), "the column appears twice", "sheet grants", 1, "quantity"),
    "xlsx_missing_grants_sheet": (workbook({"assumptions": BASE["assumptions"]}), "the required table sheet grants is missing",
                                  None, None, None),
    "xlsx_bad_quantity": (workbook(cell(base(), "grants", 0, "quantity", "-3")), "positive whole number",
                          "sheet grants", 2, "quantity"),
    "xlsx_renamed_csv": (csv_bytes(BASE["grants"]), "not an Excel .xlsx workbook", "ledger.xlsx", None, None),
}


def _title_row(merge: bool):
    def edit(wb):
        ws = wb["grants"]
        ws.insert_rows(1)
        ws["A1"] = "Corvane grant export"
        if merge:
            ws.merge_cells("A1:F1")
    return edit


def _array_formula(wb):
    from openpyxl.worksheet.formula import ArrayFormula

    wb["assumptions"]["F2"] = ArrayFormula("F2", "=0.008")  # written with no saved value


def _value_in_xfd(wb):
    wb["grants"]["XFD2"] = "stray"


WITH_EVENTS = base(events=[dict(EV)])
XLSX_CASES.update({
    "xlsx_header_not_first_row_with_events": (workbook(WITH_EVENTS, _title_row(False)),
                                              "the header must be the first row", "sheet grants", None, None),
    "xlsx_merged_title_cell": (workbook(WITH_EVENTS, _title_row(True)), "merged cells (A1:F1)", "sheet grants",
                               None, None),
    "xlsx_array_formula_without_saved_value": (workbook(base(), _array_formula), "array formula", "sheet assumptions",
                                               2, "dividend_yield"),
    "xlsx_zero_width_space_in_grant_id": (workbook(base(), _set("grants", "A2", "G1\u200b")),
                                          "holds control or invisible characters", "sheet grants", 2, "grant_id"),
    "xlsx_value_in_column_xfd": (workbook(base(), _value_in_xfd), "cells beyond column", "sheet grants", None, None),
})


def _rezip(data: bytes, edit) -> bytes:
    """A workbook's zip rebuilt with ``edit(parts)`` applied to its ``{name: bytes}`` parts (fixed timestamps)."""
    src = zipfile.ZipFile(io.BytesIO(data))
    parts = {i.filename: src.read(i.filename) for i in src.infolist()}
    edit(parts)
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for name, part in parts.items():
            dst.writestr(zipfile.ZipInfo(name, date_time=(1980, 1, 1, 0, 0, 0)), part, zipfile.ZIP_DEFLATED)
    return out.getvalue()


def _unused_shared_strings(n: int = 70_000) -> bytes:
    """The clean workbook with a shared-string table: cell A2 of grants uses its first string, ``n`` empty ones
    are used by no cell (openpyxl itself writes inline strings)."""
    def edit(parts):
        sheet = "xl/worksheets/sheet1.xml"
        parts[sheet] = parts[sheet].replace(b'<c r="A2" t="inlineStr"><is><t>G1</t></is></c>',
                                            b'<c r="A2" t="s"><v>0</v></c>', 1)
        parts["xl/sharedStrings.xml"] = (
            b'<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><si><t>G1</t></si>'
            + b"<si><t></t></si>" * n + b"</sst>")
        parts["[Content_Types].xml"] = parts["[Content_Types].xml"].replace(b"</Types>", (
            b'<Override PartName="/xl/sharedStrings.xml" ContentType="application/vnd.openxmlformats-'
            b'officedocument.spreadsheetml.sharedStrings+xml"/></Types>'))
        rels = "xl/_rels/workbook.xml.rels"
        parts[rels] = parts[rels].replace(b"</Relationships>", (
            b'<Relationship Id="rIdSst" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
            b'sharedStrings" Target="sharedStrings.xml"/></Relationships>'))
    return _rezip(workbook(base()), edit)


def _long_grant_id(n: int = 40_000) -> bytes:
    """The clean workbook with grant id G1 made ``n`` characters long (openpyxl cuts what it writes at 32,767)."""
    def edit(parts):
        sheet = "xl/worksheets/sheet1.xml"
        parts[sheet] = parts[sheet].replace(b"<t>G1</t>", b"<t>" + b"G" * n + b"</t>", 1)
    return _rezip(workbook(base()), edit)


def _escaped_form_feed() -> bytes:
    """Grant id G1 written as Excel writes a form feed in it (_x000C_; openpyxl refuses to write the character)."""
    def edit(parts):
        sheet = "xl/worksheets/sheet1.xml"
        parts[sheet] = parts[sheet].replace(b"<t>G1</t>", b"<t>G_x000C_1</t>", 1)
    return _rezip(workbook(base()), edit)


XLSX_CASES["xlsx_escaped_form_feed_in_grant_id"] = (_escaped_form_feed(), "holds control or invisible characters",
                                                    "sheet grants", 2, "grant_id")
XLSX_CASES["xlsx_grant_id_longer_than_a_cell"] = (_long_grant_id(), "characters long, more than 32,767",
                                                  "sheet grants", 2, "grant_id")


def _truncated() -> bytes:
    data = workbook(base())
    return data[: len(data) // 2]


def _billion_laughs() -> bytes:
    ents = ['<!ENTITY lol "lol">'] + [f'<!ENTITY lol{i} "{("&lol" + (str(i - 1) if i > 1 else "") + ";") * 10}">'
                                      for i in range(1, 10)]
    bomb = ('<?xml version="1.0"?><!DOCTYPE worksheet [' + "".join(ents) + ']>'
            '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
            '<row r="1"><c r="A1" t="inlineStr"><is><t>&lol9;</t></is></c></row></sheetData></worksheet>')
    src = zipfile.ZipFile(io.BytesIO(workbook(base())))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = src.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                data = bomb.encode()
            z = zipfile.ZipInfo(info.filename, date_time=(1980, 1, 1, 0, 0, 0))
            dst.writestr(z, data, zipfile.ZIP_DEFLATED)
    return out.getvalue()


XLSX_CASES["xlsx_truncated_zip"] = (_truncated(), "not a complete .xlsx file", "ledger.xlsx", None, None)
XLSX_CASES["xlsx_entity_expansion"] = (_billion_laughs(), "declares XML entities", "ledger.xlsx", None, None)
XLSX_CASES["xlsx_unused_shared_strings"] = (_unused_shared_strings(), "shared-string table holds", "ledger.xlsx",
                                            None, None)


ACCEPTED = {
    "utf8_with_bom": lambda f: [(f / n).write_bytes(b"\xef\xbb\xbf" + (f / n).read_bytes()) for n in ("grants.csv",)],
    "trailing_blank_rows_and_columns": lambda f: (f / "grants.csv").write_bytes(
        b"\n".join(line + b",," for line in (f / "grants.csv").read_bytes().splitlines()) + b"\n,,,\n\n,,\n"),
    "crlf_line_endings": lambda f: (f / "assumptions.csv").write_bytes((f / "assumptions.csv").read_bytes().replace(b"\n", b"\r\n")),
    "headers_with_case_and_spaces": lambda f: (f / "grants.csv").write_bytes(
        (f / "grants.csv").read_bytes().replace(b"grant_id,holder_id", b" Grant_ID ,HOLDER_ID", 1)),
    "blank_rows_between_records": lambda f: (f / "grants.csv").write_bytes(
        (f / "grants.csv").read_bytes().replace(b"\nG2,", b"\n\n,,,\nG2,", 1)),
    "table_file_names_in_other_case": lambda f: [(f / "grants.csv").rename(f / "Grants.csv"),
                                                 (f / "assumptions.csv").rename(f / " ASSUMPTIONS .csv")],
    "no_break_space_in_header": lambda f: (f / "grants.csv").write_bytes(
        (f / "grants.csv").read_bytes().replace(b"grant_id,", "grant_id\u00a0,".encode(), 1)),
}


def main() -> None:
    for sub in ("rejected", "accepted"):
        shutil.rmtree(HERE / sub, ignore_errors=True)
    for name, (tables, fragment, source, row, column) in CSV_CASES.items():
        folder = HERE / "rejected" / name
        write_csv_case(folder, tables)
        (folder / "expect.json").write_text(json.dumps(
            {"fragment": fragment, "source": source, "row": row, "column": column}, indent=1) + "\n")
    for name, (data, fragment, source, row, column) in XLSX_CASES.items():
        folder = HERE / "rejected" / name
        folder.mkdir(parents=True)
        (folder / "ledger.xlsx").write_bytes(data)
        (folder / "expect.json").write_text(json.dumps(
            {"fragment": fragment, "source": source, "row": row, "column": column}, indent=1) + "\n")
    for name, fn in ACCEPTED.items():
        folder = HERE / "accepted" / name
        write_csv_case(folder, base())
        fn(folder)
    print(f"{len(CSV_CASES) + len(XLSX_CASES)} rejected cases, {len(ACCEPTED)} accepted cases")


if __name__ == "__main__":
    main()
