#!/usr/bin/env python3
"""Speed of segmenter words (--words zh) against the tokenizer's words, on real Chinese text.

Text: the Debian package fortunes-zh (/usr/share/games/fortunes/chinese, escape codes
stripped, one fortune per line), repeated to the size asked. Prints:

- the segmenters alone in MB/s: rjieba (Rust, the zh extra) and, when installed,
  pure-Python jieba with the same dictionary;
- `count` and `mask --strategy word` with --words zh and with --words tokenizer on the
  same text, tokenizer and options, one worker, in alternating rounds (median), and the
  ratio zh / tokenizer in speed (target >= 0.5x).

    python scripts/bench_words.py [--repeat 4] [--rounds 3] [--lines N] [--quick]
"""

from __future__ import annotations

import argparse
import re
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

FORTUNES = Path("/usr/share/games/fortunes/chinese")


def fortunes() -> list[str]:
    raw = re.sub(
        r"\x1b\[[0-9;]*[A-Za-z]", "", FORTUNES.read_text(encoding="utf-8", errors="replace")
    )
    entries = [
        " ".join(ln.strip() for ln in e.splitlines() if ln.strip()) for e in raw.split("\n%\n")
    ]
    return [e for e in entries if e]


def segmenter_speed(lines: list[str]) -> None:
    text = "\n".join(lines)
    mb = len(text.encode("utf-8")) / 1e6
    import rjieba

    rjieba.cut("预热")
    t = time.perf_counter()
    n = len(rjieba.cut(text))
    dt = time.perf_counter() - t
    print(f"  rjieba {mb / dt:8.2f} MB/s  ({n:,} words in {mb:.1f} MB)")
    try:
        import jieba
    except ImportError:
        print("  jieba (pure Python) not installed: skipped")
        return
    jieba.setLogLevel(60)
    jieba.initialize()
    t = time.perf_counter()
    n = len(jieba.lcut(text))
    dt = time.perf_counter() - t
    print(f"  jieba  {mb / dt:8.2f} MB/s  ({n:,} words, pure Python, same dictionary)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=4, help="copies of the text in the corpus")
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--lines", type=int, default=None, help="use only the first N fortunes")
    ap.add_argument("--quick", action="store_true", help="one copy, one round")
    args = ap.parse_args()
    if args.quick:
        args.repeat, args.rounds = 1, 1
    print("bench_words: --words zh against --words tokenizer")
    if not FORTUNES.is_file():
        print(f"skipped: {FORTUNES} missing (apt-get install fortunes-zh)")
        return
    try:
        import rjieba  # noqa: F401
    except ImportError:
        print("skipped: the zh extra is not installed (pip install 'maskprep[zh]')")
        return
    from maskprep.count import CountConfig, count_ngrams
    from maskprep.execute import Executor
    from maskprep.masking import MaskingConfig
    from maskprep.shards import write_shards
    from maskprep.tokenizer import TrainConfig, WordsConfig, save_tokenizer, train_tokenizer

    lines = fortunes()[: args.lines]
    print("segmenters alone:")
    segmenter_speed(lines)
    work = Path(tempfile.mkdtemp(prefix="bench-words-"))
    try:
        corpus = work / "zh.txt"
        corpus.write_text("\n".join(lines * args.repeat) + "\n", encoding="utf-8")
        mb = corpus.stat().st_size / 1e6
        info = train_tokenizer(
            iter(lines), TrainConfig(model="wordpiece", vocab_size=8000, lowercase=True)
        )
        tok = work / "tokenizer.json"
        save_tokenizer(info, tok)
        ex = Executor(workers=1, quiet=True)
        times: dict[tuple[str, str], list[float]] = {}
        for r in range(args.rounds):
            for words in ("tokenizer", "zh"):
                w = WordsConfig(words)
                t = time.perf_counter()
                count_ngrams(
                    [str(corpus)],
                    tokenizer=str(tok),
                    output=work / f"c-{words}-{r}",
                    config=CountConfig(max_n=3, min_count=2, words=w),
                    executor=ex,
                    quiet=True,
                )
                times.setdefault(("count", words), []).append(time.perf_counter() - t)
                t = time.perf_counter()
                write_shards([str(corpus)], tokenizer=str(tok), output=work / f"m-{words}-{r}",
                             masking=MaskingConfig(strategy="word"), executor=ex, words=w)
                times.setdefault(("mask", words), []).append(time.perf_counter() - t)
        print(f"\ncommands on {mb:.1f} MB of Chinese text (WordPiece 8,000, one worker, median of "
              f"{args.rounds} round{'s' if args.rounds > 1 else ''}):")
        for cmd in ("count", "mask"):
            tt, tz = (
                statistics.median(times[(cmd, "tokenizer")]),
                statistics.median(times[(cmd, "zh")]),
            )
            print(
                f"  {cmd:5s}  --words tokenizer {mb / tt:6.2f} MB/s   --words zh {mb / tz:6.2f} "
                "MB/s   "
                f"ratio {tt / tz:.2f}x (target >= 0.5x)"
            )
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
