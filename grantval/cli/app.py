"""The typer application, its one error handler and the helpers the commands share."""

from __future__ import annotations

import contextlib
import sys

import typer
from typer.core import TyperArgument, TyperGroup

from grantval import __version__
from grantval.errors import GrantvalError, UsageError

#: how the command line writes the Python API's parameter names
OPTION_NAMES = {
    "through": "--through", "start": "--from", "forecast_through": "--forecast-through",
    "grants_from": "--grants-from", "grants_through": "--grants-through", "share_price": "--share-price",
    "vary": "--vary", "period": "--period", "standard": "--standard", "attribution": "--attribution",
    "forfeitures": "--forfeitures", "valuation_unit": "--valuation-unit", "lattice_steps": "--lattice-steps",
    "fiscal_year_end_month": "--fiscal-year-end-month", "dates": "--dates", "ledger": "--ledger",
    "frequency": "--frequency", "peer_weight": "--peer-weight", "expected_term": "--expected-term",
    "contractual_term": "--contractual-term", "ticker": "--ticker", "lookback": "--lookback",
    "volatility": "--volatility", "risk_free_rate": "--risk-free-rate", "dividend_yield": "--dividend-yield",
    "exercise_price": "--exercise-price",
    "register": "--register",
    "reason": "--reason",
    "average_prices": "--average-prices",
    "peer_sets": "--peer-set", "peer_dates": "--peer-dates",
}


def _plain_usage_name(self) -> str:
    """Usage-line name of an argument: ``LEDGER`` when required, ``[LEDGER]`` when optional.

    typer writes required arguments as ``{LEDGER}``, which reads like a set of
    choices; the conventional usage line (POSIX utility syntax) leaves them bare.
    """
    name = self.display_name_raw if self.required else f"[{self.display_name_raw}]"
    return name + ("..." if self.nargs != 1 else "")


if hasattr(TyperArgument, "_usage_display_name"):  # typer's own hook; tests/test_cli.py checks the result
    TyperArgument._usage_display_name = _plain_usage_name


def message(err: GrantvalError) -> str:
    """The error's text, with the API's parameter names written as command-line options."""
    return err.worded(OPTION_NAMES) if isinstance(err, UsageError) else str(err)


#: options of the whole program, accepted before or after the command name
GLOBAL_FLAGS = ("-q", "--quiet", "-v", "--verbose")
#: set by the root callback: print nothing but errors and warnings
QUIET = {"on": False}


def say(text: str) -> None:
    """Print an informational line (not under --quiet)."""
    if not QUIET["on"]:
        typer.echo(text)


class _Commands(TyperGroup):
    """The command group: every :class:`GrantvalError` a command raises is reported here, once."""

    def parse_args(self, ctx, args):
        """Accept the global flags after the command name too (``grantval expense ... -q``)."""
        if "--" in args:
            return super().parse_args(ctx, args)
        hoisted = [a for a in args if a in GLOBAL_FLAGS]
        return super().parse_args(ctx, hoisted + [a for a in args if a not in GLOBAL_FLAGS])

    def invoke(self, ctx):
        try:
            from grantval import workers

            workers.requested()  # a bad GRANTVAL_PROCESSES is refused before any work or output
            return super().invoke(ctx)
        except GrantvalError as err:
            typer.echo(f"error: {message(err)}", err=True)
            raise typer.Exit(err.exit_code) from None


app = typer.Typer(
    cls=_Commands,
    add_completion=False,
    pretty_exceptions_enable=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    help="Grant-date fair values and expense schedules for stock-based compensation. "
    "Results inform accounting judgements; they must be reviewed by qualified accounting staff.",
)


def command_line() -> str:
    """The command as typed, for the run sheet."""
    return " ".join(["grantval"] + sys.argv[1:])


def usage(text: str) -> None:
    """Report a usage problem and exit 2."""
    raise UsageError(text)


def echo_outputs(paths) -> None:
    """Print each path written."""
    for path in paths:
        say(f"wrote {path}")


def report_outputs(result) -> None:
    """Print the paths written and any failed tie-out check; exit 1 when one failed."""
    echo_outputs(result.paths)
    for c in result.failed:
        typer.echo(f"check failed: {c.name}: {c.a} vs {c.b}", err=True)
    if result.failed:
        raise typer.Exit(1)


def check_outputs(output, csv_dir) -> None:
    """Exit 2 unless a workbook (.xlsx), a CSV folder or both were asked for."""
    if output is None and csv_dir is None:
        usage("give -o WORKBOOK.xlsx, --csv-dir DIR, or both")
    if output is not None and output.suffix.lower() != ".xlsx":
        usage(f"-o {output}: the workbook name must end in .xlsx")


def version_callback(value: bool) -> None:
    if value:
        typer.echo(f"grantval {__version__}")
        raise typer.Exit()


@contextlib.contextmanager
def output_set(files: dict, folders: dict, *, inputs=(), ledgers=(), timestamp: bool = True):
    """Check every output location before anything is computed; yield the plan whose ``writing()``
    writes all outputs or none (see :mod:`grantval.io.outputs`)."""
    from grantval.io.outputs import plan_outputs

    plan = plan_outputs(files, folders, inputs=[i for i in inputs if i is not None],
                        ledgers=[x for x in ledgers if x is not None], command=command_line(), timestamp=timestamp)
    for line in plan.notices:
        say(line)
    with plan:
        yield plan


@contextlib.contextmanager
def writing(plan):
    """Write inside the plan's output set; print what it tidied afterwards."""
    with plan.writing() as out:
        yield out
    for line in out.notices:
        say(line)
