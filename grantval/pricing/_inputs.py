"""Checking and broadcasting of pricing inputs (the public-wrapper half).

Public pricing functions call :func:`prepare` with their named arguments; it
converts each to a float array, checks it and broadcasts all of them to one
shape.  The private formulas then work on plain arrays and never check again.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from grantval.errors import InputError

# A rule is (test that must hold elementwise, words for what it requires).
Rule = tuple[Callable[[np.ndarray], np.ndarray], str]

FINITE: Rule = (np.isfinite, "finite")
NON_NEGATIVE: Rule = (lambda a: a >= 0, "zero or more")
POSITIVE: Rule = (lambda a: a > 0, "greater than zero")


def as_float_array(name: str, value) -> np.ndarray:
    """Return ``value`` as a float64 array, or raise :class:`InputError` naming ``name``."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be a number or an array of numbers ({exc})") from None
    return arr


#: marker rule: NaN elements are allowed and skip the other rules (they mean "not given")
NAN_ALLOWED: Rule = (lambda a: np.ones(np.shape(a), dtype=bool), "")


def check(name: str, arr: np.ndarray, *rules: Rule) -> None:
    """Raise :class:`InputError` naming ``name`` when any element breaks a rule.

    Every element must be finite unless :data:`NAN_ALLOWED` is among the rules,
    in which case NaN elements pass and the other rules apply to the rest.
    """
    if NAN_ALLOWED in rules:
        arr = np.ravel(arr)
        arr = arr[~np.isnan(arr)]
        rules = tuple(r for r in rules if r is not NAN_ALLOWED)
    for test, words in (FINITE,) + rules:
        with np.errstate(invalid="ignore"):
            ok = test(arr)
        if not np.all(ok):
            bad = arr[~ok] if arr.ndim else arr
            first = np.ravel(bad)[0]
            raise InputError(f"{name} must be {words}; got {float(first)!r}")


def prepare(**named: tuple[object, tuple[Rule, ...]]) -> tuple[list[np.ndarray], bool]:
    """Convert, check and broadcast named inputs.

    Parameters
    ----------
    **named
        ``name=(value, rules)`` pairs, in the order the caller wants them back.

    Returns
    -------
    arrays : list of ndarray
        The inputs as float arrays, broadcast to one common shape.
    scalar : bool
        True when every input was a scalar, so the caller returns a float.
    """
    arrays = []
    for name, (value, rules) in named.items():
        arr = as_float_array(name, value)
        check(name, arr, *rules)
        arrays.append(arr)
    try:
        out = np.broadcast_arrays(*arrays)
    except ValueError:
        shapes = ", ".join(f"{n} {a.shape}" for n, a in zip(named, arrays))
        raise InputError(f"inputs cannot be broadcast to one shape: {shapes}") from None
    scalar = all(a.ndim == 0 for a in arrays)
    return [np.array(a, dtype=float) for a in out], scalar


def finish(result: np.ndarray, scalar: bool):
    """Return a float for scalar inputs, else the array."""
    return float(result) if scalar else result
