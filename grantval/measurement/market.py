"""Grant-date fair values of ledger awards with a market condition (Monte Carlo).

A ``psu`` or ``option`` grant whose ``condition_set`` names a row of ``market_conditions`` is
valued on a simulation of the company and the members of its peer set
(:func:`grantval.pricing.paths.simulate_market`), from the grant date to the condition's
``end_date``:

- units (``psu``) settle in shares at the end of the period: value per target unit
  ``e^{-rT} E[payout S_T]`` (with ``dividend_equivalents`` = yes, ``x e^{qT}``);
- options are exercisable only if the condition is met and are valued as European calls at their
  expected term on the simulated paths (docs/market-conditions.md);
- the cost is recognised whether or not the condition is met (ASC 718-10-30-14; IFRS 2.21), so
  the payout is in the fair value and the units' cost is not scaled by a payout in force.

A TSR period that began before the grant date starts from each member's total return to the grant
date (``market_returns``): only the end window is simulated, from the start levels those returns
give (:func:`grantval.pricing.paths.simulate_market` ``start_level``).

Grants that share a peer set, dates, averaging window and valuation inputs share one simulation
(policy ``mc_paths`` paths, seed ``mc_seed``), so reruns are identical.  Every value carries its
Monte Carlo standard error.

Derived service period: a grant with no vesting schedule (``vest_months`` 0) has the median time
at which the condition is first met, among the simulated paths that meet it, as its requisite
service (ASC 718-10-55-71 and 55-72, from memory).  A share-price hurdle monitored every day
(``monitoring`` = ``any_day``) is met on its first-passage day; a condition measured at the end
of the period can be met only on the end date, so its derived service period is the period.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.dates import year_fraction
from grantval.errors import LedgerError, Problem
from grantval.ledger.ext.market import TSR_METRICS, condition_rows, market_grants, members_of, returns_on
from grantval.pricing.market_condition import derived_service_period, market_award_values
from grantval.pricing.paths import simulate_market
from grantval.pricing.payout import parse_payout_curve

MODEL = "monte_carlo"


@dataclass
class MarketResult:
    """Per grant (NaN outside the valued grants): value per unit, its standard error, derived service."""

    value: np.ndarray
    std_error: np.ndarray
    service_years: np.ndarray
    simulations: int = 0


def condition_mask(ledger) -> np.ndarray:
    """Per grant: the grant has a market condition."""
    return market_grants(ledger.grants, ledger.tables)


def _needs_inputs(ctx, grants: np.ndarray) -> None:
    """Volatility and risk-free rate are required for every grant valued by simulation."""
    a, ai, src = ctx.ledger.assumptions, ctx.ledger.grant_assumption, ctx.ledger.sources["assumptions"]
    problems, seen = [], set()
    for col, values in (("volatility", ctx.volatility), ("risk_free_rate", ctx.risk_free_rate)):
        for i in np.flatnonzero(grants & np.isnan(values)):
            if (ai[i], col) not in seen:
                seen.add((ai[i], col))
                problems.append(Problem(src, int(a["_row"].iat[ai[i]]), col, "is required for grants with a market "
                                        f"condition (used by grant {ctx.ledger.grants['grant_id'].iat[i]})"))
    if problems:
        raise LedgerError(problems)


def _members(ledger, peer_set) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Volatilities, dividend yields and correlation matrix of a peer set's members (company excluded)."""
    t = ledger.tables
    if not isinstance(peer_set, str) or not peer_set:
        return np.zeros(0), np.zeros(0), np.eye(1)
    peers = t["peers"][t["peers"]["peer_set"] == peer_set]
    names = ["self"] + list(peers["peer_id"])
    cor = np.eye(len(names))
    where = {n: i for i, n in enumerate(names)}
    given = t["correlations"][t["correlations"]["peer_set"] == peer_set]
    for a, b, c in zip(given["first"], given["second"], given["correlation"]):
        cor[where[a], where[b]] = cor[where[b], where[a]] = c
    q = np.nan_to_num(peers["dividend_yield"].to_numpy(float), nan=0.0)
    return peers["volatility"].to_numpy(float), q, cor


