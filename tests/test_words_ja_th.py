"""Word definitions ``ja``, ``th`` and ``auto`` on real Japanese and Thai text.

Real text: the Japanese and Thai translations of the messages of dpkg and apt, the files
/usr/share/locale/{ja,th}/LC_MESSAGES/{dpkg,apt,libapt-pkg6.0}.mo installed by the Debian
packages ``dpkg`` and ``apt`` (on every Debian system; the translations are under their
programs' licence, GPL-2+). Each translated message is one document (whitespace runs made
one space): 1,567 Japanese and 1,731 Thai messages, many of them mixing Latin words, option
names and format codes with the Japanese or Thai text. Without the files these tests skip
and say why.

Segmenters, the references: ``sudachipy`` with ``sudachidict_core`` (split mode C) and
``pythainlp`` (engine newmm), the extras ``maskprep[ja]`` and ``maskprep[th]``, installed
by `.ci/run` through the ``test`` extra; ``rjieba`` for the Han-only documents of ``auto``.
"""

from __future__ import annotations

import importlib.metadata
import json
import re
import struct
from itertools import zip_longest
from pathlib import Path

import pyarrow as pa
import pytest
from click.testing import CliRunner

from maskprep.cli import cli
from maskprep.errors import MaskprepError
from maskprep.tokenizer.encoding import encode_documents
from maskprep.tokenizer.words import WordsConfig, words_option

from conftest import deal_lines, trained_tokenizer

sudachipy = pytest.importorskip(
    "sudachipy", reason="the ja extra (pip install 'maskprep[ja]') is not installed"
)
pytest.importorskip("sudachidict_core", reason="sudachidict_core (maskprep[ja]) is not installed")
pytest.importorskip(
    "pythainlp", reason="the th extra (pip install 'maskprep[th]') is not installed"
)
from pythainlp.tokenize import word_tokenize  # noqa: E402

LOCALE = Path("/usr/share/locale")
CATALOGS = ("dpkg", "apt", "libapt-pkg6.0")
# The script classes of maskprep.tokenizer.words (Unicode blocks): Han, kana (without the
# katakana middle dot U+30FB) and Thai.
HAN = "\u3400-\u4dbf\u4e00-\u9fff\uf900-\ufaff\u3005\u3007\U00020000-\U0003134f"
KANA = "\u3041-\u30fa\u30fc-\u30ff\u31f0-\u31ff\uff66-\uff9f"
JA_RUN = re.compile(f"[{HAN}{KANA}]+")
HAN_RUN = re.compile(f"[{HAN}]+")
KANA_CHAR = re.compile(f"[{KANA}]")
THAI_RUN = re.compile("[\u0e01-\u0e5b]+")
LATIN = re.compile("[A-Za-z]{2,}")


def mo_translations(path: Path) -> list[str]:
    """The translated strings of a GNU gettext .mo file (format: the gettext manual)."""
    data = path.read_bytes()
    order = "<" if struct.unpack("<I", data[:4])[0] == 0x950412DE else ">"
    _rev, n, _orig, trans = struct.unpack(order + "4I", data[4:20])
    out = []
    for i in range(1, n):  # entry 0 is the catalogue's header (the empty msgid)
        length, offset = struct.unpack(order + "2I", data[trans + 8 * i: trans + 8 * i + 8])
        out.extend(data[offset: offset + length].decode("utf-8").split("\x00"))  # plurals
    return out


def messages(lang: str) -> list[str]:
    files = [LOCALE / lang / "LC_MESSAGES" / f"{c}.mo" for c in CATALOGS]
    missing = [str(f) for f in files if not f.is_file()]
    if missing:
        pytest.skip(f"{', '.join(missing)} missing: the {lang} translations of the Debian "
                    "packages dpkg and apt are the real text of these tests")
    docs = [" ".join(t.split()) for f in files for t in mo_translations(f)]
    return [d for d in docs if d]


@pytest.fixture(scope="module")
def ja_docs() -> list[str]:
    return messages("ja")


@pytest.fixture(scope="module")
def th_docs() -> list[str]:
    return messages("th")


