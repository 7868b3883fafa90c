"""Stage 9, shards: write training-ready Arrow/Parquet shards, read them back, load training
batches, verify and show them.

The names below are imported from their modules on first use (`maskprep._lazy`): a worker
that only masks rows (`maskprep.shards.taskloop`) never loads the readers and checks.
"""

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .check import format_examples, verify_shards
    from .loader import ShardLoader
    from .read import ShardSet, open_shards
    from .write import ShardConfig, ShardManifest, write_shards

__all__ = [
    "ShardConfig",
    "ShardLoader",
    "ShardManifest",
    "ShardSet",
    "format_examples",
    "open_shards",
    "verify_shards",
    "write_shards",
]

__getattr__, __dir__ = lazy_exports(globals(), {
    "check": ("format_examples", "verify_shards"),
    "loader": ("ShardLoader",),
    "read": ("ShardSet", "open_shards"),
    "write": ("ShardConfig", "ShardManifest", "write_shards"),
})
