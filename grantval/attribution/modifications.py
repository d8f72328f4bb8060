"""Modifications as cost layers: the incremental fair value of each modified tranche, from the modification date.

Rules (docs/modifications.md):

- incremental value per unit = fair value of the modified award less that of the original award
  immediately before, both on the modification date (ASC 718-20-35-3; IFRS 2.27, B43(a));
- it is a new cost layer of the tranche starting on the modification date and served to the
  tranche's vesting date (graded) or, per modification, to the award's last service end
  (straight-line); a tranche vested on the modification date takes it at once;
- a decrease in fair value is ignored: the cost recognised is at least the grant-date fair value
  (ASC 718-20-35-3; IFRS 2 B44(a));
- ASC 718 improbable-to-probable (Type III, ASC 718-20-55-108 and Example 14 Case C): where the original
  award was not expected to vest (``original_expected_to_vest`` = ``no``) and the modification vests
  the tranche earlier (``accelerate`` or a new schedule), the cost recognised so far on the tranche is
  reversed and the modified award's fair value on the modification date recognised instead (layers
  ``-(value so far)`` and ``+fair value after`` when it vests on the date; for a later new date the
  reversal is :mod:`~grantval.attribution.schedule_change`'s).  Under IFRS 2 the grant-date fair value
  stands and the incremental value is added (B43(a), (c));
- Type I (probable-to-probable) and Type IV (improbable-to-improbable, vesting not earlier): the original
  cost continues and the incremental is added, both following the forfeiture estimates
  (ASC 718-20-55-107);
- units exercised or expired before the modification take no incremental value: the layer's value
  per counted unit of a vested tranche is scaled by units outstanding / units counted;
- a reduction in quantity is a cancellation of the units removed (IFRS 2 B44(b), 28(a);
  ASC 718-20-35-9): their remaining cost is recognised on the modification date (the ledger turns it
  into a ``cancel`` change);
- a new vesting schedule moves the tranches' vesting dates; the service period of the cost they
  already carry follows :mod:`grantval.attribution.schedule_change` (the original cost on the
  original period, kept when that period is served, under ASC 718 Types I/II and IFRS 2 B44(c); a
  shorter period re-spread under IFRS 2 B43(c) and ASC 718).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.attribution.layers import CostLayers
from grantval.attribution.service import service_end


@dataclass
class ModificationCosts:
    """Layers and per-pair figures of the modifications (pairs as in ``ModificationValues``)."""

    layers: CostLayers
    per_unit: np.ndarray        # per pair: incremental value per unit outstanding after
    reversed_per_unit: np.ndarray  # per pair: value reversed per unit (Type III), else 0
    treatment: np.ndarray       # per pair: text
    incremental: np.ndarray     # per pair: incremental cost, currency (units after x per unit)


def _layer_rows(values, t_fv_so_far: np.ndarray, standard: str):
    """Per pair: (per-unit incremental, per-unit reversal, treatment) under the standard."""
    t = values.terms
    p = values.p_mod
    unvested = values.vest_before > t.date[p]
    inc = values.after - values.before
    not_expected = _not_expected(values)
    # vests earlier: on the modification date (accelerated, or a new schedule that vests it at once), or on a
    # new, earlier date (its reversal then comes from attribution.schedule_change: layers A and R)
    type3 = (standard == "asc718") & not_expected & (values.vest_after < values.vest_before) & unvested
    per_unit = np.where(type3, values.after, np.maximum(inc, 0.0))
    reverse = np.where(type3, t_fv_so_far, 0.0)
    words = np.where(inc > 0, "incremental value added",
                     np.where(inc < 0, "decrease in fair value ignored (no incremental)",
                              "no change in fair value (no incremental)"))
    later = unvested & (values.vest_after > values.vest_before)
    earlier = unvested & (values.vest_after < values.vest_before) & (values.vest_after > t.date[p])
    if standard == "asc718":
        kind = np.where(not_expected, "Type IV (improbable to improbable)", "Type I (probable to probable)")
        kind = np.where(later & ~not_expected, "Type I or II (original expected to vest)", kind)
        label = np.array([f"{k}: {w}" for k, w in zip(kind, words)], dtype=object)
        label[later & ~not_expected] += ("; original cost on the original vesting date, kept if served to it "
                                         "(ASC 718-20-55-107)")
        label[later & not_expected] += "; cost only if the modified award vests (ASC 718-20-55-108)"
        label[earlier] += "; original cost not yet recognised spread over the new, shorter period"
        label[type3] = "Type III (improbable to probable): original cost reversed, modified fair value recognised"
        label[type3 & earlier] += " from the modification date to the new vesting date"
    else:
        label = np.array([f"IFRS 2.27: {w}" for w in words], dtype=object)
        label[later] += "; longer vesting not taken into account (B44(c))"
        label[earlier] += "; shorter vesting taken into account (B43(c))"
    return per_unit, reverse, label


def _not_expected(values) -> np.ndarray:
    flag = getattr(values, "not_expected", None)
    return np.zeros(len(values.p_mod), dtype=bool) if flag is None else flag


def modification_layers(values, t_fv: np.ndarray, standard: str) -> ModificationCosts:
    """Cost layers of every modification, in the order of the modifications' dates per grant.

    Parameters
    ----------
    values : ModificationValues
        From :func:`grantval.measurement.modification.modification_values` (with ``not_expected``).
    t_fv : ndarray
        Grant-date fair value per unit of each tranche.
    standard : {"asc718", "ifrs2"}
    """
    t = values.terms
    so_far = np.asarray(t_fv, dtype=float).copy()
    n = len(values.p_mod)
    per_unit, reverse = np.zeros(n), np.zeros(n)
    label = np.empty(n, dtype=object)
    for rank in np.unique(t.rank):
        m = t.rank[values.p_mod] == rank
        pu, rv, lb = _layer_rows(_subset(values, m), so_far[values.p_tranche[m]], standard)
        per_unit[m], reverse[m], label[m] = pu, rv, lb
        scale = _scale(values, m)
        np.add.at(so_far, values.p_tranche[m], (pu - rv) * scale)
    scale = _scale(values, np.ones(n, dtype=bool))
    at_once = values.vest_after <= t.date[values.p_mod]  # else the reversal is schedule_change's (layers A, R)
    fv = np.concatenate([per_unit * scale, -np.where(at_once, reverse, 0.0) * scale])
    tranche = np.concatenate([values.p_tranche, values.p_tranche])
    start = np.concatenate([t.date[values.p_mod]] * 2)
    set_id = np.concatenate([t.rank[values.p_mod] + 1] * 2)
    keep = fv != 0
    layers = CostLayers(tranche=tranche[keep].astype(np.int64), fair_value=fv[keep],
                        start=start[keep].astype("datetime64[D]"), set_id=set_id[keep].astype(np.int64),
                        kind=np.full(int(keep.sum()), "modification", dtype=object))
    incremental = (per_unit - reverse) * values.units_after
    return ModificationCosts(layers, per_unit, reverse, label, incremental)


def _scale(values, m: np.ndarray) -> np.ndarray:
    """Units outstanding after / units counted, per pair in ``m`` (1 where nothing is counted)."""
    c = values.counted_after[m]
    return np.where(c > 0, values.units_after[m] / np.where(c > 0, c, 1), 0.0)


class _Sub:
    """The pairs of ``values`` selected by a mask (same attribute names)."""

    def __init__(self, values, m):
        self.terms = values.terms
        for name in ("p_mod", "p_tranche", "before", "after", "vest_before", "vest_after", "units_before",
                     "units_after", "counted_after"):
            setattr(self, name, getattr(values, name)[m])
        ne = _not_expected(values)
        self.not_expected = ne[m]


def _subset(values, m):
    return _Sub(values, m)


def replacement_layers(rv, inp) -> tuple[CostLayers, np.ndarray, np.ndarray]:
    """Layers that leave a replacement grant only its incremental value (ASC 718-20-35-8; IFRS 2.28(c)).

    The replacement's grant-date fair value (its own layer) is reduced by the fair value of the
    cancelled grant immediately before (total, both on the replacement's grant date), never below
    zero (a decrease is ignored: IFRS 2 B44(a); ASC 718-20-35-3); the cancelled grant's own cost
    continues on its original schedule (its cancellation does not accelerate it: see :func:`build`).

    Returns the layers, the incremental value (currency) and the replacement's fair value (currency),
    per replacement.
    """
    total = np.bincount(inp.t_grant, weights=inp.t_fv * inp.t_qty, minlength=inp.n_grants)[rv.new]
    incremental = np.maximum(total - rv.value_before, 0.0)
    ratio = np.where(total > 0, incremental / np.where(total > 0, total, 1.0), 0.0)
    per_grant = np.full(inp.n_grants, np.nan)
    per_grant[rv.new] = ratio
    tr = np.flatnonzero(~np.isnan(per_grant[inp.t_grant]))
    fv = -inp.t_fv[tr] * (1.0 - per_grant[inp.t_grant[tr]])
    keep = fv != 0
    gdate = np.asarray(inp.grant_date, dtype="datetime64[D]")
    layers = CostLayers(tranche=tr[keep].astype(np.int64), fair_value=fv[keep],
                        start=gdate[inp.t_grant[tr[keep]]], set_id=np.zeros(int(keep.sum()), dtype=np.int64),
                        kind=np.full(int(keep.sum()), "modification", dtype=object))
    return layers, incremental, total


def _replaced_changes(ledger) -> np.ndarray:
    """Per change: it is the cancellation of a replaced grant."""
    ev, ch = ledger.events, ledger.changes
    if "_replaced_by" not in ev or not len(ch):
        return np.zeros(len(ch), dtype=bool)
    return ev["_replaced_by"].notna().to_numpy()[ch["event_idx"].to_numpy()]


def _replacement_forfeits(ledger, inp) -> None:
    """A replacement's forfeits and cancellations reach the replaced grant's units not vested by then.

    The replaced grant's cost continues as if outstanding, so a leaver who forfeits the replacement
    would keep it; but an award that vests under neither the modified conditions (the replacement)
    nor the original ones (the replaced grant's own dates) has no cost (ASC 718-20-55-107; IFRS 2.19-20,
    failure of a service condition), and a cancellation of the modified award recognises all its
    remaining cost at once (ASC 718-20-35-9; IFRS 2.28(a)).  Per forfeiture (cancellation) date F of
    the replacement, the fraction of its granted units forfeited (cancelled) by F is applied to each
    replaced tranche's units (rounded to whole units) whose vesting date in force is after F: those
    become ``forfeit`` (``cancel``) changes on F, added to ``inp`` in place.
    """
    from grantval.ledger.ext.modifications import replacements

    new, old = replacements(ledger.grants)
    c_grant = inp.t_grant[inp.c_tranche]
    replaced = inp.c_kind == "replaced"
    granted = np.bincount(inp.t_grant, weights=inp.t_qty, minlength=len(inp.grant_id))
    vest = np.asarray(inp.t_vest, dtype="datetime64[D]")
    add: list = []
    for n, o in zip(new, old):
        r = np.flatnonzero(replaced & (c_grant == o))
        for kind in ("forfeit", "cancel"):
            f = np.flatnonzero((inp.c_kind == kind) & (c_grant == n))
            if not len(f) or not len(r) or granted[n] <= 0:
                continue
            days = np.unique(inp.c_date[f])
            share = np.array([inp.c_qty[f][inp.c_date[f] <= d].sum() for d in days]) / granted[n]
            for tr, q in zip(inp.c_tranche[r], inp.c_qty[r]):
                step = np.diff(np.r_[0, np.round(q * np.minimum(share, 1.0)).astype(np.int64)])
                live = (step > 0) & (vest[tr] > days)
                add += [(tr, d, s, kind) for d, s in zip(days[live], step[live])]
    if add:
        tr, d, q, k = zip(*add)
        inp.c_tranche = np.r_[inp.c_tranche, np.array(tr, dtype=np.int64)]
        inp.c_date = np.r_[np.asarray(inp.c_date, dtype="datetime64[D]"), np.array(d, dtype="datetime64[D]")]
        inp.c_qty = np.r_[inp.c_qty, np.array(q, dtype=np.int64)]
        inp.c_kind = np.r_[inp.c_kind, np.array(k, dtype=object)].astype(object)


def build(ledger, fair_values, inp, policy) -> tuple[np.ndarray, CostLayers, object] | None:
    """In-force vest dates, extra layers and the modification report of a ledger (None without modifications).

    The cancellation of a replaced grant is taken out of the engine's changes (``inp.c_kind`` becomes
    ``replaced``): the replaced grant's cost continues as if it were outstanding (a modification, not a
    cancellation: ASC 718-20-35-8; IFRS 2.28(c)).
    """
    from grantval.ledger.ext.modifications import vest_in_force
    from grantval.measurement.modification import modification_values, replaced_values

    values = modification_values(ledger, policy)
    rv = replaced_values(ledger, policy)
    if values is None and rv is None:
        return None
    mods = ledger.tables["modifications"]
    layers = CostLayers(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, "datetime64[D]"), np.zeros(0, np.int64),
                        np.zeros(0, dtype=object))
    costs = None
    if values is not None:
        values.not_expected = (mods["original_expected_to_vest"].to_numpy(dtype=object)[values.terms.order]
                               == "no")[values.p_mod]
        costs = modification_layers(values, inp.t_fv, policy.standard)
        layers = _rescheduled(ledger, inp, values, costs, policy)
    replaced = None
    if rv is not None:
        from grantval.attribution.layers import append_layers

        r_layers, incremental, total = replacement_layers(rv, inp)
        layers = append_layers(layers, r_layers)
        replaced = ReplacementCosts(rv, incremental, total)
        inp.c_kind = np.where(_replaced_changes(ledger), "replaced", inp.c_kind).astype(object)
        _replacement_forfeits(ledger, inp)
    t_vest = vest_in_force(ledger.tranches, ledger.grants, mods)
    report = ModificationReport(values, costs, policy.standard, replaced)
    if values is not None:  # every layer whose tranche's vesting moved has its own service end by now
        moved = t_vest != np.asarray(inp.t_vest, dtype="datetime64[D]")
        inp.service_end_history = _end_history(ledger, values, inp.t_service_end)
        inp.t_service_end = np.where(moved, service_end(ledger, t_vest), inp.t_service_end)
        report.added_units, report.added_cost, report.added_at_once = _added(ledger, values.terms, inp)
    return t_vest, layers, report


def _end_history(ledger, values, t_end) -> tuple:
    """``(tranche, modification date, service end before it)`` of every modification that moves a tranche."""
    t = values.terms
    vb, va = values.vest_before, values.vest_after
    moved = (va != vb) & (vb > t.date[values.p_mod])
    tr = values.p_tranche[moved]
    end_before = np.empty(len(tr), dtype="datetime64[D]")
    rank = t.rank[values.p_mod][moved]
    for r in np.unique(rank):  # the end in force before each modification (pairs of one rank: one per tranche)
        m = rank == r
        current = np.asarray(t_end, dtype="datetime64[D]").copy()
        current[tr[m]] = vb[moved][m]
        end_before[m] = service_end(ledger, current)[tr[m]]
    return tr, t.date[values.p_mod][moved], end_before


def _added(ledger, t, inp):
    """Per modification: units added by a quantity increase, their grant-date value (currency), the part vested at once.

    The added units are a grant of their own (:mod:`grantval.ledger.ext.added_units`) whose grant-date
    fair value is the modified award's on the modification date: their cost is part of the
    modification's incremental cost (ASC 718-20-35-3; IFRS 2 B43(b)).
    """
    n = len(t.gp)
    units, cost, at_once = np.zeros(n), np.zeros(n), np.zeros(n)
    g = ledger.grants
    if "_added_to" not in g or not g["_added_to"].notna().any():
        return units, cost, at_once
    ids = g["grant_id"].to_numpy(dtype=object)
    where = {(k, d): i for i, (k, d) in enumerate(zip(ids[t.gp], t.date))}
    kids = np.flatnonzero(g["_added_to"].notna().to_numpy())
    days = g["_added_on"].to_numpy("datetime64[D]")
    mod = np.array([where.get((g["_added_to"].iat[k], days[k]), -1) for k in kids], dtype=np.int64)
    kids, mod = kids[mod >= 0], mod[mod >= 0]
    per_tranche = inp.t_fv * inp.t_qty
    vest = np.asarray(inp.t_vest, dtype="datetime64[D]")
    value = np.bincount(inp.t_grant, weights=per_tranche, minlength=len(g))
    now = np.bincount(inp.t_grant, weights=np.where(vest <= days[inp.t_grant], per_tranche, 0.0), minlength=len(g))
    np.add.at(units, mod, g["quantity"].to_numpy(float)[kids])
    np.add.at(cost, mod, value[kids])
    np.add.at(at_once, mod, now[kids])
    return units, cost, at_once


def _rescheduled(ledger, inp, values, costs: ModificationCosts, policy) -> CostLayers:
    """The modifications' layers with their service periods under changed vesting (see ``schedule_change``)."""
    from grantval.attribution.schedule_change import reschedule_layers

    rank = costs.layers.set_id - 1
    return reschedule_layers(inp.layers, costs.layers, rank, values, lambda v: service_end(ledger, v),
                             policy.standard, policy.attribution, values.not_expected, np.asarray(inp.t_grant))


@dataclass
class ReplacementCosts:
    """Per replacement: the values and the incremental cost (currency)."""

    values: object
    incremental: np.ndarray
    replacement_value: np.ndarray


@dataclass
class ModificationReport:
    """What the reporting tables show: the values and the costs of every modification and replacement."""

    values: object
    costs: ModificationCosts | None
    standard: str
    replacements: ReplacementCosts | None = None
    #: per modification: units added by a quantity increase (a grant of their own), their grant-date
    #: value (currency) and the part of it vested on the modification date
    added_units: np.ndarray | None = None
    added_cost: np.ndarray | None = None
    added_at_once: np.ndarray | None = None
