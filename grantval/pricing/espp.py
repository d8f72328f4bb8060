"""Fair value of employee share purchase plan (ESPP) purchase rights.

The components follow ASC 718-50-55 (the illustrations carried over from FASB
Technical Bulletin 97-1): a purchase right with a look-back is a share at a
discount plus an at-the-money call on the rest of a share (plus a put when the
number of shares varies).  The derivation is in ``docs/purchase-plans.md``.

"Per share" throughout: per share the employee's withholdings buy at the
offering-start purchase price ``(1 - d) S_0``, i.e. per ``(1 - d) S_0`` of
withholdings.  An offering with several purchase dates, each looking back to
the offering start, is one option per purchase date: call this function with
``term`` set to each purchase date and weight by the share of the
withholdings each purchase uses.
"""

from __future__ import annotations

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import FINITE, NON_NEGATIVE, POSITIVE, finish, prepare
from grantval.pricing.bsm import _bsm

BASES = ("fixed_shares", "fixed_withholding")
DISCOUNT = (lambda a: (a >= 0) & (a < 1), "from 0 up to but excluding 1")


def _check_choices(basis, lookback=True) -> None:
    """``basis`` one of :data:`BASES` and ``lookback`` a bool, or :class:`InputError`."""
    if basis not in BASES:
        raise InputError(f"basis must be 'fixed_shares' or 'fixed_withholding'; got {basis!r}")
    if not isinstance(lookback, (bool, np.bool_)):
        raise InputError(f"lookback must be True or False; got {lookback!r}")


def _prepared(prices: dict, term, rate, volatility, dividend_yield, discount):
    """:func:`prepare` of the ``prices`` (name -> (value, rules)) and the common market inputs, in that order."""
    return prepare(**prices, term=(term, (NON_NEGATIVE,)), rate=(rate, (FINITE,)),
                   volatility=(volatility, (NON_NEGATIVE,)), dividend_yield=(dividend_yield, (NON_NEGATIVE,)),
                   discount=(discount, (DISCOUNT,)))


def espp_value(
    share_price,
    term,
    rate,
    volatility,
    dividend_yield=0.0,
    discount=0.15,
    lookback=True,
    basis="fixed_shares",
):
    """Fair value of an ESPP purchase right, per share purchasable at the start price.

    Parameters
    ----------
    share_price : array_like
        Share price at the offering (grant) date ``S_0``, currency, >= 0.
    term : array_like
        Years from the offering date to the purchase date, >= 0.
    rate : array_like
        Risk-free rate, continuously compounded decimal per year.
    volatility : array_like
        Volatility of the share's log return, decimal per square-root year, >= 0.
    dividend_yield : array_like, optional
        Continuous dividend yield, decimal per year, >= 0.
    discount : array_like, optional
        Purchase discount ``d`` as a decimal (0.15 = the purchase price is 85%
        of the reference price), from 0 up to but excluding 1.
    lookback : bool, optional
        True: the purchase price is ``(1 - d) min(S_0, S_T)``.  False: it is
        ``(1 - d) S_T`` (no look-back).
    basis : {"fixed_shares", "fixed_withholding"}
        ``"fixed_shares"``: the number of shares is fixed at the offering
        date (ASC 718-50-55-2, Type A, maximum number of shares);
        ``"fixed_withholding"``: the employee buys as many shares as the
        withholdings allow at the purchase date (Type B, variable number).

    Returns
    -------
    float or ndarray
        Value per share purchasable at ``(1 - d) S_0``, currency.

    Notes
    -----
    With ``c`` and ``p`` the Black-Scholes-Merton call and put struck at
    ``S_0`` expiring at ``T``:

    - look-back, fixed shares: ``d S_0 e^{-qT} + (1 - d) c``;
    - look-back, fixed withholding: ``d S_0 e^{-qT} + (1 - d) c + d p``
      (equal to ``c + d S_0 e^{-rT}``);
    - no look-back, fixed shares: ``d S_0 e^{-qT}``;
    - no look-back, fixed withholding: ``d S_0 e^{-rT}`` (a known cash
      amount, ``d / (1 - d)`` of the withholdings, at the purchase date).
    """
    _check_choices(basis, lookback)
    (s, t, r, sigma, q, d), scalar = _prepared({"share_price": (share_price, (NON_NEGATIVE,))}, term, rate,
                                               volatility, dividend_yield, discount)
    return finish(_espp(s, t, r, sigma, q, d, bool(lookback), basis == "fixed_shares"), scalar)


def _espp(s, t, r, sigma, q, d, lookback, fixed_shares):
    """The component formulas on broadcast float arrays (no checks)."""
    share_part = d * s * np.exp(-q * t)
    if not lookback:
        return share_part if fixed_shares else d * s * np.exp(-r * t)
    strike = np.where(s > 0, s, 1.0)
    call = np.where(s > 0, _bsm(s, strike, t, r, sigma, q, True), 0.0)
    value = share_part + (1.0 - d) * call
    if not fixed_shares:
        value = value + d * np.where(s > 0, _bsm(s, strike, t, r, sigma, q, False), 0.0)
    return value


