"""Black-Scholes-Merton value of European options with a continuous dividend yield."""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr

from grantval.errors import InputError
from grantval.pricing._inputs import FINITE, NON_NEGATIVE, POSITIVE, finish, prepare

KINDS = ("call", "put")


def d1_d2(s, k, t, r, sigma, q):
    """The Black-Scholes-Merton ``d1`` and ``d2`` on plain arrays (no checks; needs ``sigma sqrt(t) > 0``, ``s > 0``).

    ``d1 = (ln(S/K) + (r - q) T) / (sigma sqrt T) + sigma sqrt(T) / 2``, ``d2 = d1 - sigma sqrt T``.
    Shared by the values (:func:`bsm_value`) and the sensitivities (:mod:`grantval.pricing.greeks`).
    """
    total_vol = sigma * np.sqrt(t)
    d1 = (np.log(s / k) + (r - q) * t) / total_vol + 0.5 * total_vol
    return d1, d1 - total_vol


def _bsm(s, k, t, r, sigma, q, is_call):
    """Black-Scholes-Merton formula on broadcast float arrays (no checks).

    Degenerate cases are exact: with ``t == 0``, ``sigma == 0`` or ``s == 0`` the
    value is the discounted forward intrinsic value ``max(+-(s e^{-qt} - k e^{-rt}), 0)``,
    which is the intrinsic value when ``t == 0``.
    """
    s, k, t, r, sigma, q = np.broadcast_arrays(s, k, t, r, sigma, q)
    fwd_s = s * np.exp(-q * t)  # present value of the share delivered at t
    pv_k = k * np.exp(-r * t)
    sign = np.where(is_call, 1.0, -1.0)
    total_vol = sigma * np.sqrt(t)
    regular = (total_vol > 0) & (s > 0)
    safe_s = np.where(regular, s, 1.0)
    safe_sigma = np.where(regular, sigma, 1.0)
    safe_t = np.where(regular, t, 1.0)
    d1, d2 = d1_d2(safe_s, k, safe_t, r, safe_sigma, q)
    value = sign * (fwd_s * ndtr(sign * d1) - pv_k * ndtr(sign * d2))
    degenerate = np.maximum(sign * (fwd_s - pv_k), 0.0)
    # rounding can give a value a hair below zero far out of the money
    return np.where(regular, np.maximum(value, 0.0), degenerate)


def bsm_value(share_price, strike, term, rate, volatility, dividend_yield=0.0, kind="call"):
    """Black-Scholes-Merton value of a European call or put.

    Parameters
    ----------
    share_price : array_like
        Share price at the valuation date, currency per share, >= 0.
    strike : array_like
        Exercise price, currency per share, > 0.
    term : array_like
        Time to expiry in years, >= 0.
    rate : array_like
        Risk-free rate, continuously compounded decimal per year (0.04 = 4%).
    volatility : array_like
        Volatility of the share's log return, decimal per square-root year, >= 0.
    dividend_yield : array_like, optional
        Continuous dividend yield, decimal per year, >= 0.  Default 0.
    kind : {"call", "put"}
        Option type.

    Returns
    -------
    float or ndarray
        Value per option in the currency of ``share_price``; a float when every
        input is a scalar, else an array of the broadcast shape.

    Raises
    ------
    InputError
        (a :class:`ValueError`) naming the first invalid argument.

    Notes
    -----
    ``C = S e^{-qT} N(d1) - K e^{-rT} N(d2)``, ``P = K e^{-rT} N(-d2) - S e^{-qT} N(-d1)``,
    ``d1 = (ln(S/K) + (r - q + sigma^2/2) T) / (sigma sqrt(T))``, ``d2 = d1 - sigma sqrt(T)``
    (Merton 1973).  Term 0 gives the intrinsic value and volatility 0 the
    discounted forward intrinsic value, exactly.
    """
    if kind not in KINDS:
        raise InputError(f"kind must be 'call' or 'put'; got {kind!r}")
    (s, k, t, r, sigma, q), scalar = prepare(
        share_price=(share_price, (NON_NEGATIVE,)),
        strike=(strike, (POSITIVE,)),
        term=(term, (NON_NEGATIVE,)),
        rate=(rate, (FINITE,)),
        volatility=(volatility, (NON_NEGATIVE,)),
        dividend_yield=(dividend_yield, (NON_NEGATIVE,)),
    )
    return finish(_bsm(s, k, t, r, sigma, q, kind == "call"), scalar)
