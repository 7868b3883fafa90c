"""Tokens grouped into words, each distinct word identified exactly by its token ids.

`group_tokens` turns a batch's flat token ids and its word starts into an
`EncodedBatch`. A word is identified by its token ids packed base
(vocabulary size + 1) into as many uint64 columns as the longest word of the
batch needs, so no hash can merge two words. Each distinct word of the batch
is looked up once in a `WordTypeCache`, which decodes a word never seen
before in this process to its canonical text and gives its kind and 64-bit
content key. Everything is numpy over the whole batch except one dictionary
lookup per *distinct* word of the batch (not per occurrence).

`group_tokens` also returns the batch's `WordGroups` (its distinct words and
which word is which), so that a caller that numbers word types itself (the
encoded directory) does not have to find them again.

It does not run the tokenizer (see `maskprep.tokenizer.encoding`).
"""

from __future__ import annotations

import hashlib
import itertools
from dataclasses import dataclass
from typing import Callable, Iterator

import numpy as np
import regex

__all__ = [
    "WORD",
    "PUNCT",
    "SPACE",
    "SPECIAL",
    "EncodedBatch",
    "WordType",
    "WordTypeCache",
    "WordGroups",
    "group_tokens",
    "starts_from_word_ids",
    "unique_rows",
]

# Word kinds.
WORD, PUNCT, SPACE, SPECIAL = 0, 1, 2, 3
_PUNCT_RE = regex.compile(r"[\p{P}\p{S}]+")
_JOINED = b"J"  # cache-key prefix of segmenter words (their text is made differently)
CACHE_LIMIT = 4_000_000  # word types kept per process; the cache is cleared past it and refills


@dataclass(frozen=True)
class EncodedBatch:
    """Documents encoded into flat arrays (no special tokens).

    ids          int32  [T]    token ids, all documents concatenated
    word_offsets int64  [W+1]  token offset of each word's first token
    doc_offsets  int64  [D+1]  word offset of each document's first word
    word_keys    uint64 [W]    content key of each word (same text -> same key)
    word_kinds   int8   [W]    WORD, PUNCT, SPACE or SPECIAL
    word_chars   int32  [W]    characters in the word's canonical text
    crossing_tokens  int       tokens that run past the end of their word
                               (0 for tokenizer words)
    """

    ids: np.ndarray
    word_offsets: np.ndarray
    doc_offsets: np.ndarray
    word_keys: np.ndarray
    word_kinds: np.ndarray
    word_chars: np.ndarray
    crossing_tokens: int = 0

    @property
    def num_docs(self) -> int:
        return len(self.doc_offsets) - 1

    @property
    def num_words(self) -> int:
        return len(self.word_offsets) - 1

    @property
    def word_lengths(self) -> np.ndarray:
        """Tokens per word, int64 [W]."""
        return np.diff(self.word_offsets)

    def token_doc_offsets(self) -> np.ndarray:
        """Token offset of each document, int64 [D+1]."""
        return self.word_offsets[self.doc_offsets]


@dataclass(frozen=True)
class WordType:
    key: int
    kind: int
    text: str
    ids: tuple[int, ...]


