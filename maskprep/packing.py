"""Stage 8, packing: encoded documents into fixed-length sequences with special tokens.

Layout (every row has exactly ``seq_len`` tokens):

- each document's tokens are followed by one separator token (the
  tokenizer's ``sep``), so a separator always marks the end of a document;
- packed mode (default) concatenates the documents of one corpus task into
  one stream ``doc1 [SEP] doc2 [SEP] ...`` and cuts it into pieces of
  ``seq_len - 1`` tokens; every sequence is ``[CLS] piece``. Documents longer
  than a piece continue in the next sequence (without a separator at the cut),
  and a separator that falls right at a cut starts the next sequence as
  ``[CLS] [SEP] ...``. Only the last sequence of a task is padded (pad token,
  attention mask 0);
- ``pack=False`` starts every document in a new sequence:
  ``[CLS] doc [SEP] [PAD] ...``; a longer document is split into
  ``[CLS] piece`` sequences in the same way, its last piece padded; a
  document that exactly fills its last sequence gets no separator (the row
  end marks it).

Words: tokens keep the word grouping of the tokenizer (``EncodedBatch``).
``word_ids`` are sequence-local (0, 1, ... in order), -1 on special tokens and
padding. A word cut by a sequence boundary keeps its pieces in each sequence
and is one whole word there. Every token whose id is one of the tokenizer's
special ids (also when it appears inside the text, e.g. a literal ``[UNK]``)
is marked ``special`` and never belongs to a word, so it can never be masked.
Whitespace-only words (``tokenize.SPACE``, rare: only byte-level tokenizers
produce them) are kept with their own word id and kind 1, like punctuation,
so they never join a multi-word unit. Word kinds in the output: 0 word,
1 punctuation or whitespace, -1 padding of ``word_keys``/``word_kinds``.

Sequence ids are ``task_index << 32 | sequence_in_task``, so they depend on
the corpus and the options only, never on the number of workers.

Everything is numpy over whole batches (no Python loop per token). This
module does not mask, choose units or write files (see masking.py, shards.py).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Iterable, Iterator

import numpy as np

from ._checks import is_whole
from .errors import MaskprepError
from .tokenizer.encoding import WORD, EncodedBatch, TokenizerInfo

__all__ = ["PackingConfig", "PackedBatch", "TaskPacker", "pack_batches", "MIN_SEQ_LEN",
           "check_packing_tokenizer"]

MIN_SEQ_LEN = 8
_MAX_SEQUENCES = 1 << 32  # sequences per task that fit in the low half of a sequence id
_NO_WORD = np.iinfo(np.int64).max


@dataclass(frozen=True)
class PackingConfig:
    """How documents become sequences: ``PackingConfig(seq_len=128, pack=True)``.

    >>> PackingConfig(seq_len=256).seq_len
    256
    """

    seq_len: int = 128
    pack: bool = True

    def __post_init__(self) -> None:
        if not is_whole(self.seq_len, MIN_SEQ_LEN):
            raise MaskprepError(
                f"--seq-len must be a whole number >= {MIN_SEQ_LEN}, got {self.seq_len!r}; "
                "pass e.g. --seq-len 128"
            )
        if int(self.seq_len) > 1 << 20:
            raise MaskprepError(f"--seq-len {self.seq_len} is absurdly long; use at most {1 << 20}")
        object.__setattr__(self, "seq_len", int(self.seq_len))
        object.__setattr__(self, "pack", bool(self.pack))

    def check(self, info: TokenizerInfo) -> None:
        """Check the length against the tokenizer's limit: ``config.check(info)``."""
        if info.max_length is not None and self.seq_len > info.max_length:
            raise MaskprepError(
                f"--seq-len {self.seq_len} is above the limit of tokenizer {info.name} "
                f"({info.max_length} tokens); pass --seq-len {info.max_length} or less"
            )


@dataclass(frozen=True)
class PackedBatch:
    """Packed sequences, all arrays with B rows (L = seq_len, Lw = most words in a row).

    input_ids      int32  (B, L)   token ids, [CLS] first, padded with the pad id
    special        bool   (B, L)   special tokens and padding (never masked)
    word_ids       int32  (B, L)   sequence-local word index, -1 where special
    word_keys      uint64 (B, Lw)  content key of each local word, 0 past the last word
    word_kinds     int8   (B, Lw)  0 word, 1 punctuation/whitespace, -1 past the last word
    attention_mask int8   (B, L)   1 on real tokens, 0 on padding
    sequence_ids   uint64 (B,)     task_index << 32 | sequence_in_task
    """

    input_ids: np.ndarray
    special: np.ndarray
    word_ids: np.ndarray
    word_keys: np.ndarray
    word_kinds: np.ndarray
    attention_mask: np.ndarray
    sequence_ids: np.ndarray

    def __len__(self) -> int:
        return int(self.input_ids.shape[0])


