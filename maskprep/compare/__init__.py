"""Stage 10, compare: every strategy masks the same sequences; compare.json and compare.html.

The names below are imported on first use (`maskprep._lazy`), so a worker running
`maskprep.compare.task` does not load the driver's modules.
"""

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .run import CompareConfig, compare_strategies

__all__ = ["CompareConfig", "compare_strategies"]

__getattr__, __dir__ = lazy_exports(globals(), {"run": ("CompareConfig", "compare_strategies")})
