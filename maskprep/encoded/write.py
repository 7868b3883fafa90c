"""`maskprep encode`: tokenize a corpus once into an encoded directory.

The layout is in `maskprep.encoded.format`. `encode_corpus` splits the corpus
into tasks exactly as `mask` and `compare` do (`corpus.plan_tasks`) and runs
`encode_task` for each through `execute.map_tasks` (local processes or Dask).
A task reads its documents in batches of about `BATCH_CHARS` characters,
encodes them, gives every word the index of its word type in the task
(`maskprep.encoded.types`), and streams one record batch per encoded batch
into ``docs-T.arrow``; the word table goes to ``words-T.arrow`` when the task
ends. A task writes its files under temporary names, renames them, and then
writes its done-record (files with size and sha256) in ``.maskprep/``.

Resume and the lock are the shared mechanism of every stage
(`maskprep._resume`, `ENCODE_STAGE`): the directory is locked for the whole
run, ``--resume`` keeps every task whose record belongs to this run's options
and whose files are intact, and refuses other options naming each one. The
driver writes ``tokenizer.json`` and, last, ``encoded.json``, then removes the
state.

Before starting, the free space of the output filesystem is compared with
an estimate of the directory's size (`estimate_bytes`); too little raises.

This module does not read encoded directories back (see `maskprep.encoded.source`).
"""

from __future__ import annotations

import json
import os
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from .._arrow import arrow_array
from .._files import atomic_path, atomic_write_json, atomic_write_text, read_json
from .._resume import RunDir, Stage, claim, file_entry, write_record
from .._version import __version__
from ..corpus.reader import CorpusOptions, ReadStats
from ..errors import MaskprepError
from ..tokenizer.encoding import EncodedBatch, TokenizerInfo, load_tokenizer, shared_tokenizer
from .format import (
    BATCH_CHARS,
    COMPRESSION,
    FORMAT,
    FORMAT_VERSION,
    MANIFEST,
    PER_DOC,
    STATE_DIR,
    EncodedManifest,
    EncodedTask,
    docs_name,
    words_name,
)
from .source import Source, SourceTask, TaskReader, open_source, read_stats_of
from .types import TypeIndex

__all__ = [
    "encode_corpus",
    "encode_task",
    "estimate_bytes",
    "check_free_space",
    "format_encode_summary",
    "BYTES_PER_TEXT_BYTE",
]

# Measured on English prose with an 8,000-token WordPiece tokenizer (scripts/bench.py): the
# directory takes about 0.5 bytes per byte of text; the estimate keeps a margin. Compressed
# inputs are taken to hold 4x their size.
BYTES_PER_TEXT_BYTE = 1.0
COMPRESSED_RATIO = 4.0


@dataclass(frozen=True)
class _Job:
    out: str
    tokenizer_json: str
    tokenizer_name: str
    tokenizer_hash: str
    vocab_size: int
    options: CorpusOptions
    run_digest: str
    words: Any = None  # WordsConfig (None: the tokenizer's words)


def _ids_type(vocab_size: int) -> Any:
    import pyarrow as pa

    return pa.uint16() if vocab_size <= 1 << 16 else pa.uint32()


def _docs_schema() -> Any:
    import pyarrow as pa

    fields = [pa.field("words", pa.list_(pa.uint32()), nullable=False)]
    fields += [pa.field(col, pa.int64(), nullable=False) for col in PER_DOC.values()]
    return pa.schema(
        fields,
        metadata={
            b"maskprep": json.dumps(
                {"kind": "maskprep-encoded-docs", "format_version": FORMAT_VERSION}
            ).encode()
        },
    )


def _record_batch(batch: EncodedBatch, types: np.ndarray, schema: Any) -> Any:
    import pyarrow as pa

    words = pa.ListArray.from_arrays(
        arrow_array(batch.doc_offsets.astype(np.int32)), arrow_array(types)
    )
    cols = [words] + [
        arrow_array(np.asarray(getattr(batch, name), dtype=np.int64)) for name in PER_DOC
    ]
    return pa.RecordBatch.from_arrays(cols, schema=schema)


