"""What an award kind declares: its terms, its valuer, its disclosure group."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from grantval.measurement.context import ValuationContext


@dataclass
class KindValues:
    """Fair values a kind's valuer returns for the grants it was given.

    Arrays span all grants or tranches of the ledger; entries outside the
    valued grants are NaN (values, terms) or empty text (labels).

    Attributes
    ----------
    tranche_value : ndarray, per tranche
        Fair value per unit, currency.
    tranche_term : ndarray, per tranche
        Expected term used for the tranche, years (NaN where not applicable).
    award_term : ndarray, per grant
        Expected term reported for the award, years (NaN where not applicable).
    model : ndarray of str, per grant
        Name of the model used (``bsm``, ``lattice``, ``rsu`` ...).
    term_method : ndarray of str, per grant
        How the term was set, in words.
    distinct : int
        Number of distinct input sets priced.
    """

    tranche_value: np.ndarray
    tranche_term: np.ndarray
    award_term: np.ndarray
    model: np.ndarray
    term_method: np.ndarray
    distinct: int = 0

    @classmethod
    def empty(cls, n_grants: int, n_tranches: int) -> "KindValues":
        """All-NaN values for a ledger of the given size."""
        return cls(np.full(n_tranches, np.nan), np.full(n_tranches, np.nan), np.full(n_grants, np.nan),
                   np.full(n_grants, "", dtype=object), np.full(n_grants, "", dtype=object))


@dataclass(frozen=True)
class AwardKind:
    """One award type of the ledger.

    Attributes
    ----------
    name : str
        The ``award_type`` value in the grants table.
    description : str
        What the award is, in a few words (shown in notes).
    option_terms : bool
        The award has an exercise price and an expiration date (``grants``
        columns ``exercise_price`` and ``expiration_date`` are required).
    exercisable : bool
        ``exercise`` and ``expire`` events apply (options); units settle at vesting.
    disclosure_group : str
        The activity table the award appears in (``options`` or ``units``).
    value : callable
        ``value(context, grants) -> KindValues``: fair value per unit of the
        grants in the boolean mask ``grants`` (none of them supplied).
    settlement : str
        ``shares`` (equity-classified: cost credited to equity) or ``cash``
        (liability-classified: remeasured until settled).
    priced_with_volatility : bool
        The value depends on the expected volatility and the risk-free rate
        (options, appreciation rights, purchase rights), so what-if shifts of
        those inputs apply to it.
    valued_per_tranche : bool
        Each tranche is its own right with its own value, whatever the policy's
        ``valuation_unit``: the expense engine uses every tranche's value, never the
        award's quantity-weighted mean (purchase-plan enrollments: each purchase period
        is an option from the offering start to its purchase date, ASC 718-50-55).
    """

    name: str
    description: str
    option_terms: bool
    exercisable: bool
    disclosure_group: str
    value: Callable[["ValuationContext", np.ndarray], KindValues]
    settlement: str = "shares"
    priced_with_volatility: bool = False
    valued_per_tranche: bool = False
