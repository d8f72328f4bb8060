"""The command layer: exit codes, outputs, output safety."""

import csv
import hashlib
import pathlib
import shutil

import openpyxl
import pytest
import typer
from typer.testing import CliRunner

from grantval.io.convert import csv_folder_to_workbook
from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS

from grantval import __version__
from grantval.cli import app
from tests.factory import BASE, set_cell, tables, write_ledger

SAMPLE = pathlib.Path(__file__).resolve().parents[1] / "sample_grants"
runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def test_version():
    r = run("--version")
    assert r.exit_code == 0 and __version__ in r.stdout


def test_check_sample_ledgers_clean():
    for ledger in (SAMPLE, SAMPLE / "sample_grants.xlsx"):
        r = run("check", ledger)
        assert r.exit_code == 0, r.output
        assert "no errors" in r.stdout


def test_check_lists_every_problem_and_exits_1(tmp_path):
    data = set_cell(BASE, "grants", 0, "quantity", "0")
    data = set_cell(data, "grants", 1, "grant_date", "2027/01/01")
    r = run("check", write_ledger(tmp_path / "l", data))
    assert r.exit_code == 1
    assert "grants.csv, row 2, quantity: must be a positive whole number" in r.output
    assert "grants.csv, row 3, grant_date:" in r.output
    assert "Traceback" not in r.output


