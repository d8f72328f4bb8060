"""``close``: book every period after the last closed one through a date, in the close register.

The amount booked for a grant in a close is its cumulative cost recomputed
through the close's last period end less the cumulative amount booked for it in
earlier closes.  The part that belongs to earlier, closed periods (cumulative
recomputed through the last closed period end less cumulative booked through
it) is the *catch-up*; it is booked in the close's first period, never in a
closed one (ASC 250-10-45-17: a change in estimate is accounted for in the
period of change; booking late-entered events in the open period is common
practice).  See ``docs/close.md``.
"""

from __future__ import annotations

import dataclasses
import pathlib
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval import __version__
from grantval.awards.registry import MODULES as KIND_MODULES, kind
from grantval.dates import DAY, period_ends
from grantval.errors import GrantvalError, OutputError, UsageError
from grantval.io import register as R
from grantval.io.files import refuse_overwriting_inputs
from grantval.ledger.ext.accounts import account_map
from grantval.progress import stage
from grantval.reporting import journal as J
from grantval.reporting.bridge import Bridge, compute_bridge
from grantval.runs.close_late import LateEntries, late_cash, late_tax
from grantval.runs.common import as_day, csv_paths, ledger_inputs
from grantval.runs.expense import ExpenseRun, expense

#: the CSV tables of a close, in the order written
CSV_NAMES = ["close_expense.csv", "journal.csv", "bridge.csv"]
#: key of a first close's options holding the per-grant cost booked before the register (``--from``)
OPENING_KEY = "opening_balance_cents"
#: policies a later close must share with the earlier ones (they fix the period ends)
FIXED_POLICIES = ("period", "fiscal_year_end_month")


@dataclass
class ClosePlan:
    """A close computed from the ledger and the register, not yet booked.

    Attributes
    ----------
    run : ExpenseRun
        The recomputed schedule of the close's periods.
    register : Path
    previous : grantval.io.register.Close or None
        The latest active close before this one.
    period_ends : ndarray of datetime64[D]
    booked_before : ndarray (ledger grants,)
        Cumulative cents booked before this close (earlier closes and the opening balance).
    catch_up : ndarray (ledger grants,)
        Catch-up per grant, cents (booked in the first period).
    rows : DataFrame
        Booked rows: grant_id, group, award_type, settlement, period_end,
        booked_cents, catch_up_cents (grants with something booked).
    journal : DataFrame
        Journal lines (:data:`grantval.reporting.journal.LINE_COLUMNS`).
    bridge : Bridge
    removed : DataFrame
        Grants booked in earlier closes that are no longer in the ledger
        (grant_id, group, booked_cents): their cost is reversed.
    opening : dict
        First close with ``--from``: per-grant cost before the register, cents.
    record : CloseRecord
    checks : list of CheckRow
    late : LateEntries
        Cash payments and tax effects dated in closed periods and booked as catch-ups.
    """

    run: ExpenseRun
    register: pathlib.Path
    previous: R.Close | None
    period_ends: np.ndarray
    booked_before: np.ndarray
    catch_up: np.ndarray
    rows: pd.DataFrame
    journal: pd.DataFrame
    bridge: Bridge
    removed: pd.DataFrame
    opening: dict
    record: R.CloseRecord
    checks: list = field(default_factory=list)
    late: LateEntries = field(default_factory=LateEntries)

    @property
    def failed(self) -> list:
        return [c for c in self.checks if not c.tool_pass]


@dataclass
class CloseResult:
    """A booked close: its plan, id, the register's head digest and the files written."""

    plan: ClosePlan
    close_id: int
    head_digest: str
    paths: list
    checks: list
    warnings: list = field(default_factory=list)

    @property
    def failed(self) -> list:
        return [c for c in self.checks if not c.tool_pass]


# ------------------------------------------------------------------ refusals


def _require_intact(reg: R.Register) -> None:
    problems = reg.verify()
    if problems:
        raise R.RegisterError(f"the close register {reg.path} fails its verification; nothing was booked. "
                              "Problems: " + "; ".join(problems[:5]) + (" ..." if len(problems) > 5 else ""))


def _period_end_of(day, policy_values: dict) -> np.datetime64:
    return period_ends(day, day, policy_values["period"], int(policy_values["fiscal_year_end_month"]))[0]


