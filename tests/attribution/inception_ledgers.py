"""Ledgers with service that begins before the grant date (invented data, figures chosen for hand arithmetic)."""

from __future__ import annotations

from tests.factory import write_ledger

ASSUMPTION = {"assumption_set": "", "grant_date": "", "share_price": "", "volatility": "", "risk_free_rate": "",
              "dividend_yield": "0", "expected_term_years": "", "model": "bsm", "exercise_multiple": "",
              "post_vest_exit_rate": "", "fair_value": ""}
GRANT = {"grant_id": "", "holder_id": "H", "group": "", "award_type": "rsu", "grant_date": "2027-07-01",
         "quantity": "", "exercise_price": "", "expiration_date": "", "vest_start_date": "2027-01-01",
         "vest_months": "24", "vest_every_months": "24", "cliff_months": "0", "assumption_set": "",
         "service_inception_date": "2027-01-01"}


def assumption(**cells) -> dict:
    return {**ASSUMPTION, **cells}


def grant(**cells) -> dict:
    return {**GRANT, **cells}


def rsu_ledger(folder, pre_grant_rows=(("2027-03-31", "20"), ("2027-06-30", "22")), **changes):
    """1,200 RSUs, service from 2027-01-01, granted 2027-07-01 at a share price of 25, cliff 2029-01-01.

    The service inception date comes first because the award awaits an approval (common practice:
    the employee works from 2027-01-01 on terms communicated then, the grant date follows on
    approval).  Share prices at the quarter ends before the grant date: 20 and 22 (no dividends).
    """
    data = {
        "grants": [grant(grant_id="R", quantity="1200")],
        "assumptions": [assumption(grant_date="2027-07-01", share_price="25")]
        + [assumption(assumption_set=d, share_price=p) for d, p in pre_grant_rows],
    }
    data.update(changes)
    return write_ledger(folder, data)


def option_ledger(folder, standard="asc718", pre_grant_value="4", grant_value="5", **changes):
    """1,000 options, service from 2027-01-01, granted 2027-05-01, two annual tranches of 500.

    Tranches vest 2028-01-01 (365 days of service) and 2029-01-01 (731 days).  Fair values per
    option supplied by an outside valuation: ``pre_grant_value`` at 2027-03-31, ``grant_value``
    at the grant date.
    """
    data = {
        "grants": [grant(grant_id="O", award_type="option", grant_date="2027-05-01", quantity="1000",
                         exercise_price="10", expiration_date="2037-01-01", vest_every_months="12")],
        "assumptions": [assumption(grant_date="2027-05-01", share_price="10", fair_value=grant_value),
                        assumption(assumption_set="2027-03-31", share_price="9", fair_value=pre_grant_value)],
        "policy": [["key", "value"], ["standard", standard]],
    }
    data.update(changes)
    return write_ledger(folder, data)
