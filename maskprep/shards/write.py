"""Write training-ready shards (Arrow IPC or Parquet).

`write_shards` runs one task per corpus task (`corpus.plan_tasks`) through
`execute.map_tasks`: the task encodes its documents, packs them
(`packing.TaskPacker`), computes units (`masking.strategy_units`), masks every
sequence `copies` times with `masking.mask_batch` (copy index k enters the
counter-based random draws) and writes its own shard files. The driver then
writes ``_maskprep/stats.json`` and, last of all, ``_maskprep/manifest.json``:
a directory with a manifest is complete. Where each file lives is in
`maskprep.shards.layout`.

Files in SHARDS_DIR:

- ``shard-TTTTT-CC-PPPP.arrow`` (or ``.parquet``): corpus task T, copy C,
  part P of at most ``shard_rows`` rows; names depend only on the corpus and
  the options. Columns, one row per sequence, every list ``seq_len`` long:
  static: ``input_ids`` list<int32> (after masking), ``labels`` list<int32>
  (original id at targets, -100 elsewhere), ``attention_mask`` list<int8>,
  ``sequence_id`` uint64, ``copy`` int16 (C again, so rows of different
  copies stay apart when a directory is read as one table); ``--dynamic``:
  ``input_ids`` unmasked and ``unit_ids`` list<int32> (-1 on special tokens)
  instead of ``labels``.
  Schema metadata (key ``maskprep``, JSON): mask token id, special ids,
  strategy, rate, mix, seed, copies, this file's copy, and more. Arrow files
  hold record batches of 1024 rows, Parquet files (zstd) row groups of 8192
  rows, so files are byte-identical whatever the number of workers;
- ``_maskprep/manifest.json``: per shard file, rows, tokens, maskable tokens,
  targets, bytes and sha256; the run's options, tokenizer hash, seed, package
  version and corpus fingerprint; ``_maskprep/stats.json``: see
  `maskprep.stats.masks`, plus the padding share of the rows;
  ``_maskprep/tokenizer.json``: a copy of the tokenizer the ids belong to;
- ``.maskprep/``: the run's options and one done-record per finished task,
  used by ``resume``.

Every file is written under a temporary name and renamed when complete.

Masking on the fly from ``--dynamic`` shards uses the same sampler
(`ShardSet.mask`, see `maskprep.shards.read` for a training-loop example), so it
gives exactly the static rows for the same seed and copy. For dynamic span
masking the spans themselves are those of the shard's copy; only the choice
of spans and the replacement change with ``copy``.

This module does not read shards back (see `maskprep.shards.read` and
`maskprep.shards.loader`), verify or render them (see `maskprep.shards.check`).
"""

from __future__ import annotations

import json
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from .._files import atomic_write_text, file_sha256
from .._resume import RunDir, write_record
from .._version import __version__
from .._checks import is_whole
from ..errors import MaskprepError
from ..wording import name_files
from ..encoded.source import SourceTask
from ..masking.sampler import MaskingConfig, Strategy, needs_units
from ..packing import PackingConfig, check_packing_tokenizer
from ..stats.masks import MaskStats
from .taskloop import LoopJob, TaskLoop
from .layout import FORMATS as _FORMATS, METADATA_KEY, SHARDS_FORMAT_VERSION, ShardManifest, \
    ShardRecord, new_metadata_path
from .maskdir import done_path, prepare_dir
from .shardfile import COPY_DTYPE, ShardWriter

__all__ = ["ShardConfig", "ShardRecord", "ShardManifest", "write_shards",
           "SHARDS_FORMAT_VERSION", "METADATA_KEY", "COPY_DTYPE", "file_sha256"]

# what a mask task imports, started in each worker while the driver prepares the run
_WARM = {"arrow": ("maskprep.shards.write", "pyarrow"),
         "parquet": ("maskprep.shards.write", "pyarrow", "pyarrow.parquet")}


