"""Ledger extension: modifications of awards (repricing, extended terms, accelerated vesting, reductions).

Adds the table ``modifications``: ``grant_id``, ``modification_date`` and the new terms, blank where
unchanged (``exercise_price``, ``expiration_date``, ``quantity``, ``vest_months``,
``vest_every_months``, ``cliff_months``, ``accelerate``); the valuation inputs on the modification
date (``assumption_set``) or an outside valuation (``fair_value_before`` and ``fair_value_after``, per
unit); ``original_expected_to_vest`` (``yes``/``no``, default ``yes``).  Adds the grant column
``replaces_grant_id``: a cancellation with replacement (ASC 718-20-35-8; IFRS 2.28(c)): every unit of
the replaced grant outstanding on the replacement's grant date is cancelled on that date, and the
pair is accounted for as a modification (see :mod:`grantval.attribution.modifications`).

Terms in force (used to allocate events, see :func:`adjust`):

- a new ``expiration_date`` is in force from the modification date: events up to it are accepted;
- ``accelerate`` = ``yes``: every tranche not vested on the modification date vests on it;
- ``vest_months``, ``vest_every_months``, ``cliff_months`` (blank: the grant's in force): a new vesting
  schedule from the grant's ``vest_start_date`` for the grant's quantity, generated like the grant's
  own (:func:`grantval.ledger.schedule.generate_tranches`); each tranche not vested on the modification
  date takes the new vesting date of its units (units in vesting order), on the modification date at
  the earliest; a tranche whose units would vest on two dates under the new schedule is cut into
  pieces from the grant date on (:mod:`grantval.ledger.ext.tranche_split`); tranches vested by then
  are unchanged;
- ``quantity`` is the number of units outstanding after the modification (exercised, expired,
  forfeited and cancelled units not counted); a smaller number cancels the difference on the
  modification date, latest-vesting units first, like a ``cancel`` event (IFRS 2 B44(b): a partial
  cancellation); a larger number adds units, a grant of their own (:mod:`grantval.ledger.ext.added_units`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Adjustment, Extension, LedgerParts, rows_where

MODIFICATIONS = (
    Column("grant_id", "text", required=True),
    Column("modification_date", "date", required=True),
    Column("exercise_price", "number"),
    Column("expiration_date", "date"),
    Column("quantity", "integer"),
    Column("vest_months", "integer"),
    Column("vest_every_months", "integer"),
    Column("cliff_months", "integer"),
    Column("accelerate", "choice", choices=("yes", "no"), default="no"),
    Column("assumption_set", "text"),
    Column("fair_value_before", "number"),
    Column("fair_value_after", "number"),
    Column("original_expected_to_vest", "choice", choices=("yes", "no"), default="yes"),
)

GRANT_COLUMNS = (Column("replaces_grant_id", "text"),)

#: the schedule columns of a modification (blank: the grant's in force)
SCHEDULE = ("vest_months", "vest_every_months", "cliff_months")


@dataclass
class Terms:
    """Per modification (rows of :func:`ordered`): the terms in force immediately before and after it.

    Strikes are currency per share (NaN for units); dates ``datetime64[D]``; ``accel_before`` is the
    earliest earlier acceleration date of the grant (NaT where none).
    """

    order: np.ndarray          # rows of the modifications table, by grant then date
    gp: np.ndarray             # grant position
    date: np.ndarray
    rank: np.ndarray           # 0 for a grant's first modification, 1 for its second ...
    strike_before: np.ndarray
    strike_after: np.ndarray
    expiry_before: np.ndarray
    expiry_after: np.ndarray
    accel_before: np.ndarray
    accelerate: np.ndarray     # bool
    #: per modification: a new vesting schedule is given (any of :data:`SCHEDULE`)
    reschedule: np.ndarray | None = None
    #: per modification: the schedule in force before and after, months (columns of :data:`SCHEDULE`)
    schedule_before: np.ndarray | None = None
    schedule_after: np.ndarray | None = None


def grant_positions(grants: pd.DataFrame, mods: pd.DataFrame) -> np.ndarray:
    """Position in ``grants`` of each modification's grant (-1 when unknown)."""
    index = {k: i for i, k in enumerate(grants["grant_id"].to_numpy(dtype=object))}
    return np.array([index.get(k, -1) for k in mods["grant_id"].to_numpy(dtype=object)], dtype=np.int64)


