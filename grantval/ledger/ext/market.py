"""Ledger extension: market conditions (relative / index / absolute TSR and share-price hurdles).

Adds the tables ``market_conditions`` (condition_set, metric, start_date, end_date,
averaging_days, monitoring, peer_set, payout_curve, negative_tsr_cap), ``peers`` (peer_set,
peer_id, volatility, dividend_yield) and ``correlations`` (peer_set, first, second, correlation;
``self`` is the company), and the grant column ``dividend_equivalents`` (``yes``: units receive
the dividends paid during the period).

A ``psu`` or ``option`` grant whose ``condition_set`` names a market condition is valued by
Monte Carlo (:mod:`grantval.measurement.market`).  A grant with no vesting schedule
(``vest_months`` 0) settles on the condition's ``end_date`` (its one tranche vests then); its
requisite service is the derived service period (:mod:`grantval.attribution.service`).
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
    Column("achieved_payout", "number"),
)
PEERS = (
    Column("peer_set", "text", required=True),
    Column("peer_id", "text", required=True),
    Column("volatility", "number", required=True),
    Column("dividend_yield", "number"),
)
MARKET_RETURNS = (
    Column("condition_set", "text", required=True),
    Column("member", "text", required=True),
    Column("measured_on", "date", required=True),
    Column("total_return", "number", required=True),
)
#: metrics whose value depends on the start of the period (a total shareholder return)
TSR_METRICS = ("relative_tsr", "index_tsr", "absolute_tsr")
GRANT_COLUMNS = (Column("dividend_equivalents", "choice", choices=("yes", "no"), default="no"),)
#: award types that may carry a market condition
AWARD_TYPES = ("psu", "option")
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
        ach = r.get("achieved_payout")
        if ach is not None and not pd.isna(ach) and ach < 0:
            p.append(Problem(src, row, "achieved_payout", "must be zero or more (a decimal share of target)"))
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
    for r, x in zip(rows_where(cor, (c < -1) | (c > 1)), c[(c < -1) | (c > 1)]):
        p.append(Problem(src, r, "correlation", f"must be between -1 and 1 (a decimal: 0.45, not 45); got {x:g}"))
    for r in rows_where(cor, np.isnan(c)):
        p.append(Problem(src, r, "correlation", "is blank: give the correlation of the pair (a decimal between -1 and 1)"))
    if np.isnan(c).any() or ((c < -1) | (c > 1)).any():
        return p  # the matrices cannot be formed or tested until these rows are mended
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
        if missing and not seen:
            p.append(Problem(src, None, "correlation", f"peer set {ps!r} has no rows in the correlations table: "
                             f"give the correlation of each of its {len(missing)} pairs (self and each peer, and "
                             "each two peers)"))
        elif missing:
            p.append(Problem(src, None, "correlation", f"peer set {ps!r} misses the pair(s) "
                             + ", ".join(f"{a}/{b}" for a, b in missing)))
        elif np.linalg.eigvalsh(m).min() < -1e-10:
            p.append(Problem(src, None, "correlation", f"the correlations of peer set {ps!r} are not positive "
                             "semi-definite"))
    return p


def market_sets(tables: dict) -> frozenset:
    """Condition sets of the ``market_conditions`` table."""
    mc = tables.get("market_conditions")
    return frozenset(mc["condition_set"]) if mc is not None and len(mc) else frozenset()


def market_grants(grants: pd.DataFrame, tables: dict) -> np.ndarray:
    """Per grant: its ``condition_set`` names a market condition."""
    if "condition_set" not in grants:
        return np.zeros(len(grants), dtype=bool)
    return grants["condition_set"].isin(market_sets(tables)).to_numpy()


def condition_rows(grants: pd.DataFrame, tables: dict) -> pd.DataFrame:
    """Per grant with a market condition: its market_conditions row (index = grant position; the
    ``condition_set`` and the table row ``_row`` are columns)."""
    mc = tables["market_conditions"].drop_duplicates("condition_set").set_index("condition_set", drop=False)
    at = np.flatnonzero(market_grants(grants, tables))
    out = mc.loc[grants["condition_set"].to_numpy()[at]]
    out.index = at
    return out


def vest_dates(grants: pd.DataFrame, tables: dict, tranches: pd.DataFrame) -> pd.DataFrame:
    """A market-condition grant with no vesting schedule (``vest_months`` 0) vests on its ``end_date``."""
    market = market_grants(grants, tables)
    if not market.any():
        return tranches
    rows = condition_rows(grants, tables)
    none = grants["vest_months"].to_numpy() == 0
    end = np.full(len(grants), np.datetime64("NaT"), dtype="datetime64[D]")
    end[rows.index.to_numpy()] = rows["end_date"].to_numpy("datetime64[D]")
    gi = tranches["grant_idx"].to_numpy()
    move = (market & none & ~np.isnat(end))[gi]
    if not move.any():
        return tranches
    out = tranches.copy()
    vd = out["vest_date"].to_numpy("datetime64[D]").copy()
    vd[move] = end[gi[move]]
    out["vest_date"] = pd.to_datetime(vd)
    return out


def achieved_payouts(ledger, vested_t: np.ndarray, t_grant: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per grant: the ``achieved_payout`` of its market condition, and whether it has one.

    Raises :class:`LedgerError` naming the market_conditions row when units of a grant have vested
    (``vested_t``, per tranche of grant ``t_grant``) and the achieved payout is blank: the shares
    issued depend on it, and the tool does not guess it.
    """
    from grantval.errors import LedgerError

    g, t = ledger.grants, ledger.tables
    market = market_grants(g, t)
    out = np.full(len(g), np.nan)
    if not market.any():
        return out, market
    rows = condition_rows(g, t)
    out[rows.index.to_numpy()] = rows["achieved_payout"].to_numpy(float)
    vested = np.zeros(len(g), dtype=bool)
    np.logical_or.at(vested, t_grant[vested_t], True)
    blank = market & vested & np.isnan(out)
    if blank.any():
        first = rows.loc[np.flatnonzero(blank)].drop_duplicates("condition_set").sort_values("condition_set")
        raise LedgerError([Problem(ledger.sources["market_conditions"], int(r), "achieved_payout",
                                   f"units under {c!r} have vested: enter the payout achieved (decimal share of "
                                   "target) so the shares issued can be reported")
                           for c, r in zip(first["condition_set"], first["_row"])])
    return out, market


