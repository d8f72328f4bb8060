"""Checks across the rows and tables of a ledger.

Every function returns the problems it finds and never stops at the first;
:func:`grantval.ledger.load.read_ledger` gathers them all.
"""

from __future__ import annotations

import numpy as np

from grantval import plausibility
from grantval.awards.registry import flag
from grantval.ledger.extensions import rows_where
import pandas as pd

from grantval.dates import year_fraction
from grantval.errors import Problem

#: largest quantity of one grant (keeps the tranche arithmetic exact in 64-bit integers)
MAX_QUANTITY = 1e12


def check_grants(g: pd.DataFrame, src: str) -> list[Problem]:
    """Row checks of the grants table (after typing)."""
    p: list[Problem] = []
    ids = g["grant_id"]
    dup = ids.duplicated(keep="first") & ids.notna()
    if dup.any():
        first_row = dict(zip(ids[~dup], g["_row"][~dup]))
        for r, gid in zip(g["_row"][dup], ids[dup]):
            p.append(Problem(src, int(r), "grant_id", f"{gid!r} is used twice (first in row {first_row.get(gid)})"))
    q = g["quantity"].to_numpy()
    for r, x in zip(rows_where(g, q <= 0), q[q <= 0]):
        p.append(Problem(src, r, "quantity", f"must be a positive whole number; got {x:g}"))
    for r, x in zip(rows_where(g, q > MAX_QUANTITY), q[q > MAX_QUANTITY]):
        p.append(Problem(src, r, "quantity", f"{x:g} is too large (more than {MAX_QUANTITY:,.0f})"))
    option = flag(g["award_type"].to_numpy(), "option_terms")
    price = g["exercise_price"].to_numpy()
    exp = g["expiration_date"].to_numpy("datetime64[D]")
    gd = g["grant_date"].to_numpy("datetime64[D]")
    for r in rows_where(g, option & np.isnan(price)):
        p.append(Problem(src, r, "exercise_price", "is required for an option grant"))
    wrong = option & plausibility.bad("exercise_price", price)
    for r, x in zip(rows_where(g, wrong), price[wrong]):
        p.append(Problem(src, r, "exercise_price", f"{plausibility.LIMITS['exercise_price'].words}; got {x:g}"))
    for r in rows_where(g, option & np.isnat(exp)):
        p.append(Problem(src, r, "expiration_date", "is required for an option grant"))
    bad = ~np.isnat(exp) & ~np.isnat(gd) & (exp <= gd)
    for r, e, d in zip(rows_where(g, bad), exp[bad], gd[bad]):
        p.append(Problem(src, r, "expiration_date", f"{e} is not after the grant date {d}"))
    months = g["vest_months"].to_numpy()
    every = g["vest_every_months"].to_numpy()
    cliff = g["cliff_months"].to_numpy()
    for r, x in zip(rows_where(g, months < 0), months[months < 0]):
        p.append(Problem(src, r, "vest_months", f"must be zero or more; got {x:g}"))
    for r, x in zip(rows_where(g, months > 1200), months[months > 1200]):
        p.append(Problem(src, r, "vest_months", f"{x:g} months is more than 100 years"))
    for r, x in zip(rows_where(g, every < 1), every[every < 1]):
        p.append(Problem(src, r, "vest_every_months", f"must be at least 1; got {x:g}"))
    with np.errstate(invalid="ignore", divide="ignore"):
        notmult = (every >= 1) & (months >= 0) & (np.mod(months, np.where(every >= 1, every, 1)) != 0)
    for r, m, e in zip(rows_where(g, notmult), months[notmult], every[notmult]):
        p.append(Problem(src, r, "vest_months", f"{m:g} is not a multiple of vest_every_months ({e:g})"))
    for r, x in zip(rows_where(g, cliff < 0), cliff[cliff < 0]):
        p.append(Problem(src, r, "cliff_months", f"must be zero or more; got {x:g}"))
    over = (cliff > months) & (months >= 0)
    for r, c, m in zip(rows_where(g, over), cliff[over], months[over]):
        p.append(Problem(src, r, "cliff_months", f"{c:g} is more than vest_months ({m:g})"))
    return p


