"""Expected term of plain options by the simplified method."""

from __future__ import annotations

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import NON_NEGATIVE, as_float_array, check, finish, prepare


def simplified_formula(average_vesting_years, contractual_years):
    """The simplified method on plain arrays (no checks): (average vesting time + contractual term) / 2, years."""
    return (average_vesting_years + contractual_years) / 2.0


def simplified_term(vesting_years, contractual_years, weights=None):
    """Expected term by the simplified method of SEC Staff Accounting Bulletin Topic 14.D.2.

    ``expected term = (weighted-average vesting time + contractual term) / 2``.

    Parameters
    ----------
    vesting_years : array_like
        Vesting time of each tranche in years from the grant date.  The last
        axis holds the tranches of one award; a scalar or 1-D input with no
        ``weights`` is one tranche per award (cliff vesting).
    contractual_years : array_like
        Contractual term in years, broadcast against the awards.
    weights : array_like, optional
        Share of the award in each tranche, on the same last axis as
        ``vesting_years`` (need not sum to 1; they are normalised).  When
        given, the last axis of ``vesting_years`` is the tranche axis.

    Returns
    -------
    float or ndarray
        Expected term in years.

    Examples
    --------
    Four annual tranches of 25 % and a ten-year term give 6.25 years:

    >>> simplified_term([1, 2, 3, 4], 10, weights=[1, 1, 1, 1])
    6.25
    """
    vest = as_float_array("vesting_years", vesting_years)
    check("vesting_years", vest, NON_NEGATIVE)
    if weights is None:
        avg = vest
    else:
        w = as_float_array("weights", weights)
        check("weights", w, NON_NEGATIVE)
        try:
            vest_b, w_b = np.broadcast_arrays(vest, w)
        except ValueError:
            raise InputError("weights must have the shape of vesting_years (tranches on the last axis)") from None
        if vest_b.ndim == 0:
            vest_b, w_b = vest_b[None], w_b[None]
        total = w_b.sum(axis=-1)
        if np.any(total <= 0):
            raise InputError("weights of an award must not all be zero")
        avg = (vest_b * w_b).sum(axis=-1) / total
    (avg, contract), scalar = prepare(
        vesting_years=(avg, ()), contractual_years=(contractual_years, (NON_NEGATIVE,))
    )
    if np.any(avg > contract):
        raise InputError("vesting_years must not exceed contractual_years")
    scalar = scalar or (weights is not None and np.ndim(vesting_years) == 1 and np.ndim(contractual_years) == 0)
    return finish(simplified_formula(avg, contract), scalar)
