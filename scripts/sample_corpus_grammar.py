"""Random draws and template expansion for the sample corpus generator.

`Picker` and `Uniform` draw from one shared ``numpy.random.Generator`` in
fixed-size chunks, so the text depends only on the seed and the order of
calls. `Grammar` expands the templates of `sample_corpus_data.templates` over
the pools of `sample_corpus_vocab`. `vocabulary_words` and `reserved_words`
let the generator check that ordinary text never uses the words of a planted
term (apart from the listed shared words).
"""
from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable, Sequence

import numpy as np
from sample_corpus_data.templates import (
    BUILDINGS,
    BULLETIN_KIND_WEIGHTS,
    BULLETIN_KINDS,
    CLAUSES,
    CLOSERS,
    COMPASS,
    EVENTS,
    FREQS,
    IT_ADJECTIVES,
    LOG_CLAUSES,
    LOG_SOURCES,
    MEASURES,
    OPENERS,
    PREPOSITIONS,
    PRONOUNS,
    SEASONS,
    SEASTATES,
    SENTENCES,
    SHORT_CLAUSES,
    TERM_CLAUSES,
    THAN,
    TIME_PHRASES,
    TRENDS,
    VISIBILITY,
)
from sample_corpus_data.terms import PLANTED_TERMS, SHARED_WORDS, PlantedTerm
from sample_corpus_data.words import MONTHS, TITLES, WEEKDAYS
from sample_corpus_vocab import article, build_vocabulary


class Picker:
    """Draw items from a list with Zipf-like weights 1 / (rank + offset) ** s.

    Draws come from one shared ``numpy.random.Generator`` in fixed-size
    chunks, so the sequence depends only on the seed and the order of calls.
    Example: ``Picker(rng, ["a", "b"], zipf=0.0)()`` returns "a" or "b".
    """

    def __init__(self, rng: np.random.Generator, items: Sequence, *,
                 zipf: float = 1.0, offset: float = 2.7,
                 weights: Sequence[float] | None = None, chunk: int = 2048) -> None:
        self.items = list(items)
        if weights is not None:
            w = np.asarray(weights, dtype=np.float64)
        else:
            w = 1.0 / (np.arange(len(self.items)) + offset) ** zipf
        self.p = w / w.sum()
        self.rng = rng
        self.chunk = chunk
        self.buf: list[int] = []
        self.pos = 0

    def __call__(self):
        if self.pos >= len(self.buf):
            self.buf = self.rng.choice(len(self.items), size=self.chunk, p=self.p).tolist()
            self.pos = 0
        item = self.items[self.buf[self.pos]]
        self.pos += 1
        return item


class Uniform:
    """Buffered uniform floats in [0, 1) from the shared generator."""

    def __init__(self, rng: np.random.Generator, chunk: int = 8192) -> None:
        self.rng = rng
        self.chunk = chunk
        self.buf: list[float] = []
        self.pos = 0

    def __call__(self) -> float:
        if self.pos >= len(self.buf):
            self.buf = self.rng.random(self.chunk).tolist()
            self.pos = 0
        value = self.buf[self.pos]
        self.pos += 1
        return value

    def int(self, low: int, high: int) -> int:
        """An integer in [low, high], inclusive."""
        return low + int(self() * (high - low + 1))


_SLOT = re.compile(r"\{(\w+)\}")


def compile_template(text: str) -> tuple[tuple[str, str], ...]:
    """Split ``"the {noun} was {adj}"`` into (literal, slot) pairs."""
    parts = []
    pos = 0
    for m in _SLOT.finditer(text):
        parts.append((text[pos:m.start()], m.group(1)))
        pos = m.end()
    parts.append((text[pos:], ""))
    return tuple(parts)



