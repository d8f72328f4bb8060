"""Cost layers of a change of vesting schedule: which period each layer is served over after it.

A modification that moves a tranche's vesting date (a new ``vest_months``, ``vest_every_months`` or
``cliff_months``, or ``accelerate``) changes the service period of the cost the tranche already
carries (its grant-date layer and earlier modifications' layers).  The engine computes cumulative
cost at any date from fixed layers, so the cost reported before the modification date must not
move: every existing layer keeps its own service period (``CostLayers.end``, "frozen" to the
period in force before), and the change after the modification date is made of new layers that
start on it.  Per existing layer L (fair value F per unit, served from s to E), for a tranche whose
vesting moves from E to a later or earlier date V (service ends, after retirement eligibility):

- later (V > E): L stays served to E (the original terms).  Under ASC 718 (original expected to
  vest) and IFRS 2 its cost is kept for units forfeited between E and V (``CostLayers.kept``):
  ASC 718-20-55-107 recognises cost if the award "would have vested under the original vesting
  conditions" (Types I and II); IFRS 2 B44(c) does not take a change that does not benefit the
  employee into account (from memory).
- earlier, after the modification date d (d < V < E):

  * A = -F (E - d)/(E - s), served from d to E: cancels L's growth after d;
  * IFRS 2 B43(c) (the shorter period is taken into account, from memory; a revised estimate of the
    vesting period is a cumulative catch-up, IFRS 2.20 and IG Example 2, from memory):
    B = F (V - d)/(V - s) served from d to V, and C = F [(d - s)/(V - s) - (d - s)/(E - s)] at once
    on d, so that from d on L + A + B + C = F (t + 1 - s)/(V - s), i.e. L served over s..V;
  * ASC 718: B' = F (E - d)/(E - s) served from d to V: the cost of L not yet recognised is
    recognised prospectively over the new remaining service (PwC guide SC 4.2, step 3).

  At V (vested) L + A + B + C = L + A + B' = F.
- ASC 718 Type III (``original_expected_to_vest`` = ``no``, vesting earlier, after d): L is reversed
  from d on: A and R = -F (d - s)/(E - s) at once on d (L + A + R = 0 from d on); the modified award's
  fair value is the modification's own layer, served from d to V (ASC 718-20-55-108).
- earlier, on the modification date (V <= d, as ``accelerate``): the tranche vests and every layer is
  served in full (the engine's rule for vested tranches); nothing is added.

Under straight-line attribution (ASC 718 only) layers are served per layer set over the award's
last service end: the same rule is applied to every existing layer of the award with E and V the
award's last service end before and after, when it moves earlier.  Each added layer is its own
layer set, so its own period is the set's.
"""

from __future__ import annotations

import numpy as np

from grantval.attribution.layers import CostLayers, append_layers

#: layer sets of the added layers start here (unique per layer: each is served over its own period)
SET_BASE = 1_000_000


def _days(a) -> np.ndarray:
    return np.asarray(a, dtype="datetime64[D]").astype(np.int64)


def reschedule_layers(base: CostLayers, mods: CostLayers, mod_rank: np.ndarray, values, service_end,
                      standard: str, attribution: str, not_expected: np.ndarray, t_grant: np.ndarray) -> CostLayers:
    """Freeze, keep and re-spread the layers of tranches whose vesting a modification moves.

    Parameters
    ----------
    base : CostLayers
        The grant-date layers (one per tranche, tranche order); their ``end`` and ``kept`` are set in place.
    mods : CostLayers
        The modifications' incremental layers; ``mod_rank`` gives each one's modification rank.
    values : ModificationValues
        Per (modification, tranche) pair: ``vest_before``, ``vest_after``, ``terms``.
    service_end : callable
        ``service_end(vest of every tranche) -> last day of service of every tranche``.
    standard : {"asc718", "ifrs2"}
    attribution : {"graded", "straight-line"}
    not_expected : ndarray of bool
        Per pair: the original award was not expected to vest (ASC 718 Types III/IV).
    t_grant : ndarray of int
        Grant position of each tranche.

    Returns
    -------
    CostLayers
        ``mods`` (ends and kept set) followed by the added layers.
    """
    lay = append_layers(base, mods)
    rank = np.concatenate([np.full(len(base), -1), mod_rank]).astype(np.int64)
    is_mod = np.r_[np.zeros(len(base), bool), np.ones(len(mods), bool)]
    t = values.terms
    n_t = len(base)
    vest_now = np.asarray(values.vest_before, dtype="datetime64[D]")
    current = np.zeros(n_t, dtype="datetime64[D]")
    counter = [SET_BASE]
    for r in np.unique(t.rank[values.p_mod]):
        m = t.rank[values.p_mod] == r
        tr, d = values.p_tranche[m], t.date[values.p_mod[m]]
        vb, va = vest_now[m], np.asarray(values.vest_after, dtype="datetime64[D]")[m]
        moved = (va != vb) & (vb > d)
        if not moved.any():
            continue
        current[:] = np.datetime64("1970-01-01")
        current[tr] = vb
        e_before = _days(service_end(current))[tr]
        current[tr] = va
        e_after = _days(service_end(current))[tr]
        grants = np.unique(t_grant[tr[moved]])
        exist = np.isin(t_grant[lay.tranche], grants) & (rank < r)
        _freeze(lay, exist, tr, e_before, n_t)
        later = moved & (va > vb)
        keep = np.where(standard == "ifrs2", True, ~not_expected[m]) & later
        _keep(lay, exist, tr[keep], rank, is_mod, r, standard)
        dn = _days(d)
        earlier = moved & (va < vb) & (va > d)
        # ASC 718 Type III (improbable to probable, vesting earlier): the original cost is reversed instead
        revert = np.zeros(n_t, dtype=bool)
        revert[tr[earlier & (standard == "asc718") & not_expected[m]]] = True
        if attribution == "straight-line":
            added = _respread_awards(lay, exist, tr, dn, e_before, e_after, t_grant, counter, standard, revert)
        elif earlier.any():
            on = np.flatnonzero(exist & np.isin(lay.tranche, tr[earlier]))
            target = np.zeros(n_t, dtype=np.int64)
            target[tr[earlier]] = e_after[earlier]
            day = np.zeros(n_t, dtype=np.int64)
            day[tr[earlier]] = dn[earlier]
            added = [_respread(lay, on, day[lay.tranche[on]], target[lay.tranche[on]], counter, standard,
                               revert[lay.tranche[on]])]
        else:
            added = []
        for extra in added:
            rank = np.concatenate([rank, np.full(len(extra), r)])
            is_mod = np.concatenate([is_mod, np.ones(len(extra), bool)])
            lay = append_layers(lay, extra)
    base.end[:], base.kept[:] = lay.end[:n_t], lay.kept[:n_t]
    return CostLayers(*(getattr(lay, f)[n_t:] for f in ("tranche", "fair_value", "start", "set_id", "kind", "end",
                                                          "kept")))