def encode_task(job: _Job, task: SourceTask) -> dict[str, Any]:
    """Task function: encode one corpus task into docs-T.arrow and words-T.arrow; its record."""
    import pyarrow as pa

    info = shared_tokenizer(job.tokenizer_json, name=job.tokenizer_name)
    out = Path(job.out)
    ipc = pa.ipc.IpcWriteOptions(compression=COMPRESSION)
    types = TypeIndex()
    reader = TaskReader(task, info, job.options, batch_chars=BATCH_CHARS, words=job.words)
    schema = _docs_schema()
    crossing = 0
    batches: list[list[int]] = []
    documents = words = tokens = 0
    docs_path, words_path = out / docs_name(task.index), out / words_name(task.index)
    with atomic_path(docs_path) as tmp:
        with (
            pa.OSFile(str(tmp), "wb") as sink,
            pa.ipc.new_file(sink, schema, options=ipc) as writer,
        ):
            for batch, groups, delta in reader.deltas():
                writer.write_batch(_record_batch(batch, types.assign(batch, groups), schema))
                batches.append(
                    [delta.documents, delta.empty_skipped, delta.invalid_utf8, delta.bytes_read]
                )
                documents += batch.num_docs
                words += batch.num_words
                tokens += len(batch.ids)
                crossing += batch.crossing_tokens
    table = types.table(_ids_type(job.vocab_size))
    with atomic_path(words_path) as tmp:
        with (
            pa.OSFile(str(tmp), "wb") as sink,
            pa.ipc.new_file(sink, table.schema, options=ipc) as writer,
        ):
            writer.write_table(table)
    docs_entry, words_entry = file_entry(out, docs_path), file_entry(out, words_path)
    rec = EncodedTask(
        index=task.index,
        source=task.label,
        weight=task.weight,
        docs=docs_path.name,
        words=words_path.name,
        docs_bytes=docs_entry["bytes"],
        docs_sha256=docs_entry["sha256"],
        words_bytes=words_entry["bytes"],
        words_sha256=words_entry["sha256"],
        documents=documents,
        num_words=words,
        tokens=tokens,
        types=len(types),
        read=reader.consumed.to_dict(),
        batches=tuple(tuple(b) for b in batches),  # type: ignore[misc]
        crossing_tokens=crossing,
    )
    done = {"run": job.run_digest, "task": task.index, "record": rec.to_json(),
            "files": [docs_entry, words_entry]}
    write_record(out / STATE_DIR / RECORD.format(task.index), done)
    return rec.to_json()


# ---------------------------------------------------------------- disk space

def estimate_bytes(source: Source) -> int:
    """Bytes the encoded directory of `source` is expected to take (with a margin)."""
    total = 0.0
    for t in source.tasks:
        raw = t.raw
        compressed = raw is not None and (raw.compression is not None or raw.fmt == "parquet")
        total += t.weight * (COMPRESSED_RATIO if compressed else 1.0)
    return int(total * BYTES_PER_TEXT_BYTE) + (1 << 20)


def check_free_space(out: Path, needed: int) -> None:
    """Raise when the filesystem of `out` has less free space than `needed` bytes."""
    where = out
    while not where.exists() and where != where.parent:
        where = where.parent
    free = shutil.disk_usage(where).free
    if free < needed:
        raise MaskprepError(
            f"-o {out}: not enough free disk space to encode this corpus: about "
            f"{needed / 1e6:,.0f} MB needed (estimate), {free / 1e6:,.0f} MB free on that "
            "filesystem; free some space or choose another -o"
        )


# ---------------------------------------------------------------- the driver

