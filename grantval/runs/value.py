"""``value``: grant-date fair values of every award."""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

from grantval.io.csv import write_csv
from grantval.io.files import refuse_overwriting_inputs
from grantval.io.xlsx.write import write_workbook
from grantval.ledger import Ledger, load_ledger
from grantval.measurement.fairvalue import FairValues, compute_fair_values
from grantval.policy import Policy, resolve_policy
from grantval.progress import stage
from grantval.runs.common import ledger_inputs, reconcile


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


def write_fair_values(run: ValueRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                      timestamp: bool = True, command: str = "") -> list[pathlib.Path]:
    """Write the fair-value table to a workbook and/or ``fair_values.csv``; returns the paths written."""
    from grantval.reporting.value_book import value_sheets

    outputs = []
    if xlsx is not None:
        outputs.append(pathlib.Path(xlsx))
    csv_path = pathlib.Path(csv_dir) / "fair_values.csv" if csv_dir is not None else None
    if csv_path is not None:
        outputs.append(csv_path)
    refuse_overwriting_inputs(outputs, ledger_inputs(run.ledger))
    if csv_path is not None:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_path, run.fair_values.table)
    if xlsx is not None:
        from grantval.reporting.run_sheet import RunInfo, run_sheet

        info = RunInfo("grantval value: grant-date fair values", command or "(Python API)", run.ledger.location,
                       run.ledger.files, [], run.policy.describe(), timestamp)
        write_workbook(pathlib.Path(xlsx), [run_sheet(info, info.workbook_time()), *value_sheets(run)],
                       fixed_time=info.workbook_time(), footer=info.footer())
    return outputs
