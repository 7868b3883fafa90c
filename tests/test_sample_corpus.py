"""Checks on the bundled sample corpus (`sample_corpus/`) and its generator.

What is tested: `scripts/make_sample_corpus.py` is deterministic for a seed
and rewrites the committed files byte for byte (sha256 of each file);
the committed files decompress and parse; `planted_terms.tsv` agrees with an
independent recount on the committed text; the planted terms behave as
planted units (high PMI, far above chance pairs such as "of the").

What is not: maskprep's own figures. The corpus is invented text, so it is
never used here as a reference for real-language behaviour.
"""

from __future__ import annotations

import bisect
import collections
import csv
import datetime as dt
import gzip
import hashlib
import json
import math
import os
import re
import subprocess
import sys
import zlib
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parent.parent
CORPUS = REPO / "sample_corpus"
SCRIPT = REPO / "scripts" / "make_sample_corpus.py"
OUTPUTS = ("bulletins.jsonl.gz", "logbooks.txt.gz", "planted_terms.tsv", "README.md")
TSV_COLUMNS = ["term", "words", "documents_with_term", "occurrences", "target_rate"]


def generate(out: Path, *, seed: int, documents: int, hashseed: str = "0") -> None:
    """Run the generator in a fresh interpreter (PYTHONHASHSEED varied by callers)."""
    env = {**os.environ, "PYTHONHASHSEED": hashseed}
    subprocess.run([sys.executable, str(SCRIPT), "--out", str(out), "--seed", str(seed),
                    "--documents", str(documents)], check=True, capture_output=True, env=env)


def read_texts(folder: Path) -> tuple[list[dict], list[str]]:
    """The JSONL records and the logbook lines of a corpus folder."""
    with gzip.open(folder / "bulletins.jsonl.gz", "rt", encoding="utf-8") as f:
        records = [json.loads(line) for line in f]
    with gzip.open(folder / "logbooks.txt.gz", "rt", encoding="utf-8") as f:
        lines = f.read().split("\n")
    assert lines[-1] == "", "logbooks.txt.gz must end with a newline"
    return records, lines[:-1]


def read_tsv(folder: Path) -> list[dict]:
    with open(folder / "planted_terms.tsv", encoding="utf-8", newline="") as f:
        reader = csv.DictReader(f, delimiter="\t")
        assert reader.fieldnames == TSV_COLUMNS
        return list(reader)


@pytest.fixture(scope="module")
def committed() -> tuple[list[dict], list[str]]:
    return read_texts(CORPUS)


@pytest.fixture(scope="module")
def all_texts(committed: tuple[list[dict], list[str]]) -> list[str]:
    records, lines = committed
    return [r["text"] for r in records] + lines


# --- generator ----------------------------------------------------------------

@pytest.fixture(scope="module")
def small_runs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """Three small generator runs: seed 7 twice (other hash seeds), and seed 8."""
    root = tmp_path_factory.mktemp("generated")
    runs = {"a": (7, "1"), "b": (7, "2"), "c": (8, "1")}
    for name, (seed, hashseed) in runs.items():
        generate(root / name, seed=seed, documents=500, hashseed=hashseed)
    return {name: root / name for name in runs}


def test_same_seed_gives_byte_identical_files(small_runs: dict[str, Path]) -> None:
    for name in OUTPUTS:
        assert (small_runs["a"] / name).read_bytes() == (small_runs["b"] / name).read_bytes(), name
    assert not list(small_runs["a"].glob("*.tmp")), "temporary files left behind"


def test_other_seed_gives_other_text(small_runs: dict[str, Path]) -> None:
    texts_a, texts_c = read_texts(small_runs["a"]), read_texts(small_runs["c"])
    assert texts_a[0] != texts_c[0] and texts_a[1] != texts_c[1]


def test_documents_option_sets_the_document_count(small_runs: dict[str, Path]) -> None:
    records, lines = read_texts(small_runs["a"])
    assert len(records) + len(lines) == 500
    assert len(records) == 300  # 60% bulletins, the rest logbook lines
    assert "--seed 7 --documents 500" in (small_runs["a"] / "README.md").read_text(encoding="utf-8")


