"""The requisite service period of each tranche when it differs from the vesting schedule.

Retirement eligibility: where the plan lets a holder who retires keep the award (vesting
continues on the schedule), service after the retirement-eligible date is not required, so the
requisite service of a tranche ends at the later of the grant date and that date, if before
the vesting date (ASC 718-10-55-87 (from memory: an award that vests on retirement has a
requisite service period ending at retirement eligibility); IFRS 2.15 and IG Example of
non-vesting conditions (from memory): cost is recognised over the period in which the
employee must render service to be entitled to the award).

Derived service period: an award with a market condition and no vesting schedule has as its
requisite service the derived service period of its valuation (the median time at which the
condition is first met on the simulated paths that meet it; ASC 718-10-55-71 to 55-72, from
memory; :mod:`grantval.measurement.market`), ending no later than the settlement date.  Cost of an
award whose requisite service has been rendered is not reversed when the holder leaves later
(ASC 718-10-30-14 and IFRS 2.21 for market conditions), so a forfeiture dated after the derived
service period is refused here rather than reversing cost.
"""

from __future__ import annotations

import numpy as np

from grantval.dates import DAYS_PER_YEAR
from grantval.errors import LedgerError, Problem


def service_end(ledger, t_vest: np.ndarray, service_years: np.ndarray | None = None) -> np.ndarray:
    """Per tranche: the last day of requisite service (the vest date unless retirement eligibility
    or a derived service period comes first).

    Parameters
    ----------
    ledger : Ledger
    t_vest : ndarray of datetime64[D]
        Vest date of each tranche of ``ledger.tranches``.
    service_years : ndarray, optional
        Per grant: derived service period, years from the grant date (NaN where the schedule applies).
    """
    ends = _retirement_end(ledger, np.asarray(t_vest, dtype="datetime64[D]"))
    if service_years is None or np.isnan(service_years).all():
        return ends
    derived = derived_end(ledger, service_years)[ledger.tranches["grant_idx"].to_numpy()]
    ends = np.where(np.isnat(derived), ends, np.minimum(ends, derived))
    _no_forfeit_after(ledger, ends, ~np.isnat(derived))
    return ends


def derived_end(ledger, service_years: np.ndarray) -> np.ndarray:
    """Per grant: grant date + derived service period (whole days of 365.25 a year; NaT where none)."""
    gdate = ledger.grants["grant_date"].to_numpy("datetime64[D]")
    days = np.rint(np.nan_to_num(service_years, nan=0.0) * DAYS_PER_YEAR).astype(np.int64)
    return np.where(np.isnan(service_years), np.datetime64("NaT"), gdate + days.astype("timedelta64[D]"))


def _no_forfeit_after(ledger, ends: np.ndarray, derived_t: np.ndarray) -> None:
    """Refuse a forfeiture after a derived service period: the service was rendered, cost stays."""
    ch = ledger.changes
    t = ch["tranche_idx"].to_numpy()
    late = (ch["kind"].to_numpy() == "forfeit") & derived_t[t] & (ch["date"].to_numpy("datetime64[D]") > ends[t])
    if not late.any():
        return
    ev = ledger.events
    problems = [Problem(ledger.sources["events"], int(ev["_row"].iat[e]), "event_date",
                        f"a forfeiture after the derived service period of grant {ev['grant_id'].iat[e]} (ended "
                        f"{ends[ti]}): the requisite service was rendered, so its cost is not reversed; record "
                        "the leaver as a cancel if the units lapse")
                for e, ti in zip(ch["event_idx"].to_numpy()[late], t[late])]
    raise LedgerError(problems)


def _retirement_end(ledger, t_vest: np.ndarray) -> np.ndarray:
    """Per tranche: the vest date, or the retirement-eligible date (not before the grant date) if earlier."""
    g = ledger.grants
    if "retirement_eligible_date" not in g:
        return t_vest
    gi = ledger.tranches["grant_idx"].to_numpy()
    retire = g["retirement_eligible_date"].to_numpy("datetime64[D]")[gi]
    gdate = g["grant_date"].to_numpy("datetime64[D]")[gi]
    earlier = np.minimum(t_vest, np.maximum(gdate, retire))
    return np.where(np.isnat(retire), t_vest, earlier)
