"""Build the demo ledger of Corvane Instruments, Inc., a fictional company.

Everything here is invented for the demonstration.  Run from the project
root to rewrite the CSV files and ``sample_grants.xlsx``::

    python sample_grants/generate.py

The script is seeded, so it always writes the same ledger.
"""

from __future__ import annotations

import csv
import datetime as dt
import pathlib

import numpy as np

HERE = pathlib.Path(__file__).parent
RNG = np.random.default_rng(20240215)

GRANT_DATES = ["2024-02-15", "2024-05-15", "2024-08-15", "2024-11-15", "2025-02-18", "2025-05-15",
               "2025-08-15", "2025-11-17", "2026-02-17", "2026-05-15", "2026-08-17"]
PRICES = [18.40, 19.85, 17.60, 21.10, 23.45, 22.80, 25.30, 27.15, 26.40, 29.90, 31.25]
LATTICE_DATES = {"2025-08-15", "2026-05-15"}
GROUPS = ["engineering", "sales", "operations", "finance"]
MARKET_CONDITIONS = [
    ["rtsr-2026", "relative_tsr", "2026-02-17", "2029-02-16", "20", "end", "sector_peers", "25:0.5;50:1;75:2", "1"],
    ["hurdle-2026", "share_price", "2026-02-17", "2029-02-16", "20", "any_day", "", "40:1", ""],
]
# sector_peers: derived by `grantval assumptions --peer-tables` from sample_grants/market/prices.csv
# (daily log returns over the 3-year lookback ending 2026-02-17), rounded to 4 places
PEERS = [
    ['sector_peers', 'PEERA', '0.3241', '0.0000'],
    ['sector_peers', 'PEERB', '0.3830', '0.0000'],
    ['sector_peers', 'PEERC', '0.4457', '0.0000'],
    ['sector_peers', 'PEERD', '0.5324', '0.0000'],
    ['sector_peers', 'PEERE', '0.4135', '0.0000'],
    ['sector_peers', 'PEERF', '0.6015', '0.0000'],
]
CORRELATIONS = [
    ['sector_peers', 'self', 'PEERA', '0.4772'],
    ['sector_peers', 'self', 'PEERB', '0.4183'],
    ['sector_peers', 'self', 'PEERC', '0.3271'],
    ['sector_peers', 'self', 'PEERD', '0.2884'],
    ['sector_peers', 'self', 'PEERE', '0.4265'],
    ['sector_peers', 'self', 'PEERF', '0.2108'],
    ['sector_peers', 'PEERA', 'PEERB', '0.3829'],
    ['sector_peers', 'PEERA', 'PEERC', '0.3132'],
    ['sector_peers', 'PEERA', 'PEERD', '0.2522'],
    ['sector_peers', 'PEERA', 'PEERE', '0.3089'],
    ['sector_peers', 'PEERA', 'PEERF', '0.2307'],
    ['sector_peers', 'PEERB', 'PEERC', '0.3842'],
    ['sector_peers', 'PEERB', 'PEERD', '0.3252'],
    ['sector_peers', 'PEERB', 'PEERE', '0.3274'],
    ['sector_peers', 'PEERB', 'PEERF', '0.3129'],
    ['sector_peers', 'PEERC', 'PEERD', '0.2453'],
    ['sector_peers', 'PEERC', 'PEERE', '0.2693'],
    ['sector_peers', 'PEERC', 'PEERF', '0.2385'],
    ['sector_peers', 'PEERD', 'PEERE', '0.2234'],
    ['sector_peers', 'PEERD', 'PEERF', '0.2504'],
    ['sector_peers', 'PEERE', 'PEERF', '0.2009'],
]
SCHEDULES = {  # name: (vest_months, vest_every_months, cliff_months)
    "annual": (48, 12, 0),
    "monthly-after-cliff": (48, 1, 12),
    "cliff": (36, 36, 0),
    "quarterly-rsu": (48, 3, 12),
}


