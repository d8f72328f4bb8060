"""Cash payments and tax effects dated in closed periods that a close did not book: their catch-up.

A settlement of a cash-settled award or a tax effect can be entered (or changed) after the
period it is dated in was closed.  Closed periods are never restated: the next close books the
difference in its first period, as it does for the expense (``docs/close.md``):

- cash paid: per grant, cumulative cash paid recomputed through the last closed period end
  (the liability engine, events as entered now) less the cumulative cash paid booked through it;
- tax effects: per (account, group), the cumulative net (debit less credit) of the tax lines
  recomputed through the last closed period end less the cumulative net booked through it.

What was booked is recorded with each close in its options (part of the close's digest, so the
register's verification covers it): :data:`CASH_KEY` and :data:`TAX_KEY`, cumulative through the
close's last period end.  A register whose last close has no such record (closed by an earlier
grantval) cannot tell what was booked: no catch-up is made and the close says so.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.dates import DAY

#: key of a close's options: per grant, cumulative cash paid booked through the close, cents
CASH_KEY = "cash_paid_cents"
#: key of a close's options: per "account<TAB>group", cumulative net of the tax lines booked, cents
TAX_KEY = "tax_net_cents"


@dataclass
class LateEntries:
    """The catch-ups of cash payments and tax effects of closed periods, and what the close records.

    Attributes
    ----------
    cash : DataFrame or None
        Columns of :data:`grantval.reporting.journal.CASH_COLUMNS`: cash paid per grant to book as a
        catch-up in the close's first period (cents, either sign); None when there is none.
    tax : DataFrame or None
        Tax journal lines (period_end, account, group, debit, credit, description; currency) to book
        as a catch-up in the close's first period; None when there is none.
    stored : dict
        Options the close records (:data:`CASH_KEY`, :data:`TAX_KEY`).
    warnings : list of str
        What the close says of them.
    cash_booked_before : int
        Cash paid booked through the last closed period end (all grants), cents.
    tax_booked_before : dict or None
        Per "account<TAB>group": net of the tax lines booked through the last closed period end,
        cents (None without tax rates).
    """

    cash: pd.DataFrame | None = None
    tax: pd.DataFrame | None = None
    stored: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    cash_booked_before: int = 0
    tax_booked_before: dict | None = None


def _money_text(cents: int) -> str:
    return f"{cents / 100.0:,.2f}"


def late_cash(last, run, figures, removed: pd.DataFrame, out: LateEntries) -> None:
    """Cash catch-up per grant (in place into ``out``); ``figures`` from ``liability_figures(run)``."""
    stored = None if last is None else last.options.get(CASH_KEY)
    if figures is None and not stored:  # no cash-settled grant now, and none paid before
        return
    from grantval.reporting.liability_tables import paid_in_period

    pos = figures["grants"] if figures is not None else np.zeros(0, dtype=np.int64)
    ids = np.asarray(run.inputs.grant_id, dtype=object)[pos]
    recomputed = dict(zip(ids, figures["opening_cash"].astype(np.int64).tolist())) if figures is not None else {}
    d0 = np.datetime64(run.schedule.window_start, "D") - DAY
    if last is not None and stored is None:
        out.warnings.append(f"close {last.close_id} did not record the cash paid it booked (an earlier grantval): "
                            f"cash payments dated on or before {d0} that were entered after their close are not "
                            "caught up by this close")
    booked = dict(recomputed) if stored is None else {str(k): int(v) for k, v in stored.items()}
    out.cash_booked_before = int(sum(booked.values()))
    groups = dict(zip(ids, np.asarray(run.inputs.group, dtype=object)[pos]))
    groups.update(zip(removed["grant_id"], removed["group"]) if len(removed) else [])
    types = dict(zip(run.ledger.grants["grant_id"], run.ledger.grants["award_type"]))
    catch = {g: recomputed.get(g, 0) - booked.get(g, 0) for g in sorted(set(recomputed) | set(booked))}
    catch = {g: c for g, c in catch.items() if c}
    total = (np.column_stack([figures["opening_cash"], paid_in_period(figures)]).sum(axis=1) if figures is not None
             else np.zeros(0))
    out.stored[CASH_KEY] = {g: int(c) for g, c in zip(ids, total.astype(np.int64)) if c}
    if not catch:
        return
    first = np.datetime64(run.schedule.period_ends[0], "D")
    out.cash = pd.DataFrame({"grant_id": list(catch), "group": [groups.get(g) for g in catch],
                             "award_type": [types.get(g, "*") for g in catch], "period_end": first,
                             "cash_cents": np.array(list(catch.values()), dtype=np.int64)})
    out.warnings.append(f"cash paid dated on or before {d0} (closed periods) differs from the cash booked through it by "
                        f"{_money_text(sum(catch.values()))} (payments entered or changed after their close, grants "
                        f"{', '.join(list(catch)[:10])}): booked as a catch-up in the period ending {first}; closed "
                        "periods are unchanged")


def nets(lines: pd.DataFrame | None) -> dict:
    """Per "account<TAB>group": net of debit less credit of tax journal lines, cents."""
    if lines is None or not len(lines):
        return {}
    net = np.rint((lines["debit"].to_numpy(float) - lines["credit"].to_numpy(float)) * 100.0).astype(np.int64)
    keys = [f"{a}\t{g}" for a, g in zip(lines["account"], lines["group"])]
    out: dict = {}
    for k, v in zip(keys, net):
        out[k] = out.get(k, 0) + int(v)
    return out


def tax_through(run, day, tax_lines=None) -> dict:
    """Nets of the tax lines recomputed from the first period through ``day`` (the close's inputs)."""
    from grantval.attribution.periods import compute_schedule, default_start

    if tax_lines is None:
        from grantval.runs.close import tax_lines
    if default_start(run.inputs, run.policy) > np.datetime64(day, "D"):
        return {}
    sched = compute_schedule(run.inputs, run.policy, np.datetime64(day, "D"))
    hist = dataclasses.replace(run, schedule=sched, through=str(sched.period_ends[-1]), start=str(sched.window_start))
    return nets(tax_lines(hist))


def late_tax(last, run, window_lines, tax_lines, out: LateEntries) -> None:
    """Tax catch-up per (account, group) (in place into ``out``); ``tax_lines(run)`` gives a run's lines."""
    if window_lines is None:
        return
    d0 = np.datetime64(run.schedule.window_start, "D") - DAY
    stored = None if last is None else last.options.get(TAX_KEY)
    if last is not None and stored is None:
        out.warnings.append(f"close {last.close_id} did not record the tax lines it booked (an earlier grantval): "
                            f"tax effects dated on or before {d0} that changed after their close are not caught up "
                            "by this close")
    recomputed = tax_through(run, d0, tax_lines)
    booked = dict(recomputed) if stored is None else {str(k): int(v) for k, v in stored.items()}
    out.tax_booked_before = dict(booked)
    catch = {k: recomputed.get(k, 0) - booked.get(k, 0) for k in sorted(set(recomputed) | set(booked))}
    catch = {k: v for k, v in catch.items() if v}
    after = dict(booked)
    for k, v in list(catch.items()) + list(nets(window_lines).items()):
        after[k] = after.get(k, 0) + v
    out.stored[TAX_KEY] = {k: v for k, v in after.items() if v}
    if not catch:
        return
    first = np.datetime64(run.schedule.period_ends[0], "D")
    desc = (f"Catch-up of closed periods: tax effects dated on or before {d0} not booked in their period "
            "(recomputed less booked)")
    acct, grp = zip(*(k.split("\t", 1) for k in catch))
    v = np.array(list(catch.values()), dtype=np.int64)
    out.tax = pd.DataFrame({"period_end": first, "account": acct, "group": grp,
                            "debit": np.maximum(v, 0) / 100.0, "credit": np.maximum(-v, 0) / 100.0,
                            "description": desc})
    out.warnings.append(f"tax effects dated on or before {d0} (closed periods) changed after their close: "
                        f"{len(catch)} catch-up line(s) booked in the period ending {first}; closed periods are "
                        "unchanged")
