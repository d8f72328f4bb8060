"""Cumulative stock-compensation cost at a measurement date, vectorised over tranches.

Rules (see docs/expense-rules.md for the standards' paragraphs):

- service period of a tranche: grant date to vest date; through a date d the
  fraction elapsed is (d + 1 day - grant date) / (vest date - grant date),
  capped at 1; a tranche vesting on or before its grant date is fully
  expensed on the grant date;
- graded attribution: cost_i(d) = FV_i x N_i(d) x elapsed_i(d);
- straight-line: cost(d) = (sum_i FV_i N_i(d)) x elapsed of the last tranche,
  never less than the fair value of the tranches vested by d;
- N_i(d) under as-occur: the outstanding quantity (granted less forfeited and
  cancelled by d; vested tranches keep their vested quantity); under
  estimate: for unvested tranches the expected-to-vest quantity from the
  estimate in force at d, trued up to the actual quantity at vesting;
- cancellation of unvested options without replacement: their remaining
  cost is recognised at the cancel date (they count at full fair value).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from grantval.dates import DAYS_PER_YEAR
from grantval.attribution.inputs import ExpenseInputs

DAY = np.timedelta64(1, "D")
#: days per year for the remaining time of an annual forfeiture rate
RATE_YEAR_DAYS = 365.0


@dataclass
class Measurement:
    """Per-tranche and per-grant quantities and costs at one date."""

    n_expensed: np.ndarray      # per tranche: N_i(d)
    outstanding: np.ndarray     # per tranche: granted - forfeited - cancelled(unvested) by d
    cancelled: np.ndarray       # per tranche: unvested quantity cancelled by d
    elapsed: np.ndarray         # per tranche
    vested: np.ndarray          # per tranche: bool
    grant_cost: np.ndarray      # per grant: cumulative cost
    expected_total: np.ndarray  # per grant: total cost expected at d's estimates (full service)
    unrecognised: np.ndarray    # per grant: expected_total - grant_cost (0 before the grant date)
    remaining_years: np.ndarray  # per grant: weighted-average remaining recognition period, years
    #: per layer: units forfeited after the layer's own end whose cost it keeps (see CostLayers.kept)
    layer_kept: np.ndarray | None = None


def _elapsed(served_through: int, start: np.ndarray, length: np.ndarray) -> np.ndarray:
    """Fraction served through day number ``served_through`` of periods [start, start + length)."""
    served = served_through + 1 - start
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(length > 0, served / np.where(length > 0, length, 1), np.where(served > 0, 1.0, 0.0))
    return np.clip(frac, 0.0, 1.0)


def elapsed_fraction(d, start, end) -> np.ndarray:
    """Service fraction through ``d`` (inclusive) of periods from ``start`` to ``end`` (dates)."""
    s = np.asarray(start, dtype="datetime64[D]").astype(np.int64)
    e = np.asarray(end, dtype="datetime64[D]").astype(np.int64)
    return _elapsed(int(np.datetime64(d, "D").astype(np.int64)), s, e - s)


def estimates_at(inp: ExpenseInputs, d) -> tuple[np.ndarray, np.ndarray]:
    """Annual forfeiture rate and expected vest fraction in force at ``d`` for each grant.

    The most specific estimate (grant, then group, then ``*``) with the latest
    effective date on or before ``d`` applies; NaN where none does.
    """
    pre = inp.prepared()
    dn = int(np.datetime64(d, "D").astype(np.int64))
    n = inp.n_grants
    rate = np.full(n, np.nan)
    frac = np.full(n, np.nan)
    if len(pre.est_keys):
        # the row in force for each key: latest effective date on or before d (later rows win ties)
        active = np.full(len(pre.est_keys), -1, dtype=np.int64)
        best = np.full(len(pre.est_keys), np.iinfo(np.int64).min)
        for j in np.flatnonzero(pre.est_eff <= dn):
            k = pre.est_key[j]
            if k >= 0 and pre.est_eff[j] >= best[k]:
                best[k], active[k] = pre.est_eff[j], j
        pick = lambda codes: np.where(codes >= 0, active[np.maximum(codes, 0)], -1)  # noqa: E731
        found = pick(pre.code_grant)
        found = np.where(found < 0, pick(pre.code_group), found)
        if pre.code_star >= 0:
            found = np.where(found < 0, active[pre.code_star], found)
        has = found >= 0
        rate[has] = inp.est_rate[found[has]]
        frac[has] = inp.est_fraction[found[has]]
    return _shifted(inp, rate, frac)


def _shifted(inp: ExpenseInputs, rate: np.ndarray, frac: np.ndarray):
    """Apply a scenario's change to the estimates (see :mod:`grantval.scenarios.shifts`)."""
    if inp.estimate_adjust is None:
        return rate, frac
    return inp.estimate_adjust(rate, frac)


