"""What one MIP solve returned, the same for both solver routes."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Answer"]


@dataclass
class Answer:
    """What one MIP solve returned."""

    status: str  # optimal | feasible | time_limit | infeasible | cancelled | error
    assignment: np.ndarray | None  # None: no solution
    objective: float
    bound: float
    message: str = ""
