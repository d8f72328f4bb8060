"""The Python API behind the ``grantval`` commands.

Each function takes paths and options, returns result objects, and raises
:class:`~grantval.errors.GrantvalError` subclasses for problems the user can
fix.  The command layer only formats what these return.
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass
from typing import TYPE_CHECKING

from grantval import __version__
from grantval.errors import Problem
from grantval.measurement.fairvalue import FairValues, compute_fair_values
import numpy as np
import pandas as pd

from grantval.errors import UsageError
from grantval.io.write import EXCEL_ROWS, Formula, Sheet, refuse_overwriting_inputs, write_csv, write_workbook
from grantval.ledger import Ledger, load_ledger, read_ledger
from grantval.notes import REVIEW, VALUATION_METHODS
from grantval.policy import Policy, resolve_policy
from grantval.progress import stage

if TYPE_CHECKING:  # pragma: no cover
    from grantval.disclosure import Disclosure
    from grantval.attribution.inputs import ExpenseInputs
    from grantval.attribution.periods import ExpenseSchedule


@dataclass
class CheckReport:
    """Outcome of checking a ledger."""

    location: str
    problems: list[Problem]
    ledger: Ledger | None

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "warning"]

    @property
    def ok(self) -> bool:
        return not self.errors


def check(location) -> CheckReport:
    """Read and check a ledger, returning every problem found (never raises for data problems)."""
    with stage("read+check"):
        ledger, problems = read_ledger(location)
    return CheckReport(str(location), problems, ledger)


@dataclass
class ValueRun:
    """Fair values of a ledger under a policy."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues


def value(location, *, valuation_unit: str | None = None, lattice_steps: int | None = None) -> ValueRun:
    """Load, check and value a ledger.

    Parameters
    ----------
    location : path
        A folder of CSV files or an .xlsx workbook.
    valuation_unit, lattice_steps : optional
        Override the ledger's policy table.

    Raises
    ------
    LedgerError
        Listing every error in the ledger; nothing is valued then.
    """
    with stage("read+check"):
        ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, valuation_unit=valuation_unit, lattice_steps=lattice_steps)
    with stage("value"):
        fv = compute_fair_values(ledger, policy)
    reconcile(ledger, fv)
    return ValueRun(ledger, policy, fv)


def reconcile(ledger: Ledger, fv: FairValues, schedule=None) -> None:
    """Nothing lost: grants read = grants valued (= grants in the schedule); stop the run otherwise."""
    from grantval.errors import GrantvalError

    valued = int(fv.table["grant_id"].nunique())
    counts = [("read", ledger.n_grants), ("valued", valued), ("with a fair value", int(np.isfinite(fv.grant_value).sum()))]
    if schedule is not None:
        counts.append(("in the schedule", int(schedule.expense_cents.shape[0])))
    if len({c for _, c in counts}) != 1:
        raise GrantvalError("reconciliation failed (a bug in grantval; nothing was written): grants "
                            + ", ".join(f"{k} {v}" for k, v in counts))


FAIR_VALUE_FORMATS = {
    "exercise_price": "#,##0.00",
    "share_price": "#,##0.00",
    "volatility": "0.00%",
    "risk_free_rate": "0.000%",
    "dividend_yield": "0.00%",
    "post_vest_exit_rate": "0.00%",
    "contractual_term_years": "0.0000",
    "expected_term_years": "0.0000",
    "fair_value_per_unit": "#,##0.0000",
    "grant_date_fair_value": "#,##0.00",
    "quantity": "#,##0",
    "grant_date": "yyyy-mm-dd",
    "expiration_date": "yyyy-mm-dd",
    "vest_date": "yyyy-mm-dd",
}


def notes_rows(run_title: str, ledger: Ledger, policy: Policy, extra: list[tuple[str, str]] = ()) -> list[list]:
    """Rows of the notes sheet: what was run, on what, with which policies and methods."""
    rows: list[list] = [[run_title], [], ["Review", REVIEW], [], ["Tool", f"grantval {__version__}"],
                        ["Ledger", ledger.location]]
    for path, digest in ledger.files:
        rows.append(["Input file", path, digest])
    rows.append([])
    rows.append(["Policies"])
    for k, v in policy.describe():
        rows.append([k, v])
    rows += [[k, v] for k, v in extra]
    rows.append([])
    rows.append(["Methods"])
    rows += [[k, v] for k, v in VALUATION_METHODS]
    if ledger.warnings:
        rows.append([])
        rows.append(["Warnings from the ledger check"])
        rows += [[str(w)] for w in ledger.warnings]
    return rows


