"""Broodline: production planning for insect mass-rearing facilities.

Layers (one sub-package each): :mod:`planner.demography` (what the colony can yield),
:mod:`planner.cli` (the ``broodline`` command). Plans are estimates from the life
table; biosafety, irradiation and release rules are local matters for licensed staff.
"""

__version__ = "0.1.0"
