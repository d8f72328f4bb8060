"""Former module of the what-if runs, kept so that existing imports work: see :mod:`grantval.scenarios.whatif`."""

from grantval.scenarios.whatif import *  # noqa: F401,F403
from grantval.scenarios.whatif import NAMES, WhatIfRun, parse_vary, run_scenarios  # noqa: F401
