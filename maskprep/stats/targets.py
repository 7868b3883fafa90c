"""What the masked targets are: frequency bands, easy targets and within-unit leakage.

`TargetStats` accumulates, batch by batch, from the same arrays `MaskStats`
(stats.py) reads — masked ``input_ids``, ``labels``, ``unit_ids``, the
sequence-local ``word_ids`` and the words' keys and kinds of the packed rows —
the figures a strategy comparison needs beyond ``stats.json``:

- ``targets_by_band``: target tokens by the frequency rank of their word in
  the data counted (top 100, 101-1k, 1k-10k, rarer, and punctuation), with the
  band's share of all maskable tokens beside it, so over- and under-masking of
  a band is visible;
- ``easy_target_share``: share of targets whose word is punctuation or one of
  the ``top_words`` (default 100) most frequent words *of the rows counted*
  (frequencies come from the sample itself, not from a reference list);
- ``within_unit_leakage``: share of targets whose vocabulary unit (a group of
  tokens given as ``group_ids``, e.g. the pmi segmentation of the same words)
  keeps a maskable token that is not a target. It is counted by
  `masks.leaked_targets`, MaskStats' word leakage with the groups in place of
  words, so word leakage and unit leakage are one computation.

`targets_per_sequence` reads the per-row target counts `MaskStats` already
keeps. Word frequencies are kept per distinct word key, so memory grows with
the sample's vocabulary, not its length. A word cut by a sequence boundary
counts once in each sequence (as in `MaskStats`). This module does not mask,
choose units or read files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..masking.sampler import IGNORE_LABEL
from .._checks import sum_by_key
from .masks import MaskStats, leaked_targets

__all__ = ["TargetStats", "targets_per_sequence", "TARGET_BANDS", "TOP_WORDS"]

TOP_WORDS = 100
#: Frequency bands of word types, by rank in the counted rows (1-based, inclusive).
TARGET_BANDS: tuple[tuple[int, int | None, str], ...] = (
    (1, 100, "top 100"), (101, 1000, "101-1k"), (1001, 10000, "1k-10k"), (10001, None, "rarer"))
PUNCT_BAND = "punctuation"
_FLUSH_ROWS = 1 << 21
_COUNTERS = ("targets", "group_rows", "unit_targets", "unit_leaked", "punct_words", "punct_tokens",
             "punct_targets")


@dataclass(frozen=True)
class _BatchWords:
    """The per-key word and token counts of one batch of rows, and where its tokens are.

    They depend on the rows' words and maskable tokens only, not on which tokens are
    targets, so the strategies of a comparison (each its own `TargetStats`, all on the
    same rows) share one: see `_batch_words`.
    """

    uniq: np.ndarray        # distinct word keys (sorted)
    words: np.ndarray       # word occurrences per key
    tokens: np.ndarray      # maskable tokens per key
    inv_tok: np.ndarray     # key index of each maskable token of a word (kind 0)
    tb: np.ndarray          # row of each maskable token
    tt: np.ndarray          # position of each maskable token
    tok_word: np.ndarray    # the token's word is a word (kind 0), not punctuation
    punct_words: int
    punct_tokens: int


_LAST: list[tuple[tuple[Any, ...], np.ndarray, _BatchWords]] = []


def _batch_words(ident: tuple[Any, ...], word_ids: np.ndarray, keys: np.ndarray,
                 kinds: np.ndarray, maskable: np.ndarray) -> _BatchWords:
    """`_BatchWords` of these rows; the last one is reused when `ident` holds the same array
    objects (kept alive here) and the maskable tokens are equal."""
    if _LAST and all(a is b for a, b in zip(_LAST[0][0], ident)) \
            and np.array_equal(_LAST[0][1], maskable):
        return _LAST[0][2]
    # Words of the rows: kind 0 counted per key, kind 1 (punctuation/whitespace) as one band.
    wb, ww = np.nonzero(kinds >= 0)
    is_word = kinds[wb, ww] == 0
    # Tokens: the word each maskable token belongs to.
    tb, tt = np.nonzero(maskable)
    local = word_ids[tb, tt]
    tok_word = kinds[tb, local] == 0
    k_tok = keys[tb[tok_word], local[tok_word]]
    word_keys = keys[wb[is_word], ww[is_word]]
    uniq, inv = np.unique(np.concatenate([word_keys, k_tok]), return_inverse=True)
    inv = inv.ravel()
    n_w = len(word_keys)
    out = _BatchWords(
        uniq=uniq,
        words=np.bincount(inv[:n_w], minlength=len(uniq)).astype(np.int64),
        tokens=np.bincount(inv[n_w:], minlength=len(uniq)).astype(np.int64),
        inv_tok=inv[n_w:], tb=tb, tt=tt, tok_word=tok_word,
        punct_words=int((~is_word).sum()), punct_tokens=int((~tok_word).sum()))
    _LAST[:] = [(ident, maskable.copy(), out)]
    return out


@dataclass
class TargetStats:
    """Running target statistics; ``ts.add(...)`` per batch, ``ts.to_dict()`` at the end.

    >>> ts = TargetStats(); ts.add(masked_ids=np.array([[1, 9, 5]]),
    ...     labels=np.array([[-100, 4, -100]]), unit_ids=np.array([[-1, 0, 1]]),
    ...     word_ids=np.array([[-1, 0, 1]]), word_keys=np.array([[7, 8]], np.uint64),
    ...     word_kinds=np.array([[0, 1]], np.int8), attention_mask=np.array([[1, 1, 1]]),
    ...     mask_token_id=9)
    >>> ts.to_dict()["easy_target_share"]
    1.0
    """

    targets: int = 0
    group_rows: int = 0          # rows counted with group_ids (for within-unit leakage)
    unit_targets: int = 0        # targets of those rows
    unit_leaked: int = 0
    punct_words: int = 0
    punct_tokens: int = 0
    punct_targets: int = 0
    keys: np.ndarray = field(default_factory=lambda: np.zeros(0, np.uint64))
    words: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # occurrences per key
    # maskable tokens per key
    tokens: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    hits: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # target tokens per key
    _pending: list[tuple[np.ndarray, ...]] = field(default_factory=list, repr=False)
    _pending_rows: int = field(default=0, repr=False)

    def add(
        self,
        *,
        masked_ids: np.ndarray,
        labels: np.ndarray,
        unit_ids: np.ndarray,
        word_ids: np.ndarray,
        word_keys: np.ndarray,
        word_kinds: np.ndarray,
        attention_mask: np.ndarray,
        mask_token_id: int,
        group_ids: np.ndarray | None = None,
    ) -> None:
        """Count one batch of rows: (B, L) token arrays, (B, Lw) word keys and kinds (0 word, 1
        punctuation)."""
        ident = (word_ids, word_keys, word_kinds)  # the caller's arrays (see _batch_words)
        labels = np.asarray(labels)
        word_ids = np.asarray(word_ids, dtype=np.int64)
        keys = np.asarray(word_keys, dtype=np.uint64)
        kinds = np.asarray(word_kinds)
        B = labels.shape[0]
        if B == 0:
            return
        target = labels != IGNORE_LABEL
        maskable = np.asarray(unit_ids) >= 0
        self.targets += int(target.sum())
        if group_ids is not None:
            # leakage of `group_ids` = MaskStats' within-word leakage with groups as words
            tb, tt = np.nonzero(target)
            self.group_rows += B
            self.unit_targets += int(tb.size)
            self.unit_leaked += leaked_targets(target, maskable, np.asarray(group_ids, np.int64),
                                               tb, tt)
        words = _batch_words(ident, word_ids, keys, kinds, maskable)
        self.punct_words += words.punct_words
        self.punct_tokens += words.punct_tokens
        tok_target = target[words.tb, words.tt]
        self.punct_targets += int((tok_target & ~words.tok_word).sum())
        hits = np.bincount(words.inv_tok, weights=tok_target[words.tok_word].astype(np.float64),
                           minlength=len(words.uniq)).astype(np.int64)
        self._pending.append((words.uniq, words.words, words.tokens, hits))
        self._pending_rows += len(words.uniq)
        if self._pending_rows > _FLUSH_ROWS:
            self._flush()

    def _flush(self) -> None:
        if not self._pending:
            return
        parts = [(self.keys, self.words, self.tokens, self.hits), *self._pending]
        cols = [np.concatenate([p[i] for p in parts]) for i in range(4)]
        self.keys, self.words, self.tokens, self.hits = sum_by_key(cols[0], *cols[1:])
        self._pending, self._pending_rows = [], 0

    def merge(self, other: "TargetStats") -> None:
        """Add another accumulator (e.g. of another corpus task) into this one."""
        other._flush()
        for name in _COUNTERS:
            setattr(self, name, getattr(self, name) + getattr(other, name))
        self._pending.append((other.keys, other.words, other.tokens, other.hits))
        self._pending_rows += len(other.keys)
        if self._pending_rows > _FLUSH_ROWS:  # else summed at the next read: one sort in all
            self._flush()

    def to_state(self) -> dict[str, Any]:
        """A picklable, JSON-able form; `TargetStats.from_state` reads it back."""
        self._flush()
        out: dict[str, Any] = {k: getattr(self, k) for k in _COUNTERS}
        out["keys"] = self.keys.tolist()  # Python ints
        for k in ("words", "tokens", "hits"):
            out[k] = getattr(self, k).tolist()
        return out

    @classmethod
    def from_state(cls, state: Mapping[str, Any]) -> "TargetStats":
        """Rebuild from `to_state`: ``TargetStats.from_state(ts.to_state())``."""
        s = cls(**{k: int(state[k]) for k in _COUNTERS})  # type: ignore[arg-type]
        s.keys = np.asarray(state["keys"], dtype=np.uint64)
        for k in ("words", "tokens", "hits"):
            setattr(s, k, np.asarray(state[k], dtype=np.int64))
        return s

    def ranked(self) -> np.ndarray:
        """Indices of the word keys, most frequent first (ties: smaller key first)."""
        self._flush()
        return np.lexsort((self.keys, -self.words))

    def to_dict(self, *, top_words: int = TOP_WORDS) -> dict[str, Any]:
        """The target figures: easy_target_share, targets_by_band, within_unit_leakage."""
        def share(a: int, b: int) -> float | None:
            return a / b if b else None

        order = self.ranked()
        all_tokens = int(self.tokens.sum()) + self.punct_tokens
        easy = int(self.hits[order[:top_words]].sum()) + self.punct_targets
        bands = []
        for lo, hi, label in TARGET_BANDS:
            sel = order[lo - 1:hi] if hi is not None else order[lo - 1:]
            bands.append(
                self._band(
                    label,
                    lo,
                    hi,
                    len(sel),
                    int(self.words[sel].sum()),
                    int(self.tokens[sel].sum()),
                    int(self.hits[sel].sum()),
                    all_tokens,
                )
            )
        bands.append(self._band(PUNCT_BAND, None, None, None, self.punct_words, self.punct_tokens,
                                self.punct_targets, all_tokens))
        return {
            "easy_target_share": share(easy, self.targets),
            "easy_targets": {
                "targets": easy,
                "top_words": top_words,
                "words": "punctuation, or the most frequent words of the rows compared",
            },
            "within_unit_leakage": share(self.unit_leaked, self.unit_targets)
            if self.group_rows
            else None,
            "targets_by_band": bands,
            "word_types": int(len(self.keys)),
        }

    def _band(
        self,
        label: str,
        lo: int | None,
        hi: int | None,
        types: int | None,
        words: int,
        tokens: int,
        hits: int,
        all_tokens: int,
    ) -> dict[str, Any]:
        return {"band": label, "rank_from": lo, "rank_to": hi, "types": types, "words": words,
                "tokens": tokens, "targets": hits,
                "target_share": hits / self.targets if self.targets else None,
                "token_share": tokens / all_tokens if all_tokens else None,
                "rate": hits / tokens if tokens else None}


def targets_per_sequence(stats: MaskStats) -> dict[str, Any]:
    """Histogram of targets per row, from the per-row counts `MaskStats` keeps.

    >>> s = MaskStats(); s.add(masked_ids=np.array([[1, 9, 5]]), labels=np.array([[-100, 4, -100]]),
    ...     unit_ids=np.array([[-1, 0, 1]]), word_ids=np.array([[-1, 0, 1]]),
    ...     attention_mask=np.array([[1, 1, 1]]), mask_token_id=9)
    >>> targets_per_sequence(s)["histogram"]
    {'1': 1}
    """
    hist: dict[int, int] = {}
    for key, count in stats.row_rates.items():
        t = int(key) >> 32
        hist[t] = hist.get(t, 0) + int(count)
    rows = sum(hist.values())
    total = sum(t * c for t, c in hist.items())
    zero = hist.get(0, 0)
    return {"histogram": {str(t): c for t, c in sorted(hist.items())},
            "mean": total / rows if rows else None,
            "min": min(hist) if hist else None, "max": max(hist) if hist else None,
            "rows_without_targets": zero}
