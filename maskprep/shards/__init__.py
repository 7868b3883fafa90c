"""Stage 9, shards: write training-ready Arrow/Parquet shards, read them back, load training
batches, verify and show them."""

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
