"""Seeded random ledgers mixing schedules, award types, events and estimates (invented data)."""

from __future__ import annotations

import datetime as dt

import numpy as np

SCHEDULES = [(48, 12, 0), (48, 1, 12), (36, 36, 0), (36, 3, 12), (24, 6, 6), (12, 12, 0), (0, 1, 0), (30, 3, 7)]
GROUPS = ["eng", "ops", "sales", ""]


def random_ledger(seed: int, n: int = 25) -> dict:
    rng = np.random.default_rng(seed)
    dates = [dt.date(2027, 1, 1) + dt.timedelta(days=int(x)) for x in rng.integers(0, 700, 6)]
    grants, events, assumptions = [], [], []
    for j, d in enumerate(dates):
        assumptions.append({"assumption_set": "", "grant_date": d.isoformat(), "share_price": f"{rng.uniform(5, 60):.2f}",
                            "volatility": f"{rng.uniform(0.2, 0.8):.3f}", "risk_free_rate": f"{rng.uniform(0.01, 0.05):.4f}",
                            "dividend_yield": f"{rng.uniform(0, 0.03):.4f}", "expected_term_years": "",
                            "model": "bsm", "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": ""})
    for i in range(n):
        d = dates[int(rng.integers(0, len(dates)))]
        months, every, cliff = SCHEDULES[int(rng.integers(0, len(SCHEDULES)))]
        rsu = rng.random() < 0.3
        qty = int(rng.integers(1, 5000))
        start = d - dt.timedelta(days=int(rng.integers(0, 60))) if rng.random() < 0.3 else d
        gid = f"R{i:03d}"
        grants.append({"grant_id": gid, "holder_id": f"H{i}", "group": GROUPS[int(rng.integers(0, 4))],
                       "award_type": "rsu" if rsu else "option", "grant_date": d.isoformat(), "quantity": str(qty),
                       "exercise_price": "" if rsu else f"{rng.uniform(5, 60):.2f}",
                       "expiration_date": "" if rsu else dt.date(d.year + 10, d.month, min(d.day, 28)).isoformat(),
                       "vest_start_date": start.isoformat() if start != d else "", "vest_months": str(months),
                       "vest_every_months": str(every), "cliff_months": str(cliff), "assumption_set": ""})
        u = rng.random()
        when = d + dt.timedelta(days=int(rng.integers(1, 1400)))
        if u < 0.25:
            events.append({"grant_id": gid, "event_date": when.isoformat(), "event_type": "forfeit", "quantity": "",
                           "share_price": ""})
        elif u < 0.35:
            events.append({"grant_id": gid, "event_date": when.isoformat(), "event_type": "cancel", "quantity": "",
                           "share_price": ""})
        elif u < 0.45 and months > 0:
            # a partial forfeit one day after the grant: never more than is unvested
            events.append({"grant_id": gid, "event_date": (d + dt.timedelta(days=1)).isoformat(),
                           "event_type": "forfeit", "quantity": str(max(1, qty // 7)), "share_price": ""})
    estimates = [
        {"applies_to": "*", "effective_date": "2026-01-01", "annual_forfeiture_rate": f"{rng.uniform(0, 0.15):.4f}",
         "expected_vest_fraction": ""},
        {"applies_to": "*", "effective_date": "2028-04-01", "annual_forfeiture_rate": f"{rng.uniform(0, 0.15):.4f}",
         "expected_vest_fraction": ""},
        {"applies_to": "sales", "effective_date": "2027-06-30", "annual_forfeiture_rate": "",
         "expected_vest_fraction": f"{rng.uniform(0.6, 1):.3f}"},
        {"applies_to": "R001", "effective_date": "2026-01-01", "annual_forfeiture_rate": "0.2",
         "expected_vest_fraction": ""},
    ]
    return {"grants": grants, "assumptions": assumptions, "events": events or [
        {"grant_id": "R000", "event_date": "2030-01-01", "event_type": "cancel", "quantity": "", "share_price": ""}],
        "estimates": estimates}
