"""Every sheet of every workbook the tool writes is set up for printing (close-ready issue)."""

import math
import pathlib

import openpyxl
import pytest
from typer.testing import CliRunner

from grantval.cli import app

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"

COMMANDS = {
    "expense": ["expense", str(SAMPLE), "--through", "2026-12-31", "--forecast-through", "2027-12-31",
                "--share-price", "40"],
    "value": ["value", str(SAMPLE)],
    "disclose": ["disclose", str(SAMPLE), "--from", "2026-01-01", "--through", "2026-12-31"],
    "whatif": ["whatif", str(SAMPLE), "--vary", "volatility=+0.05", "--grants-from", "2026-01-01"],
}


@pytest.mark.parametrize("command", COMMANDS)
def test_every_sheet_has_page_set_up_and_a_run_sheet(tmp_path, command):
    out = tmp_path / "book.xlsx"
    r = CliRunner().invoke(app, COMMANDS[command] + ["-o", str(out), "--no-timestamp"])
    assert r.exit_code == 0, r.output
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames[0] == "run"
    for ws in wb.worksheets:
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        assert ws.page_setup.fitToWidth == _pages_across(ws), ws.title
        # rows run on over pages; the expense summary (text and its two charts) fits on one page
        assert ws.page_setup.fitToHeight == (1 if (command, ws.title) == ("expense", "summary") else 0), ws.title
        assert ws.page_setup.orientation in ("landscape", "portrait"), ws.title
        assert "grantval" in ws.oddFooter.left.text and "SHA-256" in ws.oddFooter.left.text, ws.title
        assert ws.oddFooter.right.text == "&A, page &P of &N", ws.title
        if ws.max_row > 1 and ws.freeze_panes == "A2":  # a table: its header row repeats on every page
            assert ws.print_title_rows == "$1:$1", ws.title


def _pages_across(ws):
    """Pages wide expected from the written column widths: a table over 300 characters runs on (common practice)."""
    if ws.freeze_panes != "A2":  # free-form sheets fit one page wide
        return 1
    total = sum(d.width * (d.max - d.min + 1) for d in ws.column_dimensions.values() if d.width)
    return max(1, math.ceil(total / 300))


def _assert_set_up(ws, table=True):
    assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
    assert ws.page_setup.fitToWidth == _pages_across(ws) and ws.page_setup.fitToHeight == 0, ws.title
    assert ws.page_setup.orientation in ("landscape", "portrait"), ws.title
    assert "grantval" in ws.oddFooter.left.text and "SHA-256" in ws.oddFooter.left.text, ws.title
    assert ws.oddFooter.right.text == "&A, page &P of &N", ws.title
    assert not table or ws.print_title_rows == "$1:$1", ws.title


def _feature_books(tmp_path):
    """Disclose workbooks of ledgers using each feature (the feature tests' ledgers)."""
    import grantval.runs.disclose as RD
    from tests.attribution import test_espp as ES
    from tests.attribution.cash_ledgers import ifrs_example_12
    from tests.attribution.test_modifications import ig_example_7

    cases = [(ifrs_example_12(tmp_path / "cash"), "2029-01-01", "2030-12-31", dict(period="year")),
             (ES.ledger(tmp_path / "espp", [ES.offering()], [ES.enrol()]), "2027-01-01", "2027-12-31", {}),
             (ig_example_7(tmp_path / "mod"), "2025-01-01", "2027-12-31", dict(standard="ifrs2"))]
    for k, (folder, start, through, kw) in enumerate(cases):
        out = tmp_path / f"d{k}.xlsx"
        RD.write_disclosure(RD.disclose(folder, start=start, through=through, **kw), out, None, timestamp=False)
        yield openpyxl.load_workbook(out)


#: the feature sections' sheets: column header -> number format of its first data cell
FEATURE_FORMATS = {
    "liability_disclosure": {"Value": "#,##0.00;[Red]-#,##0.00"},
    "purchase_plan_activity": {"Number": "#,##0", "Weighted-average grant-date fair value": "#,##0.0000"},  # line 2
    "modification_disclosure": {"Modification date": "yyyy-mm-dd", "Grants": "#,##0", "Holders affected": "#,##0",
                                "Units affected": "#,##0", "Incremental cost": "#,##0.00;[Red]-#,##0.00"},
}


