"""Stage 2, the tokenizer: load, save and train tokenizers; encode documents into words and tokens.

It turns text into numpy arrays (`EncodedBatch`); it does not count or mask.
"""

from .encoding import (
    PUNCT,
    SPACE,
    SPECIAL,
    WORD,
    EncodedBatch,
    TokenizerInfo,
    encode_documents,
    encode_stream,
    load_tokenizer,
    save_tokenizer,
)
from .train import TrainConfig, train_tokenizer
from .words import WordsConfig

__all__ = [
    "PUNCT",
    "SPACE",
    "SPECIAL",
    "WORD",
    "EncodedBatch",
    "TokenizerInfo",
    "TrainConfig",
    "encode_documents",
    "encode_stream",
    "load_tokenizer",
    "save_tokenizer",
    "train_tokenizer",
    "WordsConfig",
]