def _refuse_closed(reg: R.Register, last: R.Close, through) -> None:
    """PeriodClosedError naming the close that booked the period containing ``through``."""
    pe = _period_end_of(through, last.policies)
    pe_date = pe.astype("datetime64[D]").astype(object)
    active = [c for c in reg.closes() if c.status == "booked"]
    owner = next((c for c in active if pe_date in c.period_ends), None)
    owner = owner or next((c for c in active if c.through >= pe_date), last)
    who = f" by {owner.user}" if owner.user else ""
    raise R.PeriodClosedError(
        f"the period ending {pe} is already closed: close {owner.close_id} (closed "
        f"{owner.closed_at:%Y-%m-%d %H:%M} UTC{who}) booked through {owner.through}; the register {reg.path} is "
        f"closed through {last.through} (close {last.close_id}). Close a later date, or reopen the closes back to "
        f"close {owner.close_id} first (grantval close --reopen)",
        close_id=owner.close_id, through=owner.through, period_end=pe_date)


def _window_start(reg: R.Register, last: R.Close | None, through, start):
    """First day of the close: the day after the last closed through date, or ``start``."""
    if last is None:
        return start
    if through <= np.datetime64(last.through, "D"):
        _refuse_closed(reg, last, through)
    after = np.datetime64(last.through, "D") + DAY
    if start is not None and start != after:
        raise UsageError(f"{{start}} {start} is not the day after the last closed period: the register is closed "
                         f"through {last.through} (close {last.close_id}), so this close starts on {after}; "
                         f"leave out {{start}}", ("start",))
    return after


def _check_calendar(run: ExpenseRun, last: R.Close | None, start_given: bool) -> None:
    """The through date ends a period; a given start begins one; the period policy is the earlier closes'."""
    pol = dataclasses.asdict(run.policy)
    if last is not None:
        for key in FIXED_POLICIES:
            if str(last.policies.get(key)) != str(pol[key]):
                raise UsageError(f"the {key.replace('_', ' ')} is {pol[key]} but close {last.close_id} used "
                                 f"{last.policies.get(key)}: closes of one register share their periods; "
                                 f"use --{key.replace('_', '-')} {last.policies.get(key)}")
    through = run.schedule.period_ends[-1]
    if _period_end_of(through, pol) != through:
        raise UsageError(f"{{through}} {through} is not the last day of a {run.policy.period}: a close books "
                         f"whole periods (the {run.policy.period} ends on {_period_end_of(through, pol)})",
                         ("through",))
    first = run.schedule.window_start
    if start_given and last is None and _period_end_of(first - DAY, pol) != first - DAY:
        raise UsageError(f"{{start}} {first} is not the first day of a {run.policy.period}", ("start",))


# ---------------------------------------------------------------- amounts


def _settlements(award: np.ndarray) -> np.ndarray:
    out = np.full(len(award), "shares", dtype=object)
    for name in KIND_MODULES:
        out[award == name] = kind(name).settlement
    return out


def _booked_before(reg: R.Register, inp, last: R.Close | None, opening_now: np.ndarray):
    """Cumulative cents booked per ledger grant before this close, the opening balance, and removed grants."""
    ids = np.asarray(inp.grant_id, dtype=object)
    if last is None:
        opening = {g: int(c) for g, c in zip(ids, opening_now) if c}
        empty = pd.DataFrame({"grant_id": [], "group": [], "booked_cents": np.zeros(0, np.int64)})
        return np.asarray(opening_now, dtype=np.int64), opening, empty
    cum = reg.cumulative_booked()
    first = next(c for c in reg.closes() if c.status == "booked")
    stored = {str(k): int(v) for k, v in first.options.get(OPENING_KEY, {}).items()}
    totals = dict(zip(cum["grant_id"], cum["booked_cents"].astype(np.int64)))
    for g, v in stored.items():
        totals[g] = totals.get(g, 0) + v
    before = np.array([totals.get(g, 0) for g in ids], dtype=np.int64)
    gone = sorted(set(totals) - set(ids.tolist()))
    groups = dict(zip(cum["grant_id"], cum["group"]))
    removed = pd.DataFrame({"grant_id": gone, "group": [groups.get(g) for g in gone],
                            "booked_cents": np.array([totals[g] for g in gone], dtype=np.int64)})
    return before, {}, removed[removed["booked_cents"] != 0].reset_index(drop=True)


