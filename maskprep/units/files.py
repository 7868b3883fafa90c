"""Unit vocabulary files: ``units.parquet``, the ``units.tsv`` beside it, and the terminal listing.

``write_units`` stores a ``UnitVocabulary`` as ``units.parquet`` (text, length,
count, score, token ids and word keys per unit, best first, with the measure,
options, tokenizer hash and counts source in the file's metadata) plus a
human-readable ``units.tsv``, both atomically. ``read_units`` loads the
Parquet file back and refuses files of another kind or format version;
``read_units_for`` gives the units for the tokenizer of a run: as they are
when they were built with it, re-derived when another tokenizer has the same
words (see retarget.py), refused with the reason otherwise.
``format_top_units`` lists the best units of each length for the terminal.

It does not choose units from counts (see units.py).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Union

import numpy as np

from .._version import __version__
from .cohesion import Measure
from ..errors import MaskprepError
from ..wording import plural
from .._arrow import arrow_array, arrow_strings, numpy_of
from .._files import atomic_path
from .select import UnitVocabulary

__all__ = [
    "write_units",
    "read_units",
    "read_units_for",
    "format_top_units",
    "UNITS_FORMAT_VERSION",
]

UNITS_FORMAT_VERSION = 1
"""Version of the ``units.parquet`` layout."""
METADATA_KEY = b"maskprep"
_KIND = "units"
_COLUMNS = ("text", "n", "count", "score", "token_ids", "word_keys")


def write_units(vocab: UnitVocabulary, path: Union[str, Path]) -> tuple[Path, Path]:
    """Write ``units.parquet`` and ``units.tsv`` beside it, atomically; return both paths.

    >>> write_units(vocab, "out/units.parquet")  # doctest: +SKIP
    (PosixPath('out/units.parquet'), PosixPath('out/units.tsv'))
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = Path(path)
    if path.suffix != ".parquet":
        raise MaskprepError(f"-o {path}: give a .parquet file name (a .tsv is written beside it)")
    n = np.asarray(vocab.n, dtype=np.int64)
    meta = {"kind": _KIND, "format_version": UNITS_FORMAT_VERSION, "measure": vocab.measure.value,
            "options": dict(vocab.options), "tokenizer_hash": vocab.tokenizer_hash,
            "source": dict(vocab.source), "maskprep_version": __version__,
            "word_splitting": dict(vocab.word_splitting)}
    schema = pa.schema([("text", pa.string()), ("n", pa.int32()), ("count", pa.int64()),
                        ("score", pa.float64()), ("token_ids", pa.list_(pa.int32())),
                        ("word_keys", pa.list_(pa.uint64()))],
                       metadata={METADATA_KEY: json.dumps(meta, sort_keys=True).encode("utf-8")})
    table = pa.table(
        [
            arrow_strings(vocab.text, large=False),
            arrow_array(n.astype(np.int32)),
            arrow_array(np.asarray(vocab.count, np.int64)),
            arrow_array(np.asarray(vocab.score, np.float64)),
            _list_array(vocab.token_ids, np.int32),
            _list_array(vocab.word_keys, np.uint64),
        ],
        schema=schema,
    )
    with atomic_path(path) as tmp:
        pq.write_table(table, tmp)
    tsv = path.with_suffix(".tsv")
    lines = ["rank\tn\tcount\tscore\ttext"]
    lines += [
        f"{i + 1}\t{int(k)}\t{int(c)}\t{float(s):.6f}\t{t}"
        for i, (k, c, s, t) in enumerate(
            zip(n.tolist(), vocab.count.tolist(), vocab.score.tolist(), vocab.text)
        )
    ]
    with atomic_path(tsv) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path, tsv


def _list_array(arrays: tuple[np.ndarray, ...], dtype: Any) -> Any:
    import pyarrow as pa

    flat = np.concatenate(arrays).astype(dtype) if arrays else np.zeros(0, dtype)
    offsets = np.concatenate([[0], np.cumsum([len(a) for a in arrays], dtype=np.int64)]).astype(
        np.int32
    )
    return pa.ListArray.from_arrays(arrow_array(offsets), arrow_array(flat))