class Grammar:
    """Expands templates into sentences; one instance per corpus run."""

    def __init__(self, rng: np.random.Generator, today: dt.date) -> None:
        self.u = Uniform(rng)

        def mk(items, **kw):
            return Picker(rng, items, **kw)

        v = build_vocabulary()
        self.noun_sing = mk([n[0] for n in v.nouns])
        self.noun_plur = mk([n[1] for n in v.nouns])
        self.mass = mk(v.mass)
        self.adj_pick = mk(v.adjectives)
        self.compar_pick = mk(v.comparatives)
        self.adv_pick = mk(v.adverbs)
        self.vt_forms = mk(v.transitive)
        self.vi_forms = mk(v.intransitive)
        self.first = mk(v.first_names, zipf=0.6)
        self.surname = mk(v.surnames, zipf=1.0)
        self.title = mk(TITLES.split(), zipf=0.5)
        self.place_pick = mk(v.places, zipf=1.0)
        self.vessel_pick = mk(v.vessels, zipf=0.8)
        self.prep = mk(PREPOSITIONS, zipf=1.2, offset=1.5)
        self.pron_pick = mk(PRONOUNS, zipf=0.8, offset=1.0)
        self.flat = {name: mk(items, zipf=0.0) for name, items in (
            ("weekday", WEEKDAYS), ("month", MONTHS), ("season", SEASONS),
            ("freq", FREQS), ("compass", COMPASS), ("seastate", SEASTATES),
            ("visibility", VISIBILITY), ("trend", TRENDS),
            ("event", EVENTS), ("building", BUILDINGS), ("adjit", IT_ADJECTIVES))}
        self.clause_pick = mk([compile_template(t) for _, t in CLAUSES],
                              weights=[w for w, _ in CLAUSES])
        self.simple_pick = mk([compile_template(t) for w, t in CLAUSES if "{simple}" not in t],
                              weights=[w for w, t in CLAUSES if "{simple}" not in t])
        self.sentence_pick = mk([compile_template(t) for _, t in SENTENCES],
                                weights=[w for w, _ in SENTENCES])
        self.term_picks = {cat: mk([compile_template(t) for _, t in frames],
                                   weights=[w for w, _ in frames])
                           for cat, frames in TERM_CLAUSES.items()}
        self.short_pick = mk([compile_template(t) for _, t in SHORT_CLAUSES],
                             weights=[w for w, _ in SHORT_CLAUSES])
        self.log_pick = mk([compile_template(t) for _, t in LOG_CLAUSES],
                           weights=[w for w, _ in LOG_CLAUSES])
        self.openers = {kind: mk([compile_template(t) for t in frames], zipf=0.0)
                        for kind, frames in OPENERS.items()}
        self.closer_pick = mk([compile_template(t) for t in CLOSERS], zipf=0.0)
        self.kind_pick = mk(BULLETIN_KINDS, weights=BULLETIN_KIND_WEIGHTS)
        self.log_source = mk(LOG_SOURCES, zipf=0.5)
        self.today = today  # the document's date, set per document
        self.term = ""  # the planted term being placed, for {T}
        self.slots: dict[str, Callable[[], str]] = {
            "np": self.np, "nps": self.nps, "qnps": self.qnps, "a_np": self.a_np,
            "obj": self.obj, "noun": self.noun_sing, "nouns": self.noun_plur,
            "adj": self.adj_pick, "adv": self.adv_pick,
            "adjer": lambda: self.compar_pick()[0], "adjest": lambda: self.compar_pick()[1],
            "than": lambda: THAN[self.u.int(0, len(THAN) - 1)],
            "vt": lambda: self.vt_forms()[0], "vts": lambda: self.vt_forms()[1],
            "vtd": lambda: self.vt_forms()[2], "vtp": lambda: self.vt_forms()[3],
            "vtg": lambda: self.vt_forms()[4],
            "vi": lambda: self.vi_forms()[0], "vid": lambda: self.vi_forms()[2],
            "vis": lambda: self.vi_forms()[1], "vig": lambda: self.vi_forms()[4],
            "person": self.person, "place": self.place_pick, "vessel": self.vessel,
            "pron": self.pron_pick, "pp": self.pp, "opt_pp": self.opt_pp,
            "ppcap": lambda: capitalise(self.pp()), "time": self.time,
            "opt_time": self.opt_time, "timecap": lambda: capitalise(self.time()),
            "clock": self.clock, "num": self.num, "dec": self.dec,
            "measure": self.measure, "money": self.money, "temp": self.temp,
            "pressure": lambda: str(self.u.int(968, 1042)), "force": lambda: str(self.u.int(1, 9)),
            "daymonth": self.daymonth, "year": lambda: str(self.today.year),
            "phone": lambda: f"{self.u.int(100, 999)} {self.u.int(100, 999)}",
            "late": self.late, "simple": self.simple, "c": self.clause,
            "T": lambda: self.term, "a_T": lambda: f"{article(self.term)} {self.term}",
            "S": lambda: self.term, "few": lambda: str(self.u.int(2, 60)),
            "deadline": self.deadline, "meas": self.meas, "measval": self.measval,
        }
        self.meas_pick = mk(MEASURES, weights=(3, 3, 3, 3, 2, 1))
        self.last_meas = MEASURES[0]
        for name, picker in self.flat.items():
            self.slots[name] = picker
        unknown = {m for t in all_templates() for m in _SLOT.findall(t)} - set(self.slots) - {"C"}
        if unknown:
            raise ValueError(f"templates use unknown slots: {sorted(unknown)}")

    # --- expansion ---------------------------------------------------------
    def expand(self, template: tuple[tuple[str, str], ...], main: str = "") -> str:
        out = []
        for literal, slot in template:
            out.append(literal)
            if slot == "C":
                out.append(main)
            elif slot:
                out.append(self.slots[slot]())
        return "".join(out)

    def clause(self) -> str:
        return self.expand(self.clause_pick())

    def simple(self) -> str:
        return self.expand(self.simple_pick())

    def sentence(self, main: str | None = None) -> str:
        if main is None:
            main = self.clause()
        return capitalise(self.expand(self.sentence_pick(), main))

    def term_sentence(self, term: PlantedTerm, *, short: bool) -> str:
        self.term = term.short if short else term.text
        frame = self.short_pick() if short else self.term_picks[term.category]()
        clause = self.expand(frame)
        self.term = ""
        return self.sentence(clause)

    # --- phrases -----------------------------------------------------------
    def np(self) -> str:
        r = self.u()
        if r < 0.40:
            return "the " + self.noun_sing()
        if r < 0.58:
            return f"the {self.adj_pick()} {self.noun_sing()}"
        if r < 0.70:
            return self.a_np()
        if r < 0.76:
            return ("this " if self.u() < 0.6 else "that ") + self.noun_sing()
        if r < 0.82:
            return f"the {self.noun_sing()} of the {self.noun_sing()}"
        if r < 0.88:
            return ("her ", "his ", "their ", "our ")[self.u.int(0, 3)] + self.noun_sing()
        if r < 0.96:
            return "the " + self.mass()
        return "the island's " + self.noun_sing()

    def a_np(self) -> str:
        head = self.noun_sing() if self.u() < 0.6 else f"{self.adj_pick()} {self.noun_sing()}"
        return f"{article(head)} {head}"

    def nps(self) -> str:
        r = self.u()
        if r < 0.45:
            return "the " + self.noun_plur()
        if r < 0.65:
            return f"the {self.adj_pick()} {self.noun_plur()}"
        if r < 0.80:
            return self.noun_plur()
        return self.qnps()

    def qnps(self) -> str:
        q = ("some", "many", "several", "a few", "two", "three", "most of the",
             "all the", "both", self.num())[self.u.int(0, 9)]
        return f"{q} {self.noun_plur()}"

    def obj(self) -> str:
        r = self.u()
        if r < 0.55:
            return self.np()
        if r < 0.80:
            return self.nps()
        if r < 0.92:
            return self.mass() if self.u() < 0.5 else "the " + self.mass()
        return self.person()

    def person(self) -> str:
        r = self.u()
        if r < 0.5:
            return f"{self.first()} {self.surname()}"
        if r < 0.8:
            return f"{self.title()} {self.surname()}"
        return self.first()

    def vessel(self) -> str:
        return "the " + self.vessel_pick()

    def pp(self) -> str:
        r = self.u()
        if r < 0.25:
            return f"{('at', 'to', 'near', 'off', 'from')[self.u.int(0, 4)]} {self.place_pick()}"
        prep = self.prep()
        return f"{prep} {self.np() if self.u() < 0.75 else self.nps()}"

    def opt_pp(self) -> str:
        return " " + self.pp() if self.u() < 0.45 else ""

    def opt_time(self) -> str:
        return " " + self.time() if self.u() < 0.4 else ""

    def time(self) -> str:
        r = self.u.int(0, 20)
        if r < 3:
            return "on " + self.flat["weekday"]()
        if r < 5:
            return "at " + self.clock()
        if r < 7:
            return "on " + self.daymonth()
        return TIME_PHRASES[r - 7]

    def deadline(self) -> str:
        r = self.u()
        if r < 0.4:
            return self.flat["weekday"]()
        if r < 0.7:
            return self.clock()
        return ("noon", "dark", "the next sailing", "the end of the month")[self.u.int(0, 3)]

    def clock(self) -> str:
        return f"{self.u.int(5, 21):02d}:{5 * self.u.int(0, 11):02d}"

    def num(self) -> str:
        r = self.u()
        if r < 0.7:
            return str(self.u.int(2, 40))
        if r < 0.95:
            return str(self.u.int(41, 400))
        return f"{self.u.int(1, 9)},{self.u.int(0, 999):03d}"

    def dec(self) -> str:
        return f"{self.u.int(0, 6)}.{self.u.int(0, 9)}"

    def temp(self) -> str:
        value = f"{self.u.int(-2, 19)}.{self.u.int(0, 9)}"
        return value + (" °C" if self.u() < 0.7 else "°C")

    def measure(self) -> str:
        r = self.u.int(0, 5)
        if r == 0:
            return f"{self.dec()} m"
        if r == 1:
            return f"{self.u.int(2, 45)} knots"
        if r == 2:
            return self.temp()
        if r == 3:
            if self.u() < 0.8:
                return f"{self.u.int(2, 45)} knots"
            return f"{self.u.int(968, 1042)} hPa"
        if r == 4:
            return f"{self.u.int(3, 98)} per cent"
        return f"{self.u.int(3, 98)}%"

    def meas(self) -> str:
        """A measured quantity; ``measval`` then gives a value in its unit."""
        self.last_meas = self.meas_pick()
        return self.last_meas

    def measval(self) -> str:
        kind = self.last_meas
        if kind in ("swell", "water level"):
            return f"{self.dec()} m"
        if kind == "wind":
            return f"{self.u.int(2, 45)} knots"
        if kind == "temperature":
            return self.temp()
        if kind == "visibility":
            return f"{self.u.int(1, 20)} km"
        return f"{self.u.int(968, 1042)} hPa"

    def money(self) -> str:
        if self.u() < 0.5:
            return f"£{self.u.int(1, 90)}.{5 * self.u.int(0, 19):02d}"
        return f"£{self.u.int(2, 900)}"

    def daymonth(self) -> str:
        day = self.today + dt.timedelta(days=self.u.int(-20, 40))
        if self.u() < 0.6:
            return f"{day.day} {MONTHS[day.month - 1]}"
        return f"{WEEKDAYS[day.weekday()]} {day.day} {MONTHS[day.month - 1]}"

    def late(self) -> str:
        r = self.u()
        if r < 0.6:
            return ""
        if r < 0.85:
            return f", {self.u.int(2, 50)} minutes late"
        return " on time"


