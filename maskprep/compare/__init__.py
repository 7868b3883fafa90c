"""Stage 10, compare: every strategy masks the same sequences; compare.json and compare.html."""

from .run import CompareConfig, compare_strategies

__all__ = ["CompareConfig", "compare_strategies"]
