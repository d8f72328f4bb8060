"""The valuation inputs of a ledger's awards as arrays, before any pricing.

A :class:`ValuationContext` holds, per grant and per tranche, everything the
award kinds' valuers need (share price, volatility, terms, expected terms ...).
What-if scenarios change a context (:mod:`grantval.scenarios.shifts`) before
the award kinds value it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.dates import year_fraction
from grantval.ledger.model import Ledger
from grantval.policy import Policy
from grantval.pricing import DEFAULT_STEPS
from grantval.pricing.terms import simplified_formula


@dataclass
class ValuationContext:
    """Valuation inputs of every grant (``g_*`` names are per grant, ``t_*`` per tranche).

    Prices are currency per share; rates, yields and volatility decimals per year;
    terms in years.  ``term_award`` and ``term_tranche`` are the BSM expected terms
    (given in the assumptions, or by the simplified method) of each award and each
    tranche; ``moved`` marks the grants a scenario changed (None outside what-if runs).
    """

    ledger: Ledger
    award: np.ndarray
    grant_date: np.ndarray
    gi: np.ndarray
    share_price: np.ndarray
    volatility: np.ndarray
    risk_free_rate: np.ndarray
    dividend_yield: np.ndarray
    strike: np.ndarray
    contract: np.ndarray
    given_term: np.ndarray
    supplied: np.ndarray
    multiple: np.ndarray
    exit_rate: np.ndarray
    model: np.ndarray
    t_vest: np.ndarray
    t_qty: np.ndarray
    g_qty: np.ndarray
    avg_vest: np.ndarray
    term_award: np.ndarray
    term_tranche: np.ndarray
    steps: int
    per_tranche: bool
    cache: dict | None = None
    moved: np.ndarray | None = None
    #: per grant: the grant has a market condition (valued by :mod:`grantval.measurement.market`)
    market: np.ndarray | None = None
    mc_paths: int = 100_000
    mc_seed: int = 20261202

    @property
    def is_supplied(self) -> np.ndarray:
        """Per grant: a fair value was supplied by an outside valuation."""
        return ~np.isnan(self.supplied)


def build_context(ledger: Ledger, policy: Policy, cache: dict | None = None) -> ValuationContext:
    """Collect the valuation inputs of a checked ledger under ``policy``.

    Uses the policy's ``valuation_unit`` and ``lattice_steps``.
    """
    g, a, tr = ledger.grants, ledger.assumptions, ledger.tranches
    ai = ledger.grant_assumption
    gi = tr["grant_idx"].to_numpy()
    gdate = g["grant_date"].to_numpy("datetime64[D]")
    award = g["award_type"].to_numpy()
    col = lambda name: a[name].to_numpy(float)[ai]  # noqa: E731  per-grant assumption
    from grantval.awards.registry import flag
    from grantval.measurement.market import condition_mask

    has_term = flag(award, "option_terms")
    contract = np.where(has_term, year_fraction(gdate, g["expiration_date"].to_numpy("datetime64[D]")), np.nan)
    t_vest = np.maximum(year_fraction(gdate[gi], tr["vest_date"].to_numpy("datetime64[D]")), 0.0)
    t_qty = tr["quantity"].to_numpy(float)
    g_qty = np.bincount(gi, weights=t_qty, minlength=len(g))
    avg_vest = np.bincount(gi, weights=t_qty * t_vest, minlength=len(g)) / np.where(g_qty > 0, g_qty, 1)
    given = col("expected_term_years")
    return ValuationContext(
        ledger=ledger, award=award, grant_date=gdate, gi=gi,
        share_price=col("share_price"), volatility=col("volatility"), risk_free_rate=col("risk_free_rate"),
        dividend_yield=np.nan_to_num(col("dividend_yield"), nan=0.0),
        strike=g["exercise_price"].to_numpy(float), contract=contract, given_term=given,
        supplied=col("fair_value"), multiple=col("exercise_multiple"),
        exit_rate=np.nan_to_num(col("post_vest_exit_rate"), nan=0.0), model=a["model"].to_numpy()[ai],
        t_vest=t_vest, t_qty=t_qty, g_qty=g_qty, avg_vest=avg_vest,
        term_award=np.where(np.isnan(given), simplified_formula(avg_vest, contract), given),
        term_tranche=np.where(np.isnan(given[gi]), simplified_formula(t_vest, contract[gi]), given[gi]),
        steps=policy.lattice_steps or DEFAULT_STEPS, per_tranche=policy.valuation_unit == "tranche", cache=cache,
        market=condition_mask(ledger), mc_paths=policy.mc_paths, mc_seed=policy.mc_seed,
    )
