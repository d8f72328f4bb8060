"""The checks sheet recalculated by LibreOffice: one verdict column, equal to the tool's own verdict.

A ledger with a cash-settled SAR, a cash unit and an equity option (tests/attribution/cash_ledgers.py,
invented figures): the cost check's two sides must cover the same grants (cash-settled grants carry no
grant-date value on the tranches side, so their rows are left out of the live sum too).  Common
practice: a tie-out that cannot fail is no evidence, so one cell is then corrupted and the live
verdict must turn to FAIL.
"""

import openpyxl
import pytest

from grantval import api
from tests.attribution.cash_ledgers import mixed_ledger
from tests.io.test_recalculation import SOFFICE, recalculate

COST = "Recognised + unrecognised = expected quantity x fair value (all tranches)"

pytestmark = pytest.mark.skipif(SOFFICE is None, reason="LibreOffice is not installed")


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    work = tmp_path_factory.mktemp("cash_checks")
    run = api.expense(mixed_ledger(work / "l"), through="2031-12-31", period="year")
    book = work / "e.xlsx"
    out = api.write_expense(run, book, None, timestamp=False)
    return work, book, out.checks


def _verdicts(book, work):
    values = openpyxl.load_workbook(recalculate(book, work), data_only=True)["checks"]
    head = [c.value for c in values[1]]
    assert head == ["Check", "Figure A", "Figure B", "Difference", "Tolerance", "Verdict"]
    return {r[0]: r[5] for r in values.iter_rows(min_row=2, values_only=True)}


def test_cash_ledger_reads_pass_on_every_check_and_equals_the_tools_verdict(written):
    work, book, checks = written
    live = _verdicts(book, work / "clean")
    assert COST in live and len(live) == len(checks) >= 10
    for c in checks:
        assert live[c.name] == ("PASS" if c.tool_pass else "FAIL") == "PASS", c.name


def test_a_corrupted_equity_cell_turns_the_live_cost_check_to_fail(written):
    work, book, _ = written
    wb = openpyxl.load_workbook(book)
    ws = wb["unrecognized"]
    row = next(r for r in range(2, ws.max_row + 1) if ws.cell(r, 1).value == "O1")
    ws.cell(row, 3).value = ws.cell(row, 3).value + 1.0  # the option's recognised to date, one unit off
    bad = work / "bad" / "e.xlsx"
    bad.parent.mkdir()
    wb.save(bad)
    live = _verdicts(bad, work / "bad")
    assert live[COST] == "FAIL"
    assert [k for k, v in live.items() if v == "FAIL"] == [COST]


def test_cached_verdict_does_not_mask_the_live_formula(tmp_path):
    # The tool's verdict is the verdict formula's cached value (for readers that do not recalculate);
    # a spreadsheet that recalculates must still follow the cells.  Here the cached value says PASS
    # while the figures differ by 1 with no tolerance: LibreOffice must read FAIL.
    from grantval.io.xlsx.write import write_workbook
    from grantval.reporting.checks import CheckRow, checks_sheet

    book = tmp_path / "c.xlsx"
    write_workbook(book, [checks_sheet([CheckRow("Cached PASS, figures apart", 1, 2, 0, True),
                                        CheckRow("Cached FAIL, figures equal", 3, 3, 0, False)])])
    assert [r[5] for r in openpyxl.load_workbook(book, data_only=True)["checks"].iter_rows(min_row=2, values_only=True)] \
        == ["PASS", "FAIL"]
    live = _verdicts(book, tmp_path)
    assert live == {"Cached PASS, figures apart": "FAIL", "Cached FAIL, figures equal": "PASS"}
