"""Arrays the expense engine works on, built from a checked ledger and its fair values."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable

import numpy as np
import pandas as pd

from grantval.attribution.layers import CostLayers, grant_date_layers
from grantval.ledger.model import Ledger

if TYPE_CHECKING:  # pragma: no cover
    from grantval.measurement.fairvalue import FairValues


@dataclass
class ExpenseInputs:
    """Everything the engine needs, as arrays (one entry per grant, tranche or change).

    Dates are ``datetime64[D]``; quantities are int64; fair values are
    currency per unit (full floats).
    """

    grant_id: np.ndarray
    group: np.ndarray
    grant_date: np.ndarray
    last_vest: np.ndarray          # per grant: end of the requisite service period
    t_grant: np.ndarray            # per tranche: grant position
    t_vest: np.ndarray             # per tranche: vest date
    t_qty: np.ndarray              # per tranche: quantity granted
    t_fv: np.ndarray               # per tranche: fair value per unit (sum of its cost layers)
    c_tranche: np.ndarray          # per change: tranche position
    c_date: np.ndarray             # per change: date
    c_qty: np.ndarray              # per change: quantity
    c_kind: np.ndarray             # per change: forfeit, cancel, exercise, expire
    est_applies_to: np.ndarray     # per estimate row
    est_effective: np.ndarray
    est_rate: np.ndarray
    est_fraction: np.ndarray
    #: per tranche: last day of the requisite service (default: the vest date); earlier where a
    #: holder becomes retirement eligible before the tranche vests
    t_service_end: np.ndarray | None = None
    #: cost layers of every tranche; default: one grant-date layer per tranche carrying ``t_fv``
    layers: CostLayers | None = None
    #: a scenario's change to the estimates in force: ``(rate, fraction) -> (rate, fraction)``
    #: per grant (see :mod:`grantval.scenarios.shifts`); None for the estimates as booked
    estimate_adjust: Callable | None = None
    #: names ``estimate_adjust`` in the memo key
    estimate_label: str = ""
    #: shared across runs that differ only in fair values (what-if scenarios): quantities by date
    memo: dict | None = None
    #: award features whose cost is not the layers' (liabilities remeasured at each date, payouts in
    #: force at each date ...): each :class:`CostHook` computes the cumulative cost of its grants
    cost_hooks: list = field(default_factory=list)
    #: modifications of the ledger's awards (attribution.modifications.ModificationReport), None when none
    modifications: object = None
    #: purchase-plan resets (attribution.espp_resets.ResetCosts), None when none
    espp_resets: object = None
    #: service ends moved by modifications: ``(tranche, from_date, end_before)`` arrays; before
    #: ``from_date`` the tranche's service ended on ``end_before`` (what the forfeiture estimates use at
    #: dates before the modification); None when no modification moved one
    service_end_history: tuple | None = None
    _prep: object = None

    def __post_init__(self):
        if self.t_service_end is None:
            self.t_service_end = np.asarray(self.t_vest, dtype="datetime64[D]")
        if self.layers is None:
            gdate = np.asarray(self.grant_date, dtype="datetime64[D]")
            self.layers = grant_date_layers(self.t_fv, gdate[np.asarray(self.t_grant, dtype=np.int64)])

    @property
    def n_grants(self) -> int:
        return len(self.grant_id)

    def prepared(self) -> "Prepared":
        """Integer day numbers and index arrays computed once per inputs object."""
        if self._prep is None:
            self._prep = Prepared(self)
        return self._prep


@dataclass
class CostHook:
    """A feature's own cumulative-cost rule for some grants, replacing the cost of their layers.

    Attributes
    ----------
    grants : ndarray of bool
        Per grant: the hook owns its cost.
    cost : callable
        ``cost(inputs, quantities, day_number, attribution) -> Measurement-like`` with per-grant
        ``grant_cost``, ``expected_total``, ``unrecognised`` and ``remaining_years`` arrays (all grants;
        only the owned entries are used).  ``quantities`` holds the engine's per-tranche quantities
        at the date (``n_exp``, ``outstanding``, ``vested``, ...; see :mod:`grantval.attribution.engine`).
        A result with an ``owned`` mask (per grant) owns only those grants at that date (a hook that owns
        its grants on some dates only: service before the grant date); otherwise it owns ``grants``.
    """

    grants: np.ndarray
    cost: Callable
    #: the feature's own data the cost depends on (a scenario may change it, e.g. the payouts in force)
    state: object = None


def _last_per_grant(t_end: np.ndarray, t_grant: np.ndarray, n_grants: int) -> np.ndarray:
    """Per grant: the last day of service over its tranches (int64 day numbers; minimum int where none)."""
    out = np.full(n_grants, np.iinfo(np.int64).min, dtype=np.int64)
    np.maximum.at(out, t_grant, t_end)
    return out


def _days(a) -> np.ndarray:
    """Dates as int64 day numbers."""
    return np.asarray(a, dtype="datetime64[D]").astype(np.int64)


class Prepared:
    """Static per-tranche, per-change and per-estimate arrays, as int64 day numbers."""

    def __init__(self, inp: ExpenseInputs):
        day = _days
        self.grant = day(inp.grant_date)
        self.t_gdate = self.grant[inp.t_grant]
        self.t_vest = day(inp.t_vest)
        self.t_end = day(inp.t_service_end)
        self._history(inp.service_end_history)
        self.last = _last_per_grant(self.t_end, inp.t_grant, len(self.grant)) if len(self.t_end) else day(inp.last_vest)
        self.t_len = self.t_end - self.t_gdate
        self.g_len = self.last - self.grant
        self.c_date = day(inp.c_date)
        self.c_forfeit = inp.c_kind == "forfeit"
        self.c_cancel = (inp.c_kind == "cancel") & (self.t_vest[inp.c_tranche] > self.c_date)
        self.est_eff = day(inp.est_effective)
        keys = sorted({k for k in inp.est_applies_to if k is not None})
        self.est_keys = keys
        index = {k: i for i, k in enumerate(keys)}
        self.est_key = np.array([index.get(k, -1) for k in inp.est_applies_to], dtype=np.int64)
        self.code_grant = np.array([index.get(k, -1) for k in inp.grant_id], dtype=np.int64)
        self.code_group = np.array([index.get(k, -1) for k in inp.group], dtype=np.int64)
        self.code_star = index.get("*", -1)
        self._layers(inp)

    def _history(self, history) -> None:
        """Moved service ends, sorted by tranche then date (see ``ExpenseInputs.service_end_history``)."""
        if history is None or not len(history[0]):
            self.h_tranche = None
            return
        tr, frm, end = (np.asarray(x) for x in history)
        order = np.lexsort((_days(frm), tr))
        self.h_tranche, self.h_from, self.h_end = tr[order], _days(frm)[order], _days(end)[order]

    def end_at(self, dn: int) -> np.ndarray:
        """Per tranche: the service end in force on day number ``dn`` (before a modification moved it)."""
        if self.h_tranche is None:
            return self.t_end
        later = np.flatnonzero(self.h_from > dn)
        if not len(later):
            return self.t_end
        first = later[np.unique(self.h_tranche[later], return_index=True)[1]]
        out = self.t_end.copy()
        out[self.h_tranche[first]] = self.h_end[first]
        return out

    def on_layers(self, per_tranche: np.ndarray) -> np.ndarray:
        """A per-tranche array taken to the layers (itself when the layers are the tranches)."""
        return per_tranche if self.l_identity else per_tranche[self.l_tranche]

    def _layers(self, inp: ExpenseInputs) -> None:
        """Per-layer service periods and the layer sets of straight-line attribution."""
        lay = inp.layers
        n_t = len(inp.t_qty)
        if len(lay) < n_t or not np.array_equal(lay.tranche[:n_t], np.arange(n_t)):
            raise ValueError("the first cost layer of each tranche must come first, in tranche order")
        self.l_tranche = lay.tranche
        #: the layers are the grant-date layers alone, one per tranche in tranche order
        self.l_identity = len(lay) == n_t
        self.l_grant = inp.t_grant[lay.tranche]
        self.l_start = _days(lay.start)
        own_end = ~np.isnat(np.asarray(lay.end, dtype="datetime64[D]"))
        self.l_end = np.where(own_end, _days(lay.end), self.t_end[lay.tranche])
        self.l_len = self.l_end - self.l_start
        # layers kept for units forfeited on or after their own end (see CostLayers.kept)
        self.l_kept = np.flatnonzero(np.asarray(lay.kept, dtype=bool))
        keys = self.l_grant * (int(lay.set_id.max(initial=0)) + 1) + lay.set_id
        uniq, self.l_set = np.unique(keys, return_inverse=True)
        self.l_set = self.l_set.ravel()
        first = np.zeros(len(uniq), dtype=np.int64)
        first[self.l_set[::-1]] = np.arange(len(lay))[::-1]
        self.set_grant = self.l_grant[first]
        self.set_start = self.l_start[first]
        # a set's service runs to the award's last service end, or to the latest own end of its layers
        set_end = self.last[self.set_grant].copy()
        if own_end.any():
            own = np.full(len(uniq), np.iinfo(np.int64).min, dtype=np.int64)
            np.maximum.at(own, self.l_set[own_end], self.l_end[own_end])
            has = np.bincount(self.l_set[own_end], minlength=len(uniq)) > 0
            every = np.bincount(self.l_set, weights=own_end.astype(float), minlength=len(uniq)) == np.bincount(
                self.l_set, minlength=len(uniq))
            set_end = np.where(has & every, own, np.where(has, np.maximum(set_end, own), set_end))
        self.set_len = set_end - self.set_start


def hook_builders() -> list[Callable]:
    """Builders of the features' cost hooks: ``builder(ledger, fair_values, inputs) -> CostHook | None``."""
    from grantval.attribution import performance

    return [performance.build_hook]


