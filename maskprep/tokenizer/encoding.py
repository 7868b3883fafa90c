"""Load and save tokenizers and encode documents into flat numpy arrays.

`load_tokenizer` reads any `tokenizer.json` of the `tokenizers` library and
finds its special tokens (padding, unknown, sequence start, separator, mask);
`save_tokenizer` writes one back. `encode_documents` runs the library's
parallel batch encoder and returns an `EncodedBatch`.

Words come from the tokenizer's own pre-tokenization (`Encoding.word_ids`),
never from guessing at strings, so grouping is right for continuation
prefixes (WordPiece `##`), byte-level space markers (`Ġ`) and metaspace
markers (`▁`) alike. Each distinct word is decoded once per process to its
canonical text, which gives its kind (word / punctuation / whitespace) and its
64-bit content key.

It does not train tokenizers (see train.py), pack sequences or add special
tokens (see packing.py).
"""

from __future__ import annotations

import dataclasses
import copy
import hashlib
import os
import itertools
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np
import regex

from ..errors import MaskprepError
from ..execute import ENCODE_AHEAD_ENV, default_workers
from .words import WordsConfig, word_ids_by_offsets

# Word kinds.
WORD, PUNCT, SPACE, SPECIAL = 0, 1, 2, 3
_PUNCT_RE = regex.compile(r"[\p{P}\p{S}]+")

# Names by which the roles are recognised in tokenizers made elsewhere.
_ROLE_NAMES = {
    "pad": ("[PAD]", "<pad>", "<|pad|>", "[pad]"),
    "unk": ("[UNK]", "<unk>", "<|unk|>", "[unk]"),
    "cls": ("[CLS]", "<s>", "<bos>", "<|startoftext|>", "[BOS]", "<cls>"),
    "sep": ("[SEP]", "</s>", "<eos>", "<|endoftext|>", "[EOS]", "<sep>"),
    "mask": ("[MASK]", "<mask>", "<|mask|>", "[mask]"),
}


