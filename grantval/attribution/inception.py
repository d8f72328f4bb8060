"""Service that begins before the grant date (``grants.service_inception_date``), as a cost hook.

Rules (docs/expense-rules.md, "Service inception before the grant date"):

- the requisite service of every tranche of such a grant runs from the service inception date
  to its vesting date (or its service end, retirement eligibility), so the grant-date cost layer
  starts on the inception date (ASC 718-10-30-25: the estimate of the requisite service period is
  made at the service inception date when that date precedes the grant date);
- through a date d on or after the inception date and before the grant date, when the grant-date
  fair value is not yet known, cumulative cost = fair value per unit at d x units expected to vest
  x service fraction from the inception date: the award is measured again at every reporting date
  (ASC 718-10-35-6 and 55-108 to 55-109, from memory; IFRS 2 IG4, from memory: the entity estimates
  the grant-date fair value for the services received before the grant date and revises it once the
  grant date is established);
- from the grant date on: the grant-date fair value, attributed from the inception date (the
  engine's cost layers), so the first measurement on or after the grant date carries the
  cumulative catch-up from the earlier values to the grant-date value.

Fair values at a date before the grant date come from
:class:`~grantval.measurement.remeasure.AsIfGranted` (the assumptions row for that date).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.attribution.inputs import CostHook, ExpenseInputs
from grantval.attribution.performance import HookResult
from grantval.ledger.model import Ledger

_NONE = np.iinfo(np.int64).max


def inception_days(ledger: Ledger) -> np.ndarray:
    """Per grant: the service inception day number where it precedes the grant date, else the maximum int."""
    g = ledger.grants
    if "service_inception_date" not in g:
        return np.full(len(g), _NONE, dtype=np.int64)
    inc = g["service_inception_date"].to_numpy("datetime64[D]")
    grant = g["grant_date"].to_numpy("datetime64[D]")
    early = ~np.isnat(inc) & (inc < grant)
    return np.where(early, inc.astype(np.int64), _NONE)


def start_service_at_inception(inp: ExpenseInputs, ledger: Ledger) -> np.ndarray:
    """Start the grant-date layer of the tranches of grants with an earlier inception date on that date.

    Changes ``inp.layers.start`` in place (the first layer of each tranche is its grant-date layer)
    and returns the per-grant mask of the grants concerned.
    """
    inc = inception_days(ledger)
    owned = inc != _NONE
    if owned.any():
        n_t = len(inp.t_qty)
        mt = owned[np.asarray(inp.t_grant, dtype=np.int64)]
        start = np.asarray(inp.layers.start, dtype="datetime64[D]").copy()
        start[:n_t] = np.where(mt, inc[inp.t_grant].astype("datetime64[D]"), start[:n_t])
        inp.layers.start = start
        inp._prep = None
    return owned


@dataclass
class PreGrantResult(HookResult):
    """The hook's figures at one date, with the grants it owns at that date."""

    owned: np.ndarray | None = None


