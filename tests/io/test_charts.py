"""Charts of the workbooks: kinds, the cells they are drawn from, titles in words (close-ready issue).

Common practice (no outside source): a chart for print names what it shows in its title and
axis titles, draws from the sheet's cells (so it follows them), labels periods as text, and a
tornado chart has horizontal bars, low and high change on one row, the widest swing on top.
"""

import pathlib

import numpy as np
import openpyxl
import pytest

from grantval import api
from grantval.io.xlsx.charts import build_chart
from grantval.io.xlsx.sheet import Chart, Sheet
from grantval.io.xlsx.write import write_workbook
from grantval.reporting.formats import period_labels

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"


def _text(title) -> str:
    return "".join(r.t for p in title.tx.rich.p for r in (p.r or []))


def _cells(wb, ref: str) -> list:
    """Values of the cells a chart reference ('sheet'!$A$1:$A$3 or 'sheet'!C1) names."""
    sheet, cells = ref.rsplit("!", 1)
    got = wb[sheet.strip("'")][cells.replace("$", "")]
    return [got.value] if not isinstance(got, tuple) else [c.value for row in got for c in row]


@pytest.fixture(scope="module")
def expense_book(tmp_path_factory):
    run = api.expense(SAMPLE, through="2026-12-31", forecast_through="2027-12-31")
    path = tmp_path_factory.mktemp("charts") / "e.xlsx"
    api.write_expense(run, path, None, timestamp=False)
    return run, openpyxl.load_workbook(path)


@pytest.fixture(scope="module")
def whatif_book(tmp_path_factory):
    run = api.whatif(SAMPLE, vary=["volatility=+0.05,-0.05", "expected_term_years=+1,-1"], grants_from="2026-01-01")
    path = tmp_path_factory.mktemp("charts") / "w.xlsx"
    api.write_whatif(run, path, None, timestamp=False)
    return run, openpyxl.load_workbook(path)


def test_period_labels_are_text_a_person_reads():
    assert period_labels(["2026-12-31", "2026-03-31", "2024-02-29", "2030-08-17"]) == [
        "Dec 2026", "Mar 2026", "Feb 2024", "17 Aug 2030"]


def test_summary_charts_expense_by_period_and_current_period_by_group(expense_book):
    run, wb = expense_book
    charts = wb["summary"]._charts
    assert len(charts) == 2
    by_period, by_group = charts
    assert type(by_period).__name__ == "BarChart" and by_period.type == "col"
    s = by_period.series[0]
    cats = _cells(wb, s.cat.strRef.f)  # text categories, not dates
    assert cats == period_labels(run.schedule.period_ends) and all(isinstance(c, str) for c in cats)
    vals = _cells(wb, s.val.numRef.f)
    np.testing.assert_allclose(vals, run.schedule.expense_cents.sum(axis=0) / 100, atol=0.005)
    assert _text(by_period.title) == "Expense by period"
    assert _text(by_period.x_axis.title) == "Period ending" and _text(by_period.y_axis.title) == "Expense"
    # the current period's column of expense_by_group, one horizontal bar per group
    assert by_group.type == "bar" and by_group.x_axis.scaling.orientation == "maxMin"
    g = by_group.series[0]
    assert g.val.numRef.f.startswith("'expense_by_group'!")
    header = _cells(wb, g.tx.strRef.f)
    assert header == [str(np.datetime64(run.schedule.period_ends[-1], "D"))]
    groups = _cells(wb, g.cat.strRef.f)
    assert groups == sorted(set(run.inputs.group)) and "Total" not in groups
    assert "Dec 2026" in _text(by_group.title)


def test_tornado_chart_horizontal_low_and_high_widest_on_top(whatif_book):
    _, wb = whatif_book
    ws = wb["tornado"]
    (chart,) = ws._charts
    assert type(chart).__name__ == "BarChart"
    assert chart.type == "bar"  # horizontal bars
    assert chart.overlap == 100  # low and high of one assumption on one row
    assert chart.x_axis.scaling.orientation == "maxMin"  # first table row (widest range) on top
    assert chart.y_axis.crosses == "max"  # value axis kept at the bottom
    low, high = chart.series
    assert _cells(wb, low.tx.strRef.f) == ["Expense change, lowest"]
    assert _cells(wb, high.tx.strRef.f) == ["Expense change, highest"]
    names = _cells(wb, low.cat.strRef.f)
    assert names == [ws.cell(r, 1).value for r in range(2, ws.max_row + 1) if ws.cell(r, 1).value]
    lows, highs = _cells(wb, low.val.numRef.f), _cells(wb, high.val.numRef.f)
    ranges = np.array(highs) - np.array(lows)
    assert ranges[0] == ranges.max() and all(np.diff(ranges) <= 0)
    assert "one assumption at a time" in _text(chart.title)
    assert _text(chart.y_axis.title) == "Change in expense from the base"


