"""Ledger extension: employee share purchase plans (ESPP) with or without a look-back.

Tables
------
``espp_offerings``: ``offering_id``, ``start_date``, ``purchase_dates`` (ISO dates joined by
``;``), ``discount`` (decimal, 0.15 = 15%), ``lookback`` (``yes``/``no``), ``shares_basis``
(``fixed_shares`` or ``fixed_withholding``), ``share_price``, ``volatility``, ``risk_free_rate``,
``dividend_yield`` (at the start date), optional ``max_shares`` (most shares one enrollment may
buy on each purchase date).

``espp_enrollments``: ``offering_id``, ``holder_id``, ``group``, ``withholding`` (expected total
contributions over the offering, spread evenly across its purchase periods).

Each enrollment becomes a grant ``<offering_id>/<holder_id>`` of award type ``espp`` granted on
the offering's start date, with one tranche per purchase date: the whole shares its withholding
for that period buys at the start purchase price ``(1 - discount) x share_price`` (rounded down;
capped by ``max_shares``).  Events (keyed by that grant id): ``withdraw`` (the employee stops
contributing and leaves the offering while still employed: a cancellation, so the cost of the
purchase periods not yet reached is recognised at once; see ``docs/purchase-plans.md``) and
``purchase`` (shares bought, in ``quantity``, at ``share_price`` per share: recorded for the
purchase-plan table, no change to cost).  A termination of employment is the core ``forfeit``.

``espp_resets`` (optional): ``offering_id``, ``reset_date``, ``share_price`` (on the reset date: the
new reference price of the look-back, below the one in force), ``volatility``, ``risk_free_rate``,
``dividend_yield`` (on the reset date).  The purchase rights not yet reached look back to the new
price from the reset date on: a modification whose incremental value
(:func:`grantval.pricing.espp_reset_increment`) is a cost layer of each such purchase period, from
the reset date to its purchase date (:mod:`grantval.attribution.espp_resets`).
"""

from __future__ import annotations

import datetime as _dt
from itertools import pairwise

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Contribution, Extension, LedgerParts

OFFERINGS = (
    Column("offering_id", "text", required=True),
    Column("start_date", "date", required=True),
    Column("purchase_dates", "text", required=True),
    Column("discount", "number", required=True),
    Column("lookback", "choice", required=True, choices=("yes", "no")),
    Column("shares_basis", "choice", required=True, choices=("fixed_shares", "fixed_withholding")),
    Column("share_price", "number", required=True),
    Column("volatility", "number"),
    Column("risk_free_rate", "number", required=True),
    Column("dividend_yield", "number", default=0.0),
    Column("max_shares", "integer"),
    Column("rolls_over_from", "text"),
)

ENROLLMENTS = (
    Column("offering_id", "text", required=True),
    Column("holder_id", "text", required=True),
    Column("group", "text"),
    Column("withholding", "number", required=True),
)

RESETS = (
    Column("offering_id", "text", required=True),
    Column("reset_date", "date", required=True),
    Column("share_price", "number", required=True),
    Column("volatility", "number", required=True),
    Column("risk_free_rate", "number", required=True),
    Column("dividend_yield", "number", default=0.0),
)

EVENT_TYPES = ("withdraw", "purchase")
AWARD_TYPE = "espp"


def parse_dates(text) -> tuple[list, str | None]:
    """Purchase dates of one ``purchase_dates`` cell: (dates, problem message or None)."""
    if text is None or (isinstance(text, float) and np.isnan(text)):
        return [], "is required (ISO dates joined by ';')"
    out = []
    for piece in str(text).split(";"):
        s = piece.strip()
        if not s:
            continue
        try:
            out.append(np.datetime64(_dt.date.fromisoformat(s), "D"))
        except ValueError:
            return [], f"{s!r} is not an ISO date (write 2027-06-30;2027-12-31)"
    if not out:
        return [], "gives no dates (ISO dates joined by ';')"
    return out, None