def test_bad_document_count_is_refused(tmp_path: Path) -> None:
    run = subprocess.run([sys.executable, str(SCRIPT), "--out", str(tmp_path), "--documents", "0"],
                         capture_output=True, text=True)
    assert run.returncode == 2
    assert "--documents must be at least 2, got 0" in run.stderr
    assert not any(tmp_path.iterdir())


# --- committed files ----------------------------------------------------------

def test_committed_jsonl_parses_with_text_id_and_date(
    committed: tuple[list[dict], list[str]],
) -> None:
    records, _ = committed
    assert records
    ids = set()
    for number, record in enumerate(records, start=1):
        assert isinstance(record.get("text"), str) and record["text"].strip(), f"line {number}"
        assert "\n" not in record["text"], f"line {number}"
        dt.date.fromisoformat(record["date"])
        ids.add(record["id"])
    assert len(ids) == len(records), "ids must be unique"


def test_committed_logbooks_have_one_document_per_line(
    committed: tuple[list[dict], list[str]],
) -> None:
    _, lines = committed
    assert lines
    assert all(line.strip() and "\r" not in line for line in lines)


def test_committed_corpus_size_and_characters(all_texts: list[str]) -> None:
    assert 15_000 <= len(all_texts) <= 25_000
    size = sum(len(t.encode("utf-8")) for t in all_texts)
    assert 3_500_000 <= size <= 5_000_000
    joined = "".join(all_texts)
    for ch in ("—", "°", "£", "è", "ø"):
        assert ch in joined, ch


def test_gzip_members_carry_no_time_or_name() -> None:
    for name in ("bulletins.jsonl.gz", "logbooks.txt.gz"):
        header = (CORPUS / name).read_bytes()[:10]
        # Source: RFC 1952, section 2.3: bytes 4-7 are MTIME, byte 3 holds the FNAME flag (0x08).
        assert header[:2] == b"\x1f\x8b"
        assert header[4:8] == b"\x00\x00\x00\x00", name
        assert not header[3] & 0x08, name


@pytest.fixture(scope="module")
def joined(all_texts: list[str]) -> tuple[str, list[int]]:
    """All texts lower-cased and joined by newlines, with each document's start offset."""
    lowered = [t.lower() for t in all_texts]
    starts = [0]
    for t in lowered[:-1]:
        starts.append(starts[-1] + len(t) + 1)
    return "\n".join(lowered), starts


def _recount(joined: tuple[str, list[int]], term: str) -> tuple[int, int]:
    """Whole-word, case-insensitive matches of ``term``, counted here independently.

    Words of a term may only be separated by non-newline whitespace, so no
    match spans two documents. Returns (documents with a match, matches).
    """
    big, starts = joined
    pattern = re.compile(r"[^\S\n]+".join(map(re.escape, term.lower().split())) + r"(?!\w)")
    docs, occurrences = set(), 0
    for m in pattern.finditer(big):
        before = big[m.start() - 1] if m.start() else " "
        if before.isalnum() or before == "_":
            continue
        occurrences += 1
        docs.add(bisect.bisect_right(starts, m.start()) - 1)
    return len(docs), occurrences


def test_planted_terms_table_matches_a_recount(joined: tuple[str, list[int]]) -> None:
    rows = read_tsv(CORPUS)
    assert 25 <= len(rows) <= 35
    lengths = collections.Counter()
    for row in rows:
        term = row["term"]
        assert int(row["words"]) == len(term.split())
        lengths[int(row["words"])] += 1
        assert (int(row["documents_with_term"]), int(row["occurrences"])) == _recount(
            joined, term
        ), term
    assert min(lengths) == 2 and max(lengths) == 5


def test_observed_document_shares_are_close_to_targets(all_texts: list[str]) -> None:
    n = len(all_texts)
    for row in read_tsv(CORPUS):
        target = float(row["target_rate"])
        observed = int(row["documents_with_term"]) / n
        # Binomial spread of a share: sqrt(p(1-p)/n) (common practice); 5 sigma leaves room for
        # 30 terms.
        assert abs(observed - target) <= 5 * math.sqrt(target * (1 - target) / n), row["term"]


