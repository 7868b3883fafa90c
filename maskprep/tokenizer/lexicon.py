"""Cut runs of characters into words of a learnt vocabulary (``--words cohesion``).

`segment_with_lexicon` uses the pmi strategy's dynamic programme
(`maskprep.masking.strategies.pmi_word_starts`) over characters: the
segmentation of a run into vocabulary words and single characters with the
largest total score. A run is cut into pieces of at most `ROW` characters from
its start, so the words of a run never depend on batch sizes or workers.
The vocabulary itself is learnt by `maskprep.units.words.learn_words`.
"""

from __future__ import annotations

from typing import Any

import numpy as np


ROW = 32             # runs are segmented in pieces of at most this many characters
_U64 = np.uint64


_TABLES: dict[str, Any] = {}


def _unit_table(words: Any) -> Any:
    from ..masking.strategies import UnitTable

    key = words.lexicon_sha256() or ""
    table = _TABLES.get(key)
    if table is None:
        by_n: dict[int, tuple[list[list[int]], list[float]]] = {}
        for w, s in zip(words.lexicon, words.scores):
            keys, scores = by_n.setdefault(len(w), ([], []))
            keys.append([ord(ch) for ch in w])
            scores.append(s)
        table = UnitTable.from_by_length({n: (np.array(k, _U64), np.array(s, np.float64))
                                          for n, (k, s) in by_n.items()})
        if len(_TABLES) > 4:
            _TABLES.clear()
        _TABLES[key] = table
    return table


def segment_with_lexicon(text: str, starts: np.ndarray, ends: np.ndarray, words: Any) -> np.ndarray:
    """Word start positions (in `text`) of the runs [starts, ends) under a learnt vocabulary."""
    from ..masking.strategies import pmi_word_starts

    if len(starts) == 0:
        return np.zeros(0, np.int64)
    codes = np.frombuffer(text.encode("utf-32-le", errors="surrogatepass"), dtype=np.uint32)
    # pieces of at most ROW characters, from each run's start
    lens = ends - starts
    pieces = (lens + ROW - 1) // ROW
    run_of = np.repeat(np.arange(len(starts)), pieces)
    k = np.arange(len(run_of)) - np.repeat(np.cumsum(pieces) - pieces, pieces)
    p_start = starts[run_of] + k * ROW
    p_len = np.minimum(ROW, ends[run_of] - p_start)
    B = len(p_start)
    col = np.arange(ROW)
    pos = p_start[:, None] + col[None, :]
    inside = col[None, :] < p_len[:, None]
    keys = np.where(inside, codes[np.minimum(pos, len(codes) - 1)], 0).astype(_U64)
    kinds = np.where(inside & (keys < 0x10000), 0, 1).astype(np.int8)
    word_ids = np.broadcast_to(col, (B, ROW))
    special = np.zeros((B, ROW), bool)
    wstart = pmi_word_starts(special, word_ids, keys, kinds, units=_unit_table(words))
    return pos[wstart & inside].astype(np.int64)