def _offering_problems(o: pd.DataFrame, src: str) -> tuple[list[Problem], list, np.ndarray]:
    """Row checks of the offerings; their purchase dates and which rows are usable."""
    p: list[Problem] = []
    ok = np.ones(len(o), dtype=bool)
    dates: list = []

    def bad(i, col, msg):
        ok[i] = False
        p.append(Problem(src, int(o["_row"].iat[i]), col, msg))

    ids = o["offering_id"]
    dup = (ids.duplicated() & ids.notna()).to_numpy()
    for i in np.flatnonzero(dup):
        bad(i, "offering_id", f"{ids.iat[i]!r} is defined twice")
    for i in range(len(o)):
        d, msg = parse_dates(o["purchase_dates"].iat[i])
        dates.append(d)
        start = o["start_date"].to_numpy("datetime64[D]")[i]
        if msg:
            bad(i, "purchase_dates", msg)
        elif not np.isnat(start) and d[0] <= start:
            bad(i, "purchase_dates", f"{d[0]} is not after the start date {start}")
        elif any(b <= a for a, b in pairwise(d)):
            bad(i, "purchase_dates", "the purchase dates must increase (each after the one before)")
        if np.isnat(start) or any(o[c].isna().iat[i] for c in ("offering_id", "lookback", "shares_basis")):
            ok[i] = False  # reported by the reader as a required or invalid cell
        disc = float(o["discount"].iat[i])
        if np.isnan(disc):
            ok[i] = False
        elif not 0 <= disc < 1:
            bad(i, "discount", f"must be from 0 up to but excluding 1 (a decimal: 0.15 is 15%); got {disc:g}")
        _value_checks(o, i, bad, ok)
    return p, dates, ok


def _input_problems(vol: float, rate: float, q: float) -> list[tuple[str, str]]:
    """(column, message) for a volatility, rate or dividend yield out of range (NaN: blank, not checked here)."""
    from grantval.ledger.schema import RATE_MAX, RATE_MIN, VOLATILITY_MAX

    out = []
    if not np.isnan(vol) and not 0 <= vol <= VOLATILITY_MAX:
        out.append(("volatility", f"must be from 0 to {VOLATILITY_MAX:g} (a decimal: 0.3 is 30%); got {vol:g}"))
    if not np.isnan(rate) and not RATE_MIN <= rate <= RATE_MAX:
        out.append(("risk_free_rate", f"must be from {RATE_MIN:g} to {RATE_MAX:g} (a decimal); got {rate:g}"))
    if not np.isnan(q) and q < 0:
        out.append(("dividend_yield", f"must be zero or more; got {q:g}"))
    return out


def _value_checks(o: pd.DataFrame, i: int, bad, ok: np.ndarray) -> None:
    """Share price, volatility, rate, yield and cap of offering row ``i``."""
    price, vol = float(o["share_price"].iat[i]), float(o["volatility"].iat[i])
    rate, q, cap = float(o["risk_free_rate"].iat[i]), float(o["dividend_yield"].iat[i]), float(o["max_shares"].iat[i])
    if np.isnan(price) or np.isnan(rate):
        ok[i] = False
    if price <= 0:
        bad(i, "share_price", f"must be above zero; got {price:g}")
    if o["lookback"].iat[i] == "yes" and np.isnan(vol):
        bad(i, "volatility", "is required for an offering with a look-back (the look-back is an option)")
    for col, msg in _input_problems(vol, rate, q):
        bad(i, col, msg)
    if not np.isnan(cap) and cap < 1:
        bad(i, "max_shares", f"must be a positive whole number; got {cap:g}")


def _enrollment_problems(e: pd.DataFrame, o: pd.DataFrame, o_ok: np.ndarray, src: str, osrc: str):
    """Row checks of the enrollments; the offering row of each (-1 when unusable).  Vectorised."""
    p: list[Problem] = []
    index = {k: i for i, k in zip(range(len(o) - 1, -1, -1), o["offering_id"].to_numpy()[::-1])}
    oid, hid = e["offering_id"].to_numpy(object), e["holder_id"].to_numpy(object)
    w = e["withholding"].to_numpy(float)
    rows = e["_row"].to_numpy()
    filled = pd.notna(oid) & pd.notna(hid) & ~np.isnan(w)  # blanks are reported by the reader
    opos = np.array([index.get(k, -1) for k in oid], dtype=np.int64)
    for r, k in zip(rows[filled & (opos < 0)], oid[filled & (opos < 0)]):
        p.append(Problem(src, int(r), "offering_id", f"{k!r} is not an offering in {osrc}"))
    neg = filled & (opos >= 0) & (w < 0)
    for r, x in zip(rows[neg], w[neg]):
        p.append(Problem(src, int(r), "withholding", f"must be zero or more (currency); got {x:g}"))
    good = filled & (opos >= 0) & ~neg
    key = pd.Series(oid.astype(str)) + "\x00" + pd.Series(hid.astype(str))
    dup = good & key.where(good).duplicated(keep="first").to_numpy()
    first = dict(zip(key[good & ~dup], rows[good & ~dup]))
    for r, k, o_, h in zip(rows[dup], key[dup], oid[dup], hid[dup]):
        p.append(Problem(src, int(r), "holder_id", f"{h!r} is already enrolled in {o_!r} (row {first.get(k)})"))
    ok = good & ~dup
    pos = np.where(ok, opos, -1)
    pos[ok] = np.where(o_ok[opos[ok]], opos[ok], -1)
    return p, pos


