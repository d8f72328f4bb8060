"""Award kinds: one module per ``award_type`` of the ledger.

Each kind module defines ``KIND``, an :class:`~grantval.awards.base.AwardKind` that
says what the kind's terms are, which pricing engine values it and how (its
``value`` function over a :class:`~grantval.measurement.context.ValuationContext`),
and how its cost is attributed.  :mod:`grantval.awards.registry` maps each
``award_type`` to its module; adding a kind is a new module plus one registry line.
"""
