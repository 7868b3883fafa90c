"""Stage 1, the corpus: stream documents from .txt / .jsonl / .parquet / .arrow files (+ .gz, .zst).

It reads and splits inputs into tasks and fingerprints them; it does not tokenize.
"""

from .reader import (
    CorpusOptions,
    CorpusTask,
    ReadStats,
    corpus_fingerprint,
    iter_batches,
    iter_corpus,
    iter_documents,
    plan_tasks,
    resolve_inputs,
    task_weights,
)

__all__ = ["CorpusOptions", "CorpusTask", "ReadStats", "corpus_fingerprint", "iter_batches",
           "iter_corpus", "iter_documents", "plan_tasks", "resolve_inputs", "task_weights"]
