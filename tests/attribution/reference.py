"""An independent, slow reference implementation of the expense rules.

Written from the rules of docs/expense-rules.md with plain Python loops over
days and tranches, using only the standard library on the checked ledger's
tranches, allocated events, estimates and per-tranche fair values.  It
shares no code with ``grantval.attribution``.
"""

from __future__ import annotations

import calendar
import datetime as dt
import math


def _d(x) -> dt.date:
    return dt.date.fromisoformat(str(x)[:10])


def served_fraction(day: dt.date, grant: dt.date, vest: dt.date) -> float:
    if day < grant:
        return 0.0
    if vest <= grant:
        return 1.0
    served = 0
    cur = grant
    while cur <= day and cur < vest:  # count service days one by one
        served += 1
        cur += dt.timedelta(days=1)
    return min(served / (vest - grant).days, 1.0)


def estimate_for(estimates, grant_id, group, day):
    best = None
    for level in (grant_id, group, "*"):
        rows = [e for e in estimates if e["applies_to"] == level and e["effective"] <= day]
        if rows:
            best = max(rows, key=lambda e: e["effective"])
            break
    return best


def service_start(ledger, i) -> dt.date:
    """First day of service of grant ``i``: its service inception date when that precedes the grant date."""
    grant = _d(ledger.grants["grant_date"].iat[i])
    inc = ledger.grants["service_inception_date"].iat[i] if "service_inception_date" in ledger.grants else None
    if inc is None or (isinstance(inc, float) and math.isnan(inc)) or str(inc) in ("NaT", "nan", "None"):
        return grant
    return min(_d(inc), grant)


def cumulative_cost(ledger, fv_tranche, day: dt.date, attribution: str, forfeitures: str, events_through=None,
                    pre_grant_value=None):
    """Cost per grant id through ``day`` (inclusive).

    ``pre_grant_value(t, day)``: fair value per unit of tranche ``t`` at ``day``, for grants whose
    service began before the grant date and whose grant date is after ``day``.
    """
    g = ledger.grants
    estimates = [dict(applies_to=a, effective=_d(e), rate=r, frac=f) for a, e, r, f in zip(
        ledger.estimates["applies_to"], ledger.estimates["effective_date"],
        ledger.estimates["annual_forfeiture_rate"], ledger.estimates["expected_vest_fraction"])]
    cut = day if events_through is None else min(day, events_through)
    changes = {}
    for t, date, kind, q in zip(ledger.changes["tranche_idx"], ledger.changes["date"], ledger.changes["kind"],
                                ledger.changes["quantity"]):
        changes.setdefault(int(t), []).append((_d(date), kind, int(q)))
    out = {}
    by_grant = {}
    for t in range(len(ledger.tranches)):
        by_grant.setdefault(int(ledger.tranches["grant_idx"].iat[t]), []).append(t)
    for i in range(len(g)):
        gid, group, grant = g["grant_id"].iat[i], g["group"].iat[i], _d(g["grant_date"].iat[i])
        start = service_start(ledger, i)
        before_grant = start <= day < grant
        items = []
        cancel_cost = 0.0
        for t in by_grant.get(i, []):
            vest = _d(ledger.tranches["vest_date"].iat[t])
            qty = int(ledger.tranches["quantity"].iat[t])
            forf = canc = 0
            for date, kind, q in changes.get(t, []):
                if date > cut:
                    continue
                if kind == "forfeit":
                    forf += q
                elif kind == "cancel" and vest > date:
                    canc += q
            outstanding = qty - forf - canc
            vested = vest <= day and grant <= day
            if forfeitures == "estimate" and not vested:
                e = estimate_for(estimates, gid, group, day)
                if e is None:
                    n = outstanding
                elif not math.isnan(e["frac"]):
                    n = min(e["frac"] * qty, outstanding)
                else:
                    years = max((vest - (day + dt.timedelta(days=1))).days, 0) / 365.0
                    n = outstanding * (1 - e["rate"]) ** years
            else:
                n = outstanding
            fv = pre_grant_value(t, day) if before_grant else fv_tranche[t]
            if grant <= day:
                cancel_cost += fv * canc
            items.append((vest, n, fv, vested))
        if attribution == "graded":
            cost = sum(fv * n * served_fraction(day, start, vest) for vest, n, fv, _ in items)
        else:
            last = max(v for v, _, _, _ in items)
            total = sum(fv * n for _, n, fv, _ in items)
            floor = sum(fv * n for _, n, fv, v in items if v)
            cost = max(total * served_fraction(day, start, last), floor) if start <= day else 0.0
        out[gid] = cost + cancel_cost
    return out


def period_ends(start: dt.date, through: dt.date, period: str, fye: int):
    """Fiscal period ends after ``start`` up to ``through``, plus ``through``."""
    step = {"month": 1, "quarter": 3, "year": 12}[period]
    ends = []
    y, m = start.year, start.month
    while True:
        last = dt.date(y, m, calendar.monthrange(y, m)[1])
        if last >= through:
            break
        if (m - fye) % step == 0 and last >= start:
            ends.append(last)
        m += 1
        if m == 13:
            y, m = y + 1, 1
    return ends + [through]


def schedule_cents(ledger, fv_tranche, start, through, attribution, forfeitures, period, fye, pre_grant_value=None):
    """{grant_id: [period expense in cents]} by the rounding rule: round cumulative, then difference."""
    ends = period_ends(start, through, period, fye)
    rnd = lambda x: int(math.floor(x * 100 + 0.5))  # noqa: E731
    prev = {k: rnd(v) for k, v in cumulative_cost(ledger, fv_tranche, start - dt.timedelta(days=1),
                                                   attribution, forfeitures, pre_grant_value=pre_grant_value).items()}
    out = {k: [] for k in prev}
    for d in ends:
        cur = {k: rnd(v) for k, v in cumulative_cost(ledger, fv_tranche, d, attribution, forfeitures,
                                                     pre_grant_value=pre_grant_value).items()}
        for k in cur:
            out[k].append(cur[k] - prev[k])
        prev = cur
    return ends, out