def _capped_withholding(o: pd.DataFrame, j: int) -> bool:
    """Offering row ``j`` is fixed-withholding with ``max_shares``: its resets and roll-overs are not supported yet.

    (Under fixed shares the cap only sets the shares counted; the value per share counted is the uncapped one.)
    """
    return not np.isnan(float(o["max_shares"].iat[j])) and o["shares_basis"].iat[j] != "fixed_shares"


def reset_problems(r: pd.DataFrame, o: pd.DataFrame, dates: list, o_ok: np.ndarray, src: str,
                   osrc: str) -> list[Problem]:
    """Row checks of the resets: a known look-back offering, a date inside it, a lower price, valid inputs."""
    p: list[Problem] = []
    index = {k: i for i, k in enumerate(o["offering_id"]) if pd.notna(k)}
    in_force: dict = {}  # offering -> (reference price in force, the reset that set it)
    order = np.lexsort((r["reset_date"].to_numpy("datetime64[D]"), r["offering_id"].astype(str).to_numpy()))
    seen: dict = {}
    for i in order:
        row, k, day = int(r["_row"].iat[i]), r["offering_id"].iat[i], r["reset_date"].iat[i]
        price, vol = float(r["share_price"].iat[i]), float(r["volatility"].iat[i])
        rate, q = float(r["risk_free_rate"].iat[i]), float(r["dividend_yield"].iat[i])
        if pd.isna(k) or pd.isna(day) or np.isnan(price):
            continue  # a blank required cell is reported by the reader
        day = np.datetime64(day, "D")
        j = index.get(k)
        if j is None:
            p.append(Problem(src, row, "offering_id", f"{k!r} is not an offering in {osrc}"))
            continue
        if not o_ok[j]:
            continue  # the offering's own row is reported
        if o["lookback"].iat[j] != "yes":
            p.append(Problem(src, row, "offering_id", f"offering {k!r} has no look-back: a reset changes the "
                             "look-back's reference price, and its purchase price already follows the share price"))
            continue
        if _capped_withholding(o, j):
            p.append(Problem(src, row, "offering_id", f"resets of a fixed-withholding offering with max_shares "
                             f"({k!r}) are not supported yet"))
            continue
        start = o["start_date"].to_numpy("datetime64[D]")[j]
        if not start < day < dates[j][-1]:
            p.append(Problem(src, row, "reset_date", f"{day} must be after the offering's start {start} and before "
                             f"its last purchase date {dates[j][-1]}"))
            continue
        if (k, day) in seen:
            p.append(Problem(src, row, "reset_date", f"offering {k!r} already resets on {day} (row {seen[k, day]})"))
            continue
        seen[k, day] = row
        ref, by = in_force.get(k, (float(o["share_price"].iat[j]), "the start price"))
        if not 0 < price < ref:
            p.append(Problem(src, row, "share_price", f"a reset lowers the reference price: {price:g} must be above "
                             f"0 and below {ref:g} ({by})"))
            continue
        in_force[k] = (price, f"the reset on {day}")
        p += [Problem(src, row, col, msg) for col, msg in _input_problems(vol, rate, q)]
    return p


