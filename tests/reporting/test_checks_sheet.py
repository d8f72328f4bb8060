"""The checks sheet as printed and as read without recalculation (close-ready issue).

Common practice (no outside source): each figure carries the number format of what it is,
one tolerance format per kind, labels are not cut at the column edge, and a reader that does
not recalculate (openpyxl ``data_only``, file previewers) still sees the verdict: the tool's
own verdict is the cached value of the live verdict formula.
"""

import re
import zipfile

import openpyxl
import pytest

from grantval.errors import OutputError
from grantval.io.xlsx.cached import splice_cached
from grantval.io.xlsx.sheet import Formula
from grantval.io.xlsx.write import write_workbook
from grantval.reporting.checks import (
    FIGURE_FORMATS,
    TOLERANCE_FORMATS,
    CheckRow,
    check_kind,
    checks_sheet,
)

LONG = ("Grants whose recognised + unrecognised differs from expected quantity x fair value by over a cent, "
        "counted grant by grant")

ROWS = [
    CheckRow("Grants in the ledger = grants valued", 67, 67, 0, True),
    CheckRow("Period cells sum to the engine's total", Formula("=1+1"), 2518169.47413964, 0.005, True),
    CheckRow("Cost check", 2518169.45, 2518169.47413964, 0.68, True),
    CheckRow("Incremental shares: engine vs recomputation", 1234.56789, 1234.5678, 1e-6 * 1234.5678, False),
    CheckRow("BSM fair values (relative tolerance)", 308.6384788111, 308.6384788112, 1e-9, True, relative=True),
    CheckRow(LONG, 0, 1, 0, False),
]


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    path = tmp_path_factory.mktemp("checks") / "c.xlsx"
    write_workbook(path, [checks_sheet(ROWS)])
    return path


def test_kinds_inferred_from_tolerance_and_name():
    assert [check_kind(c) for c in ROWS] == ["count", "money", "money", "shares", "relative", "count"]
    assert check_kind(CheckRow("x", 1, 1, 0.005, True, kind="shares")) == "shares"


def test_every_figure_formatted_by_its_kind(book):
    ws = openpyxl.load_workbook(book)["checks"]
    for r, c in enumerate(ROWS, start=2):
        kind = check_kind(c)
        for col in "BCD":
            assert ws[f"{col}{r}"].number_format == FIGURE_FORMATS[kind], (c.name, col)
        assert ws[f"E{r}"].number_format == TOLERANCE_FORMATS[kind], c.name
    assert FIGURE_FORMATS["money"] == "#,##0.00" and FIGURE_FORMATS["count"] == "#,##0"
    assert "E" not in "".join(FIGURE_FORMATS.values()) + "".join(TOLERANCE_FORMATS.values())  # no scientific


def test_long_labels_wrap_on_a_taller_row(book):
    ws = openpyxl.load_workbook(book)["checks"]
    r = 1 + len(ROWS)
    assert ws[f"A{r}"].value == LONG and ws[f"A{r}"].alignment.wrap_text
    assert ws.row_dimensions[r].height >= 30
    assert ws.row_dimensions[2].height is None  # a short label keeps one line


def test_cached_verdicts_are_the_tools_and_read_without_recalculation(book):
    values = openpyxl.load_workbook(book, data_only=True)["checks"]
    got = [values[f"F{r}"].value for r in range(2, len(ROWS) + 2)]
    assert got == ["PASS" if c.tool_pass else "FAIL" for c in ROWS]
    formulas = openpyxl.load_workbook(book)["checks"]
    assert formulas["F2"].value == '=IF(ABS(D2)<=E2,"PASS","FAIL")'  # still the live formula
    # differences cached where both figures are plain numbers, left to recalculation otherwise
    assert values["D2"].value == 0 and values["D3"].value is None
    assert values["D4"].value == pytest.approx(2518169.45 - 2518169.47413964)
    assert values["E6"].value == pytest.approx(1e-9 * 308.6384788112)


def test_no_verdict_cell_is_left_without_a_value_in_the_xml(book):
    with zipfile.ZipFile(book) as z:
        xml = z.read("xl/worksheets/sheet1.xml").decode()
    cells = re.findall(r'<c r="F(\d+)"([^>]*)><f>[^<]*</f><v>([^<]*)</v></c>', xml)
    assert [(r, v) for r, _, v in cells] == [(str(r), "PASS" if c.tool_pass else "FAIL")
                                             for r, c in enumerate(ROWS, start=2)]
    assert all('t="str"' in attrs for _, attrs, _ in cells)
    assert not re.search(r'<c r="F\d+"[^>]*><f>[^<]*</f><v\s*/>', xml)


def test_splice_refuses_a_cell_that_is_not_an_empty_formula():
    xml = b'<sheetData><row r="2"><c r="F2"><f>1+1</f><v /></c><c r="G2" t="n"><v>1</v></c></row></sheetData>'
    assert b"<v>2</v>" in splice_cached(xml, {"F2": 2})
    assert b'<c r="F2" t="str"><f>1+1</f><v>a&amp;b</v></c>' in splice_cached(xml, {"F2": "a&b"})
    with pytest.raises(OutputError, match="G2"):
        splice_cached(xml, {"G2": "PASS"})