def write_fair_values(run: ValueRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None) -> list[pathlib.Path]:
    """Write the fair-value table to a workbook and/or ``fair_values.csv``; returns the paths written."""
    from grantval import workbooks as W

    outputs = []
    if xlsx is not None:
        outputs.append(pathlib.Path(xlsx))
    csv_path = pathlib.Path(csv_dir) / "fair_values.csv" if csv_dir is not None else None
    if csv_path is not None:
        outputs.append(csv_path)
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])
    table = run.fair_values.table
    if csv_path is not None:
        if not pathlib.Path(csv_dir).is_dir():
            pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_path, table)
    if xlsx is not None:
        sheets = [
            Sheet("fair_values", frame=table, formats=FAIR_VALUE_FORMATS, text_columns=W.LEDGER_TEXT,
                  widths={"grant_id": 14, "expected_term_method": 34, "fair_value_source": 28}),
            Sheet("notes", rows=notes_rows("grantval value: grant-date fair values", run.ledger, run.policy,
                                           [("distinct valuations", str(run.fair_values.distinct_valuations))]),
                  widths={1: 28, 2: 100, 3: 66}),
        ]
        write_workbook(pathlib.Path(xlsx), sheets)
    return outputs


@dataclass
class ExpenseRun:
    """An expense run: ledger, policy, fair values and the schedule by period."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues
    inputs: "ExpenseInputs"
    schedule: "ExpenseSchedule"
    through: str
    start: str
    forecast_through: str | None


def expense(location, *, through, start=None, forecast_through=None, period=None, standard=None,
            attribution=None, forfeitures=None, fiscal_year_end_month=None) -> ExpenseRun:
    """Load, check, value and expense a ledger.

    Parameters
    ----------
    location : path
        Ledger folder or workbook.
    through : date or ISO text
        Last day of the run.
    start, forecast_through : date or ISO text, optional
        First day of the first period (default: start of the first period
        with a grant); last day of the forecast.
    period, standard, attribution, forfeitures, fiscal_year_end_month : optional
        Override the ledger's policy table.
    """
    from grantval.attribution.inputs import build_inputs
    from grantval.attribution.periods import compute_schedule

    with stage("read+check"):
        ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures, fiscal_year_end_month=fiscal_year_end_month)
    with stage("value"):
        fv = compute_fair_values(ledger, policy)
    with stage("schedule"):
        inp = build_inputs(ledger, fv)
        sched = compute_schedule(inp, policy, _day(through, "--through"), _day(start, "--from"),
                                 _day(forecast_through, "--forecast-through"))
    reconcile(ledger, fv, sched)
    return ExpenseRun(ledger, policy, fv, inp, sched, str(sched.period_ends[-1]), str(sched.window_start),
                      None if forecast_through is None else str(_day(forecast_through, "--forecast-through")))


def _day(value, option: str):
    import datetime as _dt

    import numpy as np

    from grantval.errors import UsageError

    if value is None:
        return None
    if isinstance(value, (_dt.date, np.datetime64)):
        return np.datetime64(value, "D")
    try:
        return np.datetime64(_dt.date.fromisoformat(str(value).strip()), "D")
    except ValueError:
        raise UsageError(f"{option} {value!r} is not an ISO date (write 2027-03-31)") from None


def write_expense(run: ExpenseRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                  command: str = "", timestamp: bool = True, share_price: float | None = None) -> "ExpenseOutputs":
    """Write the expense workbook and/or the CSV files.

    The workbook carries a run sheet, the auditor's fair-value sheet with live
    BSM formulas, expense sheets whose totals are SUM formulas, a checks sheet
    and charts; with ``share_price`` also the disclosure sheets.

    Returns
    -------
    ExpenseOutputs
        The paths written and the tie-out checks (the command exits 1 when
        any fails).
    """
    from grantval import workbooks as W
    from grantval.disclosure import compute_disclosure
    from grantval.attribution import tables as T

    inp, sched = run.inputs, run.schedule
    names = ["expense.csv", "expense_by_group.csv", "tranches.csv", "forecast.csv", "unrecognized.csv"]
    csv_paths = [pathlib.Path(csv_dir) / n for n in names] if csv_dir is not None else []
    outputs = csv_paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])

    with stage("tables"):
        by_group, group_sums = T.wide_by_group(inp, sched.period_ends, sched.expense_cents)
        tranches = T.tranche_table(inp, sched, run.ledger.tranches["tranche"].to_numpy())
        unrec, unrec_total, unrec_wa = T.unrecognised_table(inp, sched)
        disc = compute_disclosure(run.ledger, run.fair_values, inp, run.policy, run.start, run.through, share_price)
        checks = expense_checks(run, tranches, unrec, disc, W.recomputed_column(run.fair_values.table))
    with stage("write csv"):
        if csv_paths:
            pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
            write_csv(csv_paths[0], T.long_expense(inp, sched), money=("expense", "cumulative_expense"))
            write_csv(csv_paths[1], T.long_by_group(sched.period_ends, by_group["group"].to_numpy(), group_sums),
                      money=("expense",))
            write_csv(csv_paths[2], tranches)
            write_csv(csv_paths[3], T.long_forecast(inp, sched), money=("expense",))
            write_csv(csv_paths[4], unrec, money=("recognised_to_date", "unrecognised_cost"))
    with stage("write workbook"):
        if xlsx is not None:
            info = W.RunInfo(
                "grantval expense: stock-based compensation expense", command or "(Python API)", run.ledger.location,
                run.ledger.files,
                [("from", run.start), ("through", run.through), ("forecast through", run.forecast_through or "(none)"),
                 ("share price for intrinsic values", "(not given)" if share_price is None else repr(share_price))],
                run.policy.describe(), timestamp)
            # the wide tables are for the workbook only
            award = run.ledger.grants["award_type"].to_numpy()
            qty = run.ledger.grants["quantity"].to_numpy(np.int64)
            by_grant = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.period_ends,
                                       sched.expense_cents)
            forecast = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.forecast_ends,
                                       sched.forecast_cents)
            fv_frame, _ = W.fair_value_audit(run.fair_values.table)
            sheets = W.expense_sheets(run, info, fv_frame, by_grant, by_group, tranches, unrec, unrec_total, unrec_wa, forecast,
                                      disc if share_price is not None else None, checks, expense_notes(run))
            write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time())
    return ExpenseOutputs(outputs, checks)


@dataclass
class ExpenseOutputs:
    """Paths an expense run wrote and its tie-out checks."""

    paths: list[pathlib.Path]
    checks: list

    @property
    def failed(self) -> list:
        return [c for c in self.checks if not c.tool_pass]


def expense_checks(run: ExpenseRun, tranches, unrec, disc, rc: str) -> list:
    """The tie-outs of an expense run, as :class:`grantval.workbooks.CheckRow` (figures and formulas)."""
    from grantval import workbooks as W
    from grantval.pricing import bsm_value

    sched, inp = run.schedule, run.inputs
    n = run.ledger.n_grants
    valued = int(run.fair_values.table["grant_id"].nunique())
    total = float(sched.expense_cents.sum()) / 100.0
    p = len(sched.period_ends)
    first, last = W.col_letter(7), W.col_letter(6 + p)
    tot_col = W.col_letter(7 + p)
    trow = n + 2
    g_rows = len(np.unique(np.where(inp.group == "", "(none)", inp.group).astype(str)))
    g_tot = W.col_letter(2 + p)
    nt = len(tranches) + 1
    cols = {c: W.col_letter(i + 1) for i, c in enumerate(tranches.columns)}
    uc = {c: W.col_letter(i + 1) for i, c in enumerate(unrec.columns)}
    expected = float(np.sum(tranches["quantity_expensed"] * tranches["fair_value_per_unit"]) +
                     np.sum(tranches["cancelled_unvested"] * tranches["fair_value_per_unit"]))
    rec_plus = float(unrec["recognised_to_date"].sum() + unrec["unrecognised_cost"].sum())
    per_grant = np.abs(sched.cumulative_cents[:, -1] + np.round(unrec["unrecognised_cost"].to_numpy() * 100)
                       - np.floor(sched.at_through.expected_total * 100 + 0.5))
    off = int(np.sum(per_grant > 1))
    fvt = run.fair_values.table
    bsm = fvt["model"].to_numpy() == "bsm"
    recomputed = bsm_value(fvt["share_price"].to_numpy(float)[bsm], fvt["exercise_price"].to_numpy(float)[bsm],
                           fvt["expected_term_years"].to_numpy(float)[bsm], fvt["risk_free_rate"].to_numpy(float)[bsm],
                           fvt["volatility"].to_numpy(float)[bsm], fvt["dividend_yield"].to_numpy(float)[bsm])
    tool_bsm = float(fvt["fair_value_per_unit"].to_numpy(float)[bsm].sum())
    o_a, o_b = disc.option_tie
    r_a, r_b = disc.rsu_tie
    return [
        W.CheckRow("Grants in the ledger = grants valued", n, valued, 0, n == valued),
        W.CheckRow("Grants valued = grant rows in the expense schedule", valued,
                   Formula(f"=COUNTA(expense_by_grant!A2:A{n + 1})"), 0, valued == n),
        W.CheckRow("Period cells of all grants sum to the tool's grand total",
                   Formula(f"=SUM(expense_by_grant!{first}2:{last}{n + 1})"), total, 0.005,
                   int(sched.expense_cents.sum()) == round(total * 100)),
        W.CheckRow("Column totals sum to the grand total", Formula(f"=SUM(expense_by_grant!{first}{trow}:{last}{trow})"),
                   Formula(f"=expense_by_grant!{tot_col}{trow}"), 0.005, True),
        W.CheckRow("Expense by group sums to the total", Formula(f"=expense_by_group!{g_tot}{g_rows + 2}"), total,
                   0.005, int(sched.expense_cents.sum()) == int(np.sum(sched.expense_cents))),
        W.CheckRow("Recognised + unrecognised = expected quantity x fair value (all tranches)",
                   Formula(f"=SUM(unrecognized!{uc['recognised_to_date']}2:{uc['recognised_to_date']}{n + 1})"
                           f"+SUM(unrecognized!{uc['unrecognised_cost']}2:{uc['unrecognised_cost']}{n + 1})"),
                   # a formula over the tranches sheet, unless it had to be split across sheets
                   expected if nt > EXCEL_ROWS else
                   Formula(f"=SUMPRODUCT(tranches!{cols['quantity_expensed']}2:{cols['quantity_expensed']}{nt},"
                           f"tranches!{cols['fair_value_per_unit']}2:{cols['fair_value_per_unit']}{nt})"
                           f"+SUMPRODUCT(tranches!{cols['cancelled_unvested']}2:{cols['cancelled_unvested']}{nt},"
                           f"tranches!{cols['fair_value_per_unit']}2:{cols['fair_value_per_unit']}{nt})"),
                   round(0.01 * n + 0.005, 2), abs(rec_plus - expected) <= 0.01 * n + 0.005),
        W.CheckRow("Grants whose recognised + unrecognised differs from expected quantity x fair value by over a cent",
                   off, 0, 0, off == 0),
        W.CheckRow("Option roll-forward: start + granted - exercised - forfeited - expired = end", o_a, o_b, 0,
                   o_a == o_b),
        W.CheckRow("RSU roll-forward: start + granted - vested - forfeited = end", r_a, r_b, 0, r_a == r_b),
        W.CheckRow("Formula-recomputed BSM fair values sum to the tool's (relative tolerance)",
                   Formula(f"=SUM(fair_values!{rc}2:{rc}{len(fvt) + 1})"), tool_bsm, 1e-9,
                   bool(np.allclose(recomputed, fvt["fair_value_per_unit"].to_numpy(float)[bsm], rtol=1e-12)),
                   relative=True),
    ]


def expense_notes(run: ExpenseRun) -> list[tuple[str, str]]:
    """Statements of the attribution and forfeiture rules applied."""
    from grantval.notes import EXPENSE_RULES


    rules = [("attribution", EXPENSE_RULES[run.policy.attribution]),
             ("forfeitures", EXPENSE_RULES[run.policy.forfeitures])]
    return rules + [(k, EXPENSE_RULES[k]) for k in ("service", "cancel", "rounding", "forecast")]


@dataclass
class DisclosureRun:
    """Disclosure tables of a ledger for one window."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues
    disclosure: "Disclosure"


