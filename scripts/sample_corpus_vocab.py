"""Word forms and ranked pools of the sample corpus, derived from `sample_corpus_data.words`.

Inflection rules (plurals, verb forms, -ly adverbs, comparatives), invented
names from fixed parts, and `build_vocabulary`, which puts base words first and
derived or generated forms at the rare end of each pool. Used by
`sample_corpus_grammar` and `make_sample_corpus`.
"""
from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from sample_corpus_data.terms import PLANTED_TERMS
from sample_corpus_data.words import (
    ADJECTIVES,
    ADVERBS,
    COUNT_NOUNS,
    ER_BASES,
    FIRST_NAMES,
    INTRANSITIVE_VERBS,
    LY_BASES,
    MASS_NOUNS,
    NAME_HEADS,
    NAME_MIDDLES,
    NESS_BASES,
    PLACE_TAILS,
    PLACES,
    REDO_VERBS,
    SURNAME_TAILS,
    SURNAMES,
    TRANSITIVE_VERBS,
    VESSELS,
)


def split_words(block: str) -> list[str]:
    """Split a whitespace-separated block into unique entries, order kept."""
    return list(dict.fromkeys(block.split()))


def plural(spec: str) -> tuple[str, str]:
    """Singular and plural of a noun spec such as ``"box"`` or ``"man/men"``.

    Example: ``plural("ferry/ferries") == ("ferry", "ferries")``.
    """
    if "/" in spec:
        one, many = spec.split("/")
        return one, many
    if spec.endswith(("s", "x", "z", "ch", "sh")):
        return spec, spec + "es"
    if spec.endswith("y") and spec[-2] not in "aeiou":
        return spec, spec[:-1] + "ies"
    return spec, spec + "s"


def verb_forms(spec: str) -> tuple[str, str, str, str, str]:
    """Base, third person singular, past, participle and -ing form of a verb spec.

    Example: ``verb_forms("stop*") == ("stop", "stops", "stopped", "stopped", "stopping")``.
    """
    parts = spec.split("/")
    head = parts[0]
    double = head.endswith("*")
    base = head.rstrip("*")
    if base.endswith(("s", "x", "z", "ch", "sh", "o")):
        third = base + "es"
    elif base.endswith("y") and base[-2] not in "aeiou":
        third = base[:-1] + "ies"
    else:
        third = base + "s"
    if double:
        past = base + base[-1] + "ed"
        ing = base + base[-1] + "ing"
    elif base.endswith("e"):
        past = base + "d"
        ing = base + "ing" if base.endswith(("ee", "ye", "oe")) else base[:-1] + "ing"
    elif base.endswith("y") and base[-2] not in "aeiou":
        past = base[:-1] + "ied"
        ing = base + "ing"
    else:
        past = base + "ed"
        ing = base + "ing"
    participle = past
    if len(parts) == 2:
        past = participle = parts[1]
    elif len(parts) == 3:
        past, participle = parts[1], parts[2]
    return base, third, past, participle, ing


def adverb_of(adjective: str) -> str:
    """The -ly adverb of an adjective. Example: ``adverb_of("busy") == "busily"``."""
    if adjective.endswith("y") and adjective[-2] not in "aeiou":
        return adjective[:-1] + "ily"
    if adjective.endswith("le"):
        return adjective[:-1] + "y"
    if adjective.endswith("ll"):
        return adjective + "y"
    return adjective + "ly"


def comparatives(adjective: str) -> tuple[str, str]:
    """Comparative and superlative. Example: ``comparatives("wet") == ("wetter", "wettest")``."""
    a = adjective
    if a.endswith("e"):
        return a + "r", a + "st"
    if a.endswith("y") and a[-2] not in "aeiou":
        return a[:-1] + "ier", a[:-1] + "iest"
    if (len(a) <= 4 and a[-1] not in "aeiouwxy" and a[-2] in "aeiou"
            and a[-3:-2] not in ("a", "e", "i", "o", "u")):
        return a + a[-1] + "er", a + a[-1] + "est"
    return a + "er", a + "est"


