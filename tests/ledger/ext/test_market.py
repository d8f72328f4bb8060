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


def _psu_on_market(data):
    g = data["grants"][0]
    g.update({"award_type": "psu", "condition_set": "M1", "exercise_price": None})
    return data


def test_market_condition_ending_before_the_grant_is_refused(tmp_path):
    # the period 2024-01-01 to 2026-12-31 is over before the grant dated 2027-01-01
    report = problems_of(tmp_path, _psu_on_market(_market(tables())))
    assert_problem(report, "grants.csv", 2, "condition_set", "ends on 2026-12-31, not after the grant date")
    assert not any("no rows in the performance table" in p.message for p in report.errors)


def test_period_begun_before_the_grant_needs_the_returns_to_date(tmp_path):
    data = _psu_on_market(_market(tables()))
    data["market_conditions"][0].update({"start_date": "2026-07-01", "end_date": "2029-06-30"})
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 2, "condition_set", "give the total return to 2027-01-01 of self, A")
    data["market_returns"] = [{"condition_set": "M1", "member": "self", "measured_on": "2027-01-01",
                               "total_return": 0.1},
                              {"condition_set": "M1", "member": "A", "measured_on": "2027-01-01",
                               "total_return": -0.05}]
    report = problems_of(tmp_path / "ok", data)
    assert report.ok, [str(p) for p in report.problems]
    data["market_returns"] += [{"condition_set": "M1", "member": "Z", "measured_on": "2027-01-01",
                                "total_return": -1.2},
                               {"condition_set": "M9", "member": "self", "measured_on": "2027-01-01",
                                "total_return": 0.0},
                               dict(data["market_returns"][0])]
    report = problems_of(tmp_path / "bad", data)
    assert_problem(report, "market_returns.csv", 4, "member", "not 'self' or a peer")
    assert_problem(report, "market_returns.csv", 4, "total_return", "100% or more")
    assert_problem(report, "market_returns.csv", 5, "condition_set", "not in the market_conditions table")
    assert_problem(report, "market_returns.csv", 6, "measured_on", "already has a total return")


def test_start_window_not_over_and_period_after_grant(tmp_path):
    data = _psu_on_market(_market(tables()))
    data["market_conditions"][0].update({"start_date": "2026-12-20", "end_date": "2029-06-30", "averaging_days": 20})
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 2, "condition_set", "start averaging window")
    data["market_conditions"][0].update({"start_date": "2027-02-01"})
    report = problems_of(tmp_path / "late", data)
    assert_problem(report, "grants.csv", 2, "condition_set", "after the grant date 2027-01-01")


def _on_grant_date(data):
    data["market_conditions"][0].update({"start_date": "2027-01-01", "end_date": "2029-12-31"})
    return data


def test_psu_on_market_condition_loads_without_performance_rows(tmp_path):
    report = problems_of(tmp_path, _on_grant_date(_psu_on_market(_market(tables()))))
    assert report.ok, [str(p) for p in report.problems]


def test_rsu_with_market_condition_is_refused(tmp_path):
    data = _on_grant_date(_market(tables()))
    data["grants"][1].update({"condition_set": "M1"})  # an rsu
    for g in data["grants"]:
        g.setdefault("condition_set", "")
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 3, "condition_set", "applies to psu or option grants")


def test_option_condition_ending_after_expiry_is_refused(tmp_path):
    data = _on_grant_date(_market(tables()))
    data["grants"][0].update({"condition_set": "M1", "expiration_date": "2029-06-30"})
    data["grants"][0].update({"vest_months": "24", "vest_every_months": "12"})
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 2, "condition_set", "after the option expires (2029-06-30)")


def test_index_condition_needs_exactly_one_member(tmp_path):
    data = _on_grant_date(_psu_on_market(_market(tables(), metric="index_tsr")))
    data["peers"].append({"peer_set": "P", "peer_id": "B", "volatility": 0.3, "dividend_yield": 0.0})
    data["correlations"] += [{"peer_set": "P", "first": "self", "second": "B", "correlation": 0.2},
                             {"peer_set": "P", "first": "A", "second": "B", "correlation": 0.2}]
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 2, "condition_set", "needs exactly one member")


def test_negative_achieved_payout_and_duplicate_condition(tmp_path):
    data = _market(tables())
    data["market_conditions"][0]["achieved_payout"] = -0.5
    data["market_conditions"].append(dict(data["market_conditions"][0], achieved_payout=1))
    report = problems_of(tmp_path, data)
    assert_problem(report, "market_conditions.csv", 2, "achieved_payout", "zero or more")
    assert_problem(report, "market_conditions.csv", 3, "condition_set", "earlier row")


def test_bad_payout_curve(tmp_path):
    report = problems_of(tmp_path, _market(tables(), curve="50:1;25:2"))
    assert_problem(report, "market_conditions.csv", 2, "payout_curve", "cannot be read")


def test_missing_pair_and_not_psd(tmp_path):
    data = _market(tables())
    data["peers"].append({"peer_set": "P", "peer_id": "B", "volatility": 0.3, "dividend_yield": 0.0})
    report = problems_of(tmp_path, data)
    assert any(p.column == "correlation" and "misses the pair" in p.message for p in report.errors)
    data["correlations"] += [{"peer_set": "P", "first": "self", "second": "B", "correlation": 0.9},
                             {"peer_set": "P", "first": "A", "second": "B", "correlation": -0.9}]
    data["correlations"][0]["correlation"] = 0.9
    report = problems_of(tmp_path / "x", data)
    assert any("not positive semi-definite" in p.message and "'P'" in p.message for p in report.errors)