def rollover_problems(o: pd.DataFrame, dates: list, o_ok: np.ndarray, src: str,
                      resets: pd.DataFrame | None) -> tuple[list[Problem], dict]:
    """Checks of ``rolls_over_from``; the valid roll-overs as ``{new offering: (old offering, date, row)}``.

    The new offering starts inside the old one (after its start, before its last purchase date); an
    offering rolls over into one offering at most; offerings with resets, and fixed-withholding
    offerings with ``max_shares``, are not supported yet as the old offering (under fixed shares the
    cap only sets the shares counted, and the value per share counted is the uncapped one).
    """
    p: list[Problem] = []
    out: dict = {}
    if "rolls_over_from" not in o or not o["rolls_over_from"].notna().any():
        return p, out
    index = {k: i for i, k in enumerate(o["offering_id"]) if pd.notna(k)}
    reset_ids = set(resets["offering_id"].dropna()) if resets is not None and len(resets) else set()
    start = o["start_date"].to_numpy("datetime64[D]")
    taken: dict = {}
    for i in np.flatnonzero(o["rolls_over_from"].notna().to_numpy()):
        row, k, own = int(o["_row"].iat[i]), o["rolls_over_from"].iat[i], o["offering_id"].iat[i]
        j = index.get(k)
        msg = None
        if k == own:
            msg = "an offering cannot roll over from itself"
        elif j is None:
            msg = f"{k!r} is not an offering in {src}"
        elif not (o_ok[i] and o_ok[j]):
            continue  # the offerings' own rows are reported
        elif not start[j] < start[i] < dates[j][-1]:
            msg = (f"the roll-over date (this offering's start, {start[i]}) must be after the start {start[j]} of "
                   f"offering {k!r} and before its last purchase date {dates[j][-1]}")
        elif k in taken:
            msg = f"offering {k!r} already rolls over into offering {taken[k]!r}"
        elif _capped_withholding(o, j) or k in reset_ids:
            msg = (f"roll-overs of an offering with resets, or of a fixed-withholding offering with max_shares "
                   f"({k!r}), are not supported yet")
        if msg is not None:
            p.append(Problem(src, row, "rolls_over_from", msg))
            continue
        taken[k] = own
        out[own] = (k, start[i], row)
    return p, out


def _assumption_rows(o: pd.DataFrame) -> pd.DataFrame:
    """One assumptions row per offering: its start-date valuation inputs."""
    no_look = (o["lookback"] == "no").to_numpy()
    vol = o["volatility"].to_numpy(float)
    return pd.DataFrame({
        "assumption_set": [f"(espp offering {k})" for k in o["offering_id"]],
        "grant_date": o["start_date"].to_numpy("datetime64[D]"),
        "share_price": o["share_price"].to_numpy(float),
        "volatility": np.where(no_look & np.isnan(vol), 0.0, vol),
        "risk_free_rate": o["risk_free_rate"].to_numpy(float),
        "dividend_yield": np.nan_to_num(o["dividend_yield"].to_numpy(float), nan=0.0),
        "expected_term_years": np.nan, "model": "bsm", "exercise_multiple": np.nan,
        "post_vest_exit_rate": np.nan, "fair_value": np.nan, "_row": o["_row"].to_numpy(),
    })


def shares_per_period(withholding, periods, discount, share_price) -> np.ndarray:
    """Shares one purchase period's withholding buys at the start purchase price (fractional)."""
    return np.asarray(withholding, float) / np.asarray(periods, float) / ((1.0 - np.asarray(discount, float))
                                                                          * np.asarray(share_price, float))


def whole_shares(exact, cap) -> np.ndarray:
    """Whole shares bought per period: rounded down (to 1e-9 of a share), at most ``cap`` (NaN: none)."""
    whole = np.floor(np.round(np.asarray(exact, float), 9))
    return np.where(np.isnan(cap), whole, np.minimum(whole, cap)).astype(np.int64)