def add_months(d: dt.date, m: int) -> dt.date:
    y, mo = divmod(d.month - 1 + m, 12)
    y += d.year
    mo += 1
    import calendar

    return dt.date(y, mo, min(d.day, calendar.monthrange(y, mo)[1]))


def tranche_dates(start: dt.date, months: int, every: int, cliff: int, qty: int):
    n = months // every
    out: dict[dt.date, int] = {}
    cliff_date = add_months(start, cliff)
    for k in range(1, n + 1):
        d = max(add_months(start, every * k), cliff_date)
        out[d] = out.get(d, 0) + (qty * k) // n - (qty * (k - 1)) // n
    return sorted(out.items())


# the employee share purchase plan: one 24-month offering with a look-back and four purchase dates
ESPP_ID = "CV-ESPP-2026"
ESPP_START = "2026-01-01"
ESPP_PURCHASES = ["2026-06-30", "2026-12-31", "2027-06-30", "2027-12-31"]
ESPP_PRICE = 24.30  # the close on the start date in market/prices.csv
ESPP_DISCOUNT = 0.15
ESPP_MAX_SHARES = 250  # most shares one enrollment buys on each purchase date
ESPP_PRICE_AT = {"2026-06-30": 27.14}  # closes on the purchase dates before the demo's reporting dates


def purchase_plan():
    """The offering, a dozen enrollments, one withdrawal and the purchases made by 2026-11-30.

    Fixed number of shares (Type A): each period's withholding buys ``withholding / 4 / (0.85 x 24.30)``
    shares, rounded down and at most 250; on a purchase date the employee pays 85% of the lower of the
    start price and that day's close.  Uses its own seeded generator so the grants above do not change.
    """
    rng = np.random.default_rng(20260101)
    offerings = [{
        "offering_id": ESPP_ID, "start_date": ESPP_START, "purchase_dates": ";".join(ESPP_PURCHASES),
        "discount": f"{ESPP_DISCOUNT:.2f}", "lookback": "yes", "shares_basis": "fixed_shares",
        "share_price": f"{ESPP_PRICE:.2f}", "volatility": "0.42", "risk_free_rate": "0.0385",
        "dividend_yield": "0.008", "max_shares": str(ESPP_MAX_SHARES),
    }]
    holders = sorted({f"E{2000 + int(h):04d}" for h in rng.choice(300, size=12, replace=False)})
    enrollments, events = [], []
    for k, h in enumerate(holders):
        # 2% to 10% of an invented salary over the two years; the last one is capped by max_shares
        withholding = 24000.0 if k == len(holders) - 1 else float(rng.integers(16, 97)) * 125.0
        enrollments.append({"offering_id": ESPP_ID, "holder_id": h, "group": GROUPS[int(rng.integers(0, 4))],
                            "withholding": f"{withholding:.2f}"})
        per_period = min(int(withholding / len(ESPP_PURCHASES) / ((1 - ESPP_DISCOUNT) * ESPP_PRICE) + 1e-9),
                         ESPP_MAX_SHARES)
        gid = f"{ESPP_ID}/{h}"
        for d, close in ESPP_PRICE_AT.items():
            paid = round((1 - ESPP_DISCOUNT) * min(ESPP_PRICE, close), 4)
            events.append([gid, d, "purchase", str(per_period), f"{paid:.4f}"])
        if k == 4:  # stops contributing while still employed: a cancellation of the open periods
            events.append([gid, "2026-09-15", "withdraw", "", ""])
    return offerings, enrollments, events


QUARTER_ENDS = ["2026-03-31", "2026-06-30", "2026-09-30"]


def _closes() -> dict:
    """ticker -> (dates, closes) from the demo market data."""
    out: dict = {}
    with open(HERE / "market" / "prices.csv", encoding="utf-8") as fh:
        for r in csv.DictReader(fh):
            out.setdefault(r["ticker"], ([], []))
            out[r["ticker"]][0].append(r["date"])
            out[r["ticker"]][1].append(float(r["close"]))
    return out


