"""Risk: replaying a solved plan with random biology, and the safety margin that makes
every week likely to be filled.

:mod:`.simulate` (the vectorised replay) and :mod:`.margin` (the search over solves).
"""

from planner.risk.margin import MarginResult, plan_with_margin, safety_margin
from planner.risk.simulate import NO_VARIATION, RiskResult, beta_parameters, replay

__all__ = ["replay", "NO_VARIATION", "RiskResult", "beta_parameters", "safety_margin",
           "plan_with_margin", "MarginResult"]