@dataclass(frozen=True)
class ShardConfig:
    """How shards are written: ``ShardConfig(format="parquet", copies=2, seed=1)``.

    >>> ShardConfig(copies=3).copies
    3
    """

    format: str = "arrow"
    shard_rows: int = 16384
    copies: int = 1
    seed: int = 0
    dynamic: bool = False

    def __post_init__(self) -> None:
        if self.format not in _FORMATS:
            raise MaskprepError(f"--format must be arrow or parquet, got {self.format!r}")
        for name, value, low, high in (
            ("--shard-rows", self.shard_rows, 1, 1 << 24),
            ("--copies", self.copies, 1, 1000),
            ("--seed", self.seed, 0, (1 << 64) - 1),
        ):
            if not is_whole(value, low, high):
                raise MaskprepError(
                    f"{name} must be a whole number from {low} to {high}, got {value!r}"
                )
        object.__setattr__(self, "dynamic", bool(self.dynamic))


def _dump(obj: Any) -> str:
    return json.dumps(obj, indent=2, ensure_ascii=False) + "\n"


def _write_text(path: Path, text: str) -> None:
    atomic_write_text(path, text)


# ------------------------------------------------------------------ the task function

@dataclass(frozen=True)
class _Job:
    out: str
    loop: LoopJob
    masking: MaskingConfig
    shards: ShardConfig
    run_digest: str
    metadata: Mapping[str, Any] = field(default_factory=dict)


def _shard_task(job: _Job, task: SourceTask) -> dict[str, Any]:
    """Pack, mask and write one task (`TaskLoop`, from raw text or an encoded directory); returns
    its done-record."""
    out = Path(job.out)
    loop = TaskLoop(job.loop, task)
    for stale in out.glob(f"shard-{task.index:05d}-*"):
        stale.unlink()
    cfg, mcfg = job.shards, job.masking
    writers = [ShardWriter(out, task=task.index, copy=c, shard_rows=cfg.shard_rows,
                           fmt=cfg.format, metadata=job.metadata) for c in range(cfg.copies)]
    stats = MaskStats()
    for pb in loop.packed():
        for c, writer in enumerate(writers):
            units, masked, labels = loop.mask(pb, mcfg, c)
            stats.add(
                masked_ids=masked,
                labels=labels,
                unit_ids=units,
                word_ids=pb.word_ids,
                attention_mask=pb.attention_mask,
                mask_token_id=loop.mask_id,
                first_copy=c == 0,
            )
            cols: dict[str, np.ndarray] = {"input_ids": pb.input_ids if cfg.dynamic else masked}
            cols["unit_ids" if cfg.dynamic else "labels"] = units if cfg.dynamic else labels
            cols["attention_mask"] = pb.attention_mask
            cols["sequence_id"] = pb.sequence_ids
            cols["copy"] = np.full(len(pb.sequence_ids), c, dtype=COPY_DTYPE)
            cols["_maskable"] = (units >= 0).sum(axis=1, dtype=np.int64)
            cols["_targets"] = (labels != -100).sum(axis=1, dtype=np.int64)
            writer.add(cols)
    records = [r for w in writers for r in w.close()]
    done = {"task": task.index, "run": job.run_digest, "shards": [asdict(r) for r in records],
            "stats": stats.to_state(), "read": loop.read.to_dict()}
    write_record(done_path(out, task.index), done)
    return done


# ------------------------------------------------------------------ the driver