def _freeze(lay: CostLayers, exist: np.ndarray, tr: np.ndarray, e_before: np.ndarray, n_t: int) -> None:
    """Layers ``exist`` without an own end are served to their tranche's service end in force before."""
    end_of = np.full(n_t, np.datetime64("NaT"), dtype="datetime64[D]")
    end_of[tr] = e_before.astype("datetime64[D]")
    free = exist & np.isnat(lay.end) & ~np.isnat(end_of[lay.tranche])
    lay.end[free] = end_of[lay.tranche[free]]


def _keep(lay, exist, tranches, rank, is_mod, r, standard) -> None:
    """Existing layers (and, under IFRS 2, the modification's own) of ``tranches`` keep their cost."""
    on = np.isin(lay.tranche, tranches)
    lay.kept[exist & on] = True
    if standard == "ifrs2":  # B44(c): the longer period is not taken into account for the increment either
        own = on & is_mod & (rank == r)
        lay.kept[own] = True
        # its end is the service end before: the tranche's frozen grant-date layer's end
        lay.end[own] = lay.end[lay.tranche[own]]


def _respread(lay: CostLayers, idx: np.ndarray, d: np.ndarray, v: np.ndarray, counter: list,
              standard: str, revert: np.ndarray) -> CostLayers:
    """Layers A and B (and C under IFRS 2) re-spreading layers ``idx`` from day ``d`` to day ``v``.

    Where ``revert`` (ASC 718 Type III) the layer is reversed instead: A and R = -F (d - s)/(E - s) on d.
    """
    s, e, f = _days(lay.start[idx]), _days(lay.end[idx]), lay.fair_value[idx]
    ok = (e > d) & (e > s) & (v > d)
    idx, s, e, f, d, v, revert = idx[ok], s[ok], e[ok], f[ok], d[ok], v[ok], revert[ok]
    left = (e - d) / (e - s)
    keep = np.where(revert, 0.0, 1.0)
    parts = [(-f * left, d, e), (-f * (d - s) / (e - s) * revert, d, d)]
    if standard == "ifrs2":
        parts += [(keep * f * (v - d) / (v - s), d, v), (keep * f * ((d - s) / (v - s) - (d - s) / (e - s)), d, d)]
    else:
        parts += [(keep * f * left, d, v)]
    out = []
    for value, start, end in parts:
        n = len(idx)
        out.append(CostLayers(tranche=lay.tranche[idx].copy(), fair_value=np.asarray(value, float),
                              start=start.astype("datetime64[D]"),
                              set_id=np.arange(counter[0], counter[0] + n, dtype=np.int64),
                              kind=np.full(n, "modification", dtype=object), end=end.astype("datetime64[D]"),
                              kept=np.zeros(n, dtype=bool)))
        counter[0] += n
    res = out[0]
    for o in out[1:]:
        res = append_layers(res, o)
    keep = res.fair_value != 0
    return CostLayers(*(getattr(res, f)[keep] for f in ("tranche", "fair_value", "start", "set_id", "kind", "end",
                                                         "kept")))


def _respread_awards(lay, exist, tr, dn, e_before, e_after, t_grant, counter, standard, revert) -> list:
    """Straight-line: re-spread every existing layer of awards whose last service end moves earlier."""
    g = t_grant[tr]
    out = []
    for grant in np.unique(g):
        on = g == grant
        old, new, d = e_before[on].max(), e_after[on].max(), dn[on][0]
        if not (d < new < old):
            continue
        idx = np.flatnonzero(exist & (t_grant[lay.tranche] == grant))
        saved = lay.end[idx].copy()
        lay.end[idx] = np.datetime64(int(old), "D")  # the set's period: to the award's last service end
        out.append(_respread(lay, idx, np.full(len(idx), d), np.full(len(idx), new), counter, standard,
                             revert[lay.tranche[idx]]))
        lay.end[idx] = saved
    if not out:
        return []
    res = out[0]
    for o in out[1:]:
        res = append_layers(res, o)
    return [res]