def schedule_ok(g: pd.DataFrame) -> np.ndarray:
    """Grants whose schedule columns are valid enough to generate tranches."""
    months = g["vest_months"].to_numpy()
    every = g["vest_every_months"].to_numpy()
    cliff = g["cliff_months"].to_numpy()
    ok = ~np.isnan(months) & ~np.isnan(every) & ~np.isnan(cliff) & ~np.isnan(g["quantity"].to_numpy())
    ok &= (months >= 0) & (every >= 1) & (cliff >= 0) & (cliff <= months) & (g["quantity"].to_numpy() > 0)
    ok &= (g["quantity"].to_numpy() <= MAX_QUANTITY) & (months <= 1200)
    with np.errstate(invalid="ignore"):
        ok &= np.mod(np.nan_to_num(months), np.where(every >= 1, every, 1)) == 0
    ok &= ~np.isnat(g["vest_start_date"].to_numpy("datetime64[D]"))
    return ok


def check_last_vest(g: pd.DataFrame, tranches: pd.DataFrame, src: str) -> list[Problem]:
    """Options must not vest after they expire."""
    p: list[Problem] = []
    if tranches.empty:
        return p
    last = tranches.groupby("grant_idx")["vest_date"].max()
    idx = last.index.to_numpy()
    exp = g["expiration_date"].to_numpy("datetime64[D]")[idx]
    lv = last.to_numpy("datetime64[D]")
    bad = ~np.isnat(exp) & (lv > exp)
    rows = g["_row"].to_numpy()[idx]
    srcs = g["_source"].to_numpy()[idx] if "_source" in g.columns else np.full(len(idx), src, dtype=object)
    for r, v, e, s in zip(rows[bad], lv[bad], exp[bad], srcs[bad]):
        p.append(Problem(s, int(r), "expiration_date", f"the last tranche vests on {v}, after the expiration date {e}"))
    return p


def check_assumptions(a: pd.DataFrame, src: str) -> list[Problem]:
    """Row checks of the assumptions table."""
    p: list[Problem] = []
    key_set = a["assumption_set"].notna().to_numpy()
    key_date = ~np.isnat(a["grant_date"].to_numpy("datetime64[D]"))
    for r in rows_where(a, ~key_set & ~key_date):
        p.append(Problem(src, r, "assumption_set", "each row needs an assumption_set name or a grant_date"))
    named = a[key_set]
    dup = named["assumption_set"].duplicated()
    for r, k in zip(named["_row"][dup], named["assumption_set"][dup]):
        p.append(Problem(src, int(r), "assumption_set", f"{k!r} is defined twice"))
    dated = a[~key_set & key_date]
    dupd = dated["grant_date"].duplicated()
    for r, k in zip(dated["_row"][dupd], dated["grant_date"][dupd]):
        p.append(Problem(src, int(r), "grant_date", f"{np.datetime64(k, 'D')} has two rows of assumptions"))

    def rule(col, bad_mask, words):
        vals = a[col].to_numpy()
        for r, x in zip(rows_where(a, bad_mask), vals[np.asarray(bad_mask)]):
            p.append(Problem(src, r, col, f"{words}; got {x:g}"))

    for col in ("share_price", "volatility", "risk_free_rate", "dividend_yield", "expected_term_years", "fair_value"):
        vals = a[col].to_numpy(float)
        rule(col, plausibility.bad(col, vals), plausibility.LIMITS[col].words)
        for r, x in zip(rows_where(a, plausibility.odd(col, vals)), vals[plausibility.odd(col, vals)]):
            p.append(Problem(src, r, col, f"{x:g} {plausibility.LIMITS[col].unusual}", "warning"))
    bsm = (a["model"] == "bsm").to_numpy()
    em = a["exercise_multiple"].to_numpy()
    ex = a["post_vest_exit_rate"].to_numpy()
    for col, vals in (("exercise_multiple", em), ("post_vest_exit_rate", ex)):
        for r in rows_where(a, bsm & ~np.isnan(vals)):
            p.append(Problem(src, r, col, "is a lattice parameter but the row's model is bsm; set model to lattice or clear it"))
    rule("exercise_multiple", ~bsm & (em < 1), "must be at least 1")
    rule("post_vest_exit_rate", ~bsm & (ex < 0), "must be zero or more")
    lat = (a["model"] == "lattice").to_numpy()
    for r in rows_where(a, lat & ~np.isnan(a["expected_term_years"].to_numpy(float))):
        p.append(Problem(src, r, "expected_term_years",
                         "is not used by the lattice, which runs to the contractual term; leave it blank"))
    return p