def _rows(run: ExpenseRun, catch_up: np.ndarray, removed: pd.DataFrame) -> pd.DataFrame:
    """Booked rows: each period's recomputed expense, plus the catch-up in the first period."""
    sched, g = run.schedule, run.ledger.grants
    n, p = sched.expense_cents.shape
    booked = sched.expense_cents.copy()
    booked[:, 0] += catch_up
    catch = np.zeros((n, p), dtype=np.int64)
    catch[:, 0] = catch_up
    award = g["award_type"].to_numpy(dtype=object)
    keep = (booked != 0) | (catch != 0)
    gi, pk = np.nonzero(keep.T)[1], np.nonzero(keep.T)[0]  # period-major order
    ends = np.asarray(sched.period_ends, dtype="datetime64[D]")
    rows = pd.DataFrame({
        "grant_id": g["grant_id"].to_numpy(dtype=object)[gi], "group": g["group"].to_numpy(dtype=object)[gi],
        "award_type": award[gi], "settlement": _settlements(award)[gi], "period_end": ends[pk],
        "booked_cents": booked[gi, pk], "catch_up_cents": catch[gi, pk]})
    if len(removed):
        gone = pd.DataFrame({"grant_id": removed["grant_id"], "group": removed["group"], "award_type": None,
                             "settlement": "shares", "period_end": ends[0],
                             "booked_cents": -removed["booked_cents"].to_numpy(np.int64),
                             "catch_up_cents": -removed["booked_cents"].to_numpy(np.int64)})
        rows = pd.concat([rows, gone], ignore_index=True)
    rows = rows.sort_values(["period_end", "grant_id"], kind="stable").reset_index(drop=True)
    for c in ("booked_cents", "catch_up_cents"):
        rows[c] = rows[c].astype(np.int64)
    return rows


def cash_paid(run: ExpenseRun, figures: dict | None = None) -> pd.DataFrame | None:
    """Cash paid per cash-settled grant in each period of the run (:data:`journal.CASH_COLUMNS`), or None.

    ``figures``: :func:`~grantval.reporting.liability_tables.liability_figures` of the run, when known.
    (:func:`grantval.reporting.liability_tables.cash_paid_rows`.)
    """
    from grantval.reporting.liability_tables import cash_paid_rows

    return cash_paid_rows(run, figures)


def tax_lines(run: ExpenseRun) -> pd.DataFrame | None:
    """The tax journal lines of the run's periods (currency), or None when the ledger has no tax rates."""
    from grantval.reporting.tax_tables import tax_journal
    from grantval.runs.tax import tax_effects

    eff = tax_effects(run)
    return None if eff is None else tax_journal(run.inputs, eff)


def _previous_booked(reg: R.Register, last: R.Close | None) -> int | None:
    if last is None:
        return None
    rows = reg.booked(close_id=last.close_id)
    end = np.datetime64(last.period_ends[-1], "D")
    return int(rows.loc[rows["period_end"].to_numpy("datetime64[D]") == end, "booked_cents"].sum())


def _record(run: ExpenseRun, register, through, start, opening: dict, command: str, user,
            stored: dict | None = None) -> R.CloseRecord:
    options = {"through": str(through), "from": None if start is None else str(start), "register": str(register),
               "ledger": run.ledger.location, "command": command or "(Python API)"}
    if opening:
        options[OPENING_KEY] = opening
    options.update(stored or {})
    return R.CloseRecord(
        through=str(run.schedule.period_ends[-1]), period_ends=[str(d) for d in run.schedule.period_ends],
        ledger_digests={p: d for p, d in run.ledger.files}, policies=dataclasses.asdict(run.policy),
        options=options, tool_version=__version__, user=R.current_user() if user is None else user)


# ------------------------------------------------------------------- plan


