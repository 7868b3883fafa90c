#!/usr/bin/env python3
"""Rows per second of `ShardLoader` (shuffled, two ranks) against pyarrow reading the same files.

Writes shards of the bundled sample corpus (Arrow and Parquet, --copies 8, 128 tokens a row;
not timed), then, in rounds, in this process, reads every row once with:

1. pyarrow: ``pyarrow.dataset.dataset(DIR).to_batches()``, each batch's columns turned into
   numpy arrays of fixed shape (what a user would write without the loader); by default it
   reads with threads (both cores here), and once more with ``use_threads=False``;
2. the loader: ``ShardLoader(DIR, batch_size=B, shuffle=True, world_size=2)``, rank 0 and then
   rank 1 (together every row once), with its default shuffle buffer; both loaders are made
   once, before the rounds (as a training job makes its loader once), and each round is the
   next epoch, so every round reads the rows in a new order. The first round opens the files.

Each consumer touches every batch (sums ``attention_mask``), so memory-mapped pages are
really read. Prints rows/s of each and the ratios in the same round (target: loader >= 0.8x
pyarrow), the CPU time per row of the loader against pyarrow on one thread (both use one core;
on a machine other jobs share, wall-clock figures swing with the load, CPU time much less),
and the loader's peak heap during iteration (tracemalloc; numpy arrays report to it), pyarrow's
own memory pool and the growth of the process's RSS, against the buffer the loader states.

    python scripts/bench_loader.py [--rounds 3] [--batch-size 64] [--copies 8] [--quick]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import psutil
import pyarrow as pa
import pyarrow.dataset as ds

from maskprep import (
    MaskingConfig,
    PackingConfig,
    ShardConfig,
    ShardLoader,
    TrainConfig,
    iter_corpus,
    train_tokenizer,
    write_shards,
)
from maskprep.execute import Executor
from maskprep.pipeline import sample_corpus_dir
from maskprep.tokenizer import save_tokenizer


CPU: list[float] = []  # process CPU seconds of each read, in call order


def read_pyarrow(
    directory: Path, fmt: str, seq_len: int, threads: bool = True
) -> tuple[int, float]:
    t0, c0 = time.perf_counter(), time.process_time()
    rows = 0
    touched = 0
    dataset = ds.dataset(str(directory), format="ipc" if fmt == "arrow" else "parquet")
    for batch in dataset.to_batches(use_threads=threads):
        cols = {}
        for name in batch.schema.names:
            col = batch.column(name)
            if pa.types.is_list(col.type):
                cols[name] = col.flatten().to_numpy().reshape(len(col), seq_len)
            else:
                cols[name] = col.to_numpy()
        touched += int(cols["attention_mask"].sum())
        rows += batch.num_rows
    CPU.append(time.process_time() - c0)
    return rows, time.perf_counter() - t0


def read_loader(loaders: list[ShardLoader], epoch: int) -> tuple[int, float]:
    t0, c0 = time.perf_counter(), time.process_time()
    rows = 0
    touched = 0
    for loader in loaders:
        loader.set_epoch(epoch)
        for batch in loader:
            touched += int(batch["attention_mask"].sum())
            rows += len(batch["input_ids"])
    CPU.append(time.process_time() - c0)
    return rows, time.perf_counter() - t0


def memory(directory: Path, batch_size: int) -> dict[str, float]:
    loader = ShardLoader(directory, batch_size=batch_size, seed=0, epoch=7, world_size=2)
    loader.pieces()
    proc = psutil.Process()
    pool = pa.default_memory_pool()
    rss0, pool0 = proc.memory_info().rss, pool.bytes_allocated()
    tracemalloc.start()
    peak_pool = 0
    try:
        for i, batch in enumerate(loader):
            if i % 16 == 0:
                peak_pool = max(peak_pool, pool.bytes_allocated() - pool0)
            del batch
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return {
        "stated": loader.buffer_bytes,
        "heap": peak,
        "pool": peak_pool,
        "rss": proc.memory_info().rss - rss0,
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--batch-size", type=int, default=64)
    ap.add_argument("--copies", type=int, default=8)
    ap.add_argument(
        "--vocab-size", type=int, default=8000, help="of the WordPiece tokenizer trained"
    )
    ap.add_argument(
        "--quick", action="store_true", help="--copies 1 --rounds 2 (figures are noisier)"
    )
    args = ap.parse_args()
    if args.quick:
        args.copies, args.rounds = 1, 2
    corpus = [str(p) for p in sorted(sample_corpus_dir().glob("*.gz"))]
    mib = 1 << 20
    with tempfile.TemporaryDirectory(prefix="bench-loader-") as tmp:
        work = Path(tmp)
        tok = work / "tokenizer.json"
        save_tokenizer(
            train_tokenizer(iter_corpus(corpus), TrainConfig(vocab_size=args.vocab_size)), tok
        )
        print(
            f"shards of {', '.join(Path(c).name for c in corpus)}, --copies {args.copies}, "
            "--seq-len 128, "
            f"batch size {args.batch_size}, loader: shuffle, world_size 2 (rank 0 then rank 1)"
        )
        for fmt in ("arrow", "parquet"):
            d = work / fmt
            write_shards(
                corpus,
                tokenizer=tok,
                output=d,
                masking=MaskingConfig(strategy="word"),
                packing=PackingConfig(seq_len=128),
                shards=ShardConfig(format=fmt, copies=args.copies),
                executor=Executor(workers=1, quiet=True),
            )
            size = sum(p.stat().st_size for p in d.glob("shard-*")) / mib
            read_pyarrow(d, fmt, 128)  # page cache and file metadata warm for both
            # made once, as a training job does; each round is a new epoch (a new order)
            loaders = [
                ShardLoader(d, batch_size=args.batch_size, seed=0, rank=r, world_size=2)
                for r in (0, 1)
            ]
            ratios, ratios1, cpu, lines = [], [], [], []
            for r in range(args.rounds):
                n_a, t_a = read_pyarrow(d, fmt, 128)
                n_s, t_s = read_pyarrow(d, fmt, 128, threads=False)
                n_l, t_l = read_loader(loaders, epoch=r)
                cpu.append(CPU[-1] / CPU[-2])  # loader / pyarrow on one thread, CPU seconds
                assert n_a == n_l == n_s, (n_a, n_l, n_s)
                ratios.append((n_l / t_l) / (n_a / t_a))
                ratios1.append((n_l / t_l) / (n_s / t_s))
                lines.append(
                    f"  round {r + 1}: pyarrow {n_a / t_a:>10,.0f} rows/s (one thread "
                    f"{n_s / t_s:>10,.0f})   loader {n_l / t_l:>10,.0f} rows/s   "
                    f"ratio {ratios[-1]:.2f}x ({ratios1[-1]:.2f}x)"
                )
            print(f"\n{fmt}: {n_a:,} rows in {size:.0f} MiB of files")
            print("\n".join(lines))
            print(
                f"  median ratio {statistics.median(ratios):.2f}x against pyarrow's threaded "
                f"reader (target >= 0.8x), {statistics.median(ratios1):.2f}x against it on one "
                "thread"
            )
            print(
                f"  CPU seconds per row of the loader: median {statistics.median(cpu):.2f}x those "
                "of pyarrow on one thread (less load-dependent than wall-clock time)"
            )
            m = memory(d, args.batch_size)
            print(
                f"  memory: stated shuffle buffer {m['stated'] / mib:.1f} MiB; "
                "peak numpy heap while "
                f"iterating {m['heap'] / mib:.1f} MiB "
                f"({m['heap'] / m['stated']:.2f}x the stated); "
                f"pyarrow pool {m['pool'] / mib:.1f} MiB; RSS growth {m['rss'] / mib:.1f} MiB"
                + (" (mapped file pages count in RSS)" if fmt == "arrow" else "")
            )
            print(
                f"  within the stated buffer + 2 batches: "
                f"{m['heap'] <= m['stated'] + 2 * args.batch_size * (9 * 128 + 10) + (1 << 20)}"
            )


if __name__ == "__main__":
    np.seterr(all="raise")
    main()