def test_readme_states_synthetic_licence_command_and_table() -> None:
    text = (CORPUS / "README.md").read_text(encoding="utf-8")
    assert "synthetic" in text.lower() and "not a benchmark" in text
    assert "MIT" in text
    assert "python scripts/make_sample_corpus.py" in text
    for row in read_tsv(CORPUS):
        assert f"| {row['term']} |" in text


def test_planted_two_word_terms_outrank_chance_pairs(joined: tuple[str, list[int]]) -> None:
    """Bigram PMI over words; no bigram spans punctuation or two documents.

    Source: Church & Hanks (1990), PMI = log2(N * c(xy) / (c(x) c(y))), computed
    with NLTK's BigramAssocMeasures.pmi on the counts made here.
    """
    from nltk.metrics.association import BigramAssocMeasures

    # Punctuation and newlines stay in the token stream, so pairs that touch
    # them are dropped below and never count as bigrams of words.
    tokens = re.findall(r"\w+|[^\w\s]|\n", joined[0])
    unigrams = collections.Counter(tokens)
    types = list(unigrams)
    index = {w: i for i, w in enumerate(types)}
    ids = np.fromiter((index[t] for t in tokens), dtype=np.int64, count=len(tokens))
    keys, counts = np.unique(ids[:-1] * len(types) + ids[1:], return_counts=True)
    is_word = re.compile(r"\w").match
    n = sum(c for w, c in unigrams.items() if is_word(w))
    scores = {}
    for key, c in zip(keys[counts >= 20].tolist(), counts[counts >= 20].tolist()):
        pair = (types[key // len(types)], types[key % len(types)])
        if is_word(pair[0]) and is_word(pair[1]):
            scores[pair] = BigramAssocMeasures.pmi(c, (unigrams[pair[0]], unigrams[pair[1]]), n)
    ranked = sorted(scores, key=scores.get, reverse=True)
    rank = {pair: i for i, pair in enumerate(ranked)}
    chance = ("of", "the")
    planted = [tuple(r["term"].lower().split()) for r in read_tsv(CORPUS) if r["words"] == "2"]
    assert len(planted) >= 10
    for pair in planted:
        assert rank[pair] < 0.05 * len(ranked), (pair, rank[pair], len(ranked))
        assert scores[pair] > scores[chance] + 4, pair
    assert rank[chance] > 0.3 * len(ranked)


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A run of the generator with its default options (about 1.5 s)."""
    out = tmp_path_factory.mktemp("regenerated")
    subprocess.run([sys.executable, str(SCRIPT), "--out", str(out)], check=True,
                   capture_output=True)
    return out


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def test_committed_corpus_is_what_the_script_writes(regenerated: Path) -> None:
    """Regenerating with the default options reproduces every committed file's content.

    The .gz files are compared here by the sha256 of their decompressed text, the
    others byte for byte; the compressed bytes are compared in the next test.
    """
    assert sorted(p.name for p in regenerated.iterdir()) == sorted(OUTPUTS)
    for name in OUTPUTS:
        new, old = (regenerated / name).read_bytes(), (CORPUS / name).read_bytes()
        if name.endswith(".gz"):
            new, old = gzip.decompress(new), gzip.decompress(old)
        assert _sha256(new) == _sha256(old), name


def test_committed_gzip_files_are_what_the_script_writes(regenerated: Path) -> None:
    """The compressed bytes too, with the zlib this interpreter uses.

    zlib-ng (a different deflate implementation) compresses the same text to
    other bytes, so the compressed comparison is skipped there; the text is
    still compared in the test above.
    """
    if "ng" in zlib.ZLIB_RUNTIME_VERSION:
        pytest.skip(f"zlib {zlib.ZLIB_RUNTIME_VERSION} compresses differently from stock zlib")
    for name in ("bulletins.jsonl.gz", "logbooks.txt.gz"):
        assert _sha256((regenerated / name).read_bytes()) == \
            _sha256((CORPUS / name).read_bytes()), name
