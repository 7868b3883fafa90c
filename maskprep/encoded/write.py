"""`maskprep encode`: tokenize a corpus once into an encoded directory (layout: `maskprep.encoded.format`).

`encode_corpus` splits the corpus into tasks exactly as `mask` and `compare`
do (`corpus.plan_tasks`) and runs `encode_task` for each through
`execute.map_tasks` (local processes or Dask). A task reads its documents in
batches of about `BATCH_CHARS` characters, encodes them, gives every word
the index of its word type in the task (types first seen first), and
streams one record batch per encoded batch into ``docs-T.arrow``; the word
table goes to ``words-T.arrow`` when the task ends. A task writes its files
under temporary names, renames them, and then records itself in
``.maskprep/``; ``--resume`` keeps every task whose record matches this run
and whose files still have their recorded size and sha256. The driver writes
``tokenizer.json`` and, last, ``encoded.json``, then removes the state.

Before starting, the free space of the output filesystem is compared with
an estimate of the directory's size (`estimate_bytes`); too little raises.

This module does not read encoded directories back (see `maskprep.encoded.source`).
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from .._files import atomic_path, atomic_write_json, atomic_write_text, file_sha256, read_json
from .._version import __version__
from ..corpus.reader import CorpusOptions, ReadStats
from ..errors import MaskprepError
from ..tokenizer.encoding import EncodedBatch, TokenizerInfo, load_tokenizer, tokenizer_from_json
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

# Measured on English prose with an 8,000-token WordPiece tokenizer (scripts/bench.py): the directory takes
# about 0.5 bytes per byte of text; the estimate keeps a margin. Compressed inputs are taken to hold 4x their size.
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


_CACHE: dict[str, TokenizerInfo] = {}


def _tokenizer(job: _Job) -> TokenizerInfo:
    info = _CACHE.get(job.tokenizer_hash)
    if info is None:
        _CACHE.clear()
        info = _CACHE[job.tokenizer_hash] = tokenizer_from_json(
            job.tokenizer_json, name=job.tokenizer_name
        )
    return info


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

    words = pa.ListArray.from_arrays(pa.array(batch.doc_offsets.astype(np.int32)), pa.array(types))
    cols = [words] + [
        pa.array(np.asarray(getattr(batch, name), dtype=np.int64)) for name in PER_DOC
    ]
    return pa.RecordBatch.from_arrays(cols, schema=schema)


def _done_path(out: Path, task: int) -> Path:
    return out / STATE_DIR / f"task-{task:05d}.json"


def encode_task(job: _Job, task: SourceTask) -> dict[str, Any]:
    """Task function: encode one corpus task into docs-T.arrow and words-T.arrow; returns its record."""
    import pyarrow as pa

    info = _tokenizer(job)
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
    rec = EncodedTask(
        index=task.index,
        source=task.label,
        weight=task.weight,
        docs=docs_path.name,
        words=words_path.name,
        docs_bytes=docs_path.stat().st_size,
        docs_sha256=file_sha256(docs_path),
        words_bytes=words_path.stat().st_size,
        words_sha256=file_sha256(words_path),
        documents=documents,
        num_words=words,
        tokens=tokens,
        types=len(types),
        read=reader.consumed.to_dict(),
        batches=tuple(tuple(b) for b in batches),  # type: ignore[misc]
        crossing_tokens=crossing,
    )
    done = {"run": job.run_digest, "task": rec.to_json()}
    atomic_write_text(_done_path(out, task.index), json.dumps(done, sort_keys=True) + "\n")
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

def _prepare(out: Path, *, options: Mapping[str, Any], overwrite: bool, resume: bool) -> bool:
    """Make `out` ready; True if it already holds this very encoding, finished (nothing to do)."""
    if overwrite and resume:
        raise MaskprepError("--overwrite and --resume exclude each other: pick one")
    if out.exists() and not out.is_dir():
        raise MaskprepError(f"-o {out}: exists and is not a directory")
    entries = sorted(out.iterdir()) if out.is_dir() else []
    state = out / STATE_DIR / "encode.json"
    if entries and resume:
        if (out / MANIFEST).is_file() and not state.exists():
            old = read_json(out / MANIFEST, what="encoded manifest").get("options")
            if old == dict(options):
                return True
            raise MaskprepError(
                f"--resume: {out} holds a finished encoding with other options; use --overwrite "
                "to replace it"
            )
        if not state.is_file():
            raise MaskprepError(
                f"--resume: {out} holds no unfinished maskprep encode run (no {STATE_DIR}/"
                "encode.json); use --overwrite to replace its contents"
            )
        old = read_json(state, what="encode options")
        diffs = [f"{k}: {json.dumps(old.get(k))} before, {json.dumps(options.get(k))} now"
                 for k in sorted(set(old) | set(options)) if old.get(k) != options.get(k)]
        if diffs:
            raise MaskprepError(
                f"--resume: the options differ from the run in {out} ("
                + "; ".join(diffs)
                + "); rerun with the same options, or use --overwrite"
            )
        for tmp in [*out.glob(".*.tmp"), *(out / STATE_DIR).glob(".*.tmp")]:
            tmp.unlink(missing_ok=True)
        return False
    if entries and not overwrite:
        raise MaskprepError(
            f"-o {out}: directory is not empty; pass --overwrite to replace it or --resume to "
            "finish an interrupted encode"
        )
    for p in entries:
        ours = (
            p.name in (MANIFEST, "tokenizer.json")
            or (p.suffix == ".arrow" and p.name.startswith(("docs-", "words-")))
            or (p.name.startswith(".") and p.name.endswith(".tmp"))
        )
        if p.name == STATE_DIR and p.is_dir():
            shutil.rmtree(p)
        elif ours:
            p.unlink()
        else:
            raise MaskprepError(
                f"--overwrite: {out} holds {p.name}, which maskprep encode did not write; "
                "choose another -o or remove it yourself"
            )
    out.mkdir(parents=True, exist_ok=True)
    atomic_write_json(state, dict(options))
    return False


def _finished(out: Path, task: int, run_digest: str) -> dict[str, Any] | None:
    try:
        rec = json.loads(_done_path(out, task).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if rec.get("run") != run_digest:
        return None
    t = rec.get("task", {})
    for name, size, digest in ((t.get("docs"), t.get("docs_bytes"), t.get("docs_sha256")),
                               (t.get("words"), t.get("words_bytes"), t.get("words_sha256"))):
        p = out / str(name)
        if not p.is_file() or p.stat().st_size != size or file_sha256(p) != digest:
            return None
    return t


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

    >>> encode_corpus(["plays.txt"], tokenizer="tokenizer.json", output="enc").doc["totals"]["tokens"]  # doctest: +SKIP
    1203311
    """
    from ..execute import Executor, map_tasks
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
    digest = hashlib.sha256(json.dumps(options, sort_keys=True).encode()).hexdigest()
    if _prepare(out, options=options, overwrite=overwrite, resume=resume):
        return EncodedManifest.read(out)
    done: dict[int, dict[str, Any]] = {}
    if resume:
        for t in source.tasks:
            rec = _finished(out, t.index, digest)
            if rec is not None:
                done[t.index] = rec
    todo = [t for t in source.tasks if t.index not in done]
    check_free_space(out, int(estimate_bytes(source) * sum(t.weight for t in todo)
                              / max(1.0, sum(t.weight for t in source.tasks))))
    job = _Job(
        out=os.path.abspath(out),
        tokenizer_json=info.json,
        tokenizer_name=info.name,
        tokenizer_hash=info.hash,
        vocab_size=info.vocab_size,
        options=opts,
        run_digest=digest,
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
    shutil.rmtree(out / STATE_DIR, ignore_errors=True)
    return EncodedManifest.read(out)


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
        f"wrote {manifest.directory}/ ({t['bytes'] / 1e6:,.1f} MB{ratio}; {MANIFEST}, tokenizer.json, "
        "docs-*.arrow, words-*.arrow)"
    )