def payouts_if_ended(ledger, grants: np.ndarray, day) -> np.ndarray:
    """Per grant in the mask ``grants``: the payout its market condition would give if the period ended on ``day``.

    The metric is computed from the results to date: each member's total return to ``day`` in
    ``market_returns`` (TSR metrics), or the ``share_prices`` row of ``day`` (share-price conditions,
    the price on the day), then the payout curve (with the negative-TSR cap).  This is the count of
    contingently issuable shares that depend on a market price (ASC 260-10-45-52; IAS 33.54, both from
    memory).  Raises :class:`LedgerError` naming the missing rows; nothing is assumed.
    """
    from grantval.errors import LedgerError

    g, t = ledger.grants, ledger.tables
    out = np.full(len(g), np.nan)
    problems: list[Problem] = []
    rows = condition_rows(g, t)
    for i in np.flatnonzero(grants):
        r = rows.loc[i]
        x, cap_tsr, missing = _metric_to_date(t, g["condition_set"].iat[i], r, day)
        if missing:
            table = ("share_prices", "share_price") if r["metric"] == "share_price" else ("market_returns",
                                                                                      "total_return")
            problems.append(Problem(ledger.sources.get(table[0], table[0]), None, table[1],
                                    f"diluted shares of grant {g['grant_id'].iat[i]} need {missing} on "
                                    f"{np.datetime64(day, 'D')} (the shares issuable if the period ended then)"))
            continue
        curve = parse_payout_curve(str(r["payout_curve"]),
                                   None if pd.isna(r["negative_tsr_cap"]) else float(r["negative_tsr_cap"]))
        out[i] = float(curve(np.array([x]), None if cap_tsr is None else np.array([cap_tsr]))[0])
    if problems:
        raise LedgerError(problems)
    return out


def _metric_to_date(t: dict, cs: str, r, day) -> tuple[float, float | None, str]:
    """(metric, company TSR or None, what is missing) of one condition on ``day``."""
    if r["metric"] == "share_price":
        sp = t.get("share_prices")
        d = sp["date"].to_numpy("datetime64[D]") if sp is not None and len(sp) else np.zeros(0, "datetime64[D]")
        hit = sp[d == np.datetime64(day, "D")] if len(d) else []
        if not len(hit):
            return np.nan, None, "the share price (share_prices table)"
        if r.get("monitoring") == "any_day":  # once reached the hurdle stays met: the highest price recorded
            since = (d >= np.datetime64(r["start_date"], "D")) & (d <= np.datetime64(day, "D"))
            return float(sp["share_price"].to_numpy(float)[since].max()), None, ""
        return float(hit["share_price"].iat[0]), None, ""
    have = returns_on(t, cs, day)
    members = members_of(t["peers"], r["peer_set"])
    missing = [m for m in members if m not in have]
    if missing:
        return np.nan, None, "the total return to date of " + ", ".join(missing) + " (market_returns table)"
    own = have["self"]
    others = np.array([have[m] for m in members[1:]])
    if r["metric"] == "relative_tsr":
        return 100.0 * float(np.mean(others < own)) if others.size else 0.0, own, ""
    if r["metric"] == "index_tsr":
        return own - float(others[0]), own, ""
    return own, own, ""