def espp_reset_increment(
    share_price,
    start_price,
    term,
    rate,
    volatility,
    dividend_yield=0.0,
    discount=0.15,
    basis="fixed_shares",
):
    """Incremental value of resetting a look-back purchase right to today's lower share price.

    A reset (a modification of the purchase right) replaces the reference price of the look-back,
    the offering-start price ``S_0``, by the share price ``S`` on the reset date, ``S <= S_0``; the
    purchase date is unchanged.  The increment is the value of the right referenced to ``S`` less
    that of the right referenced to ``S_0``, both on the reset date (ASC 718-20-35-3).

    Parameters
    ----------
    share_price : array_like
        Share price ``S`` on the reset date, the new reference price, currency, > 0.
    start_price : array_like
        Offering-start share price ``S_0`` (the reference price before the reset), currency,
        ``>= share_price``.
    term : array_like
        Years from the reset date to the purchase date, >= 0.
    rate, volatility, dividend_yield : array_like
        As :func:`espp_value`, on the reset date.
    discount : array_like, optional
        Purchase discount ``d``, from 0 up to but excluding 1.
    basis : {"fixed_shares", "fixed_withholding"}
        As :func:`espp_value`; under ``"fixed_shares"`` the number of shares stays that fixed at
        the offering start.

    Returns
    -------
    float or ndarray
        Increment per share purchasable at the original start purchase price ``(1 - d) S_0``
        (the unit of :func:`espp_value`), currency, >= 0.

    Notes
    -----
    With ``c(K)`` and ``p(K)`` the Black-Scholes-Merton call and put on ``S`` struck at ``K``
    over ``term`` (derivation in ``docs/purchase-plans.md``):

    - fixed shares: ``(1 - d) [S_0 e^{-r t} - p(S_0) - S e^{-r t} + p(S)]``;
    - fixed withholding: ``(S_0 / S) c(S) - c(S_0)``.
    """
    _check_choices(basis)
    (s, s0, t, r, sigma, q, d), scalar = _prepared(
        {"share_price": (share_price, (POSITIVE,)), "start_price": (start_price, (POSITIVE,))},
        term, rate, volatility, dividend_yield, discount)
    if np.any(s > s0 * (1 + 1e-12)):
        raise InputError("share_price must not exceed start_price: a reset lowers the look-back's reference price")
    return finish(_reset_increment(s, s0, t, r, sigma, q, d, basis == "fixed_shares"), scalar)


def _reset_increment(s, s0, t, r, sigma, q, d, fixed_shares):
    """The reset increment on broadcast float arrays (no checks)."""
    if fixed_shares:
        owed = lambda k: k * np.exp(-r * t) - _bsm(s, k, t, r, sigma, q, False)  # noqa: E731
        return (1.0 - d) * (owed(s0) - owed(s))
    return (s0 / s) * _bsm(s, s, t, r, sigma, q, True) - _bsm(s, s0, t, r, sigma, q, True)


def espp_remaining_value(
    share_price,
    reference_price,
    term,
    rate,
    volatility,
    dividend_yield=0.0,
    discount=0.15,
    lookback=True,
    basis="fixed_shares",
):
    """Value of a purchase right during its offering: today's share price, the start reference price.

    The value of a right granted at reference price ``K`` (the offering-start price ``S_0``), measured
    on a later date when the share price is ``S`` and ``term`` years remain to the purchase date: the
    "original award immediately before" of a modification such as a roll-over into a new offering
    (ASC 718-20-35-3).  At ``S = K`` it is :func:`espp_value` of a new offering at ``K``.

    Parameters
    ----------
    share_price : array_like
        Share price ``S`` on the measurement date, currency, > 0.
    reference_price : array_like
        The look-back's reference price ``K`` (the offering-start price), currency, > 0.
    term : array_like
        Years from the measurement date to the purchase date, >= 0.
    rate, volatility, dividend_yield, discount, lookback, basis
        As :func:`espp_value`, on the measurement date.

    Returns
    -------
    float or ndarray
        Value per share purchasable at the start purchase price ``(1 - d) K`` (the unit of
        :func:`espp_value`), currency.

    Notes
    -----
    With ``c`` the Black-Scholes-Merton call on ``S`` struck at ``K`` over ``term`` (derivation in
    ``docs/purchase-plans.md``):

    - look-back, fixed shares: ``d S e^{-qt} + (1 - d) c``;
    - look-back, fixed withholding: ``d K e^{-rt} + c``;
    - no look-back, fixed shares: ``d S e^{-qt}``;
    - no look-back, fixed withholding: ``d K e^{-rt}``.
    """
    _check_choices(basis, lookback)
    (s, k, t, r, sigma, q, d), scalar = _prepared(
        {"share_price": (share_price, (POSITIVE,)), "reference_price": (reference_price, (POSITIVE,))},
        term, rate, volatility, dividend_yield, discount)
    return finish(_remaining(s, k, t, r, sigma, q, d, bool(lookback), basis == "fixed_shares"), scalar)


def _remaining(s, k, t, r, sigma, q, d, lookback, fixed_shares):
    """The in-progress value on broadcast float arrays (no checks)."""
    part = d * s * np.exp(-q * t) if fixed_shares else d * k * np.exp(-r * t)
    if not lookback:
        return part
    call = _bsm(s, k, t, r, sigma, q, True)
    return part + ((1.0 - d) * call if fixed_shares else call)