def _first_rows(keys: np.ndarray, rows: np.ndarray) -> tuple[pd.Index, np.ndarray]:
    """An index of the distinct ``keys`` and, per key, the first of ``rows`` holding it."""
    idx = pd.Index(keys)
    keep = ~idx.duplicated(keep="first")
    return idx[keep], rows[keep]


def match_assumptions(g: pd.DataFrame, a: pd.DataFrame, gsrc: str) -> tuple[np.ndarray, list[Problem]]:
    """Row of ``assumptions`` for each grant (-1 when none), with problems.  Vectorised over grants.

    A grant naming an ``assumption_set`` takes the first row of that name; a grant without one takes
    the first row without a name whose ``grant_date`` is the grant's.
    """
    names = a["assumption_set"].to_numpy(dtype=object)
    key_set = pd.notna(names)
    dates = a["grant_date"].to_numpy("datetime64[D]")
    named = np.flatnonzero(key_set)
    dated = np.flatnonzero(~key_set & ~np.isnat(dates))
    name_index, name_rows = _first_rows(names[named], named)
    date_index, date_rows = _first_rows(dates[dated], dated)
    sets = g["assumption_set"].to_numpy(dtype=object)
    gd = g["grant_date"].to_numpy("datetime64[D]")
    rows = g["_row"].to_numpy()
    by_name = pd.notna(sets)
    pos = np.full(len(g), -1, dtype=np.int64)
    at = name_index.get_indexer(sets[by_name]) if by_name.any() else np.zeros(0, np.int64)
    pos[by_name] = np.where(at >= 0, name_rows[np.maximum(at, 0)] if len(name_rows) else -1, -1)
    by_date = ~by_name & ~np.isnat(gd)
    at = date_index.get_indexer(gd[by_date]) if by_date.any() else np.zeros(0, np.int64)
    pos[by_date] = np.where(at >= 0, date_rows[np.maximum(at, 0)] if len(date_rows) else -1, -1)
    p: list[Problem] = []
    for i in np.flatnonzero((by_name | by_date) & (pos < 0)):  # in grant order, as the rows are read
        if by_name[i]:
            p.append(Problem(gsrc, int(rows[i]), "assumption_set",
                             f"{sets[i]!r} is not an assumption_set in the assumptions table"))
        else:
            p.append(Problem(gsrc, int(rows[i]), "grant_date",
                             f"no assumptions row has grant_date {gd[i]} (and assumption_set is blank)"))
    return pos, p


