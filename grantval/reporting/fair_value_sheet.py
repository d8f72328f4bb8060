"""The auditor's fair-value sheet: inputs, the tool's value and a live BSM recomputation."""

from __future__ import annotations

import numpy as np
import pandas as pd
from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Formula


def _bsm_formula(r: int, c: dict[str, str]) -> Formula:
    """Live BSM formula on row ``r`` (cells S, K, T, rate, vol, q named in ``c``)."""
    S, K, T, R, V, Q = (f"{c[k]}{r}" for k in ("S", "K", "T", "r", "v", "q"))
    d1 = f"(LN({S}/{K})+({R}-{Q}+{V}^2/2)*{T})/({V}*SQRT({T}))"
    d2 = f"(LN({S}/{K})+({R}-{Q}-{V}^2/2)*{T})/({V}*SQRT({T}))"
    return Formula(f"={S}*EXP(-{Q}*{T})*NORMSDIST({d1})-{K}*EXP(-{R}*{T})*NORMSDIST({d2})")


AUDIT_INPUTS = ["model", "share_price", "exercise_price", "expected_term_years", "risk_free_rate", "volatility",
                "dividend_yield", "lattice_steps", "exercise_multiple", "post_vest_exit_rate"]


def recomputed_column(table: pd.DataFrame) -> str:
    """Column letter of the formula-recomputed fair value in the fair_values sheet."""
    return col_letter(1 + int("tranche" in table.columns) + len(AUDIT_INPUTS) + 2)


def fair_value_audit(table: pd.DataFrame) -> tuple[pd.DataFrame, dict]:
    """The auditor's fair-value table: inputs, tool value, live BSM recomputation, difference.

    Returns the frame and a dict with the recomputation column letter, the
    number of BSM rows and the tool's total over them.
    """
    cols = ["grant_id"] + (["tranche"] if "tranche" in table.columns else []) + AUDIT_INPUTS
    frame = table[cols].copy()
    frame["tool_fair_value_per_unit"] = table["fair_value_per_unit"].to_numpy()
    pos = {c: col_letter(i + 1) for i, c in enumerate(list(frame.columns) + ["recomputed_fair_value_per_unit"])}
    letters = {"S": pos["share_price"], "K": pos["exercise_price"], "T": pos["expected_term_years"],
               "r": pos["risk_free_rate"], "v": pos["volatility"], "q": pos["dividend_yield"]}
    bsm = table["model"].to_numpy() == "bsm"
    recomputed, diff = [], []
    for i, is_bsm in enumerate(bsm):
        r = i + 2
        if is_bsm:
            recomputed.append(_bsm_formula(r, letters))
            diff.append(Formula(f"={pos['recomputed_fair_value_per_unit']}{r}-{pos['tool_fair_value_per_unit']}{r}"))
        else:
            recomputed.append(None)
            diff.append(None)
    frame["recomputed_fair_value_per_unit"] = recomputed
    frame["difference"] = diff
    model = table["model"].to_numpy()
    frame["fair_value_source"] = np.select(
        [model == "supplied", model == "lattice", model == "rsu", model == "psu", model == "monte_carlo",
         model == "espp", bsm],
        ["supplied by outside valuation", "tool (lattice; inputs and steps shown)",
         "tool (RSU: share price less dividends forgone)",
         "tool (performance unit: share price less dividends forgone; payout applied in expense)",
         "tool (Monte Carlo; see std_error)", "tool (purchase plan: look-back components, ASC 718-50-55)",
         "tool (BSM; recomputed by formula)"],
        np.char.add(np.char.add("tool (", model.astype(str)), ")"))
    if "std_error" in table and np.isfinite(table["std_error"].to_numpy(float)).any():
        frame["std_error"] = table["std_error"].to_numpy()  # Monte Carlo rows (market conditions)
    assert pos["recomputed_fair_value_per_unit"] == recomputed_column(table)
    info = {"recomputed": pos["recomputed_fair_value_per_unit"], "rows": len(frame), "bsm_rows": int(bsm.sum()),
            "bsm_total": float(table["fair_value_per_unit"].to_numpy()[bsm].sum())}
    return frame, info