def capitalise(text: str) -> str:
    """Upper-case the first letter, skipping an opening quote."""
    if text.startswith('"'):
        return '"' + text[1:2].upper() + text[2:]
    return text[:1].upper() + text[1:]


def reserved_words() -> set[str]:
    """Lower-cased words of planted terms that ordinary text must not use."""
    words = {w.lower() for t in PLANTED_TERMS for w in t.text.split()}
    return words - SHARED_WORDS


def all_templates() -> list[str]:
    """Every template string the grammar expands."""
    templates = [t for _, t in CLAUSES + SENTENCES + LOG_CLAUSES + SHORT_CLAUSES]
    templates += [t for frames in TERM_CLAUSES.values() for _, t in frames]
    return templates + [t for frames in OPENERS.values() for t in frames] + list(CLOSERS)


def vocabulary_words() -> set[str]:
    """Every lower-cased word the grammar can write outside planted terms."""
    forms = set(build_vocabulary().words()) | set(TITLES.split())
    templates = all_templates()
    flat = (WEEKDAYS, MONTHS, SEASONS, FREQS, COMPASS, SEASTATES, VISIBILITY, TRENDS,
            MEASURES, EVENTS, BUILDINGS, IT_ADJECTIVES, THAN, LOG_SOURCES, PREPOSITIONS,
            PRONOUNS, TIME_PHRASES)
    templates += [x for group in flat for x in group]
    for text in templates:
        forms.update(re.findall(r"\w+", _SLOT.sub(" ", text)))
    return {f.lower() for f in forms}