def _grant_problems(parts: LedgerParts) -> list[Problem]:
    """Grants that point at a market condition: award type, dates and settlement (vectorised over grants)."""
    g, t, src = parts.grants, parts.tables, parts.sources["grants"]
    market = market_grants(g, t)
    if not market.any():
        return []
    rows = condition_rows(g, t)
    at = rows.index.to_numpy()
    award = g["award_type"].to_numpy(dtype=object)[at]
    cs = g["condition_set"].to_numpy(dtype=object)[at]
    line = g["_row"].to_numpy()[at].astype(int)
    gd = g["grant_date"].to_numpy("datetime64[D]")[at]
    start, end = rows["start_date"].to_numpy("datetime64[D]"), rows["end_date"].to_numpy("datetime64[D]")
    exp = g["expiration_date"].to_numpy("datetime64[D]")[at]
    de = g["dividend_equivalents"].to_numpy(dtype=object)[at] if "dividend_equivalents" in g else np.full(len(at), "no")
    kind_ok = np.isin(award, AWARD_TYPES)
    p: list[Problem] = []
    for i in np.flatnonzero(~kind_ok):
        p.append(Problem(src, int(line[i]), "condition_set", f"the market condition {cs[i]!r} applies to psu or option "
                         f"grants; this grant is {award[i]!r}"))
    for i in np.flatnonzero(kind_ok & (start > gd)):
        p.append(Problem(src, int(line[i]), "condition_set", f"the performance period of {cs[i]!r} starts on "
                         f"{start[i]}, after the grant date {gd[i]}: a period must start on or before the grant date"))
    for i in np.flatnonzero(kind_ok & (end <= gd)):
        p.append(Problem(src, int(line[i]), "condition_set", f"the performance period of {cs[i]!r} ends on "
                         f"{end[i]}, not after the grant date {gd[i]}"))
    p += _returns_to_date(rows, at, gd, line, cs, kind_ok & (start < gd) & (end > gd), t, parts.sources)
    late = kind_ok & (award == "option") & ~np.isnat(exp) & (end > exp)
    for i in np.flatnonzero(late):
        p.append(Problem(src, int(line[i]), "condition_set", f"the performance period of {cs[i]!r} ends on {end[i]}, "
                         f"after the option expires ({exp[i]})"))
    for i in np.flatnonzero(kind_ok & (award != "psu") & (de == "yes")):
        p.append(Problem(src, int(line[i]), "dividend_equivalents", "applies to units only"))
    return p + _member_problems(rows, line, cs, t, src)


def members_of(peers: pd.DataFrame, peer_set) -> list[str]:
    """``self`` and the peer ids of a peer set (only ``self`` without one)."""
    if not isinstance(peer_set, str) or not peer_set:
        return ["self"]
    return ["self"] + list(peers["peer_id"][peers["peer_set"] == peer_set])


def returns_on(tables: dict, condition_set: str, day) -> dict:
    """``member -> total_return`` of a condition set measured on ``day`` (empty when none)."""
    mr = tables.get("market_returns")
    if mr is None or not len(mr):
        return {}
    f = mr[(mr["condition_set"] == condition_set) & (mr["measured_on"].to_numpy("datetime64[D]") == np.datetime64(day, "D"))]
    return dict(zip(f["member"], f["total_return"].astype(float)))


def _returns_to_date(rows, at, gd, line, cs, began, t: dict, sources: dict) -> list[Problem]:
    """A TSR period that began before the grant date needs each member's return to the grant date, and its
    start averaging window must be over by then (averaging_days / 252 years, the simulation's calendar)."""
    p: list[Problem] = []
    for i in np.flatnonzero(began):
        r = rows.iloc[i]
        if r["metric"] not in TSR_METRICS:
            continue
        ad = 0 if pd.isna(r["averaging_days"]) else float(r["averaging_days"])
        if (gd[i] - np.datetime64(r["start_date"], "D")).astype(int) / 365.25 < ad / 252:
            p.append(Problem(sources["grants"], int(line[i]), "condition_set", f"the start averaging window of "
                             f"{cs[i]!r} is not over on the grant date {gd[i]}; its start value is not known yet"))
            continue
        have = returns_on(t, cs[i], gd[i])
        missing = [m for m in members_of(t["peers"], r["peer_set"]) if m not in have]
        if missing:
            p.append(Problem(sources["grants"], int(line[i]), "condition_set", f"the period of {cs[i]!r} began "
                             f"on {np.datetime64(r['start_date'], 'D')}, before the grant date {gd[i]}: give the "
                             f"total return to {gd[i]} of {', '.join(missing)} in the market_returns table"))
    return p


