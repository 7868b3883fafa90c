"""Tests for the masking units (maskprep.masking.strategies) and the sampler
(maskprep.masking.sampler)."""

from __future__ import annotations

import itertools
import math
from collections import Counter

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from maskprep.errors import MaskprepError
from maskprep.masking.sampler import (
    MaskingConfig, MixPer, Strategy, mask_batch, pmi_word_starts, select_targets, span_lengths,
    span_units, span_word_starts, strategy_units, token_units, units_from_word_starts,
    word_starts_from_units, word_units,
)
from maskprep.masking.strategies import (
    GOLDEN, TAG_MIX, TAG_MIX_UNIT, TAG_PRIORITY, TAG_RANDOM, UnitTable, absorb, document_breaks,
)

MASK = 3
M64 = (1 << 64) - 1


# ----------------------------------------------------------------- plain-Python reference

def ref_mix64(z: int) -> int:
    """splitmix64 finaliser, written out in Python ints."""
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
    return z ^ (z >> 31)


def ref_draw(seed: int, copy: int, tag: int, seq: int, pos: int) -> int:
    h = 0
    for x in (seed, copy, tag, seq, pos):
        h = ref_mix64(((h ^ x) + GOLDEN) & M64)
    return h


def ref_uniform(h: int) -> float:
    return (h >> 11) / 2.0**53


def ref_mask(ids, units, seq_ids, *, seed, copy, config, mask_id, random_ids):
    """Obviously-correct sequential version of the documented sampler."""
    out, labels = [], []
    m0, m1, _ = config.mix
    for row_ids, row_units, seq in zip(ids.tolist(), units.tolist(), seq_ids.tolist()):
        lengths = Counter(u for u in row_units if u >= 0)
        maskable = sum(lengths.values())
        remaining = math.floor(config.rate * maskable + 0.5)
        n_units = max(row_units, default=-1) + 1
        order = sorted(
            range(n_units), key=lambda u: (ref_draw(seed, copy, TAG_PRIORITY, seq, u) >> 24, u)
        )
        taken = set()
        for u in order:
            if lengths[u] <= remaining:
                taken.add(u)
                remaining -= lengths[u]
        row_out, row_lab = list(row_ids), [-100] * len(row_ids)
        for t, u in enumerate(row_units):
            if u < 0 or u not in taken:
                continue
            row_lab[t] = row_ids[t]
            if config.mix_per is MixPer.UNIT:
                r = ref_uniform(ref_draw(seed, copy, TAG_MIX_UNIT, seq, u))
            else:
                r = ref_uniform(ref_draw(seed, copy, TAG_MIX, seq, t))
            if r < m0:
                row_out[t] = mask_id
            elif r < m0 + m1:
                row_out[t] = int(
                    random_ids[ref_draw(seed, copy, TAG_RANDOM, seq, t) % len(random_ids)]
                )
        out.append(row_out)
        labels.append(row_lab)
    return np.array(out, dtype=np.int32).reshape(ids.shape), np.array(
        labels, dtype=np.int32
    ).reshape(ids.shape)


def test_hash_is_splitmix64():
    # Source: splitmix64 outputs from state 0: 0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4,
    # 0x06c45d188009454f (from memory); absorb(h, 0) = one splitmix64 step from state h.
    got = [int(absorb(h, np.array([0], np.uint64))[0]) for h in (0, GOLDEN, 2 * GOLDEN & M64)]
    assert got == [0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F]
    assert [ref_mix64((k * GOLDEN) & M64) for k in (1, 2, 3)] == got


# ----------------------------------------------------------------- random batches for properties

MIXES = [(0.8, 0.1, 0.1), (1.0, 0.0, 0.0), (0.0, 0.0, 1.0), (0.0, 1.0, 0.0), (0.5, 0.25, 0.25)]


