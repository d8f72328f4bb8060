"""``grantval price-option``: one option valued with the stated assumptions."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from grantval.cli.app import app, usage
from grantval.cli.options import Model


def _chosen(model: Model, expected_term, contractual_term, term, vesting, multiple, exit_rate) -> float:
    """The term the model uses; refuse options the model does not use."""
    lattice_only = [name for name, v in (("--contractual-term", contractual_term), ("--vesting", vesting),
                                         ("--exercise-multiple", multiple), ("--exit-rate", exit_rate))
                    if v is not None]
    if model is Model.bsm:
        if lattice_only:
            usage(f"{', '.join(lattice_only)} {'is' if len(lattice_only) == 1 else 'are'} used by the lattice only; "
                  "add --model lattice or leave them out")
        given = [v for v in (expected_term, term) if v is not None]
        if len(given) != 1:
            usage("give the expected term with --expected-term YEARS (BSM)")
        return given[0]
    if expected_term is not None:
        usage("--expected-term is used by BSM only; the lattice runs to --contractual-term YEARS")
    given = [v for v in (contractual_term, term) if v is not None]
    if len(given) != 1:
        usage("give the contractual term with --contractual-term YEARS (lattice)")
    return given[0]


@app.command("price-option")
def price_option(
    share_price: Annotated[float, typer.Option("--share-price", metavar="PRICE", help="Share price, currency per share.")],
    exercise_price: Annotated[float, typer.Option("--exercise-price", "--strike", metavar="PRICE",
                                                  help="Exercise price, currency per share.")],
    risk_free_rate: Annotated[float, typer.Option("--risk-free-rate", "--rate", metavar="RATE",
                                                  help="Risk-free rate, continuously compounded decimal (0.04).")],
    volatility: Annotated[float, typer.Option("--volatility", metavar="DECIMAL", help="Volatility, decimal (0.35).")],
    expected_term: Annotated[Optional[float], typer.Option("--expected-term", metavar="YEARS",
                                                           help="BSM: expected term, years.")] = None,
    contractual_term: Annotated[Optional[float], typer.Option("--contractual-term", metavar="YEARS",
                                                              help="Lattice: contractual term, years.")] = None,
    term: Annotated[Optional[float], typer.Option("--term", metavar="YEARS", hidden=True,
                                                  help="Old name: the expected (BSM) or contractual (lattice) term.")] = None,
    dividend_yield: Annotated[float, typer.Option("--dividend-yield", metavar="DECIMAL",
                                                  help="Continuous dividend yield, decimal.")] = 0.0,
    model: Annotated[Model, typer.Option("--model", help="Pricing model.")] = Model.bsm,
    vesting: Annotated[Optional[float], typer.Option("--vesting", metavar="YEARS",
                                                     help="Lattice: years until the option vests.")] = None,
    exercise_multiple: Annotated[Optional[float], typer.Option("--exercise-multiple", metavar="MULTIPLE",
                                                               help="Lattice: exercise when the price reaches this "
                                                                    "multiple of the exercise price.")] = None,
    exit_rate: Annotated[Optional[float], typer.Option("--exit-rate", metavar="RATE",
                                                       help="Lattice: post-vesting exit rate per year.")] = None,
) -> None:
    """Value one option with the stated assumptions and print the value per option, labelled."""
    from grantval.pricing import bsm_value, lattice_value
    from grantval.plausibility import check_assumption_values

    years = _chosen(model, expected_term, contractual_term, term, vesting, exercise_multiple, exit_rate)
    for line in check_assumption_values(share_price=share_price, volatility=volatility,
                                        risk_free_rate=risk_free_rate, dividend_yield=dividend_yield):
        typer.echo(f"warning: {line}", err=True)
    if model is Model.bsm:
        value = bsm_value(share_price, exercise_price, years, risk_free_rate, volatility, dividend_yield)
        inputs = f"expected term {years:g} years"
    else:
        value = lattice_value(share_price, exercise_price, years, risk_free_rate, volatility, dividend_yield,
                              vesting=vesting or 0.0, exercise_multiple=exercise_multiple, exit_rate=exit_rate or 0.0)
        inputs = (f"contractual term {years:g} years, vesting {vesting or 0:g} years, exercise multiple "
                  f"{'none' if exercise_multiple is None else f'{exercise_multiple:g}'}, exit rate {exit_rate or 0:g}")
    typer.echo(f"fair value per option: {value:.6f}")
    typer.echo(f"model: {model.value}; share price {share_price:g}, exercise price {exercise_price:g}, {inputs}, "
               f"risk-free rate {risk_free_rate:g}, volatility {volatility:g}, dividend yield {dividend_yield:g}")
