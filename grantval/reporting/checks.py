"""Tie-out checks: two independent figures, a tolerance and a live PASS/FAIL formula (the one verdict column)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import EXCEL_ROWS, Formula, Sheet


@dataclass
class CheckRow:
    """One tie-out: two figures (values or formulas), a tolerance and the tool's own verdict.

    ``kind`` says what the figures are, for their number format: "count" (whole numbers),
    "money" (currency, to cents), "shares" (share or unit quantities with fractions) or
    "relative" (values compared within a relative tolerance, shown to 10 places).  None
    infers it (:func:`check_kind`).
    """

    name: str
    a: object
    b: object
    tolerance: float
    tool_pass: bool
    relative: bool = False
    kind: str | None = None


#: number formats of a check's figures and difference, and of its tolerance, by kind
FIGURE_FORMATS = {"count": "#,##0", "money": "#,##0.00", "shares": "#,##0.0000", "relative": "#,##0.0000000000"}


TOLERANCE_FORMATS = {"count": "#,##0", "money": "#,##0.00#", "shares": "#,##0.000000", "relative": "0.0000000000"}


def check_kind(c: CheckRow) -> str:
    """What a check's figures are: its own ``kind``, else inferred from its tolerance and name.

    A relative tolerance compares values to 10 places; no tolerance means counted things; a
    fractional tolerance on shares or units means quantities; any other tolerance is money.
    """
    if c.kind is not None:
        return c.kind
    if c.relative:
        return "relative"
    if c.tolerance == 0:
        return "count"
    words = c.name.lower()
    return "shares" if ("shares" in words or "units" in words) and c.tolerance < 0.005 else "money"


def _plain(v) -> float | None:
    """A figure as a number when it is one (not a formula, not text), else None."""
    if isinstance(v, (Formula, str, bool)) or v is None:
        return None
    v = float(v)
    return v if np.isfinite(v) else None


def checks_sheet(rows: list[CheckRow]) -> Sheet:
    """Checks as rows: figure A, figure B, difference, tolerance and one verdict column.

    The verdict is a live formula on the two figures and the tolerance, so it follows the
    cells as recalculated; the tool's own verdict (``CheckRow.tool_pass``, the exit status and
    the "check failed" lines) is written as the formula's cached value, which readers that do
    not recalculate show (and tests compare with the recalculated verdict).  The difference and
    a relative tolerance get cached values too when the figures are plain numbers.  Figures are
    formatted by what they are (:func:`check_kind`); labels wrap in their column.
    """
    out: list[list] = [["Check", "Figure A", "Figure B", "Difference", "Tolerance", "Verdict"]]
    fmts, cached = {}, {}
    for i, c in enumerate(rows, start=1):
        r = i + 1
        tol = Formula(f"={c.tolerance!r}*ABS(C{r})") if c.relative else c.tolerance
        out.append([c.name, c.a, c.b, Formula(f"=B{r}-C{r}"), tol,
                    Formula(f'=IF(ABS(D{r})<=E{r},"PASS","FAIL")')])
        kind = check_kind(c)
        fmts.update({(i, j): FIGURE_FORMATS[kind] for j in (1, 2, 3)})
        fmts[(i, 4)] = TOLERANCE_FORMATS[kind]
        cached[(i, 5)] = "PASS" if c.tool_pass else "FAIL"
        a, b = _plain(c.a), _plain(c.b)
        if a is not None and b is not None:
            cached[(i, 3)] = a - b
        if c.relative and b is not None:
            cached[(i, 4)] = c.tolerance * abs(b)
    return Sheet("checks", rows=out, widths={1: 68, 2: 19, 3: 19, 4: 16, 5: 14, 6: 10}, row_formats=fmts,
                 verdicts=f"F2:F{len(rows) + 1}", wrap_columns=(1,), cached=cached)


def _bsm_by_erf(s, k, t, r, v, q) -> np.ndarray:
    """Black-Scholes-Merton call written out with the error function: a second implementation.

    Deliberately shares no code with :mod:`grantval.pricing` (it follows the
    workbook's own formula), so that agreement is evidence, not an identity.
    """
    from scipy.special import erf

    cdf = lambda x: 0.5 * (1.0 + erf(x / np.sqrt(2.0)))  # noqa: E731
    d1 = (np.log(s / k) + (r - q + v * v / 2.0) * t) / (v * np.sqrt(t))
    d2 = (np.log(s / k) + (r - q - v * v / 2.0) * t) / (v * np.sqrt(t))
    return s * np.exp(-q * t) * cdf(d1) - k * np.exp(-r * t) * cdf(d2)


def _cents(values, chunk: int = 1 << 20) -> int:
    """Sum of currency amounts as written (floats of whole cents), in cents.

    Each amount is rounded to its cents and the whole cents added, about a million amounts
    at a time (the same integer; the temporaries of a million grants' 40 periods would
    otherwise take a gigabyte).
    """
    flat = np.asarray(values, dtype=float).reshape(-1)
    return sum(int(np.round(flat[at:at + chunk] * 100.0).astype(np.int64).sum()) for at in range(0, flat.size, chunk))


@dataclass
class ExpenseFigures:
    """The figures the expense checks compare, each from its own computation.

    Attributes
    ----------
    period_cells : ndarray
        Every grant's period amounts as they go into the written table (currency).
    row_totals : ndarray
        The per-grant total column of that table (currency).
    group_cells : ndarray
        The by-group table's period amounts (its own grouping of the per-grant schedule).
    engine_total_cents : int
        The window's expense recomputed from the per-tranche costs: cumulative cost
        through the last period end less cumulative cost before the window, per grant,
        each rounded to cents (a fresh pass of the engine, not the schedule's arrays).
    table_rows : int
        Grant rows in the written by-grant table.
    """

    period_cells: np.ndarray
    row_totals: np.ndarray
    group_cells: np.ndarray
    engine_total_cents: int
    table_rows: int


def _window_cents(inp, kw: dict, start, through) -> int:
    """The window's expense of ``inp``'s grants from two fresh, full measurements, in cents."""
    from grantval.attribution.engine import measure
    from grantval.attribution.periods import to_cents

    end = to_cents(measure(inp, np.datetime64(through, "D"), **kw).grant_cost)
    opening = to_cents(measure(inp, np.datetime64(start, "D") - np.timedelta64(1, "D"), **kw).grant_cost)
    return int((end - opening).sum())


def engine_total_cents(inp, policy, start, through) -> int:
    """The window's expense from two fresh measurements of the per-tranche costs, in cents.

    The measurements are the engine's full ones (not the schedule's cost-only periods),
    made a block of grants at a time where the inputs allow (the same cents, in far
    less memory: a million grants' whole-ledger arrays take 2.7 GB more).
    """
    from grantval.attribution import blocks

    kw = dict(attribution=policy.attribution, forfeitures=policy.forfeitures)
    if not blocks.blockable(inp):
        return _window_cents(inp, kw, start, through)
    return sum(blocks.map_blocks(inp, lambda sub: _window_cents(sub, kw, start, through)))


def _schedule_checks(run, fig: ExpenseFigures, n_periods: int) -> list[CheckRow]:
    """Grant counts and the sums of the period tables against the engine's own total."""
    n = run.ledger.n_grants
    valued = int(run.fair_values.table["grant_id"].nunique())
    first, last = col_letter(7), col_letter(6 + n_periods)
    tot_col, trow = col_letter(7 + n_periods), fig.table_rows + 2
    g_rows, g_tot = fig.group_cells.shape[0], col_letter(2 + n_periods)
    engine = fig.engine_total_cents / 100.0
    cells = _cents(fig.period_cells)
    col_sums = _cents(np.asarray(fig.period_cells, dtype=float).sum(axis=0)) if fig.period_cells.size else 0
    return [
        CheckRow("Grants in the ledger = grants valued", n, valued, 0, n == valued),
        CheckRow("Grants valued = grant rows in the expense schedule", valued,
                 Formula(f"=COUNTA(expense_by_grant!A2:A{fig.table_rows + 1})"), 0, valued == fig.table_rows),
        CheckRow("Period cells of all grants sum to the engine's total from the per-tranche costs",
                 Formula(f"=SUM(expense_by_grant!{first}2:{last}{fig.table_rows + 1})"), engine, 0.005,
                 cells == fig.engine_total_cents),
        CheckRow("Column totals sum to the total of the row totals",
                 Formula(f"=SUM(expense_by_grant!{first}{trow}:{last}{trow})"),
                 Formula(f"=expense_by_grant!{tot_col}{trow}"), 0.005, col_sums == _cents(fig.row_totals)),
        CheckRow("Expense by group (its own grouping) sums to the engine's total",
                 Formula(f"=expense_by_group!{g_tot}{g_rows + 2}"), engine, 0.005,
                 _cents(fig.group_cells) == fig.engine_total_cents),
    ]


def _equity_rows_sum(equity: np.ndarray, columns: tuple[str, ...], value: float, limit: int = 8000):
    """A live sum over the ``unrecognized`` rows of equity-settled grants only, in ``columns``.

    The grant-date side of the check (tranches' quantity x fair value) carries no value for
    cash-settled grants (their cost is the liability's, checked on its own), so the live
    sum must leave their rows out too.  Rows are summed as runs of consecutive equity rows;
    a formula longer than ``limit`` characters (spreadsheets refuse over 8,192) falls back
    to the tool's figure ``value``.
    """
    idx = np.flatnonzero(equity) + 2
    if idx.size == 0:
        return Formula("=0")
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts, ends = np.r_[idx[0], idx[breaks + 1]], np.r_[idx[breaks], idx[-1]]
    terms = [f"SUM(unrecognized!{c}{a}:{c}{b})" for c in columns for a, b in zip(starts, ends)]
    text = "=" + "+".join(terms)
    return Formula(text) if len(text) <= limit else value


def _cost_checks(run, tranches, unrec) -> list[CheckRow]:
    """Recognised plus unrecognised cost against expected quantities times fair values."""
    n = run.ledger.n_grants
    sched = run.schedule
    nt = len(tranches) + 1
    cols = {c: col_letter(i + 1) for i, c in enumerate(tranches.columns)}
    uc = {c: col_letter(i + 1) for i, c in enumerate(unrec.columns)}
    q_name = "quantity_expected_to_vest" if "quantity_expected_to_vest" in cols else "quantity_expensed"
    q_col, fv_col, c_col = cols[q_name], cols["fair_value_per_unit"], cols["cancelled_unvested"]
    # cash-settled awards carry no grant-date value: their cost is the liability's (checked on its own)
    from grantval.awards.registry import kinds

    award = run.ledger.grants["award_type"].to_numpy()
    equity = ~np.isin(award, [k.name for k in kinds() if k.settlement == "cash"])
    expected = float(np.sum(tranches[q_name] * tranches["fair_value_per_unit"]) +
                     np.sum(tranches["cancelled_unvested"] * tranches["fair_value_per_unit"]))
    rec_plus = float(unrec["recognised_to_date"].to_numpy()[equity].sum()
                     + unrec["unrecognised_cost"].to_numpy()[equity].sum())
    per_grant = np.abs(sched.cumulative_cents[:, -1] + np.round(unrec["unrecognised_cost"].to_numpy() * 100)
                       - np.floor(sched.at_through.expected_total * 100 + 0.5))
    off = int(np.sum(per_grant > 1))
    by_formula = (expected if nt > EXCEL_ROWS else
                  Formula(f"=SUMPRODUCT(tranches!{q_col}2:{q_col}{nt},tranches!{fv_col}2:{fv_col}{nt})"
                          f"+SUMPRODUCT(tranches!{c_col}2:{c_col}{nt},tranches!{fv_col}2:{fv_col}{nt})"))
    return [
        CheckRow("Recognised + unrecognised = expected quantity x fair value (all tranches)",
                 _equity_rows_sum(equity, (uc["recognised_to_date"], uc["unrecognised_cost"]), rec_plus),
                 by_formula, round(0.01 * n + 0.005, 2), abs(rec_plus - expected) <= 0.01 * n + 0.005),
        CheckRow("Grants whose recognised + unrecognised differs from expected quantity x fair value by over a cent",
                 off, 0, 0, off == 0),
    ]


def disclosure_ties(disc) -> list[CheckRow]:
    """Roll-forward ties of the activity tables (flows against the end balance counted on its own)."""
    o_a, o_b = disc.option_tie
    r_a, r_b = disc.rsu_tie
    return [
        CheckRow("Option roll-forward: start + granted - exercised - forfeited - expired = end", o_a, o_b, 0,
                 o_a == o_b),
        CheckRow("RSU roll-forward: start + granted - vested - forfeited = end", r_a, r_b, 0, r_a == r_b),
    ] + ([CheckRow("Performance-unit roll-forward: start + granted + adjustments - vested - forfeited = end",
                   disc.psu_tie[0], disc.psu_tie[1], 0, disc.psu_tie[0] == disc.psu_tie[1])]
         if disc.performance_units is not None else [])


def bsm_check(fvt, rc: str) -> CheckRow:
    """The tool's BSM values against a second implementation of the formula (and the live formulas)."""
    bsm = fvt["model"].to_numpy() == "bsm"
    get = lambda c: fvt[c].to_numpy(float)[bsm]  # noqa: E731
    tool = get("fair_value_per_unit")
    again = _bsm_by_erf(get("share_price"), get("exercise_price"), get("expected_term_years"), get("risk_free_rate"),
                        get("volatility"), get("dividend_yield"))
    return CheckRow("Formula-recomputed BSM fair values sum to the tool's (relative tolerance)",
                    Formula(f"=SUM(fair_values!{rc}2:{rc}{len(fvt) + 1})"), float(tool.sum()), 1e-9,
                    bool(np.allclose(again, tool, rtol=1e-9, atol=1e-9)), relative=True)


def expense_checks(run, figures: ExpenseFigures, tranches, unrec, disc, rc: str) -> list[CheckRow]:
    """The tie-outs of an expense run: every verdict compares two independent computations."""
    return (_schedule_checks(run, figures, len(run.schedule.period_ends)) + _cost_checks(run, tranches, unrec)
            + disclosure_ties(disc) + [bsm_check(run.fair_values.table, rc)])
