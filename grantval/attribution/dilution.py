"""Incremental shares of share-based awards in diluted earnings per share: the treasury stock method.

Rules (paragraphs in ``docs/tax-and-dilution.md``):

- assumed proceeds per unit = exercise price + average unrecognised compensation cost per unit over
  the period (ASC 718-10-45-2 pointing to ASC 260-10-45-29 to 45-34; IAS 33.47A); the average is the
  mean of the unrecognised cost per unit at the start of the period (end of the previous day) and at
  its end; no tax benefit enters the proceeds (ASU 2016-09 removed it);
- incremental shares = units x (1 - proceeds / average share price) when proceeds < average price,
  else none: the award is anti-dilutive and is left out (ASC 260-10-45-23 and 45-25; IAS 33.45-47);
- awards settled in cash (``cash_sar``, ``cash_unit``) issue no shares and are not counted;
- units outstanding for part of the period are weighted by the days they were outstanding
  (ASC 718-10-45-1, IAS 33.38 and 33.48): granted and not yet forfeited, cancelled, exercised,
  expired, or (units) vested, whatever the forfeiture policy;
- awards whose issue depends on a performance condition are contingently issuable shares (ASC
  718-10-45-1 pointing to ASC 260-10-45-48 to 45-57; IAS 33.48): they count only as far as the
  conditions would be met if the end of the period were the end of the contingency period (ASC
  260-10-45-48; IAS 33.52 and 33.56), from the start of the period or the grant date if later.
  Performance units (``psu``) count target units outstanding x the payout in force at the period end
  (:class:`PerformanceUnits`; a stated policy: the ledger's payout is taken as the to-date outcome),
  with the treasury stock method on the shares so counted; a payout of 0 counts none.
  :data:`CONTINGENT_FRACTION` is a further per-grant hook for other kinds.

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
    tranche: np.ndarray | None = None   # the tranche of each lot


def outstanding_lots(ledger, inp, unit_leave_day: np.ndarray | None = None) -> Lots:
    """Lots of every grant settled in shares: tranches from the grant date, less every event, less units
    that vest (share units become issued shares) or expire at the end of the expiration date (options).
    Cash-settled kinds issue no shares and have no lots.

    ``unit_leave_day`` (per tranche, day numbers) replaces the schedule's vesting day of share units
    (performance units whose vesting date in force moved); options ignore it.
    """
    pre = inp.prepared()
    n_t = len(inp.t_qty)
    left = inp.t_qty - np.bincount(inp.c_tranche, weights=inp.c_qty, minlength=n_t)
    award = ledger.grants["award_type"].to_numpy()
    exercisable = flag(award, "exercisable")[inp.t_grant]
    expiry = ledger.grants["expiration_date"].to_numpy("datetime64[D]").astype("datetime64[D]")
    exp_day = np.where(np.isnat(expiry), np.iinfo(np.int64).max // 2, expiry.astype(np.int64) + 1)[inp.t_grant]
    unit_day = pre.t_vest if unit_leave_day is None else unit_leave_day
    leave_day = np.where(exercisable, exp_day, unit_day)
    tranche = np.arange(n_t)
    grant = np.concatenate([inp.t_grant, inp.t_grant[inp.c_tranche], inp.t_grant])
    qty = np.concatenate([inp.t_qty.astype(float), -inp.c_qty.astype(float), -left.astype(float)])
    start = np.concatenate([pre.t_gdate, pre.c_date, leave_day])
    tr = np.concatenate([tranche, np.asarray(inp.c_tranche, dtype=np.int64), tranche])
    shares = ~cash_settled(award)[grant]
    return Lots(grant[shares].astype(np.int64), qty[shares], start[shares].astype(np.int64),
                tr[shares].astype(np.int64))


def cash_settled(award_types: np.ndarray) -> np.ndarray:
    """Per grant: its kind settles in cash (``AwardKind.settlement``): no shares are ever issued for it."""
    from grantval.awards.registry import kinds

    return np.isin(np.asarray(award_types, dtype=object), [k.name for k in kinds() if k.settlement == "cash"])


def contingent_fraction(ledger, period_end) -> np.ndarray:
    """Per grant: the fraction of its units counted (1 unless a kind's hook says otherwise)."""
    award = ledger.grants["award_type"].to_numpy()
    out = np.ones(len(award))
    for name, hook in CONTINGENT_FRACTION.items():
        m = award == name
        if m.any():
            out[m] = np.asarray(hook(ledger, m, period_end), dtype=float)[m]
    return out


#: ``contingent_basis`` of units without a performance condition, and of performance units
NOT_CONTINGENT = "not contingent"
PAYOUT_IN_FORCE = ("performance payout in force at the period end, taken as the outcome if the period "
                   "ended now (policy to be reviewed by an accountant)")
HOOKED = "fraction of a kind registered in CONTINGENT_FRACTION"

_NO_DAY = np.iinfo(np.int64).max


@dataclass
class Contingency:
    """Per tranche, as at one day: shares counted per unit, the assessment used, the vesting day in force."""

    payout: np.ndarray     # shares per unit counted (1 for kinds without a performance condition)
    assessed: np.ndarray   # day number of the ``performance`` row used (``_NO_DAY`` where none)
    vest_day: np.ndarray   # day number the units vest (performance units: the vesting date in force)


MARKET_CONDITION = ("market condition: the payout the results to date would earn if the period ended at the "
                    "period end (market_returns / share_prices; ASC 260-10-45-52, IAS 33.54, from memory)")


def market_condition_grants(ledger) -> np.ndarray:
    """Per grant: its ``condition_set`` names a row of the ``market_conditions`` table."""
    from grantval.ledger.ext.market import market_grants

    return market_grants(ledger.grants, ledger.tables)


def performance_units(ledger) -> np.ndarray:
    """Per grant: a ``psu`` whose payout follows the ``performance`` table (not a market condition)."""
    from grantval.attribution.performance import performance_grants

    return performance_grants(ledger)


class PerformanceUnits:
    """The performance conditions of a ledger's psu grants, as contingently issuable shares.

    The shares counted per target unit at a day d are the ``payout`` of the grant's ``performance`` row
    with the latest ``assessed_on`` on or before d (on or before the vesting day in force, once that has
    passed): the payout the expense engine uses (:mod:`grantval.attribution.performance`), taken as the
    number issuable "if the end of the reporting period were the end of the contingency period"
    (ASC 260-10-45-48; IAS 33.52 and 33.56).  That the ledger's payout (the probable outcome, ASC
    718-10-25-20; the best estimate, IFRS 2.19-20) equals the outcome on the results to date is the
    stated policy of ``docs/tax-and-dilution.md``; where the two differ, the ledger needs a row with the
    to-date outcome.
    """

    def __init__(self, ledger, inp):
        from grantval.attribution.performance import Assessments

        psu = performance_units(ledger)
        self.inp, self.ledger = inp, ledger
        self.market = market_condition_grants(ledger)
        self.psu_t = (psu | self.market)[inp.t_grant]
        self.assessments = Assessments(ledger, psu) if (psu | self.market).any() else None

    def at(self, day: int) -> Contingency:
        """Per tranche: the shares counted per unit, the assessment used and the vesting day, as at ``day``."""
        pre = self.inp.prepared()
        n_t = len(self.inp.t_grant)
        if self.assessments is None:
            return Contingency(np.ones(n_t), np.full(n_t, _NO_DAY), pre.t_vest.astype(np.int64))
        A, g_t = self.assessments, self.inp.t_grant
        _, vest_now = A.at(g_t, np.full(n_t, day))
        vest = np.where(self.psu_t & (vest_now != _NO_DAY), vest_now, pre.t_vest).astype(np.int64)
        pay_row, _, day_row = A.in_force(g_t, np.minimum(vest, day))
        payout = np.where(self.psu_t, pay_row, 1.0)
        assessed = np.where(self.psu_t, day_row, _NO_DAY)
        if self.market.any():
            payout, assessed = self._market(payout, assessed, vest, day)
        return Contingency(payout, assessed, vest)

    def _market(self, payout, assessed, vest, day: int):
        """Market-condition tranches granted and not vested on ``day``: the payout if the period ended then."""
        from grantval.ledger.ext.market import payouts_if_ended

        pre = self.inp.prepared()
        live_t = self.market[self.inp.t_grant] & (pre.t_gdate <= day) & (vest > day)
        live = np.zeros(len(self.market), dtype=bool)
        live[self.inp.t_grant[live_t]] = True
        if not live.any():
            return payout, assessed
        by_grant = payouts_if_ended(self.ledger, live, np.datetime64(int(day), "D"))
        return (np.where(live_t, by_grant[self.inp.t_grant], payout),
                np.where(live_t, day, assessed))


def _tranche_units(lots: Lots, n_t: int, start: int, end: int) -> np.ndarray:
    """Per tranche: units outstanding on each day of [start, end], averaged over its days."""
    return weighted_units(lots.tranche, lots.qty, lots.start, start, end, n_t)


@dataclass
class GrantDilution:
    """Per grant x period figures of the treasury stock method (arrays of shape (grants, periods))."""

    weighted_units: np.ndarray       # units counted (performance units: contingently issuable shares)
    unrecognised_start: np.ndarray   # unrecognised cost per unit at the end of the day before the period
    unrecognised_end: np.ndarray     # unrecognised cost per unit at the period end
    unrecognised_average: np.ndarray
    exercise_price: np.ndarray       # per grant x period (0 for share units; purchase-plan rights by period)
    proceeds: np.ndarray             # assumed proceeds per unit
    incremental: np.ndarray
    antidilutive: np.ndarray
    weighted_outstanding: np.ndarray | None = None  # units outstanding before any contingency (target units)
    contingent_payout: np.ndarray | None = None     # shares counted per unit outstanding (1: not contingent)
    contingent_assessed: np.ndarray | None = None   # datetime64[D]: the performance row used (NaT: none)
    contingent: np.ndarray | None = None            # per grant: a performance unit (payout in force counted)


def _per_unit(unrec: np.ndarray, units: np.ndarray) -> np.ndarray:
    """Unrecognised cost per unit outstanding; NaN where no unit is outstanding."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(units > 0, unrec / np.where(units > 0, units, 1.0), np.nan)


def _mean_of_points(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Mean of the two points; one point alone where the other has no units; 0 where neither has."""
    both = np.nansum(np.stack([a, b]), axis=0)
    n = np.isfinite(a).astype(int) + np.isfinite(b).astype(int)
    return np.where(n > 0, both / np.maximum(n, 1), 0.0)


def _counted_at(inp, perf: PerformanceUnits, lots: Lots, day: int) -> np.ndarray:
    """Per grant: shares counted at the end of ``day`` (units outstanding x payout in force then)."""
    n_t = len(inp.t_grant)
    units_t = _tranche_units(lots, n_t, day, day)
    return np.bincount(inp.t_grant, weights=units_t * perf.at(day).payout, minlength=inp.n_grants)


def _assessed_dates(inp, c: Contingency, units_t: np.ndarray) -> np.ndarray:
    """Per grant: the latest assessment used by a tranche with units outstanding (NaT where none)."""
    day = np.where((units_t > 0) & (c.assessed != _NO_DAY), c.assessed, np.iinfo(np.int64).min)
    out = np.full(inp.n_grants, np.iinfo(np.int64).min, dtype=np.int64)
    np.maximum.at(out, inp.t_grant, day)
    return np.where(out == np.iinfo(np.int64).min, np.datetime64("NaT", "D"), out.astype("datetime64[D]"))


def grant_dilution(ledger, inp, attribution: str, starts: np.ndarray, ends: np.ndarray,
                   average_price: np.ndarray) -> GrantDilution:
    """The treasury stock method for every grant and period.

    Performance units count as contingently issuable shares: target units outstanding (time-weighted)
    x the payout in force at the period end (:class:`PerformanceUnits`); their unrecognised cost is
    divided by the shares so counted at each of the two points.

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

    n, p, n_t = inp.n_grants, len(ends), len(inp.t_grant)
    perf = PerformanceUnits(ledger, inp)
    s_day = np.asarray(starts, dtype="datetime64[D]").astype(np.int64)
    e_day = np.asarray(ends, dtype="datetime64[D]").astype(np.int64)
    kw = {"attribution": attribution, "forfeitures": "as-occur"}
    shape = (n, p)
    wu, wt, u0, u1 = np.zeros(shape), np.zeros(shape), np.zeros(shape), np.zeros(shape)
    assessed = np.full(shape, np.datetime64("NaT", "D"))
    fixed = outstanding_lots(ledger, inp) if perf.assessments is None else None
    for k in range(p):
        c = perf.at(int(e_day[k]))
        lots = fixed or outstanding_lots(ledger, inp, np.where(perf.psu_t, c.vest_day, inp.prepared().t_vest))
        units_t = _tranche_units(lots, n_t, s_day[k], e_day[k])
        frac = contingent_fraction(ledger, ends[k])
        wt[:, k] = np.bincount(inp.t_grant, weights=units_t, minlength=n)
        wu[:, k] = np.bincount(inp.t_grant, weights=units_t * c.payout, minlength=n) * frac
        assessed[:, k] = _assessed_dates(inp, c, units_t)
        before = int(s_day[k]) - 1
        u0[:, k] = _per_unit(measure(inp, np.datetime64(before, "D"), **kw).unrecognised,
                             _counted_at(inp, perf, lots, before))
        u1[:, k] = _per_unit(measure(inp, ends[k], **kw).unrecognised, _counted_at(inp, perf, lots, int(e_day[k])))
    avg = _mean_of_points(u0, u1)
    price = exercise_prices(ledger, np.asarray(average_price, dtype=float))
    wu = np.maximum(wu, 0.0)
    incr, anti = treasury_stock_shares(wu, price, np.maximum(avg, 0.0), np.asarray(average_price)[None, :])
    with np.errstate(divide="ignore", invalid="ignore"):
        payout = np.where(wt > 0, wu / np.where(wt > 0, wt, 1.0), 1.0)
    return GrantDilution(wu, u0, u1, avg, price, price + avg, incr, anti, wt, payout, assessed,
                         performance_units(ledger) | perf.market)


def exercise_prices(ledger, average_price: np.ndarray) -> np.ndarray:
    """Per grant x period: the price a holder pays per share (currency), part of the assumed proceeds.

    Options: the exercise price; share units: 0; purchase-plan rights: the purchase price if the
    purchase were made at the period's average price, (1 - discount) x min(start price, average price)
    with a look-back, (1 - discount) x average price without one (common practice: the treasury stock
    method's proceeds include what the employee pays: ASC 260-10-45-23 and IAS 33.47A, from memory).
    """
    g = ledger.grants
    award = g["award_type"].to_numpy()
    price = g["exercise_price"].to_numpy(float)
    price = np.where(flag(award, "option_terms") & np.isfinite(price), price, 0.0)
    out = np.repeat(price[:, None], len(average_price), axis=1)
    espp = award == "espp"
    if espp.any():
        start = ledger.assumptions["share_price"].to_numpy(float)[ledger.grant_assumption][espp]
        disc = g["_espp_discount"].to_numpy(float)[espp]
        look = g["_espp_lookback"].to_numpy(bool)[espp]
        paid = np.where(look[:, None], np.minimum(start[:, None], average_price[None, :]), average_price[None, :])
        out[espp] = (1.0 - disc[:, None]) * paid
    return out