@pytest.fixture(scope="module")
def corpus(ja_docs, th_docs, tmp_path_factory) -> Path:
    p = tmp_path_factory.mktemp("jath") / "messages.txt"
    p.write_text("\n".join(ja_docs + th_docs) + "\n", encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def bpe(corpus: Path, tmp_path_factory) -> Path:
    return trained_tokenizer(corpus, tmp_path_factory.mktemp("bpe"), model="bpe", vocab_size=4000)


@pytest.fixture(scope="module")
def wordpiece(corpus: Path, tmp_path_factory) -> Path:
    return trained_tokenizer(
        corpus, tmp_path_factory.mktemp("wp"), model="wordpiece", vocab_size=4000
    )


def invoke(*args: str) -> str:
    result = CliRunner().invoke(cli, ["--quiet", *args])
    assert result.exit_code == 0, result.output + repr(result.exception)
    return result.output


def byte_tokenizer():
    """A byte-level BPE tokenizer with no merges: words come from the segmenter alone."""
    from tokenizers import Tokenizer, decoders, models, pre_tokenizers

    from maskprep.tokenizer.encoding import TokenizerInfo

    vocab = {ch: i for i, ch in enumerate(sorted(pre_tokenizers.ByteLevel.alphabet()))}
    vocab["<mask>"] = len(vocab)
    tok = Tokenizer(models.BPE(vocab=vocab, merges=[]))
    tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
    tok.decoder = decoders.ByteLevel()
    return TokenizerInfo(tok, name="bytes")


def doc_words(info, docs: list[str], words: WordsConfig | None = None) -> list[list[str]]:
    batch = encode_documents(info, docs, words) if words else encode_documents(info, docs)
    by_key = {t.key: t.text for t in info._types.values()}
    texts = [by_key[k] for k in batch.word_keys.tolist()]
    d = batch.doc_offsets.tolist()
    return [texts[d[i]:d[i + 1]] for i in range(len(docs))]


# ------------------------------------------------------------------ the references

_SUDACHI = []


def sudachi_starts(doc: str) -> set[int]:
    """Word starts of Sudachi (core dictionary, split mode C) called on the whole document."""
    if not _SUDACHI:
        d = sudachipy.Dictionary(dict="core")
        make = getattr(d, "tokenizer", None) or d.create
        _SUDACHI.append(make(mode=sudachipy.SplitMode.C))
    starts, p = set(), 0
    for m in _SUDACHI[0].tokenize(doc):
        starts.add(p)
        p += len(m.surface())
    return starts


def cut_runs(doc: str, run: re.Pattern, starts: set[int]) -> list[tuple[int, int]]:
    """Spans of the words of each run of `run`: cut at `starts` inside it, and at its ends."""
    spans = []
    for m in run.finditer(doc):
        cuts = sorted({m.start()} | {s for s in starts if m.start() < s < m.end()}) + [m.end()]
        spans.extend(zip(cuts, cuts[1:]))
    return spans


def ja_reference(doc: str) -> list[tuple[int, int]]:
    # Source: sudachipy on the document as a whole; maskprep keeps its words in the runs of
    # Han and kana (every run starts a word).
    return cut_runs(doc, JA_RUN, sudachi_starts(doc))


def th_reference(doc: str) -> list[tuple[int, int]]:
    # Source: pythainlp's word_tokenize(engine="newmm") called on each Thai run.
    spans = []
    for m in THAI_RUN.finditer(doc):
        p = m.start()
        for w in word_tokenize(m.group(), engine="newmm"):
            spans.append((p, p + len(w)))
            p += len(w)
    return spans


def zh_reference(doc: str) -> list[tuple[int, int]]:
    # Source: rjieba's cut (accurate mode, HMM) called on each Han run.
    import rjieba

    spans = []
    for m in HAN_RUN.finditer(doc):
        p = m.start()
        for w in rjieba.cut(m.group(), True):
            spans.append((p, p + len(w)))
            p += len(w)
    return spans


def texts(doc: str, spans: list[tuple[int, int]]) -> list[str]:
    return [doc[a:b] for a, b in spans]


def other_reference(info, doc: str, run: re.Pattern) -> list[str]:
    """The words outside the runs: the tokenizer's own pre-tokenization, less the run characters.

    Source: the `tokenizers` library's pre-tokenizer (``pre_tokenize_str``); a piece such as
    ``debファイル名`` keeps ``deb``. Words are compared stripped of whitespace, as maskprep
    shows them, and whitespace-only ones are left out.
    """
    in_run = [False] * len(doc)
    for m in run.finditer(doc):
        in_run[m.start():m.end()] = [True] * (m.end() - m.start())
    out = []
    for _piece, (a, b) in info.tokenizer.pre_tokenizer.pre_tokenize_str(doc):
        part = ""
        for i in range(a, b + 1):
            if i < b and not in_run[i]:
                part += doc[i]
            elif part:
                if part.strip():
                    out.append(part.strip())
                part = ""
    return out


def outside(words: list[str], run: re.Pattern) -> list[str]:
    return [w for w in words if not run.search(w) and w.strip()]


# ------------------------------------------------------------------ word boundaries

def test_japanese_words_are_sudachis_on_real_text(ja_docs):
    info = byte_tokenizer()
    got = doc_words(info, ja_docs, WordsConfig("ja"))
    mixed = 0
    for doc, words in zip(ja_docs, got):
        assert [w for w in words if JA_RUN.search(w)] == texts(doc, ja_reference(doc)), doc
        # everything else keeps the tokenizer's own words (its pre-tokenization)
        assert outside(words, JA_RUN) == other_reference(info, doc, JA_RUN), doc
        mixed += bool(LATIN.search(doc) and JA_RUN.search(doc))
    # Measured: 393 of the 1,567 messages mix Latin words (option names, programs) with
    # Japanese.
    assert mixed >= 300, mixed


def test_thai_words_are_newmms_on_real_text(th_docs):
    info = byte_tokenizer()
    got = doc_words(info, th_docs, WordsConfig("th"))
    mixed = 0
    for doc, words in zip(th_docs, got):
        assert [w for w in words if THAI_RUN.search(w)] == texts(doc, th_reference(doc)), doc
        assert outside(words, THAI_RUN) == other_reference(info, doc, THAI_RUN), doc
        mixed += bool(LATIN.search(doc) and THAI_RUN.search(doc))
    # Measured: 466 of the 1,731 messages mix Latin words with Thai.
    assert mixed >= 300, mixed


def test_auto_sends_kana_documents_to_sudachi_han_only_ones_to_jieba_thai_to_newmm(
    ja_docs, th_docs
):
    pytest.importorskip("rjieba", reason="the zh extra (pip install 'maskprep[zh]') is missing")
    info = byte_tokenizer()
    docs = [d for pair in zip_longest(ja_docs, th_docs) for d in pair if d]  # one batch
    got = doc_words(info, docs, WordsConfig("auto"))
    seen = {"ja": 0, "zh": 0, "th": 0}
    for doc, words in zip(docs, got):
        if KANA_CHAR.search(doc):
            lang, ref = "ja", ja_reference(doc)
        elif HAN_RUN.search(doc):
            lang, ref = "zh", zh_reference(doc)  # Han only: the messages like 接続失敗
        elif THAI_RUN.search(doc):
            lang, ref = "th", th_reference(doc)
        else:
            continue
        seen[lang] += 1
        assert [w for w in words if JA_RUN.search(w) or THAI_RUN.search(w)] == texts(doc, ref), \
            (lang, doc)
    # Measured: 1,503 Japanese documents with kana, 56 Han-only ones, 1,721 Thai ones.
    assert seen["ja"] > 1000 and seen["zh"] >= 30 and seen["th"] > 1000, seen


def test_words_never_cross_documents():
    # Source: rjieba cuts 北京 and 清华大学 as words (jieba's README example 我来到北京清华大学,
    # from memory); split into two documents mid-word, neither may take a word of the other.
    info = byte_tokenizer()
    pytest.importorskip("rjieba", reason="the zh extra (pip install 'maskprep[zh]') is missing")
    assert doc_words(info, ["我来到北", "京清华大学"], WordsConfig("zh")) == \
        [["我", "来到", "北"], ["京", "清华大学"]]
    docs = ["接続が閉じられました", "接続タイムアウト"]
    assert doc_words(info, docs, WordsConfig("ja")) == [texts(d, ja_reference(d)) for d in docs]


# ------------------------------------------------------------------ whole-word masking

def reference_word_of_tokens(doc: str, enc, spans: list[tuple[int, int]]) -> list[tuple]:
    """The word of each token, by the rule stated one token at a time in plain Python.

    A token belongs to the word holding its first non-space character: a segmenter word
    (`spans`, from the library called directly) when that character is in one, else the
    tokenizer's own word (`Encoding.word_ids`).
    """
    seg_of_char: dict[int, int] = {}
    for k, (a, b) in enumerate(spans):
        for i in range(a, b):
            seg_of_char[i] = k
    out: list[tuple] = []
    for (a, _b), wid in zip(enc.offsets, enc.word_ids):
        first = a
        while first < len(doc) and doc[first].isspace():
            first += 1
        if first >= len(doc):
            first = min(a, len(doc) - 1)
        out.append(("seg", seg_of_char[first]) if first in seg_of_char else ("tok", wid))
    return out


@pytest.mark.parametrize("lang", ["ja", "th"])
def test_whole_word_masking_never_splits_a_segmenter_word(lang, ja_docs, th_docs, bpe, tmp_path):
    # Source: whole-word masking masks every token of a chosen word or none (published method);
    # words from sudachipy / pythainlp called directly, tokens from the `tokenizers` library.
    from tokenizers import Tokenizer

    docs, ref = (ja_docs, ja_reference) if lang == "ja" else (th_docs, th_reference)
    tok = Tokenizer.from_file(str(bpe))
    seq_len = 128
    encs = [tok.encode(d, add_special_tokens=False) for d in docs]
    keep = [i for i, e in enumerate(encs) if 0 < len(e.ids) <= seq_len - 2]
    corpus = tmp_path / f"{lang}.txt"
    corpus.write_text("\n".join(docs[i] for i in keep) + "\n", encoding="utf-8")
    invoke("--workers", "1", "mask", str(corpus), "-t", str(bpe), "-o", str(tmp_path / "s"),
           "--words", lang, "--strategy", "word", "--rate", "0.3", "--seq-len", str(seq_len),
           "--no-pack")
    rows_ids, rows_labels = [], []
    for f in sorted((tmp_path / "s").glob("shard-*.arrow")):
        with pa.memory_map(str(f)) as src:
            table = pa.ipc.open_file(src).read_all()
        rows_ids += table.column("input_ids").to_pylist()
        rows_labels += table.column("labels").to_pylist()
    assert len(rows_ids) == len(keep)
    masked_words = multi_token_masked = crossing = 0
    for row, (ids, labels) in enumerate(zip(rows_ids, rows_labels)):
        doc, enc = docs[keep[row]], encs[keep[row]]
        n = len(enc.ids)
        original = [lab if lab != -100 else i for i, lab in zip(ids, labels)]
        assert original[1:n + 1] == enc.ids  # [CLS] doc [SEP] [PAD] ...
        target = [lab != -100 for lab in labels[1:n + 1]]
        spans = ref(doc)
        owner = reference_word_of_tokens(doc, enc, spans)
        by_word: dict[tuple, list[bool]] = {}
        for w, t in zip(owner, target):
            by_word.setdefault(w, []).append(t)
        for w, flags in by_word.items():
            assert all(flags) or not any(flags), (doc, w, flags)
            if w[0] == "seg" and all(flags):
                masked_words += 1
                multi_token_masked += len(flags) > 1
        crossing += sum(w[0] == "seg" and b > spans[w[1]][1]
                        for w, (_a, b) in zip(owner, enc.offsets))
    # Measured (BPE at 4,000 tokens trained on these messages, rate 0.3): ja 2,882 masked
    # segmenter words, 313 of them in 2+ tokens, 3,616 boundary-crossing tokens; th 3,593,
    # 2,273 and 4,538.
    assert masked_words > 1000 and multi_token_masked > 200, (masked_words, multi_token_masked)
    assert crossing > 0  # byte-level BPE merges characters across the segmenters' words
    stats = json.loads((tmp_path / "s" / "_maskprep" / "stats.json").read_text())
    assert stats["within_word_leakage"] == 0.0


# ------------------------------------------------------------------ determinism, manifests

@pytest.fixture(scope="module")
def parts(ja_docs, th_docs, tmp_path_factory) -> list[str]:
    docs = [d for pair in zip_longest(ja_docs, th_docs) for d in pair if d]
    return deal_lines(docs, tmp_path_factory.mktemp("parts"), 3, "part{}.txt")


def tree_bytes(base: Path) -> dict[str, bytes]:
    return {str(p.relative_to(base)): p.read_bytes() for p in sorted(base.rglob("*"))
            if p.is_file() and p.suffix != ".lock"}


@pytest.mark.parametrize("lang", ["ja", "th"])
def test_encode_and_count_are_byte_identical_for_1_and_2_workers(lang, parts, bpe, tmp_path):
    outputs = {}
    for workers in ("1", "2"):
        base = tmp_path / f"w{workers}"
        invoke("--workers", workers, "encode", *parts, "-t", str(bpe), "-o", str(base / "enc"),
               "--words", lang)
        invoke("--workers", workers, "count", *parts, "-t", str(bpe), "-o", str(base / "c"),
               "--words", lang, "--max-n", "3", "--min-count", "2", "--memory", "8MiB")
        outputs[workers] = tree_bytes(base)
    assert any(f.startswith("enc/") for f in outputs["1"])
    assert sorted(outputs["2"]) == sorted(outputs["1"])
    assert [f for f in outputs["1"] if outputs["2"][f] != outputs["1"][f]] == []


def versions(*dists: str) -> str:
    return ", ".join(f"{d} {importlib.metadata.version(d)}" for d in dists)


def test_manifests_and_the_audit_record_the_segmenter_and_its_version(parts, wordpiece, tmp_path):
    # Source: the installed distributions' own metadata (importlib.metadata).
    expected = {
        "ja": {"ja": versions("sudachipy", "sudachidict_core")},
        "th": {"th": versions("pythainlp")},
    }
    assert WordsConfig("ja").describe() == {"definition": "ja", "segmenters": expected["ja"]}
    assert WordsConfig("th").label() == f"th ({versions('pythainlp')})"
    auto = WordsConfig("auto").describe()["segmenters"]
    assert auto["ja"] == expected["ja"]["ja"] and auto["th"] == expected["th"]["th"]
    for lang in ("ja", "th"):
        base = tmp_path / lang
        invoke("encode", *parts, "-t", str(wordpiece), "-o", str(base / "enc"), "--words", lang)
        invoke("count", *parts, "-t", str(wordpiece), "-o", str(base / "c"), "--words", lang,
               "--max-n", "2", "--min-count", "2")
        out = invoke("audit", *parts, "-t", str(wordpiece), "-o", str(base / "a"),
                     "--words", lang)
        for doc in (json.loads((base / "enc" / "encoded.json").read_text())["words"],
                    json.loads((base / "c" / "counts.json").read_text())["words"],
                    json.loads((base / "a" / "audit.json").read_text())["words"]):
            assert doc == {"definition": lang, "segmenters": expected[lang]}, doc
        assert out.startswith(f"words: {lang} ({expected[lang][lang]})")
        # the encoded directory gives the same counts as the raw corpus
        invoke("count", str(base / "enc"), "-o", str(base / "c2"), "--words", lang,
               "--max-n", "2", "--min-count", "2")
        for f in ("ngrams-1.parquet", "ngrams-2.parquet"):
            assert (base / "c" / f).read_bytes() == (base / "c2" / f).read_bytes(), (lang, f)


# ------------------------------------------------------------------ missing libraries

@pytest.mark.parametrize("lang, module", [("ja", "sudachipy"), ("th", "pythainlp")])
def test_a_missing_segmenter_says_how_to_install_it(lang, module, monkeypatch, corpus, bpe,
                                                    tmp_path):
    import importlib

    from maskprep.tokenizer import words as words_mod

    real = importlib.import_module

    def without(name, *a, **k):
        if name == module:
            raise ImportError(name)
        return real(name, *a, **k)

    monkeypatch.setattr(words_mod.importlib, "import_module", without)
    monkeypatch.setattr(words_mod, "_SEGMENTER_CACHE", {})
    with pytest.raises(MaskprepError, match=rf"--words {lang}: needs the {module} library.*"
                                            rf"pip install 'maskprep\[{lang}\]'"):
        words_option(lang)
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "1", "count", str(corpus), "-t",
                                 str(bpe), "-o", str(tmp_path / "c"), "--words", lang])
    assert r.exit_code == 1 and f"maskprep[{lang}]" in r.output, r.output
    assert "Traceback" not in r.output and not (tmp_path / "c" / "counts.json").exists()