def test_disclose_feature_sheets_have_set_up_and_formats(tmp_path):
    seen = set()
    for wb in _feature_books(tmp_path):
        for name, formats in FEATURE_FORMATS.items():
            if name not in wb.sheetnames:
                continue
            seen.add(name)
            ws = wb[name]
            _assert_set_up(ws, table=name != "purchase_plan_activity")  # a short list of lines, a format each
            head = [c.value for c in ws[1]]
            row = 3 if name == "purchase_plan_activity" else 2  # "Granted (enrolled)": has both figures
            for label, fmt in formats.items():
                cell = ws.cell(row, head.index(label) + 1)
                assert cell.number_format == fmt, (name, label)
            for j, label in enumerate(head, start=1):  # no header cut at the column edge: wide or wrapped
                width = ws.column_dimensions[openpyxl.utils.get_column_letter(j)].width
                assert len(label) <= width - 1 or ws.row_dimensions[1].height, (name, label)
    assert seen == set(FEATURE_FORMATS)


def test_purchase_plan_price_line_is_formatted_as_a_price_not_a_count():
    import pandas as pd

    from grantval.reporting.disclosure_features import purchase_plan_sheet

    frame = pd.DataFrame({"line": ["Shares bought (purchase events)", "Weighted-average purchase price"],
                          "number": [100.0, 17.0], "weighted_average_grant_date_fair_value": [float("nan")] * 2})
    sheet = purchase_plan_sheet(frame)
    assert sheet.rows[2] == ["Weighted-average purchase price", 17.0, None]
    assert sheet.row_formats[(1, 1)] == "#,##0" and sheet.row_formats[(2, 1)] == "#,##0.00"


def _table(n_cols, width):
    import pandas as pd

    from grantval.io.xlsx.sheet import Sheet

    cols = [f"c{j}" for j in range(n_cols)]
    return Sheet("t", frame=pd.DataFrame([[1] * n_cols], columns=cols), widths={c: width for c in cols})


@pytest.mark.parametrize(("n_cols", "width", "across"), [(10, 30, 1), (10, 31, 2), (25, 24, 2), (30, 30, 3)])
def test_pages_wide_follows_the_column_widths(n_cols, width, across):
    from grantval.io.xlsx.write import pages_wide

    assert pages_wide(_table(n_cols, width)) == across  # 300 characters a page: 10 x 30 fits, 10 x 31 does not


def test_a_table_wider_than_a_page_repeats_its_first_column(tmp_path):
    from grantval.io.xlsx.write import write_workbook

    out = tmp_path / "wide.xlsx"
    write_workbook(out, [_table(12, 40), _table(5, 20)], footer="grantval test SHA-256 0")
    wb = openpyxl.load_workbook(out)
    wide, narrow = wb.worksheets[0], wb.worksheets[1]
    assert wide.page_setup.fitToWidth == 2 and wide.print_title_cols == "$A:$A"
    assert narrow.page_setup.fitToWidth == 1 and not narrow.print_title_cols


def test_a_text_column_is_wide_enough_for_its_longest_id():
    import pandas as pd

    from grantval.io.xlsx.sheet import Sheet
    from grantval.io.xlsx.write import _frame_widths

    frame = pd.DataFrame({"grant_id": ["CV-ESPP-2026H1/H0042", "G-1", None], "units": [1, 2, 3]})
    assert _frame_widths(Sheet("t", frame=frame, text_columns=("grant_id",))) == [22, 10]  # 20 characters + 2
    assert _frame_widths(Sheet("t", frame=frame, text_columns=("grant_id",), widths={"grant_id": 12}))[0] == 12
    long = pd.DataFrame({"grant_id": ["X" * 90]})
    assert _frame_widths(Sheet("t", frame=long, text_columns=("grant_id",))) == [40]  # capped: wraps past 40


def test_wrapped_text_columns_make_the_row_tall_and_align_it_to_the_top(tmp_path):
    import pandas as pd

    from grantval.io.xlsx.sheet import Sheet
    from grantval.io.xlsx.write import write_workbook

    long = "0.00 on the modification date, the rest from 2026-01-01 to each tranche's vesting date (last 2028-01-01)"
    frame = pd.DataFrame({"grant_id": ["R", "S"], "attribution": [long, "at once"], "cost": [1.5, 2.0]})
    out = tmp_path / "w.xlsx"
    write_workbook(out, [Sheet("t", frame=frame, text_columns=("grant_id",), widths={"attribution": 40},
                               wrap_text_columns=("attribution",)),
                         Sheet("u", frame=frame, widths={"attribution": 40})])
    wb = openpyxl.load_workbook(out)
    ws, plain = wb["t"], wb["u"]
    assert ws["B2"].alignment.wrap_text and ws["A2"].alignment.vertical == "top"
    assert ws.row_dimensions[2].height == 45.0  # 104 characters in 40 columns: three lines of 15 points
    assert not ws.row_dimensions[3].height  # "at once" fits on one line
    assert not plain["B2"].alignment.wrap_text and not plain.row_dimensions[2].height  # only where asked
