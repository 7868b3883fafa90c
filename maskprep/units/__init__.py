"""Stage 6, units: cohesion scores of n-grams and the unit vocabulary chosen from them.

It reads a counts directory and writes units.parquet; it does not mask.
"""

from .cohesion import Measure, score_ngrams
from .files import read_units, write_units
from .select import UnitVocabulary, build_units

__all__ = ["Measure", "UnitVocabulary", "build_units", "read_units", "score_ngrams", "write_units"]