class WordTypeCache:
    """The word types decoded so far in this process, by exact identity (packed token ids).

    `decode(id_lists, joined=...)` gives canonical texts (the tokenizer's decoder,
    whitespace stripped); `special_ids` are the ids whose one-token words are SPECIAL.
    """

    def __init__(self, vocab_size: int, special_ids: np.ndarray,
                 decode: Callable[..., list[str]]) -> None:
        self.entries: dict[bytes, WordType] = {}
        self.base = vocab_size + 1
        per = 1
        while self.base ** (per + 1) < 2 ** 64:
            per += 1
        self.per_column = per
        self.powers = np.array([self.base ** k for k in range(per)], dtype=np.uint64)
        self.specials = {int(i) for i in special_ids}
        self.decode = decode
        self._singles: dict[bool, _Singles] = {}

    def singles(self, joined: bool) -> "_Singles":
        """The one-token words held, by token id + 1 (the tokenizer's, or a segmenter's)."""
        tab = self._singles.get(joined)
        if tab is None:
            tab = self._singles[joined] = _Singles(self.base)
        return tab

    def __len__(self) -> int:
        return len(self.entries)

    def newest(self, count: int) -> Iterator[WordType]:
        """The `count` word types added last, newest first (one step per type)."""
        return itertools.islice(reversed(self.entries.values()), count)

    def add(self, rows: list[bytes], id_lists: list[list[int]],
            joined: bool = False) -> list[WordType]:
        """Decode new words (cache keys `rows`, token ids `id_lists`) and keep their types."""
        texts = self.decode(id_lists, joined=joined)
        out = []
        for row, ids, canon in zip(rows, id_lists, texts):
            if len(ids) == 1 and int(ids[0]) in self.specials:
                kind = SPECIAL
            elif not canon:
                kind = SPACE
            elif _PUNCT_RE.fullmatch(canon):
                kind = PUNCT
            else:
                kind = WORD
            key = int.from_bytes(
                hashlib.blake2b(canon.encode("utf-8"), digest_size=8).digest(), "little"
            )
            wt = WordType(key, kind, canon, tuple(int(i) for i in ids))
            self.entries[row] = wt
            if len(ids) == 1:
                self.singles(joined).put(int(ids[0]) + 1, wt)
            out.append(wt)
        if len(self.entries) > CACHE_LIMIT:  # bound the cache; it refills as needed
            self.entries.clear()
            self._singles.clear()
        return out


class _Singles:
    """The types of one-token words of a `WordTypeCache`, by token id + 1, as arrays.

    Most words are one token: their types are looked up by indexing instead of by key.
    A word is here exactly when its key is in the cache's `entries`.
    """

    def __init__(self, base: int) -> None:
        self.types: list[WordType | None] = [None] * base
        self.known = np.zeros(base, dtype=bool)
        self.key = np.zeros(base, dtype=np.uint64)
        self.kind = np.zeros(base, dtype=np.int8)
        self.chars = np.zeros(base, dtype=np.int32)

    def put(self, value: int, wt: WordType) -> None:
        self.types[value] = wt
        self.known[value] = True
        self.key[value], self.kind[value], self.chars[value] = wt.key, wt.kind, len(wt.text)


@dataclass(frozen=True)
class WordGroups:
    """The distinct words of one batch, sorted by their packed token ids.

    rows     uint64 (U, C)  packed token ids of each distinct word (zero-padded columns)
    keys     U bytes        the cache key of each (its used columns; prefixed if joined)
    types    U WordType     the word type of each
    first    int64 [U]      a word of the batch holding each distinct word
    inverse  int64 [W]      the distinct word of every word of the batch
    """

    rows: np.ndarray
    keys: list[bytes]
    types: list[WordType]
    first: np.ndarray
    inverse: np.ndarray


def starts_from_word_ids(word_ids: np.ndarray) -> np.ndarray:
    """Which tokens start a word (bool [T]), from the tokenizer's word ids (-1: none).

    A token starts a word where its word id differs from the previous token's;
    a token without a word id (a special token found in the text) is a word of its
    own, and the token after it starts one too.

    >>> starts_from_word_ids(np.array([0, 0, 1, -1, 1])).tolist()
    [True, False, True, True, True]
    """
    T = len(word_ids)
    new_word = np.ones(T, dtype=bool)
    if T > 1:
        new_word[1:] = word_ids[1:] != word_ids[:-1]
        new_word[np.flatnonzero(word_ids[:-1] < 0) + 1] = True
    new_word[word_ids < 0] = True
    return new_word


