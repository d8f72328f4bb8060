"""Monte Carlo valuation of awards with a market condition (one import for the parts).

- :mod:`grantval.pricing.paths`: :func:`simulate_market`, the correlated
  risk-neutral paths of the company and its peers or index;
- :mod:`grantval.pricing.payout`: :class:`PayoutCurve`, :func:`parse_payout_curve`;
- :mod:`grantval.pricing.market_condition`: :func:`market_award_value`,
  :func:`market_award_values`, :func:`metric_values`,
  :func:`derived_service_period`.

Typical use: simulate once, value many awards sharing the peer set and dates::

    sim = simulate_market(prices, vols, yields, rate, 3.0, corr, averaging_days=20)
    for curve in ("25:0.5;50:1;75:2", "30:0.25;55:1;90:2"):
        v = market_award_value(sim, curve, "relative_tsr")
        print(v.value, v.standard_error)

The method and its checks are in ``docs/market-conditions.md``.
"""

from grantval.pricing.market_condition import (
    METRICS,
    MarketValue,
    ServicePeriod,
    derived_service_period,
    market_award_value,
    market_award_values,
    metric_values,
)
from grantval.pricing.paths import (
    DEFAULT_PATHS,
    DEFAULT_SEED,
    MAX_PATHS,
    TRADING_DAYS,
    MarketSimulation,
    correlation_factor,
    simulate_market,
)
from grantval.pricing.payout import PayoutCurve, parse_payout_curve

__all__ = [
    "METRICS", "MarketValue", "ServicePeriod", "derived_service_period", "market_award_value",
    "market_award_values", "metric_values", "DEFAULT_PATHS", "DEFAULT_SEED", "MAX_PATHS",
    "TRADING_DAYS", "MarketSimulation", "correlation_factor", "simulate_market", "PayoutCurve",
    "parse_payout_curve",
]