@st.composite
def unit_batches(draw):
    B = draw(st.integers(1, 4))
    L = draw(st.integers(1, 24))
    special = np.array(
        draw(st.lists(st.lists(st.booleans(), min_size=L, max_size=L), min_size=B, max_size=B))
    )
    new = np.array(
        draw(st.lists(st.lists(st.booleans(), min_size=L, max_size=L), min_size=B, max_size=B))
    )
    first = np.cumsum(~special, axis=1) == 1
    units = (np.cumsum((new | first) & ~special, axis=1) - 1).astype(np.int32)
    units[special] = -1
    ids = np.array(draw(st.lists(st.lists(st.integers(10, 60), min_size=L, max_size=L),
                                 min_size=B, max_size=B)), dtype=np.int32)
    seq = np.array(
        draw(st.lists(st.integers(0, M64), min_size=B, max_size=B, unique=True)), dtype=np.uint64
    )
    config = MaskingConfig(rate=draw(st.floats(0.01, 0.99)), mix=draw(st.sampled_from(MIXES)),
                           mix_per=draw(st.sampled_from(list(MixPer))))
    return dict(ids=ids, units=units, seq=seq, seed=draw(st.integers(0, M64)),
                copy=draw(st.integers(0, 3)), config=config)


RANDOM_IDS = np.arange(100, 140, dtype=np.int32)


def run(b, ids=None, units=None, seq=None):
    return mask_batch(b["ids"] if ids is None else ids, b["units"] if units is None else units,
                      sequence_ids=b["seq"] if seq is None else seq, seed=b["seed"], copy=b["copy"],
                      config=b["config"], mask_token_id=MASK, random_token_ids=RANDOM_IDS)


@settings(max_examples=300, deadline=None)
@given(unit_batches())
def test_sampler_invariants_and_reference(b):
    ids, units = b["ids"], b["units"]
    masked, labels = run(b)
    target = labels != -100
    maskable = units >= 0
    budget = np.floor(b["config"].rate * maskable.sum(axis=1) + 0.5)
    assert np.all(target.sum(axis=1) <= budget)  # budget never exceeded
    assert not np.any(target & ~maskable)  # specials never targets
    assert np.array_equal(masked[~maskable], ids[~maskable])  # specials never changed
    assert np.array_equal(labels[target], ids[target])  # labels = originals at targets
    assert np.array_equal(masked[~target], ids[~target])  # non-targets unchanged
    for r in range(ids.shape[0]):  # taken units all or nothing
        for u in np.unique(units[r][units[r] >= 0]):
            assert len(set(target[r][units[r] == u])) == 1
    ref_ids, ref_labels = ref_mask(ids, units, b["seq"], seed=b["seed"], copy=b["copy"],
                                   config=b["config"], mask_id=MASK, random_ids=RANDOM_IDS)
    assert np.array_equal(masked, ref_ids)
    assert np.array_equal(labels, ref_labels)


@settings(max_examples=150, deadline=None)
@given(unit_batches())
def test_sampler_independent_of_batch(b):
    masked, labels = run(b)
    B, L = b["ids"].shape
    for r in range(B):  # each sequence alone
        one = run(b, ids=b["ids"][r:r + 1], units=b["units"][r:r + 1], seq=b["seq"][r:r + 1])
        assert np.array_equal(one[0][0], masked[r]) and np.array_equal(one[1][0], labels[r])
    # reversed batch, with an extra sequence of many units and padding columns
    pad = 5
    ids2 = np.concatenate([b["ids"][::-1], np.full((B, pad), 0, np.int32)], axis=1)
    units2 = np.concatenate([b["units"][::-1], np.full((B, pad), -1, np.int32)], axis=1)
    extra_units = np.arange(L + pad, dtype=np.int32)[None, :]
    ids2 = np.concatenate([ids2, np.full((1, L + pad), 20, np.int32)])
    units2 = np.concatenate([units2, extra_units])
    seq2 = np.concatenate([b["seq"][::-1], np.array([12345], np.uint64)])
    if 12345 in b["seq"].tolist():
        return
    m2, l2 = run(b, ids=ids2, units=units2, seq=seq2)
    assert np.array_equal(m2[:B, :L][::-1], masked) and np.array_equal(l2[:B, :L][::-1], labels)
    assert np.all(l2[:B, L:] == -100)


def test_seed_and_copy_change_the_masks():
    units = np.arange(100, dtype=np.int32)[None, :].repeat(4, axis=0)
    seq = np.arange(4, dtype=np.uint64)
    a = select_targets(units, sequence_ids=seq, seed=1, copy=0)
    assert not np.array_equal(a, select_targets(units, sequence_ids=seq, seed=1, copy=1))
    assert not np.array_equal(a, select_targets(units, sequence_ids=seq, seed=2, copy=0))
    assert not np.array_equal(a[0], a[1])  # different sequence ids, different masks
    assert np.array_equal(a, select_targets(units, sequence_ids=seq, seed=1, copy=0))


