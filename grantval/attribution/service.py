"""The requisite service period of each tranche when it differs from the vesting schedule.

Retirement eligibility: where the plan lets a holder who retires keep the award (vesting
continues on the schedule), service after the retirement-eligible date is not required, so the
requisite service of a tranche ends at the later of the grant date and that date, if before
the vesting date (ASC 718-10-55-87 (from memory: an award that vests on retirement has a
requisite service period ending at retirement eligibility); IFRS 2.15 and IG Example of
non-vesting conditions (from memory): cost is recognised over the period in which the
employee must render service to be entitled to the award).
"""

from __future__ import annotations

import numpy as np


def service_end(ledger, t_vest: np.ndarray) -> np.ndarray:
    """Per tranche: the last day of requisite service (the vest date unless retirement eligibility comes first).

    Parameters
    ----------
    ledger : Ledger
    t_vest : ndarray of datetime64[D]
        Vest date of each tranche of ``ledger.tranches``.
    """
    g = ledger.grants
    t_vest = np.asarray(t_vest, dtype="datetime64[D]")
    if "retirement_eligible_date" not in g:
        return t_vest
    gi = ledger.tranches["grant_idx"].to_numpy()
    retire = g["retirement_eligible_date"].to_numpy("datetime64[D]")[gi]
    gdate = g["grant_date"].to_numpy("datetime64[D]")[gi]
    earlier = np.minimum(t_vest, np.maximum(gdate, retire))
    return np.where(np.isnat(retire), t_vest, earlier)
