"""maskprep: prepare text corpora for masked-language-model pretraining.

The public API, in data-flow order: read a corpus, load or train a tokenizer, audit
it, count n-grams, choose units, mask, write and read shards, compare strategies,
and run the whole pipeline from one file.

>>> import maskprep
>>> maskprep.MaskingConfig().rate
0.15

Each name is imported from its stage on first use (`maskprep._lazy`), so ``import maskprep``,
the command line and every pool worker load only the stages they need; ``_PUBLIC`` says where
each name lives and the imports under ``TYPE_CHECKING`` say the same to type checkers.
"""

from typing import TYPE_CHECKING

# First: a Ctrl-C while the command line starts exits quietly.
from . import _cli_start  # noqa: F401
from ._lazy import lazy_exports
from ._version import __version__
from .errors import MaskprepError

if TYPE_CHECKING:
    from .audit import AuditConfig, run_audit
    from .compare import CompareConfig, compare_strategies
    from .corpus import CorpusOptions, iter_corpus
    from .count import CountConfig, count_ngrams
    from .masking import MaskingConfig, MixPer, Strategy, mask_batch, strategy_units
    from .packing import PackingConfig, pack_batches
    from .pipeline import load_run_config, run_demo, run_pipeline
    from .shards import ShardConfig, ShardLoader, ShardManifest, ShardSet, open_shards, \
        verify_shards, write_shards
    from .tokenizer import EncodedBatch, TokenizerInfo, TrainConfig, encode_documents, \
        load_tokenizer, train_tokenizer
    from .units import Measure, UnitVocabulary, build_units, read_units, score_ngrams, \
        write_units

# the stage (subpackage or module) of each public name, in the order of the imports above
_PUBLIC = {
    "audit": ("AuditConfig", "run_audit"),
    "compare": ("CompareConfig", "compare_strategies"),
    "corpus": ("CorpusOptions", "iter_corpus"),
    "count": ("CountConfig", "count_ngrams"),
    "masking": ("MaskingConfig", "MixPer", "Strategy", "mask_batch", "strategy_units"),
    "packing": ("PackingConfig", "pack_batches"),
    "pipeline": ("load_run_config", "run_demo", "run_pipeline"),
    "shards": ("ShardConfig", "ShardLoader", "ShardManifest", "ShardSet", "open_shards",
               "verify_shards", "write_shards"),
    "tokenizer": ("EncodedBatch", "TokenizerInfo", "TrainConfig", "encode_documents",
                  "load_tokenizer", "train_tokenizer"),
    "units": ("Measure", "UnitVocabulary", "build_units", "read_units", "score_ngrams",
              "write_units"),
}

__all__ = [
    "__version__",
    "MaskprepError",
    "CorpusOptions", "iter_corpus",
    "TokenizerInfo", "EncodedBatch", "load_tokenizer", "encode_documents", "TrainConfig",
    "train_tokenizer",
    "AuditConfig", "run_audit",
    "CountConfig", "count_ngrams",
    "Measure", "score_ngrams", "UnitVocabulary", "build_units", "read_units", "write_units",
    "Strategy", "MixPer", "MaskingConfig", "strategy_units", "mask_batch",
    "PackingConfig", "pack_batches",
    "ShardConfig", "ShardManifest", "write_shards", "open_shards", "ShardSet", "ShardLoader",
    "verify_shards",
    "CompareConfig", "compare_strategies",
    "load_run_config", "run_pipeline", "run_demo",
]

__getattr__, __dir__ = lazy_exports(globals(), _PUBLIC)