def test_greedy_skips_units_that_do_not_fit():
    # one sequence of 20 maskable tokens: a 19-token unit and a 1-token unit; budget 3.
    units = np.array([[0] * 19 + [1]], dtype=np.int32)
    got = select_targets(units, sequence_ids=np.array([0], np.uint64), seed=0, rate=0.15)
    assert got[0].tolist() == [False] * 19 + [True]


# ----------------------------------------------------------------- realistic random batches

def text_like_batch(rng, B, L=128):
    """Packed sequences: [CLS] ... [SEP] (a document break in some rows), padded rows,
    words of 1-3 tokens, Zipf word keys, 12% punctuation words."""
    special = np.zeros((B, L), bool)
    special[:, 0] = special[:, -1] = True
    rows = np.arange(B)
    brk = rng.random(B) < 0.4
    special[rows[brk], rng.integers(10, L - 10, size=brk.sum())] = True
    pad = (rng.random(B) < 0.2)[:, None] & (
        np.arange(L)[None, :] > rng.integers(40, L, size=B)[:, None]
    )
    special |= pad
    new = (rng.random((B, L)) < 0.7) & ~special
    new[:, 1:] |= ~special[:, 1:] & special[:, :-1]
    word_ids = (np.cumsum(new, axis=1) - 1).astype(np.int32)
    word_ids[special] = -1
    Lw = int(word_ids.max()) + 1
    keys = rng.zipf(1.3, size=(B, Lw)).clip(max=5000).astype(np.uint64)
    kinds = (rng.random((B, Lw)) < 0.12).astype(np.int8)
    n_words = word_ids.max(axis=1) + 1
    outside = np.arange(Lw)[None, :] >= n_words[:, None]
    keys[outside], kinds[outside] = 0, -1
    ids = rng.integers(1000, 30000, size=(B, L), dtype=np.int32)
    ids[special] = 2
    return dict(ids=ids, special=special, word_ids=word_ids, keys=keys, kinds=kinds,
                seq=rng.integers(0, 2**63, size=B).astype(np.uint64))


def vocab_from(rng, keys, kinds, size):
    B, Lw = keys.shape
    out = {}
    for n in (2, 3, 4):
        b = rng.integers(0, B, size=4 * size)
        j = rng.integers(0, Lw - n, size=4 * size)
        win = j[:, None] + np.arange(n)
        ok = np.all(kinds[b[:, None], win] == 0, axis=1)
        grams = np.unique(keys[b[ok][:, None], win[ok]], axis=0)[:size]
        out[n] = (grams, rng.uniform(-1.0, 6.0, size=len(grams)))
    return out


@pytest.fixture(scope="module")
def big():
    rng = np.random.default_rng(2019)
    data = text_like_batch(rng, 2500)
    data["vocab"] = UnitTable.from_by_length(vocab_from(rng, data["keys"], data["kinds"], 3000))
    return data


RANDOM_BIG = np.arange(1000, 30000, dtype=np.int32)


def units_for(data, config, copy=0):
    return strategy_units(
        data["special"],
        data["word_ids"],
        config=config,
        sequence_ids=data["seq"],
        seed=7,
        copy=copy,
        word_keys=data["keys"],
        word_kinds=data["kinds"],
        units=data["vocab"],
    )


def mask_big(data, config, units):
    return mask_batch(data["ids"], units, sequence_ids=data["seq"], seed=7, config=config,
                      mask_token_id=MASK, random_token_ids=RANDOM_BIG)