@dataclass(frozen=True)
class EncodedBatch:
    """Documents encoded into flat arrays (no special tokens).

    ids          int32  [T]    token ids, all documents concatenated
    word_offsets int64  [W+1]  token offset of each word's first token
    doc_offsets  int64  [D+1]  word offset of each document's first word
    word_keys    uint64 [W]    content key of each word (same text -> same key)
    word_kinds   int8   [W]    WORD, PUNCT, SPACE or SPECIAL
    word_chars   int32  [W]    characters in the word's canonical text
    crossing_tokens  int       tokens that run past the end of their word (0 for tokenizer words)
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


class TokenizerInfo:
    """A loaded tokenizer with its special tokens, hash and word-type cache.

    >>> info = load_tokenizer("tokenizer.json")  # doctest: +SKIP
    >>> info.mask_id  # doctest: +SKIP
    4
    """

    def __init__(self, tokenizer: Any, *, name: str = "tokenizer", path: str | None = None) -> None:
        self.tokenizer = tokenizer
        self.name = name
        self.path = path
        self.json = tokenizer.to_str()
        spec = json.loads(self.json)
        # Hash a canonical form: key order in the library's JSON is not stable across save/load.
        canonical = json.dumps(spec, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
        self.hash = hashlib.sha256(canonical.encode("utf-8")).hexdigest()
        self.vocab_size = tokenizer.get_vocab_size(with_added_tokens=True)
        self.roles = _find_roles(tokenizer, spec)
        specials = [t.content for t in tokenizer.get_added_tokens_decoder().values() if t.special]
        ids = [tokenizer.token_to_id(s) for s in specials]
        self.special_ids = np.array(
            sorted(
                {i for i in ids if i is not None}
                | {v for v in self.roles.values() if v is not None}
            ),
            dtype=np.int32,
        )
        self.max_length = _model_max_length(spec)
        self._types: dict[bytes, WordType] = {}
        self._base = self.vocab_size + 1
        per = 1
        while self._base ** (per + 1) < 2 ** 64:
            per += 1
        self._per_column = per

    # Roles -------------------------------------------------------------
    @property
    def pad_id(self) -> int | None:
        return self.roles.get("pad")

    @property
    def unk_id(self) -> int | None:
        return self.roles.get("unk")

    @property
    def cls_id(self) -> int | None:
        return self.roles.get("cls")

    @property
    def sep_id(self) -> int | None:
        return self.roles.get("sep")

    @property
    def mask_id(self) -> int | None:
        return self.roles.get("mask")

    def require_mask(self) -> int:
        if self.mask_id is None:
            raise MaskprepError(
                f"{self.name}: tokenizer has no mask token; add one as a special token "
                "(e.g. tok.add_special_tokens(['[MASK]']) with the tokenizers library, then save) "
                "or train one with maskprep train-tokenizer")
        return self.mask_id

    def normal_ids(self) -> np.ndarray:
        """All non-special token ids (candidates for random replacement)."""
        ids = np.arange(self.vocab_size, dtype=np.int32)
        return ids[~np.isin(ids, self.special_ids)]

    def describe(self) -> dict[str, Any]:
        return {"name": self.name, "hash": self.hash, "vocab_size": self.vocab_size,
                "special_tokens": {r: (self.tokenizer.id_to_token(i) if i is not None else None)
                                   for r, i in self.roles.items()}}

    # Encoding ------------------------------------------------------------
    def encode(self, texts: list[str]) -> EncodedBatch:
        """Encode documents: ``info.encode(["A first text.", "Another."])``."""
        return encode_documents(self, texts)

    def word_type(self, key_row: bytes, ids: list[int]) -> WordType:
        t = self._types.get(key_row)
        if t is None:
            t = self._new_types([key_row], [ids])[0]
        return t

    def word_types(self) -> list[WordType]:
        """The word forms decoded so far in this process (a bounded cache: it may miss some)."""
        return list(self._types.values())

    @property
    def word_type_count(self) -> int:
        """How many word forms the cache holds; it only grows, until the cache is cleared."""
        return len(self._types)

    def newest_word_types(self, count: int) -> Iterator[WordType]:
        """The `count` word forms added to the cache last, newest first (one step per form)."""
        return itertools.islice(reversed(self._types.values()), count)

    def canonical_texts(self, id_lists: list[list[int]], *, joined: bool = False) -> list[str]:
        """The canonical text of words given as token ids: decoded, whitespace stripped.

        `joined` (words of a segmenter): all whitespace is removed, since such a
        word never holds any, while decoders may put spaces between its tokens
        (WordPiece writes a space between two CJK characters).
        """
        texts = self.tokenizer.decode_batch(id_lists, skip_special_tokens=False)
        if joined:
            return ["".join(t.split()) for t in texts]
        return [t.strip() for t in texts]

    def _new_types(self, rows: list[bytes], id_lists: list[list[int]],
                   joined: bool = False) -> list[WordType]:
        texts = self.canonical_texts(id_lists, joined=joined)
        out = []
        for row, ids, canon in zip(rows, id_lists, texts):
            if len(ids) == 1 and int(ids[0]) in self._special_set():
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
            self._types[row] = wt
            out.append(wt)
        if len(self._types) > 4_000_000:  # bound the cache; it refills as needed
            self._types.clear()
        return out

    def _special_set(self) -> set[int]:
        s = getattr(self, "_specials_cache", None)
        if s is None:
            s = set(int(i) for i in self.special_ids)
            self._specials_cache = s
        return s


def encode_documents(
    info: TokenizerInfo, texts: list[str], words: WordsConfig | None = None
) -> EncodedBatch:
    """Encode a batch of documents with the tokenizer's parallel batch API.

    `words` chooses the word definition (default: the tokenizer's own words).

    >>> b = encode_documents(info, ["New words, old words."])  # doctest: +SKIP
    >>> b.num_words  # doctest: +SKIP
    5
    """
    return _from_encodings(
        info, info.tokenizer.encode_batch(texts, add_special_tokens=False), texts, words
    )


def set_encode_ahead(enabled: bool) -> None:
    """Turn the look-ahead thread of `encode_stream` on or off for this process.

    Off in pool and Dask workers (`execute` says so through the environment variable
    ``MASKPREP_ENCODE_AHEAD=0``), where other processes already keep every core busy:
    there the helper thread only adds contention (measured with
    ``scripts/bench_workers.py``: about 8% more CPU and 3x the system time).
    """
    os.environ[ENCODE_AHEAD_ENV] = "1" if enabled else "0"


def encode_stream(info: TokenizerInfo, batches: Iterable[list[str]],
                  words: WordsConfig | None = None, *, stats: Any = None) -> Iterator[EncodedBatch]:
    """Encode batches of documents, encoding the next batch while this one is grouped.

    `words` chooses the word definition (default: the tokenizer's own words).

    The tokenizer releases the GIL while it encodes, so one batch of look-ahead
    in a helper thread overlaps its work with the numpy grouping here (unless
    `set_encode_ahead(False)`, or this process may use only one core).

    With `stats` (a `ReadStats`), literal special-token strings met in the text
    ("[MASK]" written in a document, which the tokenizer reads as the special
    token) are counted by string in ``stats.literal_specials``.

    >>> sum(b.num_words for b in encode_stream(info, iter_batches(task)))  # doctest: +SKIP
    120345
    """
    for batch in _encode_ahead(info, batches, words):
        if stats is not None:
            tally_literal_specials(info, batch, stats.literal_specials)
        yield batch


def tally_literal_specials(info: TokenizerInfo, batch: EncodedBatch, into: dict[str, int]) -> None:
    """Add the batch's special-token words (all literal: no specials are added when encoding) to `into`."""
    special = batch.word_kinds == SPECIAL
    if not special.any():
        return
    ids, counts = np.unique(batch.ids[batch.word_offsets[:-1][special]], return_counts=True)
    for i, n in zip(ids.tolist(), counts.tolist()):
        s = info.tokenizer.id_to_token(int(i))
        into[s] = into.get(s, 0) + int(n)


_WARNED: set[tuple[str, ...]] = set()


def warn_literal_specials(info: TokenizerInfo, counts: dict[str, int], corpus: str) -> None:
    """One line on stderr if the corpus text held special-token strings; once per process for
    the same special tokens (a pipeline reads the corpus several times)."""
    if not counts:
        return
    key = tuple(
        sorted(t.content for t in info.tokenizer.get_added_tokens_decoder().values() if t.special)
    )
    if key in _WARNED:
        return
    _WARNED.add(key)
    import sys

    total = sum(counts.values())
    each = ", ".join(
        f"{s} x{n:,}" for s, n in sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))
    )
    sys.stderr.write(
        f"warning: {corpus}: the text holds {total:,} literal special-token "
        f"string{'' if total == 1 else 's'} ({each}); tokenizer {info.name} reads each as its special "
        "token (never counted or masked as a word). Remove or escape them in the corpus if they "
        "are meant as text.\n"
    )
    sys.stderr.flush()


