"""Former module of the fair values, kept so that existing imports work: see :mod:`grantval.measurement`."""

from grantval.measurement.fairvalue import FairValues, compute_fair_values
from grantval.measurement.unique import unique_call as _unique_call
from grantval.scenarios.shifts import Shifts

__all__ = ["FairValues", "compute_fair_values", "Shifts", "_unique_call"]
