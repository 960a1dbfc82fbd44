"""Risk: replaying a solved plan with random biology, and the safety margin that makes
every week likely to be filled.

:mod:`.simulate` (the vectorised replay) and :mod:`.margin` (the search over solves).
"""

import importlib

__all__ = ["replay", "NO_VARIATION", "RiskResult", "beta_parameters", "safety_margin",
           "plan_with_margin", "MarginResult", "MAX_MARGIN"]

#: Largest safety margin the search tries unless told otherwise, as a share of the orders
#: [-] (five doublings of the first step, :data:`planner.risk.margin.FIRST_STEP`).
MAX_MARGIN = 0.64

# Loaded on first use (PEP 562): the command line reads MAX_MARGIN for its help text
# without loading the optimiser behind the margin search.
_WHERE = {"replay": "simulate", "NO_VARIATION": "simulate", "RiskResult": "simulate",
          "beta_parameters": "simulate", "safety_margin": "margin",
          "plan_with_margin": "margin", "MarginResult": "margin"}


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(importlib.import_module(f"planner.risk.{_WHERE[name]}"), name)
    raise AttributeError(f"module 'planner.risk' has no attribute {name!r}")