def _encode_ahead(info: TokenizerInfo, batches: Iterable[list[str]],
                  words: WordsConfig | None) -> Iterator[EncodedBatch]:
    from concurrent.futures import ThreadPoolExecutor

    def raw(texts: list[str]) -> list[Any]:
        return info.tokenizer.encode_batch(texts, add_special_tokens=False)


    it = iter(batches)
    if os.environ.get(ENCODE_AHEAD_ENV) == "0" or default_workers() < 2:
        for texts in it:
            yield _from_encodings(info, raw(texts), texts, words)
        return
    with ThreadPoolExecutor(max_workers=1) as pool:
        first = next(it, None)
        if first is None:
            return
        pending, pending_texts = pool.submit(raw, first), first
        for texts in it:
            encs, done_texts = pending.result(), pending_texts
            pending, pending_texts = pool.submit(raw, texts), texts
            yield _from_encodings(info, encs, done_texts, words)
        yield _from_encodings(info, pending.result(), pending_texts, words)


def _from_encodings(info: TokenizerInfo, encs: list[Any], texts: list[str] | None = None,
                    words: WordsConfig | None = None) -> EncodedBatch:
    lens = np.fromiter((len(e.ids) for e in encs), dtype=np.int64, count=len(encs))
    total = int(lens.sum())
    ids = np.fromiter(
        itertools.chain.from_iterable(e.ids for e in encs), dtype=np.int32, count=total
    )
    try:
        wid = np.fromiter(
            itertools.chain.from_iterable(e.word_ids for e in encs), dtype=np.int64, count=total
        )
    except TypeError:  # special tokens inside the text have no word id
        wid = np.array([-1 if w is None else w for e in encs for w in e.word_ids], dtype=np.int64)
    tok_doc = np.zeros(len(encs) + 1, dtype=np.int64)
    np.cumsum(lens, out=tok_doc[1:])
    if words is None or words.is_tokenizer:
        return group_words(info, ids, wid, tok_doc)
    if texts is None:
        raise ValueError("word definitions other than the tokenizer's need the documents' texts")
    offsets = np.fromiter(
        itertools.chain.from_iterable(itertools.chain.from_iterable(e.offsets for e in encs)),
        dtype=np.int64,
        count=2 * total,
    ).reshape(total, 2)
    wid, crossing = word_ids_by_offsets(texts, offsets, tok_doc, wid, words)
    batch = group_words(info, ids, wid, tok_doc, joined=True)
    return dataclasses.replace(batch, crossing_tokens=crossing)


