"""The audit's word forms and its list of the most fragmented frequent words.

A word (one key: its decoded text, whitespace stripped) can be written by a
tokenizer in more than one *form*: byte-level and metaspace vocabularies encode
it one way after a space ("Ġimported") and another way without one ("imported"
after a bracket). The audit counts every form apart, keyed by the word key and
a 64-bit hash of the form's token ids, so a listed word shows the pieces of a
form beside that form's own figure, never the pieces of one form beside the
average of all of them.

`select_fragmented` is the one rule that decides which words are listed, for
audit.json, the terminal and the page alike: among the most frequent word
types, those whose most frequent form takes two tokens or more, most pieces
first. `maskprep.tokenizer.pieces.readable_pieces` turns token ids into the text of each piece.

It measures nothing itself: the counts come from `measure`.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from ..tokenizer.encoding import TokenizerInfo, WordType
from ..tokenizer.pieces import JOIN, PARTIAL, SPACE_MARK, readable_pieces

#: Multiplier of the form hash (odd, so multiplication is invertible mod 2^64).
_MULT = 0x9E3779B97F4A7C15
_MASK = (1 << 64) - 1
def form_hashes(ids: np.ndarray, word_offsets: np.ndarray) -> np.ndarray:
    """A uint64 hash of each word's token ids: sum of (id + 1) * M^(position + 1), plus the length.

    >>> form_hashes(np.array([5, 6, 5], np.int32), np.array([0, 2, 3])).tolist() == [
    ...     form_hash([5, 6]), form_hash([5])]
    True
    """
    lengths = np.diff(word_offsets)
    if len(lengths) == 0:
        return np.zeros(0, np.uint64)
    starts = word_offsets[:-1]
    pos = np.arange(len(ids), dtype=np.int64) - np.repeat(starts, lengths)
    with np.errstate(over="ignore"):
        powers = np.cumprod(np.full(int(lengths.max()), _MULT, dtype=np.uint64))
        contrib = (ids.astype(np.uint64) + np.uint64(1)) * powers[pos]
        return np.add.reduceat(contrib, starts) + lengths.astype(np.uint64)


def form_hash(ids: Sequence[int]) -> int:
    """The hash of `form_hashes` for one word, in plain Python."""
    h, power = 0, 1
    for i in ids:
        power = (power * _MULT) & _MASK
        h = (h + (int(i) + 1) * power) & _MASK
    return (h + len(ids)) & _MASK


def main_forms(
    word_of_form: np.ndarray, occ: np.ndarray, fhash: np.ndarray, words: int
) -> np.ndarray:
    """Index of each word's most frequent form (ties: the smaller hash), int64 [words]."""
    order = np.lexsort((fhash, -occ, word_of_form))
    first = np.r_[True, word_of_form[order][1:] != word_of_form[order][:-1]]
    out = np.full(words, -1, np.int64)
    out[word_of_form[order][first]] = order[first]
    return out


def select_fragmented(
    ranked: np.ndarray,
    main_tokens: np.ndarray,
    mean_tokens: np.ndarray,
    *,
    frequent_types: int,
    top_words: int,
) -> np.ndarray:
    """The listed words, as positions in ``ranked`` (word indices, most frequent first).

    Among the first ``frequent_types`` of ``ranked``, the words whose most frequent form has 2+
    tokens; most tokens first, then the higher mean over all forms, then the more frequent.

    >>> select_fragmented(np.array([0, 1, 2]), np.array([1, 3, 2]), np.array([1.0, 3.0, 1.5]),
    ...                   frequent_types=3, top_words=5).tolist()
    [1, 2]
    """
    frequent = ranked[:frequent_types]
    pos = np.arange(len(frequent))
    split = main_tokens[frequent] >= 2
    pos, frequent = pos[split], frequent[split]
    order = np.lexsort((pos, -mean_tokens[frequent], -main_tokens[frequent]))
    return np.asarray(pos[order][:top_words], dtype=np.int64)


def cached_forms(forms: Iterable[WordType], keys: Iterable[int]) -> dict[int, list[WordType]]:
    """The forms of these word keys among `forms` (the word types the audit's tasks saw), by key."""
    wanted = set(keys)
    out: dict[int, list[WordType]] = {}
    for wt in forms:
        if wt.key in wanted:
            out.setdefault(wt.key, []).append(wt)
    return out


def shown_forms(info: TokenizerInfo, forms: Sequence[Sequence[int]]) -> list[str]:
    """The pieces of each form of one word (forms given as token ids), joined by ``·``.

    A leading space is shown as ``␣`` where the word's forms differ in it or
    where a token holds nothing but the space; elsewhere it is left out (every
    WordPiece word starts a new piece without writing a space).
    """
    decoded = [readable_pieces(info, ids) for ids in forms]
    leads = {lead for _, lead in decoded}
    out = []
    for pieces, lead in decoded:
        shown = list(pieces)
        if lead and shown:
            rest = shown[0].lstrip()
            keep = len(leads) > 1 or not rest
            shown[0] = (SPACE_MARK if keep else "") + rest
        shown = [p if p else PARTIAL for p in shown]
        out.append(JOIN.join(p.replace(" ", SPACE_MARK) for p in shown))
    return out


def fragmented_words(result: dict[str, Any], limit: int | None = None) -> list[dict[str, Any]]:
    """The rows of one tokenizer's list that can be shown (text and pieces known), up to ``limit``.

    The list itself is chosen by `select_fragmented` when the audit runs, so
    the terminal, the page and audit.json show the same words.
    """
    rows = [
        w for w in result.get("worst_words", []) if w.get("word") is not None and w.get("pieces")
    ]
    return rows if limit is None else rows[:limit]