def check_grant_assumptions(g: pd.DataFrame, a: pd.DataFrame, pos: np.ndarray, asrc: str,
                            market: np.ndarray | None = None) -> list[Problem]:
    """Checks that need both a grant and its assumptions row (``market``: per grant, a market condition)."""
    p: list[Problem] = []
    ok = pos >= 0
    if not ok.any():
        return p
    gi = np.flatnonzero(ok)
    ai = pos[ok]
    option = flag(g["award_type"].to_numpy(), "option_terms")[gi]
    mc = np.zeros(len(gi), dtype=bool) if market is None else np.asarray(market, dtype=bool)[gi]
    supplied = ~np.isnan(a["fair_value"].to_numpy()[ai])
    need = (option | mc) & ~supplied
    reported: set[tuple[int, str]] = set()
    for col in ("volatility", "risk_free_rate"):
        missing = need & np.isnan(a[col].to_numpy()[ai])
        for j, gidx, m in zip(ai[missing], gi[missing], mc[missing]):
            if (j, col) in reported:
                continue
            reported.add((j, col))
            what = "grants with a market condition (Monte Carlo)" if m else "option grants valued by the tool"
            p.append(Problem(asrc, int(a["_row"].iat[j]), col,
                             f"is required for {what} (used by grant {g['grant_id'].iat[gidx]})"))
    lattice = mc & ~supplied & (a["model"].to_numpy()[ai] == "lattice")
    for j, gidx in zip(ai[lattice], gi[lattice]):
        if (j, "model") not in reported:
            reported.add((j, "model"))
            p.append(Problem(asrc, int(a["_row"].iat[j]), "model",
                             f"is lattice, but grant {g['grant_id'].iat[gidx]} has a market condition and is valued by "
                             "Monte Carlo at its expected term (exercise_multiple and post_vest_exit_rate unused): "
                             "use an assumptions row with model bsm"))
    te = a["expected_term_years"].to_numpy()[ai]
    contract = year_fraction(g["grant_date"].to_numpy("datetime64[D]")[gi], g["expiration_date"].to_numpy("datetime64[D]")[gi])
    longer = option & ~np.isnan(te) & ~np.isnan(contract) & (te > contract + 1e-9)
    for j, gidx, t, c in zip(ai[longer], gi[longer], te[longer], contract[longer]):
        key = (j, "expected_term_years")
        if key in reported:
            continue
        reported.add(key)
        p.append(Problem(asrc, int(a["_row"].iat[j]), "expected_term_years",
                         f"{t:g} years is longer than the contractual term {c:.4f} years of grant {g['grant_id'].iat[gidx]}"))
    p += _lattice_range(g, a, gi, ai, option & ~supplied, contract, asrc)
    return p


def _lattice_range(g, a, gi, ai, valued, contract, asrc) -> list[Problem]:
    """Lattice rows whose volatility x sqrt(contractual term) the lattice cannot span (pricing.lattice)."""
    from grantval.pricing.lattice import MAX_TOTAL_VOLATILITY

    lattice = valued & (a["model"].to_numpy()[ai] == "lattice")
    total = a["volatility"].to_numpy(float)[ai] * np.sqrt(np.maximum(np.nan_to_num(contract), 0.0))
    out, seen = [], set()
    for j, gidx, x in zip(ai[lattice & (total > MAX_TOTAL_VOLATILITY)], gi[lattice & (total > MAX_TOTAL_VOLATILITY)],
                          total[lattice & (total > MAX_TOTAL_VOLATILITY)]):
        if j not in seen:
            seen.add(j)
            out.append(Problem(asrc, int(a["_row"].iat[j]), "volatility",
                               f"volatility x sqrt(contractual term) is {x:.2f} for grant {g['grant_id'].iat[gidx]}, "
                               f"beyond {MAX_TOTAL_VOLATILITY:g}, the range the lattice can value reliably"))
    return out


