"""The assignment engine: the model stated once, two solver routes, cuts, repair, the session.

Layout (each module imports only those above it in this list, never the session):

- ``tuning`` (named constants), ``answer`` (what a MIP solve returns);
- ``connectivity`` (unit graph, fragments, plan checks), ``cuts`` (separator cuts);
- ``improve`` (rebalance, local search), ``repair`` (reassign empty units, repair, make_valid);
- ``formulation`` (columns and row families, once), ``highs_route`` and ``pyomo_route``
  (both built from it), ``precheck`` and ``diagnose`` (infeasibility in words);
- ``run`` (book-keeping and the state passed between stages), ``heuristics``,
  ``neighbourhood`` (large-neighbourhood search, given the exact solve as a callable);
- ``scip_route`` (the formulation in one SCIP branch-and-cut tree, connectivity a
  constraint handler; opt-in, PySCIPOpt imported only there);
- ``session`` (the pipeline of stages), ``solve`` (one-shot).

The engine works on :class:`~districting.problem.Problem` arrays; it reads no project files.
Pyomo is imported only by the Pyomo route and :mod:`~districting.engine.diagnose`.
"""

from .connectivity import UnitGraph, plan_checks
from .precheck import precheck
from .session import Session
from .solve import solve
from .tuning import use_threads

__all__ = ["solve", "Session", "UnitGraph", "plan_checks", "precheck", "use_threads"]
