"""Stage 5, counting: exact streaming word n-gram counts in bounded memory (`maskprep count`).

Kernels (numpy) count blocks, spilled sorted files are merged by key range, and the
counts directory is written last; it does not score n-grams (that is `units`).
"""

from .driver import CountConfig, CountSummary, count_ngrams

__all__ = ["CountConfig", "CountSummary", "count_ngrams"]
