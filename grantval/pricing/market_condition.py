"""Values of awards with a market condition, on one :class:`MarketSimulation`.

An award's payout (units earned per target unit) is a :class:`PayoutCurve` of
a metric of the simulated paths:

``relative_tsr``
    percentile rank of the company among its peers, ``100 x`` the share of
    peers whose TSR is lower than the company's (0 to 100);
``index_tsr``
    company TSR minus the index's TSR (decimal);
``absolute_tsr``
    company TSR (decimal);
``share_price``
    company share price (currency): with ``monitoring="end"`` its average over
    the last ``averaging_days`` days of the period; with ``"any_day"`` the
    highest ``averaging_days``-day average reached on any trading day.

A unit settles in shares at the end of the period: value per target unit
``e^{-rT} E[payout S_T]`` (``x e^{qT}`` with dividend equivalents).  An option
with a market condition is exercisable only when the condition is met; it is
valued as a European call at its expected term on the simulated paths (its
value at the period end is the Black-Scholes-Merton value over the term left).
The cost is recognised whether or not the condition is met (ASC 718-10-30-14;
IFRS 2.21), so these values are the grant-date fair values.

Every value carries its Monte Carlo standard error, computed on the means of
antithetic pairs (independent pairs), after a control variate on the
discounted share price ``e^{-rT} S_T``, whose mean ``S_0 e^{-qT}`` is known.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.errors import InputError
from grantval.pricing.bsm import _bsm
from grantval.pricing.paths import TRADING_DAYS, MarketSimulation
from grantval.pricing.payout import PayoutCurve, parse_payout_curve

METRICS = ("relative_tsr", "index_tsr", "absolute_tsr", "share_price")
MONITORING = ("end", "any_day")
KINDS = ("unit", "option")
_OPTIONS = {"peers", "index", "monitoring", "kind", "dividend_equivalents", "strike", "expected_term", "control_variate"}


@dataclass(frozen=True)
class MarketValue:
    """Monte Carlo value of one award with a market condition.

    Attributes
    ----------
    value : float
        Fair value per target unit (per option), currency.
    standard_error : float
        Standard error of ``value``, currency.
    payout_probability : float
        Risk-neutral probability that the payout is above zero.
    expected_payout : float
        Risk-neutral mean payout, units earned per target unit.
    """

    value: float
    standard_error: float
    payout_probability: float
    expected_payout: float


@dataclass(frozen=True)
class ServicePeriod:
    """Derived service period of a hurdle (median first-passage time).

    Attributes
    ----------
    years : float
        Median time, among the paths that reach the hurdle within the period,
        from the valuation date to the first day the hurdle is met (NaN when
        no path reaches it).
    standard_error : float
        Approximate standard error of ``years`` (order-statistic interval).
    probability : float
        Share of paths that reach the hurdle within the period.
    """

    years: float
    standard_error: float
    probability: float


def metric_values(sim: MarketSimulation, metric: str, *, peers=None, index=None, monitoring="end") -> np.ndarray:
    """The metric of every path (cached on ``sim``).

    Parameters
    ----------
    sim : MarketSimulation
        From :func:`grantval.pricing.paths.simulate_market`.
    metric : {"relative_tsr", "index_tsr", "absolute_tsr", "share_price"}
        See the module notes.
    peers : sequence of int, optional
        Asset numbers of the peer set (``relative_tsr``); default every asset
        but the company.
    index : int, optional
        Asset number of the index (``index_tsr``; required).
    monitoring : {"end", "any_day"}
        For ``share_price`` only; ``"any_day"`` needs ``daily=True``.

    Returns
    -------
    ndarray, shape (paths,)
    """
    key = _metric_key(sim, metric, peers, index, monitoring)
    if key not in sim.cache:
        sim.cache[key] = _metric(sim, *key)
    return sim.cache[key]


def _metric_key(sim, metric, peers, index, monitoring):
    if metric not in METRICS:
        raise InputError(f"metric must be one of {', '.join(METRICS)}; got {metric!r}")
    if monitoring not in MONITORING:
        raise InputError(f"monitoring must be 'end' or 'any_day'; got {monitoring!r}")
    if monitoring == "any_day" and metric != "share_price":
        raise InputError("monitoring='any_day' applies to the share_price metric only")
    if metric == "relative_tsr":
        chosen = tuple(range(1, sim.assets)) if peers is None else tuple(int(p) for p in peers)
        if not chosen or any(not 1 <= p < sim.assets for p in chosen) or len(set(chosen)) != len(chosen):
            raise InputError(f"peers must be distinct asset numbers from 1 to {sim.assets - 1}; got {peers!r}")
        return (metric, chosen, monitoring)
    if metric == "index_tsr":
        if index is None or not 1 <= int(index) < sim.assets:
            raise InputError(f"index must be an asset number from 1 to {sim.assets - 1}; got {index!r}")
        return (metric, int(index), monitoring)
    return (metric, None, monitoring)


def _metric(sim, metric, which, monitoring):
    company = sim.tsr[:, 0]
    if metric == "relative_tsr":
        lower = (sim.tsr[:, list(which)] < company[:, None]).sum(axis=1)
        return 100.0 * lower / len(which)
    if metric == "index_tsr":
        return company.astype(float) - sim.tsr[:, which]
    if metric == "absolute_tsr":
        return company.astype(float)
    if monitoring == "end":
        return sim.end_average
    if sim.max_price is None:
        raise InputError("monitoring='any_day' needs a simulation with daily=True")
    return sim.max_price


def _curve(curve) -> PayoutCurve:
    if isinstance(curve, PayoutCurve):
        return curve
    if isinstance(curve, str):
        return parse_payout_curve(curve)
    raise InputError(f"curve must be a PayoutCurve or text like '25:0.5;50:1;75:2'; got {curve!r}")


def market_award_value(
    sim: MarketSimulation,
    curve,
    metric: str,
    *,
    peers=None,
    index=None,
    monitoring="end",
    kind="unit",
    dividend_equivalents=False,
    strike=None,
    expected_term=None,
    control_variate=True,
) -> MarketValue:
    """Fair value of one award with a market condition, on a shared simulation.

    Parameters
    ----------
    sim : MarketSimulation
        Paths of the company (asset 0) and its peers or index.
    curve : PayoutCurve or str
        Payout per target unit as a function of the metric (``"25:0.5;50:1"``).
    metric, peers, index, monitoring
        See :func:`metric_values`.
    kind : {"unit", "option"}
        ``"unit"``: settles in shares at the period end.  ``"option"``: a call
        on one share, exercisable only if the condition is met, valued as a
        European option expiring ``expected_term`` years after the valuation
        date.
    dividend_equivalents : bool
        Units only: the holder receives the dividends paid during the period
        (as reinvested shares), so a unit is worth ``S_T e^{qT}`` at the end.
    strike : float
        Options: exercise price, currency, > 0.
    expected_term : float, optional
        Options: years from the valuation date to expected exercise,
        at least the period's ``term`` (default the ``term``).
    control_variate : bool
        Use the discounted share price as a control variate (default True).

    Returns
    -------
    MarketValue
        Value per target unit (or per option) with its standard error.
    """
    curve = _curve(curve)
    x = metric_values(sim, metric, peers=peers, index=index, monitoring=monitoring)
    payout = curve(x, sim.tsr[:, 0])
    per_share = _settlement(sim, kind, dividend_equivalents, strike, expected_term)
    disc = np.exp(-sim.rate * sim.term)
    y = disc * payout * per_share
    value, se = _estimate(sim, y, control_variate)
    return MarketValue(value, se, float(np.mean(payout > 0)), float(np.mean(payout)))


def market_award_values(sim: MarketSimulation, curves, metric: str, **options) -> list[MarketValue]:
    """:func:`market_award_value` for many curves sharing a metric and settlement terms.

    Parameters
    ----------
    sim : MarketSimulation
        The shared simulation.
    curves : sequence of PayoutCurve or str
        One payout curve per award.
    metric : str
        As in :func:`metric_values`.
    **options
        The keyword arguments of :func:`market_award_value`, common to all.

    Returns
    -------
    list of MarketValue
        One per curve, equal to :func:`market_award_value` of each.

    Notes
    -----
    When the metric takes few distinct values (``relative_tsr`` with ``P``
    peers takes ``P + 1``; up to 512), each curve is evaluated on the distinct
    values only, and its mean and standard error follow from sums over the
    path pairs computed once (a quadratic form on the levels), so a thousand
    awards cost about as much as one; otherwise the curves are valued one by one.
    """
    unknown = set(options) - _OPTIONS
    if unknown:
        raise InputError(f"unknown option(s) for market_award_values: {', '.join(sorted(unknown))}")
    curves = [_curve(c) for c in curves]
    pick = {k: options[k] for k in ("peers", "index", "monitoring") if k in options}
    x = metric_values(sim, metric, **pick)
    codes = _level_codes(sim, x, _metric_key(sim, metric, pick.get("peers"), pick.get("index"), pick.get("monitoring", "end")))
    if codes is None or not curves:
        return [market_award_value(sim, c, metric, **options) for c in curves]
    levels, negative, code = codes
    settle = (options.get("kind", "unit"), options.get("dividend_equivalents", False),
              options.get("strike"), options.get("expected_term"))
    moments = _pair_moments(sim, code, levels.size, _settlement(sim, *settle), options.get("control_variate", True))
    counts = np.bincount(code, minlength=levels.size) / sim.paths
    out = []
    for first in range(0, len(curves), 256):
        group = curves[first : first + 256]
        table = np.stack([c(levels, np.where(negative, -1.0, 1.0)) for c in group], axis=1)  # (levels, curves)
        values, errors = _estimate_from_moments(moments, table)
        prob = counts @ (table > 0)
        mean = counts @ table
        out.extend(MarketValue(float(v), float(e), float(p), float(m)) for v, e, p, m in zip(values, errors, prob, mean))
    return out


def _pair_moments(sim, code, size, per_share, control_variate):
    """Sums over path pairs from which every curve's estimate follows (see :func:`_estimate_columns`).

    A pair's value is ``Y = v . f`` with ``f`` the curve's payout on each
    level and ``v`` the pair's weights on its members' levels, so
    ``sum Y = g . f``, ``sum Y^2 = f . G f`` and ``sum dev Y = h . f``.
    """
    weight = (0.5 * np.exp(-sim.rate * sim.term) * per_share).reshape(-1, 2)
    a, b = code.reshape(-1, 2).T
    wa, wb = weight.T
    g = np.bincount(a, wa, size) + np.bincount(b, wb, size)
    flat = np.concatenate([a * size + a, b * size + b, a * size + b, b * size + a])
    big = np.bincount(flat, np.concatenate([wa * wa, wb * wb, wa * wb, wa * wb]), size * size).reshape(size, size)
    control = None
    if control_variate:
        dev, offset = _control(sim)
        if dev @ dev > 0:
            h = np.bincount(a, wa * dev, size) + np.bincount(b, wb * dev, size)
            control = (h, float(dev @ dev), offset)
    return g, big, control, a.size


def _estimate_from_moments(moments, table):
    """Means and standard errors of the pair values of each column of ``table`` (levels x curves)."""
    g, big, control, n = moments
    means = g @ table / n
    syy = np.einsum("uk,uk->k", table, big @ table) - n * means**2
    if control is not None:
        h, scc, offset = control
        syc = h @ table
        beta = syc / scc
        means = means - beta * offset
        syy = syy - syc**2 / scc
    return means, np.sqrt(np.maximum(syy, 0.0) / (n - 1) / n)


def _level_codes(sim, x, key, most=512):
    """Distinct (metric, company TSR < 0) levels and each path's code, or None when too many."""
    ckey = ("levels",) + key
    if ckey not in sim.cache:
        found = None
        levels = np.unique(x)
        if levels.size <= most:
            negative = sim.tsr[:, 0] < 0
            code = 2 * np.searchsorted(levels, x) + negative
            found = (np.repeat(levels, 2), np.tile([False, True], levels.size), code)
        sim.cache[ckey] = found
    return sim.cache[ckey]


