"""Throughput of masking alone (units + sampler + replacement mix), per strategy.

Synthetic packed batch (numpy random data; throughput only, not a quality
check): seq_len 128, [CLS] first, [SEP] at document ends, some padded rows,
words of 1-4 tokens, Zipf-distributed word keys, 12% punctuation words, and a
unit vocabulary of n-grams (n = 2..5) drawn from the batch's own windows.

    python scripts/bench_masking.py [--tokens 4000000] [--batch 4096] [--units 50000]
    python scripts/bench_masking.py --quick     # 1M tokens, one timing per strategy

Prints tokens per second per strategy on one core (numpy is single-threaded here).
"""

from __future__ import annotations

import argparse
import sys
import time

import numpy as np

from maskprep.masking import MaskingConfig, Strategy, UnitTable, mask_batch, strategy_units

CLS, SEP, PAD, MASK = 1, 2, 0, 3


def synthetic_batch(rng: np.random.Generator, n_seq: int, seq_len: int) -> dict[str, np.ndarray]:
    B, L = n_seq, seq_len
    special = np.zeros((B, L), dtype=bool)
    ids = rng.integers(1000, 30000, size=(B, L), dtype=np.int32)
    special[:, 0] = True
    ids[:, 0] = CLS
    # a document ends at a random position in a third of the rows, the rest run to the end
    end = np.where(rng.random(B) < 0.3, rng.integers(20, L - 20, size=B), L - 1)
    rows = np.arange(B)
    special[rows, end] = True
    ids[rows, end] = SEP
    special[:, -1] = True
    ids[:, -1] = SEP
    # a tenth of the rows are padded after a final [SEP]
    padded = rng.random(B) < 0.1
    pad_from = rng.integers(L // 2, L - 1, size=B)
    col = np.arange(L)
    pad = padded[:, None] & (col[None, :] > pad_from[:, None])
    special |= pad
    ids[pad] = PAD
    ids[padded, pad_from[padded]] = SEP
    special[padded, pad_from[padded]] = True
    new_word = (rng.random((B, L)) < 0.75) & ~special
    new_word[:, 1:] |= special[:, :-1] & ~special[:, 1:]
    new_word[:, 1] |= ~special[:, 1]
    word_ids = (np.cumsum(new_word, axis=1) - 1).astype(np.int32)
    word_ids[special] = -1
    Lw = int(word_ids.max()) + 1
    n_words = word_ids.max(axis=1) + 1
    types = np.minimum(rng.zipf(1.2, size=(B, Lw)), 50_000)
    type_keys = rng.integers(1, 2**63, size=50_001, dtype=np.int64).astype(np.uint64)
    keys = type_keys[types]
    kinds = np.where(rng.random((B, Lw)) < 0.12, 1, 0).astype(np.int8)
    outside = np.arange(Lw)[None, :] >= n_words[:, None]
    keys[outside] = 0
    kinds[outside] = -1
    return dict(input_ids=ids, special=special, word_ids=word_ids, word_keys=keys,
                word_kinds=kinds, sequence_ids=np.arange(B, dtype=np.uint64))


def unit_vocabulary(rng: np.random.Generator, keys: np.ndarray, kinds: np.ndarray,
                    size: int) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    B, Lw = keys.shape
    out = {}
    for n, share in ((2, 0.6), (3, 0.25), (4, 0.1), (5, 0.05)):
        want = int(size * share)
        b = rng.integers(0, B, size=8 * want)
        j = rng.integers(0, Lw - n, size=8 * want)
        win = j[:, None] + np.arange(n)
        ok = np.all(kinds[b[:, None], win] == 0, axis=1)
        grams = np.unique(keys[b[ok][:, None], win[ok]], axis=0)[:want]
        scores = rng.uniform(-1.0, 8.0, size=len(grams))
        out[n] = (grams, scores)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tokens", type=int, default=4_000_000)
    ap.add_argument("--seq-len", type=int, default=128)
    ap.add_argument("--batch", type=int, default=4096, help="sequences per mask_batch call")
    ap.add_argument("--units", type=int, default=50_000, help="n-grams in the unit vocabulary")
    ap.add_argument("--repeat", type=int, default=3, help="best of N timings")
    ap.add_argument("--quick", action="store_true",
                    help="1M tokens (unless --tokens is given) and one timing per strategy")
    args = ap.parse_args()
    if args.quick:
        args.repeat = 1
        if "--tokens" not in sys.argv[1:]:
            args.tokens = 1_000_000
    rng = np.random.default_rng(0)
    n_seq = args.tokens // args.seq_len
    data = synthetic_batch(rng, n_seq, args.seq_len)
    vocab = unit_vocabulary(rng, data["word_keys"], data["word_kinds"], args.units)
    t0 = time.perf_counter()
    table = UnitTable.from_by_length(vocab)
    prep = time.perf_counter() - t0
    n_grams = sum(len(s) for _, s in vocab.values())
    random_ids = np.arange(1000, 30000, dtype=np.int32)
    tokens = n_seq * args.seq_len
    print(f"masking benchmark: {n_seq} sequences x {args.seq_len} = {tokens} tokens, "
          f"batches of {args.batch}; unit vocabulary {n_grams} n-grams "
          f"(prepared once in {prep * 1000:.0f} ms)")
    for strategy in Strategy:
        config = MaskingConfig(strategy=strategy)
        best = float("inf")
        targets = 0
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            targets = 0
            for lo in range(0, n_seq, args.batch):
                sl = slice(lo, lo + args.batch)
                units = strategy_units(data["special"][sl], data["word_ids"][sl], config=config,
                                       sequence_ids=data["sequence_ids"][sl], seed=0,
                                       word_keys=data["word_keys"][sl],
                                       word_kinds=data["word_kinds"][sl], units=table)
                _, labels = mask_batch(data["input_ids"][sl], units,
                                       sequence_ids=data["sequence_ids"][sl], seed=0,
                                       config=config, mask_token_id=MASK,
                                       random_token_ids=random_ids)
                targets += int((labels != -100).sum())
            best = min(best, time.perf_counter() - t0)
        maskable = int((~data["special"]).sum())
        print(f"  {strategy.value:<6} {tokens / best / 1e6:6.2f} M tokens/s  "
              f"({best:.2f} s; target rate {targets / maskable:.4f})")


if __name__ == "__main__":
    main()
