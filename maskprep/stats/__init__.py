"""Statistics of masked rows: masking rate, mix, unit lengths, leakage and what the targets are.

Computed from the rows as written, never from the options asked for.
"""

from .masks import MaskStats
from .targets import TargetStats

__all__ = ["MaskStats", "TargetStats"]