def _returns_problems(t: dict, src: str) -> list[Problem]:
    """Row checks of market_returns: a known condition and member, one row per member and date, above -100%."""
    mr = t["market_returns"]
    if not len(mr):
        return []
    mc = t["market_conditions"].drop_duplicates("condition_set").set_index("condition_set")
    p: list[Problem] = []
    for row, c, m, tr in zip(mr["_row"], mr["condition_set"], mr["member"], mr["total_return"]):
        if c not in mc.index:
            p.append(Problem(src, int(row), "condition_set", f"{c!r} is not in the market_conditions table"))
        elif m not in members_of(t["peers"], mc.loc[c, "peer_set"]):
            p.append(Problem(src, int(row), "member", f"{m!r} is not 'self' or a peer of {c!r}'s peer set"))
        if tr <= -1:
            p.append(Problem(src, int(row), "total_return", f"{tr:g} is a loss of 100% or more; a total return "
                             "is a decimal above -1 (-0.25 is a 25% fall)"))
        elif tr > 3:
            p.append(Problem(src, int(row), "total_return", f"{tr:g} is a return of over 300%; a total return is "
                             "a decimal (0.25 is 25%): check it is not a percentage", severity="warning"))
    dup = mr[["condition_set", "member", "measured_on"]].astype(str).duplicated().to_numpy()
    for r in rows_where(mr, dup):
        p.append(Problem(src, r, "measured_on", "the member already has a total return on this date"))
    return p


def _member_problems(rows: pd.DataFrame, line: np.ndarray, cs: np.ndarray, t: dict, src: str) -> list[Problem]:
    """An index condition needs exactly one member in its peer set (the index)."""
    peers = t["peers"]
    count = peers.groupby("peer_set").size() if len(peers) else pd.Series(dtype=int)
    n = rows["peer_set"].map(count).fillna(0).to_numpy(int)
    bad = (rows["metric"].to_numpy() == "index_tsr") & (n != 1)
    return [Problem(src, int(line[i]), "condition_set",
                    f"the index_tsr condition {cs[i]!r} needs exactly one member in peer "
                    f"set {rows['peer_set'].iat[i]!r} (the index); it has {n[i]}") for i in np.flatnonzero(bad)]


def _peer_value_problems(peers: pd.DataFrame, src: str) -> list[Problem]:
    """A peer's volatility and dividend yield within the same limits as the assumptions table's."""
    from grantval import plausibility

    p: list[Problem] = []
    for col in ("volatility", "dividend_yield"):
        vals = peers[col].to_numpy(float)
        bad = plausibility.bad(col, vals)
        for r, x in zip(rows_where(peers, bad), vals[bad]):
            p.append(Problem(src, r, col, f"{plausibility.LIMITS[col].words}; got {x:g}"))
        odd = plausibility.odd(col, vals)
        for r, x in zip(rows_where(peers, odd), vals[odd]):
            p.append(Problem(src, r, col, f"{x:g} {plausibility.LIMITS[col].unusual}", "warning"))
    return p


def check(parts: LedgerParts) -> list[Problem]:
    """Every check of the market-condition tables and of the grants that point at them."""
    t, s = parts.tables, parts.sources
    mc, peers, cor = t["market_conditions"], t["peers"], t["correlations"]
    p = _condition_problems(mc, peers, s["market_conditions"]) + _correlation_problems(peers, cor, s["correlations"])
    p += _returns_problems(t, s["market_returns"]) + _peer_value_problems(peers, s["peers"])
    both = set(mc["condition_set"]) & set(t["performance"]["condition_set"]) if len(mc) else set()
    for r in rows_where(mc, mc["condition_set"].isin(both).to_numpy()):
        p.append(Problem(s["market_conditions"], r, "condition_set", "is also in the performance table"))
    dup = mc["condition_set"].duplicated().to_numpy() if len(mc) else np.zeros(0, bool)
    for r in rows_where(mc, dup):
        p.append(Problem(s["market_conditions"], r, "condition_set", "is given on an earlier row"))
    if any(x.severity == "error" for x in p):
        return p
    return p + _grant_problems(parts)


EXTENSION = Extension(
    feature="market conditions",
    tables={"market_conditions": MARKET_CONDITIONS, "peers": PEERS, "correlations": CORRELATIONS,
            "market_returns": MARKET_RETURNS},
    grant_columns=GRANT_COLUMNS,
    text_columns=frozenset({"condition_set", "peer_set", "peer_id", "first", "second", "payout_curve", "member"}),
    check=check,
    vest_dates=vest_dates,
)
