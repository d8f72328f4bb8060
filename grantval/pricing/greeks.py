"""First-order sensitivities of the Black-Scholes-Merton call value (analytic)."""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr

from grantval.pricing.bsm import d1_d2
from grantval.pricing._inputs import FINITE, NON_NEGATIVE, POSITIVE, finish, prepare

_INV_SQRT_2PI = 1.0 / np.sqrt(2.0 * np.pi)


def bsm_sensitivities(share_price, strike, term, rate, volatility, dividend_yield=0.0):
    """Analytic first derivatives of the BSM call value.

    Parameters
    ----------
    share_price, strike : array_like
        Currency per share, > 0.
    term : array_like
        Years, > 0.
    rate, dividend_yield : array_like
        Continuously compounded decimals per year.
    volatility : array_like
        Decimal per square-root year, > 0.

    Returns
    -------
    dict of float or ndarray
        ``delta`` (dV/dS), ``vega`` (dV/dsigma, per 1.00 of volatility),
        ``term`` (dV/dT per year of term), ``rho`` (dV/dr per 1.00 of rate),
        ``dividend`` (dV/dq per 1.00 of yield).  Divide vega, rho and
        dividend by 100 for a change of one percentage point.

    Notes
    -----
    With ``d1, d2`` as in :func:`grantval.pricing.bsm_value`, ``phi`` the
    standard normal density (Hull, Options, Futures and Other Derivatives,
    chapter on the Greek letters, for dividend-paying shares):
    delta = e^{-qT} N(d1); vega = S e^{-qT} phi(d1) sqrt(T);
    dV/dT = S e^{-qT} phi(d1) sigma / (2 sqrt T) - q S e^{-qT} N(d1) + r K e^{-rT} N(d2)
    (the negative of theta); rho = K T e^{-rT} N(d2); dV/dq = -T S e^{-qT} N(d1).
    """
    (s, k, t, r, sigma, q), scalar = prepare(
        share_price=(share_price, (POSITIVE,)),
        strike=(strike, (POSITIVE,)),
        term=(term, (POSITIVE,)),
        rate=(rate, (FINITE,)),
        volatility=(volatility, (POSITIVE,)),
        dividend_yield=(dividend_yield, (NON_NEGATIVE,)),
    )
    sq = np.sqrt(t)
    d1, d2 = d1_d2(s, k, t, r, sigma, q)
    fs = s * np.exp(-q * t)
    pk = k * np.exp(-r * t)
    pdf = _INV_SQRT_2PI * np.exp(-0.5 * d1 * d1)
    n1, n2 = ndtr(d1), ndtr(d2)
    out = {
        "delta": np.exp(-q * t) * n1,
        "vega": fs * pdf * sq,
        "term": fs * pdf * sigma / (2.0 * sq) - q * fs * n1 + r * pk * n2,
        "rho": t * pk * n2,
        "dividend": -t * fs * n1,
    }
    return {key: finish(val, scalar) for key, val in out.items()}
