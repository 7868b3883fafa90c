"""Tests of maskprep.units.select, .options and .files: building, ranking, quotas, files, errors.

The counts directory here is built in the test from invented lines with planted
multi-word terms (demo / planted-unit data, never a reference), using a real
WordPiece tokenizer trained in the test; the scores themselves are checked
against NLTK and textbook values in test_cohesion.py.
"""

from __future__ import annotations

import hashlib
import json
import random
import shutil
from collections import Counter
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from maskprep.tokenizer.encoding import load_tokenizer
from maskprep.units.cohesion import CountTable, Measure, binary_split_pmi, score_ngrams
from maskprep.errors import MaskprepError
from maskprep.units.files import UNITS_FORMAT_VERSION, format_top_units, read_units, write_units
from maskprep.units.options import parse_per_length, quotas
from maskprep.units.select import build_units

PLANTED = [
    "machine learning",
    "ice cream",
    "new york city",
    "prime minister",
    "red blood cell count",
]
FILLER = (
    "the a of and to in is it that was he for on are with as his they be at one have this from "
    "or had by word but what some we can out other were all there when up use your how said an "
    "each she which do their time if will way about many then them write would like so these"
).split()
MAX_N = 4
MIN_COUNT = 2
PLAIN_PMI = {"measure": "pmi", "edge_words": 0, "fragment_share": 0.0}
"""Plain pmi ranking. The invented lines here are not Zipfian (planted words are as frequent
as filler words), so the corpus-derived edge-word filter would bar planted words; the filters
are tested in test_unit_filters.py and on real text in test_unit_precision.py."""


def _lines(seed: int = 7, count: int = 400) -> list[str]:
    rng = random.Random(seed)
    out = []
    for _ in range(count):
        words = [rng.choice(FILLER) for _ in range(rng.randint(6, 14))]
        for _ in range(rng.randint(0, 2)):
            words.insert(rng.randint(0, len(words)), rng.choice(PLANTED))
        if rng.random() < 0.3:
            words.insert(rng.randint(1, len(words)), ",")
        out.append(" ".join(words) + ".")
    return out


def _train_tokenizer(lines: list[str]):
    from tokenizers import Tokenizer, decoders, models, normalizers, pre_tokenizers, trainers

    tok = Tokenizer(models.WordPiece(unk_token="[UNK]"))
    tok.normalizer = normalizers.BertNormalizer(lowercase=True)
    tok.pre_tokenizer = pre_tokenizers.BertPreTokenizer()
    tok.decoder = decoders.WordPiece()
    trainer = trainers.WordPieceTrainer(
        vocab_size=300,
        special_tokens=["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"],
        show_progress=False,
    )
    tok.train_from_iterator(lines, trainer)
    return tok


def word_key(word: str) -> int:
    return int.from_bytes(hashlib.blake2b(word.encode("utf-8"), digest_size=8).digest(), "little")


def _runs(tok, line: str) -> list[list[str]]:
    """Words of one line (the tokenizer's pre-tokenization), split at punctuation-only words."""
    words = [w for w, _ in tok.pre_tokenizer.pre_tokenize_str(tok.normalizer.normalize_str(line))]
    runs: list[list[str]] = [[]]
    for w in words:
        if all(not ch.isalnum() for ch in w):
            runs.append([])
        else:
            runs[-1].append(w)
    return [r for r in runs if r]


