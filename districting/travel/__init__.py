"""Travel between planning units and school sites, as plain arrays.

:mod:`.network` (the street graph), :mod:`.streets` (travel along it), :mod:`.measures`
(the measures by name, in words, and :func:`travel_matrix`), :mod:`.cache` (matrices
kept on disk per project). Imports numpy, scipy and shapely only (and
:mod:`districting.io` for atomic writes), so intake, study and verify may all use it.
"""

from .measures import MEASURES, WORDS, measure_line, measure_words, travel_matrix
from .network import StreetNetwork
from .streets import StreetTravel, street_travel

__all__ = ["MEASURES", "WORDS", "measure_line", "measure_words", "travel_matrix",
           "StreetNetwork", "StreetTravel", "street_travel"]
