"""A lowercased WordPiece strips combining marks: train-tokenizer says so when it hurts.

Real text: the Japanese and Thai translations of the messages of dpkg and apt
(/usr/share/locale/{ja,th}/LC_MESSAGES/*.mo, installed by the Debian packages ``dpkg`` and
``apt``), read by the loader of tests/test_words_ja_th.py (this module skips with it); the
English side is the Shakespeare plays of the other tests (conftest.py).

Reference for the counted share: the Unicode Character Database through Python's
``unicodedata`` (source: Unicode Standard Annex #15 for NFD, the UCD for the general category
Mn and the character names): a character loses a mark when its NFD holds a character of
category Mn, unless the name of its base (the first character of the NFD) starts with LATIN,
GREEK or CYRILLIC; letters are the characters of categories L* and M*.
"""

from __future__ import annotations

import unicodedata
from collections import Counter
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.tokenizer import train
from maskprep.tokenizer.encoding import load_tokenizer
from maskprep.tokenizer.train import CharTally, TrainConfig, mark_loss, train_tokenizer

from test_words_ja_th import messages

SCRIPTS = {"ja": ("KATAKANA", "HIRAGANA"), "th": ("THAI",)}


@pytest.fixture(autouse=True)
def fresh_warnings(monkeypatch: pytest.MonkeyPatch) -> None:
    """Every test sees the warning anew (it is printed once per process for the same figures)."""
    monkeypatch.setattr(train, "_WARNED", set())


@pytest.fixture(scope="module")
def corpora(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    out = {}
    for lang in SCRIPTS:
        p = tmp_path_factory.mktemp(lang) / f"{lang}.txt"
        p.write_text("\n".join(messages(lang)) + "\n", encoding="utf-8")
        out[lang] = p
    return out


def reference_share(text: str) -> tuple[int, int]:
    """(letters, letters losing a mark outside Latin/Greek/Cyrillic), by unicodedata alone."""
    letters = lost = 0
    for ch, n in Counter(text).items():
        if unicodedata.category(ch)[0] not in "LM":
            continue
        letters += n
        nfd = unicodedata.normalize("NFD", ch)
        if not any(unicodedata.category(c) == "Mn" for c in nfd):
            continue
        if unicodedata.name(nfd[0], "").split()[:1] in (["LATIN"], ["GREEK"], ["CYRILLIC"]):
            continue
        if 0x300 <= ord(ch) <= 0x36F:  # Combining Diacritical Marks: written on Latin letters
            continue
        lost += n
    return letters, lost


def train_cli(corpus: Path, out: Path, *flags: str) -> tuple[str, str]:
    result = CliRunner().invoke(cli, ["--quiet", "train-tokenizer", str(corpus), "-o", str(out),
                                      "--vocab-size", "2000", *flags])
    assert result.exit_code == 0, result.output + repr(result.exception)
    return result.stdout, result.stderr


@pytest.mark.parametrize("lang", sorted(SCRIPTS))
def test_lowercase_warns_once_with_share_scripts_and_fix(lang, corpora, tmp_path) -> None:
    text = corpora[lang].read_text(encoding="utf-8")
    letters, lost = reference_share(text)
    assert lost / letters > 0.05  # Source: the UCD (above): kana and Thai carry many marks
    _out, err = train_cli(corpora[lang], tmp_path / "tok.json")
    lines = [line for line in err.splitlines() if "combining marks" in line]
    assert len(lines) == 1, err  # one line, printed despite --quiet
    line = lines[0]
    assert line.startswith("warning: ") and "--no-lowercase" in line
    assert f"{lost / letters:.2%}" in line and f"{lost:,} of {letters:,}" in line
    assert all(s in line for s in SCRIPTS[lang]), line
    assert line.count(" -> ") == 3


@pytest.mark.parametrize("lang", sorted(SCRIPTS))
def test_no_lowercase_keeps_marks_and_is_silent(lang, corpora, tmp_path) -> None:
    out = tmp_path / "tok.json"
    _out, err = train_cli(corpora[lang], out, "--no-lowercase")
    assert "combining marks" not in err, err
    tok = load_tokenizer(out).tokenizer
    if lang == "ja":
        # Source: the UCD: ガ (U+30AC) is カ + U+3099 under NFD; kept, it stays one letter.
        assert tok.normalizer.normalize_str("ガ") == "ガ"
        pieces = tok.encode("バージョン", add_special_tokens=False).tokens
        assert "".join(p.removeprefix("##") for p in pieces) == "バージョン"
    else:
        word = "ที่"  # THAI CHARACTER THO THAHAN, SARA II (Mn), MAI EK (Mn)
        assert tok.normalizer.normalize_str(word) == word


def test_lowercase_strips_kana_voicing() -> None:
    # The behaviour warned about (source: the UCD; tokenizers' BertNormalizer removes Mn).
    tok = train_tokenizer(iter(messages("ja")), TrainConfig(vocab_size=2000)).tokenizer
    assert tok.normalizer.normalize_str("ガ") == "カ"
    assert tok.normalizer.normalize_str("バージョン") == "ハーション"


@pytest.mark.parametrize("lang", sorted(SCRIPTS))
def test_counted_share_matches_unicodedata(lang) -> None:
    docs = messages(lang)
    tok = train_tokenizer(iter(docs), TrainConfig(vocab_size=2000)).tokenizer
    tally = CharTally(batch_chars=5000)  # several batches
    assert list(tally.wrap(iter(docs))) == docs
    loss = mark_loss(tok, tally.counts(), tally.head)
    letters, lost = reference_share("".join(docs))
    assert (loss.letters, loss.lost) == (letters, lost)
    assert sum(loss.scripts.values()) == lost and set(loss.scripts) == set(SCRIPTS[lang])


def test_english_is_silent(shakespeare_small, tmp_path) -> None:
    # Real English (the plays): accents there are Latin, stripped by uncased practice.
    letters, lost = reference_share(shakespeare_small.read_text(encoding="utf-8"))
    assert letters > 100_000 and lost / letters <= train.MARK_LOSS_WARN
    _out, err = train_cli(shakespeare_small, tmp_path / "tok.json")
    assert "combining marks" not in err, err


def test_latin_accents_do_not_count() -> None:
    # Source: the UCD: é is LATIN SMALL LETTER E + U+0301; ガ is KATAKANA LETTER KA + U+3099.
    tok = train_tokenizer(iter(["café résumé naïve ガス"] * 50),
                          TrainConfig(vocab_size=100), check_size=False).tokenizer
    tally = CharTally()
    list(tally.wrap(["café ガ"]))
    loss = mark_loss(tok, tally.counts(), tally.head)
    assert (loss.letters, loss.lost, loss.scripts) == (5, 1, {"KATAKANA": 1})
    assert loss.examples[0][1] == "カ"


def test_audit_trained_sizes_warn_once(corpora, tmp_path) -> None:
    # audit --vocab-sizes trains WordPiece on the spot: one warning for its two sizes.
    result = CliRunner().invoke(cli, ["--quiet", "--workers", "1", "audit", str(corpora["th"]),
                                      "--vocab-sizes", "1000,2000", "-o", str(tmp_path / "a")])
    assert result.exit_code == 0, result.output + repr(result.exception)
    lines = [line for line in result.stderr.splitlines() if "combining marks" in line]
    assert len(lines) == 1 and "THAI" in lines[0], result.stderr