def _generated_names(tails: Sequence[str], count: int, salt: int, avoid: set[str]) -> list[str]:
    """``count`` distinct invented names, the same for every corpus seed."""
    rng = np.random.default_rng(salt)
    names: dict[str, None] = {}
    while len(names) < count:
        heads = rng.integers(len(NAME_HEADS), size=count).tolist()
        middles = rng.integers(len(NAME_MIDDLES), size=count).tolist()
        ends = rng.integers(len(tails), size=count).tolist()
        for h, m, e in zip(heads, middles, ends):
            name = NAME_HEADS[h] + NAME_MIDDLES[m] + tails[e]
            if name.lower() not in avoid and len(names) < count:
                names[name] = None
    return list(names)


@dataclass(frozen=True)
class Vocabulary:
    """Ranked word pools (most frequent first) that the grammar draws from."""

    nouns: list[tuple[str, str]]
    mass: list[str]
    adjectives: list[str]
    comparatives: list[tuple[str, str]]
    adverbs: list[str]
    transitive: list[tuple[str, str, str, str, str]]
    intransitive: list[tuple[str, str, str, str, str]]
    first_names: list[str]
    surnames: list[str]
    places: list[str]
    vessels: list[str]

    def words(self) -> set[str]:
        """Every lower-cased word form in the pools."""
        out: set[str] = set()
        for group in (self.nouns, self.comparatives, self.transitive, self.intransitive):
            for forms in group:
                out.update(forms)
        for group in (self.mass, self.adjectives, self.adverbs, self.first_names,
                      self.surnames, self.places, self.vessels):
            out.update(group)
        return {w.lower() for w in out}


@functools.lru_cache(maxsize=1)
def build_vocabulary() -> Vocabulary:
    """The word pools, base words first and derived or generated forms after.

    Derived forms (re- verbs, un- participles, -ness nouns, -ly adverbs) and
    generated names go to the end of their pool, so Zipf weights make them
    the rare tail. Example: ``len(build_vocabulary().surnames) > 1000``.
    """
    adjectives = split_words(ADJECTIVES)
    transitive = [verb_forms(s) for s in split_words(TRANSITIVE_VERBS)]
    base_words = {w.lower() for w in (COUNT_NOUNS + MASS_NOUNS + ADJECTIVES + ADVERBS
                                      + SURNAMES + PLACES + VESSELS + FIRST_NAMES).split()}
    avoid = base_words | {w.lower() for t in PLANTED_TERMS for w in t.text.split()}
    redo = [("re" + f[0], "re" + f[1], "re" + f[2], "re" + f[3], "re" + f[4])
            for f in transitive if f[0] in REDO_VERBS and not f[0].startswith("re")]
    undone = ["un" + f[3] for f in transitive if f[0] in REDO_VERBS]
    adverbs = split_words(ADVERBS) + [adverb_of(a) for a in LY_BASES]
    nesses = [(a[:-1] + "i" if a.endswith("y") and len(a) > 3 else a) + "ness"
              for a in NESS_BASES]
    compar = [comparatives(a) for a in ER_BASES]
    return Vocabulary(
        nouns=[plural(s) for s in split_words(COUNT_NOUNS)],
        mass=list(dict.fromkeys(split_words(MASS_NOUNS) + nesses)),
        adjectives=list(dict.fromkeys(adjectives + undone)),
        comparatives=compar,
        adverbs=list(dict.fromkeys(adverbs)),
        transitive=transitive + redo,
        intransitive=[verb_forms(s) for s in split_words(INTRANSITIVE_VERBS)],
        first_names=split_words(FIRST_NAMES),
        surnames=split_words(SURNAMES) + _generated_names(SURNAME_TAILS, 2500, 101, avoid),
        places=split_words(PLACES) + _generated_names(PLACE_TAILS, 800, 202, avoid),
        vessels=split_words(VESSELS),
    )


def article(word: str) -> str:
    """``"a"`` or ``"an"`` before ``word``. Example: ``article("hour") == "an"``."""
    low = word.lower()
    if low.startswith(("hour", "honest", "honour")):
        return "an"
    if low.startswith(("uni", "use", "usu", "eu", "one", "once")):
        return "a"
    return "an" if low[:1] in "aeiou" else "a"
