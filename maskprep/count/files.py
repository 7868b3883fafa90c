"""The files of a counts directory: word texts, and `ngrams-<n>.parquet` in final order.

`Vocabulary` gathers word key -> canonical text from every counting task and
raises if two different texts share one key (they are never merged).
`write_ngrams` turns the merged, pruned key ranges of one n into a Parquet
file with columns `text`, `count`, `w0`..`w{n-1}`, ordered by count
descending, then by the canonical (fingerprint, keys) order of ngram_kernels.py,
using a fixed row-group size so the bytes never depend on memory or workers.

It does not count or merge (ngrams.py, ngram_kernels.py, spill.py).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np

from .._arrow import arrow_array, arrow_strings, numpy_of
from .._files import fsync_file, replace
from ..errors import MaskprepError
from .spills import PartitionResult, merge_hist, read_rows

__all__ = ["Vocabulary", "write_ngrams", "collision_error", "publish", "ROW_GROUP"]

ROW_GROUP = 1 << 17             # rows per Parquet row group (fixed, so files are byte-identical)


def collision_error(key: int, a: str, b: str) -> MaskprepError:
    """The error for two different word texts under one 64-bit key."""
    return MaskprepError(
        f"word key collision: {a!r} and {b!r} share the 64-bit key {key:#018x}; the counts "
        "would merge two different words, so counting stopped (please report this)"
    )


def _string_parts(texts: Any) -> tuple[np.ndarray, np.ndarray]:
    """Offsets (int64 [m + 1], from 0) and UTF-8 bytes of an Arrow string array (no nulls)."""
    import pyarrow as pa

    if texts.null_count:
        raise ValueError("word texts hold nulls")
    wide = pa.types.is_large_string(texts.type)
    bufs = texts.buffers()
    offsets = np.frombuffer(bufs[1], np.int64 if wide else np.int32)
    offsets = offsets[texts.offset: texts.offset + len(texts) + 1].astype(np.int64)
    data = np.frombuffer(bufs[2], np.uint8) if bufs[2] is not None else np.zeros(0, np.uint8)
    if not len(offsets):  # an empty array may have no offsets buffer content
        return np.zeros(1, np.int64), data[:0]
    return offsets - offsets[0], data[offsets[0]: offsets[-1]]


def take_strings(texts: Any, index: np.ndarray | None = None) -> Any:
    """The strings at `index` (all if None) of Arrow string arrays (one, chunked, or a list
    of them, taken as one), as one large_string array.

    Numpy only: Arrow's own take, filter and cast load ``pyarrow.compute`` (a few
    hundredths of a second in every counting process).

    >>> take_strings(arrow_strings(["to", "be", "or"]), np.array([2, 0])).to_pylist()
    ['or', 'to']
    """
    import pyarrow as pa

    arrays = texts if isinstance(texts, list) else [texts]
    chunks = [c for a in arrays for c in (a.chunks if isinstance(a, pa.ChunkedArray) else [a])]
    parts = [_string_parts(c) for c in chunks]
    lens = np.concatenate([np.diff(o) for o, _ in parts]) if parts else np.zeros(0, np.int64)
    data = np.concatenate([d for _, d in parts]) if parts else np.zeros(0, np.uint8)
    starts = np.zeros(len(lens) + 1, np.int64)
    np.cumsum(lens, out=starts[1:])
    if index is not None:
        index = np.asarray(index, np.int64)
        first, lens = starts[index], lens[index]
        offsets = np.zeros(len(index) + 1, np.int64)
        np.cumsum(lens, out=offsets[1:])
        data = data[np.repeat(first - offsets[:-1], lens) + np.arange(offsets[-1])]
    else:
        offsets = starts
    return pa.Array.from_buffers(pa.large_string(), len(offsets) - 1,
                                 [None, pa.py_buffer(offsets), pa.py_buffer(data)])


def _same_strings(texts: Any, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """bool [k]: string a[i] of `texts` equals string b[i] (byte for byte)."""
    offsets, data = _string_parts(texts)
    la, lb = np.diff(offsets)[a], np.diff(offsets)[b]
    same = la == lb
    k = np.flatnonzero(same & (la > 0))
    if len(k):
        lens = la[k]
        ends = np.cumsum(lens)
        step = np.arange(int(ends[-1])) - np.repeat(ends - lens, lens)
        left = data[np.repeat(offsets[a[k]], lens) + step]
        differ = left != data[np.repeat(offsets[b[k]], lens) + step]
        bad = np.add.reduceat(differ, ends - lens) > 0
        same[k[bad]] = False
    return same


class Vocabulary:
    """Word key -> canonical text over all tasks; two texts under one key raise.

    >>> v = Vocabulary(); v.add_file("spill/t000000-words.arrow"); v.finish()  # doctest: +SKIP
    >>> v.join(np.array([[key_to, key_be, 3]], np.uint64), 2).to_pylist()  # doctest: +SKIP
    ['to be']
    """

    def __init__(self) -> None:

        self.keys = np.zeros(0, np.uint64)
        self.texts: Any = arrow_strings([])
        self._pending: list[Any] = []
        self._pending_rows = 0

    def add_file(self, path: str) -> None:
        import pyarrow as pa

        with pa.memory_map(path) as source:
            table = pa.ipc.open_file(source).read_all()
        self._pending.append(table)
        self._pending_rows += table.num_rows
        if self._pending_rows > len(
            self.keys
        ):  # merge when the pending words double the vocabulary
            self.finish()

    def add_words(self, keys: np.ndarray, texts: Any) -> None:
        """Add words given as uint64 keys and an Arrow string array (or chunked array) of texts."""
        import pyarrow as pa

        texts = take_strings(texts)  # one large_string array, as `arrow_strings` makes
        self._pending.append(pa.table({"key": arrow_array(keys), "text": texts}))
        self._pending_rows += len(keys)

    def finish(self) -> None:
        if not self._pending:
            return
        keys = np.concatenate([self.keys] + [numpy_of(t.column("key")) for t in self._pending])
        texts = take_strings([self.texts] + [t.column("text") for t in self._pending])
        self._pending, self._pending_rows = [], 0
        order = np.argsort(keys, kind="stable")
        keys = keys[order]
        texts = take_strings(texts, order)
        dup = np.flatnonzero(keys[1:] == keys[:-1])
        if len(dup):
            differ = ~_same_strings(texts, dup, dup + 1)
            if differ.any():
                i = int(dup[np.argmax(differ)])
                raise collision_error(int(keys[i]), texts[i].as_py(), texts[i + 1].as_py())
            keep = np.ones(len(keys), bool)
            keep[dup + 1] = False
            keys, texts = keys[keep], take_strings(texts, np.flatnonzero(keep))
        self.keys, self.texts = keys, texts

    def save(self, path: str) -> None:
        """Write the merged vocabulary (key, text) as an Arrow file, for tasks to load."""
        import pyarrow as pa

        self.finish()
        table = pa.table({"key": arrow_array(self.keys), "text": self.texts})
        with pa.OSFile(path, "wb") as sink, pa.ipc.new_file(sink, table.schema) as w:
            w.write_table(table)

    def join(self, rows: np.ndarray, n: int) -> Any:
        """The `text` column for rows of word keys: their words' texts joined by one space."""
        import pyarrow as pa
        import pyarrow.compute as pc

        m = rows.shape[0]
        query = np.ascontiguousarray(
            rows[:, :n]
        ).ravel()  # row by row: the words of an n-gram side by side
        index = pc.index_in(arrow_array(query), value_set=arrow_array(self.keys))
        if index.null_count:
            raise RuntimeError("internal error: an n-gram word has no text in the vocabulary")
        words = self.texts.take(index)
        if n == 1:
            return words.cast(pa.string())
        lists = pa.LargeListArray.from_arrays(
            arrow_array(np.arange(0, m * n + 1, n, dtype=np.int64)), words
        )
        return pc.binary_join(lists, arrow_strings([" "])[0]).cast(pa.string())


