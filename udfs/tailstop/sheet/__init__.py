"""The tailstop spreadsheet formulas — the module to register with xlwings.

In Excel: xlwings add-in settings, ``UDF Modules`` = ``tailstop.sheet``, then
*Import Functions*. Every formula returns a number, an array, or a short text
starting with ``#TAILSTOP!`` that says what to fix; none ever raises.

``FORMULAS`` maps each formula name to its function, for the headless tools.
"""
from __future__ import annotations

from .decisions import (  # noqa: F401
    STOP_DECISION,
    STOP_DECISION_COLUMN,
    TWO_STAGE_UNITS,
    UNITS_NEEDED_NOW,
)
from .estimate import (  # noqa: F401
    ACCURACY_FOR_UNITS,
    GAMMA_FIT_PVALUE,
    GAMMA_FIT_SCALE,
    GAMMA_FIT_SHAPE,
    TAIL_ODDS_BOUNDS,
    TAIL_PROB,
    TAIL_PROB_BOUNDS,
    TAIL_PROB_EST,
    UNITS_REQUIRED,
    UNITS_REQUIRED_FROM_P,
)
from .fits import FIT_COMPARE, FIT_PVALUE, FIT_SCALE, FIT_SHAPE  # noqa: F401
from .formula import FORMULAS
from .notes import TAIL_METHOD_NOTES  # noqa: F401
from .planning import (  # noqa: F401
    PLAN_COVERAGE,
    PLAN_EXPECTED_UNITS,
    PLAN_SUMMARY,
    PLAN_SUMMARY_FROM_P,
)

__all__ = ["FORMULAS", *FORMULAS]