def test_a_missing_sudachi_dictionary_says_how_to_install_it(monkeypatch):
    from maskprep.tokenizer import words as words_mod

    def no_dictionary(*a, **k):
        raise RuntimeError("dictionary not found")  # what sudachipy raises without one

    monkeypatch.setattr(sudachipy, "Dictionary", no_dictionary)
    monkeypatch.setattr(words_mod, "_SEGMENTER_CACHE", {})
    with pytest.raises(MaskprepError, match=r"Sudachi dictionary is missing.*sudachidict_core"):
        words_option("ja")


def test_a_japanese_line_past_sudachis_input_limit_is_segmented(ja_docs):
    # Sudachi refuses more than 49,149 bytes in one call (its error message); a document of
    # real messages joined by spaces into one line of about 130,000 bytes must still encode.
    info = byte_tokenizer()
    doc = " ".join(ja_docs)
    assert len(doc.encode("utf-8")) > 100_000
    (words,) = doc_words(info, [doc], WordsConfig("ja"))
    got = [w for w in words if JA_RUN.search(w)]
    assert "".join(got) == "".join(JA_RUN.findall(doc))
    ref = [texts(d, ja_reference(d)) for d in ja_docs]
    # away from the cuts every 12,000 characters, the words are those of each message alone
    assert sum(len(r) for r in ref) * 0.98 < len(got) < sum(len(r) for r in ref) * 1.02
