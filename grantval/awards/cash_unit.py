"""Cash-settled units (phantom shares): pay the share price of the vesting date for each unit.

Terms: the vesting schedule.  A liability (IFRS 2.30-33, ASC 718-30-35-1 to 35-3): remeasured
at every reporting date (:mod:`grantval.measurement.remeasure`) until it settles.  Each
tranche settles automatically on its vesting date at the share price of that date (the
``liability_values`` row for the date, else the ``share_price`` of the assumptions row
for the date); no event is recorded for the settlement.  The value reported here is the
grant-date fair value, the share price less the dividends forgone until each tranche
vests, ``S e^{-q t}``, as for RSUs.
"""

from __future__ import annotations

import numpy as np

from grantval.awards import rsu
from grantval.awards.base import AwardKind, KindValues


def value(ctx, grants: np.ndarray) -> KindValues:
    """Grant-date fair value per unit of the grants in ``grants`` (boolean mask per grant)."""
    out = rsu.value(ctx, grants)
    out.term_method[grants] = "vesting period (cash unit, remeasured at each reporting date)"
    return out


KIND = AwardKind(name="cash_unit", description="share unit (phantom share), settled in cash at vesting",
                 option_terms=False, exercisable=False, disclosure_group="cash", value=value, settlement="cash")
