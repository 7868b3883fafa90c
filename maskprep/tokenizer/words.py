"""Word definitions: which characters make one word, independent of the tokenizer.

`WordsConfig` names the definition (a small frozen object that travels with
the encode options of every stage and is recorded in every manifest):

- ``tokenizer`` (default): a word is one piece of the tokenizer's own
  pre-tokenization (`Encoding.word_ids`), as before;
- ``zh`` / ``ja`` / ``th``: runs of Chinese (Han), Japanese (Han and kana) or
  Thai characters are cut into words by a segmentation library installed as
  an extra (``pip install 'maskprep[zh]'``); all other text keeps the
  tokenizer's words, so mixed text is right for both scripts;
- ``auto``: each run of CJK or Thai characters gets its language's
  segmenter (a CJK run is Japanese when its document holds kana, else Chinese);
- ``cohesion``: words learnt from the corpus itself (`maskprep.units.words`, cut by
  `maskprep.tokenizer.lexicon`),
  for any script without spaces.

`word_ids_by_offsets` maps tokens to words by character offsets
(`Encoding.offsets`): each token belongs to the word holding its first
non-space character; a token that runs past that word's end is counted as
*boundary-crossing* and joins the word it starts in. Everything is numpy over
the whole batch; the segmenter is called once per batch on the script runs
joined by newlines (every segmenter here cuts at whitespace). Sudachi (``ja``)
instead reads every line that holds a Japanese run whole, one call per line,
since its words depend on the context (digits before a counter, Latin words);
only its word starts inside the runs count, and every run starts a word.
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.metadata
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np

from ..errors import MaskprepError

DEFINITIONS = ("tokenizer", "zh", "ja", "th", "auto", "cohesion")

# Script classes of characters.
OTHER, HAN, KANA, THAI = 0, 1, 2, 3

# The library used for each language: (extra, import name, distribution, what it is).
SEGMENTERS: dict[str, tuple[str, str, str, str]] = {
    "zh": (
        "zh",
        "rjieba",
        "rjieba",
        "jieba-rs (Rust) with jieba's dictionary, HMM for unknown words",
    ),
    "ja": ("ja", "sudachipy", "sudachipy", "Sudachi (Rust), core dictionary, split mode C"),
    "th": ("th", "pythainlp", "pythainlp", "PyThaiNLP newmm, its Thai word list"),
}


@dataclass(frozen=True)
class WordsConfig:
    """Which word definition to use: ``WordsConfig("zh")``, ``WordsConfig()`` (the tokenizer's).

    For ``cohesion`` the learnt vocabulary travels with it (`lexicon`: the
    multi-character words, best first; `scores`: their cohesion), so every
    worker segments alike.
    """

    definition: str = "tokenizer"
    lexicon: tuple[str, ...] = ()
    scores: tuple[float, ...] = ()

    def __post_init__(self) -> None:
        if self.definition not in DEFINITIONS:
            raise MaskprepError(
                f"--words: expected one of {', '.join(DEFINITIONS)}, got {self.definition!r}"
            )
        if self.definition == "cohesion" and not self.lexicon:
            raise MaskprepError(
                "--words cohesion: no words were learnt (the corpus has no cohesive "
                "multi-character sequences); use another --words definition"
            )
        if len(self.scores) != len(self.lexicon):
            raise ValueError("WordsConfig: one score per learnt word")

    @property
    def is_tokenizer(self) -> bool:
        return self.definition == "tokenizer"

    def languages(self) -> tuple[str, ...]:
        if self.definition == "auto":
            return ("zh", "ja", "th")
        return (self.definition,) if self.definition in SEGMENTERS else ()

    def lexicon_sha256(self) -> str | None:
        if not self.lexicon:
            return None
        body = "\n".join(f"{w}\t{s!r}" for w, s in zip(self.lexicon, self.scores))
        return hashlib.sha256(body.encode("utf-8")).hexdigest()

    def describe(self) -> dict[str, Any]:
        """What manifests record (resume and verify compare it): the definition and libraries."""
        doc: dict[str, Any] = {"definition": self.definition}
        if self.definition in SEGMENTERS or self.definition == "auto":
            doc["segmenters"] = {lang: segmenter_version(lang) for lang in self.languages()}
        if self.definition == "cohesion":
            doc["lexicon_words"] = len(self.lexicon)
            doc["lexicon_sha256"] = self.lexicon_sha256()
        return doc

    def label(self) -> str:
        """Short text for tables: ``zh (rjieba 0.2.2)``."""
        d = self.describe()
        if "segmenters" in d:
            return f"{self.definition} (" + ", ".join(d["segmenters"].values()) + ")"
        if self.definition == "cohesion":
            return f"cohesion ({len(self.lexicon):,} learnt words)"
        return "tokenizer (its pre-tokenization)"

    def check_available(self) -> None:
        """Raise a clear error naming the extra to install when a segmenter library is missing."""
        for lang in self.languages():
            if self.definition == "auto":
                continue  # auto only needs the libraries of the scripts it meets
            _segmenter(lang)


def words_option(value: "str | WordsConfig | None", *, option: str = "--words") -> WordsConfig:
    """``"zh"`` -> ``WordsConfig("zh")``; checks the library is installed.

    (``cohesion`` is built by the caller.)
    """
    if isinstance(value, WordsConfig):
        return value
    name = (value or "tokenizer").strip().lower()
    if name not in DEFINITIONS:
        raise MaskprepError(f"{option}: expected one of {', '.join(DEFINITIONS)}, got {value!r}")
    if name == "cohesion":
        raise MaskprepError(f"{option} cohesion: the words are learnt from a corpus; use "
                            "maskprep.units.words.resolve_words or learn_words")
    cfg = WordsConfig(name)
    cfg.check_available()
    return cfg


# Segmenters whose dictionary is a package of its own: its version changes the words too.
DICTIONARIES = {"ja": "sudachidict_core"}


def segmenter_version(lang: str) -> str:
    """``sudachipy 0.7.0, sudachidict_core 20261015``: the library (and dictionary) versions."""
    _extra, module, dist, _what = SEGMENTERS[lang]
    out = []
    for name in (dist, DICTIONARIES.get(lang)):
        if name is None:
            continue
        try:
            out.append(f"{name} {importlib.metadata.version(name)}")
        except importlib.metadata.PackageNotFoundError:
            out.append(f"{name} (not installed)")
    return ", ".join(out)


_SEGMENTER_CACHE: dict[str, Callable[[str], list[str]]] = {}


def _segmenter(lang: str) -> Callable[[str], list[str]]:
    """A function cutting a string into words that cover it exactly, cutting at every whitespace."""
    fn = _SEGMENTER_CACHE.get(lang)
    if fn is not None:
        return fn
    extra, module, dist, _what = SEGMENTERS[lang]
    try:
        mod = importlib.import_module(module)
    except ImportError:
        raise MaskprepError(
            f"--words {lang}: needs the {dist} library, which is not installed; install it with "
            f"pip install 'maskprep[{extra}]' (or pip install {dist})"
        ) from None
    if lang == "zh":
        cut = mod.cut

        def fn(text: str) -> list[str]:
            return list(cut(text, True))
    elif lang == "ja":
        fn = _sudachi(mod)
    else:
        fn = _thai(mod)
    _SEGMENTER_CACHE[lang] = fn
    return fn


# Sudachi refuses an input of more than 49,149 UTF-8 bytes; 12,000 characters are at most
# 48,000 bytes. A longer line (no Japanese text has one) is cut every 12,000 characters.
SUDACHI_CHARS = 12_000


def _sudachi(mod: Any) -> Callable[[str], list[str]]:
    try:
        dictionary = mod.Dictionary(dict="core")
        mode = mod.SplitMode.C
        # sudachipy 0.7 names it tokenizer(); create() is the older name
        make = getattr(dictionary, "tokenizer", None) or dictionary.create
        tok = make(mode=mode)
    except Exception as exc:  # the dictionary is a separate package
        raise MaskprepError(
            f"--words ja: the Sudachi dictionary is missing ({exc}); install it with "
            "pip install 'maskprep[ja]' (or pip install sudachidict_core)"
        ) from None

    def fn(text: str) -> list[str]:
        # One Sudachi call per line (it analyses a line as one sentence context; measured faster
        # than one call over many lines joined, which also changes the words after each newline).
        out: list[str] = []
        for line in text.split("\n"):
            if out:
                out.append("\n")
            for a in range(0, len(line), SUDACHI_CHARS):
                out.extend(m.surface() for m in tok.tokenize(line[a:a + SUDACHI_CHARS]))
        return out
    return fn


# newmm's time grows with the square of its input's length (pythainlp 5.4: its character
# cluster pass re-slices the rest of the text at every step), so it is called on pieces of
# about this many characters, cut after a newline (newmm cuts there anyway: same words).
# Measured on 372,000 characters of Thai runs: 2.37 s in one call, 0.43 s in pieces of 4,000.
THAI_CHARS = 4_000


def _thai(mod: Any) -> Callable[[str], list[str]]:
    from pythainlp.tokenize import word_tokenize

    def fn(text: str) -> list[str]:
        out: list[str] = []
        a, n = 0, len(text)
        while a < n:
            b = a + THAI_CHARS
            if b >= n:
                b = n
            else:
                nl = text.rfind("\n", a, b)
                if nl < a:
                    nl = text.find("\n", b)
                b = n if nl < 0 else nl + 1
            out.extend(word_tokenize(text[a:b], engine="newmm", keep_whitespace=True))
            a = b
        return out
    return fn


# ------------------------------------------------------------------ scripts

def script_classes(codes: np.ndarray) -> np.ndarray:
    """Script class (OTHER, HAN, KANA, THAI) of each code point, int8.

    Han: CJK unified ideographs (and extensions, compatibility ideographs),
    〇 and 々; kana: hiragana, katakana (with ー) and half-width katakana;
    Thai: the Thai block.
    """
    c = codes
    out = np.zeros(len(c), np.int8)
    han = (
        ((c >= 0x4E00) & (c <= 0x9FFF))
        | ((c >= 0x3400) & (c <= 0x4DBF))
        | ((c >= 0xF900) & (c <= 0xFAFF))
        | ((c >= 0x20000) & (c <= 0x3134F))
        | (c == 0x3007)
        | (c == 0x3005)
    )
    kana = ((c >= 0x3041) & (c <= 0x30FF) & (c != 0x30FB)) | ((c >= 0x31F0) & (c <= 0x31FF)) \
        | ((c >= 0xFF66) & (c <= 0xFF9F))
    thai = (c >= 0x0E01) & (c <= 0x0E5B)
    out[han] = HAN
    out[kana] = KANA
    out[thai] = THAI
    return out


def code_points(text: str) -> np.ndarray:
    """The code points of a string, uint32 (one per Python character)."""
    return np.frombuffer(text.encode("utf-32-le", errors="surrogatepass"), dtype=np.uint32)


def _runs(mask: np.ndarray, breaks: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Starts and ends of the runs of True, cut at the positions `breaks` (document starts)."""
    m = np.concatenate(([False], mask, [False])).astype(np.int8)
    d = np.diff(m)
    starts, ends = np.flatnonzero(d == 1), np.flatnonzero(d == -1)
    if breaks is not None:
        b = breaks[(breaks > 0) & (breaks < len(mask))]
        b = b[mask[b] & mask[b - 1]]  # a run going on across a break is cut there
        if len(b):
            starts, ends = np.union1d(starts, b), np.union1d(ends, b)
    return starts, ends


def segment_runs(text: str, starts: np.ndarray, ends: np.ndarray,
                 cut: Callable[[str], list[str]]) -> np.ndarray:
    """Word start positions (in `text`) of the runs [starts, ends), cut by one segmenter call.

    The runs are joined with newlines; words that hold only the newline are
    dropped. A word that crosses a newline (no segmenter here does that) is cut there.
    """
    if len(starts) == 0:
        return np.zeros(0, np.int64)
    pieces = [text[a:b] for a, b in zip(starts.tolist(), ends.tolist())]
    joined = "\n".join(pieces)
    words = cut(joined)
    lens = np.fromiter(map(len, words), dtype=np.int64, count=len(words))
    wstart = np.zeros(len(lens), np.int64)
    np.cumsum(lens[:-1], out=wstart[1:])
    if int(lens.sum()) != len(joined):
        raise RuntimeError("internal error: the segmenter's words do not cover its input")
    run_len = ends - starts
    jstart = np.zeros(len(starts), np.int64)
    np.cumsum(run_len[:-1] + 1, out=jstart[1:])
    # every run start is a word start; newlines are not words
    bounds = np.union1d(wstart, jstart)
    run = np.searchsorted(jstart, bounds, side="right") - 1
    inside = bounds - jstart[run] < run_len[run]
    bounds, run = bounds[inside], run[inside]
    return bounds - jstart[run] + starts[run]


# ------------------------------------------------------------------ tokens to words

def word_ids_by_offsets(
    texts: Sequence[str],
    offsets: np.ndarray,
    tok_doc: np.ndarray,
    token_word_ids: np.ndarray,
    words: WordsConfig,
) -> tuple[np.ndarray, int]:
    """Word index of each token under `words`, and the number of boundary-crossing tokens.

    texts           the batch's documents
    offsets         int64 [T, 2] character offsets of tokens in their document
    tok_doc         int64 [D+1] token offset of each document
    token_word_ids  int64 [T] the tokenizer's word ids (-1: special token)

    Returns word ids increasing through the batch (-1 kept on special tokens):
    tokens whose first character lies in a segmented run take the run's word
    holding that character; other tokens keep the tokenizer's word.
    """
    T = len(token_word_ids)
    if T == 0:
        return token_word_ids.copy(), 0
    doc_len = np.fromiter(map(len, texts), dtype=np.int64, count=len(texts))
    base = np.zeros(len(texts) + 1, np.int64)
    np.cumsum(doc_len, out=base[1:])
    big = "".join(texts)
    codes = code_points(big)
    C = len(codes)
    cls = script_classes(codes)
    doc_of_tok = np.repeat(np.arange(len(texts), dtype=np.int64), np.diff(tok_doc))
    seg_mask, lang_of_char = _segmented(big, cls, base, words)
    # Word starts of the segmented runs (global character positions), one segmenter call per
    # language.
    starts_all = [np.zeros(0, np.int64)]
    for lang, mask in lang_of_char.items():
        rs, re_ = _runs(mask, base)  # never across documents
        if lang == "cohesion":
            from .lexicon import segment_with_lexicon
            starts_all.append(segment_with_lexicon(big, rs, re_, words))
        elif lang == "ja":
            # Sudachi reads each line holding a Japanese run whole (digits and Latin words are
            # context: 2つ, 3年); only its word starts inside the runs are kept.
            ls, le = _lines_of(codes, base, rs)
            st = segment_runs(big, ls, le, _segmenter(lang))
            starts_all.append(np.union1d(st[mask[st]], rs))
        else:
            starts_all.append(segment_runs(big, rs, re_, _segmenter(lang)))
    seg_starts = np.unique(np.concatenate(starts_all))
    # Segment ends: the next segment start, or the end of the run.
    run_end = _run_end(seg_mask)
    nxt = np.append(seg_starts[1:], C)
    seg_ends = np.minimum(nxt, run_end[seg_starts]) if len(seg_starts) else seg_starts

    tstart = offsets[:, 0] + base[doc_of_tok]
    tend = offsets[:, 1] + base[doc_of_tok]
    # The first non-space character of a token (a space-only token looks at the next character).
    nonspace = _next_nonspace(codes)
    first = nonspace[np.clip(tstart, 0, C)]
    doc_end = base[doc_of_tok + 1]
    first = np.where(first >= doc_end, np.minimum(tstart, np.maximum(doc_end - 1, 0)), first)
    first = np.clip(first, 0, max(C - 1, 0))
    in_seg = seg_mask[first] if C else np.zeros(T, bool)
    special = token_word_ids < 0
    in_seg &= ~special
    seg_of = np.searchsorted(seg_starts, first, side="right") - 1
    # A new word begins where the labelling changes: document, segment or tokenizer word.
    new = np.ones(T, bool)
    if T > 1:
        same_doc = doc_of_tok[1:] == doc_of_tok[:-1]
        both_seg = in_seg[1:] & in_seg[:-1]
        both_tok = ~in_seg[1:] & ~in_seg[:-1]
        same = same_doc & ((both_seg & (seg_of[1:] == seg_of[:-1]))
                           | (both_tok & (token_word_ids[1:] == token_word_ids[:-1])))
        new[1:] = ~same
    new |= special
    if T > 1:
        new[1:] |= special[:-1]
    ids = np.cumsum(new) - 1
    ids[special] = -1
    # Boundary-crossing: a segmented token ending past its word; another token covering
    # segmented text.
    seg_cum = np.zeros(C + 1, np.int64)
    np.cumsum(seg_mask, out=seg_cum[1:])
    tend_c = np.clip(tend, 0, C)
    cross_seg = in_seg & (len(seg_starts) > 0) & (tend_c > seg_ends[np.clip(seg_of, 0, None)]) \
        if len(seg_starts) else np.zeros(T, bool)
    cross_other = (
        ~in_seg
        & ~special
        & (seg_cum[tend_c] - seg_cum[np.clip(first, 0, C)] > 0)
        & (tend_c > first)
    )
    crossing = int(np.count_nonzero(cross_seg | cross_other))
    return ids.astype(np.int64), crossing


def _segmented(big: str, cls: np.ndarray, base: np.ndarray,
               words: WordsConfig) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Which characters are cut by a segmenter, and by which one (mask per language)."""
    d = words.definition
    if d == "zh":
        m = cls == HAN
        return m, {"zh": m}
    if d == "ja":
        m = (cls == HAN) | (cls == KANA)
        return m, {"ja": m}
    if d == "th":
        m = cls == THAI
        return m, {"th": m}
    if d == "cohesion":
        m = cls != OTHER
        return m, {"cohesion": m}
    # auto: per document, CJK runs are Japanese when the document has kana
    kana_cum = np.zeros(len(cls) + 1, np.int64)
    np.cumsum(cls == KANA, out=kana_cum[1:])
    doc_has_kana = kana_cum[base[1:]] - kana_cum[base[:-1]] > 0
    char_doc_kana = np.repeat(doc_has_kana, np.diff(base))
    cjk = (cls == HAN) | (cls == KANA)
    out: dict[str, np.ndarray] = {}
    for lang, mask in (
        ("ja", cjk & char_doc_kana),
        ("zh", cjk & ~char_doc_kana),
        ("th", cls == THAI),
    ):
        if mask.any():
            out[lang] = mask
    return cjk | (cls == THAI), out


def _lines_of(codes: np.ndarray, base: np.ndarray,
              starts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and end of the line (cut at newlines and document ends) of each run, each once."""
    C = len(codes)
    idx = np.arange(C, dtype=np.int64)
    nl = codes == 0x0A
    after_nl = np.maximum.accumulate(np.where(nl, idx + 1, 0))  # past the last newline <= i
    next_nl = np.minimum.accumulate(np.where(nl, idx, C)[::-1])[::-1]  # first newline >= i
    doc = np.searchsorted(base, starts, side="right") - 1
    ls = np.maximum(after_nl[starts], base[doc])
    le = np.minimum(next_nl[starts], base[doc + 1])
    first = np.ones(len(ls), bool)
    first[1:] = ls[1:] != ls[:-1]
    return ls[first], le[first]


def _run_end(mask: np.ndarray) -> np.ndarray:
    """For each position, the end of the run of True holding it (outside runs: the position)."""
    C = len(mask)
    idx = np.arange(C + 1, dtype=np.int64)
    stop = np.where(np.append(mask, False), C + 1, idx)  # a False position is its own run end
    return np.minimum.accumulate(stop[::-1])[::-1]


def _next_nonspace(codes: np.ndarray) -> np.ndarray:
    """For each position (and the end), the first position at or after it that is not whitespace."""
    C = len(codes)
    space = (
        (codes == 0x20)
        | ((codes >= 0x09) & (codes <= 0x0D))
        | (codes == 0xA0)
        | (codes == 0x3000)
        | ((codes >= 0x2000) & (codes <= 0x200B))
        | (codes == 0x85)
        | (codes == 0x1680)
        | (codes == 0x2028)
        | (codes == 0x2029)
        | (codes == 0x202F)
        | (codes == 0x205F)
    )
    idx = np.arange(C + 1, dtype=np.int64)
    cand = np.where(np.append(space, False), C, idx)
    return np.minimum.accumulate(cand[::-1])[::-1]