def _settlement(sim, kind, dividend_equivalents, strike, expected_term) -> np.ndarray:
    """Value at the period end of what one earned unit delivers, per path (cached)."""
    if kind not in KINDS:
        raise InputError(f"kind must be 'unit' or 'option'; got {kind!r}")
    end = sim.end_price[:, 0].astype(float)
    q0, vol0 = sim.dividend_yield[0], sim.volatility[0]
    if kind == "unit":
        if strike is not None or expected_term is not None:
            raise InputError("strike and expected_term apply to kind='option' only")
        return end * np.exp(q0 * sim.term) if dividend_equivalents else end
    if dividend_equivalents:
        raise InputError("dividend_equivalents applies to kind='unit' only")
    if strike is None or not np.isfinite(strike) or strike <= 0:
        raise InputError(f"strike must be a number greater than zero for an option; got {strike!r}")
    te = sim.term if expected_term is None else float(expected_term)
    if not np.isfinite(te) or te < sim.term - 0.5 / TRADING_DAYS:
        raise InputError(f"expected_term must be at least the performance period ({sim.term:.4f} years); got {expected_term!r}")
    key = ("option", float(strike), te)
    if key not in sim.cache:
        left = max(te - sim.term, 0.0)
        sim.cache[key] = _bsm(end, float(strike), left, sim.rate, vol0, q0, True)
    return sim.cache[key]


