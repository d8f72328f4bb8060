"""Output tables of an expense run, as DataFrames (no file I/O here)."""

from __future__ import annotations

import functools

import numpy as np
import pandas as pd

from grantval.attribution.inputs import ExpenseInputs
from grantval.attribution.periods import ExpenseSchedule


def money(cents: np.ndarray) -> np.ndarray:
    """Currency amounts (float) from whole cents."""
    return np.asarray(cents, dtype=np.int64) / 100.0


def period_labels(ends: np.ndarray) -> list[str]:
    """Column labels of periods: their last day in ISO form."""
    return [str(d) for d in np.asarray(ends, dtype="datetime64[D]")]


def wide_by_grant(inp: ExpenseInputs, award_type, fv_per_unit, quantity, ends, cents) -> pd.DataFrame:
    """One row per grant, one column per period, and a total column."""
    frame = pd.DataFrame({
        "grant_id": inp.grant_id, "group": inp.group, "award_type": award_type,
        "grant_date": inp.grant_date, "quantity": quantity, "fair_value_per_unit": fv_per_unit,
    })
    labels = period_labels(ends)
    block = pd.DataFrame(money(cents), columns=labels)
    frame = pd.concat([frame, block], axis=1)
    frame["total"] = money(cents.sum(axis=1))
    return frame


def wide_by_group(inp: ExpenseInputs, ends, cents) -> pd.DataFrame:
    """One row per group (blank group shown as '(none)'), one column per period, total."""
    groups = np.where(inp.group == "", "(none)", inp.group).astype(str)
    names, inverse = np.unique(groups, return_inverse=True)
    sums = np.zeros((len(names), cents.shape[1]), dtype=np.int64)
    np.add.at(sums, inverse, cents)
    frame = pd.DataFrame({"group": names})
    frame = pd.concat([frame, pd.DataFrame(money(sums), columns=period_labels(ends))], axis=1)
    frame["total"] = money(sums.sum(axis=1))
    return frame, sums


def _long(keys: dict[str, np.ndarray], ends, columns: dict[str, np.ndarray]) -> pd.DataFrame:
    """Long table: each key row repeated once per period end, with the (rows x periods) cents columns."""
    n = next(iter(columns.values())).shape[0]
    arrays = _long_block(keys, np.asarray(ends, dtype="datetime64[D]"), columns, 0, n)
    return pd.DataFrame(dict(zip([*keys, "period_end", *columns], arrays)))


def _long_block(keys: dict[str, np.ndarray], ends, columns: dict[str, np.ndarray], at: int, stop: int):
    """Key rows ``at:stop`` of the long table of :func:`_long`: its column arrays (keys, ``period_end``, columns)."""
    p = len(ends)
    return ([np.repeat(v[at:stop], p) for v in keys.values()] + [np.tile(ends, stop - at)]
            + [money(v[at:stop].ravel()) for v in columns.values()])


