"""The encoded directory: its layout, its manifest, and reading a task's batches back.

An encoded directory holds a corpus tokenized once (by `maskprep encode`), so
later stages read token ids and word boundaries instead of tokenizing again::

    ENCODED_DIR/
        encoded.json          the manifest (written last: a directory with it is complete)
        tokenizer.json        a copy of the tokenizer the ids belong to
        docs-TTTTT.arrow      corpus task T: one row per document
        words-TTTTT.arrow     corpus task T: one row per distinct word of the task
        .maskprep/            while unfinished: the run's options (run.json), one record per
                              finished task and, while a run writes, its lock

``docs-*.arrow`` (Arrow IPC file, one record batch per encoded batch of the
reader, about 1 MiB of text each): ``words`` list<uint32>, the index in the
task's word table of each word of the document, in order.

``words-*.arrow`` (Arrow IPC file): one row per word type of the task, in the
order first seen: ``ids`` list<uint16> (list<uint32> when the vocabulary has
65,536 tokens or more), the word's token ids; ``key`` uint64, ``kind`` int8
and ``chars`` int32 as in `EncodedBatch`; ``text`` the word's canonical text.
A word type is one distinct combination of token ids and per-word fields, so
storing words by type loses nothing, whatever defines the words.

Both files are compressed with zstd (Arrow IPC buffer compression). Reading a
batch back gathers the type table by index (numpy only) and gives exactly
the `EncodedBatch` the tokenizer gave when the directory was written.

The manifest lists, per task, the source it was read from, its weight (bytes
on disk), the files with size and sha256, its document, word and token
counts, its read statistics and those of each batch. This module does not
tokenize (see `maskprep.encoded.write`) or check files (see `maskprep.encoded.check`).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from .._arrow import numpy_of
from .._files import read_json
from .._resume import RUN_NAME
from ..errors import MaskprepError
from ..tokenizer.encoding import EncodedBatch

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "MANIFEST",
    "STATE_DIR",
    "BATCH_CHARS",
    "PER_WORD",
    "PER_DOC",
    "EncodedTask",
    "EncodedManifest",
    "WordTable",
    "is_encoded_dir",
    "docs_name",
    "words_name",
    "read_word_table",
    "iter_encoded",
    "iter_word_types",
]

FORMAT = "maskprep-encoded"
FORMAT_VERSION = 1
MANIFEST = "encoded.json"
STATE_DIR = ".maskprep"
# characters per batch, as `corpus.iter_batches` reads them for mask and compare
BATCH_CHARS = 1 << 20
COMPRESSION = "zstd"
# EncodedBatch fields other than the structure (ids, word_offsets, doc_offsets), by what they
# describe, with their column names; tests fail if EncodedBatch gains a field not listed here.
PER_WORD: Mapping[str, str] = {"word_keys": "key", "word_kinds": "kind", "word_chars": "chars"}
PER_DOC: Mapping[str, str] = {}
STRUCTURE = ("ids", "word_offsets", "doc_offsets")
# Batch fields kept per task in the manifest (a total; batches read back carry 0):
# boundary-crossing tokens.
PER_TASK = ("crossing_tokens",)


def docs_name(task: int) -> str:
    """``docs_name(3)`` -> 'docs-00003.arrow'."""
    return f"docs-{task:05d}.arrow"


def words_name(task: int) -> str:
    """``words_name(3)`` -> 'words-00003.arrow'."""
    return f"words-{task:05d}.arrow"


def is_encoded_dir(path: str | Path) -> bool:
    """Is `path` a finished encoded directory (a directory holding encoded.json)?"""
    p = Path(path)
    return p.is_dir() and (p / MANIFEST).is_file()


def is_unfinished_encoded_dir(path: str | Path) -> bool:
    """A directory an interrupted `maskprep encode` left (its state, no manifest)."""
    p = Path(path)
    state = p / STATE_DIR
    # run.json: the shared resume state; encode.json: the state of encodes before it
    return p.is_dir() and not (p / MANIFEST).exists() and (
        (state / RUN_NAME).is_file() or (state / "encode.json").is_file()
    )


@dataclass(frozen=True)
class EncodedTask:
    """One task of an encoded directory, as the manifest lists it (paths absolute once opened)."""

    index: int
    source: str                 # the corpus task it was read from, for messages
    weight: float               # bytes on disk of that corpus task
    docs: str
    words: str
    docs_bytes: int
    docs_sha256: str
    words_bytes: int
    words_sha256: str
    documents: int
    num_words: int
    tokens: int
    types: int
    read: Mapping[str, int]
    # per batch: documents, empty skipped, invalid, bytes
    batches: tuple[tuple[int, int, int, int], ...]
    crossing_tokens: int = 0    # tokens running past the end of their word (segmenter words only)

    def to_json(self) -> dict[str, Any]:
        doc = dataclasses.asdict(self)
        if not self.crossing_tokens:  # the tokenizer's words: listed as before
            doc.pop("crossing_tokens")
        doc["batches"] = [list(b) for b in self.batches]
        doc["read"] = dict(self.read)
        return doc

    @classmethod
    def from_json(cls, doc: Mapping[str, Any]) -> "EncodedTask":
        fields = {f.name for f in dataclasses.fields(cls)}
        missing = fields - set(doc) - {"crossing_tokens"}
        if missing:
            raise KeyError(", ".join(sorted(missing)))
        values = {k: doc[k] for k in fields if k in doc}
        values["batches"] = tuple(tuple(int(x) for x in b) for b in doc["batches"])
        values["read"] = dict(doc["read"])
        return cls(**values)

    def located(self, directory: Path) -> "EncodedTask":
        """The same task with absolute file paths.

        A Dask worker's working directory is not the driver's.
        """
        d = directory.resolve()
        return dataclasses.replace(
            self, docs=str(d / Path(self.docs).name), words=str(d / Path(self.words).name)
        )


@dataclass(frozen=True)
class EncodedManifest:
    """encoded.json: ``EncodedManifest.read("enc/").tokenizer["hash"]``."""

    directory: Path
    doc: Mapping[str, Any]
    tasks: tuple[EncodedTask, ...]

    @property
    def tokenizer(self) -> Mapping[str, Any]:
        return self.doc["tokenizer"]

    @property
    def corpus(self) -> Mapping[str, Any]:
        return self.doc["corpus"]

    @classmethod
    def read(cls, directory: str | Path) -> "EncodedManifest":
        d = Path(directory)
        path = d / MANIFEST
        if not path.is_file():
            raise MaskprepError(
                f"{d}: no {MANIFEST}; not a finished encoded directory (write one with maskprep "
                "encode, or finish it with maskprep encode ... --resume)"
            )
        doc = read_json(path, what="encoded manifest")
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise MaskprepError(f"{path}: not a maskprep encoded manifest")
        if doc.get("format_version") != FORMAT_VERSION:
            raise MaskprepError(
                f"{path}: format_version {doc.get('format_version')!r}; this maskprep reads "
                f"version {FORMAT_VERSION}; encode the corpus again"
            )
        try:
            tasks = tuple(EncodedTask.from_json(t).located(d) for t in doc["tasks"])
            for key in ("tokenizer", "corpus", "totals"):
                doc[key]
            doc["corpus"]["fingerprint"], doc["corpus"]["options"], doc["tokenizer"]["hash"]
        except (KeyError, TypeError, ValueError) as exc:
            raise MaskprepError(f"{path}: incomplete manifest ({exc})") from None
        return cls(d, doc, tasks)


# ---------------------------------------------------------------- reading

@dataclass(frozen=True)
class WordTable:
    """The word types of one task: token ids (flat, with offsets) and the per-word fields."""

    ids: np.ndarray            # int32, all types' tokens concatenated
    offsets: np.ndarray        # int64 [types + 1]
    fields: Mapping[str, np.ndarray]  # EncodedBatch per-word field name -> values per type
    texts: Any                 # pyarrow string array, one per type

    def __len__(self) -> int:
        return len(self.offsets) - 1

    @property
    def lengths(self) -> np.ndarray:
        return np.diff(self.offsets)


def open_ipc(path: str, what: str) -> Any:
    import pyarrow as pa

    try:
        return pa.ipc.open_file(pa.memory_map(path, "r"))
    except FileNotFoundError:
        raise MaskprepError(
            f"{path}: {what} file is missing; encode the corpus again (or maskprep verify "
            "the directory)"
        ) from None
    except (OSError, pa.ArrowInvalid) as exc:
        raise MaskprepError(
            f"{path}: not a readable {what} file ({exc}); encode the corpus again"
        ) from None


def _numpy(array: Any, dtype: Any) -> np.ndarray:
    return numpy_of(array, dtype)  # not to_numpy: that imports pandas (0.2 s per process)


def read_word_table(path: str) -> WordTable:
    """Load the word table of one task: ``read_word_table("enc/words-00000.arrow")``."""
    import pyarrow as pa

    table = open_ipc(path, "word table").read_all()
    ids_col = (
        table.column("ids").combine_chunks()
        if table.num_rows
        else pa.array([], pa.list_(pa.uint16()))
    )
    offsets = _numpy(ids_col.offsets, np.int64)
    offsets = offsets - offsets[0] if len(offsets) else np.zeros(1, np.int64)
    ids = _numpy(ids_col.values, np.int32)[: offsets[-1]] if len(ids_col) else np.zeros(0, np.int32)
    dtypes = {"word_keys": np.uint64, "word_kinds": np.int8, "word_chars": np.int32}
    fields = {
        name: _numpy(table.column(col), dtypes.get(name, np.int64))
        for name, col in PER_WORD.items()
    }
    return WordTable(ids=ids, offsets=offsets, fields=fields, texts=table.column("text"))


def _batch_from(
    words_of_doc: Any, doc_fields: Mapping[str, np.ndarray], table: WordTable
) -> EncodedBatch:
    offs = _numpy(words_of_doc.offsets, np.int64)
    doc_offsets = offs - offs[0]
    types = _numpy(words_of_doc.values, np.int64)[offs[0]:offs[-1]]
    lengths = table.lengths[types]
    W = len(types)
    word_offsets = np.zeros(W + 1, np.int64)
    np.cumsum(lengths, out=word_offsets[1:])
    T = int(word_offsets[-1])
    start = table.offsets[types] - word_offsets[:-1]
    ids = table.ids[np.repeat(start, lengths) + np.arange(T, dtype=np.int64)]
    values: dict[str, np.ndarray] = {
        "ids": ids,
        "word_offsets": word_offsets,
        "doc_offsets": doc_offsets,
    }
    for name, col in table.fields.items():
        values[name] = col[types]
    values.update(doc_fields)
    return EncodedBatch(**values)  # type: ignore[arg-type]


def iter_encoded(task: EncodedTask, table: WordTable | None = None) -> Iterator[EncodedBatch]:
    """The `EncodedBatch`es of one encoded task, in order: ``for b in iter_encoded(task): ...``."""
    table = table if table is not None else read_word_table(task.words)
    reader = open_ipc(task.docs, "documents")
    for i in range(reader.num_record_batches):
        rb = reader.get_batch(i)
        doc_fields = {name: _numpy(rb.column(col), np.int64) for name, col in PER_DOC.items()}
        yield _batch_from(rb.column("words"), doc_fields, table)


def iter_word_types(task: EncodedTask) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """Per record batch of one encoded task: the word type of each word (int64 [W], an index
    into the task's word table) and the document offsets into those words (int64 [D + 1]).

    For readers that need only per-word fields (`maskprep count`): no token ids are gathered.

    >>> for types, doc_offsets in iter_word_types(task): ...  # doctest: +SKIP
    """
    reader = open_ipc(task.docs, "documents")
    for i in range(reader.num_record_batches):
        words = reader.get_batch(i).column("words")
        offs = _numpy(words.offsets, np.int64)
        yield _numpy(words.values, np.int64)[offs[0]:offs[-1]], offs - offs[0]
