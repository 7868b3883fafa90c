#!/usr/bin/env python3
"""Throughput of `maskprep mask` end to end against bare batch encoding of the same files.

Measures, over the same corpus and tokenizer, in this process:

1. bare encode: read the corpus tasks and run the tokenizer's batch encoder
   (`Tokenizer.encode_batch`, its own threads) - the floor any pipeline pays;
2. grouped encode: `tokenize.encode_documents` (ids plus word grouping);
3. `shards.write_shards` (read, encode, pack, units, mask, statistics, write
   Arrow shards, manifest) per strategy, with --workers 1 (and N if asked).

Prints tokens per second of each and the ratio mask / bare encode (target >= 0.5).

    python scripts/bench_mask.py CORPUS... [-t tokenizer.json] [--strategies token,word,span] \
        [--workers 2]
    python scripts/bench_mask.py --quick     # one run of each instead of the best of two

Without CORPUS it uses the bundled sample corpus (`maskprep demo --where`);
without -t it trains a WordPiece tokenizer of --vocab-size tokens (8,000) on the
corpus first (not timed).
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
import time
from pathlib import Path

from maskprep import MaskingConfig, TrainConfig, encode_documents, load_tokenizer, train_tokenizer
from maskprep.corpus import CorpusOptions, iter_batches, iter_corpus, plan_tasks, resolve_inputs
from maskprep.execute import Executor
from maskprep.pipeline import sample_corpus_dir
from maskprep.shards import ShardConfig, write_shards
from maskprep.tokenizer import save_tokenizer


def bare_encode(info, files, options) -> tuple[int, float]:
    t0 = time.perf_counter()
    tokens = 0
    for task in plan_tasks(files, options):
        for texts in iter_batches(task, options):
            tokens += sum(
                len(e.ids) for e in info.tokenizer.encode_batch(texts, add_special_tokens=False)
            )
    return tokens, time.perf_counter() - t0


def grouped_encode(info, files, options) -> tuple[int, float]:
    t0 = time.perf_counter()
    tokens = 0
    for task in plan_tasks(files, options):
        for texts in iter_batches(task, options):
            tokens += len(encode_documents(info, texts).ids)
    return tokens, time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument(
        "corpus", nargs="*", help="corpus files or folders (default: the bundled sample corpus)"
    )
    ap.add_argument("-t", "--tokenizer", default=None)
    ap.add_argument(
        "--vocab-size", type=int, default=8000, help="size of the tokenizer trained without -t"
    )
    ap.add_argument("--strategies", default="token,word,span")
    ap.add_argument(
        "--workers", type=int, default=1, help="also time write_shards with this many workers"
    )
    ap.add_argument("--repeat", type=int, default=2, help="take the best of this many runs")
    ap.add_argument("--quick", action="store_true", help="one run of each (same as --repeat 1)")
    args = ap.parse_args()
    if args.quick:
        args.repeat = 1
    if not args.corpus:
        args.corpus = [str(sample_corpus_dir())]

    options = CorpusOptions()
    files = resolve_inputs(args.corpus)
    work = Path(tempfile.mkdtemp(prefix="bench-mask-"))
    try:
        if args.tokenizer is None:
            tok_path = work / "tokenizer.json"
            save_tokenizer(
                train_tokenizer(
                    iter_corpus(args.corpus, options), TrainConfig(vocab_size=args.vocab_size)
                ),
                tok_path,
            )
        else:
            tok_path = Path(args.tokenizer)
        info = load_tokenizer(tok_path)
        grouped_encode(info, files, options)  # warm the word-type cache and the page cache
        # Interleave the measurements over the repeats, so load from other processes hits all alike.
        best: dict[str, float] = {}
        tokens = 0
        runs = [(s, w) for s in args.strategies.split(",") for w in sorted({1, args.workers})]
        for _ in range(args.repeat):
            tokens, t = bare_encode(info, files, options)
            best["bare"] = min(best.get("bare", t), t)
            _, t = grouped_encode(info, files, options)
            best["grouped"] = min(best.get("grouped", t), t)
            for strategy, workers in runs:
                t0 = time.perf_counter()
                write_shards([str(f) for f in files], tokenizer=info, output=work / "out",
                             masking=MaskingConfig(strategy=strategy), shards=ShardConfig(),
                             executor=Executor(workers=workers, quiet=True), overwrite=True)
                t = time.perf_counter() - t0
                key = f"{strategy}/{workers}"
                best[key] = min(best.get(key, t), t)
        print(
            f"corpus: {', '.join(map(str, files))}: {tokens:,} tokens, best of {args.repeat} runs"
        )
        print(
            f"bare encode (Tokenizer.encode_batch)   {tokens / best['bare'] / 1e6:6.2f} M tokens/s"
        )
        print(
            f"grouped encode (encode_documents)      {tokens / best['grouped'] / 1e6:6.2f} M "
            "tokens/s"
        )
        for strategy, workers in runs:
            t = best[f"{strategy}/{workers}"]
            print(
                f"mask --strategy {strategy:5s} --workers {workers}   {tokens / t / 1e6:6.2f} M "
                "tokens/s  "
                f"= {best['bare'] / t:.2f}x bare encode, {best['grouped'] / t:.2f}x grouped encode"
            )
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