def _carry(values: np.ndarray, start: np.ndarray, new_group: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Values in force before and after each row: the last non-missing value so far in its group, else ``start``."""
    after = pd.Series(values).groupby(np.cumsum(new_group)).ffill().to_numpy()
    missing = pd.isna(after)
    after = np.where(missing, start, after)
    before = np.where(new_group, start, np.roll(after, 1))
    return before, after


def terms(grants: pd.DataFrame, mods: pd.DataFrame) -> Terms:
    """The terms in force around every modification whose grant is known (vectorised over rows)."""
    gp_all = grant_positions(grants, mods)
    date_all = mods["modification_date"].to_numpy("datetime64[D]")
    keep = np.flatnonzero((gp_all >= 0) & ~np.isnat(date_all))
    order = keep[np.lexsort((date_all[keep], gp_all[keep]))]
    gp, date = gp_all[order], date_all[order]
    new_group = np.r_[True, gp[1:] != gp[:-1]] if len(gp) else np.zeros(0, dtype=bool)
    group_start = np.maximum.accumulate(np.where(new_group, np.arange(len(gp)), 0)) if len(gp) else gp
    rank = np.arange(len(gp)) - group_start
    strike_b, strike_a = _carry(mods["exercise_price"].to_numpy(float)[order],
                                grants["exercise_price"].to_numpy(float)[gp], new_group)
    exp_new = mods["expiration_date"].to_numpy("datetime64[D]")[order]
    exp_grant = grants["expiration_date"].to_numpy("datetime64[D]")[gp].astype(object)
    exp_b, exp_a = _carry(exp_new.astype(object), exp_grant, new_group)
    acc = (mods["accelerate"].to_numpy(dtype=object)[order] == "yes")
    acc_day = np.where(acc, date, np.datetime64("NaT"))
    acc_b, _ = _carry(acc_day.astype(object), np.full(len(gp), None, dtype=object), new_group)
    as_day = lambda a: pd.to_datetime(pd.Series(a, dtype=object)).to_numpy("datetime64[D]")  # noqa: E731
    sb, sa, resched = _schedules(grants, mods, order, gp, new_group)
    return Terms(order, gp, date, rank, strike_b.astype(float), strike_a.astype(float), as_day(exp_b), as_day(exp_a),
                 as_day(acc_b), acc, resched, sb, sa)


def _schedules(grants: pd.DataFrame, mods: pd.DataFrame, order, gp, new_group):
    """Per modification: the schedule months in force before and after (n x 3) and whether one is given."""
    n = len(order)
    before, after = np.zeros((n, 3)), np.zeros((n, 3))
    given = np.zeros(n, dtype=bool)
    for k, col in enumerate(SCHEDULE):
        new = mods[col].to_numpy(float)[order] if col in mods else np.full(n, np.nan)
        b, a = _carry(new, grants[col].to_numpy(float)[gp], new_group)
        before[:, k], after[:, k] = b.astype(float), a.astype(float)
        given |= ~np.isnan(new)
    return before, after, given


@dataclass
class Vesting:
    """Vesting dates around every modification, per (modification, tranche) pair.

    Pairs are every tranche of each modification's grant, modifications in :func:`terms` order.
    ``scheduled`` is the tranche's date under the modification's new schedule (NaT where it gives
    none); ``split`` marks an unvested tranche whose units would vest on two dates under it.
    """

    terms: Terms
    p_mod: np.ndarray
    p_tranche: np.ndarray
    vest_before: np.ndarray
    vest_after: np.ndarray
    scheduled: np.ndarray
    scheduled_first: np.ndarray
    split: np.ndarray
    final: np.ndarray          # per tranche: vest date after every modification


def pairs(tranches: pd.DataFrame, gp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(modification, tranche) pairs: every tranche of the grant ``gp[i]`` of each modification ``i``."""
    gi = tranches["grant_idx"].to_numpy()
    starts = np.searchsorted(gi, gp, side="left")
    ends = np.searchsorted(gi, gp, side="right")
    p_mod = np.repeat(np.arange(len(gp)), ends - starts)
    p_tr = np.concatenate([np.arange(s, e) for s, e in zip(starts, ends)]) if len(gp) else np.zeros(0, np.int64)
    return p_mod, p_tr.astype(np.int64)


@dataclass
class NewSchedules:
    """The new schedules of some modifications, generated like grants' own, with the ledger's units.

    Units are counted in vesting order within each grant: ledger tranche ``i`` holds units
    ``(lo[i], hi[i]]``; new tranche ``n`` of schedule ``s`` ends at unit ``cum[n]`` and vests on
    ``date[n]``.  ``key = s * width + cum`` is sorted, for ``searchsorted`` by (schedule, unit).
    """

    which: np.ndarray   # per modification: its schedule's position (-1: not among them)
    key: np.ndarray
    width: np.int64
    cum: np.ndarray
    date: np.ndarray
    lo: np.ndarray
    hi: np.ndarray


def new_schedules(grants, tranches, t: Terms, mods: np.ndarray) -> NewSchedules:
    """The new schedules of modifications ``mods`` (positions in ``t``), for the grants' quantities granted."""
    from grantval.ledger.schedule import generate_tranches

    g = grants.iloc[t.gp[mods]]
    granted = np.bincount(tranches["grant_idx"].to_numpy(), weights=tranches["quantity"].to_numpy(float),
                          minlength=len(grants))[t.gp[mods]]
    pseudo = pd.DataFrame({"quantity": np.round(granted).astype(np.int64),
                           "vest_start_date": g["vest_start_date"].to_numpy("datetime64[D]"),
                           **{c: t.schedule_after[mods, k].astype(np.int64) for k, c in enumerate(SCHEDULE)}})
    new = generate_tranches(pseudo)
    n_gi = new["grant_idx"].to_numpy(np.int64)
    cum = _cum_within(n_gi, new["quantity"].to_numpy(np.int64))
    q = tranches["quantity"].to_numpy(np.int64)
    hi = _cum_within(tranches["grant_idx"].to_numpy(), q)
    which = np.full(len(t.gp), -1, dtype=np.int64)
    which[mods] = np.arange(len(mods))
    width = np.int64(max(int(cum.max(initial=0)), int(hi.max(initial=0))) + 2)
    return NewSchedules(which, n_gi * width + cum, width, cum, new["vest_date"].to_numpy("datetime64[D]"), hi - q, hi)


def _scheduled_dates(grants, tranches, t: Terms, p_mod, p_tr):
    """Per pair: the vesting date of the tranche's first and last unit under the modification's new schedule."""
    first = np.full(len(p_mod), np.datetime64("NaT"), dtype="datetime64[D]")
    last = first.copy()
    mods = np.flatnonzero(t.reschedule) if t.reschedule is not None else np.zeros(0, np.int64)
    if not len(mods):
        return first, last
    ns = new_schedules(grants, tranches, t, mods)
    m = ns.which[p_mod] >= 0
    k = ns.which[p_mod][m]
    pos_first = np.searchsorted(ns.key, k * ns.width + ns.lo[p_tr][m] + 1, side="left")
    pos_last = np.searchsorted(ns.key, k * ns.width + ns.hi[p_tr][m], side="left")
    d = ns.date
    pos_first, pos_last = np.minimum(pos_first, len(d) - 1), np.minimum(pos_last, len(d) - 1)
    first[m], last[m] = d[pos_first], d[pos_last]
    return first, last


def _cum_within(group: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Cumulative sums of ``q`` within runs of equal ``group`` (rows sorted by group)."""
    if not len(q):
        return np.zeros(0, dtype=np.int64)
    cs = np.cumsum(q)
    new = np.r_[True, group[1:] != group[:-1]]
    starts = np.flatnonzero(new)
    return cs - np.repeat((cs - q)[starts], np.diff(np.r_[starts, len(q)]))


def vesting(grants: pd.DataFrame, tranches: pd.DataFrame, mods: pd.DataFrame, t: Terms | None = None) -> Vesting:
    """Vesting dates before and after each modification (accelerations and new schedules, in date order)."""
    t = terms(grants, mods) if t is None else t
    p_mod, p_tr = pairs(tranches, t.gp)
    current = tranches["vest_date"].to_numpy("datetime64[D]").copy()
    vb = np.full(len(p_mod), np.datetime64("NaT"), dtype="datetime64[D]")
    va = vb.copy()
    first, last = _scheduled_dates(grants, tranches, t, p_mod, p_tr)
    day = t.date[p_mod]
    for rank in np.unique(t.rank):
        m = t.rank[p_mod] == rank
        b = current[p_tr[m]]
        a = np.where(~np.isnat(last[m]) & (b > day[m]), np.maximum(last[m], day[m]), b)
        a = np.where(t.accelerate[p_mod[m]] & (a > day[m]), day[m], a)
        vb[m], va[m] = b, a
        current[p_tr[m]] = a
    split = ~np.isnat(first) & (first != last) & (vb > day) & (np.maximum(first, day) != np.maximum(last, day))
    return Vesting(t, p_mod, p_tr, vb, va, last, first, split, current)


def vest_in_force(tranches: pd.DataFrame, grants: pd.DataFrame, mods: pd.DataFrame) -> np.ndarray:
    """Per tranche: its vest date after every modification (accelerations and new schedules)."""
    if not len(mods):
        return tranches["vest_date"].to_numpy("datetime64[D]").copy()
    return vesting(grants, tranches, mods).final


def _row_problems(m: pd.DataFrame, g: pd.DataFrame, a: pd.DataFrame, src: str) -> list[Problem]:
    """Checks of each modification row against its grant and the assumptions."""
    p: list[Problem] = []
    gp = grant_positions(g, m)
    for r, k in zip(rows_where(m, gp < 0), m["grant_id"][gp < 0]):
        if k is not None:
            p.append(Problem(src, r, "grant_id", f"{k!r} is not a grant in the grants table"))
    known = gp >= 0
    d = m["modification_date"].to_numpy("datetime64[D]")
    gd = np.where(known, g["grant_date"].to_numpy("datetime64[D]")[np.maximum(gp, 0)], np.datetime64("NaT"))
    for r, x, y in zip(rows_where(m, known & (d < gd)), d[known & (d < gd)], gd[known & (d < gd)]):
        p.append(Problem(src, r, "modification_date", f"{x} is before the grant date {y}"))
    new_exp = m["expiration_date"].to_numpy("datetime64[D]")
    bad = ~np.isnat(new_exp) & (new_exp <= d)
    for r in rows_where(m, bad):
        p.append(Problem(src, r, "expiration_date", "the new expiration date is not after the modification date"))
    before, after = m["fair_value_before"].notna().to_numpy(), m["fair_value_after"].notna().to_numpy()
    for r in rows_where(m, before & ~after):
        p.append(Problem(src, r, "fair_value_after", "is required when fair_value_before is given (per-unit values "
                         "of the modified award and of the original award immediately before)"))
    for r in rows_where(m, after & ~before):
        p.append(Problem(src, r, "fair_value_before", "is required when fair_value_after is given"))
    for col in ("fair_value_before", "fair_value_after"):
        v = m[col].to_numpy(float)
        for r in rows_where(m, ~np.isnan(v) & (v < 0)):
            p.append(Problem(src, r, col, "must be zero or more (currency per unit)"))
    aset = m["assumption_set"].to_numpy(dtype=object)
    names = set(a["assumption_set"].dropna())
    has_set = m["assumption_set"].notna().to_numpy()
    unknown = has_set & ~m["assumption_set"].isin(names).to_numpy()
    for r, k in zip(rows_where(m, unknown), aset[unknown]):
        p.append(Problem(src, r, "assumption_set", f"{k!r} is not an assumption_set of the assumptions table"))
    for r in rows_where(m, has_set & before):
        p.append(Problem(src, r, "assumption_set", "give either an assumption_set or fair_value_before and "
                         "fair_value_after, not both"))
    for r in rows_where(m, ~has_set & ~before & ~after):
        p.append(Problem(src, r, "assumption_set", "is required (the valuation inputs on the modification date), "
                         "or give fair_value_before and fair_value_after from an outside valuation"))
    dup = m[["grant_id", "modification_date"]].astype(str).duplicated().to_numpy() & known
    for r in rows_where(m, dup):
        p.append(Problem(src, r, "modification_date", "the grant already has a modification on this date: give "
                         "all the changes of one date in one row"))
    return p + _kind_problems(m, g, gp, src)


def _kind_problems(m: pd.DataFrame, g: pd.DataFrame, gp: np.ndarray, src: str) -> list[Problem]:
    """Terms that do not apply to the award, and changes not supported yet."""
    from grantval.awards.registry import flag

    p: list[Problem] = []
    known = gp >= 0
    award = np.where(known, g["award_type"].to_numpy(dtype=object)[np.maximum(gp, 0)], "")
    options = np.zeros(len(m), dtype=bool)
    options[known] = flag(award[known], "option_terms")
    for col in ("exercise_price", "expiration_date"):
        for r in rows_where(m, known & ~options & m[col].notna().to_numpy()):
            p.append(Problem(src, r, col, "only options have an exercise price and an expiration date"))
    for r in rows_where(m, known & ~np.isin(award, ("option", "rsu"))):
        p.append(Problem(src, r, "grant_id", "modifications of this award type are not supported yet "
                         "(options and RSUs only)"))
    cond = np.zeros(len(m), dtype=bool)  # an option's condition_set can only be a market condition
    if "condition_set" in g:
        cond[known] = g["condition_set"].notna().to_numpy()[gp[known]]
    for r in rows_where(m, known & options & cond):
        p.append(Problem(src, r, "grant_id", "modifications of an option with a market condition are not supported "
                         "yet (its values before and after need the Monte Carlo valuation)"))
    q = m["quantity"].to_numpy(float)
    for r in rows_where(m, ~np.isnan(q) & (q < 0)):
        p.append(Problem(src, r, "quantity", "must be zero or more (units outstanding after the modification)"))
    return p


def replacements(grants: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Positions of the replacement grants and of the grants they replace (known ids only)."""
    if "replaces_grant_id" not in grants:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    rep = grants["replaces_grant_id"].to_numpy(dtype=object)
    given = np.flatnonzero(pd.notna(rep))
    if not given.size:  # the common case: no replacements (skip the per-grant index)
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    index = {k: i for i, k in enumerate(grants["grant_id"].to_numpy(dtype=object))}
    new = [i for i in given if rep[i] in index and index[rep[i]] != i]
    return np.array(new, dtype=np.int64), np.array([index[rep[i]] for i in new], dtype=np.int64)


def _grant_column_problems(g: pd.DataFrame, src: str) -> list[Problem]:
    """Checks of ``replaces_grant_id``: a known, other grant, replaced once, on a date it is in force."""
    if "replaces_grant_id" not in g:
        return []
    p: list[Problem] = []
    rep = g["replaces_grant_id"].to_numpy(dtype=object)
    given = np.flatnonzero(pd.notna(rep))
    if not given.size:  # the common case: no replacements
        return p
    own_ids = g["grant_id"].to_numpy(dtype=object)
    ids = set(own_ids)
    for r, k, own in zip(g["_row"].to_numpy()[given], rep[given], own_ids[given]):
        if k == own:
            p.append(Problem(src, int(r), "replaces_grant_id", "a grant cannot replace itself"))
        elif k not in ids:
            p.append(Problem(src, int(r), "replaces_grant_id", f"{k!r} is not a grant in the grants table"))
    new, old = replacements(g)
    seen: dict = {}
    gd = g["grant_date"].to_numpy("datetime64[D]")
    ex = g["expiration_date"].to_numpy("datetime64[D]")
    award = g["award_type"].to_numpy(dtype=object)
    for n, o in zip(new, old):
        row = int(g["_row"].iloc[n])
        if o in seen:
            p.append(Problem(src, row, "replaces_grant_id", f"grant {g['grant_id'].iloc[o]} is already replaced "
                             f"by grant {g['grant_id'].iloc[seen[o]]}"))
        seen[o] = n
        if gd[n] < gd[o]:
            p.append(Problem(src, row, "replaces_grant_id", f"the replacement's grant date {gd[n]} is before the "
                             f"grant date {gd[o]} of the grant it replaces"))
        if not np.isnat(ex[o]) and gd[n] > ex[o]:
            p.append(Problem(src, row, "replaces_grant_id", f"the grant it replaces expired on {ex[o]}"))
        rollover = award[n] == award[o] == "espp"  # set by the purchase plans' roll-overs
        if not rollover and (award[n] not in ("option", "rsu") or award[o] not in ("option", "rsu")):
            p.append(Problem(src, row, "replaces_grant_id", "replacements of this award type are not supported "
                             "yet (options and RSUs only)"))
    return p


def _live_at(parts: LedgerParts, changes: pd.DataFrame, gp: np.ndarray, d: np.ndarray) -> np.ndarray:
    """Units of each grant ``gp`` outstanding (not exercised, expired, forfeited or cancelled) after day ``d``."""
    from grantval.ledger.ext._cumulative import sum_through

    tr = parts.tranches
    granted = np.bincount(tr["grant_idx"].to_numpy(), weights=tr["quantity"].to_numpy(float),
                          minlength=len(parts.grants))
    out = granted[gp].copy()
    if len(changes):
        c_grant = tr["grant_idx"].to_numpy()[changes["tranche_idx"].to_numpy()]
        out -= sum_through(c_grant, changes["date"].to_numpy("datetime64[D]"), changes["quantity"].to_numpy(float),
                           gp, d)
    return out


def _ended(parts: LedgerParts, t: Terms, live: np.ndarray, src: str, rows: np.ndarray) -> list[Problem]:
    """A modification after the grant has ended (expired, or no unit left)."""
    p = []
    past = ~np.isnat(t.expiry_before) & (t.date > t.expiry_before)
    for r, e in zip(rows[past], t.expiry_before[past]):
        p.append(Problem(src, int(r), "modification_date", f"is after the grant's expiration date {e} in force "
                         "then: an award that has ended cannot be modified"))
    for r in rows[~past & (live <= 0)]:
        p.append(Problem(src, int(r), "modification_date", "no unit of the grant is outstanding on this date "
                         "(all exercised, expired, forfeited or cancelled): the grant has ended"))
    return p


def schedule_fault(months: float, every: float, cliff: float) -> tuple[str, str] | None:
    """(column, message) where a schedule in force breaks the grants table's rules, else None."""
    if months < 0:
        return "vest_months", f"must be zero or more; got {months:g}"
    if months > 1200:
        return "vest_months", f"{months:g} months is more than 100 years"
    if every < 1:
        return "vest_every_months", f"must be at least 1; got {every:g}"
    if months % every:
        return "vest_months", f"{months:g} is not a multiple of vest_every_months ({every:g}, in force)"
    if cliff < 0 or cliff > months:
        return "cliff_months", f"{cliff:g} must be from 0 to vest_months ({months:g}, in force)"
    return None


def _schedule_problems(t: Terms, v: Vesting, tranches: pd.DataFrame, src: str, rows: np.ndarray) -> list[Problem]:
    """A new schedule that is not one (as the grants table's checks), or a tranche still split after cutting."""
    p: list[Problem] = []
    bad = np.zeros(len(t.gp), dtype=bool)
    for i in np.flatnonzero(t.reschedule):
        fault = schedule_fault(*t.schedule_after[i])
        if fault is not None:
            bad[i] = True
            p.append(Problem(src, int(rows[i]), *fault))
    number = tranches["tranche"].to_numpy() if "tranche" in tranches else np.zeros(len(tranches), np.int64)
    qty = tranches["quantity"].to_numpy(np.int64)
    for j in np.flatnonzero(v.split):
        i, tr = v.p_mod[j], v.p_tranche[j]
        if bad[i]:
            continue
        sched = ", ".join(f"{c} {int(t.schedule_after[i, k])}" for k, c in enumerate(SCHEDULE))
        p.append(Problem(src, int(rows[i]), "vest_months", f"the new schedule ({sched}) would vest the "
                         f"{qty[tr]} units of tranche {int(number[tr])} on two dates ({v.scheduled_first[j]} and "
                         f"{v.scheduled[j]}) after the tranche was cut at this and the grant's other new schedules "
                         "(too many schedule changes of one grant): cancel the grant and replace it"))
    return p


def _reductions(t: Terms, new_qty: np.ndarray, live: np.ndarray, src: str, rows: np.ndarray, grants: pd.DataFrame):
    """Cancel events for reductions in quantity; the added units' grant checked for increases."""
    from grantval.ledger.ext.added_units import child_id

    p, ev = [], []
    added = _added_units(grants)
    for i in np.flatnonzero(~np.isnan(new_qty) & (new_qty >= 0)):  # a negative quantity is reported by the checks
        if new_qty[i] > live[i] and live[i] > 0:
            if grants["award_type"].iat[t.gp[i]] not in ("option", "rsu"):
                continue  # the award type is refused on its own (_kind_problems): nothing more to say
            kid = child_id(grants["grant_id"].iat[t.gp[i]], t.date[i])
            got = added.get(kid)
            if got is None:
                p.append(Problem(src, int(rows[i]), "quantity", f"the {int(new_qty[i] - live[i])} units added need "
                                 "valuation inputs on the modification date: an assumption_set of the assumptions "
                                 "table, or fair_value_after"))
            elif got != new_qty[i] - live[i]:
                p.append(Problem(src, int(rows[i]), "quantity", f"{int(new_qty[i])} units after the modification "
                                 f"add {int(new_qty[i] - live[i])} to the {int(live[i])} outstanding, but grant "
                                 f"{kid} holds {0 if got is None else int(got)}: report this"))
        elif new_qty[i] < live[i] and live[i] > 0:
            ev.append((i, int(live[i] - new_qty[i])))
    return ev, p


def _added_units(grants: pd.DataFrame) -> dict:
    """Units of every added-units grant (see :mod:`grantval.ledger.ext.added_units`), by grant id."""
    if "_added_to" not in grants:
        return {}
    kids = grants[grants["_added_to"].notna()]
    return dict(zip(kids["grant_id"], kids["quantity"].to_numpy(float)))


def _later_without_children(t: Terms, grants: pd.DataFrame, src: str, rows: np.ndarray) -> list[Problem]:
    """A modification of a grant after an increase, not given for the added units' grant (a warning)."""
    if "_added_to" not in grants:
        return []
    kids = grants[grants["_added_to"].notna()]
    ids = grants["grant_id"].to_numpy(dtype=object)[t.gp]
    given = set(zip(ids, t.date))
    by_parent: dict = {}
    for kid, parent, day in zip(kids["grant_id"], kids["_added_to"], kids["_added_on"].to_numpy("datetime64[D]")):
        by_parent.setdefault(parent, []).append((kid, day))
    p = []
    for i, (gid, d) in enumerate(zip(ids, t.date)):
        for kid, day in by_parent.get(gid, ()):
            if d > day and (kid, d) not in given:
                p.append(Problem(src, int(rows[i]), "grant_id", f"the units added on {day} are grant {kid}: this "
                                 "modification does not change them unless a row gives it for that grant too",
                                 "warning"))
    return p


def _replacement_cancels(parts: LedgerParts) -> pd.DataFrame:
    """A ``cancel`` of every unit of a replaced grant outstanding on the replacement's grant date."""
    g = parts.grants
    new, old = replacements(g)
    new, old = new[parts.schedule_ok[old]], old[parts.schedule_ok[old]]
    return pd.DataFrame({
        "grant_id": g["grant_id"].to_numpy(dtype=object)[old],
        "event_date": g["grant_date"].to_numpy("datetime64[D]")[new],
        "event_type": ["cancel"] * len(new), "quantity": [np.nan] * len(new), "share_price": [np.nan] * len(new),
        "_row": g["_row"].to_numpy()[new].astype(np.int64), "_source": [parts.sources["grants"]] * len(new),
        "_replaced_by": g["grant_id"].to_numpy(dtype=object)[new]})


def adjust(parts: LedgerParts) -> Adjustment | None:
    """The terms in force after the modifications, and the cancellations of reduced quantities, for events."""
    m = parts.tables["modifications"]
    if not len(m):
        extra = _replacement_cancels(parts)
        if not len(extra):
            return None
        events = pd.concat([parts.tables["events"].assign(_source=parts.sources["events"]), extra],
                           ignore_index=True)
        return Adjustment(grants=parts.grants, tranches=parts.tranches, events=events)
    src, g = parts.sources["modifications"], parts.grants
    t = terms(g, m)
    ok = parts.schedule_ok[t.gp]
    t = Terms(*(getattr(t, f)[ok] for f in Terms.__dataclass_fields__))
    rows = m["_row"].to_numpy()[t.order]
    live = _live_at(parts, parts.changes, t.gp, t.date)
    problems = _ended(parts, t, live, src, rows)
    ev, probs = _reductions(t, m["quantity"].to_numpy(float)[t.order], live, src, rows, g)
    problems += probs + _later_without_children(t, g, src, rows)
    v = vesting(g, parts.tranches, m, t)
    problems += _schedule_problems(t, v, parts.tranches, src, rows)
    grants = g.copy()
    last = {}
    for gp, e in zip(t.gp, t.expiry_after):
        last[gp] = e
    exp = grants["expiration_date"].to_numpy("datetime64[D]").copy()
    for gp, e in last.items():
        exp[gp] = e
    grants["expiration_date"] = exp
    tranches = parts.tranches.copy()
    tranches["vest_date"] = v.final
    events = parts.tables["events"]
    extra = pd.DataFrame({
        "grant_id": [g["grant_id"].iloc[t.gp[i]] for i, _ in ev],
        "event_date": np.array([t.date[i] for i, _ in ev], dtype="datetime64[D]"),
        "event_type": ["cancel"] * len(ev), "quantity": [float(q) for _, q in ev],
        "share_price": [np.nan] * len(ev), "_row": [int(rows[i]) for i, _ in ev], "_source": [src] * len(ev)})
    from grantval.ledger.ext.added_units import mirrored_events

    mirrored = mirrored_events(g, events.assign(_source=parts.sources["events"]), parts.sources["events"])
    extra = pd.concat([x for x in (extra, _replacement_cancels(parts), mirrored) if len(x)] or [extra],
                      ignore_index=True)
    if len(extra):
        events = pd.concat([events.assign(_source=parts.sources["events"]), extra], ignore_index=True)
    return Adjustment(grants=grants, tranches=tranches, events=events, problems=problems)


def check(parts: LedgerParts) -> list[Problem]:
    """Row checks of the modifications table and of ``replaces_grant_id``."""
    m = parts.tables["modifications"]
    p = _grant_column_problems(parts.grants, parts.sources["grants"])
    if len(m):
        p += _row_problems(m, parts.grants, parts.tables["assumptions"], parts.sources["modifications"])
    new, old = replacements(parts.grants)
    if len(new) and parts.changes is not None:
        ok = parts.schedule_ok[old]
        day = parts.grants["grant_date"].to_numpy("datetime64[D]")[new[ok]] - np.timedelta64(1, "D")
        live = _live_at(parts, parts.changes, old[ok], day)
        for n, o in zip(new[ok][live <= 0], old[ok][live <= 0]):
            p.append(Problem(parts.sources["grants"], int(parts.grants["_row"].iloc[n]), "replaces_grant_id",
                             f"grant {parts.grants['grant_id'].iloc[o]} has no unit outstanding on the "
                             "replacement's grant date"))
    return p


EXTENSION = Extension(
    feature="modifications",
    tables={"modifications": MODIFICATIONS},
    grant_columns=GRANT_COLUMNS,
    text_columns=frozenset({"replaces_grant_id"}),
    check=check,
    adjust=adjust,
    contribute=lambda tables, sources: _contribute(tables, sources),
    vest_dates=lambda grants, tables, tranches: _split_tranches(grants, tables, tranches),
)


def _split_tranches(grants: pd.DataFrame, tables: dict, tranches: pd.DataFrame) -> pd.DataFrame:
    from grantval.ledger.ext.tranche_split import split_tranches

    return split_tranches(grants, tables, tranches)


def _contribute(tables: dict, sources: dict):
    from grantval.ledger.ext.added_units import contribute

    return contribute(tables, sources)
