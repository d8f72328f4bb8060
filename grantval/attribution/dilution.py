"""Incremental shares of share-based awards in diluted earnings per share: the treasury stock method.

Rules (paragraphs in ``docs/tax-and-dilution.md``):

- assumed proceeds per unit = exercise price + average unrecognised compensation cost per unit over
  the period (ASC 718-10-45-2 pointing to ASC 260-10-45-29 to 45-34; IAS 33.47A); the average is the
  mean of the unrecognised cost per unit at the start of the period (end of the previous day) and at
  its end; no tax benefit enters the proceeds (ASU 2016-09 removed it);
- incremental shares = units x (1 - proceeds / average share price) when proceeds < average price,
  else none: the award is anti-dilutive and is left out (ASC 260-10-45-23 and 45-25; IAS 33.45-47);
- units outstanding for part of the period are weighted by the days they were outstanding
  (ASC 718-10-45-1, IAS 33.38 and 33.48): granted and not yet forfeited, cancelled, exercised,
  expired, or (units) vested, whatever the forfeiture policy;
- awards whose issue depends on conditions count only as far as the conditions would be met if the
  period ended now (ASC 260-10-45-48, IAS 33.52): :data:`CONTINGENT_FRACTION` is the hook for such
  kinds; the kinds grantval has (options, RSUs with service conditions only) count in full.

:func:`treasury_stock_shares` is the pure numpy core; :func:`grant_dilution` gathers its inputs from
a ledger, its expense engine inputs and the periods.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from grantval.awards.registry import flag
from grantval.errors import InputError

#: award_type -> ``fraction(ledger, grant_mask, period_end) -> ndarray`` of the units that would be
#: issued if the period ended on ``period_end`` (for kinds with performance conditions); kinds not
#: listed count in full
CONTINGENT_FRACTION: dict[str, Callable] = {}


def _array(name: str, value, low: float, strict: bool = False) -> np.ndarray:
    """``value`` as a float array, finite and >= ``low`` (> when ``strict``), else :class:`InputError`."""
    a = np.asarray(value, dtype=float)
    bad = ~np.isfinite(a) | ((a <= low) if strict else (a < low))
    if np.any(bad):
        first = a[bad].ravel()[0]
        what = f"> {low:g}" if strict else f">= {low:g}"
        raise InputError(f"{name} must be finite and {what}; got {first!r}")
    return a


def treasury_stock_shares(units, exercise_price, unrecognised_per_unit, average_price):
    """Incremental shares by the treasury stock method, and which awards are anti-dilutive.

    Parameters
    ----------
    units : array_like
        Units (options or share units) outstanding, time-weighted over the period; shares.
    exercise_price : array_like
        Exercise price per unit (0 for share units); currency per share.
    unrecognised_per_unit : array_like
        Average unrecognised compensation cost per unit over the period; currency per unit.
    average_price : array_like
        Average market price of a share over the period; currency per share, > 0.

    Returns
    -------
    incremental : ndarray or float
        ``units x (1 - proceeds / average_price)`` where the assumed proceeds per unit
        (exercise price + unrecognised cost) are below the average price, else 0; shares.
    antidilutive : ndarray of bool or bool
        Proceeds >= average price (and units > 0): the award is left out.

    Raises
    ------
    InputError
        Naming the argument that is negative, not finite or (``average_price``) not positive.
    """
    q = _array("units", units, 0.0)
    k = _array("exercise_price", exercise_price, 0.0)
    u = _array("unrecognised_per_unit", unrecognised_per_unit, 0.0)
    p = _array("average_price", average_price, 0.0, strict=True)
    q, k, u, p = np.broadcast_arrays(q, k, u, p)
    proceeds = k + u
    dilutive = proceeds < p
    incremental = np.where(dilutive, q * (1.0 - proceeds / p), 0.0)
    antidilutive = ~dilutive & (q > 0)
    if incremental.ndim == 0:
        return float(incremental), bool(antidilutive)
    return incremental, antidilutive


def weighted_units(lot_grant, lot_qty, lot_from, start: int, end: int, n_grants: int) -> np.ndarray:
    """Per grant: units outstanding on each day of [start, end], averaged over the period's days.

    Each lot adds ``lot_qty`` (negative for units leaving) from day number ``lot_from`` on.
    """
    days = end - start + 1
    overlap = np.maximum(end - np.maximum(lot_from, start) + 1, 0)
    return np.bincount(lot_grant, weights=lot_qty * overlap, minlength=n_grants) / days


def units_at(lot_grant, lot_qty, lot_from, day: int, n_grants: int) -> np.ndarray:
    """Per grant: units outstanding at the end of day number ``day``."""
    m = lot_from <= day
    return np.bincount(lot_grant[m], weights=lot_qty[m], minlength=n_grants)


@dataclass
class Lots:
    """Units entering (+) and leaving (-) the outstanding count, per grant, from a day number on."""

    grant: np.ndarray
    qty: np.ndarray
    start: np.ndarray


def outstanding_lots(ledger, inp) -> Lots:
    """Lots of every grant: tranches from the grant date, less every event, less units that vest
    (share units become issued shares) or expire at the end of the expiration date (options)."""
    pre = inp.prepared()
    n_t = len(inp.t_qty)
    left = inp.t_qty - np.bincount(inp.c_tranche, weights=inp.c_qty, minlength=n_t)
    award = ledger.grants["award_type"].to_numpy()
    exercisable = flag(award, "exercisable")[inp.t_grant]
    expiry = ledger.grants["expiration_date"].to_numpy("datetime64[D]").astype("datetime64[D]")
    exp_day = np.where(np.isnat(expiry), np.iinfo(np.int64).max // 2, expiry.astype(np.int64) + 1)[inp.t_grant]
    leave_day = np.where(exercisable, exp_day, pre.t_vest)
    grant = np.concatenate([inp.t_grant, inp.t_grant[inp.c_tranche], inp.t_grant])
    qty = np.concatenate([inp.t_qty.astype(float), -inp.c_qty.astype(float), -left.astype(float)])
    start = np.concatenate([pre.t_gdate, pre.c_date, leave_day])
    return Lots(grant.astype(np.int64), qty, start.astype(np.int64))


def contingent_fraction(ledger, period_end) -> np.ndarray:
    """Per grant: the fraction of its units counted (1 unless a kind's hook says otherwise)."""
    award = ledger.grants["award_type"].to_numpy()
    out = np.ones(len(award))
    for name, hook in CONTINGENT_FRACTION.items():
        m = award == name
        if m.any():
            out[m] = np.asarray(hook(ledger, m, period_end), dtype=float)[m]
    return out


@dataclass
class GrantDilution:
    """Per grant x period figures of the treasury stock method (arrays of shape (grants, periods))."""

    weighted_units: np.ndarray
    unrecognised_start: np.ndarray   # unrecognised cost per unit at the end of the day before the period
    unrecognised_end: np.ndarray     # unrecognised cost per unit at the period end
    unrecognised_average: np.ndarray
    exercise_price: np.ndarray       # per grant (0 for share units)
    proceeds: np.ndarray             # assumed proceeds per unit
    incremental: np.ndarray
    antidilutive: np.ndarray


def _per_unit(unrec: np.ndarray, units: np.ndarray) -> np.ndarray:
    """Unrecognised cost per unit outstanding; NaN where no unit is outstanding."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(units > 0, unrec / np.where(units > 0, units, 1.0), np.nan)


def _mean_of_points(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Mean of the two points; one point alone where the other has no units; 0 where neither has."""
    both = np.nansum(np.stack([a, b]), axis=0)
    n = np.isfinite(a).astype(int) + np.isfinite(b).astype(int)
    return np.where(n > 0, both / np.maximum(n, 1), 0.0)


def grant_dilution(ledger, inp, attribution: str, starts: np.ndarray, ends: np.ndarray,
                   average_price: np.ndarray) -> GrantDilution:
    """The treasury stock method for every grant and period.

    Parameters
    ----------
    ledger : Ledger
    inp : ExpenseInputs
        From :func:`grantval.attribution.inputs.build_inputs`.
    attribution : {"straight-line", "graded"}
        Attribution of the compensation cost (the unrecognised cost follows it).
    starts, ends : ndarray of datetime64[D]
        First and last day of each period.
    average_price : ndarray of float
        Average market price of a share in each period; currency.
    """
    from grantval.attribution.engine import measure

    n, p = inp.n_grants, len(ends)
    lots = outstanding_lots(ledger, inp)
    s_day = np.asarray(starts, dtype="datetime64[D]").astype(np.int64)
    e_day = np.asarray(ends, dtype="datetime64[D]").astype(np.int64)
    kw = {"attribution": attribution, "forfeitures": "as-occur"}
    shape = (n, p)
    wu, u0, u1 = np.zeros(shape), np.zeros(shape), np.zeros(shape)
    for k in range(p):
        frac = contingent_fraction(ledger, ends[k])
        wu[:, k] = weighted_units(lots.grant, lots.qty, lots.start, s_day[k], e_day[k], n) * frac
        before = int(s_day[k]) - 1
        u0[:, k] = _per_unit(measure(inp, np.datetime64(before, "D"), **kw).unrecognised,
                             units_at(lots.grant, lots.qty, lots.start, before, n))
        u1[:, k] = _per_unit(measure(inp, ends[k], **kw).unrecognised,
                             units_at(lots.grant, lots.qty, lots.start, e_day[k], n))
    avg = _mean_of_points(u0, u1)
    price = ledger.grants["exercise_price"].to_numpy(float)
    price = np.where(flag(ledger.grants["award_type"].to_numpy(), "option_terms") & np.isfinite(price), price, 0.0)
    wu = np.maximum(wu, 0.0)
    incr, anti = treasury_stock_shares(wu, price[:, None], np.maximum(avg, 0.0), np.asarray(average_price)[None, :])
    return GrantDilution(wu, u0, u1, avg, price, price[:, None] + avg, incr, anti)