def read_units(path: Union[str, Path]) -> UnitVocabulary:
    """Load a ``units.parquet`` written by ``write_units``.

    ``vocab = read_units("units.parquet")``
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = Path(path)
    if not path.is_file():
        raise MaskprepError(
            f"{path}: units file not found; make one with maskprep units COUNTS_DIR -o {path}"
        )
    try:
        table = pq.ParquetFile(path).read()  # not read_table: that imports pandas (0.2 s)
    except (pa.ArrowException, OSError) as exc:
        raise MaskprepError(
            f"{path}: not a Parquet file ({exc}); give the units.parquet written by maskprep units"
        ) from None
    raw = (table.schema.metadata or {}).get(METADATA_KEY)
    try:
        meta = json.loads(raw) if raw is not None else None
    except (UnicodeDecodeError, json.JSONDecodeError):
        meta = None
    if not isinstance(meta, dict) or meta.get("kind") != _KIND:
        raise MaskprepError(
            f"{path}: not a units file (no maskprep units metadata); give the units.parquet "
            "written by maskprep units"
        )
    if meta.get("format_version") != UNITS_FORMAT_VERSION:
        raise MaskprepError(
            f"{path}: units format_version {meta.get('format_version')!r}, but this maskprep "
            f"reads version {UNITS_FORMAT_VERSION}; re-run maskprep units with this version"
        )
    missing = [c for c in _COLUMNS if c not in table.schema.names]
    if missing:
        raise MaskprepError(
            f"{path}: missing column(s) {', '.join(missing)}; not a complete units file, "
            "re-run maskprep units"
        )
    measure = Measure.parse(meta.get("measure", ""), option=f"{path}: measure")
    n = numpy_of(table.column("n"), np.int64).copy()  # not to_numpy: it imports pandas (0.2 s)
    return UnitVocabulary(
        text=tuple(table.column("text").to_pylist()),
        n=n,
        count=numpy_of(table.column("count"), np.int64).copy(),
        score=numpy_of(table.column("score"), np.float64).copy(),
        token_ids=_split_lists(table.column("token_ids"), np.int32),
        word_keys=_split_lists(table.column("word_keys"), np.uint64),
        measure=measure,
        options=meta.get("options", {}),
        tokenizer_hash=meta.get("tokenizer_hash", ""),
        source=meta.get("source", {}),
        word_splitting=meta.get("word_splitting") or {},
    )


def read_units_for(path: Union[str, Path], info: Any, words: Any = None) -> UnitVocabulary:
    """The units of `path` for tokenizer `info` (a ``TokenizerInfo``) and word definition `words`.

    Units counted with another word definition than `words` (a ``WordsConfig``;
    None: the tokenizer's words) are refused: their word keys mean other words.

    Units built with this tokenizer come back as they are. Units built with
    another one come back with token ids re-derived when both tokenizers have
    the same words (``retarget.retarget_units``; ``source["units_tokenizer_hash"]``
    then names the building tokenizer); otherwise `MaskprepError` says which part
    of the word splitting, or which unit words, differ.

    >>> vocab = read_units_for("units.parquet", info)  # doctest: +SKIP
    """
    from .retarget import retarget_units

    vocab = read_units(path)
    want = words.describe() if words is not None else {"definition": "tokenizer"}
    have = dict(vocab.source).get("words", {"definition": "tokenizer"})
    if have != want:
        raise MaskprepError(f"--units {path}: the units were counted with --words "
                            f"{json.dumps(have, sort_keys=True)}, this run uses "
                            f"{json.dumps(want, sort_keys=True)}; rebuild them with maskprep count "
                            "--words ... and maskprep units, or pass the same --words")
    if len(vocab) == 0:
        raise MaskprepError(
            f"--units {path}: holds no units, so --strategy pmi would mask single words only; "
            "rebuild it with maskprep units (a lower --min-count, or larger counts), or use "
            "--strategy word"
        )
    if vocab.tokenizer_hash == info.hash:
        return vocab
    return retarget_units(vocab, info, path=path)


def _split_lists(column: Any, dtype: Any) -> tuple[np.ndarray, ...]:
    arr = column.combine_chunks() if column.num_chunks != 1 else column.chunk(0)
    if len(arr) == 0:
        return ()
    offsets = numpy_of(arr.offsets, np.int64)
    values = numpy_of(arr.values, dtype).copy()
    return tuple(np.split(values[offsets[0]:offsets[-1]], offsets[1:-1] - offsets[0]))


def format_top_units(vocab: UnitVocabulary, *, per_length: int = 10) -> str:
    """The best `per_length` units of each length, for the terminal.

    >>> print(format_top_units(vocab, per_length=3))  # doctest: +SKIP
    """
    unit = " in nats" if vocab.measure in (Measure.PMI, Measure.PMI_NAIVE) else ""
    n = np.asarray(vocab.n, dtype=np.int64)
    lengths = np.unique(n).tolist()
    head = (
        f"{plural(len(vocab), 'unit')} by {vocab.measure.value} "
        f"(range {vocab.measure.range_text}), "
        + ", ".join(f"{int((n == k).sum())} of {k} words" for k in lengths)
    )
    if not len(vocab):
        return (
            f"0 units by {vocab.measure.value}: no n-gram passed the filters "
            "(count, positive association)"
        )
    lines = [head, _filters_line(vocab)]
    for k in lengths:
        idx = np.flatnonzero(n == k)[:per_length]
        lines.append(f"\n{k} words (top {len(idx)}):")
        lines.append(f"  {'rank':>6}  {'score':>10}  {'count':>10}  text")
        for i in idx.tolist():
            lines.append(
                f"  {i + 1:>6}  {vocab.score[i]:>10.4f}  {int(vocab.count[i]):>10}  {vocab.text[i]}"
            )
    lines.append(f"\nscores{unit}; higher is more cohesive")
    return "\n".join(lines)


def _filters_line(vocab: UnitVocabulary) -> str:
    """What the edge-word and fragment filters did, in one line (empty parts left out)."""
    opts, src = vocab.options, vocab.source
    k, share = int(opts.get("edge_words", 0) or 0), float(opts.get("fragment_share", 0) or 0)
    words = list(src.get("edge_word_list", []))
    parts = []
    if k > 0:
        shown = ", ".join(words[:12]) + (", ..." if len(words) > 12 else "")
        parts.append(
            f"{plural(int(src.get('dropped_edge', 0)), 'candidate')} began or ended with one of "
            f"the {plural(len(words), 'most frequent word')} ({shown})"
        )
    if share > 0:
        frags = int(src.get("dropped_fragment", 0))
        parts.append(
            f"{frags:,} {'was a fragment' if frags == 1 else 'were fragments'} "
            f"(one n-gram a word longer holds >= {share:g} of their occurrences)"
        )
    if not parts:
        return "filters: none (--edge-words 0 --fragment-share 0)"
    return "left out: " + "; ".join(parts)
