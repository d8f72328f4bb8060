"""Small invented ledgers for the tax and dilution tests (invented data; figures chosen for hand checks)."""

from __future__ import annotations

import pathlib

from tests.factory import write_ledger


def grant(gid, award="option", qty=1000, strike="10", gdate="2027-01-01", expiry="2037-01-01", months=12,
          every=12, group="eng", aset="fv", treatment=""):
    return {"grant_id": gid, "holder_id": "H" + gid, "group": group, "award_type": award, "grant_date": gdate,
            "quantity": str(qty), "exercise_price": strike if award == "option" else "",
            "expiration_date": expiry if award == "option" else "", "vest_start_date": "",
            "vest_months": str(months), "vest_every_months": str(every), "cliff_months": "0", "assumption_set": aset,
            "tax_treatment": treatment}


def assumption(aset="fv", fair_value="4", share_price="10"):
    return {"assumption_set": aset, "grant_date": "", "share_price": share_price, "volatility": "", "risk_free_rate": "",
            "dividend_yield": "0", "expected_term_years": "", "model": "bsm", "exercise_multiple": "",
            "post_vest_exit_rate": "", "fair_value": fair_value}


def event(gid, date, kind, qty="", price=""):
    return {"grant_id": gid, "event_date": date, "event_type": kind, "quantity": str(qty), "share_price": str(price)}


def rate(applies_to, date, r):
    return {"applies_to": applies_to, "effective_date": date, "tax_rate": str(r)}


def price(date, p):
    return {"date": date, "share_price": str(p)}


def ledger(folder: pathlib.Path, grants, assumptions=None, events=None, rates=None, prices=None, policy=None):
    data = {"grants": grants, "assumptions": assumptions or [assumption()]}
    if events:
        data["events"] = events
    if rates:
        data["tax_rates"] = rates
    if prices:
        data["share_prices"] = prices
    if policy:
        data["policy"] = [{"key": k, "value": v} for k, v in policy.items()]
    return write_ledger(folder, data)