@pytest.mark.parametrize("mix_per", list(MixPer))
@pytest.mark.parametrize("strategy", list(Strategy))
def test_published_rate_and_mix(big, strategy, mix_per):
    config = MaskingConfig(strategy=strategy, mix_per=mix_per)
    units = units_for(big, config)
    masked, labels = mask_big(big, config, units)
    target = labels != -100
    # Source: Devlin et al. 2019 - 15% of tokens are targets; of those 80% [MASK],
    # 10% a random token, 10% unchanged.
    assert abs(target.sum() / (~big["special"]).sum() - 0.15) < 0.005
    b, t = np.nonzero(target)
    is_mask = masked[b, t] == MASK
    unchanged = masked[b, t] == big["ids"][b, t]
    is_random = ~is_mask & ~unchanged
    assert np.all(np.isin(masked[b, t][is_random], RANDOM_BIG))
    if mix_per is MixPer.UNIT:  # one draw per unit: measure the mix over taken units
        _, first = np.unique(
            b.astype(np.int64) * (units.max() + 1) + units[b, t], return_index=True
        )
        is_mask, unchanged, is_random = is_mask[first], unchanged[first], is_random[first]
    assert abs(is_mask.mean() - 0.8) < 0.01
    assert abs(is_random.mean() - 0.1) < 0.01
    assert abs(unchanged.mean() - 0.1) < 0.01


def test_mix_per_unit_is_uniform_within_units(big):
    config = MaskingConfig(strategy=Strategy.SPAN, mix_per=MixPer.UNIT, mix=(0.5, 0.0, 0.5))
    units = units_for(big, config)
    masked, labels = mask_big(big, config, units)
    target = labels != -100
    b, t = np.nonzero(target)
    key = b.astype(np.int64) * 1000 + units[b, t]
    is_mask = masked[b, t] == MASK
    per_unit_min = np.full(key.max() + 1, True)
    per_unit_max = np.full(key.max() + 1, False)
    np.logical_and.at(per_unit_min, key, is_mask)
    np.logical_or.at(per_unit_max, key, is_mask)
    assert np.array_equal(per_unit_min[key], per_unit_max[key])
    assert 0.3 < is_mask.mean() < 0.7


def leakage(data, target):
    """Share of target tokens whose word has a non-target token."""
    w = data["word_ids"]
    b, t = np.nonzero(w >= 0)
    key = b.astype(np.int64) * (w.max() + 1) + w[b, t]
    visible = np.zeros(key.max() + 1, bool)
    np.logical_or.at(visible, key, ~target[b, t])
    hit = target[b, t]
    return visible[key[hit]].mean()


def test_word_never_partly_masked_token_does(big):
    # Source: common practice (whole-word masking): with word units no word is partly masked.
    for strategy in (Strategy.WORD, Strategy.SPAN, Strategy.PMI):
        config = MaskingConfig(strategy=strategy)
        _, labels = mask_big(big, config, units_for(big, config))
        assert leakage(big, labels != -100) == 0.0
    config = MaskingConfig(strategy=Strategy.TOKEN)
    _, labels = mask_big(big, config, units_for(big, config))
    assert leakage(big, labels != -100) > 0.1


def test_pmi_units_masked_all_or_nothing(big):
    config = MaskingConfig(strategy=Strategy.PMI)
    starts = pmi_word_starts(
        big["special"], big["word_ids"], big["keys"], big["kinds"], units=big["vocab"]
    )
    unit_of_word = np.cumsum(starts, axis=1) - 1
    units = units_from_word_starts(big["word_ids"], starts)
    assert np.array_equal(units, units_for(big, config))
    _, labels = mask_big(big, config, units)
    target = labels != -100
    words_per_unit = np.zeros((units.shape[0], units.max() + 1), np.int64)
    real = big["kinds"] >= 0
    r, w = np.nonzero(real)
    np.add.at(words_per_unit, (r, unit_of_word[r, w]), 1)
    multi = np.take_along_axis(words_per_unit, np.maximum(units, 0), axis=1) > 1
    multi &= units >= 0
    assert multi.sum() > 1000  # the vocabulary is actually used
    b, t = np.nonzero(multi)
    key = b.astype(np.int64) * (units.max() + 1) + units[b, t]
    any_t = np.zeros(key.max() + 1, bool)
    all_t = np.ones(key.max() + 1, bool)
    np.logical_or.at(any_t, key, target[b, t])
    np.logical_and.at(all_t, key, target[b, t])
    assert np.array_equal(any_t[key], all_t[key])
    assert any_t.sum() > 100
    assert np.array_equal(word_starts_from_units(units, big["word_ids"]), starts & real)


# ----------------------------------------------------------------- span

