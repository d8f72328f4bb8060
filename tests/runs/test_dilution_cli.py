"""``grantval dilution``: outputs, exit codes and messages."""

import csv

import openpyxl
from typer.testing import CliRunner

from grantval.cli import app
from tests.attribution.tax_ledgers import event, grant, ledger

runner = CliRunner()
QUARTERS = [("2027-03-31", 14), ("2027-06-30", 15), ("2027-09-30", 9), ("2027-12-31", 16)]


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _inputs(tmp_path, rows=QUARTERS):
    loc = ledger(tmp_path / "l", grants=[grant("G1"), grant("R1", award="rsu", qty=400, months=36, every=3),
                                         grant("G2", strike="12", gdate="2027-04-01")],
                 events=[event("G1", "2028-02-01", "exercise", 100, 20)])
    prices = tmp_path / "avg.csv"
    prices.write_text("period_end,average_share_price\n" + "".join(f"{d},{x}\n" for d, x in rows))
    return loc, prices


def test_writes_csv_and_workbook(tmp_path):
    loc, prices = _inputs(tmp_path)
    out = tmp_path / "d.xlsx"
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027-01-01", "--through", "2027-12-31",
            "-o", out, "--csv-dir", tmp_path / "csv", "--no-timestamp")
    assert r.exit_code == 0, r.output
    with open(tmp_path / "csv" / "dilution.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [x["period_end"] for x in rows] == [d for d, _ in QUARTERS]
    assert list(rows[0])[:3] == ["period_end", "incremental_shares", "antidilutive_options"]
    assert float(rows[2]["incremental_shares"]) < float(rows[3]["incremental_shares"])  # price 9 vs 16
    with open(tmp_path / "csv" / "dilution_by_grant.csv", newline="") as fh:
        by_grant = list(csv.DictReader(fh))
    total = sum(float(x["incremental_shares"]) for x in by_grant if x["period_end"] == "2027-12-31")
    assert total == float(rows[3]["incremental_shares"]) or abs(total - float(rows[3]["incremental_shares"])) < 1e-6
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames == ["run", "dilution", "dilution_by_grant", "checks", "notes"]
    checks = [row for row in wb["checks"].iter_rows(min_row=2, values_only=True)]
    assert checks and all(str(c[5]).startswith("=IF(") for c in checks)


def test_missing_average_price_exits_1_naming_file_and_period(tmp_path):
    loc, prices = _inputs(tmp_path, QUARTERS[:2] + QUARTERS[3:])
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027-01-01", "--through", "2027-12-31",
            "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 1
    assert "avg.csv, period_end: no average_share_price for the period ending 2027-09-30" in r.output
    assert not (tmp_path / "csv").exists()


def test_usage_problems_exit_2(tmp_path):
    loc, prices = _inputs(tmp_path)
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027-01-01", "--through", "2027-12-31")
    assert r.exit_code == 2 and "--csv-dir" in r.output
    r = run("dilution", loc, "--average-prices", prices, "--from", "2028-01-01", "--through", "2027-12-31",
            "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 2 and "--from 2028-01-01 is after --through 2027-12-31" in r.output
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027/01/01", "--through", "2027-12-31",
            "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 2 and "--from" in r.output


def test_refuses_to_overwrite_the_prices_file(tmp_path):
    loc, prices = _inputs(tmp_path)
    (tmp_path / "csv").mkdir()
    target = tmp_path / "csv" / "dilution.csv"
    target.write_text(prices.read_text())
    r = run("dilution", loc, "--average-prices", target, "--from", "2027-01-01", "--through", "2027-12-31",
            "--csv-dir", tmp_path / "csv")
    assert r.exit_code != 0 and "Traceback" not in r.output


def _recalculated(tmp_path, loc, prices):
    """The dilution workbook recalculated by LibreOffice (skip without it) and its checks' verdicts."""
    import pytest

    from tests.io.test_recalculation import SOFFICE, recalculate

    if SOFFICE is None:
        pytest.skip("LibreOffice is not installed")
    out = tmp_path / "d.xlsx"
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027-01-01", "--through", "2027-12-31",
            "-o", out, "--no-timestamp")
    assert r.exit_code == 0, r.output
    wb = openpyxl.load_workbook(recalculate(out, tmp_path), data_only=True)
    return wb, [row[5] for row in wb["checks"].iter_rows(min_row=2, values_only=True)]


def test_workbook_formulas_recalculate_to_pass(tmp_path):
    """LibreOffice recalculates the live checks (row-by-row incremental shares) of the dilution workbook."""
    wb, status = _recalculated(tmp_path, *_inputs(tmp_path))
    assert status and all(s == "PASS" for s in status), status
    ws = wb["dilution_by_grant"]
    head = [c.value for c in ws[1]]
    i, j = head.index("Incremental shares"), head.index("Recomputed incremental shares")
    for row in ws.iter_rows(min_row=2, values_only=True):
        assert abs(row[i] - row[j]) < 1e-9


def _psu_inputs(tmp_path):
    from tests.factory import write_ledger

    loc, prices = _inputs(tmp_path)
    unit = {**grant("P1", award="rsu", qty=1200, months=24, every=24), "award_type": "psu", "condition_set": "ebit",
            "max_payout": "2"}
    others = [{**g, "condition_set": "", "max_payout": ""} for g in (grant("G1"), grant("G2", strike="12"))]
    perf = [{"condition_set": "ebit", "assessed_on": d, "payout": x, "expected_vest_date": ""}
            for d, x in (("2027-01-01", "1"), ("2027-05-15", "1.5"), ("2027-08-20", "0"))]
    from tests.attribution.tax_ledgers import assumption

    loc = write_ledger(tmp_path / "lp", {"grants": [unit] + others, "assumptions": [assumption()], "performance": perf})
    return loc, prices


def test_performance_units_in_the_csv_and_workbook(tmp_path):
    loc, prices = _psu_inputs(tmp_path)
    out = tmp_path / "d.xlsx"
    r = run("dilution", loc, "--average-prices", prices, "--from", "2027-01-01", "--through", "2027-12-31",
            "-o", out, "--csv-dir", tmp_path / "csv", "--no-timestamp")
    assert r.exit_code == 0, r.output
    assert "payout in force at each period end" in r.output
    with open(tmp_path / "csv" / "dilution_by_grant.csv", newline="") as fh:
        by_grant = list(csv.DictReader(fh))
    head = list(by_grant[0])
    assert head[:13] == ["grant_id", "group", "award_type", "period_end", "weighted_units", "exercise_price",
                         "unrecognised_per_unit_start", "unrecognised_per_unit_end", "average_unrecognised_per_unit",
                         "assumed_proceeds_per_unit", "average_share_price", "incremental_shares", "antidilutive"]
    assert head[13:] == ["weighted_units_outstanding", "contingent_payout", "contingent_assessed_on",
                         "contingent_basis"]
    p1 = [x for x in by_grant if x["grant_id"] == "P1"]
    assert [x["contingent_assessed_on"] for x in p1] == ["2027-01-01", "2027-05-15", "2027-08-20", "2027-08-20"]
    assert [float(x["contingent_payout"]) for x in p1] == [1.0, 1.5, 0.0, 0.0]
    assert [float(x["incremental_shares"]) for x in p1][2:] == [0.0, 0.0]
    assert all(x["contingent_basis"] == "not contingent" for x in by_grant if x["grant_id"] != "P1")
    wb = openpyxl.load_workbook(out)
    names = [row[0] for row in wb["checks"].iter_rows(min_row=2, values_only=True)]
    assert any(str(n).startswith("Contingently issuable shares") for n in names)
    notes = " ".join(str(c) for row in wb["notes"].iter_rows(values_only=True) for c in row if c)
    assert "stated policy for an accountant to review" in notes


def test_performance_unit_workbook_recalculates_to_pass(tmp_path):
    _, status = _recalculated(tmp_path, *_psu_inputs(tmp_path))
    assert len(status) == 4 and all(s == "PASS" for s in status), status