def _estimate(sim: MarketSimulation, y: np.ndarray, control_variate: bool) -> tuple[float, float]:
    """Mean and standard error of ``y`` (one value per path) over pairs, with the control variate."""
    values, errors = _estimate_columns(sim, y.reshape(-1, 2).mean(axis=1)[:, None], control_variate)
    return float(values[0]), float(errors[0])


def _estimate_columns(sim: MarketSimulation, pairs: np.ndarray, control_variate: bool):
    """Means and standard errors of the columns of ``pairs`` (one row per path pair).

    With ``control_variate``, each column ``Y`` is replaced by
    ``Y - beta (C - E[C])`` where ``C`` is the pair mean of ``e^{-rT} S_T``,
    ``E[C] = S_0 e^{-qT}`` and ``beta = cov(Y, C) / var(C)`` (estimated on the
    same pairs; its bias is of order 1/pairs).
    """
    n = pairs.shape[0]
    centred = pairs - pairs.mean(axis=0)
    means = pairs.mean(axis=0)
    if control_variate:
        dev, offset = _control(sim)
        var = float(dev @ dev)
        if var > 0:
            beta = (dev @ centred) / var
            means = means - beta * offset
            centred = centred - np.outer(dev, beta)
    if n < 2:
        return means, np.full(means.shape, np.nan)
    errors = np.sqrt((centred * centred).sum(axis=0) / (n - 1) / n)
    return means, errors


