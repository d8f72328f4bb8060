"""Ledger extension: market conditions (relative / index / absolute TSR and share-price hurdles).

Adds the tables ``market_conditions`` (condition_set, metric, start_date, end_date,
averaging_days, monitoring, peer_set, payout_curve, negative_tsr_cap), ``peers`` (peer_set,
peer_id, volatility, dividend_yield) and ``correlations`` (peer_set, first, second, correlation;
``self`` is the company).  Valuation of ledger grants under a market condition is not wired yet:
such grants are refused with a clear problem.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Extension, LedgerParts, rows_where
from grantval.pricing.payout import parse_payout_curve

METRICS = ("relative_tsr", "index_tsr", "absolute_tsr", "share_price")
MONITORING = ("end", "any_day")

MARKET_CONDITIONS = (
    Column("condition_set", "text", required=True),
    Column("metric", "text", required=True),
    Column("start_date", "date", required=True),
    Column("end_date", "date", required=True),
    Column("averaging_days", "number"),
    Column("monitoring", "text"),
    Column("peer_set", "text"),
    Column("payout_curve", "text", required=True),
    Column("negative_tsr_cap", "number"),
)
PEERS = (
    Column("peer_set", "text", required=True),
    Column("peer_id", "text", required=True),
    Column("volatility", "number", required=True),
    Column("dividend_yield", "number"),
)
CORRELATIONS = (
    Column("peer_set", "text", required=True),
    Column("first", "text", required=True),
    Column("second", "text", required=True),
    Column("correlation", "number", required=True),
)


def _condition_problems(mc: pd.DataFrame, peers: pd.DataFrame, src: str) -> list[Problem]:
    """Row checks of the market_conditions table."""
    p: list[Problem] = []
    sets = set(peers["peer_set"]) if len(peers) else set()
    for _, r in mc.iterrows():
        row = int(r["_row"]) if "_row" in r else None
        if r["metric"] not in METRICS:
            p.append(Problem(src, row, "metric", f"{r['metric']!r} is not one of {', '.join(METRICS)}"))
        mon = r.get("monitoring")
        if isinstance(mon, str) and mon not in MONITORING:
            p.append(Problem(src, row, "monitoring", f"{mon!r} is not end or any_day"))
        ps = r.get("peer_set")
        has_ps = isinstance(ps, str) and ps != ""
        if r["metric"] in ("relative_tsr", "index_tsr") and not has_ps:
            p.append(Problem(src, row, "peer_set", f"is required for a {r['metric']} condition"))
        if has_ps and ps not in sets:
            p.append(Problem(src, row, "peer_set", f"{ps!r} has no peers in the peers table"))
        sd, ed = pd.Timestamp(r["start_date"]), pd.Timestamp(r["end_date"])
        if ed <= sd:
            p.append(Problem(src, row, "end_date", "must be after start_date"))
        ad = r.get("averaging_days")
        if ad is not None and not pd.isna(ad) and ed > sd and ad / 252 > (ed - sd).days / 365.25:
            p.append(Problem(src, row, "averaging_days", "the averaging window is longer than the performance period"))
        cap = r.get("negative_tsr_cap")
        try:
            parse_payout_curve(str(r["payout_curve"]), None if cap is None or pd.isna(cap) else float(cap))
        except Exception as exc:  # the parser's own message says what is wrong
            p.append(Problem(src, row, "payout_curve", f"cannot be read: {exc}"))
    return p


def _pair_problem(a, b, names: list, seen: dict, ps) -> tuple[str, str] | None:
    """(column, message) when a correlation row cannot be used: an unknown member, a member paired
    with itself, or a pair already given (in either order) on an earlier row."""
    for col, name in (("first", a), ("second", b)):
        if name not in names:
            return col, f"{name!r} is not 'self' or a peer of peer set {ps!r} (peers table)"
    if a == b:
        return "second", f"pairs {a!r} with itself; the correlation of a member with itself is 1"
    if frozenset((a, b)) in seen:
        return "second", f"the pair {a}/{b} of peer set {ps!r} is already given on row {seen[frozenset((a, b))]}"
    return None


def _correlation_problems(peers: pd.DataFrame, cor: pd.DataFrame, src: str) -> list[Problem]:
    """Correlation bounds, missing pairs and positive semi-definiteness per peer set."""
    p: list[Problem] = []
    c = cor["correlation"].to_numpy(float)
    for r in rows_where(cor, (c < -1) | (c > 1)):
        p.append(Problem(src, r, "correlation", "must be between -1 and 1"))
    for ps, f in (peers.groupby("peer_set") if len(peers) else []):
        names = ["self"] + list(f["peer_id"])
        m = np.eye(len(names))
        given = cor[cor["peer_set"] == ps]
        seen: dict = {}
        for _, r in given.iterrows():
            a, b, row = r["first"], r["second"], int(r["_row"])
            bad = _pair_problem(a, b, names, seen, ps)
            if bad:
                p.append(Problem(src, row, bad[0], bad[1]))
                continue
            i, j = names.index(a), names.index(b)
            m[i, j] = m[j, i] = r["correlation"]
            seen[frozenset((a, b))] = row
        missing = [(a, b) for i, a in enumerate(names) for b in names[i + 1:] if frozenset((a, b)) not in seen]
        if missing:
            p.append(Problem(src, None, "correlation", f"peer set {ps!r} misses the pair(s) "
                             + ", ".join(f"{a}/{b}" for a, b in missing)))
        elif np.linalg.eigvalsh(m).min() < -1e-10:
            p.append(Problem(src, None, "correlation", f"the correlations of peer set {ps!r} are not positive "
                             "semi-definite"))
    return p


def check(parts: LedgerParts) -> list[Problem]:
    """Every check of the market-condition tables; refuses grants using them until valuation is wired."""
    t, s = parts.tables, parts.sources
    mc, peers, cor = t["market_conditions"], t["peers"], t["correlations"]
    p = _condition_problems(mc, peers, s["market_conditions"]) + _correlation_problems(peers, cor, s["correlations"])
    both = set(mc["condition_set"]) & set(t["performance"]["condition_set"]) if len(mc) else set()
    for r in rows_where(mc, mc["condition_set"].isin(both).to_numpy()):
        p.append(Problem(s["market_conditions"], r, "condition_set", "is also in the performance table"))
    known = set(mc["condition_set"]) if len(mc) else set()
    g = parts.grants
    for r in rows_where(g, g["condition_set"].isin(known).to_numpy()):
        p.append(Problem(s["grants"], r, "condition_set",
                         "market-condition valuation of ledger grants is not available yet"))
    return p


EXTENSION = Extension(
    feature="market conditions",
    tables={"market_conditions": MARKET_CONDITIONS, "peers": PEERS, "correlations": CORRELATIONS},
    text_columns=frozenset({"condition_set", "peer_set", "peer_id", "first", "second", "payout_curve"}),
    check=check,
)