class _ParquetSink:
    """Write rows in order as fixed-size row groups, so the file does not depend on how rows
    arrive."""

    def __init__(self, path: Path, n: int, vocab: Vocabulary) -> None:
        import pyarrow as pa
        import pyarrow.parquet as pq

        self.n = n
        self.vocab = vocab
        self.schema = pa.schema([("text", pa.string()), ("count", pa.int64())]
                                + [(f"w{j}", pa.uint64()) for j in range(n)])
        # word keys are hashes (incompressible): only text and count are compressed
        compression = {"text": "snappy", "count": "snappy"} | {f"w{j}": "none" for j in range(n)}
        self.writer = pq.ParquetWriter(
            str(path),
            self.schema,
            compression=compression,
            use_dictionary=False,
            write_statistics=["count"],
        )
        self.pending: list[Any] = []
        self.pending_rows = 0

    def append(self, rows: np.ndarray) -> None:
        import pyarrow as pa

        if rows.shape[0] == 0:
            return
        n = self.n
        arrays = [self.vocab.join(rows, n), arrow_array(rows[:, n].astype(np.int64))]
        arrays += [arrow_array(np.ascontiguousarray(rows[:, j])) for j in range(n)]
        self.pending.append(pa.Table.from_arrays(arrays, schema=self.schema))
        self.pending_rows += rows.shape[0]
        if self.pending_rows >= ROW_GROUP:
            self._emit(final=False)

    def _emit(self, *, final: bool) -> None:
        import pyarrow as pa

        table = pa.concat_tables(self.pending)
        k = table.num_rows if final else (table.num_rows // ROW_GROUP) * ROW_GROUP
        if k:
            self.writer.write_table(table.slice(0, k), row_group_size=ROW_GROUP)
        rest = table.slice(k)
        self.pending = [rest] if rest.num_rows else []
        self.pending_rows = rest.num_rows

    def close(self) -> None:
        if self.pending_rows:
            self._emit(final=True)
        self.writer.close()


def _count_desc_order(counts: np.ndarray) -> np.ndarray:
    """Stable order by count descending (a plain sort with the index packed in the low bits)."""
    m = len(counts)
    if m == 0:
        return np.zeros(0, np.intp)
    hi, lo = int(counts.max()), int(counts.min())
    ib = max(1, (m - 1).bit_length())
    if (hi - lo).bit_length() + ib > 64:
        return np.argsort(-counts.astype(np.int64), kind="stable")
    packed = (np.uint64(hi) - counts.astype(np.uint64)) << np.uint64(ib) | np.arange(
        m, dtype=np.uint64
    )
    packed.sort()
    return (packed & np.uint64((1 << ib) - 1)).astype(np.intp)


def write_ngrams(
    path: Path, n: int, parts: list[PartitionResult], vocab: Vocabulary, band_rows: int
) -> None:
    """Write the kept rows of one n, count descending, ties in canonical (fingerprint, keys) order.

    >>> write_ngrams(Path("ngrams-2.parquet"), 2, parts, vocab, 1 << 20)  # doctest: +SKIP

    Partitions hold kept rows in canonical order, so a stable sort by count of
    their concatenation is the final order. Rows are handled in bands of count
    values of at most `band_rows` rows; a single count value with more rows is
    already in order and is streamed.
    """
    values, rows = merge_hist([p.hist_values for p in parts], [p.hist_rows for p in parts])
    bands: list[tuple[int, int]] = []
    acc = 0
    for v, r in zip(
        values[::-1].tolist(), rows[::-1].tolist()
    ):  # one step per distinct count value
        if bands and acc + r <= band_rows:
            bands[-1] = (bands[-1][0], v)
            acc += r
        else:
            bands.append((v, v))
            acc = r
    sink = _ParquetSink(path, n, vocab)
    try:
        for hi, lo in bands:
            pieces = []
            for p in parts:
                for s in range(0, p.kept, band_rows):
                    block = read_rows(p.path, n + 1, s, min(s + band_rows, p.kept))
                    if len(bands) > 1:
                        c = block[:, n]
                        block = block[(c >= np.uint64(lo)) & (c <= np.uint64(hi))]
                    if hi == lo:
                        sink.append(block)
                    else:
                        pieces.append(block)
            if hi != lo and pieces:
                table = np.concatenate(pieces)
                del pieces
                sink.append(table[_count_desc_order(table[:, n])])
    finally:
        sink.close()


# ---------------------------------------------------------------- the directory

def publish(staged: Path, output: Path, max_n: int) -> None:
    """Rename the finished files into place; counts.json (the mark of a finished count) goes
    last."""
    for n in range(1, max_n + 1):
        fsync_file(staged / f"ngrams-{n}.parquet")  # on disk before anything is renamed
    (output / "counts.json").unlink(missing_ok=True)
    for n in range(1, max_n + 1):
        replace(staged / f"ngrams-{n}.parquet", output / f"ngrams-{n}.parquet")
    for stale in output.glob("ngrams-*.parquet"):
        m = re.fullmatch(r"ngrams-(\d+)\.parquet", stale.name)
        if m and int(m.group(1)) > max_n:
            stale.unlink()
    replace(staged / "tokenizer.json", output / "tokenizer.json")
    replace(staged / "counts.json", output / "counts.json")
