"""Employee share purchase plan (ESPP) enrollments, settled in shares.

An enrollment (ledger tables ``espp_offerings`` and ``espp_enrollments``, see
:mod:`grantval.ledger.ext.espp`) is a grant with one tranche per purchase date; each purchase
period is its own purchase right from the offering start to its purchase date, valued by
:func:`grantval.pricing.espp_value` with ``term`` = purchase date - start (years), per share the
period's withholding buys at the start purchase price ``(1 - d) S_0``.

With ``max_shares`` (a cap ``M`` on the shares bought on each purchase date) and ``N_0`` shares at
the start price, the right is worth, per share counted (``min(N_0, M)``), with ``k = M / N_0``:

- fixed shares, or fixed withholding with ``k <= 1`` and a look-back: the fixed-shares value
  (the cap leaves ``min(N_0, M)`` shares whatever the price);
- fixed withholding, ``k > 1``, look-back: ``V_fw - d k P(S_0 / k)`` (the employee buys
  ``min(N_0 S_0 / S_T, M)`` shares below ``S_0``: gain per ``N_0`` ``d min(S_0, k S_T)``);
- fixed withholding, no look-back: ``(d S_0 e^{-rT} - d k P(S_0 / k)) / min(1, k)`` (gain per
  ``N_0`` ``d min(S_0, k S_T)`` at every price),

``P(K)`` the Black-Scholes-Merton put struck at ``K`` (derivation in ``docs/purchase-plans.md``).

The kind declares ``valued_per_tranche``: every purchase period keeps its own value under either
``valuation_unit`` (the periods have different terms; a mean over them is not the value of any
of them).
"""

from __future__ import annotations

import numpy as np

from grantval.awards.base import AwardKind, KindValues
from grantval.measurement.unique import unique_call
from grantval.pricing import bsm_value, espp_value


def _column(ctx, name: str, default) -> np.ndarray:
    g = ctx.ledger.grants
    return g[name].to_numpy() if name in g.columns else np.full(len(g), default)


def cap_put(share_price, term, rate, volatility, dividend_yield, discount, ratio) -> np.ndarray:
    """``d k P(S_0 / k)``: what a cap ``k = M / N_0 > 0`` takes from a fixed-withholding right, per ``N_0``."""
    k = np.asarray(ratio, float)
    put = bsm_value(share_price, np.asarray(share_price, float) / k, term, rate, volatility, dividend_yield,
                    kind="put")
    return np.asarray(discount, float) * k * np.atleast_1d(put)


def value(ctx, grants: np.ndarray) -> KindValues:
    """Fair value per share of every purchase period (tranche) of the ESPP grants in ``grants``."""
    out = KindValues.empty(len(grants), len(ctx.gi))
    gi = ctx.gi
    disc = _column(ctx, "_espp_discount", np.nan).astype(float)
    look = _column(ctx, "_espp_lookback", False)
    basis = _column(ctx, "_espp_basis", "")
    ratio = _column(ctx, "_espp_cap_ratio", np.nan).astype(float)
    distinct = 0
    for lb in (True, False):
        for b in ("fixed_shares", "fixed_withholding"):
            mg = grants & (look == lb) & (basis == b)
            m = mg[gi]
            if not m.any():
                continue
            args = {"share_price": ctx.share_price[gi][m], "term": ctx.t_vest[m],
                    "rate": ctx.risk_free_rate[gi][m], "volatility": ctx.volatility[gi][m],
                    "dividend_yield": ctx.dividend_yield[gi][m], "discount": disc[gi][m]}
            vals, d = unique_call(espp_value, args, ctx.cache, lookback=lb, basis=b)
            distinct += d
            if b == "fixed_withholding":
                vals = _capped(args, vals, ratio[gi][m], lb, ctx.cache)
            out.tranche_value[m] = vals
    out.award_term[grants] = ctx.avg_vest[grants]
    out.model[grants] = "espp"
    out.term_method[grants] = "offering start to each purchase date (ESPP)"
    out.distinct = distinct
    return out


def _capped(args: dict, vals: np.ndarray, k: np.ndarray, lookback: bool, cache) -> np.ndarray:
    """Fixed-withholding values with the ``max_shares`` cap applied (``k`` NaN: no cap)."""
    capped = ~np.isnan(k)
    if not capped.any():
        return vals
    vals = vals.copy()
    sub = {n: a[capped] for n, a in args.items()}
    kk = k[capped]
    if lookback:
        fixed, _ = unique_call(espp_value, sub, cache, lookback=True, basis="fixed_shares")
        put = cap_put(ratio=np.maximum(kk, 1.0), **sub)
        vals[capped] = np.where(kk <= 1.0, fixed, vals[capped] - put)
    else:
        vals[capped] = (vals[capped] - cap_put(ratio=kk, **sub)) / np.minimum(1.0, kk)
    return vals


KIND = AwardKind(name="espp", description="employee share purchase plan right, settled in shares",
                 option_terms=False, exercisable=False, disclosure_group="purchase_plans", value=value,
                 priced_with_volatility=True, valued_per_tranche=True)