class PreGrantCost:
    """Cost of grants between their service inception date and their grant date.

    Parameters
    ----------
    inp : ExpenseInputs
    owned : ndarray of bool, per grant
        Grants whose service began before their grant date.
    inception : ndarray of int64, per grant
        Service inception day numbers.
    values : AsIfGranted-like
        ``values_at(d, grants) -> UnitValues`` with per-tranche values per unit at ``d``.
    """

    def __init__(self, inp: ExpenseInputs, owned: np.ndarray, inception: np.ndarray, values):
        self.owned = np.asarray(owned, dtype=bool)
        self.inception = inception
        self.grant_day = np.asarray(inp.grant_date, dtype="datetime64[D]").astype(np.int64)
        self.values = values

    def owns(self, dn: int, as_of: int | None = None) -> np.ndarray:
        """Per grant: the cost at ``dn`` is measured at a value before the grant date.

        Service has begun by ``dn`` and ``dn`` is before the grant date; in a forecast held at day
        ``as_of`` (:func:`grantval.attribution.engine.measure`, ``frozen_at``), also later dates of grants
        whose grant date was still to come on ``as_of`` (the value of ``as_of`` is held).
        """
        held = dn if as_of is None else min(dn, as_of)
        return self.owned & (self.inception <= held) & (held < self.grant_day)

    def value_day(self, dn: int, as_of: int | None = None) -> int:
        """The day whose fair value measures the cost at ``dn``."""
        return dn if as_of is None else min(dn, as_of)

    def tranche_values(self, dn: int, as_of: int | None, inp: ExpenseInputs) -> tuple[np.ndarray, np.ndarray]:
        """Per tranche: owned at ``dn`` (see :meth:`owns`) and the fair value per unit used (0 elsewhere)."""
        now = self.owns(dn, as_of)
        mt = now[np.asarray(inp.t_grant, dtype=np.int64)]
        if not now.any():
            return mt, np.zeros(len(mt))
        got = self.values.values_at(np.datetime64(self.value_day(dn, as_of), "D"), now).tranche_value
        return mt, np.where(mt, got, 0.0)

    def cost(self, inp: ExpenseInputs, Q, dn: int, attribution: str) -> PreGrantResult:
        """Cumulative cost at ``dn`` of the grants owned then, at the fair value of ``dn`` (or of ``Q.as_of``)."""
        n_g, n_t = inp.n_grants, len(inp.t_qty)
        gi = np.asarray(inp.t_grant, dtype=np.int64)
        as_of = getattr(Q, "as_of", None)
        mt, fv = self.tranche_values(dn, as_of, inp)
        value = fv * np.where(mt, Q.n_exp, 0.0)
        frac = Q.elapsed[:n_t] if attribution == "graded" else Q.el_set[inp.prepared().l_set[:n_t]]
        cost = np.bincount(gi, weights=value * frac, minlength=n_g)
        expected = np.bincount(gi, weights=value, minlength=n_g)
        unrec = np.maximum(expected - cost, 0.0)
        if attribution == "graded":
            weighted = np.bincount(gi, weights=value * (1.0 - frac) * Q.years_left_t, minlength=n_g)
            remaining = weighted / np.where(unrec > 0, unrec, 1.0)
        else:
            remaining = Q.years_left_g
        return PreGrantResult(cost, expected, unrec, np.where(unrec > 0, remaining, 0.0),
                              owned=self.owns(dn, as_of))


def install_inception_hook(inp: ExpenseInputs, ledger: Ledger, owned: np.ndarray, policy) -> PreGrantCost | None:
    """Add the pre-grant cost hook of the grants in ``owned`` to ``inp`` (None when there is none)."""
    if not np.any(owned):
        return None
    from grantval.measurement.remeasure import AsIfGranted

    hook = PreGrantCost(inp, owned, inception_days(ledger), AsIfGranted(ledger, policy))
    inp.cost_hooks.append(CostHook(grants=hook.owned, cost=hook.cost, state=hook))
    return hook


def pre_grant_hook(inp: ExpenseInputs) -> PreGrantCost | None:
    """The pre-grant cost hook installed in ``inp`` (None when there is none)."""
    for hook in inp.cost_hooks:
        if isinstance(hook.state, PreGrantCost):
            return hook.state
    return None


def pre_grant_values(inp: ExpenseInputs, d) -> tuple[np.ndarray, np.ndarray]:
    """Per tranche at ``d``: in service before its grant date, and the fair value per unit then in force.

    (The tranche table shows these tranches with the value their cost is measured at.)
    """
    hook = pre_grant_hook(inp)
    if hook is None:
        n_t = len(inp.t_qty)
        return np.zeros(n_t, dtype=bool), np.zeros(n_t)
    return hook.tranche_values(int(np.datetime64(d, "D").astype(np.int64)), None, inp)


def uses_inception(ledger: Ledger) -> bool:
    """The ledger has a grant whose service began before its grant date."""
    return bool(np.any(inception_days(ledger) != _NONE))
