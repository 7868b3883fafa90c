"""Masking units: how a batch of packed sequences is cut into the units a masker draws.

Every masking strategy is only a segmentation; `maskprep.masking.sampler.mask_batch` is
the one sampler. This module computes, for a batch of B sequences of L tokens:

- `token_units`: each non-special token is a unit;
- `word_units`: each word (all its tokens) is a unit;
- `span_units`: words grouped into consecutive runs whose lengths in words are
  drawn from a geometric distribution truncated to [1, span_max];
- `pmi_units`: the segmentation of each sequence's words into unit-vocabulary
  n-grams and single words with the largest total score (dynamic programme).

Word-level strategies first produce `word_starts` (bool (B, Lw): True where a
word begins a unit) and turn it into `unit_ids` (int32 (B, L), unit index per
token, increasing, -1 on special tokens) with `units_from_word_starts`.
A *document boundary* is a special token directly before a word's first
token; span runs and pmi n-grams never cross one, nor the sequence end.

Randomness is counter-based: a draw is a pure function of (seed, copy, stream
tag, sequence id, position), so a sequence gets the same units whatever batch
it is in. With G = 0x9E3779B97F4A7C15, mix = the splitmix64 finaliser and
absorb(h, x) = mix((h ^ x) + G mod 2**64), a draw is
absorb(absorb(absorb(absorb(absorb(0, seed), copy), tag), sequence_id), position).

This module does not choose targets or replace tokens (see `masking`), nor
pick the unit vocabulary (see `units`); it takes `UnitVocabulary.by_length()`
as a plain dict {n: (keys (m, n) uint64, scores (m,) float64)}.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from maskprep._checks import is_real, is_whole
from maskprep.errors import MaskprepError

GOLDEN = 0x9E3779B97F4A7C15
_MASK64 = (1 << 64) - 1
_M1 = 0xBF58476D1CE4E5B9
_M2 = 0x94D049BB133111EB
_U64 = np.uint64

# Stream tags: one per kind of random draw.
TAG_PRIORITY = 1
TAG_MIX = 2
TAG_MIX_UNIT = 3
TAG_RANDOM = 4
TAG_SPAN = 5


def _mix_int(z: int) -> int:
    z &= _MASK64
    z = ((z ^ (z >> 30)) * _M1) & _MASK64
    z = ((z ^ (z >> 27)) * _M2) & _MASK64
    return z ^ (z >> 31)


def _absorb_int(h: int, x: int) -> int:
    return _mix_int(((h ^ x) + GOLDEN) & _MASK64)


def absorb(h: np.ndarray | int, x: np.ndarray) -> np.ndarray:
    """Vectorised absorb(h, x) = splitmix64-finaliser((h ^ x) + G); broadcasts.

    >>> int(absorb(0, np.array([0], dtype=np.uint64))[0]) == _absorb_int(0, 0)
    True
    """
    z = np.bitwise_xor(np.asarray(h, dtype=_U64), np.asarray(x, dtype=_U64))
    z += _U64(GOLDEN)
    z ^= z >> _U64(30)
    z *= _U64(_M1)
    z ^= z >> _U64(27)
    z *= _U64(_M2)
    z ^= z >> _U64(31)
    return z


def check_seed(seed: object, copy: object) -> tuple[int, int]:
    """Validate a seed and a copy number (whole numbers in [0, 2**64)).

    >>> check_seed(0, 1)
    (0, 1)
    """
    for name, value in (("--seed", seed), ("copy (index of the masked copy)", copy)):
        if not is_whole(value, 0, _MASK64):
            raise MaskprepError(f"{name} must be a whole number from 0 to 2**64-1, "
                                f"got {value!r}; pass e.g. 0")
    return int(seed), int(copy)  # type: ignore[call-overload]


def sequence_states(sequence_ids: np.ndarray, *, seed: int, copy: int, tag: int) -> np.ndarray:
    """Per-sequence hash state for one stream: uint64 (B,).

    >>> sequence_states(np.array([7], dtype=np.uint64), seed=0, copy=0, tag=TAG_SPAN).dtype
    dtype('uint64')
    """
    seed, copy = check_seed(seed, copy)
    key = _absorb_int(_absorb_int(_absorb_int(0, seed), copy), tag)
    return absorb(key, np.asarray(sequence_ids, dtype=_U64))


def uniforms(h: np.ndarray) -> np.ndarray:
    """Map uint64 draws to float64 in [0, 1) from their top 53 bits.

    >>> float(uniforms(np.array([2**63], dtype=np.uint64))[0])
    0.5
    """
    return (h >> _U64(11)).astype(np.float64) * (1.0 / 9007199254740992.0)


# ----------------------------------------------------------------------------- words

def _n_words(word_ids: np.ndarray) -> int:
    return int(word_ids.max(initial=-1)) + 1


def _check_tokens(special: np.ndarray, word_ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    special = np.asarray(special, dtype=bool)
    word_ids = np.asarray(word_ids, dtype=np.int32)
    if special.ndim != 2 or special.shape != word_ids.shape:
        raise ValueError(f"special {special.shape} and word_ids {word_ids.shape} must be "
                         "two arrays of the same (B, L) shape")
    if np.any((word_ids < 0) != special):
        raise ValueError("word_ids must be -1 exactly on special tokens and >= 0 elsewhere")
    return special, word_ids


def _word_start_tokens(word_ids: np.ndarray) -> np.ndarray:
    start = word_ids >= 0
    start[:, 1:] &= word_ids[:, 1:] != word_ids[:, :-1]
    return start


def document_breaks(special: np.ndarray, word_ids: np.ndarray, n_words: int) -> np.ndarray:
    """bool (B, n_words): True on words whose first token follows a special token.

    >>> document_breaks(np.array([[1, 0, 1, 0]], bool), np.array([[-1, 0, -1, 1]]), 2).tolist()
    [[True, True]]
    """
    brk = np.zeros((word_ids.shape[0], n_words), dtype=bool)
    hit = _word_start_tokens(word_ids)
    hit[:, 1:] &= special[:, :-1]
    hit[:, :1] = False
    b, t = np.nonzero(hit)
    brk[b, word_ids[b, t]] = True
    return brk


def units_from_word_starts(word_ids: np.ndarray, word_starts: np.ndarray) -> np.ndarray:
    """unit_ids int32 (B, L) from word_starts bool (B, Lw); word 0 always starts a unit.

    >>> units_from_word_starts(np.array([[-1, 0, 0, 1, 2]]), np.array([[1, 0, 1]], bool)).tolist()
    [[-1, 0, 0, 0, 1]]
    """
    word_ids = np.asarray(word_ids, dtype=np.int32)
    starts = np.array(word_starts, dtype=bool)
    if starts.shape[1] == 0:
        return np.full(word_ids.shape, -1, dtype=np.int32)
    starts[:, 0] = True
    unit_of_word = (np.cumsum(starts, axis=1, dtype=np.int32) - 1)
    units = np.take_along_axis(unit_of_word, np.maximum(word_ids, 0), axis=1)
    units[word_ids < 0] = -1
    return units


def word_starts_from_units(unit_ids: np.ndarray, word_ids: np.ndarray) -> np.ndarray:
    """Which words start a unit, for any unit_ids: bool (B, Lw), Lw = max word id + 1.

    A word starts a unit when its first token is in a different unit from the
    nearest earlier non-special token. Words whose tokens are split over several
    units (token strategy) count as starting a unit, so "words per unit" is then
    at most 1. Columns past a sequence's last word are False.

    >>> word_starts_from_units(np.array([[-1, 0, 0, 1]]), np.array([[-1, 0, 1, 2]])).tolist()
    [[True, False, True]]
    """
    unit_ids = np.asarray(unit_ids)
    word_ids = np.asarray(word_ids)
    B, L = unit_ids.shape
    pos = np.where(unit_ids >= 0, np.arange(L), -1)
    last = np.maximum.accumulate(pos, axis=1)
    prev = np.full((B, L), -1, dtype=np.int64)
    prev[:, 1:] = last[:, :-1]
    prev_unit = np.where(prev >= 0, np.take_along_axis(unit_ids, np.maximum(prev, 0), axis=1), -1)
    changed = (unit_ids >= 0) & (unit_ids != prev_unit)
    out = np.zeros((B, _n_words(word_ids)), dtype=bool)
    b, t = np.nonzero(_word_start_tokens(word_ids) & changed)
    out[b, word_ids[b, t]] = True
    return out


# ----------------------------------------------------------------------------- token, word

def token_units(special: np.ndarray) -> np.ndarray:
    """Each non-special token its own unit.

    >>> token_units(np.array([[True, False, False, True]])).tolist()
    [[-1, 0, 1, -1]]
    """
    special = np.asarray(special, dtype=bool)
    units = np.cumsum(~special, axis=1, dtype=np.int32) - 1
    units[special] = -1
    return units


def word_units(special: np.ndarray, word_ids: np.ndarray) -> np.ndarray:
    """Each word one unit (all its tokens).

    >>> word_units(np.array([[1, 0, 0, 0]], bool), np.array([[-1, 0, 0, 1]])).tolist()
    [[-1, 0, 0, 1]]
    """
    special, word_ids = _check_tokens(special, word_ids)
    return units_from_word_starts(word_ids, np.ones((word_ids.shape[0], _n_words(word_ids)), bool))


# ----------------------------------------------------------------------------- span

def check_span(span_p: object, span_max: object) -> tuple[float, int]:
    """Validate span options: span_p in (0, 1], span_max a whole number >= 1.

    >>> check_span(0.2, 10)
    (0.2, 10)
    """
    if not is_real(span_p) or not 0.0 < float(span_p) <= 1.0:
        raise MaskprepError(f"--span-p must be a probability in (0, 1], got {span_p!r}; "
                            "pass e.g. --span-p 0.2")
    if not is_whole(span_max, 1):
        raise MaskprepError(f"--span-max must be a whole number of words >= 1, got {span_max!r}; "
                            "pass e.g. --span-max 10")
    return float(span_p), int(span_max)


def span_length_cdf(*, span_p: float, span_max: int) -> np.ndarray:
    """P(K <= k) for k = 1..span_max with P(K = k) proportional to p (1-p)**(k-1).

    >>> span_length_cdf(span_p=1.0, span_max=3).tolist()
    [1.0, 1.0, 1.0]
    """
    span_p, span_max = check_span(span_p, span_max)
    pk = span_p * (1.0 - span_p) ** np.arange(span_max, dtype=np.float64)
    cdf = np.cumsum(pk) / pk.sum()
    cdf[-1] = 1.0
    return cdf


def span_lengths(sequence_ids: np.ndarray, n_runs: int, *, seed: int, copy: int = 0,
                 span_p: float, span_max: int) -> np.ndarray:
    """Run lengths in words, int32 (B, n_runs): run r of a sequence uses draw (SPAN, r).

    >>> span_lengths(np.array([1], np.uint64), 3, seed=0, span_p=1.0, span_max=10).tolist()
    [[1, 1, 1]]
    """
    cdf = span_length_cdf(span_p=span_p, span_max=span_max)
    states = sequence_states(sequence_ids, seed=seed, copy=copy, tag=TAG_SPAN)
    u = uniforms(absorb(states[:, None], np.arange(n_runs, dtype=_U64)[None, :]))
    return (np.searchsorted(cdf, u, side="right") + 1).astype(np.int32)


def span_word_starts(
    special: np.ndarray,
    word_ids: np.ndarray,
    *,
    sequence_ids: np.ndarray,
    seed: int,
    copy: int = 0,
    span_p: float = 0.2,
    span_max: int = 10,
) -> np.ndarray:
    """Word starts of span runs, bool (B, Lw); runs are cut at document boundaries.

    >>> span_word_starts(np.array([[0, 0]], bool), np.array([[0, 1]]),
    ...     sequence_ids=np.array([0], np.uint64), seed=0, span_p=1.0).tolist()
    [[True, True]]
    """
    special, word_ids = _check_tokens(special, word_ids)
    Lw = _n_words(word_ids)
    lens = span_lengths(np.asarray(sequence_ids, dtype=_U64), Lw, seed=seed, copy=copy,
                        span_p=span_p, span_max=span_max)
    first = np.cumsum(lens, axis=1, dtype=np.int64) - lens
    b, r = np.nonzero(first < Lw)
    starts = document_breaks(special, word_ids, Lw)
    starts[b, first[b, r]] = True
    return starts


def span_units(special: np.ndarray, word_ids: np.ndarray, *, sequence_ids: np.ndarray, seed: int,
               copy: int = 0, span_p: float = 0.2, span_max: int = 10) -> np.ndarray:
    """Span units: consecutive runs of words, truncated-geometric lengths.

    >>> span_units(np.array([[0, 0]], bool), np.array([[0, 1]]),
    ...     sequence_ids=np.array([0], np.uint64), seed=0, span_p=1.0).tolist()
    [[0, 1]]
    """
    starts = span_word_starts(special, word_ids, sequence_ids=sequence_ids, seed=seed, copy=copy,
                              span_p=span_p, span_max=span_max)
    return units_from_word_starts(word_ids, starts)


# ----------------------------------------------------------------------------- pmi

@dataclass(frozen=True)
class _NTable:
    hashes: np.ndarray  # uint64 (m,), sorted
    keys: np.ndarray  # uint64 (m, n), same order
    scores: np.ndarray  # float64 (m,), > 0
    bitmap: np.ndarray  # bool (2**bits,), indexed by hash >> (64 - bits)
    shift: int


@dataclass(frozen=True)
class UnitTable:
    """A unit vocabulary prepared for vectorised lookup (hash, filter, verify).

    Only n-grams with a finite positive score are kept: they are the only
    candidates of the segmentation. Keys are compared in full after the hash
    lookup, so hash collisions can never produce a false match; a collision
    inside the vocabulary changes the salt until there is none.

    >>> UnitTable.from_by_length({2: (np.array([[1, 2]], np.uint64), np.array([1.5]))}).max_n
    2
    """

    salt: int
    tables: Mapping[int, _NTable]

    @property
    def max_n(self) -> int:
        return max(self.tables, default=1)

    @classmethod
    def from_by_length(cls, by_length: Mapping[int, tuple[np.ndarray, np.ndarray]]) -> "UnitTable":
        """Prepare `{n: (keys (m, n) uint64, scores (m,) float64)}` for lookup."""
        kept: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        for n, (keys, scores) in sorted(by_length.items()):
            keys = np.asarray(keys, dtype=_U64)
            scores = np.asarray(scores, dtype=np.float64)
            if int(n) < 2 or keys.ndim != 2 or keys.shape[1] != n or scores.shape != keys.shape[:1]:
                raise ValueError(
                    f"unit vocabulary entry n={n}: need keys (m, {n}) and scores (m,), "
                    f"got {keys.shape} and {scores.shape}"
                )
            if not np.all(np.isfinite(scores)):
                raise MaskprepError(f"unit vocabulary: {n}-gram scores must be finite numbers; "
                                    "rebuild the units file")
            good = scores > 0
            if np.any(good):
                kept[int(n)] = (keys[good], scores[good])
        for attempt in range(64):
            salt = _absorb_int(0x5EED, attempt)
            tables = {n: _build_ntable(keys, scores, salt) for n, (keys, scores) in kept.items()}
            if all(t is not None for t in tables.values()):
                return cls(salt=salt, tables=tables)  # type: ignore[arg-type]
        raise RuntimeError("could not find a collision-free hash salt for the unit vocabulary")


_WINDOW_MUL = _U64(_M1)  # odd: h -> h * _WINDOW_MUL + x is a bijection for each x


def _ngram_hash(keys: np.ndarray, salt: int) -> np.ndarray:
    """Lookup hash of n-grams, uint64 (m,): each word key mixed with the salt, then combined
    as h * _WINDOW_MUL + next (2 operations per word, so every window of a batch is cheap)."""
    mixed = absorb(salt, keys)
    h = mixed[:, 0].copy()
    for i in range(1, keys.shape[1]):
        h *= _WINDOW_MUL
        h += mixed[:, i]
    return h


def _build_ntable(keys: np.ndarray, scores: np.ndarray, salt: int) -> _NTable | None:
    h = _ngram_hash(keys, salt)
    order = np.lexsort(tuple(keys.T[::-1]) + (h,))
    h, keys, scores = h[order], keys[order], scores[order]
    same = h[1:] == h[:-1]
    if np.any(same):
        dup = np.all(keys[1:][same] == keys[:-1][same], axis=1)
        if np.any(dup):
            raise MaskprepError(f"unit vocabulary lists the same {keys.shape[1]}-gram twice; "
                                "each n-gram must appear once (rebuild the units file)")
        return None
    bits = int(min(24, max(12, np.ceil(np.log2(16 * len(h))))))
    shift = 64 - bits
    bitmap = np.zeros(1 << bits, dtype=bool)
    bitmap[h >> _U64(shift)] = True
    return _NTable(hashes=h, keys=keys, scores=scores, bitmap=bitmap, shift=shift)


def _as_table(units: "UnitTable | Mapping[int, tuple[np.ndarray, np.ndarray]]") -> UnitTable:
    return units if isinstance(units, UnitTable) else UnitTable.from_by_length(units)


def ngram_scores(special: np.ndarray, word_ids: np.ndarray, word_keys: np.ndarray,
                 word_kinds: np.ndarray, *, units: "UnitTable | Mapping") -> dict[int, np.ndarray]:
    """Score of the vocabulary n-gram ending at each word: {n: float64 (Lw, B)}, 0 = none.

    An n-gram is looked up only where its n words are all of kind 0 (word, not
    punctuation or padding) and no document boundary lies inside it.

    >>> s = ngram_scores(np.zeros((1, 2), bool), np.array([[0, 1]]), np.array([[5, 6]], np.uint64),
    ...     np.zeros((1, 2), np.int8), units={2: (np.array([[5, 6]], np.uint64), np.array([2.0]))})
    >>> s[2][:, 0].tolist()
    [0.0, 2.0]
    """
    table = _as_table(units)
    special, word_ids = _check_tokens(special, word_ids)
    keys = np.asarray(word_keys, dtype=_U64)
    kinds = np.asarray(word_kinds)
    B, Lw = keys.shape
    if kinds.shape != keys.shape or keys.shape[0] != special.shape[0] or _n_words(word_ids) > Lw:
        raise ValueError(f"word_keys {keys.shape} and word_kinds {kinds.shape} must be (B, Lw) "
                         "with Lw covering every word id")
    # run[b, j]: number of consecutive linkable words ending at j (0 on punctuation/padding)
    col = np.arange(Lw, dtype=np.int32)
    brk = document_breaks(special, word_ids, Lw)
    first = np.where(kinds != 0, col + 1, np.where(brk, col, 0)).astype(np.int32)
    run = col - np.maximum.accumulate(first, axis=1) + 1
    out: dict[int, np.ndarray] = {}
    mixed = absorb(table.salt, keys)
    h = mixed
    for n in range(2, table.max_n + 1):
        if Lw < n:
            break
        h = h[:, :-1] * _WINDOW_MUL  # as _ngram_hash: the window ending at j = column + n - 1
        h += mixed[:, n - 1:]
        t = table.tables.get(n)
        if t is None:
            continue
        score = np.zeros((Lw, B), dtype=np.float64)
        out[n] = score
        flat = np.flatnonzero(run[:, n - 1:] >= n)
        hq = h.ravel()[flat]
        keep = t.bitmap[hq >> _U64(t.shift)]
        flat, hq = flat[keep], hq[keep]
        i = np.minimum(np.searchsorted(t.hashes, hq), len(t.hashes) - 1)
        hit = t.hashes[i] == hq
        flat, i = flat[hit], i[hit]
        b, j = np.divmod(flat, Lw - n + 1)
        j += n - 1
        window = keys[b[:, None], j[:, None] - (n - 1) + np.arange(n)]
        ok = np.all(window == t.keys[i], axis=1)
        score[j[ok], b[ok]] = t.scores[i[ok]]
    return out


def pmi_word_starts(special: np.ndarray, word_ids: np.ndarray, word_keys: np.ndarray,
                    word_kinds: np.ndarray, *, units: "UnitTable | Mapping") -> np.ndarray:
    """Best segmentation of words into vocabulary n-grams and single words, bool (B, Lw).

    Dynamic programme over word positions (numpy across the batch) maximising
    the total score; single words score 0. Ties: at each unit end, working back
    from the sequence end, the shortest unit reaching the best total wins (a
    single word before any n-gram), so e.g. "a b c" with equal-scoring "a b"
    and "b c" becomes [a b][c].

    >>> pmi_word_starts(np.zeros((1, 3), bool), np.array([[0, 1, 2]]),
    ...     np.array([[1, 2, 3]], np.uint64), np.zeros((1, 3), np.int8),
    ...     units={2: (np.array([[2, 3]], np.uint64), np.array([1.0]))}).tolist()
    [[True, True, False]]
    """
    scores = ngram_scores(special, word_ids, word_keys, word_kinds, units=units)
    B, Lw = np.shape(word_keys)
    best = np.zeros((Lw + 1, B), dtype=np.float64)
    choice = np.ones((Lw, B), dtype=np.int8)
    for j in range(Lw):
        cur = best[j].copy()
        ch = choice[j]
        for n, s in scores.items():
            if n > j + 1:
                continue
            v = best[j + 1 - n] + s[j]  # absent n-grams score 0 and never beat best[j]
            upd = v > cur
            cur[upd] = v[upd]
            ch[upd] = n
        best[j + 1] = cur
    ends = np.zeros((Lw, B), dtype=bool)
    nxt = np.full(B, Lw - 1, dtype=np.int64)
    for j in range(Lw - 1, -1, -1):
        hit = nxt == j
        ends[j] = hit
        nxt[hit] = j - choice[j][hit]
    starts = np.ones((B, Lw), dtype=bool)
    starts[:, 1:] = ends[:-1].T
    return starts


def pmi_units(special: np.ndarray, word_ids: np.ndarray, word_keys: np.ndarray,
              word_kinds: np.ndarray, *, units: "UnitTable | Mapping") -> np.ndarray:
    """PMI units: the best-scoring segmentation of words into vocabulary n-grams.

    >>> pmi_units(np.zeros((1, 3), bool), np.array([[0, 1, 2]]), np.array([[1, 2, 3]], np.uint64),
    ...     np.zeros((1, 3), np.int8),
    ...     units={2: (np.array([[2, 3]], np.uint64), np.array([1.0]))}).tolist()
    [[0, 1, 1]]
    """
    starts = pmi_word_starts(special, word_ids, word_keys, word_kinds, units=units)
    return units_from_word_starts(word_ids, starts)