def test_whatif_change_chart_straight_lines_on_live_change_cells(whatif_book):
    run, wb = whatif_book
    ws = wb["expense_by_period"]
    (chart,) = ws._charts
    assert type(chart).__name__ == "LineChart"
    n_scenarios = len(run.results) - 1
    assert len(chart.series) == n_scenarios
    for k, s in enumerate(chart.series):
        assert s.smooth is False
        col = s.val.numRef.f.split("!")[1].split(":")[0].strip("$").rstrip("0123456789").strip("$")
        assert ws[f"{col}2"].data_type == "f"  # the change is a live formula on the scenario columns
        head = ws[f"{col}1"].value
        sid = run.results[k + 1].scenario.id
        assert head.startswith(f"Change {sid} (") and "volatility" in head  # the id defined where it is used
    cats = _cells(wb, chart.series[0].cat.strRef.f)
    assert cats == period_labels(run.results[0].schedule.period_ends)
    assert _text(chart.x_axis.title) == "Period ending"


def test_volatility_curve_is_a_scatter_of_its_cells(whatif_book):
    _, wb = whatif_book
    (chart,) = wb["volatility_curve"]._charts
    assert type(chart).__name__ == "ScatterChart"
    s = chart.series[0]
    assert s.xVal.numRef.f == "'volatility_curve'!$C$2:$C$4" and s.yVal.numRef.f == "'volatility_curve'!$D$2:$D$4"


def test_chart_sheets_print_landscape_without_grid(expense_book, whatif_book):
    for _, wb in (expense_book, whatif_book):
        for ws in wb.worksheets:
            if ws._charts:
                assert ws.page_setup.orientation == "landscape", ws.title
                assert not ws.print_options.gridLines, ws.title


def test_chart_of_another_sheet_placed_before_it_and_page_break(tmp_path):
    import pandas as pd

    frame = pd.DataFrame({"group": ["a", "b"], "amount": [1.0, 2.0]})
    spec = Chart("bar", "Amount by group", (2, 1, 2, 3), (1, 2, 1, 3), "A20", source="data", y_title="Amount",
                 x_title="Group", horizontal=True, new_page=True)
    path = tmp_path / "b.xlsx"
    write_workbook(path, [Sheet("front", rows=[["Front"]], charts=[spec]), Sheet("data", frame=frame)])
    wb = openpyxl.load_workbook(path)
    (chart,) = wb["front"]._charts
    assert chart.series[0].val.numRef.f == "'data'!$B$2:$B$3"
    assert [b.id for b in wb["front"].row_breaks.brk] == [19]


def test_unknown_chart_kind_is_refused():
    with pytest.raises(ValueError, match="pie"):
        build_chart(Chart("pie", "t", (1, 1, 1, 2), (1, 2, 1, 2), "A1"), None)


def test_change_chart_of_a_large_grid_draws_the_lowest_and_highest_scenarios():
    import pandas as pd

    from grantval.reporting.whatif_book import CHART_SCENARIOS, expense_period_sheet

    ids = [f"S{k:02d}" for k in range(1, CHART_SCENARIOS + 3)]
    ends = np.array(["2026-03-31", "2026-06-30"], dtype="datetime64[D]")
    exp = pd.DataFrame({"period_end": ends, "base": [10.0, 10.0]})
    shift = {sid: k - 3.0 for k, sid in enumerate(ids)}  # S01 lowest total change, the last one highest
    for sid in ids:
        exp[sid] = exp["base"] + shift[sid]
    scen = pd.DataFrame({"scenario": ["base", *ids], "description": ["base", *[f"volatility=+0.0{k}" for k in
                                                                                 range(len(ids))]]})
    sheet = expense_period_sheet(exp, scen)
    (chart,) = sheet.charts
    cols = [c for c in sheet.frame.columns if c.startswith("change_")]
    first = list(sheet.frame.columns).index(cols[0]) + 1
    assert [r[0] - first for r in chart.ranges()] == [0, len(ids) - 1]
    assert "lowest and highest" in chart.title
    assert sheet.labels["change_S01"] == "Change S01 (volatility=+0.00)"