def test_span_length_mean_published():
    lens = span_lengths(np.arange(2000, dtype=np.uint64), 500, seed=3, span_p=0.2, span_max=10)
    assert lens.min() == 1 and lens.max() == 10
    # Source: Joshi et al. 2020 (SpanBERT) - geometric p = 0.2 clipped at 10 words, mean 3.8.
    assert abs(lens.mean() - 3.8) < 0.05
    k = np.arange(1, 11)
    pk = 0.2 * 0.8 ** (k - 1)
    freq = np.bincount(lens.ravel(), minlength=11)[1:] / lens.size
    assert np.allclose(freq, pk / pk.sum(), atol=0.003)


def test_span_units_are_word_runs_cut_at_documents(big):
    starts = span_word_starts(big["special"], big["word_ids"], sequence_ids=big["seq"], seed=1)
    brk = document_breaks(big["special"], big["word_ids"], starts.shape[1])
    assert np.all(starts[brk]) and np.all(starts[:, 0])
    units = span_units(big["special"], big["word_ids"], sequence_ids=big["seq"], seed=1)
    assert np.array_equal(
        word_starts_from_units(units, big["word_ids"]), starts & (big["kinds"] >= 0)
    )
    # runs of at most span_max words; the run of words between two starts is one unit
    real = big["kinds"] >= 0
    run_words = np.diff(
        np.flatnonzero(
            np.concatenate([starts | ~real, np.ones((len(starts), 1), bool)], axis=1).ravel()
        )
    )
    assert run_words.max() <= 10
    units_p1 = span_units(
        big["special"], big["word_ids"], sequence_ids=big["seq"], seed=1, span_p=1.0
    )
    assert np.array_equal(units_p1, word_units(big["special"], big["word_ids"]))


# ----------------------------------------------------------------- pmi DP against brute force

@st.composite
def pmi_cases(draw):
    B = draw(st.integers(1, 3))
    rows = []
    for _ in range(B):
        n_words = draw(st.integers(1, 7))
        toks = draw(st.lists(st.integers(1, 2), min_size=n_words, max_size=n_words))
        brk_at = draw(st.integers(0, n_words))  # a [SEP] before word brk_at (none if 0)
        keys = draw(st.lists(st.integers(1, 3), min_size=n_words, max_size=n_words))
        kinds = draw(st.lists(st.sampled_from([0, 0, 0, 1]), min_size=n_words, max_size=n_words))
        rows.append((toks, brk_at, keys, kinds))
    # dense random vocabulary over the 3-key alphabet, with repeated score values for ties
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    density = draw(st.sampled_from([0.1, 0.3, 0.6]))
    vocab = {}
    for n in (2, 3, 4):
        grams = np.array(list(itertools.product([1, 2, 3], repeat=n)), np.uint64)
        grams = grams[rng.random(len(grams)) < density]
        if len(grams):
            vocab[n] = (grams, rng.choice([-1.0, 0.0, 0.5, 1.0, 1.5, 2.0, 3.25], size=len(grams)))
    return rows, vocab


def build_pmi_batch(rows):
    L = max(sum(t) + 3 for t, *_ in rows)
    Lw = max(len(t) for t, *_ in rows)
    B = len(rows)
    special = np.ones((B, L), bool)
    word_ids = np.full((B, L), -1, np.int32)
    keys = np.zeros((B, Lw), np.uint64)
    kinds = np.full((B, Lw), -1, np.int8)
    for r, (toks, brk_at, k, kd) in enumerate(rows):
        pos = 1
        for w, n_tok in enumerate(toks):
            if w == brk_at and w > 0:
                pos += 1  # [SEP] between documents
            special[r, pos:pos + n_tok] = False
            word_ids[r, pos:pos + n_tok] = w
            pos += n_tok
        keys[r, :len(k)] = k
        kinds[r, :len(kd)] = kd
    return special, word_ids, keys, kinds


def brute_best(keys, kinds, brk_at, table):
    W = len(keys)
    best = 0.0
    for cuts in itertools.product([False, True], repeat=max(W - 1, 0)):
        bounds = [0] + [i + 1 for i, c in enumerate(cuts) if c] + [W]
        total, ok = 0.0, True
        for a, b in zip(bounds, bounds[1:]):
            if b - a == 1:
                continue
            s = table.get(tuple(keys[a:b]), 0.0)
            if s <= 0 or any(kinds[a:b]) or (a < brk_at < b):
                ok = False
                break
            total += s
        if ok:
            best = max(best, total)
    return best