def _total_return_index(dates, closes, dividends) -> np.ndarray:
    """Close x the shares one share grows to when each dividend is reinvested at the ex-date close."""
    shares, out = 1.0, []
    for d, c in zip(dates, closes):
        shares *= 1 + dividends.get(d, 0.0) / c
        out.append(c * shares)
    return np.array(out)


def market_rows(start="2026-02-17", averaging=20):
    """Returns to date of the TSR condition's members and the share price at each quarter end of 2026
    (for diluted shares), and the average share price of each quarter (the dilution command's input)."""
    closes = _closes()
    with open(HERE / "market" / "dividends.csv", encoding="utf-8") as fh:
        crvn_div = {r["ex_date"]: float(r["amount"]) for r in csv.DictReader(fh) if r["ticker"] == "CRVN"}
    returns, prices = [], []
    for member in ["self"] + [p[1] for p in PEERS]:
        dates, cl = closes["CRVN" if member == "self" else member]
        keep = [i for i, d in enumerate(dates) if d >= start]
        dates, cl = [dates[i] for i in keep], [cl[i] for i in keep]
        tri = _total_return_index(dates, cl, crvn_div if member == "self" else {})
        base = tri[:averaging].mean()
        for qe in QUARTER_ENDS:
            k = max(i for i, d in enumerate(dates) if d <= qe)
            returns.append(["rtsr-2026", member, qe, f"{tri[k] / base - 1:.6f}"])
            if member == "self":
                prices.append([qe, f"{cl[k]:.2f}"])
    dates, cl = closes["CRVN"]
    averages = []
    for first, qe in zip(["2026-01-01"] + QUARTER_ENDS[:-1], QUARTER_ENDS):
        inside = [c for d, c in zip(dates, cl) if first <= d <= qe]
        averages.append([qe, f"{sum(inside) / len(inside):.4f}"])
    return returns, prices, averages