def disclose(location, *, start, through, share_price: float | None = None, period=None, standard=None,
             attribution=None, forfeitures=None) -> DisclosureRun:
    """Option and RSU activity and grant figures (ASC 718-10-50-2) for the window ``start``..``through``."""
    from grantval.disclosure import compute_disclosure
    from grantval.errors import UsageError
    from grantval.attribution.inputs import build_inputs

    s, t = _day(start, "--from"), _day(through, "--through")
    if s is None or t is None:
        raise UsageError("give both --from and --through")
    if s > t:
        raise UsageError(f"--from {s} is after --through {t}")
    if share_price is not None and not share_price > 0:
        raise UsageError(f"--share-price must be greater than zero; got {share_price}")
    ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures)
    fv = compute_fair_values(ledger, policy)
    inp = build_inputs(ledger, fv)
    return DisclosureRun(ledger, policy, fv, compute_disclosure(ledger, fv, inp, policy, s, t, share_price))


def write_disclosure(run: DisclosureRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                     command: str = "", timestamp: bool = True) -> "ExpenseOutputs":
    """Write the disclosure workbook and/or ``option_activity.csv``, ``rsu_activity.csv``, ``grant_disclosures.csv``."""
    from grantval import workbooks as W

    d = run.disclosure
    names = ["option_activity.csv", "rsu_activity.csv", "grant_disclosures.csv"]
    csv_paths = [pathlib.Path(csv_dir) / n for n in names] if csv_dir is not None else []
    outputs = csv_paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])
    (o_a, o_b), (r_a, r_b) = d.option_tie, d.rsu_tie
    checks = [
        W.CheckRow("Option roll-forward: start + granted - exercised - forfeited - expired = end",
                   Formula("=option_activity!B2+option_activity!B3-option_activity!B4-option_activity!B5"
                           "-option_activity!B6"), Formula("=option_activity!B7"), 0, o_a == o_b),
        W.CheckRow("RSU roll-forward: start + granted - vested - forfeited = end",
                   Formula("=rsu_activity!B2+rsu_activity!B3-rsu_activity!B4-rsu_activity!B5"),
                   Formula("=rsu_activity!B6"), 0, r_a == r_b),
    ]
    if csv_paths:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_paths[0], d.options)
        write_csv(csv_paths[1], d.rsus)
        write_csv(csv_paths[2], d.grants)
    if xlsx is not None:
        info = W.RunInfo("grantval disclose: stock-based compensation disclosure tables", command or "(Python API)",
                         run.ledger.location, run.ledger.files,
                         [("from", str(d.start)), ("through", str(d.through)),
                          ("share price at the end", "(not given)" if d.share_price is None else repr(d.share_price))],
                         run.policy.describe(), timestamp)
        sheets = [W.run_sheet(info, info.workbook_time()), *W.disclosure_sheets(d), W.checks_sheet(checks),
                  W.notes_sheet([], run.ledger.warnings)]
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time())
    return ExpenseOutputs(outputs, checks)


