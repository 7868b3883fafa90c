"""Word definitions for scripts written without spaces (``--words``), on real Chinese text.

Real text: the Debian package ``fortunes-zh`` (file /usr/share/games/fortunes/chinese,
modern Chinese prose about free software and classical quotations; colour escape
codes stripped, one fortune per line). `.ci/run` installs it with apt-get; without it
these tests skip and say why. The segmenter is the PyPI package ``rjieba`` (extra
``maskprep[zh]``, installed by `.ci/run`); the reference lexicon is the dictionary file
``jieba/dict.txt`` shipped by the PyPI package ``jieba``.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.errors import MaskprepError
from maskprep.tokenizer.encoding import WORD, encode_documents, load_tokenizer
from maskprep.tokenizer.words import WordsConfig, words_option

from conftest import deal_lines, trained_tokenizer

FORTUNES = Path("/usr/share/games/fortunes/chinese")
rjieba = pytest.importorskip(
    "rjieba", reason="the zh extra (pip install 'maskprep[zh]') is not installed"
)
HAN_RUN = re.compile(r"[\u4e00-\u9fff\u3400-\u4dbf]+")


def fortunes_lines() -> list[str]:
    if not FORTUNES.is_file():
        pytest.skip(
            f"{FORTUNES} missing: apt-get install fortunes-zh (real Chinese text for these tests)"
        )
    raw = FORTUNES.read_text(encoding="utf-8", errors="replace")
    raw = re.sub(r"\x1b\[[0-9;]*[A-Za-z]", "", raw)
    entries = [
        " ".join(ln.strip() for ln in e.splitlines() if ln.strip()) for e in raw.split("\n%\n")
    ]
    return [e for e in entries if e]


@pytest.fixture(scope="module")
def zh_corpus(tmp_path_factory) -> Path:
    p = tmp_path_factory.mktemp("zh") / "fortunes-zh.txt"
    p.write_text("\n".join(fortunes_lines()) + "\n", encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def zh_wordpiece(zh_corpus: Path, tmp_path_factory) -> Path:
    return trained_tokenizer(
        zh_corpus, tmp_path_factory.mktemp("zh-wp"), model="wordpiece", vocab_size=8000
    )


@pytest.fixture(scope="module")
def zh_bpe(zh_corpus: Path, tmp_path_factory) -> Path:
    return trained_tokenizer(
        zh_corpus, tmp_path_factory.mktemp("zh-bpe"), model="bpe", vocab_size=8000
    )


def invoke(*args: str) -> str:
    result = CliRunner().invoke(cli, ["--quiet", *args])
    assert result.exit_code == 0, result.output + repr(result.exception)
    return result.output


def word_texts(info, batch) -> list[str]:
    by_key = {t.key: t.text for t in info._types.values()}
    return [by_key[k] for k in batch.word_keys.tolist()]


# ------------------------------------------------------------------ the segmenter itself

def test_segmenter_gives_jiebas_documented_segmentations():
    # Source: the README of jieba (the dictionary and method rjieba implements), examples of
    # its default ("accurate") mode; from memory. 杭研 is the README's example of a word found
    # by the HMM although it is not in the dictionary.
    documented = {
        "我来到北京清华大学": ["我", "来到", "北京", "清华大学"],
        "他来到了网易杭研大厦": ["他", "来到", "了", "网易", "杭研", "大厦"],
        "小明硕士毕业于中国科学院计算所，后在日本京都大学深造":
            ["小明", "硕士", "毕业", "于", "中国科学院", "计算所", "，", "后", "在",
             "日本京都大学", "深造"],
    }
    info = load_tokenizer_for_tests()
    for sentence, words in documented.items():
        batch = encode_documents(info, [sentence], WordsConfig("zh"))
        got = [w for w in word_texts(info, batch)]
        assert got == words, sentence


def load_tokenizer_for_tests():
    """A byte-level BPE tokenizer with no training.

    Every character is bytes, so words come from the segmenter.
    """
    from tokenizers import Tokenizer, decoders, models, pre_tokenizers

    from maskprep.tokenizer.encoding import TokenizerInfo

    alphabet = pre_tokenizers.ByteLevel.alphabet()
    vocab = {ch: i for i, ch in enumerate(sorted(alphabet))}
    vocab["<mask>"] = len(vocab)
    tok = Tokenizer(models.BPE(vocab=vocab, merges=[]))
    tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
    tok.decoder = decoders.ByteLevel()
    return TokenizerInfo(tok, name="bytes")


# ------------------------------------------------------------------ tokens to words

def test_mixed_chinese_and_english_text_is_right_for_both_scripts(zh_wordpiece):
    # Reference: Han runs are cut as rjieba cuts them; everything else keeps the tokenizer's own
    # words (its pre-tokenization), both from outside this project.
    info = load_tokenizer(zh_wordpiece)
    docs = ["Debian 是一个自由的操作系统，version 3.14 于2024年发布。"
            "Linux 内核和 GNU 工具组成了它。",
            "我们在 GitHub 上找到了 rjieba 的源代码, 它用 Rust 写成。"]
    zh = encode_documents(info, docs, WordsConfig("zh"))
    plain = encode_documents(info, docs)
    got = word_texts(info, zh)
    han = [w for w in got if HAN_RUN.search(w)]
    expected_han = [w for d in docs for run in HAN_RUN.findall(d) for w in rjieba.cut(run)]
    assert han == expected_han
    other = [w for w in got if not HAN_RUN.search(w)]
    assert other == [w for w in word_texts(info, plain) if not HAN_RUN.search(w)]
    assert "debian" in other and "3" in other and "14" in other and "," in other
    assert zh.crossing_tokens == 0  # WordPiece never puts two CJK characters in one token


def test_boundary_crossing_tokens_join_the_word_they_start_in(zh_bpe):
    # Reference: the rule stated one token at a time in plain Python (below), on rjieba's
    # words and the tokenizer's own offsets and word ids.
    info = load_tokenizer(zh_bpe)
    docs = fortunes_lines()[:80]
    batch = encode_documents(info, docs, WordsConfig("zh"))
    assert batch.crossing_tokens > 0  # byte-level BPE merges characters across jieba's words
    crossing = 0
    tok_docs = batch.token_doc_offsets()
    word_of_token = np.repeat(np.arange(batch.num_words), batch.word_lengths)
    for d, doc in enumerate(docs):
        enc = info.tokenizer.encode(doc, add_special_tokens=False)
        words = _python_words(doc, enc)
        lo, hi = tok_docs[d], tok_docs[d + 1]
        got = word_of_token[lo:hi] - word_of_token[lo]
        assert got.tolist() == words["ids"], doc
        crossing += words["crossing"]
    assert crossing == batch.crossing_tokens


def _python_words(doc: str, enc) -> dict:
    """The word index of each token and the crossing count, one token at a time in plain Python."""
    han = [bool(HAN_RUN.fullmatch(ch)) for ch in doc]
    seg_of_char: list[int | None] = [None] * len(doc)
    seg_end: dict[int, int] = {}
    n = 0
    for m in HAN_RUN.finditer(doc):
        p = m.start()
        for w in rjieba.cut(m.group()):
            for i in range(p, p + len(w)):
                seg_of_char[i] = n
            seg_end[n] = p + len(w)
            p += len(w)
            n += 1
    labels, crossing = [], 0
    for (a, b), wid in zip(enc.offsets, enc.word_ids):
        first = a
        while first < len(doc) and doc[first].isspace():
            first += 1
        if first >= len(doc):
            first = min(a, len(doc) - 1)
        if han[first]:
            s = seg_of_char[first]
            labels.append(("seg", s))
            crossing += b > seg_end[s]
        else:
            labels.append(("tok", wid))
            crossing += any(han[first:b])
    ids, k = [], -1
    for i, lab in enumerate(labels):
        if i == 0 or lab != labels[i - 1]:
            k += 1
        ids.append(k)
    return {"ids": ids, "crossing": crossing}


# ------------------------------------------------------------------ audit, count, mask

def test_tokens_per_word_under_wordpiece_rises_well_above_one(zh_corpus, zh_wordpiece, tmp_path):
    # Common practice: with real words a WordPiece vocabulary of 8,000 splits Chinese words
    # into about as many tokens as they have characters (1.5 to 2 on average); with the
    # tokenizer's words every CJK character is a "word" and tokens/word is close to 1.
    # Measured here: 1.69 with --words zh, 1.06 with --words tokenizer.
    out = invoke(
        "audit",
        str(zh_corpus),
        "-t",
        str(zh_wordpiece),
        "-o",
        str(tmp_path / "zh"),
        "--words",
        "zh",
    )
    plain = invoke("audit", str(zh_corpus), "-t", str(zh_wordpiece), "-o", str(tmp_path / "tok"))
    zh_doc = json.loads((tmp_path / "zh" / "audit.json").read_text())
    tok_doc = json.loads((tmp_path / "tok" / "audit.json").read_text())
    tpw_zh = zh_doc["tokenizers"][0]["tokens_per_word"]
    tpw_tok = tok_doc["tokenizers"][0]["tokens_per_word"]
    assert tpw_tok < 1.1 and tpw_zh > 1.5, (tpw_tok, tpw_zh)
    assert zh_doc["words"]["definition"] == "zh" and "rjieba" in zh_doc["words"]["segmenters"]["zh"]
    assert out.startswith("words: zh (rjieba ")
    assert "crossing" in out
    # the tokenizer-words audit of a Chinese corpus says plainly that its words are not words
    assert "written without spaces" in plain and "--words zh" in plain
    assert "words: zh" in (tmp_path / "zh" / "audit.html").read_text()


def test_readable_pieces_in_the_audit_list_for_byte_level_bpe(zh_corpus, zh_bpe, tmp_path):
    # Reference: the word's own text; every piece shown must be a piece of it (no byte symbols).
    from maskprep.tokenizer.pieces import JOIN, PARTIAL, SPACE_MARK

    out = invoke(
        "audit", str(zh_corpus), "-t", str(zh_bpe), "-o", str(tmp_path / "a"), "--words", "zh"
    )
    doc = json.loads((tmp_path / "a" / "audit.json").read_text())
    rows = [w for w in doc["tokenizers"][0]["worst_words"] if w["word"]]
    assert rows
    for w in rows:
        shown = "".join(p for p in w["pieces"].split(JOIN) if p not in (SPACE_MARK, PARTIAL))
        assert shown == w["word"], w
    assert "Ġ" not in out and "å" not in out
    assert JOIN in out


def test_whole_word_leakage_is_zero_for_word_span_pmi_under_segmenter_words(
    zh_corpus, zh_bpe, tmp_path
):
    # Source: whole-word masking hides every token of a chosen word (published method; the
    # leakage figure counts targets whose word has a visible token).
    invoke("count", str(zh_corpus), "-t", str(zh_bpe), "-o", str(tmp_path / "c"), "--words", "zh",
           "--max-n", "3", "--min-count", "3")
    invoke(
        "units",
        str(tmp_path / "c"),
        "-o",
        str(tmp_path / "u.parquet"),
        "--top",
        "2000",
        "--show",
        "0",
    )
    for strategy in ("word", "span", "pmi"):
        extra = ["--units", str(tmp_path / "u.parquet")] if strategy == "pmi" else []
        invoke(
            "mask",
            str(zh_corpus),
            "-t",
            str(zh_bpe),
            "-o",
            str(tmp_path / strategy),
            "--words",
            "zh",
            "--strategy",
            strategy,
            *extra,
        )
        stats = json.loads((tmp_path / strategy / "_maskprep" / "stats.json").read_text())
        assert stats["within_word_leakage"] == 0.0, strategy
        manifest = json.loads((tmp_path / strategy / "_maskprep" / "manifest.json").read_text())
        assert manifest["options"]["words"]["definition"] == "zh"
    # pmi units of segmenter words are multi-word terms written with jieba's words
    units = (tmp_path / "u.tsv").read_text(encoding="utf-8").splitlines()[1:50]
    assert units and all(
        len(line.split("\t")[-1].split(" ")) == int(line.split("\t")[1]) >= 2 for line in units
    )
    invoke("verify", str(tmp_path / "pmi"))


def test_units_of_other_words_resume_and_verify_refuse_a_mismatch(
    zh_corpus, zh_wordpiece, tmp_path
):
    small = tmp_path / "small.txt"
    small.write_text("\n".join(fortunes_lines()[:300]) + "\n", encoding="utf-8")
    invoke("count", str(small), "-t", str(zh_wordpiece), "-o", str(tmp_path / "c"), "--max-n", "2",
           "--min-count", "2")
    invoke("units", str(tmp_path / "c"), "-o", str(tmp_path / "u.parquet"), "--show", "0")
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "mask",
            str(small),
            "-t",
            str(zh_wordpiece),
            "-o",
            str(tmp_path / "m"),
            "--strategy",
            "pmi",
            "--units",
            str(tmp_path / "u.parquet"),
            "--words",
            "zh",
        ],
    )
    assert r.exit_code == 1 and "counted with --words" in r.output and "Traceback" not in r.output
    invoke("mask", str(small), "-t", str(zh_wordpiece), "-o", str(tmp_path / "s"), "--words", "zh",
           "--strategy", "word")
    (tmp_path / "s" / "_maskprep" / "manifest.json").unlink()  # as if interrupted before the end
    r = CliRunner().invoke(
        cli,
        [
            "--quiet",
            "mask",
            str(small),
            "-t",
            str(zh_wordpiece),
            "-o",
            str(tmp_path / "s"),
            "--strategy",
            "word",
            "--resume",
        ],
    )
    assert r.exit_code == 1 and "words" in r.output and "options differ" in r.output
    invoke("mask", str(small), "-t", str(zh_wordpiece), "-o", str(tmp_path / "s"), "--words", "zh",
           "--strategy", "word", "--resume")
    invoke("verify", str(tmp_path / "s"))
    manifest = json.loads((tmp_path / "s" / "_maskprep" / "manifest.json").read_text())
    manifest["options"]["words"] = {"definition": "tokenizer"}
    (tmp_path / "s" / "_maskprep" / "manifest.json").write_text(json.dumps(manifest))
    r = CliRunner().invoke(cli, ["verify", str(tmp_path / "s")])
    assert r.exit_code == 1 and "words (the word definition)" in r.output


def test_missing_segmenter_says_how_to_install_it(monkeypatch):
    import importlib

    from maskprep.tokenizer import words as words_mod

    real = importlib.import_module

    def no_sudachi(name, *a, **k):
        if name == "sudachipy":
            raise ImportError(name)
        return real(name, *a, **k)

    monkeypatch.setattr(words_mod.importlib, "import_module", no_sudachi)
    monkeypatch.setattr(words_mod, "_SEGMENTER_CACHE", {})
    with pytest.raises(MaskprepError, match=r"pip install 'maskprep\[ja\]'"):
        words_option("ja")


# ------------------------------------------------------------------ determinism

@pytest.fixture(scope="module")
def zh_files(zh_corpus: Path, tmp_path_factory) -> list[str]:
    lines = zh_corpus.read_text(encoding="utf-8").splitlines()[:2400]
    return deal_lines(lines, tmp_path_factory.mktemp("zh3"), 3, "part{}.txt")


@pytest.mark.slow
def test_outputs_are_byte_identical_for_1_and_2_workers_and_dask(zh_files, zh_bpe, tmp_path):
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    )
    try:
        outputs = {}
        for name, where in {"w1": ["--workers", "1"], "w2": ["--workers", "2"],
                            "dask": ["--dask", cluster.scheduler_address]}.items():
            base = tmp_path / name
            invoke(
                *where,
                "count",
                *zh_files,
                "-t",
                str(zh_bpe),
                "-o",
                str(base / "c"),
                "--words",
                "zh",
                "--max-n",
                "3",
                "--min-count",
                "2",
                "--memory",
                "8MiB",
            )
            invoke(
                "units",
                str(base / "c"),
                "-o",
                str(base / "u.parquet"),
                "--top",
                "300",
                "--show",
                "0",
            )
            invoke(
                *where,
                "mask",
                *zh_files,
                "-t",
                str(zh_bpe),
                "-o",
                str(base / "s"),
                "--words",
                "zh",
                "--strategy",
                "pmi",
                "--units",
                str(base / "u.parquet"),
                "--shard-rows",
                "200",
            )
            outputs[name] = {
                str(p.relative_to(base)): p.read_bytes()
                for p in sorted(base.rglob("*"))
                if p.is_file()
            }
    finally:
        cluster.close(timeout=30)
    ref = outputs["w1"]
    assert len([f for f in ref if f.startswith("s/shard-")]) >= 3
    for name in ("w2", "dask"):
        assert sorted(outputs[name]) == sorted(ref)
        assert [f for f in ref if outputs[name][f] != ref[f]] == [], name


# ------------------------------------------------------------------ cohesion words

def test_cohesion_words_are_mostly_in_a_published_lexicon(zh_corpus, zh_wordpiece):
    # Reference lexicon: jieba/dict.txt, the dictionary shipped by the PyPI package jieba
    # (about 350,000 words). Measured here: 91% of the 500 most frequent multi-character
    # learnt words are in it; of the 500 most frequent character bigrams of the same text
    # (frequency alone, no cohesion), 71%.
    jieba = pytest.importorskip(
        "jieba", reason="jieba (its dictionary is the reference) is not installed"
    )
    lexicon = {ln.split(" ")[0] for ln in
               (Path(jieba.__file__).parent / "dict.txt").read_text(encoding="utf-8").splitlines()}
    from collections import Counter

    from maskprep.units.words import learn_words

    words = learn_words([str(zh_corpus)], quiet=True)
    assert words.definition == "cohesion" and len(words.lexicon) > 1000
    info = load_tokenizer(zh_wordpiece)
    lines = zh_corpus.read_text(encoding="utf-8").splitlines()
    freq: Counter[str] = Counter()
    bigrams: Counter[str] = Counter()
    for i in range(0, len(lines), 500):
        batch = encode_documents(info, lines[i:i + 500], words)
        freq.update(
            t for t, k in zip(word_texts(info, batch), batch.word_kinds.tolist()) if k == WORD
        )
        for line in lines[i:i + 500]:
            for run in HAN_RUN.findall(line):
                bigrams.update(run[j:j + 2] for j in range(len(run) - 1))
    multi = [w for w, _ in freq.most_common() if len(w) >= 2 and HAN_RUN.fullmatch(w)][:500]
    share = sum(w in lexicon for w in multi) / len(multi)
    control = sum(w in lexicon for w, _ in bigrams.most_common(500)) / 500
    print(
        f"cohesion words in jieba/dict.txt: {share:.0%} of the top 500; "
        f"frequent bigrams: {control:.0%}"
    )
    assert len(multi) == 500 and share >= 0.8 and share > control + 0.1


def test_cohesion_words_through_the_cli(zh_corpus, zh_wordpiece, tmp_path):
    invoke(
        "count",
        str(zh_corpus),
        "-t",
        str(zh_wordpiece),
        "-o",
        str(tmp_path / "c"),
        "--words",
        "cohesion",
        "--max-n",
        "2",
        "--min-count",
        "5",
    )
    meta = json.loads((tmp_path / "c" / "counts.json").read_text())
    assert meta["words"]["definition"] == "cohesion" and meta["words"]["lexicon_words"] > 1000
    words = set(__import__("pyarrow.parquet", fromlist=["x"]).read_table(
        tmp_path / "c" / "ngrams-1.parquet").column("text").to_pylist())
    assert "文件" in words and "系统" in words


def test_an_encoded_directory_keeps_the_word_definition(zh_corpus, zh_bpe, tmp_path):
    small = tmp_path / "small.txt"
    small.write_text("\n".join(fortunes_lines()[:400]) + "\n", encoding="utf-8")
    invoke("encode", str(small), "-t", str(zh_bpe), "-o", str(tmp_path / "enc"), "--words", "zh")
    manifest = json.loads((tmp_path / "enc" / "encoded.json").read_text())
    assert manifest["words"]["definition"] == "zh"
    for name, src in (("raw", str(small)), ("enc", str(tmp_path / "enc"))):
        invoke("count", src, "-t", str(zh_bpe), "-o", str(tmp_path / f"c-{name}"), "--words", "zh",
               "--max-n", "2", "--min-count", "2")
    for f in ("ngrams-1.parquet", "ngrams-2.parquet"):
        assert (tmp_path / "c-raw" / f).read_bytes() == (tmp_path / "c-enc" / f).read_bytes(), f
    r = CliRunner().invoke(
        cli, ["--quiet", "count", str(tmp_path / "enc"), "-o", str(tmp_path / "c-tok")]
    )
    assert r.exit_code == 1 and "encoded with --words zh" in r.output
