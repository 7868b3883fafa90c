"""Stage 7, masking: strategies as segmentations into units, and the one budgeted sampler.

It works on packed numpy batches; it does not read corpora or write files.
"""

from .sampler import MaskingConfig, MixPer, Strategy, mask_batch, strategy_units
from .strategies import UnitTable

__all__ = ["MaskingConfig", "MixPer", "Strategy", "UnitTable", "mask_batch", "strategy_units"]