@dataclass
class _Quantities:
    outstanding: np.ndarray
    cancelled: np.ndarray
    n_exp: np.ndarray
    vested: np.ndarray
    granted_by: np.ndarray
    started: np.ndarray       # per layer: its service has begun by the date
    elapsed: np.ndarray       # per layer: service fraction to the tranche's vesting date
    el_set: np.ndarray        # per layer set: service fraction to the award's last vesting date
    granted_g: np.ndarray
    years_left_t: np.ndarray
    years_left_g: np.ndarray
    kept: np.ndarray = None   # per layer: units forfeited on or after the layer's own end that keep its cost
    as_of: int | None = None  # forecasts: the day whose expected quantities and payouts are kept


def _quantities(inp: ExpenseInputs, dn: int, forfeitures: str, cut: int, est_day: int | None = None,
                need_elapsed: bool = True) -> _Quantities:
    """Everything at day number ``dn`` that does not depend on fair values.

    Events dated after day ``cut`` are ignored; the estimates are those in force on day
    ``est_day`` (default ``dn``).  Without ``need_elapsed`` the per-layer service fractions
    (``elapsed``, used by graded attribution and the full figures) are not computed (None).
    """
    est_day = dn if est_day is None else est_day
    key = (dn, forfeitures, cut, est_day, inp.estimate_label, need_elapsed)
    if inp.memo is not None and key in inp.memo:
        return inp.memo[key]
    pre = inp.prepared()
    n_t = len(inp.t_qty)
    granted_by = pre.t_gdate <= dn
    in_time = pre.c_date <= cut
    forf = pre.c_forfeit & in_time
    canc = pre.c_cancel & in_time
    forfeited = np.bincount(inp.c_tranche[forf], weights=inp.c_qty[forf], minlength=n_t)
    cancelled = np.bincount(inp.c_tranche[canc], weights=inp.c_qty[canc], minlength=n_t)
    outstanding = inp.t_qty - forfeited - cancelled
    vested = (pre.t_vest <= dn) & granted_by
    if forfeitures == "estimate":
        rate, frac = estimates_at(inp, np.datetime64(est_day, "D"))
        r_t, f_t = rate[inp.t_grant], frac[inp.t_grant]
        t_end = pre.end_at(dn)  # a modification's new service end applies from its date only
        remaining = (t_end - (dn + 1)) / RATE_YEAR_DAYS
        by_rate = outstanding * np.power(1.0 - np.nan_to_num(r_t), np.maximum(remaining, 0.0))
        by_frac = np.minimum(f_t * inp.t_qty, outstanding)
        expected = np.where(~np.isnan(f_t), by_frac, by_rate)
        # no forfeiture is expected once the requisite service is complete (vested, or retirement eligible)
        n_exp = np.where(vested | ((t_end <= dn) & granted_by), outstanding, expected)
    else:
        n_exp = outstanding.astype(float)
    granted_g = pre.grant <= dn
    kept = np.zeros(len(pre.l_tranche))
    if len(pre.l_kept):
        kept[pre.l_kept] = _kept_units(inp, pre, pre.l_kept, forf)
    q = _Quantities(
        outstanding=outstanding, cancelled=cancelled, n_exp=n_exp, vested=vested, granted_by=granted_by,
        started=pre.l_start <= dn,
        # a tranche vested before its service end (accelerated by a modification) is fully served
        elapsed=np.where(pre.l_start <= dn, np.where(pre.on_layers(vested), 1.0, _elapsed(dn, pre.l_start, pre.l_len)),
                         0.0) if need_elapsed else None,
        el_set=np.where(pre.set_start <= dn, _elapsed(dn, pre.set_start, pre.set_len), 0.0),
        granted_g=granted_g,
        kept=kept,
        years_left_t=np.maximum(pre.t_vest - dn, 0) / DAYS_PER_YEAR,
        years_left_g=np.maximum(pre.last - dn, 0) / DAYS_PER_YEAR,
    )
    if inp.memo is not None:
        inp.memo[key] = q
    return q