def long_blocks(keys: dict[str, np.ndarray], ends, columns: dict[str, np.ndarray], rows: int) -> list:
    """The long table of :func:`_long` in blocks of about ``rows`` rows (whole key rows each).

    A list of functions, each returning one block's column arrays in the order keys,
    ``period_end``, columns, so that a writer makes and holds one block at a time
    rather than the whole table (key rows x periods), in any process.
    """
    n, p = next(iter(columns.values())).shape
    ends = np.asarray(ends, dtype="datetime64[D]")
    step = max(1, rows // max(p, 1))
    return [functools.partial(_long_block, keys, ends, columns, at, min(n, at + step)) for at in range(0, n, step)]


def long_expense_blocks(inp: ExpenseInputs, sched: ExpenseSchedule, rows: int):
    """``expense.csv`` (see :func:`long_expense`) in blocks: its column names and the blocks."""
    keys, columns = {"grant_id": inp.grant_id, "group": inp.group}, {"expense": sched.expense_cents,
                                                                    "cumulative_expense": sched.cumulative_cents}
    return [*keys, "period_end", *columns], long_blocks(keys, sched.period_ends, columns, rows)


def long_forecast_blocks(inp: ExpenseInputs, sched: ExpenseSchedule, rows: int):
    """``forecast.csv`` (see :func:`long_forecast`) in blocks: its column names and the blocks."""
    keys, columns = {"grant_id": inp.grant_id, "group": inp.group}, {"expense": sched.forecast_cents}
    return [*keys, "period_end", *columns], long_blocks(keys, sched.forecast_ends, columns, rows)


def long_expense(inp: ExpenseInputs, sched: ExpenseSchedule) -> pd.DataFrame:
    """``expense.csv``: grant_id, group, period_end, expense, cumulative_expense (life to date)."""
    return _long({"grant_id": inp.grant_id, "group": inp.group}, sched.period_ends,
                 {"expense": sched.expense_cents, "cumulative_expense": sched.cumulative_cents})


def long_by_group(ends, names, sums) -> pd.DataFrame:
    """``expense_by_group.csv``: group, period_end, expense."""
    return _long({"group": names}, ends, {"expense": sums})


def long_forecast(inp: ExpenseInputs, sched: ExpenseSchedule) -> pd.DataFrame:
    """``forecast.csv``: grant_id, group, period_end, expense."""
    return _long({"grant_id": inp.grant_id, "group": inp.group}, sched.forecast_ends,
                 {"expense": sched.forecast_cents})


def _status(inp: ExpenseInputs, m, granted) -> np.ndarray:
    """Per tranche at the through date: not granted, vested, unvested, forfeited or cancelled (all units gone)."""
    gone = m.outstanding <= 0
    cancelled = gone & (m.cancelled > 0)
    words = np.array(["not granted", "cancelled", "forfeited", "vested", "unvested"], dtype=object)
    # one text object per status, shared by the tranches (not one string per tranche)
    return words[np.select([~granted, cancelled, gone & ~m.vested, m.vested], [0, 1, 2, 3], 4)]


def _texts(values: np.ndarray) -> pd.Series:
    """A column of text objects kept as they are: not copied into pandas' string type (for
    13.7 million tranches that copy costs 0.6 GB at its peak, and the text is the same)."""
    return pd.Series(np.asarray(values, dtype=object), dtype=object, copy=False)


def tranche_table(inp: ExpenseInputs, sched: ExpenseSchedule, tranche_no) -> pd.DataFrame:
    """Tranches with their vest dates, quantities, fair values and state at the through date."""
    m = sched.at_through
    forfeited = inp.t_qty - m.outstanding - m.cancelled
    granted = inp.grant_date[inp.t_grant] <= sched.period_ends[-1]
    # cost layers started by the through date (grant date, then modifications): value per unit in force
    lay = inp.layers
    started = lay.start <= np.datetime64(sched.period_ends[-1], "D")
    fv_in_force = np.bincount(lay.tranche[started], weights=lay.fair_value[started], minlength=len(inp.t_qty))
    # service begun before the grant date (service_inception_date): measured at the value of the through date
    from grantval.attribution.inception import pre_grant_values

    pre, pre_fv = pre_grant_values(inp, sched.period_ends[-1])
    # the columns as they are (no copies, no merging into 2-D blocks): 13.7 million tranches take
    # about a gigabyte less this way (the frame is not changed in place: with_kept_units copies it)
    return pd.DataFrame(copy=False, data={
        "grant_id": _texts(inp.grant_id[inp.t_grant]),
        "tranche": tranche_no,
        "vest_date": inp.t_vest,
        "quantity_granted": inp.t_qty,
        "forfeited": forfeited.astype(np.int64, copy=False),
        "cancelled_unvested": m.cancelled.astype(np.int64, copy=False),
        "vested": m.vested,
        "status": _texts(np.where(pre, "service before grant", _status(inp, m, granted))),
        "quantity_expected_to_vest": np.where(granted | pre, m.n_expensed, 0.0),
        # grant-date value plus modifications in force (else = t_fv); before the grant date, the value then
        "fair_value_per_unit": np.where(pre, pre_fv, fv_in_force),
        "grant_date_fair_value": inp.t_qty * inp.t_fv,
        "service_elapsed": m.elapsed,
    })


def unrecognised_table(inp: ExpenseInputs, sched: ExpenseSchedule) -> tuple[pd.DataFrame, float, float]:
    """Unrecognised cost at the through date by grant, the total and its weighted-average period."""
    m = sched.at_through
    cum = money(sched.cumulative_cents[:, -1])
    unrec_cents = np.maximum(np.floor(m.expected_total * 100 + 0.5).astype(np.int64) - sched.cumulative_cents[:, -1], 0)
    unrec = money(unrec_cents)
    frame = pd.DataFrame({
        "grant_id": inp.grant_id, "group": inp.group,
        "recognised_to_date": cum, "unrecognised_cost": unrec,
        "remaining_years": np.where(unrec_cents > 0, m.remaining_years, 0.0),
    })
    total = float(unrec_cents.sum()) / 100.0
    wa = float((unrec * frame["remaining_years"]).sum() / total) if total > 0 else 0.0
    return frame, total, wa


def with_kept_units(frame: pd.DataFrame, inp: ExpenseInputs, sched: ExpenseSchedule) -> pd.DataFrame:
    """The tranches table counting units whose cost a layer keeps after they were forfeited.

    A modification that lengthens the vesting period keeps the original cost of units forfeited after
    the original vesting date (``CostLayers.kept``: ASC 718-20-55-107, IFRS 2 B44(c)).  Such a tranche
    costs ``sum over layers of fair value x (expected + kept)``; it counts expected + the units kept
    and shows the cost in force per unit counted, so that units x value = cost (the tie-out on the
    checks sheet).  Other tranches are unchanged.
    """
    m = sched.at_through
    kept = getattr(m, "layer_kept", None)
    if kept is None or not kept.any():
        return frame
    lay = inp.layers
    n_t = len(inp.t_qty)
    started = lay.start <= np.datetime64(sched.period_ends[-1], "D")
    extra = np.zeros(n_t)
    np.maximum.at(extra, lay.tranche, np.where(started, kept, 0.0))
    rows = np.flatnonzero(extra > 0)
    w = np.where(started, lay.fair_value * (m.n_expensed[lay.tranche] + kept), 0.0)
    cost = np.bincount(lay.tranche, weights=w, minlength=n_t)
    units = m.n_expensed + extra
    frame = frame.copy()
    frame.loc[rows, "quantity_expected_to_vest"] = units[rows]
    frame.loc[rows, "fair_value_per_unit"] = cost[rows] / units[rows]
    return frame
