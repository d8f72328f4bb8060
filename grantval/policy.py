"""Accounting policies of a run: from the ledger's ``policy`` table, overridden by options."""

from __future__ import annotations

from dataclasses import dataclass, fields, replace

from grantval.errors import Problem, UsageError

STANDARDS = ("asc718", "ifrs2")
ATTRIBUTIONS = ("straight-line", "graded")
FORFEITURES = ("estimate", "as-occur")
PERIODS = ("month", "quarter", "year")
VALUATION_UNITS = ("award", "tranche")


@dataclass(frozen=True)
class Policy:
    """The policies a run applies, each stated in every output.

    Attributes
    ----------
    standard : {"asc718", "ifrs2"}
    attribution : {"straight-line", "graded"}
        Straight-line over the award's requisite service period, or graded
        (each tranche over its own service period).  IFRS 2 requires graded.
    forfeitures : {"as-occur", "estimate"}
        Account for forfeitures when they occur (ASC 718-10-35-3 election) or
        estimate them (required by IFRS 2).
    period : {"month", "quarter", "year"}
    fiscal_year_end_month : int
        1-12.
    valuation_unit : {"award", "tranche"}
        One fair value per grant, or one per vesting tranche with its own
        expected term.
    lattice_steps : int or None
        Lattice time steps; None uses the valuation core's default.
    mc_seed : int
        Seed of the Monte Carlo simulation of market-condition awards (the same
        seed gives identical reruns).
    mc_paths : int
        Monte Carlo paths per simulation (at least 1,000; default 100,000).
    """

    standard: str = "asc718"
    attribution: str = "straight-line"
    forfeitures: str = "as-occur"
    period: str = "quarter"
    fiscal_year_end_month: int = 12
    valuation_unit: str = "award"
    lattice_steps: int | None = None
    mc_seed: int = 20261202  # grantval.pricing.paths.DEFAULT_SEED
    mc_paths: int = 100_000  # grantval.pricing.paths.DEFAULT_PATHS

    def describe(self) -> list[tuple[str, str]]:
        """(name, value) pairs for output sheets."""
        return [(f.name, "default" if getattr(self, f.name) is None else str(getattr(self, f.name)))
                for f in fields(self)]


_CHOICES = {
    "standard": STANDARDS,
    "attribution": ATTRIBUTIONS,
    "forfeitures": FORFEITURES,
    "period": PERIODS,
    "valuation_unit": VALUATION_UNITS,
}


def _coerce(key: str, text: str):
    """Return (value, error words or None)."""
    text = text.strip()
    low = text.lower()
    if key in _CHOICES:
        if low not in _CHOICES[key]:
            return None, f"{text!r} is not one of: {', '.join(_CHOICES[key])}"
        return low, None
    if key == "fiscal_year_end_month":
        if not low.isdigit() or not 1 <= int(low) <= 12:
            return None, f"{text!r} must be a month number from 1 to 12"
        return int(low), None
    if key == "lattice_steps":
        from grantval.pricing.lattice import MAX_STEPS

        if not low.isdigit() or not 4 <= int(low) <= MAX_STEPS:
            return None, f"{text!r} must be a whole number from 4 to {MAX_STEPS:,}"
        return int(low), None
    if key == "mc_seed":
        if not low.isdigit() or int(low) >= 2**63:
            return None, f"{text!r} must be a whole number from 0 to 2**63 - 1"
        return int(low), None
    if key == "mc_paths":
        from grantval.pricing.paths import MAX_PATHS

        digits = low.replace(",", "").replace("_", "")
        if not digits.isdigit() or not 1_000 <= int(digits) <= MAX_PATHS:
            return None, f"{text!r} must be a whole number of paths from 1,000 to {MAX_PATHS:,}"
        return int(digits), None
    return None, "unknown policy key"


def policy_from_rows(rows: list[tuple[int, str, str]], source: str) -> tuple[dict, list[Problem]]:
    """Read ``(row, key, value)`` rows of the ledger's policy table.

    Returns the explicitly set values (key -> typed value) and the problems.
    """
    problems: list[Problem] = []
    values: dict[str, object] = {}
    names = {f.name for f in fields(Policy)}
    seen: dict[str, int] = {}
    for row, key, value in rows:
        k = (key or "").strip().lower()
        if k not in names:
            problems.append(Problem(source, row, "key", f"{key!r} is not a policy key ({', '.join(sorted(names))})"))
            continue
        if k in seen:
            problems.append(Problem(source, row, "key", f"{k!r} is set twice (also row {seen[k]})"))
            continue
        seen[k] = row
        v, err = _coerce(k, value or "")
        if err:
            problems.append(Problem(source, row, "value", f"{k}: {err}"))
        else:
            values[k] = v
    if values.get("standard") == "ifrs2":
        for key, allowed, why in (("attribution", "graded", "IFRS 2.IG11 recognises each tranche over its own "
                                   "vesting period"), ("forfeitures", "estimate", "IFRS 2.20 requires an estimate "
                                                       "of the instruments expected to vest")):
            if key in values and values[key] != allowed:
                problems.append(Problem(source, seen[key], "value", f"{key} {values[key]} cannot be combined with "
                                        f"standard ifrs2: {why}"))
    return values, problems


def resolve_policy(ledger_values: dict | None = None, **overrides) -> Policy:
    """The run's policy: defaults, then the ledger's policy table, then options.

    ``overrides`` are command-line values (None means not given).  With IFRS 2,
    attribution is graded and forfeitures are estimated; asking explicitly
    (in the ledger or on the command line) for straight-line or as-occur
    together with IFRS 2 is refused.

    Raises
    ------
    UsageError
        For a value outside its choices or a combination IFRS 2 does not allow.
    """
    explicit = dict(ledger_values or {})
    origin = {k: "the ledger's policy table" for k in explicit}
    for k, v in overrides.items():
        if v is None:
            continue
        origin[k] = f"the option {{{k}}}"
        if k == "lattice_steps":
            from grantval.pricing.lattice import MAX_STEPS

            if not 4 <= int(v) <= MAX_STEPS:
                raise UsageError(f"{{lattice_steps}} must be a whole number from 4 to {MAX_STEPS:,}; got {v}",
                                 ("lattice_steps",))
        if k in _CHOICES and v not in _CHOICES[k]:
            raise UsageError(f"{{{k}}} must be one of: {', '.join(_CHOICES[k])}; got {v!r}", (k,))
        explicit[k] = v
    if explicit.get("standard") == "ifrs2":
        where = lambda k: f"{k} {explicit[k]} came from {origin[k]}"  # noqa: E731
        names = tuple(k for k in ("standard", "attribution", "forfeitures") if k in overrides)
        if explicit.get("attribution", "graded") != "graded":
            raise UsageError(
                "IFRS 2 requires graded attribution (IFRS 2.IG11: each tranche is recognised over its "
                "own vesting period); straight-line cannot be combined with the ifrs2 standard: "
                f"{where('standard')}, {where('attribution')}", names)
        if explicit.get("forfeitures", "estimate") != "estimate":
            raise UsageError(
                "IFRS 2 requires estimated forfeitures (IFRS 2.20: recognise the number of instruments "
                "expected to vest, revised as estimates change); as-occur cannot be combined with the ifrs2 standard: "
                f"{where('standard')}, {where('forfeitures')}", names)
        explicit.update(attribution="graded", forfeitures="estimate")
    return replace(Policy(), **explicit)