def build_inputs(ledger: Ledger, fair_values: "FairValues", policy=None) -> ExpenseInputs:
    """Collect the engine's arrays from a ledger and its fair values, with the features' cost hooks.

    ``policy`` (standard, valuation unit, lattice steps) values and treats the ledger's modifications;
    when None, the ledger's own policy table (without a run's overrides).
    """
    from grantval.attribution.service import service_end

    g, tr, ch, est = ledger.grants, ledger.tranches, ledger.changes, ledger.estimates
    t_grant = tr["grant_idx"].to_numpy(np.int64)
    t_vest = tr["vest_date"].to_numpy("datetime64[D]")
    last = pd.Series(t_vest).groupby(t_grant).max()
    last_vest = np.full(len(g), np.datetime64("NaT"), dtype="datetime64[D]")
    last_vest[last.index.to_numpy()] = last.to_numpy("datetime64[D]")
    inp = ExpenseInputs(
        grant_id=g["grant_id"].to_numpy(dtype=object),
        group=g["group"].to_numpy(dtype=object),
        grant_date=g["grant_date"].to_numpy("datetime64[D]"),
        last_vest=last_vest,
        t_grant=t_grant,
        t_vest=t_vest,
        t_qty=tr["quantity"].to_numpy(np.int64),
        t_fv=np.asarray(fair_values.tranche_value, dtype=float),
        c_tranche=ch["tranche_idx"].to_numpy(np.int64),
        c_date=ch["date"].to_numpy("datetime64[D]"),
        c_qty=ch["quantity"].to_numpy(np.int64),
        c_kind=ch["kind"].to_numpy(dtype=object),
        est_applies_to=est["applies_to"].to_numpy(dtype=object),
        est_effective=est["effective_date"].to_numpy("datetime64[D]"),
        est_rate=est["annual_forfeiture_rate"].to_numpy(float),
        est_fraction=est["expected_vest_fraction"].to_numpy(float),
        t_service_end=service_end(ledger, t_vest, getattr(fair_values, "service_years", None)),
    )
    from grantval.attribution import inception

    early = inception.start_service_at_inception(inp, ledger)  # before modifications measure anything
    _modify(ledger, fair_values, inp, policy)
    _reset_purchase_plans(ledger, inp)
    inp.cost_hooks = [h for h in (b(ledger, fair_values, inp) for b in hook_builders()) if h is not None]
    if early.any():
        from grantval.policy import resolve_policy

        inception.install_inception_hook(inp, ledger, early, policy or resolve_policy(ledger.policy_values))
    # cash-settled awards (settlement "cash"): no grant-date layer value; their cost is the liability hook's
    from grantval.attribution.liability import install_liability_hook

    install_liability_hook(inp, ledger)
    return inp


def _reset_purchase_plans(ledger: Ledger, inp: ExpenseInputs) -> None:
    """Purchase-plan resets: their incremental cost layers (in place)."""
    from grantval.attribution.espp_resets import reset_layers
    from grantval.attribution.layers import append_layers

    got = reset_layers(ledger, inp)
    if got is not None and len(got.layers):
        inp.espp_resets = got
        inp.layers = append_layers(inp.layers, got.layers)


def _modify(ledger: Ledger, fair_values, inp: ExpenseInputs, policy) -> None:
    """Modifications: vest dates in force (acceleration) and incremental cost layers (in place)."""
    from grantval.attribution import modifications
    from grantval.attribution.layers import append_layers
    from grantval.policy import resolve_policy

    mods = ledger.tables.get("modifications")
    replaced = ledger.grants.get("replaces_grant_id")
    if (mods is None or not len(mods)) and (replaced is None or not replaced.notna().any()):
        return
    if policy is None:
        policy = resolve_policy(ledger.policy_values)
    got = modifications.build(ledger, fair_values, inp, policy)
    if got is not None:
        inp.t_vest, extra, inp.modifications = got
        inp.layers = append_layers(inp.layers, extra)