def _apply_hooks(inp: ExpenseInputs, Q: _Quantities, dn: int, attribution: str, cost, expected_total, unrec,
                 remaining, n_expensed) -> None:
    """Replace the cost of the grants a cost hook owns by the hook's own figures (in place)."""
    for hook in inp.cost_hooks:
        h = hook.cost(inp, Q, dn, attribution)
        m = getattr(h, "owned", None)
        m = hook.grants if m is None else m
        cost[m], expected_total[m] = h.grant_cost[m], h.expected_total[m]
        unrec[m], remaining[m] = h.unrecognised[m], h.remaining_years[m]
        per_tranche = getattr(h, "n_expensed", None)
        if per_tranche is not None:
            mt = m[inp.t_grant]
            n_expensed[mt] = per_tranche[mt]


def measure(inp: ExpenseInputs, d, *, attribution: str, forfeitures: str, events_through=None,
            estimates_as_of=None, frozen_at=None, cost_only: bool = False) -> Measurement:
    """Cumulative cost of every grant through ``d``.

    Parameters
    ----------
    inp : ExpenseInputs
    d : datetime64[D]
        Measurement date (counted as served in full).
    attribution : {"straight-line", "graded"}
    forfeitures : {"as-occur", "estimate"}
    events_through : datetime64[D], optional
        Ignore events after this date (forecasts assume no further events).
    estimates_as_of : datetime64[D], optional
        Use the forfeiture estimates in force on this date instead of those in force
        on ``d`` (the bridge separates changes of estimate this way).
    frozen_at : datetime64[D], optional
        Forecasts: keep the quantities expected to vest (and the performance payouts) as
        they stand on this date, with no true-up at later vesting dates, so that a
        forecast to the end of vesting totals the unrecognised cost on this date
        (ASC 718-10-35-3, IFRS 2.20: the estimates in force).
    cost_only : bool, optional
        Compute only ``grant_cost`` (the schedule's periods need nothing else); the other
        per-grant figures of the result are then None.  The cost is the same either way.
    """
    dn = int(np.datetime64(d, "D").astype(np.int64))
    cut = dn if events_through is None else min(dn, int(np.datetime64(events_through, "D").astype(np.int64)))
    est_day = None if estimates_as_of is None else int(np.datetime64(estimates_as_of, "D").astype(np.int64))
    fast = cost_only and not inp.cost_hooks
    need = not (fast and attribution == "straight-line")  # straight-line cost: the sets' fractions only
    Q = _quantities(inp, dn, forfeitures, cut, est_day, need)
    if frozen_at is not None:
        fd = int(np.datetime64(frozen_at, "D").astype(np.int64))
        Q = replace(Q, n_exp=_quantities(inp, fd, forfeitures, min(cut, fd), est_day, need).n_exp, as_of=fd)
    pre = inp.prepared()
    lg = pre.l_grant
    n_g = inp.n_grants
    value = inp.layers.fair_value * (pre.on_layers(Q.n_exp) + Q.kept)  # per layer
    started = Q.started
    cancel_cost = np.bincount(lg, weights=np.where(pre.on_layers(Q.granted_by) & started,
                                                   inp.layers.fair_value * pre.on_layers(Q.cancelled), 0.0), minlength=n_g)
    if fast:
        return _cost_only(inp, Q, value, cancel_cost, attribution)
    if attribution == "graded":
        layer_cost = value * Q.elapsed
        cost = np.bincount(lg, weights=layer_cost, minlength=n_g)
        left = np.where(started, value - layer_cost, 0.0)
        unrec = np.bincount(lg, weights=left, minlength=n_g)
        weighted = np.bincount(lg, weights=left * pre.on_layers(Q.years_left_t), minlength=n_g)
        remaining = weighted / np.where(unrec > 0, unrec, 1.0)
    else:
        total = np.bincount(lg, weights=np.where(started, value, 0.0), minlength=n_g)
        cost = _straight_line_cost(pre, Q, value, n_g)
        unrec = np.where(Q.granted_g, total - cost, 0.0)
        remaining = Q.years_left_g
    remaining = np.where(unrec > 0, remaining, 0.0)
    expected_total = np.bincount(lg, weights=np.where(pre.on_layers(Q.granted_by) & started, value, 0.0),
                                 minlength=n_g) + cancel_cost
    cost = cost + cancel_cost
    n_expensed = Q.n_exp
    if inp.cost_hooks:
        n_expensed = Q.n_exp.copy()
        _apply_hooks(inp, Q, dn, attribution, cost, expected_total, unrec, remaining, n_expensed)
    n_t = len(inp.t_qty)
    return Measurement(
        n_expensed=n_expensed, outstanding=Q.outstanding, cancelled=Q.cancelled, elapsed=Q.elapsed[:n_t],
        vested=Q.vested, grant_cost=cost, expected_total=expected_total, unrecognised=unrec,
        remaining_years=remaining, layer_kept=Q.kept,
    )


