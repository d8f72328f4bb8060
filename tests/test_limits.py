"""Limits on inputs that the pricing core cannot honour (robustness issue, item 13) and plausibility."""

from typer.testing import CliRunner

from grantval import api
from grantval.cli import app
from tests.factory import BASE, set_cell, write_ledger


def run(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


def test_lattice_steps_are_bounded_in_the_ledger_and_on_the_command_line(tmp_path):
    data = dict(BASE, policy=[{"key": "lattice_steps", "value": "1000000000"}])
    report = api.check(write_ledger(tmp_path / "l", data))
    assert any(p.column == "value" and "from 4 to 20,000" in p.message for p in report.errors), report.errors
    r = run("value", write_ledger(tmp_path / "m", BASE), "--lattice-steps", "1000000000", "--csv-dir", tmp_path / "o")
    assert r.exit_code == 2 and "--lattice-steps must be a whole number from 4 to 20,000" in r.output, r.output


def test_lattice_volatility_beyond_its_range_is_refused_at_check_time(tmp_path):
    data = set_cell(BASE, "assumptions", 1, "volatility", "4.5")   # x sqrt(10 years) = 14.2 > 8
    report = api.check(write_ledger(tmp_path / "l", data))
    assert any(p.column == "volatility" and "the lattice can value reliably" in p.message for p in report.errors)


def test_dividend_yield_written_as_a_percentage_is_refused(tmp_path):
    # the new user's case: 1.5 meant 1.5%
    report = api.check(write_ledger(tmp_path / "l", set_cell(BASE, "assumptions", 0, "dividend_yield", "1.5")))
    assert any(p.column == "dividend_yield" and "below 1" in p.message for p in report.errors)
    report = api.check(write_ledger(tmp_path / "m", set_cell(BASE, "assumptions", 0, "dividend_yield", "0.25")))
    assert report.ok and any(p.column == "dividend_yield" and "unusual" in p.message for p in report.warnings)


def test_price_option_uses_the_ledgers_words_and_refuses_unused_options():
    r = run("price-option", "--share-price", 50, "--exercise-price", 50, "--expected-term", 6.25,
            "--risk-free-rate", 0.04, "--volatility", 0.35)
    assert r.exit_code == 0 and "fair value per option:" in r.output and "model: bsm" in r.output
    r = run("price-option", "--share-price", 50, "--exercise-price", 50, "--expected-term", 6.25,
            "--risk-free-rate", 0.04, "--volatility", 0.35, "--vesting", 3)
    assert r.exit_code == 2 and "--vesting is used by the lattice only" in r.output
    r = run("price-option", "--share-price", 50, "--exercise-price", 50, "--expected-term", 6.25,
            "--risk-free-rate", 4, "--volatility", 0.35)
    assert r.exit_code == 2 and "--risk-free-rate 4" in r.output  # meant 4%: refused, not valued
    r = run("price-option", "--share-price", 50, "--exercise-price", 50, "--expected-term", 6.25,
            "--risk-free-rate", 0.04, "--volatility", 40)
    assert r.exit_code == 2 and "--volatility 40" in r.output
    r = run("price-option", "--model", "lattice", "--share-price", 50, "--exercise-price", 50,
            "--contractual-term", 10, "--risk-free-rate", 0.04, "--volatility", 0.35, "--vesting", 3)
    assert r.exit_code == 0 and "model: lattice" in r.output


def test_whatif_window_without_grants_warns(tmp_path):
    r = run("whatif", write_ledger(tmp_path / "l", BASE), "--vary", "volatility=+0.05", "--grants-from", "2099-01-01",
            "--csv-dir", tmp_path / "o")
    assert r.exit_code == 0 and "nothing was re-valued" in r.output


def test_share_price_option_is_bounded_and_finite(tmp_path):
    # robustness issue, item 8: -5, nan, inf and 1e308 were accepted
    led = write_ledger(tmp_path / "l", BASE)
    for bad in ("-5", "nan", "inf", "1e308"):
        r = run("expense", led, "--through", "2028-12-31", "--csv-dir", tmp_path / "o", f"--share-price={bad}")
        assert r.exit_code == 2 and "--share-price" in r.output, r.output
        assert not (tmp_path / "o").exists()


def test_conflicting_ifrs2_settings_name_where_each_came_from(tmp_path):
    # close-ready issue, item 8: the ledger's policy table said straight-line, the option said ifrs2
    data = dict(BASE, policy=[{"key": "attribution", "value": "straight-line"}])
    r = run("expense", write_ledger(tmp_path / "l", data), "--through", "2028-12-31", "--standard", "ifrs2",
            "--csv-dir", tmp_path / "o")
    assert r.exit_code == 2
    assert "standard ifrs2 came from the option --standard" in r.output
    assert "attribution straight-line came from the ledger's policy table" in r.output
