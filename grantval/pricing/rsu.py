"""Grant-date fair value of restricted stock units."""

from __future__ import annotations

import numpy as np

from grantval.pricing._inputs import NON_NEGATIVE, finish, prepare


def rsu_value(share_price, term, dividend_yield=0.0):
    """Fair value of a share unit that earns no dividends before it vests.

    ``value = S e^{-q T}``: the share price less the present value of the
    dividends the holder forgoes until delivery (common practice for units
    without dividend equivalents).

    Parameters
    ----------
    share_price : array_like
        Share price (fair market value) at the grant date, >= 0.
    term : array_like
        Years from the grant date to vesting (delivery), >= 0.
    dividend_yield : array_like, optional
        Continuous dividend yield, decimal per year, >= 0.  Zero gives the
        share price itself (units that carry dividend equivalents).

    Returns
    -------
    float or ndarray
        Value per unit.
    """
    (s, t, q), scalar = prepare(
        share_price=(share_price, (NON_NEGATIVE,)),
        term=(term, (NON_NEGATIVE,)),
        dividend_yield=(dividend_yield, (NON_NEGATIVE,)),
    )
    return finish(s * np.exp(-q * t), scalar)