def main() -> None:
    grants, events = [], []
    gid = 0
    as_of = dt.date(2026, 11, 30)
    for di, gdate_s in enumerate(GRANT_DATES):
        gdate = dt.date.fromisoformat(gdate_s)
        for _ in range(5 if di % 2 == 0 else 6):
            gid += 1
            group = GROUPS[int(RNG.integers(0, 4))]
            rsu = RNG.random() < 0.3
            sched = "quarterly-rsu" if rsu else ["annual", "monthly-after-cliff", "cliff"][int(RNG.integers(0, 3))]
            months, every, cliff = SCHEDULES[sched]
            qty = int(RNG.integers(8, 61)) * (50 if not rsu else 25)
            row = {
                "grant_id": f"CV-{gid:04d}", "holder_id": f"E{1000 + int(RNG.integers(0, 400)):04d}",
                "group": group, "award_type": "rsu" if rsu else "option", "grant_date": gdate_s,
                "quantity": qty, "exercise_price": "" if rsu else f"{PRICES[di]:.2f}",
                "expiration_date": "" if rsu else add_months(gdate, 120).isoformat(),
                "vest_start_date": "", "vest_months": months, "vest_every_months": every,
                "cliff_months": cliff, "assumption_set": "",
            }
            grants.append(row)
            tr = tranche_dates(gdate, months, every, cliff, qty)
            u = RNG.random()
            if u < 0.18:  # the holder leaves: unvested options forfeit, vested ones lapse 90 days later
                leave = gdate + dt.timedelta(days=int(RNG.integers(120, 900)))
                if leave < as_of and any(d > leave for d, _ in tr):
                    events.append([row["grant_id"], leave.isoformat(), "forfeit", "", ""])
                    vested = sum(q for d, q in tr if d <= leave)
                    lapse = leave + dt.timedelta(days=90)
                    if not rsu and vested and lapse < as_of:
                        events.append([row["grant_id"], lapse.isoformat(), "expire", "", ""])
            elif u < 0.40 and not rsu:  # some exercise of what has vested
                vested_by = [(d, q) for d, q in tr if d <= as_of - dt.timedelta(days=30)]
                if vested_by:
                    d0 = vested_by[0][0] + dt.timedelta(days=int(RNG.integers(10, 60)))
                    avail = sum(q for d, q in tr if d <= d0)
                    if d0 < as_of and avail:
                        q = max(1, avail // 2)
                        price = PRICES[di] * (1.15 + 0.5 * RNG.random())
                        events.append([row["grant_id"], d0.isoformat(), "exercise", str(q), f"{price:.2f}"])
    # one executive award valued by an outside firm, on its own assumption set
    grants.append({
        "grant_id": "CV-EXEC-01", "holder_id": "E0001", "group": "finance", "award_type": "option",
        "grant_date": "2025-02-18", "quantity": 40000, "exercise_price": "23.45",
        "expiration_date": "2035-02-18", "vest_start_date": "2025-01-01", "vest_months": 36,
        "vest_every_months": 12, "cliff_months": 12, "assumption_set": "exec-2025",
    })
    # one award with a hand-written tranche schedule (front-loaded)
    grants.append({
        "grant_id": "CV-HIRE-02", "holder_id": "E0002", "group": "engineering", "award_type": "rsu",
        "grant_date": "2025-05-15", "quantity": 6000, "exercise_price": "", "expiration_date": "",
        "vest_start_date": "", "vest_months": 24, "vest_every_months": 12, "cliff_months": 0,
        "assumption_set": "",
    })
    tranches = [["CV-HIRE-02", "2025-11-15", "3000"], ["CV-HIRE-02", "2026-05-15", "2000"],
                ["CV-HIRE-02", "2027-05-15", "1000"]]
    # the long-term incentive plan: performance share units on three-year revenue growth, 0-200% of target
    for k, (gdate_s, cset, qty) in enumerate((("2025-02-18", "ltip-2025", 12000), ("2025-02-18", "ltip-2025", 8000),
                                               ("2026-02-17", "ltip-2026", 15000), ("2026-02-17", "ltip-2026", 6000))):
        grants.append({
            "grant_id": f"CV-PSU-{k + 1:02d}", "holder_id": f"E000{k + 3}", "group": ["finance", "engineering"][k % 2],
            "award_type": "psu", "grant_date": gdate_s, "quantity": qty, "exercise_price": "", "expiration_date": "",
            "vest_start_date": "", "vest_months": 36, "vest_every_months": 36, "cliff_months": 0, "assumption_set": "",
            "condition_set": cset, "max_payout": "2",
        })
    # a long-serving employee who becomes retirement eligible part-way through the schedule
    grants.append({
        "grant_id": "CV-RET-01", "holder_id": "E0009", "group": "operations", "award_type": "rsu",
        "grant_date": "2024-05-15", "quantity": 4000, "exercise_price": "", "expiration_date": "",
        "vest_start_date": "", "vest_months": 48, "vest_every_months": 3, "cliff_months": 12, "assumption_set": "",
        "retirement_eligible_date": "2026-03-31",
    })
    # market conditions: relative TSR units against the sector peers (3-year cliff), and a share-price
    # hurdle award with no vesting schedule (derived service period)
    for k, (cset, qty, months) in enumerate((("rtsr-2026", 10000, 36), ("rtsr-2026", 5000, 36),
                                             ("hurdle-2026", 20000, 0))):
        grants.append({
            "grant_id": f"CV-MKT-{k + 1:02d}", "holder_id": f"E00{k + 10}", "group": ["finance", "sales"][k % 2],
            "award_type": "psu", "grant_date": "2026-02-17", "quantity": qty, "exercise_price": "",
            "expiration_date": "", "vest_start_date": "", "vest_months": months, "vest_every_months": max(months, 1),
            "cliff_months": 0, "assumption_set": "", "condition_set": cset,
        })
    for g in grants:
        for col in ("condition_set", "max_payout", "retirement_eligible_date"):
            g.setdefault(col, "")
    performance = [["ltip-2025", "2025-02-18", "1", ""], ["ltip-2025", "2025-12-31", "1.2", ""],
                   ["ltip-2025", "2026-09-30", "1.35", ""], ["ltip-2026", "2026-02-17", "1", ""],
                   ["ltip-2026", "2026-09-30", "0.8", ""]]

    assumptions = []
    for di, gdate_s in enumerate(GRANT_DATES):
        year = int(gdate_s[:4])
        lattice = gdate_s in LATTICE_DATES
        assumptions.append({
            "assumption_set": "", "grant_date": gdate_s, "share_price": f"{PRICES[di]:.2f}",
            "volatility": f"{0.50 - 0.006 * di:.3f}", "risk_free_rate": f"{0.0410 + 0.0012 * ((di * 7) % 5) - 0.002:.4f}",
            "dividend_yield": "0" if year < 2025 else "0.008",
            "expected_term_years": "", "model": "lattice" if lattice else "bsm",
            "exercise_multiple": "2.2" if lattice else "", "post_vest_exit_rate": "0.06" if lattice else "",
            "fair_value": "",
        })
    assumptions.append({
        "assumption_set": "exec-2025", "grant_date": "", "share_price": "23.45", "volatility": "",
        "risk_free_rate": "", "dividend_yield": "", "expected_term_years": "", "model": "bsm",
        "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": "11.8734",
    })
    estimates = [["*", "2024-01-01", "0.08", ""], ["sales", "2024-01-01", "0.14", ""],
                 ["*", "2026-01-01", "0.07", ""], ["CV-EXEC-01", "2025-02-18", "", "1"]]
    policy = [["standard", "asc718"], ["attribution", "straight-line"], ["forfeitures", "estimate"],
              ["period", "quarter"], ["fiscal_year_end_month", "12"], ["valuation_unit", "award"]]

    offerings, enrollments, espp_events = purchase_plan()
    events += espp_events

    def write(name, header, rows):
        with open(HERE / f"{name}.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(header)
            for r in rows:
                w.writerow([r[h] for h in header] if isinstance(r, dict) else r)

    write("grants", list(grants[0]), grants)
    write("assumptions", list(assumptions[0]), assumptions)
    write("tranches", ["grant_id", "vest_date", "quantity"], tranches)
    write("events", ["grant_id", "event_date", "event_type", "quantity", "share_price"],
          sorted(events, key=lambda e: (e[1], e[0])))
    write("estimates", ["applies_to", "effective_date", "annual_forfeiture_rate", "expected_vest_fraction"], estimates)
    write("policy", ["key", "value"], policy)
    write("performance", ["condition_set", "assessed_on", "payout", "expected_vest_date"], performance)
    write("market_conditions", ["condition_set", "metric", "start_date", "end_date", "averaging_days", "monitoring",
                                "peer_set", "payout_curve", "negative_tsr_cap"], MARKET_CONDITIONS)
    write("peers", ["peer_set", "peer_id", "volatility", "dividend_yield"], PEERS)
    write("correlations", ["peer_set", "first", "second", "correlation"], CORRELATIONS)
    returns, prices, averages = market_rows()
    write("market_returns", ["condition_set", "member", "measured_on", "total_return"], returns)
    write("share_prices", ["date", "share_price"], prices)
    with open(HERE / "market" / "average_prices.csv", "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, lineterminator="\n").writerows([["period_end", "average_share_price"]] + averages)
    write("espp_offerings", list(offerings[0]), offerings)
    write("espp_enrollments", list(enrollments[0]), enrollments)
    from grantval.io.convert import csv_folder_to_workbook
    from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS

    csv_folder_to_workbook(HERE, HERE / "sample_grants.xlsx", TABLE_NAMES, TEXT_COLUMNS)


if __name__ == "__main__":
    main()