def group_tokens(cache: WordTypeCache, ids: np.ndarray, starts: np.ndarray,
                 token_doc_offsets: np.ndarray, *,
                 joined: bool = False) -> tuple[EncodedBatch, WordGroups]:
    """Group tokens into words at `starts` (bool [T]; documents' first tokens are added).

    `joined`: words of a segmenter (their canonical text has no whitespace; cached
    apart from the tokenizer's words).
    """
    T = len(ids)
    doc_starts = token_doc_offsets[:-1]
    starts[doc_starts[doc_starts < T]] = True
    word_starts = np.flatnonzero(starts)
    W = len(word_starts)
    word_offsets = np.empty(W + 1, dtype=np.int64)
    word_offsets[:W] = word_starts
    word_offsets[W] = T
    doc_offsets = np.searchsorted(word_starts, token_doc_offsets).astype(np.int64)
    if W == 0:
        empty = np.zeros(0, np.int64)
        batch = EncodedBatch(ids, word_offsets, doc_offsets, np.zeros(0, np.uint64),
                             np.zeros(0, np.int8), np.zeros(0, np.int32))
        return batch, WordGroups(np.zeros((0, 1), np.uint64), [], [], empty, empty)
    lengths = np.diff(word_offsets)
    rows, first, inverse, n1 = _distinct_words(cache, ids, word_offsets, lengths)
    keys = _row_keys(rows, (lengths[first] + cache.per_column - 1) // cache.per_column)
    if joined:
        keys = [_JOINED + k for k in keys]
    U = len(keys)
    singles = cache.singles(joined)
    one = rows[:n1, 0].astype(np.int64)  # the one-token words come first, by id
    known = np.zeros(U, dtype=bool)
    known[:n1] = singles.known[one]
    type_key, type_kind, type_chars = (np.zeros(U, np.uint64), np.zeros(U, np.int8),
                                       np.zeros(U, np.int32))
    type_key[:n1], type_kind[:n1], type_chars[:n1] = (  # read before `add` may clear them
        singles.key[one], singles.kind[one], singles.chars[one])
    entries = cache.entries
    types: list[WordType | None] = [singles.types[v] for v in one.tolist()]
    types += map(entries.get, keys[n1:])
    missing = [i for i, t in enumerate(types) if t is None]
    if missing:
        id_lists = [ids[word_offsets[w]:word_offsets[w + 1]].tolist()
                    for w in first[missing].tolist()]
        for i, t in zip(missing, cache.add([keys[i] for i in missing], id_lists, joined)):
            types[i] = t
    found: list[WordType] = types  # type: ignore[assignment]  # every entry is set now
    rest = np.flatnonzero(~known)  # the types not read from the one-token tables
    if len(rest):
        picked = [found[i] for i in rest.tolist()]
        type_key[rest] = np.fromiter((t.key for t in picked), np.uint64, len(picked))
        type_kind[rest] = np.fromiter((t.kind for t in picked), np.int8, len(picked))
        type_chars[rest] = np.fromiter((len(t.text) for t in picked), np.int32, len(picked))
    batch = EncodedBatch(ids, word_offsets, doc_offsets, type_key[inverse], type_kind[inverse],
                         type_chars[inverse])
    return batch, WordGroups(rows, keys, found, first, inverse)


def _pack(cache: WordTypeCache, ids: np.ndarray, word_offsets: np.ndarray,
          lengths: np.ndarray) -> np.ndarray:
    """The token ids of every word packed base (vocab + 1): uint64 (W, C), zero-padded."""
    W, T, per = len(lengths), len(ids), cache.per_column
    ncols = int((int(lengths.max()) + per - 1) // per)
    pos = np.arange(T, dtype=np.int64) - np.repeat(word_offsets[:-1], lengths)
    one = ids.astype(np.uint64) + np.uint64(1)
    if ncols == 1:  # every word fits one column: one sum per word
        return np.add.reduceat(one * cache.powers[pos], word_offsets[:-1]).reshape(W, 1)
    contrib = one * cache.powers[pos % per]
    flat = np.repeat(np.arange(W, dtype=np.int64) * ncols, lengths) + pos // per
    seg_starts = np.flatnonzero(np.r_[True, flat[1:] != flat[:-1]])
    keys = np.zeros(W * ncols, dtype=np.uint64)
    keys[flat[seg_starts]] = np.add.reduceat(contrib, seg_starts)
    return keys.reshape(W, ncols)


def _distinct_words(cache: WordTypeCache, ids: np.ndarray, word_offsets: np.ndarray,
                    lengths: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """`unique_rows` of the words packed by `_pack`, packing only the words of 2+ tokens.

    One-token words (most words) are found with a table over the vocabulary; their rows
    (id + 1, then zeros) sort before every longer word's, whose first column is at least
    the base. Returns the distinct rows in lexicographic order, for each a word holding it
    (`first`: any occurrence), the distinct row of every word, and how many rows are of one
    token (they come first).
    """
    W = len(lengths)
    one = lengths == 1
    oi = np.flatnonzero(one)
    vals = ids[word_offsets[oi]].astype(np.int64) + 1  # id + 1, below `base`
    present = np.zeros(cache.base, dtype=bool)
    present[vals] = True
    o_rows = np.flatnonzero(present)
    rank = np.cumsum(present) - 1
    where = np.empty(cache.base, dtype=np.int64)
    where[vals] = oi  # some occurrence of each
    n1 = len(o_rows)
    inverse = np.empty(W, dtype=np.int64)
    inverse[oi] = rank[vals]
    if len(oi) == W:
        return o_rows.astype(np.uint64).reshape(n1, 1), where[o_rows], inverse, n1
    ri = np.flatnonzero(~one)
    m_lengths = lengths[ri]
    m_offsets = np.zeros(len(ri) + 1, dtype=np.int64)
    np.cumsum(m_lengths, out=m_offsets[1:])
    packed = _pack(cache, ids[np.repeat(~one, lengths)], m_offsets, m_lengths)
    r_rows, r_first, r_inv = _sorted_distinct(packed)
    rows = np.zeros((n1 + len(r_rows), packed.shape[1]), dtype=np.uint64)
    rows[:n1, 0] = o_rows
    rows[n1:] = r_rows
    inverse[ri] = n1 + r_inv
    return rows, np.concatenate([where[o_rows], ri[r_first]]), inverse, n1


def _sorted_distinct(packed: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """`unique_rows`, sorting the many one-column rows apart from the few long ones."""
    W, C = packed.shape
    long = packed[:, 1:].any(axis=1) if C > 1 else None
    if long is None or long.all() or not long.any():
        return unique_rows(packed)
    li, si = np.flatnonzero(long), np.flatnonzero(~long)
    s_rows, s_first, s_inv = unique_rows(packed[si, :1])
    l_rows, l_first, l_inv = unique_rows(packed[li])
    rows = np.zeros((len(s_rows) + len(l_rows), C), dtype=np.uint64)
    rows[: len(s_rows), :1] = s_rows
    rows[len(s_rows):] = l_rows
    first = np.concatenate([si[s_first], li[l_first]])
    order = np.lexsort(rows.T[::-1])
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order), dtype=np.int64)
    inverse = np.empty(W, dtype=np.int64)
    inverse[si] = rank[s_inv]
    inverse[li] = rank[len(s_rows) + l_inv]
    return rows[order], first[order], inverse


def _row_keys(rows: np.ndarray, used: np.ndarray) -> list[bytes]:
    """Each row's first `used` columns as bytes: one key per word whatever the batch's width.

    A used column is never zero (each token adds id + 1 times a power of the base), so the
    key holds exactly the word's packed ids.
    """
    rows = np.ascontiguousarray(rows)
    if rows.shape[1] == 1:
        one: list[bytes] = rows.view(np.dtype((np.void, 8))).ravel().tolist()  # type: ignore
        return one
    keys: list[bytes] = [b""] * len(rows)
    for k in np.unique(used).tolist():
        sel = np.flatnonzero(used == k)
        part = np.ascontiguousarray(rows[sel, :k]).view(np.dtype((np.void, 8 * k))).ravel()
        for i, b in zip(sel.tolist(), part.tolist()):
            keys[i] = b  # type: ignore[assignment]
    return keys


def unique_rows(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct rows of a (m, k) uint64 array, sorted; with first index and inverse.

    Uses a lexicographic sort over the columns (much faster than
    ``np.unique(axis=0)``, which sorts opaque byte strings).

    >>> unique_rows(np.array([[2], [1], [2]], dtype=np.uint64))[0].ravel().tolist()
    [1, 2]
    """
    m = len(keys)
    if m == 0:
        return keys, np.zeros(0, np.int64), np.zeros(0, np.int64)
    if keys.shape[1] == 1:
        # Any occurrence serves as the representative, so the fast unstable sort will do.
        order = np.argsort(keys[:, 0])
    else:
        order = np.lexsort(keys.T[::-1])
    srt = keys[order]
    boundary = np.ones(m, dtype=bool)
    boundary[1:] = (srt[1:] != srt[:-1]).any(axis=1)
    group = np.cumsum(boundary) - 1
    inverse = np.empty(m, dtype=np.int64)
    inverse[order] = group
    starts = np.flatnonzero(boundary)
    return srt[starts], order[starts], inverse