def contribute(tables: dict, sources: dict) -> Contribution:
    """Synthesize one grant per enrollment, one tranche per purchase date (see the module docstring)."""
    o, e = tables["espp_offerings"], tables["espp_enrollments"]
    osrc, esrc = sources["espp_offerings"], sources["espp_enrollments"]
    p, dates, o_ok = _offering_problems(o, osrc)
    probs, pos = _enrollment_problems(e, o, o_ok, esrc, osrc)
    p += probs
    resets = tables.get("espp_resets")
    if resets is not None:
        p += reset_problems(resets, o, dates, o_ok, sources["espp_resets"], osrc)
    probs, rolled = rollover_problems(o, dates, o_ok, osrc, resets)
    p += probs
    keep = np.flatnonzero(pos >= 0)
    op = pos[keep]
    n_per = np.array([len(dates[i]) for i in op], dtype=np.int64)
    disc, price = o["discount"].to_numpy(float)[op], o["share_price"].to_numpy(float)[op]
    cap = o["max_shares"].to_numpy(float)[op]
    exact = shares_per_period(e["withholding"].to_numpy(float)[keep], n_per, disc, price)
    whole = whole_shares(exact, cap) if len(keep) else np.zeros(0, np.int64)
    for j in np.flatnonzero(whole < 1):
        p.append(Problem(esrc, int(e["_row"].iat[keep[j]]), "withholding",
                         f"buys no whole share in a purchase period at the start purchase price "
                         f"{(1 - disc[j]) * price[j]:.4f}; the enrollment has no cost", "warning"))
    sel = whole >= 1
    keep, op, n_per, whole, exact, disc, cap = (x[sel] for x in (keep, op, n_per, whole, exact, disc, cap))
    start = o["start_date"].to_numpy("datetime64[D]")[op]
    grants = pd.DataFrame({
        "grant_id": (pd.Series(o["offering_id"].to_numpy(object)[op].astype(str)) + "/"
                     + pd.Series(e["holder_id"].to_numpy(object)[keep].astype(str))).to_numpy(object),
        "holder_id": e["holder_id"].to_numpy(object)[keep],
        "group": np.where(e["group"].isna().to_numpy()[keep], "", e["group"].to_numpy(object)[keep]),
        "award_type": AWARD_TYPE, "grant_date": start, "quantity": (whole * n_per).astype(float),
        "exercise_price": np.nan, "expiration_date": np.datetime64("NaT", "D"), "vest_start_date": start,
        "vest_months": 0.0, "vest_every_months": 1.0, "cliff_months": 0.0, "assumption_set": None,
        "_row": e["_row"].to_numpy()[keep], "_source": esrc, "planned": False, "assumption_row": op,
        "_espp_offering": o["offering_id"].to_numpy(object)[op], "_espp_discount": disc,
        "_espp_lookback": (o["lookback"] == "yes").to_numpy()[op],
        "_espp_basis": o["shares_basis"].to_numpy(object)[op],
        "_espp_cap_ratio": cap / exact,  # max_shares / shares at the start price (NaN: no cap)
        "_espp_exact_shares": exact,
    })
    if rolled:
        from grantval.ledger.ext.espp_rollover import link_rollovers

        grants, probs = link_rollovers(grants, rolled, tables, sources)
        p += probs
    gi = np.repeat(np.arange(len(keep)), n_per)
    vest = np.concatenate([np.asarray(dates[i], "datetime64[D]") for i in op]) if len(op) else np.zeros(0, "M8[D]")
    tranches = pd.DataFrame({"grant": gi, "vest_date": vest, "quantity": np.repeat(whole, n_per)})
    known = set(o["offering_id"].dropna())
    oid, hid = e["offering_id"].to_numpy(object), e["holder_id"].to_numpy(object)
    m = pd.notna(hid) & np.isin(oid, list(known))
    named = set(pd.Series(oid[m].astype(str)) + "/" + pd.Series(hid[m].astype(str)))
    return Contribution(grants, tranches, _assumption_rows(o), p, withheld=named - set(grants["grant_id"]))


def check(parts: LedgerParts) -> list[Problem]:
    """The grants and tranches tables must not hold ESPP grants: they come from the enrollments."""
    g = parts.grants
    p: list[Problem] = []
    own = g["_source"].to_numpy() == parts.sources["espp_enrollments"]
    typed = (g["award_type"] == AWARD_TYPE).to_numpy() & ~own
    for r, s in zip(g["_row"][typed], g["_source"][typed]):
        p.append(Problem(s, int(r), "award_type", "espp grants come from the espp_enrollments table; "
                         "list the enrollment there instead"))
    t = parts.tables["tranches"]
    ids = set(g["grant_id"][own])
    for r, k in zip(t["_row"], t["grant_id"]):
        if k in ids:
            p.append(Problem(parts.sources["tranches"], int(r), "grant_id",
                             f"{k!r} is an ESPP enrollment; its tranches are its offering's purchase dates"))
    return p


EXTENSION = Extension(
    feature="employee share purchase plans",
    tables={"espp_offerings": OFFERINGS, "espp_enrollments": ENROLLMENTS, "espp_resets": RESETS},
    event_types=EVENT_TYPES,
    text_columns=frozenset({"offering_id", "purchase_dates", "rolls_over_from"}),
    check=check,
    contribute=contribute,
    changes=lambda parts, events, grant_pos, core: _event_changes(parts, events, grant_pos, core),
)


def _event_changes(parts, events, grant_pos, core):
    """``withdraw`` and ``purchase`` events (:mod:`grantval.ledger.ext.espp_events`)."""
    from grantval.ledger.ext.espp_events import changes

    return changes(parts, events, grant_pos, core)
