"""Performance share units: a target number of units, settled in shares, whose final number depends on
a non-market performance condition.

``quantity`` is the target; the payout in force (``performance`` table: the outcome judged
probable under ASC 718-10-25-20, the best estimate under IFRS 2.19-20) scales it.  The grant-date
fair value per unit is that of an RSU (the share price less the present value of the dividends not
received until vesting): a non-market condition is not reflected in the fair value, it changes the
number of units expected to vest (ASC 718-10-30-27 (from memory); IFRS 2.19).  Cost is attributed by
:mod:`grantval.attribution.performance`.
"""

from __future__ import annotations

from grantval.awards import rsu
from grantval.awards.base import AwardKind


def value(ctx, grants):
    """Fair value per target unit: as an RSU, each tranche to its scheduled vesting date."""
    out = rsu.value(ctx, grants)
    out.model[grants] = "psu"
    out.term_method[grants] = "vesting period (performance unit)"
    return out


KIND = AwardKind(name="psu", description="performance share unit, settled in shares", option_terms=False,
                 exercisable=False, disclosure_group="performance_units", value=value)
