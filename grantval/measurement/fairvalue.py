"""Grant-date fair values of a ledger's awards.

This module asks each award kind (:mod:`grantval.awards`) to value its grants and
assembles the results; it holds no pricing formula itself.

Methods (stated in every output):

- options, ``bsm``: Black-Scholes-Merton with the expected term given in the
  assumptions, or by the simplified method (SEC SAB Topic 14.D.2) from the
  tranches' vesting times weighted by their quantities;
- options, ``lattice``: the employee-option lattice over the contractual term,
  each tranche with its own vesting date; an award-level value is the
  quantity-weighted average of its tranches;
- RSUs: the share price less the present value of dividends forgone until
  each tranche vests (S e^{-q t}); award level as for the lattice;
- awards with a market condition: Monte Carlo (:mod:`grantval.measurement.market`), with the
  standard error of each value and, without a vesting schedule, the derived service period;
- a ``fair_value`` in the assumptions is used as given and marked supplied;
- kinds declaring ``valued_per_tranche`` (purchase-plan enrollments) keep each
  tranche's own value under the ``award`` unit too; only their award-level
  ``grant_value`` (reported per grant) is the quantity-weighted mean.

Identical valuation inputs are valued once.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from grantval.awards.registry import flag, kinds
from grantval.ledger.model import Ledger
from grantval.measurement.context import ValuationContext, build_context
from grantval.measurement.market import MODEL as MARKET_MODEL
from grantval.measurement.market import value_market
from grantval.measurement.table import fair_value_table
from grantval.policy import Policy

if TYPE_CHECKING:  # pragma: no cover
    from grantval.scenarios.shifts import Shifts


@dataclass
class FairValues:
    """Fair values of every grant and tranche of a ledger.

    Attributes
    ----------
    table : DataFrame
        The output table: one row per grant (``valuation_unit`` award) or per
        tranche (``tranche``), with the inputs used.
    tranche_value : ndarray
        Fair value per unit used for each row of ``ledger.tranches`` (the
        award value for every tranche under the award unit, except for kinds
        valued per tranche always, which keep each tranche's value).
    grant_value : ndarray
        Fair value per unit of each grant (quantity-weighted over tranches).
    distinct_valuations : int
        Number of distinct input sets actually priced.
    std_error : ndarray, optional
        Per grant: Monte Carlo standard error of the value per unit, currency (NaN when not simulated).
    service_years : ndarray, optional
        Per grant: derived service period, years from the grant date (NaN where the schedule applies).
    """

    table: pd.DataFrame
    tranche_value: np.ndarray
    grant_value: np.ndarray
    distinct_valuations: int
    std_error: np.ndarray | None = None
    service_years: np.ndarray | None = None


def _value_by_kind(ctx: ValuationContext):
    """Ask every award kind present to value its grants; merge their values."""
    n_g, n_t = len(ctx.award), len(ctx.gi)
    tv, t_term = np.full(n_t, np.nan), np.full(n_t, np.nan)
    award_term = np.full(n_g, np.nan)
    model = np.full(n_g, "", dtype=object)
    term_method = np.full(n_g, "", dtype=object)
    distinct = 0
    market = ctx.market if ctx.market is not None else np.zeros(n_g, dtype=bool)
    for kind in kinds():
        grants = (ctx.award == kind.name) & ~ctx.is_supplied & ~market
        if not grants.any():
            continue
        got = kind.value(ctx, grants)
        mt = grants[ctx.gi]
        tv[mt], t_term[mt] = got.tranche_value[mt], got.tranche_term[mt]
        award_term[grants], model[grants] = got.award_term[grants], got.model[grants]
        term_method[grants] = got.term_method[grants]
        distinct += got.distinct
    mc = value_market(ctx, market & ~ctx.is_supplied)
    simulated = ~np.isnan(mc.value)
    tv[simulated[ctx.gi]] = mc.value[ctx.gi][simulated[ctx.gi]]
    model[simulated] = MARKET_MODEL
    opt = simulated & (ctx.award == "option")
    term_method[simulated & ~opt] = "performance period (market condition)"
    term_method[opt & np.isnan(ctx.given_term)] = "simplified method (SAB Topic 14.D.2); paths to the period end"
    term_method[opt & ~np.isnan(ctx.given_term)] = "given; paths to the period end"
    award_term[simulated] = np.where(ctx.award[simulated] == "option", ctx.term_award[simulated], np.nan)
    supplied = ctx.is_supplied
    tv[supplied[ctx.gi]] = ctx.supplied[ctx.gi][supplied[ctx.gi]]
    model[supplied], term_method[supplied] = "supplied", ""
    return tv, t_term, award_term, model.astype(str), term_method.astype(str), distinct + mc.simulations, mc


def _grant_values(ctx: ValuationContext, tv: np.ndarray) -> np.ndarray:
    """Quantity-weighted mean per grant, taken about the first tranche's value.

    A grant whose tranches share one value gets exactly that value.
    """
    gi, n_g, n_t = ctx.gi, len(ctx.award), len(ctx.gi)
    first = np.searchsorted(gi, np.arange(n_g))
    ref = tv[np.minimum(first, max(n_t - 1, 0))] if n_t else np.zeros(n_g)
    spread = np.bincount(gi, weights=(tv - ref[gi]) * ctx.t_qty, minlength=n_g)
    return ref + spread / np.where(ctx.g_qty > 0, ctx.g_qty, 1)


def _per_tranche(ctx: ValuationContext) -> np.ndarray:
    """Per tranche: it keeps its own value (``tranche`` unit, or a kind valued per tranche always)."""
    own = flag(ctx.award, "valued_per_tranche") & ~ctx.is_supplied
    return own[ctx.gi] | ctx.per_tranche


def compute_fair_values(ledger: Ledger, policy: Policy, shifts: "Shifts | None" = None,
                        cache: dict | None = None) -> FairValues:
    """Value every grant of a checked ledger under ``policy``.

    Parameters
    ----------
    ledger : Ledger
        A ledger returned by :func:`grantval.ledger.load_ledger`.
    policy : Policy
        Uses ``valuation_unit`` and ``lattice_steps``.
    shifts : Shifts, optional
        A what-if scenario's assumption changes (:mod:`grantval.scenarios.shifts`).
    cache : dict, optional
        Values of input sets already priced (kept across scenarios).

    Raises
    ------
    UsageError
        When a scenario's shifts give an invalid assumption.
    """
    ctx = build_context(ledger, policy, cache)
    if shifts is not None:
        from grantval.scenarios.shifts import apply_shifts

        apply_shifts(ctx, shifts)
    tv, t_term, award_term, model, term_method, distinct, mc = _value_by_kind(ctx)
    grant_value = _grant_values(ctx, tv)
    tranche_value = np.where(_per_tranche(ctx), tv, grant_value[ctx.gi])
    table = fair_value_table(ctx, model, term_method, award_term, t_term, tranche_value, grant_value,
                             mc.std_error, mc.service_years)
    return FairValues(table=table, tranche_value=tranche_value, grant_value=grant_value,
                      distinct_valuations=distinct, std_error=mc.std_error, service_years=mc.service_years)
