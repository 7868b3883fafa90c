"""Stage 3, encode: a corpus tokenized once (token ids, words, documents) for every later stage.

It writes and reads encoded directories and hands any stage its batches from
raw text or from an encoded directory alike; it does not count or mask.
"""

from .format import EncodedManifest, is_encoded_dir, iter_encoded
from .source import Source, SourceTask, TaskReader, open_source
from .write import encode_corpus

__all__ = [
    "EncodedManifest",
    "Source",
    "SourceTask",
    "TaskReader",
    "encode_corpus",
    "is_encoded_dir",
    "iter_encoded",
    "open_source",
]