def group_words(info: TokenizerInfo, ids: np.ndarray, word_ids: np.ndarray,
                token_doc_offsets: np.ndarray, *, joined: bool = False) -> EncodedBatch:
    """Group tokens into words from per-document word ids; look up word types.

    Performance: everything here is numpy over the whole batch except one
    dictionary lookup per *distinct* word of the batch (not per occurrence),
    and one decode per word never seen before in this process. Words are
    identified exactly by their token ids packed base (vocab+1) into as many
    uint64 columns as the longest word needs, so no hash can merge two words.
    `joined`: words of a segmenter (their canonical text has no whitespace;
    cached apart from the tokenizer's words).
    """
    T = len(ids)
    new_word = np.ones(T, dtype=bool)
    if T > 1:
        new_word[1:] = word_ids[1:] != word_ids[:-1]
    starts_in_range = token_doc_offsets[:-1][token_doc_offsets[:-1] < T]
    new_word[starts_in_range] = True
    new_word[word_ids < 0] = True
    if T > 1:
        # a token after a no-word-id token also starts a word
        after = np.flatnonzero(word_ids[:-1] < 0) + 1
        new_word[after] = True
    word_starts = np.flatnonzero(new_word)
    W = len(word_starts)
    word_offsets = np.empty(W + 1, dtype=np.int64)
    word_offsets[:W] = word_starts
    word_offsets[W] = T
    doc_offsets = np.searchsorted(word_starts, token_doc_offsets).astype(np.int64)
    if W == 0:
        empty_u = np.zeros(0, dtype=np.uint64)
        return EncodedBatch(
            ids, word_offsets, doc_offsets, empty_u, np.zeros(0, np.int8), np.zeros(0, np.int32)
        )

    lengths = np.diff(word_offsets)
    word_of_token = np.repeat(np.arange(W, dtype=np.int64), lengths)
    pos = np.arange(T, dtype=np.int64) - word_offsets[word_of_token]
    per = info._per_column
    ncols = int((lengths.max() + per - 1) // per)
    col = pos // per
    powers = np.array([info._base ** k for k in range(per)], dtype=np.uint64)
    contrib = (ids.astype(np.uint64) + np.uint64(1)) * powers[pos % per]
    flat = word_of_token * ncols + col
    seg_starts = np.flatnonzero(np.r_[True, flat[1:] != flat[:-1]])
    keys = np.zeros(W * ncols, dtype=np.uint64)
    keys[flat[seg_starts]] = np.add.reduceat(contrib, seg_starts)
    rows, first, inverse = unique_rows(keys.reshape(W, ncols))
    # Pad rows to a canonical width so one word has one cache key whatever the batch.
    rows_bytes = np.ascontiguousarray(rows).view(np.uint8).reshape(len(rows), -1)
    type_key = np.empty(len(rows), dtype=np.uint64)
    type_kind = np.empty(len(rows), dtype=np.int8)
    type_chars = np.empty(len(rows), dtype=np.int32)
    cache = info._types
    missing_rows: list[bytes] = []
    missing_idx: list[int] = []
    prefix = _JOINED if joined else b""
    for i in range(len(rows)):
        rb = prefix + _strip_zero_columns(rows_bytes[i].tobytes())
        t = cache.get(rb)
        if t is None:
            missing_rows.append(rb)
            missing_idx.append(i)
        else:
            type_key[i] = t.key
            type_kind[i] = t.kind
            type_chars[i] = len(t.text)
    if missing_idx:
        id_lists = [
            ids[word_offsets[first[i]] : word_offsets[first[i] + 1]].tolist() for i in missing_idx
        ]
        for i, t in zip(missing_idx, info._new_types(missing_rows, id_lists, joined)):
            type_key[i] = t.key
            type_kind[i] = t.kind
            type_chars[i] = len(t.text)
    return EncodedBatch(
        ids, word_offsets, doc_offsets, type_key[inverse], type_kind[inverse], type_chars[inverse]
    )


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


_JOINED = b"J"  # cache-key prefix of segmenter words (their text is made differently)


def _strip_zero_columns(b: bytes) -> bytes:
    while len(b) > 8 and b[-8:] == b"\0" * 8:
        b = b[:-8]
    return b


# ---------------------------------------------------------------- loading

def load_tokenizer(path: str | Path, *, name: str | None = None) -> TokenizerInfo:
    """Load a `tokenizer.json`: ``info = load_tokenizer("tokenizer.json")``."""
    from tokenizers import Tokenizer

    p = Path(path)
    if not p.exists():
        raise MaskprepError(f"{path}: tokenizer file not found")
    if p.is_dir():
        if (p / "tokenizer.json").is_file():
            p = p / "tokenizer.json"
        else:
            raise MaskprepError(f"{path}: is a directory without a tokenizer.json")
    try:
        raw = p.read_text(encoding="utf-8")
        json.loads(raw)
    except UnicodeDecodeError:
        raise MaskprepError(f"{path}: not a tokenizer.json (not UTF-8 text)") from None
    except json.JSONDecodeError as exc:
        raise MaskprepError(
            f"{path}: not a valid tokenizer.json (bad JSON at line {exc.lineno}: {exc.msg})"
        ) from None
    except OSError as exc:
        raise MaskprepError(f"{path}: cannot read tokenizer ({exc.strerror or exc})") from None
    spec = json.loads(raw)
    if not isinstance(spec, dict) or not isinstance(spec.get("model"), dict):
        kind = (
            type(spec).__name__ if not isinstance(spec, dict) else "an object without a 'model' key"
        )
        from .checks import json_kind

        hint = json_kind(spec)
        raise MaskprepError(
            f"{path}: valid JSON but not a tokenizer.json ({kind}{hint}); give the "
            "tokenizer.json written by maskprep train-tokenizer or the tokenizers library"
        )
    try:
        tok = Tokenizer.from_str(raw)
    except Exception as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise MaskprepError(f"{path}: not a valid tokenizer.json ({msg})") from None
    from .checks import check_unknown_token

    check_unknown_token(spec, path)
    if name is None:
        name = p.parent.name if p.name == "tokenizer.json" and p.parent.name else p.stem
    return TokenizerInfo(tok, name=name, path=str(p))


# Tokenizers this process has parsed, by their JSON: parsing one costs about 10 ms, which a
# stage of many small tasks (a directory of small files) would otherwise pay in every task.
_PARSED: dict[str, TokenizerInfo] = {}


def tokenizer_from_json(text: str, *, name: str = "tokenizer") -> TokenizerInfo:
    """Rebuild a `TokenizerInfo` from its JSON (used to ship tokenizers to workers).

    Each call returns its own object with an empty word-type cache; the parsed tokenizer
    underneath is shared within the process (nothing here changes a loaded tokenizer).
    """
    proto = _PARSED.get(text)
    if proto is None:
        from tokenizers import Tokenizer

        if len(_PARSED) >= 4:
            _PARSED.clear()
        proto = _PARSED[text] = TokenizerInfo(Tokenizer.from_str(text))
    info = copy.copy(proto)
    info.name = name
    info._types = {}
    return info


def _find_roles(tokenizer: Any, spec: dict[str, Any]) -> dict[str, int | None]:
    vocab = tokenizer.get_vocab(with_added_tokens=True)
    roles: dict[str, int | None] = {}
    for role, names in _ROLE_NAMES.items():
        roles[role] = next((vocab[n] for n in names if n in vocab), None)
    # The post-processor template, when present, is the truth for start/separator.
    post = spec.get("post_processor") or {}
    if post.get("type") == "TemplateProcessing":
        single = post.get("single") or []
        specials = [item["SpecialToken"]["id"] for item in single if "SpecialToken" in item]
        if len(specials) >= 1 and specials[0] in vocab and single and "SpecialToken" in single[0]:
            roles["cls"] = vocab[specials[0]]
        if len(specials) >= 1 and specials[-1] in vocab and "SpecialToken" in single[-1]:
            roles["sep"] = vocab[specials[-1]]
    elif post.get("type") in ("BertProcessing", "RobertaProcessing"):
        roles["sep"] = post["sep"][1]
        roles["cls"] = post["cls"][1]
    model = spec.get("model") or {}
    unk = model.get("unk_token")
    if isinstance(unk, str) and unk in vocab:
        roles["unk"] = vocab[unk]
    elif model.get("type") == "Unigram" and isinstance(model.get("unk_id"), int):
        roles["unk"] = model["unk_id"]
    return roles


def _model_max_length(spec: dict[str, Any]) -> int | None:
    trunc = spec.get("truncation")
    if isinstance(trunc, dict) and isinstance(trunc.get("max_length"), int):
        return int(trunc["max_length"])
    return None


def save_tokenizer(info: TokenizerInfo, path: str | Path) -> None:
    """Write a tokenizer.json atomically."""
    from .._files import atomic_write_text

    atomic_write_text(Path(path), info.json)