def _control(sim: MarketSimulation):
    """Centred pair means of ``e^{-rT} S_T`` and their mean's excess over ``S_0 e^{-qT}`` (cached)."""
    key = ("control",)
    if key not in sim.cache:
        c = np.exp(-sim.rate * sim.term) * sim.end_price[:, 0].astype(float)
        c = c.reshape(-1, 2).mean(axis=1)
        known = sim.share_price[0] * np.exp(-sim.dividend_yield[0] * sim.term)
        sim.cache[key] = (c - c.mean(), c.mean() - known)
    return sim.cache[key]


def derived_service_period(sim: MarketSimulation, hurdle: float) -> ServicePeriod:
    """Median time to first meet a share-price hurdle, among paths that meet it.

    For an award whose market condition can be met at any time and that has
    no explicit service period, the derived service period is the median of
    the times at which the condition is first met, on the paths on which it is
    met (ASC 718-10-55-71, from memory; see docs/market-conditions.md).

    Parameters
    ----------
    sim : MarketSimulation
        A simulation with ``daily=True`` whose ``hurdles`` include ``hurdle``.
    hurdle : float
        The company share price (its ``averaging_days``-day average) to reach.

    Returns
    -------
    ServicePeriod
    """
    where = np.flatnonzero(np.isclose(sim.hurdles, hurdle, rtol=1e-12, atol=0))
    if where.size == 0:
        raise InputError(
            f"hurdle {hurdle!r} was not recorded; pass it in simulate_market(..., hurdles=[...], daily=True)"
        )
    days = sim.hit_day[:, where[0]]
    hit = np.sort(days[days <= sim.days]).astype(float)
    n = hit.size
    if n == 0:
        return ServicePeriod(float("nan"), float("nan"), 0.0)
    median = float(np.median(hit)) / TRADING_DAYS
    half = 0.5 * np.sqrt(n)  # +-1 standard deviation of a binomial(n, 1/2) rank
    lo = hit[max(0, int(np.floor(n / 2 - half)))]
    hi = hit[min(n - 1, int(np.ceil(n / 2 + half)))]
    return ServicePeriod(median, float(hi - lo) / 2 / TRADING_DAYS, n / sim.paths)