_LABELS = {
    "tokenizer_hash": "tokenizer (-t)",
    "corpus_fingerprint": "corpus (file names, sizes and contents)",
    "doc_sep": "--doc-sep",
    "text_field": "--text-field",
    "text_column": "--text-column",
    "strict": "--strict",
    "chunk_bytes": "task size",
    "batch_chars": "batch size",
    "words": "--words (word definition)",
    "format_version": "encoded format version",
    "maskprep_version": "maskprep version",
}
RECORD = "task-{:05d}.json"  # a task's done-record in STATE_DIR (the stage's `digits`)


def _finished_identity(out: Path) -> dict[str, Any] | None:
    """The options of a finished encoded directory (its manifest), or None."""
    if not (out / MANIFEST).is_file():
        return None
    options = read_json(out / MANIFEST, what="encoded manifest").get("options")
    return dict(options) if isinstance(options, dict) else None


def _ours(p: Path) -> bool:
    return (
        p.name in (MANIFEST, "tokenizer.json")
        or (p.suffix == ".arrow" and p.name.startswith(("docs-", "words-")))
        or (p.name.startswith(".") and p.name.endswith(".tmp"))
    )


def _remove_ours(out: Path) -> None:
    """What ``--overwrite`` replaces: every file encode writes; any other file is refused."""
    entries = [p for p in sorted(out.iterdir()) if p.name != STATE_DIR]
    for p in entries:
        if not _ours(p):
            raise MaskprepError(
                f"--overwrite: {out} holds {p.name}, which maskprep encode did not write; "
                "choose another -o or remove it yourself"
            )
    for p in entries:
        p.unlink()


ENCODE_STAGE = Stage(
    noun="encode",
    state=STATE_DIR,
    marker=MANIFEST,
    labels=_LABELS,
    changed=("tokenizer_hash", "corpus_fingerprint"),
    digits=5,
    finished_identity=_finished_identity,
    on_overwrite=_remove_ours,
)


def _claim(out: Path, options: Mapping[str, Any], *, overwrite: bool, resume: bool) -> RunDir:
    """Lock OUT and check it (`maskprep._resume.claim`); on resume, drop the last temporaries."""
    if out.exists() and not out.is_dir():
        raise MaskprepError(f"-o {out}: exists and is not a directory")
    run = claim(out, ENCODE_STAGE, options, resume=resume, overwrite=overwrite)
    if run.resumed:
        for tmp in out.glob(".*.tmp"):
            tmp.unlink(missing_ok=True)
        run.clean(p.name for p in run.root.glob("task-*.json"))
    return run


def encode_corpus(
    corpus: Sequence[str],
    *,
    tokenizer: str | Path | TokenizerInfo,
    output: str | Path,
    corpus_options: CorpusOptions | None = None,
    executor: Any = None,
    overwrite: bool = False,
    resume: bool = False,
    words: Any = None,
) -> EncodedManifest:
    """Tokenize a corpus once into an encoded directory; returns its manifest.

    `words` (a `WordsConfig`; default the tokenizer's words) is the word definition
    stored with the batches and recorded in the manifest.

    >>> m = encode_corpus(["plays.txt"], tokenizer="tokenizer.json", output="enc")  # doctest: +SKIP
    >>> m.doc["totals"]["tokens"]  # doctest: +SKIP
    1203311
    """
    from ..execute import Executor
    from ..tokenizer.words import words_option

    words = words_option(words)
    recorded: Any = "tokenizer" if words.is_tokenizer else words.describe()
    executor = executor or Executor()
    source = open_source(list(corpus), corpus_options)
    if source.encoded:
        raise MaskprepError(
            f"{source.describe()}: is already an encoded directory; give the raw corpus files"
        )
    info = tokenizer if isinstance(tokenizer, TokenizerInfo) else load_tokenizer(tokenizer)
    opts = source.options
    out = Path(output)
    _refuse_overlap(out, source)
    options = {
        "tokenizer_hash": info.hash,
        "corpus_fingerprint": source.fingerprint,
        "doc_sep": opts.doc_sep,
        "text_field": opts.text_field,
        "text_column": opts.text_column,
        "strict": opts.strict,
        "chunk_bytes": opts.chunk_bytes,
        "batch_chars": BATCH_CHARS,
        "words": recorded,
        "format_version": FORMAT_VERSION,
        "maskprep_version": __version__,
    }
    run = _claim(out, options, overwrite=overwrite, resume=resume)
    try:
        if run.finished:
            return EncodedManifest.read(out)
        _encode_claimed(out, run, source, info, words, executor)
    finally:
        run.release()
    return EncodedManifest.read(out)


