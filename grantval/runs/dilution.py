"""``dilution``: incremental shares of the awards for diluted EPS by the treasury stock method."""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.attribution.dilution import GrantDilution, grant_dilution
from grantval.attribution.inputs import ExpenseInputs, build_inputs
from grantval.dates import DAY, period_ends
from grantval.errors import LedgerError, Problem, UsageError
from grantval.ledger import Ledger, load_ledger
from grantval.ledger.columns import Column
from grantval.measurement.fairvalue import compute_fair_values
from grantval.policy import Policy, resolve_policy
from grantval.progress import stage
from grantval.runs.common import as_day, csv_paths, ledger_inputs

#: the CSV tables of a dilution run, in the order written
CSV_NAMES = ["dilution.csv", "dilution_by_grant.csv"]

#: columns of the average-prices file
AVERAGE_PRICES = (
    Column("period_end", "date", required=True),
    Column("average_share_price", "number", required=True),
)


@dataclass
class DilutionRun:
    """A dilution run: ledger, policy, the periods, their average prices and the per-grant figures."""

    ledger: Ledger
    policy: Policy
    inputs: ExpenseInputs
    starts: np.ndarray
    ends: np.ndarray
    average_price: np.ndarray
    grants: GrantDilution
    start: str
    through: str
    prices_file: str
    prices_digest: tuple[str, str] | None = None


@dataclass
class DilutionOutputs:
    """Paths a run wrote and its tie-out checks."""

    paths: list[pathlib.Path]
    checks: list

    @property
    def failed(self) -> list:
        return [c for c in self.checks if not c.tool_pass]


def periods(start, through, policy: Policy) -> tuple[np.ndarray, np.ndarray]:
    """First and last days of the reporting periods from ``start`` through ``through`` (policy's period)."""
    ends = period_ends(start, through, policy.period, policy.fiscal_year_end_month)
    ends = ends[(ends >= start) & (ends < through)]
    ends = np.append(ends, through).astype("datetime64[D]")
    starts = np.concatenate([[start], ends[:-1] + DAY]).astype("datetime64[D]")
    return starts, ends


def read_average_prices(path, ends: np.ndarray) -> np.ndarray:
    """Average share price of each period, from ``path`` (CSV: ``period_end``, ``average_share_price``).

    Raises
    ------
    LedgerError
        Listing every problem (file, row, column): unreadable cells, prices that are not
        positive, a period end given twice, and each period of the run without a price.
    """
    from grantval.io.csv_read import read_csv_table
    from grantval.ledger.parse import parse_table

    p = pathlib.Path(path)
    if not p.is_file():
        raise LedgerError([Problem(str(p), None, None, "no such file")], str(p))
    table = read_csv_table(p, "average_prices", frozenset(c.name for c in AVERAGE_PRICES))
    frame, problems = parse_table(table, AVERAGE_PRICES)
    problems = list(table.problems) + list(problems)
    seen: dict = {}
    for r, d, x in zip(frame["_row"], frame["period_end"], frame["average_share_price"].to_numpy(float)):
        if np.isfinite(x) and x <= 0:
            problems.append(Problem(p.name, int(r), "average_share_price", f"must be positive; got {x:g}"))
        if not pd.isna(d):
            d = np.datetime64(d, "D")
            if d in seen:
                problems.append(Problem(p.name, int(r), "period_end", f"{d} is given twice (row {seen[d]})"))
            seen.setdefault(d, (int(r), x))
    out = np.full(len(ends), np.nan)
    for k, e in enumerate(ends):
        if e in seen:
            out[k] = seen[e][1]
        else:
            problems.append(Problem(p.name, None, "period_end", f"no average_share_price for the period ending {e}"))
    problems = [q for q in problems if q.severity == "error"]
    if problems:
        raise LedgerError(problems, str(p))
    return out


def dilution(location, *, average_prices, start, through, period=None, standard=None, attribution=None,
             fiscal_year_end_month=None) -> DilutionRun:
    """Incremental shares of every grant in each reporting period from ``start`` through ``through``.

    Parameters
    ----------
    location : path
        Ledger folder or workbook.
    average_prices : path
        CSV file with ``period_end`` and ``average_share_price`` for every period of the run.
    start, through : date or ISO text
        First day of the first period and last day of the last.
    period, standard, attribution, fiscal_year_end_month : optional
        Override the ledger's policy table.
    """
    start_d, through_d = as_day(start, "start"), as_day(through, "through")
    if start_d is None or through_d is None:
        raise UsageError("{start} and {through} are both required", ("start", "through"))
    if start_d > through_d:
        raise UsageError(f"{{start}} {start_d} is after {{through}} {through_d}", ("start", "through"))
    with stage("read+check"):
        ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            fiscal_year_end_month=fiscal_year_end_month)
    starts, ends = periods(start_d, through_d, policy)
    prices = read_average_prices(average_prices, ends)
    with stage("value"):
        fv = compute_fair_values(ledger, policy)
    with stage("dilution"):
        inp = build_inputs(ledger, fv, policy)
        g = grant_dilution(ledger, inp, policy.attribution, starts, ends, prices)
    from grantval.io.tables import sha256_of

    return DilutionRun(ledger, policy, inp, starts, ends, prices, g, str(start_d), str(through_d),
                       str(average_prices), (str(average_prices), sha256_of(average_prices)))


def write_dilution(run: DilutionRun, xlsx, csv_dir, command: str = "", timestamp: bool = True) -> DilutionOutputs:
    """Write ``dilution.csv`` and ``dilution_by_grant.csv`` and/or the dilution workbook."""
    from grantval.io.csv import write_csv
    from grantval.io.files import refuse_overwriting_inputs
    from grantval.reporting import dilution_tables as T

    paths = csv_paths(csv_dir, CSV_NAMES)
    outputs = paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, ledger_inputs(run.ledger) + [run.prices_file])
    totals, by_grant = T.dilution_totals(run), T.dilution_by_grant(run)
    checks = T.dilution_checks(run, totals, by_grant)
    if paths:
        pathlib.Path(paths[0]).parent.mkdir(parents=True, exist_ok=True)
        write_csv(paths[0], totals)
        write_csv(paths[1], by_grant)
    if xlsx is not None:
        T.write_dilution_book(run, pathlib.Path(xlsx), totals, by_grant, checks, command, timestamp)
    return DilutionOutputs(outputs, checks)
