"""The word table of one encode task: its distinct words, numbered in the order first seen.

A word type is one distinct word of the task, identified exactly by its token
ids (with the word definition, which is one per task). Every per-word field
of `EncodedBatch` (key, kind, characters) is a function of those ids, so the
types are exactly the distinct combinations of ids and fields. New types of
a batch are numbered in the order of (key, kind, characters, packed ids), the
order the format has always used, so the files stay the same byte for byte.

`TypeIndex.assign` takes a batch with its `WordGroups` (the distinct words the
grouping found), so the words are not grouped a second time; `TypeIndex.table`
gives the task's ``words-T.arrow`` table. The layout of that table is in
`maskprep.encoded.format`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .._arrow import arrow_array, arrow_strings
from ..tokenizer.encoding import EncodedBatch, WordGroups
from .format import PER_WORD

__all__ = ["TypeIndex"]

_FIELD_DTYPES = {"word_keys": np.uint64, "word_kinds": np.int8, "word_chars": np.int32}


class TypeIndex:
    """Word types of one task, first seen first: ``local = index.assign(batch, groups)``."""

    def __init__(self) -> None:
        self.index: dict[bytes, int] = {}
        self.ids: list[np.ndarray] = []
        self.lengths: list[np.ndarray] = []
        self.fields: dict[str, list[np.ndarray]] = {name: [] for name in PER_WORD}
        self.texts: list[str] = []

    def __len__(self) -> int:
        return len(self.texts)

    def assign(self, batch: EncodedBatch, groups: WordGroups) -> np.ndarray:
        """The type index (uint32) of every word of the batch; new types are added."""
        if batch.num_words == 0:
            return np.zeros(0, np.uint32)
        index = self.index
        local = np.fromiter(
            (index.get(k, -1) for k in groups.keys), dtype=np.int64, count=len(groups.keys)
        )
        new = np.flatnonzero(local < 0)
        if len(new):
            new = new[self._order(batch, groups, new)]
            start = len(index)
            for j, i in enumerate(new.tolist(), start):
                index[groups.keys[i]] = j
            local[new] = np.arange(start, start + len(new), dtype=np.int64)
            self._add(batch, groups, new)
        return local[groups.inverse].astype(np.uint32)

    @staticmethod
    def _order(batch: EncodedBatch, groups: WordGroups, new: np.ndarray) -> np.ndarray:
        """New types in the order of their (key, kind, characters, packed ids) as uint64s."""
        words = groups.first[new]
        cols = [np.asarray(getattr(batch, name))[words].astype(np.int64).view(np.uint64)
                for name in PER_WORD]
        cols += list(groups.rows[new].T)
        if len(cols) == 1:
            return np.argsort(cols[0], kind="stable")
        return np.lexsort(cols[::-1])

    def _add(self, batch: EncodedBatch, groups: WordGroups, new: np.ndarray) -> None:
        words = groups.first[new]
        wo = batch.word_offsets
        lengths = (wo[words + 1] - wo[words]).astype(np.int64)
        starts = np.repeat(wo[words] - np.concatenate(([0], np.cumsum(lengths)[:-1])), lengths)
        flat_ids = batch.ids[starts + np.arange(int(lengths.sum()), dtype=np.int64)]
        self.ids.append(flat_ids.astype(np.int32))
        self.lengths.append(lengths)
        for name in PER_WORD:
            self.fields[name].append(np.asarray(getattr(batch, name))[words])
        types = groups.types
        self.texts.extend(types[i].text for i in new.tolist())

    def table(self, ids_type: Any) -> Any:
        """The task's word table (pyarrow): ids, then the per-word fields, then the text."""
        import pyarrow as pa

        lengths = np.concatenate(self.lengths) if self.lengths else np.zeros(0, np.int64)
        offsets = np.zeros(len(lengths) + 1, np.int32)
        np.cumsum(lengths, out=offsets[1:])
        flat = np.concatenate(self.ids) if self.ids else np.zeros(0, np.int32)
        cols = {
            "ids": pa.ListArray.from_arrays(
                arrow_array(offsets), arrow_array(flat.astype(ids_type.to_pandas_dtype()))
            )
        }
        for name, col in PER_WORD.items():
            parts = self.fields[name]
            cols[col] = arrow_array(
                np.concatenate(parts) if parts else np.zeros(0, _FIELD_DTYPES[name])
            )
        cols["text"] = arrow_strings(self.texts, large=False)
        return pa.table(cols)