def _straight_line_cost(pre, Q: _Quantities, value: np.ndarray, n_g: int) -> np.ndarray:
    """Per grant: straight-line cost, each layer set served over its own period, at least the vested value."""
    lg = pre.l_grant
    by_set = np.bincount(pre.l_set, weights=value, minlength=len(pre.set_grant)) * Q.el_set
    vested_value = np.bincount(lg, weights=np.where(pre.on_layers(Q.vested) & Q.started, value, 0.0), minlength=n_g)
    cost = np.maximum(np.bincount(pre.set_grant, weights=by_set, minlength=n_g), vested_value)
    # every tranche vested (also by acceleration): the cost is the vested value, even if lower
    all_vested = np.bincount(lg, weights=(Q.started & ~pre.on_layers(Q.vested)).astype(float), minlength=n_g) == 0
    return np.where(all_vested & Q.granted_g, vested_value, cost)


def _cost_only(inp: ExpenseInputs, Q: _Quantities, value: np.ndarray, cancel_cost: np.ndarray,
               attribution: str) -> Measurement:
    """``measure``'s cost alone: the same arithmetic as its full path, without the other figures."""
    pre = inp.prepared()
    lg, n_g = pre.l_grant, inp.n_grants
    if attribution == "graded":
        cost = np.bincount(lg, weights=value * Q.elapsed, minlength=n_g)
    else:
        cost = _straight_line_cost(pre, Q, value, n_g)
    return Measurement(
        n_expensed=Q.n_exp, outstanding=Q.outstanding, cancelled=Q.cancelled,
        elapsed=None if Q.elapsed is None else Q.elapsed[:len(inp.t_qty)],
        vested=Q.vested, grant_cost=cost + cancel_cost, expected_total=None, unrecognised=None,
        remaining_years=None, layer_kept=Q.kept,
    )


def _kept_units(inp: ExpenseInputs, pre, layers: np.ndarray, forf: np.ndarray) -> np.ndarray:
    """Per layer of ``layers``: units of its tranche forfeited (``forf`` changes) on or after the layer's end."""
    c_t, c_d, c_q = inp.c_tranche[forf], pre.c_date[forf], inp.c_qty[forf].astype(float)
    out = np.zeros(len(layers))
    if not len(c_t):
        return out
    t, end = pre.l_tranche[layers], pre.l_end[layers]
    order = np.lexsort((c_d, c_t))
    c_t, c_d, c_q = c_t[order], c_d[order], c_q[order]
    csum = np.r_[0.0, np.cumsum(c_q)]
    key_c = c_t.astype(np.float64) * 1e7 + c_d
    lo = np.searchsorted(key_c, t.astype(np.float64) * 1e7 + end, side="left")
    hi = np.searchsorted(c_t, t, side="right")
    return np.where(hi > lo, csum[np.maximum(hi, lo)] - csum[lo], 0.0)