def make_counts_dir(path: Path, *, lines: list[str] | None = None, max_n: int = MAX_N,
                    min_count: int = MIN_COUNT) -> Path:
    """Write a counts directory per the counts contract.

    Its files: ngrams-<n>.parquet, counts.json, tokenizer.json.
    """
    lines = _lines() if lines is None else lines
    tok = _train_tokenizer(lines)
    counters = {n: Counter() for n in range(1, max_n + 1)}
    for line in lines:
        for run in _runs(tok, line):
            for n in range(1, max_n + 1):
                counters[n].update(zip(*(run[i:] for i in range(n))))
    path.mkdir(parents=True, exist_ok=True)
    N = sum(counters[1].values())
    for n, counter in counters.items():
        grams = sorted(g for g, c in counter.items() if c >= min_count)
        cols = {"text": pa.array([" ".join(g) for g in grams], pa.string()),
                "count": pa.array([counter[g] for g in grams], pa.int64())}
        for j in range(n):
            cols[f"w{j}"] = pa.array([word_key(g[j]) for g in grams], pa.uint64())
        pq.write_table(pa.table(cols), path / f"ngrams-{n}.parquet")
    tok.save(str(path / "tokenizer.json"))
    meta = {
        "format_version": 1,
        "N": N,
        "max_n": max_n,
        "min_count": min_count,
        "totals": {str(n): sum(c.values()) for n, c in counters.items()},
        "distinct": {str(n): len(c) for n, c in counters.items()},
        "tokenizer_hash": load_tokenizer(path / "tokenizer.json").hash,
        "corpus_fingerprint": "test-fixture",
        "options": {"max_n": max_n, "min_count": min_count},
        "maskprep_version": "test",
    }
    (path / "counts.json").write_text(json.dumps(meta), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def counts_dir(tmp_path_factory) -> Path:
    return make_counts_dir(tmp_path_factory.mktemp("counts") / "c")


@pytest.fixture()
def writable_counts(counts_dir, tmp_path) -> Path:
    dst = tmp_path / "copy"
    shutil.copytree(counts_dir, dst)
    return dst


def _tables(counts_dir: Path, up_to: int) -> dict[int, CountTable]:
    out = {}
    for k in range(1, up_to + 1):
        t = pq.read_table(counts_dir / f"ngrams-{k}.parquet")
        keys = np.stack([t.column(f"w{j}").to_numpy() for j in range(k)], axis=1).astype(np.uint64)
        out[k] = CountTable.build(keys, t.column("count").to_numpy())
    return out


# ------------------------------------------------------------------ building and ranking

def test_round_trip_and_token_ids(counts_dir, tmp_path):
    from tokenizers import Tokenizer

    vocab = build_units(counts_dir, top=40, quiet=True, **PLAIN_PMI)
    assert 0 < len(vocab) <= 40
    pq_path, tsv_path = write_units(vocab, tmp_path / "units.parquet")
    assert tsv_path == tmp_path / "units.tsv"
    back = read_units(pq_path)
    assert back.text == vocab.text and back.measure is Measure.PMI
    assert np.array_equal(back.n, vocab.n) and np.array_equal(back.count, vocab.count)
    assert np.array_equal(back.score, vocab.score)
    assert all(
        np.array_equal(a, b) and a.dtype == np.int32
        for a, b in zip(back.token_ids, vocab.token_ids)
    )
    assert all(np.array_equal(a, b) for a, b in zip(back.word_keys, vocab.word_keys))
    assert back.tokenizer_hash == vocab.tokenizer_hash and back.options == vocab.options
    assert back.options["min_count"] == MIN_COUNT and back.options["top"] == 40
    tok = Tokenizer.from_file(str(counts_dir / "tokenizer.json"))
    for text, ids, keys, n in zip(back.text, back.token_ids, back.word_keys, back.n):
        assert tok.decode(ids.tolist()) == text
        assert len(text.split(" ")) == n == len(keys)
        assert keys.tolist() == [word_key(w) for w in text.split(" ")]
    rows = tsv_path.read_text(encoding="utf-8").splitlines()
    assert rows[0] == "rank\tn\tcount\tscore\ttext" and len(rows) == len(vocab) + 1
    assert rows[1].split("\t")[4] == vocab.text[0]
    schema_meta = json.loads(pq.read_schema(pq_path).metadata[b"maskprep"])
    assert schema_meta["format_version"] == UNITS_FORMAT_VERSION and schema_meta["measure"] == "pmi"


def test_by_length_matches_units(counts_dir):
    vocab = build_units(counts_dir, top=60, quiet=True, **PLAIN_PMI)
    groups = vocab.by_length()
    assert sum(len(s) for _, s in groups.values()) == len(vocab)
    for n, (keys, scores) in groups.items():
        idx = np.flatnonzero(vocab.n == n)
        assert keys.shape == (len(idx), n) and keys.dtype == np.uint64
        assert np.array_equal(scores, vocab.score[idx])
        assert all(np.array_equal(keys[r], vocab.word_keys[i]) for r, i in enumerate(idx))


@pytest.mark.parametrize("measure", list(Measure))
def test_ranking_order_filters_and_scores(counts_dir, measure):
    vocab = build_units(
        counts_dir,
        measure=measure,
        top=10_000,
        min_count=3,
        quiet=True,
        edge_words=0,
        fragment_share=0.0,
    )
    assert len(vocab) > 0 and vocab.measure is measure
    assert (vocab.n >= 2).all() and (vocab.count >= 3).all()
    # best first: score desc, count desc, text asc
    order = sorted(
        range(len(vocab)), key=lambda i: (-vocab.score[i], -vocab.count[i], vocab.text[i].encode())
    )
    assert order == list(range(len(vocab)))
    tables = _tables(counts_dir, MAX_N - 1)
    N = json.loads((counts_dir / "counts.json").read_text())["N"]
    for n, (keys, scores) in vocab.by_length().items():
        counts = vocab.count[vocab.n == n]
        ref = score_ngrams(measure, n=n, keys=keys, counts=counts, tables=tables, N=N)
        np.testing.assert_array_equal(scores, ref)
        assert (binary_split_pmi(n=n, keys=keys, counts=counts, tables=tables, N=N) > 0).all()
        if measure is not Measure.LLR:
            assert (scores > 0).all()


def test_planted_units_rank_near_the_top(counts_dir):
    # Planted-unit test (invented data): with counts pruned at 5 (rarer n-grams make
    # PMI unreliable, common practice), every planted term ranks above every n-gram
    # made only of filler words (chance pairs of frequent words).
    vocab = build_units(counts_dir, top=10_000, min_count=5, quiet=True, **PLAIN_PMI)
    rank = {t: i for i, t in enumerate(vocab.text)}
    assert all(p in rank and rank[p] < 12 for p in PLANTED), {p: rank.get(p) for p in PLANTED}
    filler = [i for i, t in enumerate(vocab.text) if all(w in FILLER for w in t.split())]
    assert filler and min(filler) > max(rank[p] for p in PLANTED)


def test_deterministic_and_independent_of_row_order(counts_dir, tmp_path):
    shuffled = tmp_path / "shuffled"
    shutil.copytree(counts_dir, shuffled)
    for k in range(1, MAX_N + 1):
        t = pq.read_table(shuffled / f"ngrams-{k}.parquet")
        perm = np.random.default_rng(k).permutation(t.num_rows)
        pq.write_table(t.take(pa.array(perm)), shuffled / f"ngrams-{k}.parquet")
    outs = []
    for i, src in enumerate([counts_dir, counts_dir, shuffled]):
        vocab = build_units(src, measure="npmi", top=50, per_length="2:0.6,3:0.3,4:0.1", quiet=True)
        outs.append(write_units(vocab, tmp_path / f"run{i}" / "units.parquet"))
    for pq_path, tsv_path in outs[1:]:
        assert pq_path.read_bytes() == outs[0][0].read_bytes()
        assert tsv_path.read_bytes() == outs[0][1].read_bytes()
    assert not [p for p in tmp_path.rglob(".*tmp")]


def test_per_length_quotas_and_flow(counts_dir):
    vocab = build_units(counts_dir, top=20, per_length="2:0.5,3:0.5", quiet=True, **PLAIN_PMI)
    assert Counter(vocab.n.tolist()) == {2: 10, 3: 10}
    everything = build_units(counts_dir, top=10_000, min_count=5, quiet=True, **PLAIN_PMI)
    n4 = int((everything.n == 4).sum())
    assert 0 < n4 < 18
    flowed = build_units(counts_dir, top=20, min_count=5, per_length="4:0.9,2:0.1", quiet=True,
                         **PLAIN_PMI)
    got = Counter(flowed.n.tolist())
    assert got[4] == n4 and got[2] == 20 - n4 and 3 not in got
    limited = build_units(counts_dir, top=10_000, max_n=2, quiet=True, **PLAIN_PMI)
    assert set(limited.n.tolist()) == {2}


def test_quota_arithmetic():
    assert quotas(10, {2: 0.5, 3: 0.3, 4: 0.2}, {2: 100, 3: 100, 4: 100}) == {2: 5, 3: 3, 4: 2}
    assert quotas(10, {2: 0.5, 3: 0.5}, {2: 2, 3: 100}) == {2: 2, 3: 8}
    assert quotas(7, {2: 1 / 3, 3: 1 / 3, 4: 1 / 3}, {2: 100, 3: 100, 4: 100}) == {
        2: 3,
        3: 2,
        4: 2,
    }
    assert quotas(10, {2: 0.5, 3: 0.5}, {2: 1, 3: 2}) == {2: 1, 3: 2}


def test_token_ids_are_the_mid_sentence_form(writable_counts):
    # With a byte-level BPE tokenizer a word after another word carries the space
    # marker; unit token ids must be that form (how the unit appears in running text).
    from tokenizers import Tokenizer, decoders, models, pre_tokenizers, trainers

    tok = Tokenizer(models.BPE())
    tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
    tok.decoder = decoders.ByteLevel()
    tok.train_from_iterator(_lines(), trainers.BpeTrainer(
        vocab_size=400, show_progress=False, initial_alphabet=pre_tokenizers.ByteLevel.alphabet()))
    tok.save(str(writable_counts / "tokenizer.json"))
    meta = json.loads((writable_counts / "counts.json").read_text())
    meta["tokenizer_hash"] = load_tokenizer(writable_counts / "tokenizer.json").hash
    (writable_counts / "counts.json").write_text(json.dumps(meta))
    vocab = build_units(writable_counts, top=20, min_count=5, quiet=True, **PLAIN_PMI)
    for text, ids in zip(vocab.text, vocab.token_ids):
        assert tok.decode(ids.tolist()) == " " + text
        assert tok.id_to_token(int(ids[0])).startswith("\u0120")  # the byte-level space marker


def test_option_help_names_every_measure_range():
    from maskprep.units.options import OPTION_HELP

    assert all(m.range_text in OPTION_HELP["measure"] for m in Measure)


def test_format_top_units(counts_dir):
    vocab = build_units(counts_dir, top=30, quiet=True, **PLAIN_PMI)
    text = format_top_units(vocab, per_length=3)
    assert vocab.text[0] in text and "2 words (top 3)" in text and "nats" in text
    assert text == format_top_units(vocab, per_length=3)


# ------------------------------------------------------------------ errors

def test_parse_per_length():
    assert parse_per_length("2:0.5, 3:0.3,4:0.1,5:0.1", max_n=5) == (
        (2, 0.5),
        (3, 0.3),
        (4, 0.1),
        (5, 0.1),
    )
    assert parse_per_length({3: 1.0}) == ((3, 1.0),)
    for spec, msg in [
        ("2-0.5", "not LENGTH:SHARE"),
        ("x:1", "not a whole number"),
        ("2:half", "not a number"),
        ("1:1", r"outside 2\.\.5"),
        ("6:1", r"outside 2\.\.5"),
        ("2:0", r"must be in \(0, 1\]"),
        ("2:0.5,2:0.5", "given twice"),
        ("2:0.5,3:0.4", "add up to 0.9"),
    ]:
        with pytest.raises(MaskprepError, match=msg):
            parse_per_length(spec, max_n=5)


def test_counts_dir_errors(writable_counts, tmp_path):
    d = writable_counts
    with pytest.raises(MaskprepError, match="not found; make it first with maskprep count"):
        build_units(tmp_path / "nope", quiet=True)
    meta = json.loads((d / "counts.json").read_text())

    def with_meta(**changes):
        m = {k: v for k, v in meta.items() if k not in changes or changes[k] is not None}
        m.update({k: v for k, v in changes.items() if v is not None})
        (d / "counts.json").write_text(json.dumps(m))

    with_meta(N=None)
    with pytest.raises(MaskprepError, match="field 'N' is missing.*re-run maskprep count"):
        build_units(d, quiet=True)
    with_meta(format_version=99)
    with pytest.raises(MaskprepError, match="format_version 99.*reads version 1"):
        build_units(d, quiet=True)
    with_meta(tokenizer_hash="0" * 64)
    with pytest.raises(MaskprepError, match="counts come from another tokenizer"):
        build_units(d, quiet=True)
    with_meta(max_n=1)
    with pytest.raises(MaskprepError, match="only single words"):
        build_units(d, quiet=True)
    with_meta()
    (d / "counts.json").write_text("{not json")
    with pytest.raises(MaskprepError, match="counts.json: counts file is not valid JSON"):
        build_units(d, quiet=True)
    (d / "counts.json").unlink()
    with pytest.raises(MaskprepError, match="has no counts.json"):
        build_units(d, quiet=True)
    with_meta()
    (d / "ngrams-3.parquet").unlink()
    with pytest.raises(
        MaskprepError, match=r"ngrams-3\.parquet: missing; the counts directory is incomplete"
    ):
        build_units(d, quiet=True)
    with pytest.raises(
        MaskprepError, match=r"ngrams-3\.parquet: missing"
    ):  # fragments of pairs need it
        build_units(d, max_n=2, quiet=True)
    # without the fragment filter
    assert len(build_units(d, max_n=2, fragment_share=0.0, quiet=True)) > 0
    (d / "tokenizer.json").unlink()
    with pytest.raises(MaskprepError, match="has no tokenizer.json"):
        build_units(d, quiet=True)


def test_corrupt_parquet_errors(writable_counts):
    d = writable_counts
    t = pq.read_table(d / "ngrams-2.parquet")
    pq.write_table(t.drop(["w1"]), d / "ngrams-2.parquet")
    with pytest.raises(MaskprepError, match=r"ngrams-2\.parquet: missing column\(s\) w1"):
        build_units(d, quiet=True)
    # a kept bigram whose word is missing from the unigram counts: corrupt, never zero
    pq.write_table(t, d / "ngrams-2.parquet")
    u = pq.read_table(d / "ngrams-1.parquet")
    pq.write_table(u.slice(1), d / "ngrams-1.parquet")
    with pytest.raises(MaskprepError, match=r"ngrams-2\.parquet: corrupt counts.*missing"):
        build_units(d, quiet=True)
    (d / "ngrams-1.parquet").write_bytes(b"not parquet")
    with pytest.raises(MaskprepError, match=r"ngrams-1\.parquet: not a readable Parquet file"):
        build_units(d, quiet=True)


def test_option_errors(counts_dir):
    with pytest.raises(MaskprepError, match="--min-count 1: the counts were pruned at 2"):
        build_units(counts_dir, min_count=1, quiet=True)
    with pytest.raises(MaskprepError, match="--top: must be a whole number >= 1"):
        build_units(counts_dir, top=0, quiet=True)
    with pytest.raises(MaskprepError, match=r"--max-n: must be in 2\.\.4"):
        build_units(counts_dir, max_n=5, quiet=True)
    with pytest.raises(MaskprepError, match="--measure: unknown measure 'dice'"):
        build_units(counts_dir, measure="dice", quiet=True)
    with pytest.raises(MaskprepError, match=r"--per-length: length 4 is outside 2\.\.3"):
        build_units(counts_dir, max_n=3, per_length="2:0.5,4:0.5", quiet=True)


def test_units_file_errors(counts_dir, tmp_path):
    vocab = build_units(counts_dir, top=5, quiet=True, **PLAIN_PMI)
    with pytest.raises(MaskprepError, match="give a .parquet file name"):
        write_units(vocab, tmp_path / "units.tsv")
    with pytest.raises(MaskprepError, match="units file not found; make one with maskprep units"):
        read_units(tmp_path / "missing.parquet")
    (tmp_path / "junk.parquet").write_bytes(b"hello")
    with pytest.raises(MaskprepError, match="not a Parquet file"):
        read_units(tmp_path / "junk.parquet")
    pq.write_table(pa.table({"text": ["a b"]}), tmp_path / "other.parquet")
    with pytest.raises(MaskprepError, match="not a units file"):
        read_units(tmp_path / "other.parquet")
    good, _ = write_units(vocab, tmp_path / "units.parquet")
    t = pq.read_table(good)
    pq.write_table(
        t.drop(["token_ids"]).replace_schema_metadata(t.schema.metadata), tmp_path / "cut.parquet"
    )
    with pytest.raises(MaskprepError, match=r"missing column\(s\) token_ids"):
        read_units(tmp_path / "cut.parquet")
    meta = json.loads(t.schema.metadata[b"maskprep"])
    meta["format_version"] = 42
    pq.write_table(
        t.replace_schema_metadata({b"maskprep": json.dumps(meta)}), tmp_path / "v42.parquet"
    )
    with pytest.raises(MaskprepError, match="format_version 42"):
        read_units(tmp_path / "v42.parquet")


def test_empty_vocabulary_round_trips(tmp_path):
    # Every word equally likely and independent-looking: with a high min_count nothing survives.
    d = make_counts_dir(tmp_path / "c", lines=["alpha beta gamma delta"] * 3, max_n=2, min_count=3)
    vocab = build_units(d, min_count=4, quiet=True, **PLAIN_PMI)
    assert len(vocab) == 0 and vocab.by_length() == {}
    pq_path, _ = write_units(vocab, tmp_path / "units.parquet")
    assert len(read_units(pq_path)) == 0
    assert "no n-gram passed" in format_top_units(vocab)


# ------------------------------------------------------------------ edge-word and fragment filters

@pytest.mark.parametrize("edge_words, share", [(5, 0.0), (0, 0.5), (8, 0.75)])
def test_filters_drop_exactly_what_a_python_reference_drops(counts_dir, edge_words, share):
    # Source: common practice (the filters recomputed with plain Python over the counts files:
    # a Counter of words for the edge words, a scan of the longer n-grams for fragments).
    plain = build_units(counts_dir, measure="npmi", top=10_000, min_count=3, edge_words=0,
                        fragment_share=0.0, quiet=True)
    got = build_units(counts_dir, measure="npmi", top=10_000, min_count=3, edge_words=edge_words,
                      fragment_share=share, quiet=True)
    t1 = pq.read_table(counts_dir / "ngrams-1.parquet").to_pydict()
    words = sorted(zip(t1["count"], t1["text"]), key=lambda ct: (-ct[0], ct[1].encode()))
    edge = {w for _, w in words[:edge_words]}
    longer: dict[int, Counter] = {}
    for n in range(3, MAX_N + 1):
        t = pq.read_table(counts_dir / f"ngrams-{n}.parquet").to_pydict()
        best: Counter = Counter()
        for text, c in zip(t["text"], t["count"]):
            w = text.split(" ")
            for part in (" ".join(w[:-1]), " ".join(w[1:])):
                best[part] = max(best[part], c)
        longer[n - 1] = best
    expected = []
    for text, n, c in zip(plain.text, plain.n.tolist(), plain.count.tolist()):
        w = text.split(" ")
        if w[0] in edge or w[-1] in edge:
            continue
        if share > 0 and n in longer and longer[n][text] >= share * c:
            continue
        expected.append(text)
    assert list(got.text) == expected and len(expected) < len(plain)
    assert got.source["edge_word_list"] == [w for _, w in words[:edge_words]]
    assert got.source["dropped_edge"] + got.source["dropped_fragment"] == len(plain) - len(expected)


def test_units_cli_reports_the_filters(counts_dir, tmp_path):
    from click.testing import CliRunner

    from maskprep.cli import cli

    out = tmp_path / "u.parquet"

    def units(*options: str):  # maskprep --quiet units COUNTS_DIR -o OUT OPTIONS...
        return CliRunner().invoke(
            cli, ["--quiet", "units", str(counts_dir), "-o", str(out), *options]
        )

    r = units("--edge-words", "4", "--fragment-share", "0.6", "--measure", "pmi", "--show", "2")
    assert r.exit_code == 0, r.output
    assert "began or ended with one of the 4 most frequent words" in r.output
    assert "were fragments (one n-gram a word longer holds >= 0.6 of their occurrences)" in r.output
    meta = json.loads(pq.read_schema(out).metadata[b"maskprep"])
    assert meta["options"]["edge_words"] == 4 and meta["options"]["fragment_share"] == 0.6
    assert len(meta["source"]["edge_word_list"]) == 4 and meta["word_splitting"]["normalizer"]
    r = units("--edge-words", "0", "--fragment-share", "0")
    assert r.exit_code == 0 and "filters: none (--edge-words 0 --fragment-share 0)" in r.output
    for bad, message in (
        (["--edge-words", "-2"], "--edge-words: must be a whole number >= 0"),
        (["--fragment-share", "2"], "--fragment-share: must be a number in [0, 1]"),
    ):
        r = CliRunner().invoke(
            cli, ["--quiet", "units", str(counts_dir), "-o", str(tmp_path / "x.parquet"), *bad]
        )
        assert r.exit_code == 1 and message in r.output and "Traceback" not in r.output, r.output
        assert not (tmp_path / "x.parquet").exists()