def plan_close(reg: R.Register, location, *, through, start=None, period=None, standard=None, attribution=None,
               forfeitures=None, fiscal_year_end_month=None, command: str = "", user: str | None = None) -> ClosePlan:
    """Compute a close against an open register without booking it.

    Parameters are those of :func:`close` (``reg`` is the open register).

    Raises
    ------
    RegisterError
        The register fails its verification.
    PeriodClosedError
        ``through`` falls in a period an active close already booked.
    UsageError
        ``through`` is not a period end, ``start`` does not fit, or the period
        policy differs from the earlier closes'.
    """
    from grantval.reporting.close_book import close_checks

    through_d, start_d = as_day(through, "through"), as_day(start, "start")
    _require_intact(reg)
    last = reg.last_close()
    window = _window_start(reg, last, through_d, start_d)
    run = expense(location, through=through_d, start=window, period=period, standard=standard,
                  attribution=attribution, forfeitures=forfeitures, fiscal_year_end_month=fiscal_year_end_month)
    _check_calendar(run, last, start_d is not None)
    sched = run.schedule
    with stage("close"):
        before, opening, removed = _booked_before(reg, run.inputs, last, sched.opening_cents)
        catch_up = sched.opening_cents - before
        rows = _rows(run, catch_up, removed)
        late, results = _settlements_and_tax(run, last, removed)
        journal = J.build_journal(rows, account_map(run.ledger), results=results)
        catch_totals = np.zeros(len(sched.period_ends), dtype=np.int64)
        catch_totals[0] = int(rows["catch_up_cents"].sum())
        bridge = compute_bridge(run.inputs, run.policy, sched.window_start, sched.period_ends, sched.opening_cents,
                                sched.cumulative_cents, catch_totals, _previous_booked(reg, last))
    record = _record(run, reg.path, through_d, start_d, opening, command, user, late.stored)
    plan = ClosePlan(run, reg.path, last, sched.period_ends, before, catch_up, rows, journal, bridge, removed,
                     opening, record, late=late)
    plan.checks = close_checks(plan)
    return plan


def _settlements_and_tax(run: ExpenseRun, last: R.Close | None, removed: pd.DataFrame):
    """Cash paid and tax lines of the close's periods, and the catch-ups of those of closed periods."""
    from grantval.reporting.liability_tables import liability_figures

    figures = liability_figures(run)
    window_tax = tax_lines(run)
    late = LateEntries()
    late_cash(last, run, figures, removed, late)
    late_tax(last, run, window_tax, tax_lines, late)
    return late, J.JournalResults(cash_paid(run, figures), window_tax, late.cash, late.tax)


# ------------------------------------------------------------------- book


def _register_rows(rows: pd.DataFrame) -> pd.DataFrame:
    out = rows[list(R.ROW_COLUMNS)].copy()
    out["group"] = out["group"].astype(object).where(out["group"].notna(), None)
    return out


def _register_journal(lines: pd.DataFrame) -> pd.DataFrame:
    out = lines[list(R.JOURNAL_COLUMNS)].copy()
    out["group"] = out["group"].astype(object).where(out["group"].notna(), None)
    return out


def _read_back_check(reg: R.Register, close_id: int, plan: ClosePlan):
    """The register's stored rows of the new close against the rows given (a CheckRow)."""
    from grantval.reporting.checks import CheckRow

    stored = reg.booked(close_id=close_id)
    a = dict(zip(zip(stored["grant_id"], stored["period_end"].to_numpy("datetime64[D]")), stored["booked_cents"]))
    b = dict(zip(zip(plan.rows["grant_id"], plan.rows["period_end"].to_numpy("datetime64[D]")),
                 plan.rows["booked_cents"]))
    same = len(stored) == len(plan.rows) and a == b
    return CheckRow("Rows read back from the register = rows booked (total, all grants and periods)",
                    int(stored["booked_cents"].sum()) / 100.0, int(plan.rows["booked_cents"].sum()) / 100.0, 0,
                    bool(same))


def _policy_warnings(plan: ClosePlan) -> list[str]:
    """A policy that differs from the previous close's: its cumulative effect is in the catch-up."""
    if plan.previous is None:
        return []
    now = dataclasses.asdict(plan.run.policy)
    return [f"the {k.replace('_', ' ')} policy is {now[k]} but close {plan.previous.close_id} used "
            f"{plan.previous.policies.get(k)}: the cumulative effect is booked as a catch-up in this close; a change "
            f"of accounting principle is applied retrospectively under ASC 250: review before relying on it"
            for k in sorted(now) if k not in FIXED_POLICIES and str(plan.previous.policies.get(k)) != str(now[k])]


def _require_output_folders(xlsx) -> None:
    if xlsx is not None:
        parent = pathlib.Path(xlsx).resolve().parent
        if not parent.is_dir():
            raise OutputError(f"the folder {parent} for the workbook {pathlib.Path(xlsx).name} does not exist; "
                              "nothing was booked")