def whatif(location, *, vary: list[str], grants_from=None, grants_through=None, through=None,
           forecast_through=None, planned=None, period=None, standard=None, attribution=None,
           forfeitures=None):
    """Value and expense a ledger under the base and every scenario of ``vary``.

    Parameters
    ----------
    vary : list of str
        ``NAME=SPEC[,SPEC...]`` texts (see :func:`grantval.whatif.parse_vary`);
        several give the full grid.
    grants_from, grants_through : date, optional
        Only grants dated in this window are re-valued.
    through : date, optional
        Last day of the expense; default the last vesting date of the ledger.
    planned : path, optional
        Hypothetical grants (grants format) valued and expensed as if granted.
    """
    from grantval.scenarios.whatif import parse_vary, run_scenarios

    if not vary:
        raise UsageError("give at least one --vary NAME=SPEC")
    varies = [parse_vary(v) for v in vary]
    ledger = load_ledger(location, planned)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures)
    return run_scenarios(ledger, policy, varies, grants_from=_day(grants_from, "--grants-from"),
                         grants_through=_day(grants_through, "--grants-through"), through=_day(through, "--through"),
                         forecast_through=_day(forecast_through, "--forecast-through"))


def write_whatif(run, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None, command: str = "",
                 timestamp: bool = True) -> list[pathlib.Path]:
    """Write the what-if workbook and/or its CSV tables; returns the paths written."""
    from grantval.scenarios import whatif as WI
    from grantval import workbooks as W

    names = ["scenarios.csv", "sensitivity.csv", "tornado.csv", "fair_values_by_scenario.csv",
             "expense_by_scenario.csv", "sensitivities_bsm.csv"]
    csv_paths = [pathlib.Path(csv_dir) / n for n in names] if csv_dir is not None else []
    outputs = csv_paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])
    scen = pd.DataFrame({"scenario": [r.scenario.id for r in run.results],
                         "description": [r.scenario.description for r in run.results]})
    sens = WI.sensitivity_table(run)
    torn = WI.tornado_table(run)
    fvs = WI.fair_values_by_scenario(run)
    exp = WI.expense_by_period(run)
    greeks = WI.greeks_table(run)
    curve = WI.volatility_curve(run)
    if csv_paths:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_paths[0], scen)
        write_csv(csv_paths[1], sens)
        write_csv(csv_paths[2], torn)
        write_csv(csv_paths[3], fvs.melt(id_vars="grant_id", var_name="scenario", value_name="fair_value_per_unit"))
        write_csv(csv_paths[4], exp.melt(id_vars="period_end", var_name="scenario", value_name="expense"),
                  money=("expense",))
        write_csv(csv_paths[5], greeks)
    if xlsx is not None:
        info = W.RunInfo("grantval whatif: assumption sensitivity", command or "(Python API)", run.ledger.location,
                         run.ledger.files,
                         [("expense from", str(run.start)), ("expense through", str(run.through)),
                          ("grants re-valued", f"{int(run.window_mask.sum())} of {run.ledger.n_grants}"),
                          ("planned grants", str(int(run.ledger.grants["planned"].sum())))],
                         run.policy.describe(), timestamp)
        sheets = W.whatif_sheets(info, scen, sens, torn, fvs, exp, greeks, curve, run.ledger.warnings)
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time())
    return outputs


