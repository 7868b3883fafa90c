"""Stream documents from corpus files.

Reads `.txt` (one document per line, or blank-line separated paragraphs),
`.jsonl` (a text field per line) and `.parquet` / `.arrow` (a text column),
each optionally compressed as `.gz` or `.zst`; inputs may be files,
directories (searched recursively) or glob patterns. Nothing is loaded whole:
text files are read line by line (`corpus.text`), Parquet by row group, Arrow
by record batch (`corpus.tables`).

Inputs are split into `CorpusTask`s by `corpus.plan` so that later stages can
work on them in parallel; this module reads one task's documents, in file
order, and re-exports the corpus's types and planning functions for its callers.

What it does not do: tokenize, deduplicate or clean text. Invalid UTF-8 is
replaced (U+FFFD) and counted, or with ``strict=True`` reported with file, line
and byte offset. Empty documents are skipped and counted.
"""

from __future__ import annotations

import dataclasses
import itertools
import sys
from typing import Iterable, Iterator

from .discover import detect_format, resolve_inputs
from .pieces import PIECE_BYTES, Continued, text_pieces
from .sample import keeps_document
from .plan import corpus_fingerprint, plan_tasks, task_size, task_weights
from .tables import iter_table_documents
from .text import iter_text_documents
from .types import TABLE_FORMATS, TEXT_FORMATS, CorpusOptions, CorpusTask, ReadStats

__all__ = [
    "TEXT_FORMATS",
    "TABLE_FORMATS",
    "CorpusOptions",
    "CorpusTask",
    "ReadStats",
    "corpus_fingerprint",
    "detect_format",
    "iter_batches",
    "batch_documents",
    "iter_corpus",
    "iter_documents",
    "plan_tasks",
    "resolve_inputs",
    "task_size",
    "task_weights",
]


def iter_documents(task: CorpusTask, options: CorpusOptions = CorpusOptions(),
                   stats: ReadStats | None = None) -> Iterator[str]:
    """Yield the non-empty documents of one task, in file order.

    >>> list(iter_documents(plan_tasks([Path("a.txt")])[0]))  # doctest: +SKIP
    ['first document', 'second document']
    """
    stats = stats if stats is not None else ReadStats()
    pick = task.pick
    if pick is not None and pick.ranges:  # a sample's byte ranges: only they are read
        parts = (dataclasses.replace(task, start=s, end=e, pick=None) for s, e in pick.ranges)
        source: Iterator[str] = itertools.chain.from_iterable(
            _pieces_of(part, options, stats) for part in parts
        )
    else:
        source = _pieces_of(task, options, stats)
    read_before = stats.bytes_read
    coin = pick is not None and not pick.ranges
    keep, ordinal, seen_text, kept_text = True, 0, 0, 0
    cut = 0
    for doc in source:
        if coin:  # a seeded coin per document; its later pieces follow its first
            assert pick is not None
            size = len(doc.encode("utf-8", "surrogatepass"))
            seen_text += size
            if not isinstance(doc, Continued):
                keep = keeps_document(pick, task.start, ordinal)
                ordinal += 1
            if not keep:
                continue
            kept_text += size
        elif pick is not None:
            kept_text += len(doc.encode("utf-8", "surrogatepass"))
        if isinstance(doc, Continued):  # a later piece of a long document: not counted again
            cut += 1
            if doc.strip():
                yield str(doc)
        elif doc.strip():
            stats.documents += 1
            yield doc
        else:
            stats.empty_skipped += 1
    if pick is not None:
        stats.sample_text_bytes += kept_text
        stats.sample_disk_bytes += (
            round(pick.weight * kept_text / seen_text) if coin and seen_text
            else 0 if coin else stats.bytes_read - read_before
        )
    if cut:
        sys.stderr.write(
            f"note: {task.describe()}: documents longer than {PIECE_BYTES:,} bytes were cut into "
            f"{cut:,} more piece(s) of at most that size; each piece is treated as a document "
            "(n-grams do not span a cut, packing separates the pieces)\n"
        )


def _pieces_of(task: CorpusTask, options: CorpusOptions, stats: ReadStats) -> Iterator[str]:
    """A task's documents, those longer than a piece in pieces (all but the first `Continued`)."""
    if task.fmt == "txt":  # text files come in pieces already
        return iter_text_documents(task, options, stats)
    whole = iter_text_documents(task, options, stats) if task.fmt in TEXT_FORMATS else \
        iter_table_documents(task, options, stats)
    return (Continued(p) if i else p for doc in whole for i, p in enumerate(text_pieces(doc)))


def iter_batches(
    task: CorpusTask,
    options: CorpusOptions = CorpusOptions(),
    stats: ReadStats | None = None,
    *,
    batch_chars: int = 1 << 20,
) -> Iterator[list[str]]:
    """Yield lists of documents of about `batch_chars` characters in total.

    >>> sum(len(b) for b in iter_batches(task))  # doctest: +SKIP
    1000
    """
    return batch_documents(iter_documents(task, options, stats), batch_chars)


def batch_documents(docs: Iterable[str], batch_chars: int) -> Iterator[list[str]]:
    """Documents in lists of about `batch_chars` characters in total, in order.

    >>> [len(b) for b in batch_documents(["ab", "cd", "e"], 3)]
    [2, 1]
    """
    batch: list[str] = []
    size = 0
    for doc in docs:
        batch.append(doc)
        size += len(doc)
        if size >= batch_chars:
            yield batch
            batch, size = [], 0
    if batch:
        yield batch


def iter_corpus(inputs: list[str] | tuple[str, ...], options: CorpusOptions = CorpusOptions(),
                stats: ReadStats | None = None) -> Iterator[str]:
    """All documents of a corpus, in order: ``for text in iter_corpus(["data/"]): ...``."""
    for task in plan_tasks(resolve_inputs(inputs), options):
        yield from iter_documents(task, options, stats)
