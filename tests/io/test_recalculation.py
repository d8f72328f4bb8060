"""The expense workbook recalculated by a real spreadsheet engine (LibreOffice, headless).

LibreOffice opens the workbook with "recalculate on load" forced on, saves it
again, and the recalculated values are read back.  `.ci/run` installs the
Debian package libreoffice-calc when it is missing; elsewhere the test is
skipped if LibreOffice is not installed.
"""

import os
import pathlib
import shutil
import subprocess

import numpy as np
import openpyxl
import pytest

from grantval import api

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"
SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")
ERRORS = ("#VALUE!", "#NAME?", "#DIV/0!", "#REF!", "#NUM!", "#N/A", "#NULL!", "Err:")

RECALC_ALWAYS = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema"
 xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>0</value></prop></item>
</oor:items>
"""


def recalculate(book: pathlib.Path, work: pathlib.Path) -> pathlib.Path:
    profile = work / "lo_profile"
    (profile / "user").mkdir(parents=True)
    (profile / "user" / "registrymodifications.xcu").write_text(RECALC_ALWAYS)
    out = work / "recalculated"
    out.mkdir()
    subprocess.run([SOFFICE, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--calc",
                    "--convert-to", "xlsx", "--outdir", str(out), str(book)],
                   check=True, capture_output=True, timeout=300)
    return out / book.name


@pytest.fixture(scope="module", params=["openpyxl rows", "fast rows"])
def books(request, tmp_path_factory):
    """The sample's expense workbook, written cell by cell by openpyxl, or with the fast row writer
    (grantval.io.bigsheet) for every row after the first, then recalculated."""
    import grantval.io.write as W

    if SOFFICE is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is required in CI; .ci/run installs libreoffice-calc")
        pytest.skip("LibreOffice is not installed")
    work = tmp_path_factory.mktemp("recalc")
    run = api.expense(SAMPLE, through="2026-12-31", forecast_through="2027-12-31")
    book = work / "expense.xlsx"
    saved = W.FAST_ROWS
    W.FAST_ROWS = 3 if request.param == "fast rows" else saved
    try:
        api.write_expense(run, book, None, timestamp=False, share_price=31.0)
    finally:
        W.FAST_ROWS = saved
    return run, openpyxl.load_workbook(book), openpyxl.load_workbook(recalculate(book, work), data_only=True)


def test_no_formula_evaluates_to_an_error(books):
    _, formulas, values = books
    n = 0
    for ws in formulas.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if cell.data_type == "f":
                    n += 1
                    got = values[ws.title][cell.coordinate].value
                    assert got is not None, f"{ws.title}!{cell.coordinate} has no value"
                    assert not (isinstance(got, str) and got.startswith(ERRORS)), f"{ws.title}!{cell.coordinate}: {got}"
    assert n > 100


def test_recomputed_bsm_values_equal_the_tool(books):
    run, formulas, values = books
    ws = values["fair_values"]
    header = [c.value for c in ws[1]]
    tool = header.index("Tool fair value per unit")
    again = header.index("Recomputed fair value per unit")
    model = header.index("Model")
    count = 0
    for row in ws.iter_rows(min_row=2, values_only=True):
        if row[model] == "bsm":
            assert row[again] == pytest.approx(row[tool], rel=1e-9)
            count += 1
    assert count == int((run.fair_values.table["model"] == "bsm").sum()) > 0


def test_sum_formulas_equal_the_tool_to_the_cent(books):
    run, formulas, values = books
    s = run.schedule
    ws = values["expense_by_grant"]
    n = run.ledger.n_grants
    rows = list(ws.iter_rows(min_row=2, max_row=n + 2, values_only=True))
    totals = [r[-1] for r in rows[:-1]]
    np.testing.assert_allclose(totals, s.expense_cents.sum(axis=1) / 100, atol=0.005)
    np.testing.assert_allclose(rows[-1][6:-1], s.expense_cents.sum(axis=0) / 100, atol=0.005)
    assert rows[-1][-1] == pytest.approx(s.expense_cents.sum() / 100, abs=0.005)
    grp = list(values["expense_by_group"].iter_rows(min_row=2, values_only=True))
    assert grp[-1][-1] == pytest.approx(s.expense_cents.sum() / 100, abs=0.005)


def test_every_check_reads_pass(books):
    _, _, values = books
    rows = list(values["checks"].iter_rows(min_row=2, values_only=True))
    assert len(rows) >= 8
    for row in rows:
        assert row[5] == "PASS", row