def _encode_claimed(out: Path, run: RunDir, source: Source, info: TokenizerInfo, words: Any,
                    executor: Any) -> None:
    """Run the tasks not yet done in a claimed directory, then write its manifest (last)."""
    from ..execute import map_tasks

    done = {
        i: rec["record"]
        for i, rec in run.done([t.index for t in source.tasks], files=lambda rec: rec["files"],
                               base=out).items()
    }
    todo = [t for t in source.tasks if t.index not in done]
    check_free_space(out, int(estimate_bytes(source) * sum(t.weight for t in todo)
                              / max(1.0, sum(t.weight for t in source.tasks))))
    job = _Job(
        out=os.path.abspath(out),
        tokenizer_json=info.json,
        tokenizer_name=info.name,
        tokenizer_hash=info.hash,
        vocab_size=info.vocab_size,
        options=source.options,
        run_digest=run.digest,
        words=None if words.is_tokenizer else words,
    )
    for rec in map_tasks(
        encode_task,
        [(job, t) for t in todo],
        executor=executor,
        label="encode",
        describe=lambda i: todo[i].describe(),
        weights=[t.weight / 1e6 for t in todo],
        unit="MB",
        shared=out,
    ):
        done[rec["index"]] = rec
    tasks: list[dict[str, Any]] = [done[t.index] for t in source.tasks]
    read = ReadStats()
    for rec in tasks:
        read.merge(read_stats_of(rec["read"]))
    totals = {
        "tasks": len(tasks),
        "documents": sum(t["documents"] for t in tasks),
        "words": sum(t["num_words"] for t in tasks),
        "tokens": sum(t["tokens"] for t in tasks),
        "bytes": sum(t["docs_bytes"] + t["words_bytes"] for t in tasks),
    }
    options = run.identity
    recorded = options["words"]
    manifest = {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "maskprep_version": __version__,
        "options": options,
        "words": recorded,
        "tokenizer": {**info.describe(), "ids": str(_ids_type(info.vocab_size))},
        "corpus": {
            "files": list(source.files),
            "fingerprint": source.fingerprint,
            "options": {
                k: options[k]
                for k in ("doc_sep", "text_field", "text_column", "strict", "chunk_bytes")
            },
            "read": read.to_dict(),
        },
        "totals": totals,
        "compression": COMPRESSION,
        "batch_chars": BATCH_CHARS,
        "tasks": tasks,
    }
    atomic_write_text(out / "tokenizer.json", info.json)
    atomic_write_json(out / MANIFEST, manifest)
    run.remove()


def _refuse_overlap(out: Path, source: Source) -> None:
    from .._paths import check_apart

    check_apart(out, [*source.inputs, *source.files])


def format_encode_summary(manifest: EncodedManifest) -> str:
    """One paragraph for the terminal: tasks, documents, words, tokens and size on disk."""
    t, read = manifest.doc["totals"], manifest.corpus["read"]
    mb = read["bytes_read"] / 1e6
    ratio = (
        f" ({t['bytes'] / read['bytes_read']:.2f} bytes per byte of text)"
        if read["bytes_read"]
        else ""
    )
    return (
        f"encoded {t['documents']:,} documents, {t['words']:,} words, {t['tokens']:,} tokens from "
        f"{mb:,.1f} MB of text in {t['tasks']} tasks\n"
        f"wrote {manifest.directory}/ ({t['bytes'] / 1e6:,.1f} MB{ratio}; {MANIFEST}, "
        "tokenizer.json, docs-*.arrow, words-*.arrow)"
    )