@settings(max_examples=300, deadline=None)
@given(pmi_cases())
def test_pmi_dp_equals_brute_force(case):
    rows, vocab = case
    table = {
        tuple(int(x) for x in g): float(s) for n, (gs, ss) in vocab.items() for g, s in zip(gs, ss)
    }
    special, word_ids, keys, kinds = build_pmi_batch(rows)
    starts = pmi_word_starts(special, word_ids, keys, kinds, units=vocab)
    for r, (toks, brk_at, k, kd) in enumerate(rows):
        W = len(toks)
        bounds = [i for i in range(W) if starts[r, i]] + [W]
        total = 0.0
        for a, b in zip(bounds, bounds[1:]):
            if b - a > 1:  # every chosen multi-word unit is a valid vocabulary candidate
                assert table.get(tuple(k[a:b]), 0.0) > 0 and not any(kd[a:b]) and not a < brk_at < b
                total += table[tuple(k[a:b])]
        assert total == pytest.approx(brute_best(k, kd, brk_at, table), rel=1e-12, abs=1e-12)
    # each row alone gives the same segmentation
    for r in range(len(rows)):
        alone = pmi_word_starts(
            special[r : r + 1], word_ids[r : r + 1], keys[r : r + 1], kinds[r : r + 1], units=vocab
        )
        assert np.array_equal(alone[0], starts[r])


def _pmi_rows(keys, vocab, kinds=None):
    W = len(keys)
    special = np.zeros((1, W), bool)
    word_ids = np.arange(W, dtype=np.int32)[None, :]
    kinds = np.zeros((1, W), np.int8) if kinds is None else np.array([kinds], np.int8)
    return pmi_word_starts(special, word_ids, np.array([keys], np.uint64), kinds, units=vocab)[
        0
    ].tolist()


def g(*rows):
    return np.array(rows, np.uint64)


def test_pmi_is_not_greedy_and_breaks_ties_to_shorter():
    # a b c with "a b" = 1, "b c" = 3: the best total takes "b c", a left-to-right match would not.
    assert _pmi_rows([1, 2, 3], {2: (g([1, 2], [2, 3]), np.array([1.0, 3.0]))}) == [
        True,
        True,
        False,
    ]
    # a short n-gram must not block a better longer one
    assert _pmi_rows(
        [1, 2, 3], {2: (g([2, 3]), np.array([1.0])), 3: (g([1, 2, 3]), np.array([5.0]))}
    ) == [True, False, False]
    # equal scores: the documented tie rule gives [a b][c]
    assert _pmi_rows([1, 2, 3], {2: (g([1, 2], [2, 3]), np.array([1.0, 1.0]))}) == [
        True,
        False,
        True,
    ]
    # "a b c" = 2 ties "a b" + nothing: the shorter unit at the end wins
    assert _pmi_rows(
        [1, 2, 3], {2: (g([1, 2]), np.array([2.0])), 3: (g([1, 2, 3]), np.array([2.0]))}
    ) == [True, False, True]
    # non-positive scores are never used; punctuation blocks an n-gram
    assert _pmi_rows([1, 2], {2: (g([1, 2]), np.array([0.0]))}) == [True, True]
    assert _pmi_rows([1, 2], {2: (g([1, 2]), np.array([5.0]))}, kinds=[0, 1]) == [True, True]


def test_duplicate_ngram_rejected():
    with pytest.raises(MaskprepError, match="lists the same 2-gram twice"):
        UnitTable.from_by_length({2: (g([1, 2], [1, 2]), np.array([1.0, 2.0]))})


def test_token_and_word_units():
    special = np.array([[True, False, False, False, True, False, True]])
    word_ids = np.array([[-1, 0, 0, 1, -1, 2, -1]], np.int32)
    assert token_units(special).tolist() == [[-1, 0, 1, 2, -1, 3, -1]]
    assert word_units(special, word_ids).tolist() == [[-1, 0, 0, 1, -1, 2, -1]]
    assert document_breaks(special, word_ids, 3).tolist() == [[True, False, True]]
    with pytest.raises(ValueError):
        word_units(special, np.array([[0, 0, 0, 1, -1, 2, -1]], np.int32))


# ----------------------------------------------------------------- bad options

