"""Feature sections of ``disclose``: cash-settled liabilities, purchase-plan activity, modifications."""

import pytest

import grantval.reporting.espp_tables as E
import grantval.runs.disclose as RD
from tests.attribution import test_espp as ES
from tests.attribution.cash_ledgers import ifrs_example_12
from tests.attribution.test_modifications import ig_example_7


def _sections(folder, start, through, **kw):
    run = RD.disclose(folder, start=start, through=through, **kw)
    return run, run.sections


def test_liability_disclosure_ifrs2_ig_example_12(tmp_path):
    # IFRS 2 IG Example 12 (figures quoted in issue 18): liability 194,400 at the end of year 1 and
    # 413,333 at the end of year 2; no cash paid before year 3.  Window = years 1-2.
    run, s = _sections(ifrs_example_12(tmp_path / "l"), "2029-01-01", "2030-12-31", period="year")
    v = dict(zip(s.tables["liability_disclosure.csv"]["item"], s.tables["liability_disclosure.csv"]["value"]))
    items = list(v.values())
    assert items[0] == 0.0 and items[2] == 0.0
    assert items[3] == pytest.approx(413_333, abs=1.0)
    assert items[1] == pytest.approx(413_333, abs=1.0)
    assert all(c.tool_pass for c in s.checks)
    out = RD.write_disclosure(run, tmp_path / "d.xlsx", tmp_path / "csv", timestamp=False)
    assert (tmp_path / "csv" / "liability_disclosure.csv").exists() and not out.failed


def test_purchase_plan_activity_hand_derived(tmp_path):
    # Hand-derived: withholding 1,700 / (0.85 x start price 20 = 17) = 100 shares, enrolled on
    # 2027-01-01 and reaching their purchase date 2027-07-01 within the window: open at end 0.
    folder = ES.ledger(tmp_path / "l", [ES.offering()], [ES.enrol()])
    run, s = _sections(folder, "2027-01-01", "2027-12-31")
    t = s.tables["purchase_plan_activity.csv"].set_index("line")["number"]
    assert t["Granted (enrolled)"] == 100 and t["Purchase date reached"] == 100 and t["Open at end"] == 0
    assert all(c.tool_pass for c in s.checks)


def test_purchase_plan_check_turns_to_fail(tmp_path, monkeypatch):
    real = E.purchase_plan_activity
    monkeypatch.setattr(E, "purchase_plan_activity", lambda *a: (lambda f, t: (f, (t[0] + 1, t[1])))(*real(*a)))
    folder = ES.ledger(tmp_path / "l", [ES.offering()], [ES.enrol()])
    _, s = _sections(folder, "2027-01-01", "2027-12-31")
    assert [c.tool_pass for c in s.checks if c.name.startswith("Purchase-plan disclosure")] == [False]


def test_modification_disclosure_ig_example_7(tmp_path):
    # IFRS 2 IG Example 7 (repricing at the end of year 1): one modification row in a window holding it;
    # its incremental cost equals the modifications table's (the tie is the section's check).
    run, s = _sections(ig_example_7(tmp_path / "l"), "2025-01-01", "2027-12-31", standard="ifrs2")
    t = s.tables["modification_disclosure.csv"]
    assert len(t) == 1 and t["incremental_cost"].iat[0] > 0
    assert all(c.tool_pass for c in s.checks)


def test_modification_check_turns_to_fail(tmp_path, monkeypatch):
    import grantval.reporting.modification_tables as M

    real = M.disclosure_table

    def off(*a, **k):
        f = real(*a, **k)
        f.loc[:, "incremental_cost"] += 1.0
        return f
    monkeypatch.setattr(M, "disclosure_table", off)
    _, s = _sections(ig_example_7(tmp_path / "l"), "2025-01-01", "2027-12-31", standard="ifrs2")
    assert [c.tool_pass for c in s.checks if c.name.startswith("Modifications:")] == [False]


def test_liability_disclosure_check_turns_to_fail(tmp_path, monkeypatch):
    import grantval.reporting.liability_tables as LT

    real = LT.liability_disclosure

    def off(*a, **k):
        f = real(*a, **k)
        f.loc[3, "value"] += 1.0  # the end liability no longer follows from the flows
        return f
    monkeypatch.setattr(LT, "liability_disclosure", off)
    _, s = _sections(ifrs_example_12(tmp_path / "l"), "2029-01-01", "2030-12-31", period="year")
    assert [c.tool_pass for c in s.checks if c.name.startswith("Cash-settled disclosure")] == [False]
