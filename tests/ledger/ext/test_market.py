"""Market-condition tables: a good ledger loads, bad rows are named by file, row and column.

Rows are as a spreadsheet shows them (header = row 1).  Ledgers invented for the tests.
"""

from tests.factory import tables
from tests.ledger.test_problems import assert_problem, problems_of


def _market(data, cor=0.3, curve="25:0.5;50:1;75:2", metric="relative_tsr"):
    data["market_conditions"] = [{"condition_set": "M1", "metric": metric, "start_date": "2024-01-01",
                                  "end_date": "2026-12-31", "averaging_days": 20, "monitoring": "end",
                                  "peer_set": "P", "payout_curve": curve}]
    data["peers"] = [{"peer_set": "P", "peer_id": "A", "volatility": 0.3, "dividend_yield": 0.0}]
    data["correlations"] = [{"peer_set": "P", "first": "self", "second": "A", "correlation": cor}]
    return data


def test_good_market_tables_load(tmp_path):
    report = problems_of(tmp_path, _market(tables()))
    assert report.ok, [str(p) for p in report.problems]


def test_correlation_out_of_range(tmp_path):
    report = problems_of(tmp_path, _market(tables(), cor=1.5))
    assert_problem(report, "correlations.csv", 2, "correlation", "between -1 and 1")


def test_unknown_metric(tmp_path):
    report = problems_of(tmp_path, _market(tables(), metric="ebitda"))
    assert_problem(report, "market_conditions.csv", 2, "metric", "not one of")