def check_packing_tokenizer(info: TokenizerInfo) -> tuple[int, int, int]:
    """The (cls, sep, pad) ids packing needs; a missing one raises naming the fix.

    >>> check_packing_tokenizer(info)  # doctest: +SKIP
    (2, 3, 0)
    """
    missing = [role for role, v in (("start (cls)", info.cls_id), ("separator (sep)", info.sep_id),
                                    ("padding (pad)", info.pad_id)) if v is None]
    if missing:
        raise MaskprepError(
            f"{info.name}: tokenizer has no {' / '.join(missing)} token; add it as a special token "
            "(e.g. tok.add_special_tokens(['[CLS]', '[SEP]', '[PAD]']) with the tokenizers "
            "library, then save) or train one with maskprep train-tokenizer"
        )
    return int(info.cls_id), int(info.sep_id), int(info.pad_id)  # type: ignore[arg-type]


class TaskPacker:
    """Packs the encoded batches of one corpus task, carrying the unfinished sequence.

    >>> packer = TaskPacker(info, PackingConfig(seq_len=128), task_index=3)  # doctest: +SKIP
    >>> batches = [*packer.add(encoded), *packer.finish()]  # doctest: +SKIP
    """

    def __init__(self, info: TokenizerInfo, config: PackingConfig, *, task_index: int) -> None:
        self.config = config
        self.cls_id, self.sep_id, self.pad_id = check_packing_tokenizer(info)
        self.special_ids = np.asarray(info.special_ids, dtype=np.int32)
        if not 0 <= int(task_index) < _MAX_SEQUENCES:
            raise MaskprepError(f"task index {task_index} does not fit in a sequence id")
        self.task_index = int(task_index)
        self.sequences = 0  # sequences emitted so far
        self._word_base = 0  # word numbers used so far in this task
        self._carry: tuple[np.ndarray, ...] | None = None  # (ids, word, key, kind) per stream token

    def add(self, batch: EncodedBatch) -> Iterator[PackedBatch]:
        """Pack one encoded batch; yields the sequences completed by it (maybe none)."""
        stream, seg_lengths = self._stream(batch)
        if self.config.pack:
            if self._carry is not None:
                stream = tuple(np.concatenate([c, s]) for c, s in zip(self._carry, stream))
                self._carry = None
            piece = self.config.seq_len - 1
            full = (len(stream[0]) // piece) * piece
            if full < len(stream[0]):
                self._carry = tuple(a[full:] for a in stream)
            if full:
                yield self._rows(tuple(a[:full] for a in stream), np.array([full], dtype=np.int64))
        elif len(seg_lengths):
            yield self._rows(stream, seg_lengths)

    def enough(self, batch: EncodedBatch, rows: int) -> EncodedBatch:
        """The first documents of `batch` that complete `rows` more sequences, or all of it.

        `add` yields the same first `rows` sequences from them as from the whole batch, so a
        caller that needs only a few sequences (compare's sample) packs no more than those.
        (`crossing_tokens` of the part returned stays the whole batch's; packing does not read
        it.)
        """
        doc_len = np.diff(batch.token_doc_offsets())
        piece = self.config.seq_len - 1
        if self.config.pack:  # rows completed by the stream up to each document's separator
            carry = 0 if self._carry is None else len(self._carry[0])
            made = (carry + np.cumsum(doc_len + (doc_len > 0))) // piece
        else:  # each document's own rows
            made = np.cumsum(-(-(doc_len + (doc_len % piece != 0)) // piece))
        docs = int(np.searchsorted(made, rows)) + 1
        if docs >= batch.num_docs:
            return batch
        words = int(batch.doc_offsets[docs])
        return dataclasses.replace(
            batch, ids=batch.ids[:int(batch.word_offsets[words])],
            word_offsets=batch.word_offsets[:words + 1], doc_offsets=batch.doc_offsets[:docs + 1],
            word_keys=batch.word_keys[:words], word_kinds=batch.word_kinds[:words],
            word_chars=batch.word_chars[:words])

    def finish(self) -> Iterator[PackedBatch]:
        """Emit the last, padded sequence of the task (packed mode), if any."""
        if self._carry is not None and len(self._carry[0]):
            carry, self._carry = self._carry, None
            yield self._rows(carry, np.array([len(carry[0])], dtype=np.int64))
        self._carry = None

    # ------------------------------------------------------------ internals

    def _stream(self, batch: EncodedBatch) -> tuple[tuple[np.ndarray, ...], np.ndarray]:
        """Per stream token: id, task word number (-1 special), word key, word kind; doc+sep
        lengths."""
        ids = np.asarray(batch.ids, dtype=np.int32)
        lengths = batch.word_lengths
        W = len(lengths)
        word_of_token = np.repeat(np.arange(W, dtype=np.int64), lengths)
        tok_special = np.isin(ids, self.special_ids)
        literal = bool(tok_special.any())  # special tokens inside the text (rare)
        if literal:
            has_normal = np.bincount(word_of_token[~tok_special], minlength=W) > 0
        else:  # every word with a token has a normal one
            has_normal = lengths > 0
        numbers = np.cumsum(has_normal, dtype=np.int64) - 1 + self._word_base
        self._word_base += int(has_normal.sum())
        word = numbers[word_of_token]
        if literal:
            word = np.where(tok_special, -1, word)
        kinds_w = np.where(batch.word_kinds == WORD, 0, 1).astype(np.int8)  # PUNCT, SPACE -> 1
        key = np.asarray(batch.word_keys, dtype=np.uint64)[word_of_token]
        kind = kinds_w[word_of_token]
        doc_tok = batch.token_doc_offsets()
        doc_len = np.diff(doc_tok)
        keep = doc_len > 0
        doc_len = doc_len[keep]
        sep = np.ones(len(doc_len), dtype=bool)
        if not self.config.pack:  # a document exactly filling its last sequence needs no separator
            sep = doc_len % (self.config.seq_len - 1) != 0
        ends = doc_tok[1:][keep][sep]
        stream = (np.insert(ids, ends, self.sep_id), np.insert(word, ends, -1),
                  np.insert(key, ends, 0), np.insert(kind, ends, 1))
        return stream, doc_len + sep

    def _rows(self, stream: tuple[np.ndarray, ...], seg_lengths: np.ndarray) -> PackedBatch:
        """Lay out segments (each starting a new sequence) into [CLS] + pieces of seq_len - 1."""
        ids, word, key, kind = stream
        L = self.config.seq_len
        piece = L - 1
        S = len(ids)
        rows_per_seg = -(-seg_lengths // piece)
        B = int(rows_per_seg.sum())
        if (
            len(seg_lengths) == 1
        ):  # one segment (packed mode): rows are consecutive pieces of the stream
            row = np.arange(S, dtype=np.int64) // piece
            flat = None
        else:
            seg_row0 = np.cumsum(rows_per_seg) - rows_per_seg
            seg_start = np.cumsum(seg_lengths) - seg_lengths
            seg_of = np.repeat(np.arange(len(seg_lengths)), seg_lengths)
            k = np.arange(S, dtype=np.int64) - seg_start[seg_of]
            row = seg_row0[seg_of] + k // piece
            flat = row * L + 1 + k % piece

        def place(values: np.ndarray, fill: int, first: int, dtype: type) -> np.ndarray:
            out: np.ndarray = np.full((B, L), fill, dtype=dtype)
            out[:, 0] = first
            if flat is None:
                body: np.ndarray = np.full(B * piece, fill, dtype=dtype)
                body[:S] = values
                out[:, 1:] = body.reshape(B, piece)
            else:
                out.reshape(-1)[flat] = values
            return out

        # sequence-local word numbers: stream word numbers minus the first word of the row
        row_start = np.flatnonzero(np.r_[True, row[1:] != row[:-1]]) if S else np.zeros(0, np.int64)
        first = (
            np.minimum.reduceat(np.where(word >= 0, word, _NO_WORD), row_start) if S else row_start
        )
        local = np.where(word >= 0, word - first[row], -1).astype(np.int32)
        input_ids = place(ids, self.pad_id, self.cls_id, np.int32)
        attention = place(np.ones(S, dtype=np.int8), 0, 1, np.int8)
        word_ids = place(local, -1, -1, np.int32)
        Lw = int(local.max(initial=-1)) + 1
        has = local >= 0
        wflat = row[has] * Lw + local[has]
        word_keys = np.zeros((B, Lw), dtype=np.uint64)
        word_kinds = np.full((B, Lw), -1, dtype=np.int8)
        word_keys.reshape(-1)[wflat] = key[has]
        word_kinds.reshape(-1)[wflat] = kind[has]
        if self.sequences + B >= _MAX_SEQUENCES:
            raise MaskprepError(f"corpus task {self.task_index} yields more than 2**32 sequences; "
                                "split the input file into smaller files")
        seq = (np.uint64(self.task_index) << np.uint64(32)) \
            | (np.uint64(self.sequences) + np.arange(B, dtype=np.uint64))
        self.sequences += B
        return PackedBatch(
            input_ids=input_ids,
            special=word_ids < 0,
            word_ids=word_ids,
            word_keys=word_keys,
            word_kinds=word_kinds,
            attention_mask=attention,
            sequence_ids=seq,
        )


def pack_batches(
    info: TokenizerInfo,
    batches: Iterable[EncodedBatch],
    *,
    config: PackingConfig = PackingConfig(),
    task_index: int = 0,
) -> Iterator[PackedBatch]:
    """Pack all encoded batches of one task, last sequence padded.

    >>> sum(len(p) for p in pack_batches(info,  # doctest: +SKIP
    ...     [info.encode(["To be, or not to be."])], config=PackingConfig(seq_len=8)))
    2
    """
    packer = TaskPacker(info, config, task_index=task_index)
    for batch in batches:
        yield from packer.add(batch)
    yield from packer.finish()