def test_value_writes_workbook_and_csv(tmp_path):
    out = tmp_path / "fv.xlsx"
    r = run("value", SAMPLE, "-o", out, "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 0, r.output
    with open(tmp_path / "csv" / "fair_values.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert {"grant_id", "fair_value_per_unit", "grant_date_fair_value"} <= set(rows[0])
    wb = openpyxl.load_workbook(out, read_only=True)
    assert wb.sheetnames == ["run", "fair_values", "notes"]  # every workbook has a run sheet
    notes = [c for row in wb["notes"].iter_rows(values_only=True) for c in row if c]
    assert any("qualified accounting staff" in str(c) for c in notes)


def test_value_refuses_bad_ledger_and_writes_nothing(tmp_path):
    data = set_cell(BASE, "grants", 0, "quantity", "abc")
    out = tmp_path / "fv.xlsx"
    r = run("value", write_ledger(tmp_path / "l", data), "-o", out, "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 1
    assert "grants.csv, row 2, quantity" in r.output
    assert not out.exists() and not (tmp_path / "csv" / "fair_values.csv").exists()
    assert not list(tmp_path.glob("*.part"))


def _digests(folder: pathlib.Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir()) if p.is_file()}


def test_csv_dir_that_is_the_ledger_folder_is_refused_before_any_work(tmp_path):
    # robustness issue, item 4: `expense --csv-dir LEDGER` wrote its own tranches.csv there and every
    # later run failed; an output folder that is a ledger folder is refused (exit 2), nothing written
    ledger = write_ledger(tmp_path / "l", tables())
    before = _digests(ledger)
    for args in (["value", ledger, "--csv-dir", ledger], ["expense", ledger, "--through", "2028-12-31",
                                                           "--csv-dir", ledger]):
        r = run(*args)
        assert r.exit_code == 2 and "is the ledger folder" in r.output, r.output
    assert _digests(ledger) == before
    assert run("check", ledger).exit_code == 0


OVER_THE_WORKBOOK = {
    "value": lambda wb: ["value", wb, "-o", wb],
    "expense": lambda wb: ["expense", wb, "--through", "2028-12-31", "-o", wb],
    "disclose": lambda wb: ["disclose", wb, "--from", "2027-01-01", "--through", "2028-12-31", "-o", wb],
    "whatif": lambda wb: ["whatif", wb, "--vary", "volatility=+0.05", "-o", wb],
}


@pytest.mark.parametrize("command", OVER_THE_WORKBOOK)
def test_output_that_is_an_input_is_refused(tmp_path, command):
    # an output path that is one of the inputs is refused before any work (exit 2, as a usage
    # problem): the message names the path, and the input workbook is left as it was
    wb = tmp_path / "book.xlsx"
    csv_folder_to_workbook(write_ledger(tmp_path / "l", tables()), wb, TABLE_NAMES, TEXT_COLUMNS)
    before = wb.read_bytes()
    r = run(*OVER_THE_WORKBOOK[command](wb))
    assert r.exit_code == 2, r.output
    assert f"the output {wb} (-o) is one of the inputs; choose another path" in r.output
    assert wb.read_bytes() == before


def test_output_that_is_the_ledger_folder_is_refused(tmp_path):
    # a CSV ledger folder whose name ends in .xlsx, given as the workbook to write
    folder = write_ledger(tmp_path / "book.xlsx", tables())
    before = _digests(folder)
    r = run("value", folder, "-o", folder)
    assert r.exit_code == 2 and "is one of the inputs" in r.output, r.output
    assert folder.is_dir() and _digests(folder) == before


def test_assumptions_output_that_is_a_market_input_is_refused(tmp_path):
    market = tmp_path / "m"
    shutil.copytree(SAMPLE / "market", market)
    before = _digests(market)
    r = run("assumptions", "--prices", market / "prices.csv", "--curve", market / "curve.csv", "--dates", "2026-05-15",
            "--expected-term", "6", "--ticker", "CRVN", "--curve-fallback", "-o", market / "prices.csv")
    assert r.exit_code == 2 and f"the output {market / 'prices.csv'} (-o) is one of the inputs" in r.output, r.output
    assert _digests(market) == before


def test_assumptions_output_over_the_ledgers_grants_is_refused(tmp_path):
    ledger = tmp_path / "l"
    shutil.copytree(SAMPLE, ledger, ignore=shutil.ignore_patterns("*.xlsx", "*.py", "market"))
    before = _digests(ledger)
    r = run("assumptions", "--prices", SAMPLE / "market" / "prices.csv", "--curve", SAMPLE / "market" / "curve.csv",
            "--dividends", SAMPLE / "market" / "dividends.csv", "--ledger", ledger, "--ticker", "CRVN",
            "--curve-fallback", "-o", ledger / "grants.csv")
    assert _digests(ledger) == before
    assert r.exit_code == 2 and "would be read as the grants table" in r.output, r.output


def test_whatif_csv_over_the_planned_file_is_refused(tmp_path):
    ledger = write_ledger(tmp_path / "l", tables())
    planned = write_ledger(tmp_path / "p", {"grants": [dict(BASE["grants"][0], grant_id="P1", holder_id="")]})
    (planned / "grants.csv").rename(planned / "scenarios.csv")
    before = _digests(planned)
    r = run("whatif", ledger, "--vary", "volatility=+0.05", "--planned", planned / "scenarios.csv",
            "--csv-dir", planned)
    assert _digests(planned) == before
    assert r.exit_code == 2 and "is one of the inputs" in r.output, r.output


def test_usage_errors_exit_2(tmp_path):
    assert run("value", SAMPLE).exit_code == 2
    assert run("value", SAMPLE, "-o", tmp_path / "x.csv").exit_code == 2


def test_ledger_text_starting_with_equals_is_text_in_workbook(tmp_path):
    data = set_cell(BASE, "grants", 0, "holder_id", "=HYPERLINK(\"x\")")
    data = set_cell(data, "grants", 1, "group", "+ops")
    out = tmp_path / "fv.xlsx"
    r = run("value", write_ledger(tmp_path / "l", data), "-o", out, "--csv-dir", tmp_path)
    assert r.exit_code == 0, r.output
    wb = openpyxl.load_workbook(out)
    ws = wb["fair_values"]
    holder = [c for c in ws[2] if c.value == '=HYPERLINK("x")']
    assert holder and holder[0].data_type == "s"
    text = (tmp_path / "fair_values.csv").read_text()
    assert "'=HYPERLINK" in text and ",'+ops," in text


def test_expense_on_sample_ledger(tmp_path):
    out = tmp_path / "e.xlsx"
    r = run("expense", SAMPLE, "--through", "2026-12-31", "--forecast-through", "2027-12-31", "-o", out,
            "--csv-dir", tmp_path / "csv")
    assert r.exit_code == 0, r.output
    for name in ("expense.csv", "expense_by_group.csv", "tranches.csv", "forecast.csv", "unrecognized.csv"):
        assert (tmp_path / "csv" / name).exists()
    wb = openpyxl.load_workbook(out, read_only=True)
    assert wb.sheetnames == ["run", "summary", "fair_values", "expense_by_grant", "expense_by_group", "tranches",
                             "forecast", "unrecognized", "purchase_plans", "purchase_plan_activity", "checks",
                             "notes"]  # the demo's purchase plan adds its two sheets
    with open(tmp_path / "csv" / "expense.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["grant_id", "group", "period_end", "expense", "cumulative_expense"]
    by_group = {}
    with open(tmp_path / "csv" / "expense_by_group.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            by_group[row["period_end"]] = by_group.get(row["period_end"], 0) + round(float(row["expense"]) * 100)
    by_grant = {}
    for row in rows:
        by_grant[row["period_end"]] = by_grant.get(row["period_end"], 0) + round(float(row["expense"]) * 100)
    assert by_group == by_grant


def test_expense_usage_errors(tmp_path):
    r = run("expense", SAMPLE, "--through", "31/12/2026", "-o", tmp_path / "e.xlsx")
    assert r.exit_code == 2 and "--through" in r.output and not (tmp_path / "e.xlsx").exists()
    r = run("expense", SAMPLE, "--through", "2026-12-31", "--standard", "ifrs2", "--attribution", "straight-line",
            "-o", tmp_path / "e.xlsx")
    assert r.exit_code == 2 and "IFRS 2 requires graded" in r.output
    r = run("expense", SAMPLE, "--through", "2026-12-31", "--period", "week", "-o", tmp_path / "e.xlsx")
    assert r.exit_code == 2


def test_usage_lines_name_arguments_without_braces():
    # POSIX utility syntax (IEEE Std 1003.1, 12.1): required operands bare, optional in [ ];
    # typer's own usage line writes {LEDGER}, which reads like a set of choices
    group = typer.main.get_command(app)
    for name in sorted(group.commands):
        result = CliRunner().invoke(app, [name, "--help"])
        assert result.exit_code == 0, name
        usage = result.output.splitlines()[0]
        assert "{" not in usage, usage
    assert CliRunner().invoke(app, ["expense", "--help"]).output.startswith("Usage: root expense [OPTIONS] LEDGER")


def test_a_bad_worker_count_is_refused_before_any_output(tmp_path, monkeypatch):
    # GRANTVAL_PROCESSES (grantval/workers.py) is checked when the command starts: exit 2, nothing created
    monkeypatch.setenv("GRANTVAL_PROCESSES", "two")
    r = CliRunner().invoke(app, ["expense", str(SAMPLE), "--through", "2026-12-31", "--csv-dir", str(tmp_path / "out"),
                                 "--no-workbook"])
    assert r.exit_code == 2
    assert "GRANTVAL_PROCESSES must be a whole number of worker processes; got 'two'" in r.output
    assert not (tmp_path / "out").exists()