@pytest.mark.parametrize(
    "kwargs, message",
    [
        (
            dict(rate=0.0),
            "--rate must be a number strictly between 0 and 1, got 0.0; pass e.g. --rate 0.15",
        ),
        (
            dict(rate=1.0),
            "--rate must be a number strictly between 0 and 1, got 1.0; pass e.g. --rate 0.15",
        ),
        (
            dict(rate=-0.1),
            "--rate must be a number strictly between 0 and 1, got -0.1; pass e.g. --rate 0.15",
        ),
        (
            dict(mix=(0.8, 0.1)),
            "--mix must be three non-negative numbers (mask, random, keep) summing to 1, "
            "got (0.8, 0.1); pass e.g. --mix 0.8,0.1,0.1",
        ),
        (
            dict(mix=(0.9, 0.2, -0.1)),
            "--mix must be three non-negative numbers (mask, random, keep) summing "
            "to 1, got (0.9, 0.2, -0.1); pass e.g. --mix 0.8,0.1,0.1",
        ),
        (
            dict(mix="0.8,0.1,0.2"),
            "--mix must be three non-negative numbers (mask, random, keep) summing to 1, "
            "got '0.8,0.1,0.2'; pass e.g. --mix 0.8,0.1,0.1",
        ),
        (
            dict(mix="a,b,c"),
            "--mix must be three non-negative numbers (mask, random, keep) summing to 1, "
            "got 'a,b,c'; pass e.g. --mix 0.8,0.1,0.1",
        ),
        (
            dict(span_p=0.0),
            "--span-p must be a probability in (0, 1], got 0.0; pass e.g. --span-p 0.2",
        ),
        (
            dict(span_p=1.5),
            "--span-p must be a probability in (0, 1], got 1.5; pass e.g. --span-p 0.2",
        ),
        (
            dict(span_max=0),
            "--span-max must be a whole number of words >= 1, got 0; pass e.g. --span-max 10",
        ),
        (
            dict(span_max=2.5),
            "--span-max must be a whole number of words >= 1, got 2.5; pass e.g. --span-max 10",
        ),
        (dict(strategy="bert"), "--strategy must be one of token, word, span, pmi, got 'bert'"),
        (dict(mix_per="word"), "--mix-per must be one of token, unit, got 'word'"),
    ],
)
def test_bad_options(kwargs, message):
    with pytest.raises(MaskprepError) as err:
        MaskingConfig(**kwargs)
    assert str(err.value) == message


def test_good_options_normalised():
    c = MaskingConfig(strategy="pmi", mix="0.8,0.1,0.1", mix_per="unit", span_p=1, rate=0.2)
    assert (c.strategy, c.mix, c.mix_per, c.span_p) == (
        Strategy.PMI,
        (0.8, 0.1, 0.1),
        MixPer.UNIT,
        1.0,
    )


def test_bad_call_arguments():
    ids = np.array([[5, 6]], np.int32)
    units = np.array([[0, 1]], np.int32)
    seq = np.array([0], np.uint64)
    with pytest.raises(MaskprepError) as err:
        mask_batch(ids, units, sequence_ids=seq, seed=0, config=MaskingConfig(), mask_token_id=3,
                   random_token_ids=np.array([], np.int32))
    assert str(err.value) == ("random_token_ids is empty but --mix has a random share: pass the "
                              "tokenizer's non-special token ids, or a mix with random share 0")
    with pytest.raises(MaskprepError) as err:
        mask_batch(ids, units, sequence_ids=seq, seed=-1, config=MaskingConfig(), mask_token_id=3,
                   random_token_ids=RANDOM_IDS)
    assert str(err.value) == "--seed must be a whole number from 0 to 2**64-1, got -1; pass e.g. 0"
    with pytest.raises(MaskprepError) as err:
        strategy_units(np.zeros((1, 2), bool), np.array([[0, 1]], np.int32),
                       config=MaskingConfig(strategy="pmi"), sequence_ids=seq, seed=0)
    assert str(err.value) == ("--strategy pmi needs a unit vocabulary: pass --units units.parquet "
                              "(made by `maskprep units`)")
    # no random share: an empty list of random ids is fine
    out, _ = mask_batch(
        ids,
        units,
        sequence_ids=seq,
        seed=0,
        config=MaskingConfig(mix=(1, 0, 0), rate=0.5),
        mask_token_id=3,
        random_token_ids=[],
    )
    assert (out == 3).sum() == 1