def assumptions(prices, curve, *, ledger=None, dates=None, dividends=None, peers=None, **options):
    """Derive an assumptions table from market data; see :mod:`grantval.market.derive`.

    ``options`` are the fields of :class:`grantval.market.derive.MarketOptions`.
    """
    from grantval.market.derive import MarketOptions, derive_assumptions

    return derive_assumptions(prices, curve, dates=dates, ledger=ledger, dividends=dividends, peers=peers,
                              options=MarketOptions(**options))


MARKET_NOTES = [
    ("Share price", "The close on the grant date, or the last close before it (source_price_note says which)."),
    ("Expected term", "From the ledger's option grants on the date, quantity-weighted, by the simplified method "
                      "(SEC SAB Topic 14.D.2); expected_term_years is left blank so the ledger applies the "
                      "simplified method grant by grant. With --dates, the term given."),
    ("Volatility", "Sample standard deviation of log returns over the lookback ending on the grant date, "
                   "annualised by the square root of 252, 52 or 12 periods a year (ASC 718-10-55-37). With peers, "
                   "blended with their weighted-average volatility over the same lookback (SAB Topic 14.D.1)."),
    ("Risk-free rate", "Par yield interpolated linearly between tenors to the expected term (flat beyond the ends), "
                       "converted from semiannual to continuous compounding: r = 2 ln(1 + y/2)."),
    ("Dividend yield", "Dividends with ex-dates in the 365 days up to the grant date, over the share price."),
]


def write_assumptions(derived, csv_path: pathlib.Path, xlsx: pathlib.Path | None, inputs: list[str],
                      command: str = "", timestamp: bool = True) -> list[pathlib.Path]:
    """Write the derived assumptions as CSV (a ledger ``assumptions`` table) and optionally a workbook."""
    from grantval import workbooks as W

    outputs = [pathlib.Path(csv_path)] + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, inputs)
    write_csv(pathlib.Path(csv_path), derived.table)
    if xlsx is not None:
        from grantval.io.read import sha256_of

        info = W.RunInfo("grantval assumptions: valuation assumptions from market data", command or "(Python API)",
                         "", [(p, sha256_of(pathlib.Path(p))) for p in inputs], [], derived.notes, timestamp)
        fmts = {"share_price": "#,##0.00", "volatility": "0.00%", "risk_free_rate": "0.000%", "dividend_yield": "0.00%",
                "expected_term_years": "0.0000"}
        sheets = [W.run_sheet(info, info.workbook_time()),
                  Sheet("assumptions", frame=derived.table, formats=fmts),
                  W.notes_sheet(MARKET_NOTES, [])]
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time())
    return outputs
