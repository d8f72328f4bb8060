"""``grantval close`` (book periods in the close register, or reopen the latest close) and ``grantval register``."""

from __future__ import annotations

import pathlib
from typing import Annotated, Optional

import typer

from grantval.cli.app import app, command_line, echo_outputs, say, usage
from grantval.cli.options import (AttributionOpt, CsvDir, ForfeituresOpt, NoTimestamp, PeriodOpt, StandardOpt,
                                  Workbook, choice)

RegisterFile = Annotated[pathlib.Path, typer.Option("--register", metavar="FILE",
                                                    help="The close register (an SQLite file, e.g. closes.gvreg).")]


def _reopen(register: pathlib.Path, reason: Optional[str], given: list[str]) -> None:
    from grantval import api

    if given:
        usage(f"--reopen takes only --register and --reason; leave out {', '.join(given)}")
    if not reason or not reason.strip():
        usage("--reopen needs --reason TEXT: say why the close is reopened")
    r = api.reopen(register, reason)
    who = f" by {r.user}" if r.user else ""
    say(f"reopened close {r.close_id}{who} at {r.reopened_at:%Y-%m-%d %H:%M:%S} UTC: {r.reason}")
    say(f"its rows stay in {register}, marked superseded; register head digest {r.digest}")


@app.command("close")
def close_cmd(
    register: RegisterFile,
    ledger: Annotated[Optional[pathlib.Path], typer.Argument(
        metavar="LEDGER", help="Ledger: a folder of CSV files or an .xlsx workbook (not with --reopen).")] = None,
    through: Annotated[Optional[str], typer.Option(
        "--through", metavar="DATE", help="Last day of the close: the last day of a period (ISO date).")] = None,
    start: Annotated[Optional[str], typer.Option(
        "--from", metavar="DATE", help="First close only: first day of its first period (default: start of the "
                                       "first period with a grant).")] = None,
    period: PeriodOpt = None,
    standard: StandardOpt = None,
    attribution: AttributionOpt = None,
    forfeitures: ForfeituresOpt = None,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    no_timestamp: NoTimestamp = False,
    reopen: Annotated[bool, typer.Option("--reopen", help="Reopen the latest close instead (with --reason).")] = False,
    reason: Annotated[Optional[str], typer.Option("--reason", metavar="TEXT", help="Why the close is reopened.")] = None,
) -> None:
    """Book every period after the last closed one through --through in the close register (or --reopen the latest)."""
    from grantval import api

    if reopen:
        given = [n for n, v in (("LEDGER", ledger), ("--through", through), ("--from", start), ("-o", output),
                                ("--csv-dir", csv_dir)) if v is not None]
        return _reopen(register, reason, given)
    if reason is not None:
        usage("--reason goes with --reopen")
    if ledger is None or through is None:
        usage("give LEDGER and --through DATE (or --reopen --reason TEXT)")
    if output is not None and output.suffix.lower() != ".xlsx":
        usage(f"-o {output}: the workbook name must end in .xlsx")
    result = api.close(ledger, register=register, through=through, start=start, period=choice(period),
                       standard=choice(standard), attribution=choice(attribution), forfeitures=choice(forfeitures),
                       xlsx=output, csv_dir=csv_dir, command=command_line(), timestamp=not no_timestamp)
    _report(result)


def _report(result) -> None:
    plan = result.plan
    booked = int(plan.rows["booked_cents"].sum()) / 100.0
    catch = int(plan.rows["catch_up_cents"].sum()) / 100.0
    ends = [str(e) for e in plan.period_ends]
    say(f"close {result.close_id}: booked {len(ends)} period(s) {ends[0]} to {ends[-1]}: {booked:,.2f} "
        f"(catch-up of closed periods {catch:,.2f}) for {plan.rows['grant_id'].nunique()} grants")
    for w in result.warnings:
        typer.echo(f"warning: {w}", err=True)
    say(f"register head digest {result.head_digest} (keep it elsewhere to anchor the register)")
    echo_outputs(result.paths)
    for c in result.failed:
        typer.echo(f"check failed: {c.name}: {c.a} vs {c.b}", err=True)
    if result.failed:
        raise typer.Exit(1)


@app.command("register")
def register_cmd(
    file: Annotated[pathlib.Path, typer.Argument(metavar="FILE", help="The close register.")],
    export: Annotated[Optional[pathlib.Path], typer.Option(
        "--export", metavar="DIR", help="Write the register's tables as CSV files into DIR.")] = None,
    verify: Annotated[bool, typer.Option(
        "--verify", help="Recompute every digest; exit 1 when a row was changed outside grantval.")] = False,
) -> None:
    """List the closes of a close register, export its tables, or verify it."""
    from grantval import api

    if verify:
        problems = api.verify_register(file)
        for p in problems:
            typer.echo(f"problem: {p}", err=True)
        if problems:
            typer.echo(f"error: the close register {file} fails its verification ({len(problems)} problem(s))", err=True)
            raise typer.Exit(1)
        say(f"{file}: every close, reopen, booked row and journal line matches its digest")
    if export is not None:
        echo_outputs(api.export_register(file, export))
    if verify or export is not None:
        return
    closes, head = api.register_closes(file)
    if not closes:
        say(f"{file}: no closes yet")
    for c in closes:
        who = c.user or "(unknown)"
        say(f"close {c.close_id}  {c.status:<10}  through {c.through}  periods {len(c.period_ends)}  "
            f"closed {c.closed_at:%Y-%m-%d %H:%M} UTC by {who}  grantval {c.tool_version}  rows {c.row_count}")
        if c.reopen is not None:
            r = c.reopen
            say(f"    reopened {r.reopened_at:%Y-%m-%d %H:%M} UTC by {r.user or '(unknown)'}: {r.reason}")
    if head:
        say(f"head digest {head}")


def show_comparison(run, register: pathlib.Path, csv_dir: Optional[pathlib.Path]) -> None:
    """``grantval expense --register``: booked beside recomputed per closed period; warnings to stderr."""
    from grantval.io.csv import write_csv
    from grantval.runs.close import compare_with_register

    cmp = compare_with_register(run, register)
    t = cmp.table
    if t.empty:
        say(f"{register}: no period of this schedule is closed")
    else:
        say(f"closed periods in {register} (booked includes catch-ups of earlier periods):")
        say(f"{'period end':<12}{'booked':>16}{'catch-up':>14}{'recomputed':>16}{'difference':>14}{'cumulative':>14}")
        for r in t.itertuples(index=False):
            say(f"{str(r.period_end)[:10]:<12}{r.booked:>16,.2f}{r.catch_up:>14,.2f}{r.recomputed:>16,.2f}"
                f"{r.difference:>14,.2f}{r.cumulative_difference:>14,.2f}")
    for w in cmp.warnings:
        typer.echo(f"warning: {w}", err=True)
    if csv_dir is not None:
        target = pathlib.Path(csv_dir) / "booked_vs_recomputed.csv"
        write_csv(target, t, money=tuple(c for c in t.columns if c != "period_end"))
        say(f"wrote {target}")
