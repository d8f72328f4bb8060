"""Roll-overs of purchase-plan offerings: enrollments of the new offering replace the old ones.

An offering whose share price has fallen below its start price may end early: on a purchase date
its participants are withdrawn and enrolled in a new offering that starts then, at the lower price,
with new purchase dates.  The ledger records it on the new offering's row (``espp_offerings``
column ``rolls_over_from`` = the old offering).  Each enrollment of the new offering whose holder
is still in the old one on the new start date (no ``withdraw`` or ``forfeit`` of the old
enrollment dated on or before it) becomes a replacement of the old enrollment (``replaces_grant_id``,
:mod:`grantval.ledger.ext.modifications`): a modification of the old purchase rights, not a
cancellation and a new grant (ASC 718-20-35-3 and 35-8; IFRS 2.28(c)).  The old enrollment's
purchase periods not yet reached are cancelled by the replacement on the new start date; their cost
continues on their own dates, and the new enrollment carries only the incremental value
(:func:`grantval.pricing.espp_remaining_value` for the old rights on that date).

A holder of the old offering still in it on the roll-over date must be enrolled in the new one (or
leave the old one by then): a roll-over moves every participant.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem


def _left_by(tables: dict, ids: set, day: np.datetime64) -> set:
    """Grant ids among ``ids`` with a ``withdraw`` or ``forfeit`` dated on or before ``day``."""
    ev = tables.get("events")
    if ev is None or not len(ev):
        return set()
    m = (ev["event_type"].isin(("withdraw", "forfeit")).to_numpy()
         & (ev["event_date"].to_numpy("datetime64[D]") <= day) & ev["grant_id"].isin(ids).to_numpy())
    return set(ev["grant_id"][m])


def link_rollovers(grants: pd.DataFrame, rolled: dict, tables: dict, sources: dict):
    """The enrollment grants with ``replaces_grant_id`` set for every rolled-over holder; problems.

    Parameters
    ----------
    grants : DataFrame
        The enrollments' grants (``grant_id`` = ``<offering_id>/<holder_id>``, ``_espp_offering``).
    rolled : dict
        ``{new offering: (old offering, roll-over date, offerings row)}`` (checked).
    tables, sources : dict
        The typed ledger tables and their file or sheet names.
    """
    p: list[Problem] = []
    grants = grants.copy()
    link = np.full(len(grants), None, dtype=object)
    offering = grants["_espp_offering"].to_numpy(object)
    holder = grants["holder_id"].to_numpy(object)
    for new, (old, day, row) in rolled.items():
        in_new = {h: i for i, h in zip(np.flatnonzero(offering == new), holder[offering == new])}
        olds = np.flatnonzero(offering == old)
        left = _left_by(tables, set(grants["grant_id"].iloc[olds]), day)
        for i in olds:
            gid, h = grants["grant_id"].iat[i], holder[i]
            if gid in left:
                continue
            if h not in in_new:
                p.append(Problem(sources["espp_enrollments"], int(grants["_row"].iat[i]), "holder_id",
                                 f"offering {old!r} rolls over into offering {new!r} on {day} ({sources['espp_offerings']}"
                                 f" row {row}): enroll {h!r} in {new!r} too, or record a withdraw or forfeit of {gid} "
                                 f"on or before {day}"))
                continue
            link[in_new[h]] = gid
    grants["replaces_grant_id"] = link
    return grants, p
