"""The unit vocabulary: cohesive multi-word units chosen from exact n-gram counts.

``build_units`` reads a counts directory written by ``maskprep count``, scores
every n-gram of length >= 2 with a measure from ``maskprep.units.cohesion``, keeps
the n-grams that cohere, ranks them best first and returns a
``UnitVocabulary``.

Which n-grams are kept:

- only lengths >= 2, up to ``max_n`` (default: the longest counted);
- only n-grams counted at least ``min_count`` times (default: the counts'
  own ``--min-count``; smaller values are refused, those counts were pruned);
- only n-grams whose words attract: score > 0 for ``pmi``, ``pmi-naive``,
  ``npmi`` and ``t``; for ``llr``, which is unsigned, the n-gram must be more
  frequent than independence predicts on every binary split. N-grams that are
  rarer than chance never become units, however large their score;
- no n-gram that begins or ends with one of the corpus's ``edge_words`` most
  frequent words, and no fragment (an n-gram of which one n-gram a word longer
  holds at least ``fragment_share`` of the occurrences); see ``filters.py``.
  Both are on by default for every measure; 0 turns each off;
- the default measure is ``llr``: a significance measure, so an n-gram seen
  ``min_count`` times ranks below one seen often with the same strength,
  instead of the ties at ln(N / min_count) that ``pmi`` gives rare names. With
  the two filters it gave the best WordNet precision of every measure on real
  text (README, "Choosing units"; ``scripts/unit_precision.py``);
- ranking: score descending, then count descending, then text ascending (by
  UTF-8 bytes), so the order is fully deterministic;
- ``per_length`` (e.g. ``"2:0.5,3:0.3,4:0.1,5:0.1"``) splits ``top`` into
  per-length quotas (largest-remainder rounding). A length with fewer
  candidates than its quota passes the unused places to the other listed
  lengths in proportion to their shares. Lengths not listed get no units.
  Without it, all lengths compete in one ranking.

It does not write or read units files, nor list units for the terminal (see
unit_files.py); nor does it segment sequences into units (that is the ``pmi``
masking strategy, which consumes ``UnitVocabulary.by_length()``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any, Mapping, Union

import numpy as np

from .cohesion import MAX_N, Measure, NgramIndex, score_ngrams, score_with_split_pmi
from .filters import (
    DEFAULT_EDGE_WORDS,
    DEFAULT_FRAGMENT_SHARE,
    edge_ok,
    fragment_shares,
    frequent_words,
)
from .retarget import unit_token_ids, word_splitting
from .._checks import is_whole
from ..errors import MaskprepError
from .._files import read_json
from ..progress import Progress

__all__ = [
    "UnitVocabulary",
    "UnitOptions",
    "build_units",
    "parse_per_length",
    "DEFAULT_TOP",
    "DEFAULT_MEASURE",
    "OPTION_HELP",
]

COUNTS_FORMAT_VERSION = 1
"""Version of the counts directory this module reads."""
DEFAULT_TOP = 50_000
DEFAULT_MEASURE = Measure.LLR
_COUNTS_FIELDS = (
    "format_version",
    "N",
    "max_n",
    "min_count",
    "tokenizer_hash",
    "corpus_fingerprint",
)

OPTION_HELP: dict[str, str] = {
    "measure": "cohesion measure. "
    + "; ".join(m.description for m in Measure)
    + ". Units must attract: score > 0 (llr: more frequent than chance on every binary split).",
    "top": f"keep at most this many units, best first (default {DEFAULT_TOP:,}).",
    "min_count": "keep only n-grams counted at least this often (default and minimum: the --min-count "
    "given to maskprep count).",
    "per_length": "shares of --top per unit length, e.g. 2:0.5,3:0.3,4:0.1,5:0.1 (must add up to 1; unused "
    "places flow to the other listed lengths; unlisted lengths get none). Default: one ranking "
    "over all lengths.",
    "max_n": "longest unit in words, 2..the longest n-gram counted (default: all counted lengths).",
    "edge_words": f"no unit begins or ends with one of the corpus's K most frequent words (they may stand "
    f"inside a unit); 0: no such filter (default {DEFAULT_EDGE_WORDS}).",
    "fragment_share": "drop an n-gram when one n-gram a word longer holds at least this share of its "
    f"occurrences (a fragment of it); 0: keep fragments (default {DEFAULT_FRAGMENT_SHARE}).",
}
"""Help text for each option of ``maskprep units`` (keys are ``build_units`` keywords)."""


@dataclass(frozen=True)
class UnitOptions:
    """Options of one unit-vocabulary build (validated; see ``build_units``)."""

    measure: Measure
    top: int
    min_count: int
    max_n: int
    per_length: tuple[tuple[int, float], ...] | None = None
    edge_words: int = DEFAULT_EDGE_WORDS
    fragment_share: float = DEFAULT_FRAGMENT_SHARE

    def to_json(self) -> dict[str, Any]:
        return {
            "measure": self.measure.value,
            "top": self.top,
            "min_count": self.min_count,
            "max_n": self.max_n,
            "per_length": None
            if self.per_length is None
            else {str(n): s for n, s in self.per_length},
            "edge_words": self.edge_words,
            "fragment_share": self.fragment_share,
        }


@dataclass(frozen=True, eq=False)
class UnitVocabulary:
    """Ranked units, best first; arrays are aligned (unit i is row i).

    >>> from maskprep.units.files import read_units
    >>> vocab = read_units("units.parquet")  # doctest: +SKIP
    >>> vocab.text[0], vocab.n[0], vocab.by_length()[2][0].shape  # doctest: +SKIP
    ('new york', 2, (812, 2))
    """

    text: tuple[str, ...]
    n: np.ndarray  # int64 (m,)
    count: np.ndarray  # int64 (m,)
    score: np.ndarray  # float64 (m,)
    token_ids: tuple[np.ndarray, ...]  # int32 arrays, the unit as it appears after another word
    word_keys: tuple[np.ndarray, ...]  # uint64 arrays of length n[i]
    measure: Measure
    options: Mapping[str, Any] = field(default_factory=dict)
    tokenizer_hash: str = ""
    source: Mapping[str, Any] = field(default_factory=dict)  # N, corpus fingerprint, counts options
    word_splitting: Mapping[str, Any] = field(default_factory=dict)  # see retarget.word_splitting

    def __len__(self) -> int:
        return len(self.text)

    def by_length(self) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        """``{n: (word keys (m_n, n) uint64, scores (m_n,) float64)}``, rows in rank order.

        >>> keys, scores = vocab.by_length()[3]  # doctest: +SKIP
        """
        return self._by_length

    @cached_property
    def _by_length(self) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        n = np.asarray(self.n, dtype=np.int64)
        if len(n) == 0:
            return {}
        flat = np.concatenate(self.word_keys).astype(np.uint64)
        offsets = np.concatenate([[0], np.cumsum(n)])
        out: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        for length in np.unique(n).tolist():
            idx = np.flatnonzero(n == length)
            keys = flat[offsets[idx][:, None] + np.arange(length)]
            out[int(length)] = (keys, np.asarray(self.score, np.float64)[idx])
        return out


# ------------------------------------------------------------------ options

def parse_per_length(spec: Union[str, Mapping[int, float], None], *, max_n: int = MAX_N,
                     option: str = "--per-length") -> tuple[tuple[int, float], ...] | None:
    """Parse ``"2:0.5,3:0.5"`` into ``((2, 0.5), (3, 0.5))``; shares must add up to 1.

    >>> parse_per_length("3:0.25,2:0.75")
    ((2, 0.75), (3, 0.25))
    """
    if spec is None:
        return None
    example = "e.g. 2:0.5,3:0.3,4:0.1,5:0.1"
    if isinstance(spec, str):
        items: list[tuple[Any, Any]] = []
        for piece in spec.split(","):
            piece = piece.strip()
            if piece.count(":") != 1:
                raise MaskprepError(f"{option}: {piece!r} is not LENGTH:SHARE ({example})")
            items.append(tuple(p.strip() for p in piece.split(":")))  # type: ignore[arg-type]
    else:
        items = list(spec.items())
    shares: dict[int, float] = {}
    for raw_n, raw_share in items:
        try:
            length = int(raw_n)
        except (TypeError, ValueError):
            raise MaskprepError(
                f"{option}: length {raw_n!r} is not a whole number ({example})"
            ) from None
        try:
            share = float(raw_share)
        except (TypeError, ValueError):
            raise MaskprepError(
                f"{option}: share {raw_share!r} for length {length} is not a number ({example})"
            ) from None
        if not 2 <= length <= max_n:
            raise MaskprepError(f"{option}: length {length} is outside 2..{max_n} "
                                f"(units have 2 or more words, counted up to {max_n})")
        if not (math.isfinite(share) and 0.0 < share <= 1.0):
            raise MaskprepError(
                f"{option}: share {raw_share} for length {length} must be in (0, 1]"
            )
        if length in shares:
            raise MaskprepError(f"{option}: length {length} is given twice")
        shares[length] = share
    if not shares:
        raise MaskprepError(f"{option}: no LENGTH:SHARE pairs given ({example})")
    total = sum(shares.values())
    if abs(total - 1.0) > 1e-6:
        raise MaskprepError(
            f"{option}: the shares add up to {total:g}; they must add up to 1 ({example})"
        )
    return tuple(sorted(shares.items()))


def _quotas(top: int, shares: Mapping[int, float], available: Mapping[int, int]) -> dict[int, int]:
    """Split `top` by `shares` (largest remainder); unused places flow to lengths with room."""
    take = {n: 0 for n in shares}
    left = top
    while left > 0:
        room = {n: available[n] - take[n] for n in shares if available[n] > take[n]}
        if not room:
            break
        weight = sum(shares[n] for n in room)
        exact = {n: left * shares[n] / weight for n in room}
        alloc = {n: int(math.floor(exact[n])) for n in room}
        spare = left - sum(alloc.values())
        for n in sorted(room, key=lambda k: (-(exact[k] - alloc[k]), k))[:spare]:
            alloc[n] += 1
        placed = {n: min(alloc[n], room[n]) for n in room}
        take.update({n: take[n] + placed[n] for n in room})
        left -= sum(placed.values())
        if not any(placed.values()):
            break
    return take


# ------------------------------------------------------------------ counts directory

def _counts_meta(counts_dir: Path) -> dict[str, Any]:
    if not counts_dir.exists():
        raise MaskprepError(f"COUNTS_DIR {counts_dir}: not found; make it first with "
                            f"maskprep count CORPUS... -t TOKENIZER.json -o {counts_dir}")
    if not counts_dir.is_dir():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: is a file, not a counts directory written by maskprep count"
        )
    path = counts_dir / "counts.json"
    if not path.is_file():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: has no counts.json, so it is not a finished counts "
            "directory; re-run maskprep count"
        )
    meta = read_json(path, what="counts file")
    if not isinstance(meta, dict):
        raise MaskprepError(
            f"{path}: not a counts file (expected a JSON object); re-run maskprep count"
        )
    for name in _COUNTS_FIELDS:
        if name not in meta:
            raise MaskprepError(
                f"{path}: field {name!r} is missing; the file is incomplete or from another "
                "program; re-run maskprep count"
            )
    if meta["format_version"] != COUNTS_FORMAT_VERSION:
        raise MaskprepError(
            f"{path}: counts format_version {meta['format_version']!r}, but this maskprep "
            f"reads version {COUNTS_FORMAT_VERSION}; re-run maskprep count with this version"
        )
    for name in ("N", "max_n", "min_count"):
        if not _is_whole(meta[name], 1):
            raise MaskprepError(
                f"{path}: field {name!r} must be a whole number >= 1, got {meta[name]!r}; "
                "re-run maskprep count"
            )
    if not isinstance(meta["tokenizer_hash"], str):
        raise MaskprepError(
            f"{path}: field 'tokenizer_hash' must be a string; re-run maskprep count"
        )
    return meta


def _load_tokenizer(counts_dir: Path, expected_hash: str) -> Any:
    from ..tokenizer.encoding import load_tokenizer

    path = counts_dir / "tokenizer.json"
    if not path.is_file():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: has no tokenizer.json (the copy of the tokenizer "
            "used for counting); re-run maskprep count"
        )
    info = load_tokenizer(path)  # one definition of the tokenizer hash for every stage
    if info.hash != expected_hash:
        raise MaskprepError(
            f"{path}: this tokenizer does not match the tokenizer_hash in counts.json, so the "
            "counts come from another tokenizer; re-run maskprep count"
        )
    return info.tokenizer


def _check_sha256(counts_dir: Path, meta: Mapping[str, Any]) -> None:
    """Every n-gram file must still have the sha256 counts.json recorded (counts of older versions
    recorded none)."""
    from .._files import file_sha256

    recorded = meta.get("sha256")
    if not isinstance(recorded, dict):
        return
    for name, digest in sorted(recorded.items()):
        path = counts_dir / str(name)
        if path.is_file() and file_sha256(path) != digest:
            raise MaskprepError(
                f"{path}: changed or damaged since it was counted (its sha256 differs from "
                "counts.json); re-run maskprep count"
            )


def _read_ngrams(
    counts_dir: Path, n: int, *, with_text: bool
) -> tuple[np.ndarray, np.ndarray, Any]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = counts_dir / f"ngrams-{n}.parquet"
    if not path.is_file():
        raise MaskprepError(
            f"{path}: missing; the counts directory is incomplete; re-run maskprep count"
        )
    wanted = ["count"] + [f"w{j}" for j in range(n)] + (["text"] if with_text else [])
    try:
        schema = pq.read_schema(path)
        missing = [c for c in wanted if c not in schema.names]
        if missing:
            raise MaskprepError(
                f"{path}: missing column(s) {', '.join(missing)}; re-run maskprep count"
            )
        table = pq.read_table(path, columns=wanted)
    except (pa.ArrowException, OSError) as exc:
        raise MaskprepError(
            f"{path}: not a readable Parquet file ({exc}); re-run maskprep count"
        ) from None
    for j in range(n):
        if table.schema.field(f"w{j}").type != pa.uint64():
            raise MaskprepError(
                f"{path}: column w{j} must be uint64 word keys; re-run maskprep count"
            )
    if not pa.types.is_integer(table.schema.field("count").type):
        raise MaskprepError(f"{path}: column count must be integers; re-run maskprep count")
    keys = np.empty((table.num_rows, n), dtype=np.uint64)
    for j in range(n):
        keys[:, j] = table.column(f"w{j}").to_numpy()
    counts = table.column("count").to_numpy().astype(np.int64)
    text = table.column("text").cast(pa.large_string()) if with_text else None
    return keys, counts, text


# ------------------------------------------------------------------ build

def build_units(
    counts_dir: Union[str, Path],
    *,
    measure: Union[Measure, str] = DEFAULT_MEASURE,
    top: int = DEFAULT_TOP,
    min_count: int | None = None,
    per_length: Union[str, Mapping[int, float], None] = None,
    max_n: int | None = None,
    edge_words: int = DEFAULT_EDGE_WORDS,
    fragment_share: float = DEFAULT_FRAGMENT_SHARE,
    quiet: bool = False,
) -> UnitVocabulary:
    """Choose the `top` most cohesive n-grams (n >= 2) of a counts directory, best first.

    counts_dir: directory written by ``maskprep count``.
    measure: llr (default) | pmi | pmi-naive | npmi | t (see ``Measure.description`` for each range).
    top: number of units to keep at most (>= 1).
    min_count: keep only n-grams counted at least this often; default and minimum: the
        counts' own min_count.
    per_length: shares of `top` per length, e.g. ``"2:0.5,3:0.3,4:0.1,5:0.1"`` (must add up
        to 1; unused places flow to the other listed lengths); default: one joint ranking.
    max_n: longest unit, 2..the counts' max_n; default: the counts' max_n.
    edge_words: no unit begins or ends with one of the corpus's this many most frequent
        words (0: no such filter).
    fragment_share: drop an n-gram when one n-gram a word longer holds at least this share
        of its occurrences (0: keep fragments).
    quiet: no progress lines on stderr.

    >>> vocab = build_units("counts/", measure="pmi", top=1000)  # doctest: +SKIP
    """
    import pyarrow as pa

    counts_dir = Path(counts_dir)
    meta = _counts_meta(counts_dir)
    _check_sha256(counts_dir, meta)
    options = _options(meta, measure=measure, top=top, min_count=min_count, per_length=per_length,
                       max_n=max_n, edge_words=edge_words, fragment_share=fragment_share)
    tok = _load_tokenizer(counts_dir, meta["tokenizer_hash"])
    lengths = (
        [n for n, _ in options.per_length]
        if options.per_length
        else list(range(2, options.max_n + 1))
    )
    N = int(meta["N"])
    last = min(max(lengths) + (1 if options.fragment_share > 0 else 0), int(meta["max_n"]))
    index: NgramIndex | None = None
    edge_keys, edge_list = np.zeros(0, np.uint64), list[str]()
    pending: dict[int, _Scored] = {}
    candidates: dict[int, tuple[np.ndarray, Any]] = {}  # n -> (keys, arrow table sorted best first)
    dropped = {"edge": 0, "fragment": 0}
    with Progress("units", total=last, unit="lengths", quiet=quiet) as progress:
        for k in range(1, last + 1):
            keys, counts, text = _read_ngrams(counts_dir, k, with_text=k in lengths or
                                              (k == 1 and options.edge_words > 0))
            if k == 1:
                if int(counts.sum()) > N:
                    raise MaskprepError(
                        f"{counts_dir / 'ngrams-1.parquet'}: word counts add up to more than "
                        f"N={N} from counts.json; re-run maskprep count"
                    )
                if options.edge_words > 0:
                    edge_keys, edge_list = frequent_words(
                        keys, counts, text.to_pylist(), options.edge_words
                    )
            if k - 1 in pending:  # the fragments of length k - 1 need these k-grams
                scored = pending.pop(k - 1)
                candidates[k - 1] = _finish(options, scored, keys, counts, dropped)
            if k in lengths:
                assert index is not None
                pending[k] = _score_length(
                    options, counts_dir, k, keys, counts, text, index, N, edge_keys, dropped
                )
            if k < max(lengths):
                try:
                    index = (
                        NgramIndex.build({1: (keys, counts)})
                        if index is None
                        else index.add(keys, counts)
                    )
                except MaskprepError as exc:
                    raise MaskprepError(f"{counts_dir / f'ngrams-{k}.parquet'}: {exc}") from None
            progress.advance(1)
    for (
        k,
        scored,
    ) in pending.items():  # the longest counted length: no longer n-grams to compare with
        candidates[k] = _finish(options, scored, None, None, dropped)
    chosen = _ranked(_select(options, candidates))
    texts: list[str] = chosen.column("text").cast(pa.string()).to_pylist()
    n_arr = chosen.column("n").to_numpy().astype(np.int64)
    rows = chosen.column("row").to_numpy()
    word_keys = tuple(candidates[int(L)][0][r] for L, r in zip(n_arr.tolist(), rows.tolist()))
    source = {
        "N": N,
        "corpus_fingerprint": meta["corpus_fingerprint"],
        "counts_min_count": meta["min_count"],
        "counts_max_n": meta["max_n"],
        "counts_format_version": meta["format_version"],
        "edge_word_list": edge_list,
        "dropped_edge": dropped["edge"],
        "dropped_fragment": dropped["fragment"],
    }
    if "words" in meta:
        source["words"] = meta["words"]
    return UnitVocabulary(
        text=tuple(texts), n=n_arr,
        count=chosen.column("count").to_numpy().astype(np.int64),
        score=chosen.column("score").to_numpy().astype(np.float64),
        token_ids=unit_token_ids(tok, texts), word_keys=word_keys, measure=options.measure,
        options=options.to_json(), tokenizer_hash=meta["tokenizer_hash"], source=source,
        word_splitting=word_splitting(tok.to_str()))


def _options(
    meta: Mapping[str, Any],
    *,
    measure: Union[Measure, str],
    top: int,
    min_count: int | None,
    per_length: Union[str, Mapping[int, float], None],
    max_n: int | None,
    edge_words: int = 0,
    fragment_share: float = 0.0,
) -> UnitOptions:
    counted_max = int(meta["max_n"])
    if counted_max < 2:
        raise MaskprepError(
            "COUNTS_DIR: the counts hold only single words (max_n 1); re-run maskprep count "
            "with --max-n 2 or more to find multi-word units"
        )
    m = Measure.parse(measure)
    floor = int(meta["min_count"])
    min_count = floor if min_count is None else min_count
    for option, value in (("--top", top), ("--min-count", min_count)):
        if not _is_whole(value, 1):
            raise MaskprepError(f"{option}: must be a whole number >= 1, got {value!r}")
    if min_count < floor:
        raise MaskprepError(
            f"--min-count {min_count}: the counts were pruned at {floor}, so rarer n-grams are "
            f"not known; use --min-count {floor} or more, or re-run maskprep count "
            f"--min-count {min_count}"
        )
    max_n = min(counted_max, MAX_N) if max_n is None else max_n
    if not _is_whole(max_n, 2) or max_n > counted_max:
        raise MaskprepError(
            f"--max-n: must be in 2..{counted_max} (the longest n-grams counted), got {max_n!r}"
        )
    if not _is_whole(edge_words, 0):
        raise MaskprepError(
            f"--edge-words: must be a whole number >= 0 (0: no filter), got {edge_words!r}"
        )
    if (
        isinstance(fragment_share, bool)
        or not isinstance(fragment_share, (int, float, np.floating))
        or not 0.0 <= float(fragment_share) <= 1.0
    ):
        raise MaskprepError(f"--fragment-share: must be a number in [0, 1] (0: keep fragments), "
                            f"got {fragment_share!r}")
    shares = parse_per_length(per_length, max_n=int(max_n))
    return UnitOptions(
        measure=m,
        top=int(top),
        min_count=int(min_count),
        max_n=int(max_n),
        per_length=shares,
        edge_words=int(edge_words),
        fragment_share=float(fragment_share),
    )


def _is_whole(value: Any, low: int) -> bool:
    return is_whole(value, low)


@dataclass(frozen=True, eq=False)
class _Scored:
    """The attracting candidates of one length, scored, before the fragment filter and the top cut."""

    n: int
    keys: np.ndarray
    counts: np.ndarray
    score: np.ndarray
    text: Any  # arrow strings, aligned with keys


def _score_length(
    options: UnitOptions,
    counts_dir: Path,
    n: int,
    keys: np.ndarray,
    counts: np.ndarray,
    text: Any,
    index: NgramIndex,
    N: int,
    edge_keys: np.ndarray,
    dropped: dict[str, int],
) -> _Scored:
    import pyarrow as pa

    idx = np.flatnonzero(counts >= options.min_count)
    keys, counts = keys[idx], counts[idx]
    try:
        if options.measure.positive_means_cohesive:
            score = score_ngrams(options.measure, n=n, keys=keys, counts=counts, tables=index, N=N)
            ok = score > 0
        else:
            score, split = score_with_split_pmi(
                options.measure, n=n, keys=keys, counts=counts, tables=index, N=N
            )
            ok = split > 0
    except MaskprepError as exc:
        raise MaskprepError(f"{counts_dir / f'ngrams-{n}.parquet'}: {exc}") from None
    ok &= np.isfinite(score)
    edges = edge_ok(keys, edge_keys)
    dropped["edge"] += int((ok & ~edges).sum())
    sel = np.flatnonzero(ok & edges)
    return _Scored(n, keys[sel], counts[sel], score[sel], text.take(pa.array(idx[sel])))


def _finish(
    options: UnitOptions,
    s: _Scored,
    longer_keys: np.ndarray | None,
    longer_counts: np.ndarray | None,
    dropped: dict[str, int],
) -> tuple[np.ndarray, Any]:
    """Drop fragments (given the (n+1)-gram counts), keep the best `top` and their ties, rank."""
    import pyarrow as pa

    score, counts = s.score, s.counts
    sel = np.arange(len(counts))
    if options.fragment_share > 0 and longer_keys is not None and longer_counts is not None:
        whole = fragment_shares(s.keys, counts, longer_keys, longer_counts) < options.fragment_share
        dropped["fragment"] += int((~whole).sum())
        sel = sel[whole]
    if (
        len(sel) > options.top
    ):  # at most `top` of one length can be chosen: keep those and their ties
        best = sel[np.lexsort((-counts[sel], -score[sel]))[options.top - 1]]
        sel = sel[
            (score[sel] > score[best])
            | ((score[sel] == score[best]) & (counts[sel] >= counts[best]))
        ]
    table = pa.table({
        "text": s.text.take(pa.array(sel)),
        "n": pa.array(np.full(len(sel), s.n, dtype=np.int64)),
        "count": pa.array(counts[sel]),
        "score": pa.array(score[sel]),
        "row": pa.array(np.arange(len(sel), dtype=np.int64)),
    })
    return s.keys[sel], _ranked(table)


def _select(options: UnitOptions, candidates: Mapping[int, tuple[np.ndarray, Any]]) -> Any:
    import pyarrow as pa

    if options.per_length is None:
        return _ranked(pa.concat_tables([candidates[n][1] for n in sorted(candidates)])).slice(
            0, options.top
        )
    shares = dict(options.per_length)
    take = _quotas(options.top, shares, {n: candidates[n][1].num_rows for n in shares})
    return pa.concat_tables([candidates[n][1].slice(0, take[n]) for n in sorted(shares)])


def _ranked(table: Any) -> Any:
    """Rows best first: score descending, count descending, text ascending (UTF-8 bytes)."""
    import pyarrow.compute as pc

    keys = [("score", "descending"), ("count", "descending"), ("text", "ascending")]
    return table.take(pc.sort_indices(table, sort_keys=keys))
