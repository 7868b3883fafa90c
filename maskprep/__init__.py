"""maskprep: prepare text corpora for masked-language-model pretraining.

The public API, in data-flow order. Heavy modules are imported on first use.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

# name -> module that defines it
_EXPORTS = {
    "MaskprepError": "errors",
    "CorpusOptions": "corpus",
    "iter_corpus": "corpus",
    "resolve_inputs": "corpus",
    "plan_tasks": "corpus",
    "load_tokenizer": "tokenize",
    "train_tokenizer": "train",
    "TrainConfig": "train",
    "encode_documents": "tokenize",
    "EncodedBatch": "tokenize",
    "run_audit": "audit",
    "AuditConfig": "audit",
    "count_ngrams": "ngrams",
    "CountConfig": "ngrams",
    "Measure": "cohesion",
    "score_ngrams": "cohesion",
    "build_units": "units",
    "read_units": "unit_files",
    "write_units": "unit_files",
    "UnitVocabulary": "units",
    "Strategy": "masking",
    "MaskingConfig": "masking",
    "MixPer": "masking",
    "strategy_units": "masking",
    "mask_batch": "masking",
    "PackingConfig": "packing",
    "pack_batches": "packing",
    "ShardConfig": "shards",
    "ShardManifest": "shards",
    "write_shards": "shards",
    "open_shards": "shards",
    "ShardSet": "shardset",
    "verify_shards": "shardcheck",
    "format_examples": "shardcheck",
    "MaskStats": "stats",
    "compare_strategies": "compare",
    "CompareConfig": "compare",
    "load_run_config": "runconfig",
    "run_pipeline": "pipeline",
    "run_demo": "pipeline",
    "Executor": "execute",
    "map_tasks": "execute",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'maskprep' has no attribute {name!r}")
    value = getattr(import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value