def test_end_before_start_and_missing_peer_set(tmp_path):
    data = _market(tables())
    data["market_conditions"][0].update({"end_date": "2023-01-01", "peer_set": None})
    report = problems_of(tmp_path, data)
    assert_problem(report, "market_conditions.csv", 2, "end_date", "after start_date")
    assert_problem(report, "market_conditions.csv", 2, "peer_set", "required")


def test_monitoring_averaging_and_unknown_peer_set(tmp_path):
    data = _market(tables())
    data["market_conditions"][0].update({"monitoring": "weekly", "averaging_days": 2000, "peer_set": "Q"})
    report = problems_of(tmp_path, data)
    assert_problem(report, "market_conditions.csv", 2, "monitoring", "end or any_day")
    assert_problem(report, "market_conditions.csv", 2, "averaging_days", "longer than the performance period")
    assert_problem(report, "market_conditions.csv", 2, "peer_set", "has no peers")


def test_condition_set_in_both_tables(tmp_path):
    data = _market(tables())
    data["performance"] = [{"condition_set": "M1", "assessed_on": "2024-01-01", "payout": 1.0}]
    report = problems_of(tmp_path, data)
    assert_problem(report, "market_conditions.csv", 2, "condition_set", "also in the performance table")


def test_duplicate_self_and_unknown_correlation_pairs_are_refused_on_their_row(tmp_path):
    # common practice: a pair given twice (in either order) would otherwise let the last value win silently
    data = _market(tables())
    first = dict(data["correlations"][0])
    data["correlations"] += [dict(first, first=first["second"], second=first["first"]),
                             {"peer_set": first["peer_set"], "first": "self", "second": "self", "correlation": 1},
                             {"peer_set": first["peer_set"], "first": "self", "second": "ZZ", "correlation": 0.1}]
    report = problems_of(tmp_path, data)
    assert_problem(report, "correlations.csv", 3, "second", "already given on row 2")
    assert_problem(report, "correlations.csv", 4, "second", "with itself")
    assert_problem(report, "correlations.csv", 5, "second", "'ZZ' is not 'self' or a peer")


def test_no_correlation_rows_and_a_return_written_as_a_percentage(tmp_path):
    data = _psu_on_market(_market(tables()))
    data["market_conditions"][0].update({"start_date": "2026-07-01", "end_date": "2029-06-30"})
    data["market_returns"] = [{"condition_set": "M1", "member": "self", "measured_on": "2027-01-01",
                               "total_return": 12},  # meant 12%
                              {"condition_set": "M1", "member": "A", "measured_on": "2027-01-01",
                               "total_return": 0.05}]
    del data["correlations"]
    report = problems_of(tmp_path, data)
    assert any(p.column == "correlation" and "has no rows in the correlations table" in p.message
               and "its 1 pairs" in p.message for p in report.errors)
    warn = [p for p in report.problems if p.severity == "warning" and p.column == "total_return"]
    assert warn and warn[0].row == 2 and "not a percentage" in warn[0].message


def test_blank_correlation_and_peer_values_out_of_range(tmp_path):
    # a blank correlation is named on its row (it used to reach the eigenvalue test and crash); a peer's
    # volatility and dividend yield follow the assumptions table's limits (grantval/plausibility.py)
    data = _market(tables())
    data["correlations"][0]["correlation"] = ""
    data["peers"][0].update({"volatility": 35, "dividend_yield": 1.5})
    report = problems_of(tmp_path, data)
    assert_problem(report, "correlations.csv", 2, "correlation", "is blank")
    assert_problem(report, "peers.csv", 2, "volatility", "got 35")
    assert_problem(report, "peers.csv", 2, "dividend_yield", "got 1.5")
    data["correlations"][0]["correlation"] = 45
    report = problems_of(tmp_path / "b", data)
    assert_problem(report, "correlations.csv", 2, "correlation", "got 45")
    assert not any("semi-definite" in p.message for p in report.errors)


def test_market_grant_inputs_are_checked_with_the_ledger(tmp_path):
    # `check` refuses what valuation would: no volatility, and a lattice row (Monte Carlo uses neither the
    # exercise multiple nor the exit rate)
    data = _on_grant_date(_psu_on_market(_market(tables())))
    data["assumptions"][0]["volatility"] = ""
    report = problems_of(tmp_path, data)
    assert_problem(report, "assumptions.csv", 2, "volatility", "grants with a market condition")
    data = _on_grant_date(_market(tables()))
    for g in data["grants"]:
        g.setdefault("condition_set", "")
    data["grants"][2].update({"condition_set": "M1", "grant_date": "2027-01-01"})  # G3: an option on the lattice row
    report = problems_of(tmp_path / "l", data)
    assert_problem(report, "assumptions.csv", 3, "model", "valued by Monte Carlo")


def test_modifying_a_market_condition_option_is_refused(tmp_path):
    data = _on_grant_date(_market(tables()))
    for g in data["grants"]:
        g.setdefault("condition_set", "")
    data["grants"][0]["condition_set"] = "M1"
    data["modifications"] = [{"grant_id": "G1", "modification_date": "2028-01-01", "exercise_price": "8",
                              "fair_value_before": "3", "fair_value_after": "4"}]
    report = problems_of(tmp_path, data)
    assert_problem(report, "modifications.csv", 2, "grant_id", "market condition are not supported yet")
