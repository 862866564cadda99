"""districting: attendance-zone options for school district planning staff.

The engine: read and validate a project, build the assignment problem, solve it exactly
(capacitated p-median with whole-unit assignment and contiguous zones), and turn the plan
into boundaries, tables, exports and a hearing packet. Results are decision support.
"""

from .engine import solve
from .plan import Plan
from .problem import Problem

__all__ = ["Problem", "Plan", "solve", "DRAFT_NOTICE", "__version__"]
__version__ = "0.1.0"

#: Printed on every export and on the first page of the hearing packet.
DRAFT_NOTICE = (
    "DRAFT FOR DISCUSSION - decision support only. Attendance boundaries are decided by the "
    "Board of Education under district policy and applicable law; this option is not a "
    "decision and may change."
)
