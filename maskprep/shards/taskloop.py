"""The one task loop of `mask` and `compare`: batches -> packed sequences -> units -> masked rows.

A `TaskLoop` runs in a task function, on one `encoded.SourceTask` (a corpus
task tokenized now, or a task of an encoded directory: the batches are the
same). It packs the task's batches (`packing.TaskPacker`), optionally stops
after `quota` sequences, and masks each packed batch with any masking
config and copy (`masking.strategy_units` then `masking.mask_batch`, the
counter-based draws keyed by sequence id, seed and copy). Units are computed
once per packed batch and strategy (per copy for span, whose spans are
drawn), so mask's copies and compare's strategies share them.

`shards.write` writes the rows of every copy; `compare.run` measures the
rows of every strategy. Neither repeats this loop.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any, Iterator

import numpy as np

from ..corpus.reader import CorpusOptions, ReadStats
from ..encoded.source import SourceTask, TaskReader
from ..masking.sampler import MaskingConfig, Strategy, mask_batch, strategy_units
from ..packing import PackedBatch, PackingConfig, TaskPacker
from ..tokenizer.encoding import TokenizerInfo, shared_tokenizer

__all__ = ["LoopJob", "TaskLoop"]


@dataclass(frozen=True)
class LoopJob:
    """What every task of a mask or compare run shares (sent to each worker once)."""

    tokenizer_json: str
    tokenizer_name: str
    tokenizer_hash: str
    packing: PackingConfig
    corpus_options: CorpusOptions
    seed: int
    units: Any = None               # {n: (keys, scores)} or None
    units_digest: str | None = None
    words: Any = None               # WordsConfig (None: the tokenizer's words)


_CACHE: dict[tuple[str, str], Any] = {}


def _cached(kind: str, digest: str, make: Any) -> Any:
    key = (kind, digest)
    if key not in _CACHE:
        if len(_CACHE) > 8:
            _CACHE.clear()
        _CACHE[key] = make()
    return _CACHE[key]


def _head(pb: PackedBatch, k: int) -> PackedBatch:
    return dataclasses.replace(
        pb, **{f.name: getattr(pb, f.name)[:k] for f in dataclasses.fields(pb)}
    )


class TaskLoop:
    """Pack and mask one task: ``for pb in loop.packed(): units, masked, labels = loop.mask(pb, cfg,
    copy)``."""

    def __init__(self, job: LoopJob, task: SourceTask) -> None:
        from ..masking.strategies import UnitTable

        self.job, self.task = job, task
        self.info: TokenizerInfo = shared_tokenizer(job.tokenizer_json, name=job.tokenizer_name)
        self.table = None
        if job.units is not None:
            self.table = _cached(
                "units", job.units_digest or "", lambda: UnitTable.from_by_length(job.units)
            )
        self.mask_id = self.info.require_mask()
        self.random_ids = self.info.normal_ids()
        self.reader = TaskReader(task, self.info, job.corpus_options, words=job.words)
        self.sequences = 0
        self._pb: PackedBatch | None = None
        self._units: dict[tuple[Any, ...], np.ndarray] = {}

    @property
    def read(self) -> ReadStats:
        """Read statistics of the batches packed so far (the whole task's once `packed` is
        exhausted)."""
        return self.reader.consumed

    def packed(self, quota: int | None = None) -> Iterator[PackedBatch]:
        """The task's packed batches; with `quota`, only its first `quota` sequences."""
        if quota is not None and quota <= 0:
            return
        packer = TaskPacker(self.info, self.job.packing, task_index=self.task.index)

        def all_batches() -> Iterator[PackedBatch]:
            for encoded in self.reader:
                if quota is not None:  # only the documents the quota's sequences need
                    encoded = packer.enough(encoded, quota - self.sequences)
                yield from packer.add(encoded)
            yield from packer.finish()

        for pb in all_batches():
            if quota is not None and self.sequences + len(pb) > quota:
                pb = _head(pb, quota - self.sequences)
            self.sequences += len(pb)
            yield pb
            if quota is not None and self.sequences >= quota:
                return

    def units(self, pb: PackedBatch, config: MaskingConfig, copy: int = 0) -> np.ndarray:
        """unit_ids of `pb` under `config` (span: for this copy), computed once per batch."""
        if pb is not self._pb:
            self._pb, self._units = pb, {}
        span = config.strategy is Strategy.SPAN
        key = (
            (config.strategy, config.span_p, config.span_max, copy) if span else (config.strategy,)
        )
        units = self._units.get(key)
        if units is None:
            units = self._units[key] = strategy_units(
                pb.special,
                pb.word_ids,
                config=config,
                sequence_ids=pb.sequence_ids,
                seed=self.job.seed,
                copy=copy,
                word_keys=pb.word_keys,
                word_kinds=pb.word_kinds,
                units=self.table,
            )
        return units

    def mask(
        self, pb: PackedBatch, config: MaskingConfig, copy: int = 0
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(unit_ids, masked input_ids, labels) of `pb` for one masking config and copy."""
        units = self.units(pb, config, copy)
        masked, labels = mask_batch(
            pb.input_ids,
            units,
            sequence_ids=pb.sequence_ids,
            seed=self.job.seed,
            copy=copy,
            config=config,
            mask_token_id=self.mask_id,
            random_token_ids=self.random_ids,
        )
        return units, masked, labels
