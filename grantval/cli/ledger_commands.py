"""``grantval check`` and ``grantval value``."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from grantval.cli.app import app, check_outputs, command_line, echo_outputs, output_set, say, writing
from grantval.cli.options import CsvDir, Ledger, NoTimestamp, ValuationUnit, Workbook, choice


@app.command("check")
def check_cmd(ledger: Ledger) -> None:
    """Check a ledger and list every problem; exit 0 when there are no errors, 1 otherwise."""
    from grantval import api

    report = api.check(ledger)
    for p in report.problems:
        typer.echo(str(p), err=p.severity == "error")
    if not report.ok:
        typer.echo(f"{ledger}: {len(report.errors)} error(s), {len(report.warnings)} warning(s)", err=True)
        raise typer.Exit(1)
    say(f"{ledger}: {report.ledger.n_grants} grants, {len(report.ledger.tranches)} tranches, "
        f"{len(report.ledger.events)} events; no errors, {len(report.warnings)} warning(s)")


@app.command("value")
def value_cmd(
    ledger: Ledger,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    valuation_unit: Annotated[Optional[ValuationUnit], typer.Option(
        "--valuation-unit", help="Value per award or per tranche (overrides the ledger's policy).")] = None,
    lattice_steps: Annotated[Optional[int], typer.Option(
        "--lattice-steps", metavar="STEPS", help="Lattice time steps (overrides the ledger's policy).")] = None,
    no_timestamp: NoTimestamp = False,
) -> None:
    """Value every grant at its grant date and write the fair-value table."""
    from grantval import api

    check_outputs(output, csv_dir)
    with output_set({"-o": output}, {"--csv-dir": (csv_dir, ["fair_values.csv"])}, inputs=[ledger], ledgers=[ledger],
                    timestamp=not no_timestamp) as plan:
        run = api.value(ledger, valuation_unit=choice(valuation_unit), lattice_steps=lattice_steps)
        with writing(plan):
            written = api.write_fair_values(run, output, csv_dir, timestamp=not no_timestamp, command=command_line())
    fv = run.fair_values
    total = float(fv.table["grant_date_fair_value"].sum())
    say(f"grants read {run.ledger.n_grants}, valued {fv.table['grant_id'].nunique()} "
        f"({fv.distinct_valuations} distinct valuations); total grant-date fair value {total:,.2f}")
    echo_outputs(written)
