"""The ``grantval`` command: a thin layer over the Python API.

Each command parses options, calls one API function and turns
:class:`~grantval.errors.GrantvalError` into a message on standard error and
an exit code (1 for a data problem, 2 for a usage problem).  No command
contains accounting or pricing logic of its own.
"""

from __future__ import annotations

import sys
from typing import Optional

import typer

from grantval import __version__
from grantval.errors import GrantvalError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Grant-date fair values and expense schedules for stock-based compensation. "
    "Results inform accounting judgements; they must be reviewed by qualified accounting staff.",
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"grantval {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """grantval command line."""


def fail(err: GrantvalError) -> None:
    """Print a grantval error for the user and exit with its code."""
    typer.echo(f"error: {err}", err=True)
    raise typer.Exit(err.exit_code)


@app.command("price-option")
def price_option(
    share_price: float = typer.Option(..., help="Share price, currency per share."),
    strike: float = typer.Option(..., help="Exercise price, currency per share."),
    term: float = typer.Option(..., help="Expected term (BSM) or contractual term (lattice), years."),
    rate: float = typer.Option(..., help="Risk-free rate, continuously compounded decimal (0.04)."),
    volatility: float = typer.Option(..., help="Volatility, decimal (0.35)."),
    dividend_yield: float = typer.Option(0.0, help="Continuous dividend yield, decimal."),
    model: str = typer.Option("bsm", help="bsm or lattice."),
    vesting: float = typer.Option(0.0, help="Lattice: years until the option vests."),
    exercise_multiple: Optional[float] = typer.Option(None, help="Lattice: suboptimal exercise factor."),
    exit_rate: float = typer.Option(0.0, help="Lattice: post-vesting exit rate per year."),
) -> None:
    """Value one option with the stated assumptions and print the value per option."""
    from grantval.valuation import bsm_value, lattice_value

    try:
        if model == "bsm":
            value = bsm_value(share_price, strike, term, rate, volatility, dividend_yield)
        elif model == "lattice":
            value = lattice_value(
                share_price, strike, term, rate, volatility, dividend_yield,
                vesting=vesting, exercise_multiple=exercise_multiple, exit_rate=exit_rate,
            )
        else:
            raise typer.BadParameter("model must be bsm or lattice", param_hint="--model")
    except GrantvalError as err:
        fail(err)
    typer.echo(f"{value:.6f}")


def main(argv: Optional[list[str]] = None) -> None:
    """Entry point of the console script."""
    app(args=argv, prog_name="grantval")


if __name__ == "__main__":  # pragma: no cover
    main(sys.argv[1:])