def check_tranches_table(t: pd.DataFrame, g: pd.DataFrame, src: str) -> tuple[pd.DataFrame, list[Problem]]:
    """Tranches given in the ledger: known grants, positive quantities, sums equal to the grant."""
    p: list[Problem] = []
    index = {k: i for i, k in enumerate(g["grant_id"].to_numpy(dtype=object))}
    gpos = np.array([index.get(k, -1) for k in t["grant_id"].to_numpy(dtype=object)], dtype=np.int64)
    for r, k in zip(rows_where(t, (gpos < 0) & t["grant_id"].notna().to_numpy()), t["grant_id"][(gpos < 0) & t["grant_id"].notna()]):
        p.append(Problem(src, r, "grant_id", f"{k!r} is not a grant in the grants table"))
    q = t["quantity"].to_numpy()
    for r, x in zip(rows_where(t, q > MAX_QUANTITY), q[q > MAX_QUANTITY]):
        p.append(Problem(src, r, "quantity", f"{x:g} is too large (more than {MAX_QUANTITY:,.0f})"))
    for r, x in zip(rows_where(t, q <= 0), q[q <= 0]):
        p.append(Problem(src, r, "quantity", f"must be a positive whole number; got {x:g}"))
    ok = (gpos >= 0) & ~np.isnan(q) & ~np.isnat(t["vest_date"].to_numpy("datetime64[D]"))
    given = pd.DataFrame({"grant_idx": gpos[ok], "vest_date": t["vest_date"].to_numpy("datetime64[D]")[ok],
                          "quantity": q[ok].astype(np.int64), "_row": t["_row"].to_numpy()[ok]})
    sums = given.groupby("grant_idx").agg(total=("quantity", "sum"), row=("_row", "min"))
    gq = g["quantity"].to_numpy()
    for gidx, total, row in zip(sums.index, sums["total"], sums["row"]):
        if not np.isnan(gq[gidx]) and total != gq[gidx]:
            p.append(Problem(src, int(row), "quantity",
                             f"the tranches of grant {g['grant_id'].iat[gidx]} sum to {total}, not its quantity {gq[gidx]:g}"))
    return given, p


def check_estimates(e: pd.DataFrame, g: pd.DataFrame, src: str) -> list[Problem]:
    """Forfeiture estimates: exactly one estimate column, sensible values, a known target."""
    p: list[Problem] = []
    rate = e["annual_forfeiture_rate"].to_numpy()
    frac = e["expected_vest_fraction"].to_numpy()
    both = ~np.isnan(rate) & ~np.isnan(frac)
    neither = np.isnan(rate) & np.isnan(frac)
    for r in rows_where(e, both):
        p.append(Problem(src, r, "annual_forfeiture_rate", "give either annual_forfeiture_rate or expected_vest_fraction, not both"))
    for r in rows_where(e, neither):
        p.append(Problem(src, r, "annual_forfeiture_rate", "give one of annual_forfeiture_rate or expected_vest_fraction"))
    for r, x in zip(rows_where(e, (rate < 0) | (rate >= 1)), rate[(rate < 0) | (rate >= 1)]):
        p.append(Problem(src, r, "annual_forfeiture_rate", f"must be at least 0 and below 1 (a decimal: 0.05 is 5%); got {x:g}"))
    for r, x in zip(rows_where(e, (frac <= 0) | (frac > 1)), frac[(frac <= 0) | (frac > 1)]):
        p.append(Problem(src, r, "expected_vest_fraction", f"must be above 0 and at most 1; got {x:g}"))
    ids = set(g["grant_id"].dropna().to_numpy(dtype=object))
    groups = set(g["group"].dropna().to_numpy(dtype=object))
    for r, k in zip(e["_row"].to_numpy(), e["applies_to"].to_numpy(dtype=object)):
        if k is None or k == "*" or k in ids or k in groups:
            continue
        p.append(Problem(src, int(r), "applies_to", f"{k!r} is not a grant_id, a group or '*'"))
    key = e[["applies_to", "effective_date"]].astype(str)
    dup = key.duplicated()
    for r, k, d in zip(e["_row"][dup], e["applies_to"][dup], e["effective_date"][dup]):
        p.append(Problem(src, int(r), "effective_date", f"{k!r} already has an estimate effective {np.datetime64(d, 'D')}"))
    return p


def fill_grant_defaults(g: pd.DataFrame) -> pd.DataFrame:
    """Apply the documented defaults (vest start = grant date)."""
    g = g.copy()
    vs = g["vest_start_date"].to_numpy("datetime64[D]").copy()
    gd = g["grant_date"].to_numpy("datetime64[D]")
    vs[np.isnat(vs)] = gd[np.isnat(vs)]
    g["vest_start_date"] = vs
    g["group"] = g["group"].where(g["group"].notna(), "")
    return g


__all__ = [
    "check_grants",
    "check_assumptions",
    "match_assumptions",
    "check_grant_assumptions",
    "check_tranches_table",
    "check_estimates",
    "check_last_vest",
    "schedule_ok",
    "fill_grant_defaults",
]