def write_shards(corpus: Sequence[str], *, tokenizer: Any, output: str | Path,
                 masking: MaskingConfig = MaskingConfig(), packing: PackingConfig = PackingConfig(),
                 shards: ShardConfig = ShardConfig(), units: str | Path | None = None,
                 corpus_options: Any = None, executor: Any = None, overwrite: bool = False,
                 resume: bool = False, words: Any = None,
                 memory: str | int = "2GiB") -> tuple[ShardManifest, dict[str, Any]]:
    """Write masked (or unit-annotated) shards of a corpus; returns (manifest, stats).

    `words` (a `WordsConfig`, default the tokenizer's words) defines the words of
    the word, span and pmi strategies; it is recorded in the manifest's options.

    `memory` is the budget of all workers together (see `maskprep._budget`); it is checked, not
    part of the run: it may change between attempts of a resumed run.

    >>> manifest, stats = write_shards(["plays.txt"], tokenizer="tokenizer.json",  # doctest: +SKIP
    ...     output="shards")
    """
    from ..encoded.source import open_source
    from ..execute import Executor, start_workers
    from ..tokenizer.words import words_option

    executor = executor or Executor()
    source = open_source(list(corpus), corpus_options)
    words = source.check_words(words_option(words))
    from .._paths import check_apart

    check_apart(output, [*source.inputs, *source.files],
                others=[str(x) for x in (tokenizer, units) if isinstance(x, (str, Path))])
    start_workers(executor, len(source.tasks), _WARM[shards.format])
    corpus_options = source.options
    info = source.tokenizer(tokenizer, stage="mask")
    mask_id = info.require_mask()
    cls_id, sep_id, pad_id = check_packing_tokenizer(info)
    packing.check(info)
    from .._budget import check_budget
    from ..count.types import parse_memory

    check_budget(
        parse_memory(memory),
        option=f"--memory {memory}",
        executor=executor,
        tasks=len(source.tasks),
        copies=shards.copies,
        shard_rows=shards.shard_rows,
        seq_len=packing.seq_len,
    )
    if shards.shard_rows * packing.seq_len >= 1 << 31:
        raise MaskprepError(
            f"--shard-rows {shards.shard_rows} x --seq-len {packing.seq_len} tokens is too many "
            "for one shard; use fewer rows per shard"
        )
    by_length, units_digest, units_built_with = None, None, None
    if masking.strategy is Strategy.PMI:
        if units is None:
            raise MaskprepError(needs_units())
        from ..units.files import read_units_for

        vocab = read_units_for(units, info, words)
        by_length, units_digest = vocab.by_length(), file_sha256(units)
        units_built_with = vocab.source.get("units_tokenizer_hash")
    elif units is not None:
        raise MaskprepError(
            f"--units is only used by --strategy pmi (this run uses {masking.strategy.value}); "
            "drop --units or pass --strategy pmi"
        )

    tasks, files, fingerprint = source.tasks, list(source.files), source.fingerprint
    mcfg = {
        "strategy": masking.strategy.value,
        "rate": masking.rate,
        "mix": list(masking.mix),
        "mix_per": masking.mix_per.value,
        "span_p": masking.span_p,
        "span_max": masking.span_max,
    }
    options = {**mcfg, "seq_len": packing.seq_len, "pack": packing.pack, "copies": shards.copies,
               "seed": shards.seed, "format": shards.format, "shard_rows": shards.shard_rows,
               "dynamic": shards.dynamic, "units_sha256": units_digest, "tokenizer_hash": info.hash,
               "corpus_fingerprint": fingerprint, "doc_sep": corpus_options.doc_sep,
               "text_field": corpus_options.text_field, "text_column": corpus_options.text_column,
               "chunk_bytes": corpus_options.chunk_bytes, "maskprep_version": __version__,
               "words": words.describe()}
    if (
        units_built_with is not None
    ):  # units of another tokenizer with the same words (token ids re-derived)
        options["units_tokenizer_hash"] = units_built_with
    out = Path(output)
    run = prepare_dir(out, overwrite=overwrite, resume=resume, options=options)
    try:
        job_args = {
            "tokenizer_json": info.json,
            "tokenizer_name": info.name,
            "tokenizer_hash": info.hash,
            "masking": masking,
            "packing": packing,
            "shards": shards,
            "corpus_options": corpus_options,
            "units": by_length,
            "units_digest": units_digest,
            "run_digest": run.digest,
            "words": None if words.is_tokenizer else words,
        }
        return _write_claimed(out, run, job_args=job_args, info=info, tasks=tasks, files=files,
            options=options, mcfg=mcfg, executor=executor, ids=(mask_id, cls_id, sep_id, pad_id))
    finally:
        run.release()


