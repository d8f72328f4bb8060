"""The fair-value table: one row per grant (or per tranche) with the inputs used."""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.awards.registry import flag

#: output columns after the key columns, in order
COLUMNS = (
    "holder_id", "group", "award_type", "grant_date", "quantity", "exercise_price", "expiration_date",
    "assumption_key", "share_price", "volatility", "risk_free_rate", "dividend_yield",
    "contractual_term_years", "expected_term_years", "expected_term_method", "model", "lattice_steps",
    "exercise_multiple", "post_vest_exit_rate", "fair_value_per_unit", "grant_date_fair_value",
    "fair_value_source", "std_error", "derived_service_years")


def _per_grant(ctx, model: np.ndarray, term_method: np.ndarray) -> dict:
    """Columns that hold one value per grant."""
    g, a, ai = ctx.ledger.grants, ctx.ledger.assumptions, ctx.ledger.grant_assumption
    option = flag(ctx.award, "option_terms")
    priced = ~ctx.is_supplied
    if ctx.market is not None:
        option = option | ctx.market  # a market condition is valued with volatility and the rate
    lattice = model == "lattice"
    return {
        "grant_id": g["grant_id"].to_numpy(),
        "holder_id": g["holder_id"].to_numpy(),
        "group": g["group"].to_numpy(),
        "award_type": ctx.award,
        "grant_date": ctx.grant_date,
        "assumption_key": np.where(a["assumption_set"].notna().to_numpy()[ai], a["assumption_set"].to_numpy()[ai],
                                   a["grant_date"].astype(str).to_numpy()[ai]),
        "exercise_price": np.where(option, ctx.strike, np.nan),
        "expiration_date": g["expiration_date"].to_numpy("datetime64[D]"),
        "share_price": ctx.share_price,
        "volatility": np.where(option & priced, ctx.volatility, np.nan),
        "risk_free_rate": np.where(option & priced, ctx.risk_free_rate, np.nan),
        "dividend_yield": np.where(priced, ctx.dividend_yield, np.nan),
        "contractual_term_years": ctx.contract,
        "model": model,
        "expected_term_method": term_method,
        "lattice_steps": np.where(lattice, float(ctx.steps), np.nan),
        "exercise_multiple": np.where(lattice, ctx.multiple, np.nan),
        "post_vest_exit_rate": np.where(lattice, ctx.exit_rate, np.nan),
    }


def fair_value_table(ctx, model, term_method, award_term, t_term, tranche_value, grant_value,
                     std_error=None, service_years=None) -> pd.DataFrame:
    """The output table of :func:`grantval.measurement.fairvalue.compute_fair_values`.

    One row per grant, or per tranche under the ``tranche`` valuation unit;
    ``expected_term_years`` is the term used by BSM (and, per award, the
    average vesting time of an RSU).  ``std_error`` (currency per unit) and
    ``derived_service_years`` are per grant, NaN where not simulated / not derived.
    """
    base = _per_grant(ctx, model, term_method)
    n_g = len(ctx.award)
    base["std_error"] = std_error if std_error is not None else np.full(n_g, np.nan)
    base["derived_service_years"] = service_years if service_years is not None else np.full(n_g, np.nan)
    tr = ctx.ledger.tranches
    gi = ctx.gi
    if ctx.per_tranche:
        rows = {key: val[gi] for key, val in base.items()}
        rows["tranche"] = tr["tranche"].to_numpy()
        rows["vest_date"] = tr["vest_date"].to_numpy("datetime64[D]")
        rows["quantity"] = tr["quantity"].to_numpy(np.int64)
        rows["expected_term_years"] = np.where(model[gi] == "bsm", t_term, np.nan)
        rows["fair_value_per_unit"] = tranche_value
        order = ["grant_id", "tranche", "vest_date"]
    else:
        rows = dict(base)
        rows["quantity"] = ctx.ledger.grants["quantity"].to_numpy(np.int64)
        rows["expected_term_years"] = np.where(np.isin(model, ("bsm", "rsu", "psu", "monte_carlo")), award_term, np.nan)
        rows["fair_value_per_unit"] = grant_value
        order = ["grant_id"]
    rows["grant_date_fair_value"] = rows["quantity"] * rows["fair_value_per_unit"]
    rows["fair_value_source"] = np.where(rows["model"] == "supplied", "supplied by outside valuation", "computed")
    columns = order + [c for c in COLUMNS if c not in order]
    return pd.DataFrame(rows)[columns]
