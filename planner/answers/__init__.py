"""The manager's questions, each answered on the planning pipeline of
:mod:`planner.optimise` (scenario -> data -> model -> solve -> read back):

- :mod:`.quote`: can we take this order, how much of it and from when;
- :mod:`.capacity`: the largest constant weekly volume the facility sustains;
- :mod:`.expansion`: the cheapest options to buy to reach a weekly target, and sweeps;
- :mod:`.checkcap`: the quick sustainable-volume estimate of ``broodline check``.

Submodules are imported by name (``from planner.answers.quote import quote``) so that
loading one answer does not load the others.
"""
