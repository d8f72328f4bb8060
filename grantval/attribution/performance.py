"""Cost of performance share units (awards with a non-market performance condition).

Cumulative cost through a date d, per tranche (docs/expense-rules.md):

    fair value per target unit x target units expected to vest (service estimates)
    x payout in force at d x service fraction to the vesting date in force at d

- payout in force: the ``performance`` row of the grant's condition set with the latest
  ``assessed_on`` on or before d (the probable outcome under ASC 718-10-25-20, 0 when no outcome is
  probable; the best estimate under IFRS 2.19-20); a change of payout is a cumulative catch-up in
  the period of change (ASC 718-10-35-3; IFRS 2.20);
- vesting date in force: that row's ``expected_vest_date`` where given, else the schedule's
  (IFRS 2.15(b) and IG Example 2: a vesting period that depends on a performance condition is
  re-estimated each period);
- at vesting the payout in force on the vesting date fixes the shares issued, rounded down to
  whole shares (common practice: fractions are not issued);
- unvested units cancelled without replacement: their remaining cost is recognised at the payout
  in force (as for other awards).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.attribution.inputs import CostHook
from grantval.dates import DAYS_PER_YEAR

_NONE = np.iinfo(np.int64).max


@dataclass
class HookResult:
    """Per-grant cumulative figures of the owned grants (other entries are zero)."""

    grant_cost: np.ndarray
    expected_total: np.ndarray
    unrecognised: np.ndarray
    remaining_years: np.ndarray
    n_expensed: np.ndarray | None = None   # per tranche: units expected to vest x payout


class Assessments:
    """The performance rows of each psu grant, sorted by date, looked up vectorised."""

    def __init__(self, ledger, psu: np.ndarray):
        perf = ledger.tables["performance"]
        sets = ledger.grants["condition_set"].to_numpy(dtype=object)
        rows = {k: f for k, f in perf.groupby("condition_set")} if len(perf) else {}
        g_idx, days, payout, vest = [], [], [], []
        for gi in np.flatnonzero(psu):
            f = rows[sets[gi]]
            g_idx.append(np.full(len(f), gi))
            days.append(f["assessed_on"].to_numpy("datetime64[D]").astype(np.int64))
            payout.append(f["payout"].to_numpy(float))
            v = f["expected_vest_date"].to_numpy("datetime64[D]")
            vest.append(np.where(np.isnat(v), _NONE, v.astype(np.int64)))
        cat = (lambda parts, dt: np.concatenate(parts) if parts else np.zeros(0, dtype=dt))  # noqa: E731
        g_idx, days = cat(g_idx, np.int64), cat(days, np.int64)
        order = np.lexsort((days, g_idx))
        self.grant, self.day = g_idx[order], days[order]
        self.payout, self.vest = cat(payout, float)[order], cat(vest, np.int64)[order]

    def at(self, grants: np.ndarray, days: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Payout and vesting day in force on ``days`` for ``grants`` (0 payout before the first row)."""
        payout, vest, _ = self.in_force(grants, days)
        return payout, vest

    def in_force(self, grants: np.ndarray, days: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Payout, vesting day and assessment day of the row in force on ``days`` for ``grants``
        (0, no day and no day where none is: before the first row, or no rows at all)."""
        grants = np.atleast_1d(np.asarray(grants, dtype=np.int64))
        if self.grant.size == 0:
            return np.zeros(grants.size), np.full(grants.size, _NONE), np.full(grants.size, _NONE)
        key = self.grant * (1 << 32) + self.day
        want = grants * (1 << 32) + np.asarray(days, dtype=np.int64)
        pos = np.searchsorted(key, want, side="right") - 1
        ok = (pos >= 0) & (self.grant[np.maximum(pos, 0)] == grants)
        pos = np.maximum(pos, 0)
        return (np.where(ok, self.payout[pos], 0.0), np.where(ok, self.vest[pos], _NONE),
                np.where(ok, self.day[pos], _NONE))


def _vesting(inp, A: Assessments, psu_t: np.ndarray, dn: int, Q=None):
    """Per tranche: vesting day in force at ``dn``, last day of service, whether vested, payout."""
    pre = inp.prepared()
    g_t = inp.t_grant
    as_of = dn if getattr(Q, "as_of", None) is None else min(dn, Q.as_of)
    pay_now, vest_now = A.at(g_t, np.full(len(g_t), as_of))
    vest_day = np.where(psu_t & (vest_now != _NONE), vest_now, pre.t_vest)
    retire_cap = np.where(pre.t_end < pre.t_vest, pre.t_end, _NONE)
    end = np.minimum(vest_day, retire_cap)
    vested = (vest_day <= dn) & (pre.t_gdate <= dn)
    pay_final, _ = A.at(g_t, np.minimum(vest_day, as_of))
    return vest_day, end, vested, np.where(vested, pay_final, pay_now)


def _cost(inp, A: Assessments, psu: np.ndarray, Q, dn: int, attribution: str) -> HookResult:
    from grantval.attribution.engine import _elapsed

    pre = inp.prepared()
    n_g, gi = inp.n_grants, inp.t_grant
    psu_t = psu[gi]
    _, end, vested, pay = _vesting(inp, A, psu_t, dn, Q)
    units = np.where(vested, Q.outstanding, Q.n_exp)
    shares = np.where(vested, np.floor(units * pay + 1e-9), units * pay)
    shares = np.where(psu_t, shares, 0.0)
    start = pre.l_start[: len(gi)]
    granted = pre.t_gdate <= dn
    value = inp.t_fv * shares
    if attribution == "graded":
        el = np.where(start <= dn, _elapsed(dn, start, end - start), 0.0)
        cost = np.bincount(gi, weights=value * el, minlength=n_g)
    else:
        last = np.full(n_g, np.iinfo(np.int64).min)
        np.maximum.at(last, gi, end)
        first = np.full(n_g, _NONE)
        np.minimum.at(first, gi, start)
        el_g = np.where(first <= dn, _elapsed(dn, first, last - first), 0.0)
        cost = np.maximum(np.bincount(gi, weights=value, minlength=n_g) * el_g,
                          np.bincount(gi, weights=np.where(vested, value, 0.0), minlength=n_g))
    cancel = np.bincount(gi, weights=np.where(granted & psu_t, inp.t_fv * Q.cancelled * pay, 0.0), minlength=n_g)
    expected = np.bincount(gi, weights=np.where(granted, value, 0.0), minlength=n_g) + cancel
    cost = cost + cancel
    unrec = np.where(np.bincount(gi, weights=granted, minlength=n_g) > 0, np.maximum(expected - cost, 0.0), 0.0)
    left = np.bincount(gi, weights=np.where(granted, value, 0.0) * np.maximum(end - dn, 0) / DAYS_PER_YEAR,
                       minlength=n_g)
    total_v = np.bincount(gi, weights=np.where(granted, value, 0.0), minlength=n_g)
    remaining = np.where(unrec > 0, left / np.where(total_v > 0, total_v, 1.0), 0.0)
    return HookResult(cost, expected, unrec, remaining, np.where(psu_t, shares, np.nan))


def performance_grants(ledger) -> np.ndarray:
    """Per grant: a psu whose payout follows the performance table (not a market condition, whose
    outcome is in the fair value and whose cost is recognised whether or not it is met)."""
    from grantval.ledger.ext.market import market_grants

    psu = ledger.grants["award_type"].to_numpy() == "psu"
    return psu & ~market_grants(ledger.grants, ledger.tables)


def build_hook(ledger, fair_values, inp) -> CostHook | None:
    """The cost hook of the ledger's psu grants with a performance condition (None when it has none)."""
    psu = performance_grants(ledger)
    if not psu.any():
        return None
    A = Assessments(ledger, psu)

    def cost(inp_, Q, dn, attribution):
        return _cost(inp_, A, psu, Q, dn, attribution)

    return CostHook(grants=psu, cost=cost, state=A)
