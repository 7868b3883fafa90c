"""The memory budget (``--memory``) of `mask` and `compare`: checked before any work starts.

A worker of `mask` holds one encoded batch of the corpus (and the next one, encoded ahead) and,
for every copy, the rows of the shard file being filled: ``--shard-rows`` x ``--seq-len`` tokens
of ``input_ids``, ``labels`` (or ``unit_ids``) and ``attention_mask``, twice while a file is cut
off. A worker of `compare` holds the batches and its figures only. `check_budget` refuses a run
whose workers would need more than their share of ``--memory``, naming what to change; the
share is ``--memory`` / workers running at once (with ``--dask``: all of it, per task).

Documents longer than `corpus.pieces.PIECE_BYTES` are cut into pieces, so a batch never
depends on how long a document is. What is not counted: the Python interpreter and libraries
(about 200 MiB a process) and the tokenizer library's own caches.
"""

from __future__ import annotations

from typing import Any

from .errors import MaskprepError

__all__ = ["BATCH_RESERVE", "ROW_BYTES_PER_TOKEN", "check_budget"]

BATCH_RESERVE = 192 << 20      # one encoded batch of about 1 MiB of text, and the one encoded ahead
ROW_BYTES_PER_TOKEN = 18  # int32 ids + int32 labels + int8 mask, twice while a shard is cut off


def check_budget(memory: int, *, option: str, executor: Any, tasks: int, copies: int = 0,
                 shard_rows: int = 0, seq_len: int = 0) -> int:
    """Each running task's share of `memory`; too small a share raises `MaskprepError`.

    >>> from maskprep.execute import Executor
    >>> check_budget(2 << 30, option="--memory 2GiB", executor=Executor(workers=2), tasks=8,
    ...     copies=1,
    ...              shard_rows=16384, seq_len=128) >> 20
    1024
    """
    slots = max(1, min(1 if executor.dask else executor.workers, tasks))
    share = memory // slots
    rows = copies * shard_rows * seq_len * ROW_BYTES_PER_TOKEN
    need = BATCH_RESERVE + rows
    if need > share:
        what = (
            f"{copies} cop{'y' if copies == 1 else 'ies'} x --shard-rows {shard_rows} x --seq-len "
            f"{seq_len} tokens ({rows >> 20} MiB) plus one encoded batch "
            f"({BATCH_RESERVE >> 20} MiB)"
            if rows
            else f"one encoded batch ({BATCH_RESERVE >> 20} MiB)"
        )
        fix = "raise --memory, or lower --shard-rows, --copies or --workers" if rows else \
            "raise --memory or lower --workers"
        raise MaskprepError(
            f"{option}: {slots} worker(s) get {share >> 20} MiB each, but each needs about "
            f"{need >> 20} MiB for {what}; {fix}"
        )
    return share