def close(location, *, register, through, start=None, period=None, standard=None, attribution=None,
          forfeitures=None, fiscal_year_end_month=None, xlsx=None, csv_dir=None, command: str = "",
          timestamp: bool = True, user: str | None = None, timeout: float = R.DEFAULT_TIMEOUT) -> CloseResult:
    """Book every period after the last closed period through ``through``, then write the outputs.

    Parameters
    ----------
    location : path
        Ledger folder or workbook.
    register : path
        The close register (created on the first close).
    through : date or ISO text
        Last day of the close: the last day of a period.
    start : date or ISO text, optional
        First close only: first day of its first period (default: the start
        of the first period with a grant).  Cost before it counts as booked
        before the register (the opening balance).
    period, standard, attribution, forfeitures, fiscal_year_end_month : optional
        Override the ledger's policy table (the period must stay that of earlier closes).
    xlsx, csv_dir : path, optional
        Workbook and CSV folder to write after booking.
    command : str
        The command line, recorded with the close.
    timestamp : bool
        False: the workbook records no time (the register always records when).
    user : str, optional
        Who closes (default from USER, LOGNAME or USERNAME).

    Returns
    -------
    CloseResult

    Raises
    ------
    PeriodClosedError, RegisterError, UsageError, GrantvalError
        Nothing is booked when any is raised; a failed check also stops the close.
    """
    outputs = csv_paths(csv_dir, CSV_NAMES) + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    with R.open_register(register, create=True, timeout=timeout) as reg:
        plan = plan_close(reg, location, through=through, start=start, period=period, standard=standard,
                          attribution=attribution, forfeitures=forfeitures, fiscal_year_end_month=fiscal_year_end_month,
                          command=command, user=user)
        refuse_overwriting_inputs(outputs + [reg.path], ledger_inputs(plan.run.ledger))
        refuse_overwriting_inputs(outputs, [str(reg.path)])
        _require_output_folders(xlsx)
        if plan.failed:
            raise GrantvalError("the close was not booked: its checks failed: "
                                + "; ".join(f"{c.name} ({c.a} vs {c.b})" for c in plan.failed))
        with stage("book"):
            close_id = reg.book(plan.record, _register_rows(plan.rows), _register_journal(plan.journal))
        head = reg.head_digest()
        checks = plan.checks + [_read_back_check(reg, close_id, plan)]
    result = CloseResult(plan, close_id, head, outputs, checks, _policy_warnings(plan) + plan.late.warnings)
    if plan.removed is not None and len(plan.removed):
        result.warnings.append(f"{len(plan.removed)} grant(s) booked earlier are no longer in the ledger; their "
                               f"cost is reversed as a catch-up: {', '.join(map(str, plan.removed['grant_id'][:10]))}")
    try:
        write_close(result, xlsx, csv_dir, command=command, timestamp=timestamp)
    except GrantvalError as err:
        raise GrantvalError(f"close {close_id} was booked (register head {head}) but its outputs could not be "
                            f"written: {err}; `grantval register {reg.path} --export DIR` writes what was booked") from err
    return result


def write_close(result: CloseResult, xlsx, csv_dir, command: str = "", timestamp: bool = True) -> None:
    """Write the close's CSV tables (close_expense, journal, bridge) and workbook."""
    from grantval.io.csv import write_csv

    plan = result.plan
    paths = csv_paths(csv_dir, CSV_NAMES)
    with stage("write csv"):
        if paths:
            pathlib.Path(paths[0]).parent.mkdir(parents=True, exist_ok=True)
            write_csv(paths[0], close_expense_frame(plan.rows), money=("expense", "catch_up"))
            write_csv(paths[1], J.journal_csv_frame(plan.journal), money=("debit", "credit"))
            write_csv(paths[2], plan.bridge.table(), money=("amount",))
    with stage("write workbook"):
        if xlsx is not None:
            from grantval.reporting.close_book import write_close_book

            write_close_book(result, pathlib.Path(xlsx), command, timestamp)


def close_expense_frame(rows: pd.DataFrame) -> pd.DataFrame:
    """``close_expense.csv``: grant_id, group, period_end, expense (booked, catch-up included), catch_up."""
    return pd.DataFrame({
        "grant_id": rows["grant_id"].to_numpy(dtype=object), "group": rows["group"].to_numpy(dtype=object),
        "period_end": rows["period_end"].to_numpy("datetime64[D]"),
        "expense": rows["booked_cents"].to_numpy(np.int64) / 100.0,
        "catch_up": rows["catch_up_cents"].to_numpy(np.int64) / 100.0})


# ------------------------------------------------------- reopen and register


