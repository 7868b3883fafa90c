"""Masking and leakage statistics of masked rows (what `stats.json` reports).

`MaskStats` accumulates figures batch by batch from the rows as written
(masked `input_ids`, `labels`, `attention_mask`) together with the units and
sequence-local words of the same rows; partial results of tasks are merged
with `merge`, so one code path serves `maskprep mask` and any command that
compares strategies on the same data. Every figure counts what was actually
masked, never what the options asked for:

- ``masking_rate``: targets / maskable tokens (non-special tokens), for the
  corpus and min / median / max over rows (exact: rows are counted by their
  (targets, maskable) pair);
- ``mix``: shares of targets shown as the mask token, as another token
  (random), or unchanged (keep). A random replacement that drew the original
  token is indistinguishable from keep and is counted as keep;
- ``unit_lengths``: histograms of taken units, in tokens and in words (a word
  cut by the sequence boundary counts once in each sequence);
- ``multiword_share``: share of targets in taken units of two or more words;
- ``within_word_leakage``: share of targets whose word has a maskable token
  that is not a target (the model sees part of the word it must predict);
- ``tokens_per_word``: maskable tokens / words, over all rows.

Everything is numpy over the batch. This module does not choose units, mask or
read files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..masking.sampler import IGNORE_LABEL

__all__ = ["MaskStats", "batch_stats", "leaked_targets"]


def _add_hist(hist: dict[int, int], values: np.ndarray) -> None:
    if values.size == 0:
        return
    if values.min() >= 0 and values.max() < _SMALL:  # unit lengths: counted without a sort
        counts = np.bincount(values)
        keys = np.flatnonzero(counts)
        counts = counts[keys]
    else:
        keys, counts = np.unique(values, return_counts=True)
    for k, c in zip(keys.tolist(), counts.tolist()):
        hist[k] = hist.get(k, 0) + c


_SMALL = 1 << 16


def leaked_targets(target: np.ndarray, maskable: np.ndarray, word_ids: np.ndarray,
                   tb: np.ndarray, tt: np.ndarray) -> int:
    """Targets whose word keeps a maskable token that is not a target (all arrays (B, L);
    `word_ids` may be any grouping of the tokens, -1 outside; ``tb, tt = np.nonzero(target)``).

    >>> leaked_targets(np.array([[0, 1, 0]], bool), np.array([[0, 1, 1]], bool),
    ...                np.array([[-1, 0, 0]]), np.array([0]), np.array([1]))
    1
    """
    if tb.size == 0:
        return 0
    Lw = int(word_ids.max(initial=-1)) + 1
    vb, vt = np.nonzero(maskable & ~target)
    visible = np.zeros(target.shape[0] * Lw, dtype=bool)
    visible[vb * Lw + word_ids[vb, vt]] = True
    return int(visible[tb * Lw + word_ids[tb, tt]].sum())


def _merge_hist(into: dict[int, int], other: Mapping[int, int]) -> None:
    for k, c in other.items():
        into[int(k)] = into.get(int(k), 0) + int(c)


@dataclass
class MaskStats:
    """Running masking statistics; ``stats.add(...)`` per batch, ``stats.to_dict()`` at the end.

    >>> s = MaskStats(); s.add(masked_ids=np.array([[1, 9, 5]]), labels=np.array([[-100, 4, -100]]),
    ...     unit_ids=np.array([[-1, 0, 1]]), word_ids=np.array([[-1, 0, 0]]),
    ...     attention_mask=np.array([[1, 1, 1]]), mask_token_id=9)
    >>> s.to_dict()["within_word_leakage"]
    1.0
    """

    rows: int = 0
    sequences: int = 0          # rows of copy 0 (distinct sequences)
    tokens: int = 0             # attended tokens (specials included, padding excluded)
    maskable: int = 0           # non-special tokens
    targets: int = 0
    mask: int = 0
    random: int = 0
    keep: int = 0
    words: int = 0
    multiword_targets: int = 0
    leaked_targets: int = 0
    unit_tokens: dict[int, int] = field(default_factory=dict)
    unit_words: dict[int, int] = field(default_factory=dict)
    # rows by (targets, maskable): key targets * 2**32 + maskable
    row_rates: dict[int, int] = field(default_factory=dict)

    def add(
        self,
        *,
        masked_ids: np.ndarray,
        labels: np.ndarray,
        unit_ids: np.ndarray,
        word_ids: np.ndarray,
        attention_mask: np.ndarray,
        mask_token_id: int,
        first_copy: bool = True,
    ) -> None:
        """Count one batch of rows (all arrays (B, L)); `first_copy` counts them as new
        sequences."""
        masked_ids = np.asarray(masked_ids)
        labels = np.asarray(labels)
        unit_ids = np.asarray(unit_ids, dtype=np.int64)
        word_ids = np.asarray(word_ids, dtype=np.int64)
        B, L = labels.shape
        if B == 0:
            return
        target = labels != IGNORE_LABEL
        maskable = unit_ids >= 0
        n_t = target.sum(axis=1, dtype=np.int64)
        n_m = maskable.sum(axis=1, dtype=np.int64)
        self.rows += B
        self.sequences += B if first_copy else 0
        self.tokens += int(np.count_nonzero(attention_mask))
        self.maskable += int(n_m.sum())
        self.targets += int(n_t.sum())
        _add_hist(self.row_rates, (n_t << 32) | n_m)

        tb, tt = np.nonzero(target)
        shown, orig = masked_ids[tb, tt], labels[tb, tt]
        is_mask = shown == mask_token_id
        is_keep = ~is_mask & (shown == orig)
        self.mask += int(is_mask.sum())
        self.keep += int(is_keep.sum())
        self.random += int(tb.size - is_mask.sum() - is_keep.sum())

        self.words += int((word_ids.max(axis=1, initial=-1) + 1).sum())
        if tb.size == 0:
            return
        # taken units: tokens per unit, and words per unit (word changes among its targets)
        U = int(unit_ids.max(initial=-1)) + 1
        ukey = tb * U + unit_ids[tb, tt]
        wt = word_ids[tb, tt]
        new_unit = np.ones(tb.size, dtype=bool)
        new_unit[1:] = ukey[1:] != ukey[:-1]
        new_word = new_unit.copy()
        new_word[1:] |= wt[1:] != wt[:-1]
        unit_start = np.flatnonzero(new_unit)
        tok_len = np.diff(np.append(unit_start, tb.size))
        word_len = np.add.reduceat(new_word.astype(np.int64), unit_start)
        _add_hist(self.unit_tokens, tok_len)
        _add_hist(self.unit_words, word_len)
        self.multiword_targets += int(tok_len[word_len >= 2].sum())
        # leakage: a target whose word has a maskable, untargeted token
        self.leaked_targets += leaked_targets(target, maskable, word_ids, tb, tt)

    def merge(self, other: "MaskStats") -> None:
        """Add another accumulator (e.g. of another task) into this one."""
        for name in ("rows", "sequences", "tokens", "maskable", "targets", "mask", "random", "keep",
                     "words", "multiword_targets", "leaked_targets"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        _merge_hist(self.unit_tokens, other.unit_tokens)
        _merge_hist(self.unit_words, other.unit_words)
        _merge_hist(self.row_rates, other.row_rates)

    def to_state(self) -> dict[str, Any]:
        """A JSON-able form for resume records; `MaskStats.from_state` reads it back."""
        out: dict[str, Any] = {k: getattr(self, k) for k in (
            "rows", "sequences", "tokens", "maskable", "targets", "mask", "random", "keep", "words",
            "multiword_targets", "leaked_targets")}
        for k in ("unit_tokens", "unit_words", "row_rates"):
            out[k] = [[int(a), int(b)] for a, b in sorted(getattr(self, k).items())]
        return out

    @classmethod
    def from_state(cls, state: Mapping[str, Any]) -> "MaskStats":
        """Rebuild from `to_state`: ``MaskStats.from_state(s.to_state())``."""
        scalars = {k: int(v) for k, v in state.items() if not isinstance(v, list)}
        s = cls(**scalars)  # type: ignore[arg-type]
        for k in ("unit_tokens", "unit_words", "row_rates"):
            setattr(s, k, {int(a): int(b) for a, b in state.get(k, [])})
        return s

    def per_row_rates(self) -> tuple[float, float, float] | None:
        """(min, median, max) of targets / maskable over rows with maskable tokens."""
        items = sorted(((t / m, c) for key, c in self.row_rates.items()
                        for t, m in [(key >> 32, key & 0xFFFFFFFF)] if m > 0))
        if not items:
            return None
        rates = np.array([r for r, _ in items])
        cum = np.cumsum([c for _, c in items])
        n = int(cum[-1])
        lo = rates[np.searchsorted(cum, (n - 1) // 2 + 1)]
        hi = rates[np.searchsorted(cum, n // 2 + 1)]
        return float(rates[0]), float((lo + hi) / 2), float(rates[-1])

    def to_dict(self, **context: Any) -> dict[str, Any]:
        """The figures of stats.json; `context` (seed, options, ...) is added as given."""
        def share(a: int, b: int) -> float | None:
            return a / b if b else None

        rates = self.per_row_rates()
        out: dict[str, Any] = {
            "sequences": self.sequences,
            "rows": self.rows,
            "tokens": self.tokens,
            "maskable_tokens": self.maskable,
            "targets": self.targets,
            "masking_rate": {
                "corpus": share(self.targets, self.maskable),
                "per_sequence_min": rates[0] if rates else None,
                "per_sequence_median": rates[1] if rates else None,
                "per_sequence_max": rates[2] if rates else None,
                "over": "maskable (non-special) tokens",
            },
            "mix": {
                "mask": share(self.mask, self.targets),
                "random": share(self.random, self.targets),
                "keep": share(self.keep, self.targets),
            },
            "mix_counts": {"mask": self.mask, "random": self.random, "keep": self.keep},
            "unit_lengths": {
                "tokens": {str(k): v for k, v in sorted(self.unit_tokens.items())},
                "words": {str(k): v for k, v in sorted(self.unit_words.items())},
                "mean_tokens": share(
                    sum(k * v for k, v in self.unit_tokens.items()), sum(self.unit_tokens.values())
                ),
                "mean_words": share(
                    sum(k * v for k, v in self.unit_words.items()), sum(self.unit_words.values())
                ),
            },
            "multiword_share": share(self.multiword_targets, self.targets),
            "within_word_leakage": share(self.leaked_targets, self.targets),
            "tokens_per_word": share(self.maskable, self.words),
        }
        out.update(context)
        return out


def batch_stats(
    *,
    masked_ids: np.ndarray,
    labels: np.ndarray,
    unit_ids: np.ndarray,
    word_ids: np.ndarray,
    attention_mask: np.ndarray,
    mask_token_id: int,
    **context: Any,
) -> dict[str, Any]:
    """Statistics of one batch of rows as a dict (same keys as stats.json).

    >>> batch_stats(masked_ids=np.array([[1, 9, 5]]), labels=np.array([[-100, 4, -100]]),
    ...     unit_ids=np.array([[-1, 0, 1]]), word_ids=np.array([[-1, 0, 1]]),
    ...     attention_mask=np.array([[1, 1, 1]]), mask_token_id=9)["masking_rate"]["corpus"]
    0.5
    """
    s = MaskStats()
    s.add(masked_ids=masked_ids, labels=labels, unit_ids=unit_ids, word_ids=word_ids,
          attention_mask=attention_mask, mask_token_id=mask_token_id)
    return s.to_dict(**context)