def _plan(ctx, grants: np.ndarray) -> pd.DataFrame:
    """One row per valued grant: its condition, settlement and simulation key."""
    g = ctx.ledger.grants
    at = np.flatnonzero(grants)
    rows = condition_rows(g, ctx.ledger.tables).loc[at].reset_index(drop=True)
    rows["grant"] = at
    rows["averaging_days"] = np.maximum(np.nan_to_num(rows["averaging_days"].to_numpy(float), nan=0.0), 1).astype(int)
    rows["monitoring"] = rows["monitoring"].where(rows["monitoring"].notna(), "end")
    rows["kind"] = np.where(ctx.award[at] == "option", "option", "unit")
    de = g["dividend_equivalents"].to_numpy(dtype=object)[at] if "dividend_equivalents" in g else np.full(len(at), "no")
    rows["dividend_equivalents"] = de == "yes"
    rows["derive"] = g["vest_months"].to_numpy()[at] == 0
    rows["daily"] = (rows["metric"] == "share_price") & (rows["monitoring"] == "any_day")
    rows["term"] = year_fraction(ctx.grant_date[at], rows["end_date"].to_numpy("datetime64[D]"))
    for name in ("share_price", "volatility", "dividend_yield", "risk_free_rate"):
        rows[name] = getattr(ctx, name)[at]
    rows["peer_set"] = rows["peer_set"].where(rows["peer_set"].notna(), "")
    rows["returns"] = [_start_returns(ctx.ledger, r) for r in rows.itertuples(index=False)]
    rows["returns_key"] = rows["returns"].map(repr)  # hashable text for grouping (None for a period from today)
    return rows


def _start_returns(ledger, r) -> tuple | None:
    """Total returns to the grant date of ``self`` and each member, for a TSR period that began earlier."""
    gd = ledger.grants["grant_date"].to_numpy("datetime64[D]")[r.grant]
    if r.metric not in TSR_METRICS or np.datetime64(r.start_date, "D") >= gd:
        return None
    have = returns_on(ledger.tables, r.condition_set, gd)
    return tuple(have[m] for m in members_of(ledger.tables["peers"], r.peer_set))


_SIM_KEY = ["peer_set", "term", "averaging_days", "daily", "share_price", "volatility", "dividend_yield",
            "risk_free_rate", "returns_key"]
_SETTLE_KEY = ["metric", "monitoring", "kind", "dividend_equivalents", "strike", "expected_term"]


def _simulate(ctx, key: dict, hurdles: list):
    """One simulation of the company (asset 0) and the members of the key's peer set."""
    vol, q, cor = _members(ctx.ledger, key["peer_set"])
    n = 1 + vol.size
    prices = np.r_[key["share_price"], np.ones(n - 1)]  # total returns are scale-free: peers start at 1
    start = None if key["returns"] is None else prices / (1.0 + np.asarray(key["returns"], dtype=float))
    return simulate_market(prices, np.r_[key["volatility"], vol], np.r_[key["dividend_yield"], q],
                           key["risk_free_rate"], key["term"], cor, averaging_days=int(key["averaging_days"]),
                           daily=bool(key["daily"]), start_level=start, hurdles=sorted(set(hurdles)) or None,
                           paths=ctx.mc_paths, seed=ctx.mc_seed)


def _settle_options(sim, s: dict) -> dict:
    """Keyword arguments of :func:`market_award_values` for one settlement key."""
    members = list(range(1, sim.assets))
    opts = dict(monitoring=s["monitoring"], kind=s["kind"], dividend_equivalents=bool(s["dividend_equivalents"]))
    if s["metric"] == "relative_tsr":
        opts["peers"] = members
    if s["metric"] == "index_tsr":
        opts["index"] = 1
    if s["kind"] == "option":
        opts.update(strike=float(s["strike"]), expected_term=float(s["expected_term"]))
    return opts


