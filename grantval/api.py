"""The Python API behind the ``grantval`` commands.

Each function takes paths and options, returns result objects, and raises
:class:`~grantval.errors.GrantvalError` subclasses for problems the user can
fix.  The command layer only formats what these return.
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

from grantval import __version__
from grantval.errors import Problem
from grantval.fairvalue import FairValues, compute_fair_values
from grantval.io.write import Sheet, refuse_overwriting_inputs, write_csv, write_workbook
from grantval.ledger import Ledger, load_ledger, read_ledger
from grantval.notes import REVIEW, VALUATION_METHODS
from grantval.policy import Policy, resolve_policy


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
    ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, valuation_unit=valuation_unit, lattice_steps=lattice_steps)
    return ValueRun(ledger, policy, compute_fair_values(ledger, policy))


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
LEDGER_TEXT = ("grant_id", "holder_id", "group", "assumption_key")


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
            Sheet("fair_values", frame=table, formats=FAIR_VALUE_FORMATS, text_columns=LEDGER_TEXT,
                  widths={"grant_id": 14, "expected_term_method": 34, "fair_value_source": 28}),
            Sheet("notes", rows=notes_rows("grantval value: grant-date fair values", run.ledger, run.policy,
                                           [("distinct valuations", str(run.fair_values.distinct_valuations))]),
                  widths={1: 28, 2: 100, 3: 66}),
        ]
        write_workbook(pathlib.Path(xlsx), sheets)
    return outputs
