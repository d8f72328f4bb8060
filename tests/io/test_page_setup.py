"""Every sheet of every workbook the tool writes is set up for printing (close-ready issue)."""

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
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title   # one page wide
        assert ws.page_setup.fitToWidth == 1 and ws.page_setup.fitToHeight == 0, ws.title
        assert ws.page_setup.orientation in ("landscape", "portrait"), ws.title
        assert "grantval" in ws.oddFooter.left.text and "SHA-256" in ws.oddFooter.left.text, ws.title
        assert ws.oddFooter.right.text == "&A, page &P of &N", ws.title
        if ws.max_row > 1 and ws.freeze_panes == "A2":  # a table: its header row repeats on every page
            assert ws.print_title_rows == "$1:$1", ws.title