def _write_claimed(
    out: Path,
    run: RunDir,
    *,
    job_args: dict[str, Any],
    info: Any,
    tasks: Any,
    files: Any,
    options: dict[str, Any],
    mcfg: dict[str, Any],
    executor: Any,
    ids: tuple[int, int, int, int],
) -> tuple[ShardManifest, dict[str, Any]]:
    """Run the tasks not yet done in a claimed shards directory, then write its finished files."""
    from ..corpus.reader import ReadStats
    from ..encoded.source import read_stats_of
    from ..execute import map_tasks
    from ..tokenizer.encoding import warn_literal_specials

    mask_id, cls_id, sep_id, pad_id = ids
    shards, packing = job_args["shards"], job_args["packing"]
    units_digest = job_args["units_digest"]

    special_ids = [int(i) for i in info.special_ids]
    metadata = {
        "kind": "maskprep-shard",
        "format_version": SHARDS_FORMAT_VERSION,
        "layout": "dynamic" if shards.dynamic else "static",
        **mcfg,
        "seed": shards.seed,
        "copies": shards.copies,
        "seq_len": packing.seq_len,
        "pack": packing.pack,
        "mask_token_id": mask_id,
        "special_ids": special_ids,
        "cls_id": cls_id,
        "sep_id": sep_id,
        "pad_id": pad_id,
        "vocab_size": info.vocab_size,
        "tokenizer_hash": info.hash,
        "units_sha256": units_digest,
    }
    if (
        job_args.get("words") is not None
    ):  # absent: the tokenizer's words (those files stay as they were)
        metadata["words"] = job_args["words"].describe()
    # tasks get absolute paths: a Dask worker's working directory is not the driver's
    loop = LoopJob(
        tokenizer_json=info.json,
        tokenizer_name=info.name,
        tokenizer_hash=info.hash,
        packing=packing,
        corpus_options=job_args["corpus_options"],
        seed=shards.seed,
        units=job_args["units"],
        units_digest=units_digest,
        words=job_args.get("words"),
    )
    job = _Job(out=os.path.abspath(out), loop=loop, masking=job_args["masking"], shards=shards,
               run_digest=job_args["run_digest"], metadata=metadata)
    done: dict[int, dict[str, Any]] = {}
    if run.resumed:
        done = run.done([t.index for t in tasks], files=lambda rec: rec["shards"], base=out)
    todo = [t for t in tasks if t.index not in done]
    args = [(job, t) for t in todo]
    for rec in map_tasks(
        _shard_task,
        args,
        executor=executor,
        label="mask",
        describe=lambda i: todo[i].describe(),
        shared=out,
    ):
        done[rec["task"]] = rec

    stats, read = MaskStats(), ReadStats()
    records: list[ShardRecord] = []
    for t in tasks:
        rec = done[t.index]
        stats.merge(MaskStats.from_state(rec["stats"]))
        read.merge(read_stats_of(rec["read"]))
        records.extend(ShardRecord(**s) for s in rec["shards"])
    warn_literal_specials(info, read.literal_specials, name_files(files))
    if stats.sequences == 0:
        raise MaskprepError(
            f"{name_files(files)}: no documents to mask (every document is empty or "
            "whitespace); no shards were written"
        )
    totals = {
        "shards": len(records),
        "rows": stats.rows,
        "sequences": stats.sequences,
        "tokens": stats.tokens,
        "maskable": stats.maskable,
        "targets": stats.targets,
    }
    manifest = ShardManifest(
        options=options,
        tokenizer={**info.describe(), "mask_token_id": mask_id, "special_ids": special_ids},
        corpus={"files": [str(f) for f in files], "tasks": len(tasks), **read.to_dict()},
        totals=totals,
        shards=tuple(records),
        maskprep_version=__version__,
    )
    stats_doc = stats.to_dict(
        seed=shards.seed,
        layout=metadata["layout"],
        options=options,
        note="rate is over maskable (non-special) tokens; each sequence's budget is "
        "round(rate x its maskable tokens), so per-sequence rates vary"
        + (
            "; dynamic shards: figures of mask_batch with copy = the shard's copy"
            if shards.dynamic
            else ""
        ),
    )
    positions = stats.rows * packing.seq_len
    stats_doc["padding"] = {"positions": positions, "padded": positions - stats.tokens,
                            "share": (positions - stats.tokens) / positions if positions else None,
                            "over": "all token positions of the rows written (rows x seq_len)"}
    _write_text(new_metadata_path(out, "tokenizer.json"), info.json)
    _write_text(new_metadata_path(out, "stats.json"), _dump(stats_doc))
    _write_text(new_metadata_path(out, "manifest.json"), _dump(manifest.to_json()))
    return manifest, stats_doc
