"""One compare task: pack a task's first sequences and mask them with every strategy.

Each strategy masks the same packed rows (copy 0, the run's seed) through the
shared task loop (`maskprep.shards.taskloop.TaskLoop`); the task measures them
with `MaskStats` and `TargetStats` and keeps a few rows to show on the page,
preferring rows that hold a multi-word vocabulary unit.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from ..encoded.source import SourceTask
from ..masking.sampler import Strategy
from ..packing import PackedBatch
from ..shards.taskloop import LoopJob, TaskLoop
from ..stats.masks import MaskStats
from ..stats.targets import TargetStats
from .config import CompareConfig

__all__ = ["CompareJob", "compare_task"]


@dataclass(frozen=True)
class CompareJob:
    """What every compare task shares: the task loop's job, the options, the strategies."""

    loop: LoopJob
    config: CompareConfig
    strategies: tuple[Strategy, ...]


def compare_task(job: CompareJob, task: SourceTask, quota: int | None) -> dict[str, Any]:
    """Pack one task (its first `quota` sequences) and mask them with every strategy
    (`TaskLoop`)."""
    loop = TaskLoop(job.loop, task)
    cfg = job.config
    masking = {s: cfg.masking(s) for s in job.strategies}
    pmi_cfg = cfg.masking(Strategy.PMI)
    stats = {s: MaskStats() for s in job.strategies}
    targets = {s: TargetStats() for s in job.strategies}
    examples: list[dict[str, Any]] = []
    fallback: list[dict[str, Any]] = []
    for pb in loop.packed(quota):
        # the vocabulary units of these words, for within-unit leakage (the pmi strategy's own
        # units)
        groups = loop.units(pb, pmi_cfg) if loop.table is not None else None
        rows: dict[Strategy, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        for s in job.strategies:
            units, masked, labels = loop.mask(pb, masking[s], 0)
            stats[s].add(
                masked_ids=masked,
                labels=labels,
                unit_ids=units,
                word_ids=pb.word_ids,
                attention_mask=pb.attention_mask,
                mask_token_id=loop.mask_id,
                first_copy=True,
            )
            targets[s].add(
                masked_ids=masked,
                labels=labels,
                unit_ids=units,
                word_ids=pb.word_ids,
                word_keys=pb.word_keys,
                word_kinds=pb.word_kinds,
                attention_mask=pb.attention_mask,
                mask_token_id=loop.mask_id,
                group_ids=groups,
            )
            rows[s] = (masked, labels, units)
        if len(examples) < cfg.examples:
            _pick_examples(pb, rows, groups, examples, fallback, cfg.examples)
    return {"task": task.index, "sequences": loop.sequences, "read": loop.read.to_dict(),
            "stats": {s.value: stats[s].to_state() for s in job.strategies},
            "targets": {s.value: targets[s].to_state() for s in job.strategies},
            "examples": (examples + fallback)[:cfg.examples]}


def _pick_examples(
    pb: PackedBatch,
    rows: Mapping[Strategy, tuple[np.ndarray, ...]],
    groups: np.ndarray | None,
    examples: list[dict[str, Any]],
    fallback: list[dict[str, Any]],
    want: int,
) -> None:
    """Keep rows to show: first those holding a multi-word vocabulary unit, else the first rows."""
    n_words = pb.word_ids.max(axis=1, initial=-1) + 1
    rich = (
        np.zeros(len(pb), bool)
        if groups is None
        else (groups.max(axis=1, initial=-1) + 1) < n_words
    )
    for r in range(len(pb)):
        dest = examples if rich[r] else fallback
        if len(examples) >= want or (dest is fallback and len(fallback) >= want):
            continue
        dest.append(
            {
                "sequence_id": int(pb.sequence_ids[r]),
                "rich": bool(rich[r]),
                "input_ids": pb.input_ids[r].tolist(),
                "attention_mask": pb.attention_mask[r].tolist(),
                "units": None if groups is None else groups[r].tolist(),
                "strategies": {
                    s.value: {
                        "input_ids": m[r].tolist(),
                        "labels": lab[r].tolist(),
                        "unit_ids": u[r].tolist(),
                    }
                    for s, (m, lab, u) in rows.items()
                },
            }
        )
