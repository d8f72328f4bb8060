"""The auditor's fair-value sheet says, row by row, how the tool's value was obtained (invented rows)."""

import numpy as np
import pandas as pd

from grantval.reporting.fair_value_sheet import AUDIT_INPUTS, fair_value_audit


def _table(models):
    n = len(models)
    t = pd.DataFrame({c: np.full(n, 1.0) for c in AUDIT_INPUTS})
    t["model"] = models
    t.insert(0, "grant_id", [f"G{i}" for i in range(n)])
    t["fair_value_per_unit"] = 1.0
    t["std_error"] = np.where(np.array(models) == "monte_carlo", 0.01, np.nan)
    return t


def test_only_bsm_rows_claim_a_formula_recomputation():
    models = ["bsm", "espp", "monte_carlo", "lattice", "rsu", "psu", "supplied", "cash_value"]
    frame, info = fair_value_audit(_table(models))
    src = dict(zip(models, frame["fair_value_source"]))
    assert src["bsm"] == "tool (BSM; recomputed by formula)"
    assert all("recomputed by formula" not in v for m, v in src.items() if m != "bsm")
    assert "look-back components" in src["espp"] and "std_error" in src["monte_carlo"]
    assert src["cash_value"] == "tool (cash_value)"  # an unknown model is named, never called BSM
    assert info["bsm_rows"] == 1
    assert frame["recomputed_fair_value_per_unit"].notna().sum() == 1
    assert list(frame["std_error"].notna()) == [m == "monte_carlo" for m in models]
