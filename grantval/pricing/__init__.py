"""Valuation core: pure numpy/scipy pricing functions on arrays.

No dates, files or pandas live here.  Terms and vesting are in years; rates
and dividend yields are continuously compounded decimals per year; volatility
is a decimal per square-root year.  Every public function checks and
broadcasts its inputs, values a whole batch per call and returns a float for
scalar inputs.
"""

from grantval.pricing.bsm import bsm_value
from grantval.pricing.espp import espp_remaining_value, espp_reset_increment, espp_value
from grantval.pricing.greeks import bsm_sensitivities
from grantval.pricing.lattice import DEFAULT_STEPS, lattice_value
from grantval.pricing.rsu import rsu_value
from grantval.pricing.montecarlo import (DEFAULT_PATHS, DEFAULT_SEED, MAX_PATHS, MarketSimulation, MarketValue,
                                         PayoutCurve, ServicePeriod, derived_service_period, market_award_value,
                                         market_award_values, metric_values, parse_payout_curve, simulate_market)
from grantval.pricing.terms import simplified_term

__all__ = ["bsm_value", "bsm_sensitivities", "lattice_value", "simplified_term", "rsu_value", "DEFAULT_STEPS",
           "espp_value", "espp_reset_increment", "espp_remaining_value", "simulate_market", "MarketSimulation", "market_award_value",
           "market_award_values",
           "metric_values", "derived_service_period", "MarketValue", "ServicePeriod", "PayoutCurve",
           "parse_payout_curve", "DEFAULT_PATHS", "DEFAULT_SEED", "MAX_PATHS"]