def reopen(register, reason: str, user: str | None = None) -> R.Reopen:
    """Reopen the latest active close of ``register``; its rows stay, marked superseded.

    Raises
    ------
    RegisterError
        The register fails its verification, has no active close, or cannot be written.
    """
    with R.open_register(register) as reg:
        _require_intact(reg)
        return reg.reopen(reason, user=user)


def register_closes(register) -> tuple[list[R.Close], str | None]:
    """Every close of ``register`` (oldest first) and its head digest."""
    with R.open_register(register, readonly=True) as reg:
        return reg.closes(), reg.head_digest()


def verify_register(register) -> list[str]:
    """Problems :meth:`Register.verify` reports (empty when the register is intact)."""
    with R.open_register(register, readonly=True) as reg:
        return reg.verify()


def export_register(register, folder) -> list[pathlib.Path]:
    """Write the register's tables as CSV files into ``folder``."""
    with R.open_register(register, readonly=True) as reg:
        return reg.export(folder)


# ------------------------------------------------------- expense beside the register


@dataclass
class RegisterComparison:
    """The recomputed schedule beside what the register booked, per closed period.

    Attributes
    ----------
    table : DataFrame
        period_end, booked (catch-up included), catch_up, recomputed,
        difference (recomputed - booked), cumulative_difference: currency, one
        row per closed period of the schedule.
    warnings : list of str
        Closed periods whose recomputed amount differs from the amount booked,
        and the catch-up the next close would book.
    """

    table: pd.DataFrame
    warnings: list


def compare_with_register(run: ExpenseRun, register) -> RegisterComparison:
    """What was booked in each closed period against the recomputed schedule of ``run``.

    The cumulative difference at the last closed period end is the catch-up
    the next close books (for the grants of the run's ledger).
    """
    with R.open_register(register, readonly=True) as reg:
        rows = reg.booked()
        last = reg.last_close()
        first_active = next((c for c in reg.closes() if c.status == "booked"), None)
    sched = run.schedule
    ends = np.asarray(sched.period_ends, dtype="datetime64[D]")
    pol = dataclasses.asdict(run.policy)
    if last is not None and any(str(last.policies.get(k)) != str(pol[k]) for k in FIXED_POLICIES):
        return RegisterComparison(pd.DataFrame(columns=["period_end", "booked", "catch_up", "booked_for_the_period",
                                                        "recomputed", "difference", "cumulative_difference"]),
                                  [f"the schedule's periods ({run.policy.period}, fiscal year ending in month "
                                   f"{run.policy.fiscal_year_end_month}) are not the register's "
                                   f"({last.policies.get('period')}, month {last.policies.get('fiscal_year_end_month')}):"
                                   " nothing to compare"])
    closed = ends[ends <= np.datetime64(last.through, "D")] if last is not None else ends[:0]
    pe = rows["period_end"].to_numpy("datetime64[D]")
    opening = sum(int(v) for v in (first_active.options.get(OPENING_KEY, {}) if first_active else {}).values())
    recs, warnings, changed = [], [], []
    cum_diff = int(sched.opening_cents.sum()) - opening - int(rows.loc[pe < ends[0], "booked_cents"].sum())
    for e in closed:
        k = int(np.flatnonzero(ends == e)[0])
        b = int(rows.loc[pe == e, "booked_cents"].sum())
        c = int(rows.loc[pe == e, "catch_up_cents"].sum())
        r = int(sched.expense_cents[:, k].sum())
        cum_diff += r - b
        recs.append((e, b / 100.0, c / 100.0, (b - c) / 100.0, r / 100.0, (r - b + c) / 100.0, cum_diff / 100.0))
        if r != b - c:
            changed.append(f"the closed period ending {e} would change: recomputed {r / 100.0:,.2f}, booked for "
                           f"the period {(b - c) / 100.0:,.2f} (difference {(r - b + c) / 100.0:,.2f})")
    table = pd.DataFrame(recs, columns=["period_end", "booked", "catch_up", "booked_for_the_period", "recomputed",
                                        "difference", "cumulative_difference"])
    if len(closed) and cum_diff:  # differences already caught up by a later close are shown, not warned of
        warnings = changed + [f"cumulative cost recomputed through {closed[-1]} differs from the cumulative amount "
                              f"booked by {cum_diff / 100.0:,.2f}: the next close books it as a catch-up in its "
                              f"first period (closed periods stay as booked)"]
    return RegisterComparison(table, warnings)
