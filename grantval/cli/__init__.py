"""The ``grantval`` command: thin typer commands over the Python API (:mod:`grantval.api`).

Each command parses its options, calls the API and prints; every
:class:`~grantval.errors.GrantvalError` is reported once, by the command group
(:mod:`grantval.cli.app`): exit 1 for a data problem, 2 for a usage problem.
"""

from __future__ import annotations

import sys
from typing import Annotated, Optional

import typer

from grantval.cli import expense_commands, ledger_commands, market_commands, price, whatif_commands  # noqa: F401
from grantval.cli import close_commands  # noqa: F401
from grantval.cli.app import QUIET, app, message, version_callback
from grantval.errors import GrantvalError

__all__ = ["app", "main"]


@app.callback()
def _root(
    version: Annotated[bool, typer.Option("--version", callback=version_callback, is_eager=True,
                                          help="Print the version and exit.")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Print nothing but errors and warnings; "
                                                               "may also follow the command.")] = False,
    verbose: Annotated[bool, typer.Option("--verbose", "-v", help="Print the time of each stage.")] = False,
) -> None:
    """grantval command line."""
    from grantval.progress import Reporter, install

    QUIET["on"] = quiet
    install(Reporter(show=sys.stderr.isatty() and not quiet and not verbose, verbose=verbose))


def main(argv: Optional[list[str]] = None) -> None:
    """Entry point of the console script.

    An unexpected exception is a bug in grantval: it is reported in one line
    (exit code 70) instead of a traceback, unless GRANTVAL_DEBUG=1.
    """
    import os

    try:
        app(args=argv, prog_name="grantval")
    except GrantvalError as err:  # raised outside a command (never expected)
        typer.echo(f"error: {message(err)}", err=True)
        sys.exit(err.exit_code)
    except Exception as exc:  # noqa: BLE001 - the last line of defence
        if os.environ.get("GRANTVAL_DEBUG") == "1":
            raise
        typer.echo(f"internal error (a bug in grantval; please report it with the input that caused it): "
                   f"{type(exc).__name__}: {exc}", err=True)
        sys.exit(70)


if __name__ == "__main__":  # pragma: no cover
    main(sys.argv[1:])
