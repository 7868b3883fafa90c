#!/usr/bin/env python3
"""All of maskprep's performance figures, in one run.

Runs each benchmark section in turn, in a fresh interpreter so one section's
memory and caches do not colour the next, and prints each section's own
figures and same-run ratios:

  audit    audit vs the bare batch-encode pass over the same files (>= 0.7x)
  count    exact n-gram counting vs a plain Counter (>= 20x), peak RSS within
           --memory + 400 MiB, linear scaling of time per MB
  masking  units + sampler + mix in tokens/s per strategy (>= 2M/s; pmi >= 1M/s)
  mask     `mask` end to end vs the bare batch-encode pass (>= 0.5x)
  workers  --workers 2 vs --workers 1 for count and mask (>= 1.6x on 2 cores),
           and Dask LocalCluster overhead vs the local pool
  encoded  encode, and count / mask / compare on an encoded directory, vs one bare
           encode_batch_fast pass (<= 1.4x; <= 0.4x each; whole run <= 3x), peak memory
  words    --words zh vs --words tokenizer for count and mask on real Chinese text (>= 0.5x),
           and the segmenters alone in MB/s
  loader   ShardLoader (shuffle, world_size 2) vs pyarrow reading the same files (>= 0.8x),
           and its peak heap against the shuffle buffer it states

    python scripts/bench.py [--only audit,masking] [--quick]

Figures depend on the machine; the ratios are what the targets are about.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SECTIONS = {
    "audit": ("bench_audit.py", ["--repeat", "4"], ["--quick"]),
    "count": ("bench_counting.py", [], ["--quick"]),
    "masking": ("bench_masking.py", [], ["--quick"]),
    "mask": ("bench_mask.py", [], ["--quick"]),
    "workers": ("bench_workers.py", [], ["--quick"]),
    "loader": ("bench_loader.py", ["--rounds", "5"], ["--quick"]),
    "words": ("bench_words.py", [], ["--quick"]),
    "encoded": ("bench_encoded.py", ["--flat", "10,200"], ["--quick"]),
}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", default=",".join(SECTIONS), help="comma-separated sections to run")
    ap.add_argument("--quick", action="store_true", help="smaller inputs (figures are noisier)")
    args = ap.parse_args()
    failed = []
    for name in [s.strip() for s in args.only.split(",") if s.strip()]:
        if name not in SECTIONS:
            sys.exit(f"--only: unknown section {name!r}; choose from {', '.join(SECTIONS)}")
        script, full, quick = SECTIONS[name]
        path = HERE / script
        print(f"\n=== {name} ({script}) ===", flush=True)
        if not path.exists():
            print(f"  (missing: {script})")
            failed.append(name)
            continue
        t = time.perf_counter()
        r = subprocess.run([sys.executable, str(path)] + (quick if args.quick else full))
        print(f"  [{name}: {time.perf_counter() - t:.0f} s, exit {r.returncode}]", flush=True)
        if r.returncode != 0:
            failed.append(name)
    if failed:
        sys.exit(f"sections that failed: {', '.join(failed)}")


if __name__ == "__main__":
    main()