def _value_group(ctx, rows: pd.DataFrame, out: MarketResult) -> None:
    """Value the grants of one simulation key (in place on ``out``), once per distinct inputs when the
    context carries a cache (what-if scenarios that do not move these grants reuse the simulation)."""
    key = ("market", ctx.mc_paths, ctx.mc_seed) + tuple(
        tuple(map(repr, rows[c].tolist())) for c in _SIM_KEY + _SETTLE_KEY + ["grant", "payout_curve",
                                                                             "negative_tsr_cap", "derive"])
    if ctx.cache is not None and key in ctx.cache:
        grants, value, se, years = ctx.cache[key]
        out.value[grants], out.std_error[grants], out.service_years[grants] = value, se, years
        return
    _simulate_group(ctx, rows, out)
    if ctx.cache is not None:
        g = rows["grant"].to_numpy()
        ctx.cache[key] = (g, out.value[g].copy(), out.std_error[g].copy(), out.service_years[g].copy())


def _simulate_group(ctx, rows: pd.DataFrame, out: MarketResult) -> None:
    """Simulate one key's assets and value its grants (in place on ``out``)."""
    curves = [parse_payout_curve(str(c), None if pd.isna(cap) else float(cap))
              for c, cap in zip(rows["payout_curve"], rows["negative_tsr_cap"])]
    hurdles = [c.threshold for c, d, daily in zip(curves, rows["derive"], rows["daily"]) if d and daily]
    sim = _simulate(ctx, rows.iloc[0].to_dict(), hurdles)
    out.simulations += 1
    for _, sub in rows.groupby(_SETTLE_KEY, dropna=False, sort=False):
        pos = [rows.index.get_loc(i) for i in sub.index]
        vals = market_award_values(sim, [curves[p] for p in pos], sub["metric"].iat[0],
                                   **_settle_options(sim, sub.iloc[0].to_dict()))
        for grant, v in zip(sub["grant"], vals):
            out.value[grant], out.std_error[grant] = v.value, v.standard_error
    for p, (grant, derive, daily) in enumerate(zip(rows["grant"], rows["derive"], rows["daily"])):
        if derive:
            years = derived_service_period(sim, curves[p].threshold).years if daily else float("nan")
            out.service_years[grant] = sim.term if np.isnan(years) else years


def _term_problems(ctx, rows: pd.DataFrame) -> None:
    """An option's expected term must reach the end of its performance period (it is valued from there)."""
    g, src = ctx.ledger.grants, ctx.ledger.sources["grants"]
    short = rows[rows["expected_term"] < rows["term"] - 1e-9]
    if len(short):
        raise LedgerError([Problem(src, int(g["_row"].iat[i]), "condition_set",
                                   f"the option's expected term ({t:.4f} years) ends before its performance period "
                                   f"({p:.4f} years); a longer expected term is needed to value it on the paths")
                           for i, t, p in zip(short["grant"], short["expected_term"], short["term"])])


def value_market(ctx, grants: np.ndarray) -> MarketResult:
    """Fair value per unit (per option) of the grants in the mask ``grants`` that have a market condition.

    Parameters
    ----------
    ctx : ValuationContext
        Valuation inputs (``mc_paths``, ``mc_seed`` from the policy).
    grants : ndarray of bool, per grant
        Grants to value (each must have a market condition).

    Returns
    -------
    MarketResult
        Values (currency per unit), standard errors (currency) and derived service periods
        (years; NaN where the grant has a vesting schedule).
    """
    n = len(grants)
    out = MarketResult(np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan))
    if not grants.any():
        return out
    _needs_inputs(ctx, grants)
    rows = _plan(ctx, grants)
    option = (rows["kind"] == "option").to_numpy()
    rows["strike"] = np.where(option, ctx.strike[rows["grant"]], np.nan)
    rows["expected_term"] = np.where(option, ctx.term_award[rows["grant"]], np.nan)
    _term_problems(ctx, rows[option])
    for _, group in rows.groupby(_SIM_KEY, sort=False, dropna=False):
        _value_group(ctx, group, out)
    return out
