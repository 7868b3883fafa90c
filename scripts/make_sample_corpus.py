#!/usr/bin/env python3
"""Write maskprep's bundled sample corpus: invented English text, seeded.

What it does: generates the bulletins, notices and logbooks of the Reach
archipelago (an invented group of islands with a ferry service, a seaweed
growers' cooperative, a tide observation station and a harbour office) from a
small grammar of sentence templates over a vocabulary of a few thousand word
forms drawn with Zipf-like weights. Thirty multi-word terms are planted at
stated per-document rates; their words are reserved, so they rarely occur
outside the term (the README lists the deliberate exceptions). After writing
the text it recounts the planted terms in the written files and stores the
figures in ``planted_terms.tsv`` and ``README.md``.

Files written under ``--out`` (each to a temporary name, then renamed):
``bulletins.jsonl.gz`` (one JSON object per line: id, date, kind, text),
``logbooks.txt.gz`` (one document per line), ``planted_terms.tsv`` and
``README.md``. Gzip members carry no file name and mtime 0, so the same seed
gives byte-identical files on one machine.

What it does not do: it is not a model of real English. Word order comes from
templates, word choice from fixed pools; use it for demos and for
planted-unit tests, never as a reference for real-language behaviour.

Standard library and numpy only. Example:
``python scripts/make_sample_corpus.py --out /tmp/corpus --seed 0 --documents 500``
"""
from __future__ import annotations

import argparse
import collections
import datetime as dt
import functools
import gzip
import io
import json
import os
import re
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable, Sequence

import numpy as np

DEFAULT_DOCUMENTS = 20_000
BULLETIN_SHARE = 0.6  # the rest are logbook lines
FIRST_DAY = dt.date(2019, 1, 1)
DAYS_SPANNED = 6 * 365


# --------------------------------------------------------------------------
# Planted terms
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class PlantedTerm:
    """A multi-word term planted in a stated share of documents.

    ``rate`` is the probability that a document contains the term at least
    once (drawn independently per document and term); ``short`` is an
    optional short form (a surname) used for some later mentions in the same
    document, so that word also occurs outside the full term.
    """

    text: str
    category: str
    rate: float
    short: str = ""


PLANTED_TERMS: tuple[PlantedTerm, ...] = (
    # people
    PlantedTerm("Harbourmaster Tamsin Ebrill", "person", 0.060, "Ebrill"),
    PlantedTerm("Captain Joachim Penhallow", "person", 0.040, "Penhallow"),
    PlantedTerm("Maelis Orrin", "person", 0.025, "Orrin"),
    PlantedTerm("Warden Inès Mallacott", "person", 0.012, "Mallacott"),
    PlantedTerm("Doctor Bryony Kestle", "person", 0.008, "Kestle"),
    PlantedTerm("Osric Vennor", "person", 0.004, "Vennor"),
    # places
    PlantedTerm("Skerrow Sound", "place", 0.080),
    PlantedTerm("Vell Haven", "place", 0.070),
    PlantedTerm("Isle of Carrowmere", "place", 0.030),
    PlantedTerm("Lowenna Strait Tidal Observation Station", "place", 0.020),
    PlantedTerm("Dunmorrow Point", "place", 0.015),
    PlantedTerm("Ebbwater Narrows", "place", 0.010),
    PlantedTerm("Quenby Slipway", "place", 0.003),
    # vessels
    PlantedTerm("Merrow Queen", "vessel", 0.050),
    PlantedTerm("Sula Brightwater", "vessel", 0.020),
    PlantedTerm("Grey Petrel", "vessel", 0.015),
    PlantedTerm("Ardent Kittiwake", "vessel", 0.006),
    # organisations
    PlantedTerm("Thornsey Seaweed Growers Cooperative", "organisation", 0.045),
    PlantedTerm("Outer Reaches Transport Trust", "organisation", 0.020),
    PlantedTerm("Standing Committee on Mooring Fees", "organisation", 0.008),
    # technical terms
    PlantedTerm("tide gauge datum", "technical", 0.035),
    PlantedTerm("wave buoy telemetry", "technical", 0.018),
    PlantedTerm("spat collector rope", "technical", 0.012),
    PlantedTerm("frond biomass", "technical", 0.011),
    PlantedTerm("holdfast density index", "technical", 0.010),
    PlantedTerm("salinity drift correction", "technical", 0.009),
    PlantedTerm("longline seeding frame", "technical", 0.007),
    PlantedTerm("bathymetric survey grid", "technical", 0.006),
    PlantedTerm("pilotage exemption certificate", "technical", 0.005),
    PlantedTerm("quayside bollard load rating", "technical", 0.004),
)

# Words of planted terms that the ordinary vocabulary may use as well:
# function words inside two terms, and two deliberately shared content words
# ("tide" in "tide gauge datum", "grey" in "Grey Petrel") so that not every
# planted term is perfectly cohesive.
SHARED_WORDS = frozenset({"of", "on", "tide", "grey"})


# --------------------------------------------------------------------------
# Vocabulary (ranked roughly most common first; rank drives Zipf weights)
# --------------------------------------------------------------------------

COUNT_NOUNS = """
day boat island harbour quay crossing passenger week morning year time vehicle
ticket notice meeting member road house tide line month evening night hour
minute crew skipper pier ferry/ferries jetty beach shore bay cove channel rock
reef headland lighthouse beacon light signal flag mast deck hull engine
propeller rudder anchor chain cable net pot cage tank pump pipe valve hose
filter battery generator motor radio/radios phone message call office desk door
window roof wall shed store shop school church hall library museum cafe
kitchen table chair bench box crate bag barrel bucket basket sack pallet
container trolley crane winch hoist ramp gate fence post sign board map chart
compass clock sensor meter reading sample bottle jar tube record log book page
list form permit licence price bill payment account budget grant fund plan
project scheme proposal decision vote question answer problem issue change
delay cancellation repair inspection test check trial visit trip journey
voyage route service sailing departure arrival schedule booking seat cabin
berth bunk galley lounge bridge wheelhouse hatch locker ladder rail step stair
floor corner edge end side top bottom middle centre front back area part piece
section zone site spot place position level depth height length width weight
size number figure total family child/children parent mother father brother
sister friend neighbour visitor tourist guest worker farmer
fisherman/fishermen diver mate pilot officer clerk manager chair secretary
treasurer volunteer student teacher nurse driver cook baker keeper porter
ranger scientist technician mechanic electrician builder carpenter painter
man/men woman/women person/people bird gull tern seal otter whale dolphin
fish/fish crab lobster mussel oyster shell stone pebble storm gale squall
shower cloud sky sun moon star tree bush flower garden field farm sheep/sheep
cow horse dog cat hen egg apple potato/potatoes harvest crop yield batch
season cycle blade stipe float marker sinker block current swell surge
breakwater slip wharf/wharves pontoon dinghy/dinghies launch tender trawler
yacht canoe kayak oar sail keel bow stern lifejacket lifeboat flare torch
lantern helmet glove boot coat hat jacket street village town council parish
letter email poster leaflet newsletter website rule warning alarm siren bell
whistle hand head eye face arm leg foot/feet idea reason result effect cause
example case fact holiday festival party concert dance race regatta show fair
market tug barge coaster hut workshop garage warehouse depot yard lane track
path hill cliff inlet valley stream pool spring well gap ridge slope shelf/shelves
knife/knives hook knot bolt nut screw spanner hammer drill saw brush tin can
lid sheet tarpaulin canvas buckle strap wheel tyre axle trailer tractor van
lorry bus bicycle car shelter cairn wreck hazard obstacle leak crack dent hole
fault breakdown spare label tag key lock hinge handle switch cord plug socket
fuse bulb lamp heater stove kettle mug cup plate bowl spoon fork tray
napkin blanket pillow mattress curtain carpet rug mirror picture photo/photos
camera screen keyboard printer copy file folder envelope stamp parcel package
delivery order invoice receipt voucher pass badge uniform apron mop
broom queue crowd group team band choir club society class lesson
course exam prize award medal cup trophy speech toast dinner lunch breakfast
supper picnic sandwich cake pie biscuit scone
almanac anemometer barnacle bilge binnacle bulkhead capstan cleat coxswain
davit dory fairlead fathom fender forepeak gangway gunwale halyard hawser jib
keelson lanyard limpet outboard pennant porthole rowlock scupper sextant
shackle sheave skiff spar stanchion strake tiller transom whaler bramble
thistle nettle dune croft byre peat dyke ditch drain culvert sluice weir
causeway ford stile kiln forge mill granary barn stable paddock orchard
allotment greenhouse cupboard drawer wardrobe cushion quilt teapot saucepan
ladle sieve grater grocer postman/postmen postmistress/postmistresses shepherd
crofter ferryman/ferrymen deckhand boatbuilder beachcomber chandler cooper
weaver knitter fiddler piper agreement arrangement announcement apology
complaint suggestion reminder explanation permission application registration
renewal extension reduction increase shortage surplus estimate forecast
assessment measurement adjustment replacement improvement development
requirement entitlement contribution subscription donation collection
"""

MASS_NOUNS = """
water weather fog rain wind ice oil fuel diesel gear cargo freight salt sand
mud kelp timber paint concrete silt traffic news information equipment damage
maintenance work food coffee tea bread milk mail electricity power heat noise
smoke steam rust grease money cash rubbish waste plastic steel wood glass
paper wool advice help support funding insurance safety shelter spray foam
sleet snow hail drizzle mist daylight darkness
"""

ADJECTIVES = """
new old good small large big little long short high low early late full
empty open closed busy quiet calm rough wet dry cold warm hot cool fresh clear
dark bright heavy strong weak safe dangerous slow fast quick steady sudden
usual unusual normal regular local northern southern eastern western main
final first last next previous recent annual weekly daily monthly careful
serious minor major simple difficult easy hard soft loose tight broken damaged
clean dirty rusty salty sandy rocky muddy foggy windy stormy sunny cloudy misty
frosty icy grey green blue white black red yellow brown orange silver public
private special general extra additional temporary permanent available
necessary important possible likely certain ready happy glad tired young whole
single double narrow wide deep shallow steep flat smooth sharp thick thin tall
near far upper lower inner electric wooden plastic aluminium iron copper
rubber cotton woollen friendly helpful kind polite grateful proud pleased
worried anxious nervous curious sheltered exposed remote isolated crowded
lonely peaceful noisy excellent poor fine fair reasonable strange odd
different similar modern ancient traditional original official formal
informal brisk fierce gentle mild bitter freezing faulty worn leaking cracked
bent missing blocked flooded sturdy fragile costly cheap expensive generous
patient busy punctual overdue urgent routine brief lengthy steadfast bare
sheer hollow solid slippery tidy untidy shabby neat modest vast tiny huge
brackish briny windswept sodden blustery squally drizzly overcast hazy leaden
glassy choppy turbulent tranquil serene placid mottled speckled weathered
tarred varnished galvanised corroded seaworthy buoyant waterproof watertight
airtight ramshackle derelict disused abandoned unmanned uninhabited navigable
treacherous perilous hazardous cautious diligent meticulous reliable
dependable seasonal coastal offshore inshore nautical maritime marine
"""

ADVERBS = """
again also already always almost away back soon still then there today
tomorrow yesterday here now later quickly slowly carefully finally nearly
rarely often usually sometimes never once twice together instead perhaps
probably certainly clearly simply only just even quite very rather fairly
mostly mainly largely partly briefly suddenly gradually steadily safely
easily properly badly well ahead aboard ashore overnight afterwards
"""

# base[/past[/participle]]; a trailing * doubles the last consonant.
TRANSITIVE_VERBS = """
check inspect repair replace clean paint move carry lift lower open close
start stop* fix test measure record report collect deliver send/sent
receive order book cancel delay confirm announce approve reject discuss review
publish post print sign complete finish prepare plan* build/built install
remove mark count weigh pack unload haul harvest tow pull push secure tie
untie lash pump take/took/taken bring/brought find/found see/saw/seen
give/gave/given hold/held keep/kept leave/left make/made put/put show/showed/shown
tell/told buy/bought sell/sold lose/lost meet/met write/wrote/written read/read
catch/caught lend/lent spend/spent hear/heard know/knew/known throw/threw/thrown
cut/cut shut/shut drive/drove/driven break/broke/broken need want use try
visit thank welcome invite ask help join follow watch notice spot* chart
sample store fill empty drain seal raise adjust tighten loosen grease
oil scrub sweep/swept wash dry stack sort label* hire fund share offer
organise arrange attend host support expect explain describe mention remind
warn advise inform contact phone email agree settle pay/paid charge refund
caulk splice coil stow dredge scour salvage refloat ballast varnish tar*
galvanise lubricate calibrate monitor dismantle reassemble overhaul replenish
restock ration allocate distribute catalogue tabulate compile
"""

INTRANSITIVE_VERBS = """
arrive depart sail return wait stay remain go/went/gone come/came/come
run/ran/run rise/rose/risen fall/fell/fallen blow/blew/blown freeze/froze/frozen
sink/sank/sunk swim/swam/swum fly/flew/flown grow/grew/grown happen occur
continue begin/began/begun end improve worsen ease turn shift* settle clear
calm gather pass land dock anchor float work rest sleep/slept walk travel*
reopen close open pause resume ring/rang/rung shine/shone/shone
"""

FIRST_NAMES = """
Alys Bran Cadan Dilys Fenna Gethin Hesper Idris Jory Kerra Lowri Morwen Nessa
Owain Pryce Rhian Sennen Tegan Ulla Wenna Aled Beca Cai Derwa Eira Frey Gwen
Hal Ianto Jenna Kit Lorcan Meg Nye Olwen Piran Rosen Siôn Talan Vida Wyn Zoë
Søren Mårta Aurélie Tomás Siân Brónach José Elin Fion Garan Hollis Ives Jago
Keziah Lyle Mabyn Nola Orla Perran Quinn Rue Sidra Teilo
"""

SURNAMES = """
Trelawn Pascoe Hendry Quiller Mardle Nance Rowse Tonkin Jewell Bolitho Carne
Dunstan Eddy Fraddon Gilbert Harvey Ivey Jago Kitto Lander Moyle Nicholls
Opie Polglase Rodda Stevens Tregear Uren Vivian Warne Yelland Angove Bray
Chegwidden Daniel Elliott Furse Grose Hocking Inch James Keast Laity Mitchell
Northey Oates Penrose Retallack Sleeman Thomas Udy Vosper Wearne Curnow
Ellery Faull Gendall Hosking Knuckey Lobb Menhenick Nankivell Pengelly Rablen
Sobey Trezise Varcoe Whetter Ferreira Müller Nuñez
"""

TITLES = "Mr Mrs Ms Skipper Councillor Nurse Chief Mate"

PLACES = """
Tolvan Kellin Harrowby Brisay Skelda Innish Gorran Caddow Yarrel Brennock
Tullagh Orsk Pennance Hallow Skarth Vorran Lisk Ennor Tresk Corrie
Fennick Garth Holm Inver Keld Lunna Marrick Noss Oxna Pabbay Ronan Sanday
Tarrack Uyea Vementry Weisdale Yell Ardnish Balta Colla Durn Eshaness Fara
"""

VESSELS = """
Fulmar Curlew Dunlin Shearwater Guillemot Razorbill Puffin Whimbrel Plover
Sanderling Eider Scoter Merlin Tarrin Blythe Osprey Heron Swift
Redshank Godwit Skua Gannet Cormorant Wren Kestrel
"""

WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
MONTHS = ("January", "February", "March", "April", "May", "June", "July",
          "August", "September", "October", "November", "December")
MONTHS_SHORT = tuple(m[:3] for m in MONTHS)


def _words(block: str) -> list[str]:
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


# Derivations that add a realistic tail of rarer word forms (affixes that a
# subword tokenizer learns to split off, as it does on real text).
REDO_VERBS = frozenset(_v for _v in """check inspect repair replace clean paint
    open close start fix test measure record deliver send order book confirm
    publish post print sign build install mark count weigh pack fill seal
    adjust tighten sort label hire organise arrange write sell make""".split())
LY_BASES = tuple("""quick slow careful steady sudden usual unusual normal regular
    final recent serious simple easy safe bright heavy strong weak gentle mild
    fierce bitter brief sharp smooth thick warm cold calm rough quiet noisy
    happy proud polite kind patient generous nervous anxious curious official
    formal informal traditional original dangerous hazardous treacherous
    cautious diligent meticulous reliable seasonal punctual urgent brisk neat
    tidy vast huge deep wide large near fair high clear certain possible
    necessary temporary permanent full loose tight steep shallow""".split())
ER_BASES = tuple("""new old small large big long short high low early late full calm
    rough wet dry cold warm hot cool fresh clear dark bright heavy strong weak
    safe slow fast quick steady busy quiet easy hard soft loose tight clean dirty
    rusty salty sandy rocky muddy foggy windy stormy sunny cloudy misty icy grey
    narrow wide deep shallow steep flat smooth sharp thick thin tall near young
    happy kind mild fierce gentle bitter brisk tidy neat tiny choppy hazy sturdy
    cheap poor fine fair""".split())
NESS_BASES = tuple("""dark calm rough wet dry weak steady soft late slow tight short
    empty fresh bright ready cold loose sharp thick thin smooth kind polite happy
    tired lonely gentle bitter sudden heavy damp weary stiff salty""".split())
NAME_HEADS = ("Tre", "Pol", "Pen", "Car", "Ros", "Lan", "Bos", "Kil", "Ard", "Bal",
              "Dun", "Inver", "Glen", "Strath", "Kin", "Ach", "Tor", "Skel", "Hal",
              "Ben", "Craig", "Mar", "Tal", "Gwen", "Nan", "Por", "Lis", "Tren")
NAME_MIDDLES = ("", "a", "e", "o", "i", "an", "en", "or", "ar", "el", "ow", "in", "um", "ith")
SURNAME_TAILS = ("wick", "nance", "garrow", "dell", "thorpe", "away", "ack", "ock", "ey",
                 "an", "ith", "ard", "en", "ley", "ster", "wen", "gan", "lin", "rick",
                 "mayne", "ford", "bury")
PLACE_TAILS = ("holm", "ness", "by", "wick", "sett", "ay", "avik", "more", "ton",
               "dale", "vaig", "sker", "tun", "ister", "garth", "ick", "ey", "oe")


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
    adjectives = _words(ADJECTIVES)
    transitive = [verb_forms(s) for s in _words(TRANSITIVE_VERBS)]
    base_words = {w.lower() for w in (COUNT_NOUNS + MASS_NOUNS + ADJECTIVES + ADVERBS
                                      + SURNAMES + PLACES + VESSELS + FIRST_NAMES).split()}
    avoid = base_words | {w.lower() for t in PLANTED_TERMS for w in t.text.split()}
    redo = [("re" + f[0], "re" + f[1], "re" + f[2], "re" + f[3], "re" + f[4])
            for f in transitive if f[0] in REDO_VERBS and not f[0].startswith("re")]
    undone = ["un" + f[3] for f in transitive if f[0] in REDO_VERBS]
    adverbs = _words(ADVERBS) + [adverb_of(a) for a in LY_BASES]
    nesses = [(a[:-1] + "i" if a.endswith("y") and len(a) > 3 else a) + "ness"
              for a in NESS_BASES]
    compar = [comparatives(a) for a in ER_BASES]
    return Vocabulary(
        nouns=[plural(s) for s in _words(COUNT_NOUNS)],
        mass=list(dict.fromkeys(_words(MASS_NOUNS) + nesses)),
        adjectives=list(dict.fromkeys(adjectives + undone)),
        comparatives=compar,
        adverbs=list(dict.fromkeys(adverbs)),
        transitive=transitive + redo,
        intransitive=[verb_forms(s) for s in _words(INTRANSITIVE_VERBS)],
        first_names=_words(FIRST_NAMES),
        surnames=_words(SURNAMES) + _generated_names(SURNAME_TAILS, 2500, 101, avoid),
        places=_words(PLACES) + _generated_names(PLACE_TAILS, 800, 202, avoid),
        vessels=_words(VESSELS),
    )


def article(word: str) -> str:
    """``"a"`` or ``"an"`` before ``word``. Example: ``article("hour") == "an"``."""
    low = word.lower()
    if low.startswith(("hour", "honest", "honour")):
        return "an"
    if low.startswith(("uni", "use", "usu", "eu", "one", "once")):
        return "a"
    return "an" if low[:1] in "aeiou" else "a"


# --------------------------------------------------------------------------
# Random draws (buffered, so numpy is called once per few thousand draws)
# --------------------------------------------------------------------------

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


# --------------------------------------------------------------------------
# Templates
# --------------------------------------------------------------------------

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


# Clauses: lower-case, no final punctuation. Weights are relative.
CLAUSES = (
    (10, "{np} {vtd} {obj}{opt_pp}"),
    (5, "{nps} {vtd} {obj}{opt_pp}"),
    (6, "{np} {vid} {pp}"),
    (4, "{nps} {vid} {pp}{opt_time}"),
    (6, "{np} was {adj}{opt_pp}"),
    (3, "{nps} were {adj} {time}"),
    (3, "{np} {vts} {obj} {freq}"),
    (2, "{nps} {vt} {obj} {freq}"),
    (5, "{person} {vtd} {obj}{opt_pp}"),
    (3, "{person} said that {simple}"),
    (4, "{pron} {vtd} {obj} {time}"),
    (3, "{pron} will {vt} {obj}{opt_time}"),
    (3, "{np} will be {vtp} {time}"),
    (2, "{nps} have been {vtp}{opt_pp}"),
    (2, "{np} has been {vtp} {pp}"),
    (3, "there was {a_np} {pp}"),
    (2, "there were {qnps} {pp}"),
    (3, "{vessel} {vid} {pp} {time}"),
    (2, "{vessel} left {place} at {clock} with {few} passengers"),
    (2, "the {meas} at {place} was {measval} at {clock}"),
    (1, "{person} and {person} {vtd} {obj}"),
    (0.5, "nobody {vtd} {obj}"),
    (2, "it was {adj} {pp}"),
    (1, "it is {adjit} to {vt} {obj}"),
    (1, "{np} must be {vtp} before {deadline}"),
    (1, "{nps} should {vt} {obj}"),
    (0.7, "the price of {a_np} was {money}"),
    (1, "{num} {nouns} were {vtp} {time}"),
    (1, "{pron} {vtd} {adv}"),
    (1, "{np} {vid} {adv} {pp}"),
    (0.6, "the {noun} {noun} was {adj}"),
    (1.2, "{np} was {adjer} than {than}"),
    (0.8, "it was the {adjest} {noun} {time}"),
    (0.6, "{nps} were {adv} {adj}"),
    (1.5, "{np} was {vtg} {obj}"),
    (1, "{nps} were {vig} {pp}"),
    (1, "{np} {vis} {freq}"),
    (0.6, "{pron} {vtd} the {noun} of the {noun}"),
)

# Sentence frames around one main clause {C}; {c} is a further clause.
SENTENCES = (
    (55, "{C}."),
    (8, "{C}, and {c}."),
    (6, "{C}, but {c}."),
    (4, "{C} because {c}."),
    (3, "{C} when {c}."),
    (6, "{ppcap}, {C}."),
    (5, "{timecap}, {C}."),
    (2, "{C} — {c}."),
    (2, "{C}; {c}."),
    (2, "\"{C},\" {person} said."),
    (1, "{C} ({measure})."),
    (2, "after {c}, {C}."),
    (0.4, "{C}!"),
)

TERM_CLAUSES = {
    "person": (
        (4, "{T} {vtd} {obj}{opt_pp}"),
        (3, "{T} said that {simple}"),
        (2, "{np} was {vtp} by {T}"),
        (2, "{T} asked {nps} to {vt} {obj}"),
        (1, "a letter from {T} {vtd} {obj}"),
        (1, "{T} will {vi} {pp}"),
        (1, "{person} and {T} {vtd} {obj}"),
    ),
    "place": (
        (3, "{np} {vid} at {T}"),
        (2, "the crossing to {T} was {adj}"),
        (2, "{nps} near {T} were {adj} {time}"),
        (2, "{vessel} left {T} at {clock}"),
        (2, "{person} {vid} from {T}"),
        (1, "work at {T} {vid} {time}"),
        (1, "the {meas} at {T} was {measval}"),
    ),
    "vessel": (
        (3, "the {T} {vid} {pp}"),
        (2, "the {T} left {place} at {clock}"),
        (2, "{nps} aboard the {T} were {adj}"),
        (2, "{person} {vtd} the {T}"),
        (1, "the {T} carried {few} passengers and {few} vehicles"),
        (1, "the crew of the {T} {vtd} {obj}"),
    ),
    "organisation": (
        (3, "the {T} {vtd} {obj}"),
        (2, "{a_np} from the {T} {vid} {pp}"),
        (2, "the {T} will {vt} {obj} {time}"),
        (2, "members of the {T} {vtd} {obj}"),
        (1, "{person} wrote to the {T} about {obj}"),
    ),
    "technical": (
        (3, "the {T} was {vtp} {time}"),
        (2, "{person} {vtd} the {T}"),
        (2, "{nps} in the {T} {vid}"),
        (2, "the {T} for {place} was {adj}"),
        (1, "{a_T} {vid} {pp}"),
        (1, "{pron} {vtd} the {T} {time}"),
    ),
}

SHORT_CLAUSES = (
    (2, "{S} {vtd} {obj}"),
    (1, "{S} said that {simple}"),
    (1, "{np} was {vtp} by {S}"),
)

BULLETIN_KINDS = ("ferry notice", "harbour notice", "farm bulletin",
                  "tide report", "community notice")
BULLETIN_KIND_WEIGHTS = (0.3, 0.2, 0.2, 0.15, 0.15)

OPENERS = {
    "ferry notice": (
        "the {clock} sailing from {place} to {place} on {weekday} is cancelled",
        "sailings between {place} and {place} will run to the winter timetable from {daymonth}",
        "{vessel} is out of service {time} for repairs",
        "passengers for {place} should be at the quay {few} minutes before departure",
        "the ferry to {place} is full on {weekday}; {nps} may be carried on the next sailing",
    ),
    "harbour notice": (
        "notice to mariners: {np} at {place} is {adj}",
        "the harbour office will be closed on {daymonth}",
        "boat owners are reminded that {simple}",
        "the fuel berth at {place} is closed until further notice",
        "a light on the breakwater at {place} is {adj}",
    ),
    "farm bulletin": (
        "the kelp harvest at {place} reached {num} tonnes this {season}",
        "members are asked to {vt} {obj} before {weekday}",
        "the next meeting is on {daymonth} at {clock} in the {building} at {place}",
        "lines at {place} were {vtp} {time}",
        "the drying shed at {place} {vid} {time}",
    ),
    "tide report": (
        "high water at {place} {time} was at {clock}, {dec} m above chart zero",
        "the swell at {place} was {dec} m at {clock}; wind {compass} {force}",
        "water temperature {temp}, air {temp}",
        "low water at {place} was {dec} m at {clock}",
        "the barometer read {pressure} hPa at {clock} and was {trend}",
    ),
    "community notice": (
        "the {event} at {place} will take place on {daymonth}",
        "thanks to everyone who {vtd} {obj}",
        "{person} has retired after {few} years {pp}",
        "the {building} at {place} will open at {clock} on {weekday}",
        "volunteers are needed to {vt} {obj} at {place}",
    ),
}

CLOSERS = (
    "Issued {daymonth} {year}.",
    "Enquiries to the office on 01632 {phone}.",
    "— {person}",
    "More details on the board at {place}.",
    "Please pass this notice on to {nps}.",
)

LOG_SOURCES = ("Ferry log", "Harbour office", "Farm diary", "Tide record",
               "Pilot boat log", "Quay diary", "Shore watch")

LOG_CLAUSES = (
    (4, "departed {place} with {few} passengers and {few} vehicles"),
    (3, "arrived {place}{late}"),
    (4, "wind {compass} {force}, sea {seastate}, visibility {visibility}"),
    (2, "wind {compass} force {force}; swell {dec} m"),
    (2, "air {temp}, water {temp}"),
    (0.6, "barometer {pressure} hPa, {trend}"),
    (4, "{vtd} {obj}"),
    (4, "{pron} {vtd} {obj}{opt_pp}"),
    (3, "{np} {vid} {pp}"),
    (3, "{np} was {adj}"),
    (1, "no {nouns} {pp}"),
    (1, "all {nouns} {vtp}"),
    (2, "{person} came aboard at {place}"),
    (1, "level {dec} m above chart zero"),
    (2, "{simple}"),
)

EVENTS = ("regatta", "fair", "concert", "market", "dance", "race", "festival",
          "quiz", "meeting", "beach clean")
SEASONS = ("spring", "summer", "autumn", "winter")
FREQS = ("every morning", "every day", "each week", "twice a week", "in winter",
         "in summer", "at low water", "at high water", "on weekdays",
         "most evenings", "in the spring", "after every storm", "once a month")
COMPASS = ("N", "NE", "E", "SE", "S", "SW", "W", "NW", "north-westerly",
           "south-westerly", "easterly", "variable")
SEASTATES = ("calm", "slight", "moderate", "rough", "very rough")
VISIBILITY = ("good", "moderate", "poor", "very poor", "fog patches")
TRENDS = ("falling", "rising", "steady", "falling slowly", "rising quickly")
MEASURES = ("swell", "water level", "wind", "temperature", "visibility", "pressure")
PREPOSITIONS = ("in", "on", "at", "to", "from", "with", "for", "near", "by", "off",
                "along", "across", "after", "before", "during", "under", "over",
                "around", "behind", "beyond", "through", "towards", "past", "inside",
                "outside", "beside", "below", "above", "against", "into", "about")
THAN = ("usual", "expected", "last week", "yesterday", "before", "the forecast",
        "in summer", "last year")
BUILDINGS = ("hall", "school", "church", "cafe", "library", "office", "shed", "museum",
             "workshop", "pub")
IT_ADJECTIVES = ("important", "necessary", "possible", "easy", "difficult", "safe",
                 "dangerous", "usual", "unusual", "hard")
PRONOUNS = ("we", "they", "she", "he", "it", "I", "you")
TIME_PHRASES = ("this morning", "this afternoon", "last night", "yesterday", "today",
                "tomorrow", "next week", "last week", "before noon", "after dark",
                "at first light", "within the hour", "during the night",
                "until further notice")


class Grammar:
    """Expands templates into sentences; one instance per corpus run."""

    def __init__(self, rng: np.random.Generator) -> None:
        self.u = Uniform(rng)
        mk = lambda items, **kw: Picker(rng, items, **kw)  # noqa: E731
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
        self.today = FIRST_DAY
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
            return f"{self.u.int(2, 45)} knots" if self.u() < 0.8 else f"{self.u.int(968, 1042)} hPa"
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


# --------------------------------------------------------------------------
# Documents
# --------------------------------------------------------------------------

def _plan_mentions(u: Uniform, rates: np.ndarray, draws: np.ndarray) -> list[int]:
    """Indices of planted terms for one document, repeated per mention."""
    chosen = np.flatnonzero(draws < rates).tolist()
    mentions = []
    for index in chosen:
        mentions.append(index)
        while u() < 0.3 and len(mentions) < 12:
            mentions.append(index)
    return mentions


def _term_sentences(g: Grammar, mentions: list[int]) -> list[str]:
    seen: set[int] = set()
    out = []
    for index in mentions:
        term = PLANTED_TERMS[index]
        short = bool(term.short) and index in seen and g.u() < 0.5
        seen.add(index)
        out.append(g.term_sentence(term, short=short))
    return out


def _merge(g: Grammar, generic: list[str], planted: list[str]) -> list[str]:
    """Insert planted sentences among generic ones, keeping planted order."""
    slots = sorted(g.u.int(0, len(generic)) for _ in planted)
    out, last = [], 0
    for pos, sentence in zip(slots, planted):
        out.extend(generic[last:pos])
        out.append(sentence)
        last = pos
    out.extend(generic[last:])
    return out


def make_bulletin(g: Grammar, mentions: list[int]) -> tuple[str, str]:
    kind = g.kind_pick()
    opener = capitalise(g.expand(g.openers[kind]())) + "."
    n_generic = 1 + int(min(g.u(), 0.999) * 2) + (g.u.int(1, 6) if g.u() < 0.06 else 0)
    generic = [g.sentence() for _ in range(n_generic)]
    body = _merge(g, generic, _term_sentences(g, mentions))
    parts = [opener, *body]
    if g.u() < 0.3:
        parts.append(g.expand(g.closer_pick()))
    return kind, " ".join(parts)


def make_logbook(g: Grammar, mentions: list[int]) -> str:
    day = g.today
    r = g.u()
    source = g.log_source()
    if r < 0.5:
        header = f"{source}, {day.day} {MONTHS_SHORT[day.month - 1]} {day.year}."
    elif r < 0.8:
        header = f"{source} — {WEEKDAYS[day.weekday()]} {day.day} {MONTHS[day.month - 1]}."
    else:
        header = f"{day.isoformat()} {source.lower()}:"
    n_entries = 2 + int(min(g.u(), 0.999) * 2) + (g.u.int(1, 6) if g.u() < 0.06 else 0)
    entries = [capitalise(g.expand(g.log_pick())) + "." for _ in range(n_entries)]
    entries = _merge(g, entries, _term_sentences(g, mentions))
    minutes = g.u.int(5 * 60, 9 * 60)
    stamped = []
    for entry in entries:
        minutes = min(minutes + g.u.int(5, 95), 23 * 60 + 55)
        stamped.append(f"{minutes // 60:02d}:{minutes % 60:02d} {entry}")
    return " ".join([header, *stamped])


@dataclass(frozen=True)
class Corpus:
    """Generated documents, before writing."""

    bulletins: list[dict]
    logbooks: list[str]


def generate(*, seed: int = 0, documents: int = DEFAULT_DOCUMENTS) -> Corpus:
    """Generate the corpus in memory. Example: ``generate(seed=0, documents=100)``."""
    rng = np.random.default_rng(seed)
    g = Grammar(rng)
    rates = np.array([t.rate for t in PLANTED_TERMS])
    n_bulletins = round(documents * BULLETIN_SHARE)
    n_logbooks = documents - n_bulletins
    bulletin_days = np.sort(rng.integers(0, DAYS_SPANNED, size=n_bulletins)).tolist()
    logbook_days = np.sort(rng.integers(0, DAYS_SPANNED, size=n_logbooks)).tolist()
    draws = rng.random((documents, len(PLANTED_TERMS)))
    bulletins = []
    for i, day in enumerate(bulletin_days):
        g.today = FIRST_DAY + dt.timedelta(days=day)
        kind, text = make_bulletin(g, _plan_mentions(g.u, rates, draws[i]))
        bulletins.append({"id": f"B{i + 1:06d}", "date": g.today.isoformat(),
                          "kind": kind, "text": text})
    logbooks = []
    for j, day in enumerate(logbook_days):
        g.today = FIRST_DAY + dt.timedelta(days=day)
        logbooks.append(make_logbook(g, _plan_mentions(g.u, rates, draws[n_bulletins + j])))
    return Corpus(bulletins, logbooks)


# --------------------------------------------------------------------------
# Counting planted terms in the written text
# --------------------------------------------------------------------------

def term_pattern(terms: Iterable[str]) -> re.Pattern:
    """One case-insensitive, whole-word regex matching any of ``terms``.

    Words of a term may be separated by any run of whitespace.
    Example: ``term_pattern(["Vell Haven"]).findall("at vell  haven.")``.
    """
    alternatives = sorted((r"\s+".join(map(re.escape, t.split())) for t in terms),
                          key=len, reverse=True)
    return re.compile(r"(?<!\w)(?:" + "|".join(alternatives) + r")(?!\w)", re.IGNORECASE)


def count_terms(texts: Iterable[str], terms: Sequence[str]) -> dict[str, tuple[int, int]]:
    """(documents with the term, occurrences) per term, over ``texts``.

    Example: ``count_terms(["Vell Haven, vell haven"], ["Vell Haven"]) == {"Vell Haven": (1, 2)}``.
    """
    key = {" ".join(t.lower().split()): t for t in terms}
    pattern = term_pattern(terms)
    docs = collections.Counter()
    occurrences = collections.Counter()
    for text in texts:
        found = [key[" ".join(m.group(0).lower().split())] for m in pattern.finditer(text)]
        occurrences.update(found)
        docs.update(set(found))
    return {t: (docs[t], occurrences[t]) for t in terms}


def word_counts(texts: Iterable[str]) -> collections.Counter:
    """Lower-cased counts of runs of word characters."""
    counts: collections.Counter = collections.Counter()
    word = re.compile(r"\w+")
    for text in texts:
        counts.update(word.findall(text.lower()))
    return counts


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
            MEASURES, EVENTS, BUILDINGS, IT_ADJECTIVES, THAN, LOG_SOURCES, PREPOSITIONS, PRONOUNS,
            TIME_PHRASES)
    templates += [x for group in flat for x in group]
    for text in templates:
        forms.update(re.findall(r"\w+", _SLOT.sub(" ", text)))
    return {f.lower() for f in forms}


# --------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------

def _write_atomic(path: Path, data: bytes) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def _gzip_bytes(text: str) -> bytes:
    buffer = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buffer, compresslevel=9, mtime=0) as gz:
        gz.write(text.encode("utf-8"))
    return buffer.getvalue()


def write_corpus(corpus: Corpus, out: Path, *, seed: int, documents: int) -> dict:
    """Write the files under ``out`` and return the figures put in the README."""
    out.mkdir(parents=True, exist_ok=True)
    jsonl = "".join(json.dumps(b, ensure_ascii=False) + "\n" for b in corpus.bulletins)
    txt = "".join(line + "\n" for line in corpus.logbooks)
    _write_atomic(out / "bulletins.jsonl.gz", _gzip_bytes(jsonl))
    _write_atomic(out / "logbooks.txt.gz", _gzip_bytes(txt))

    # Recount from what was written, not from the plan.
    with gzip.open(out / "bulletins.jsonl.gz", "rt", encoding="utf-8") as f:
        texts = [json.loads(line)["text"] for line in f]
    with gzip.open(out / "logbooks.txt.gz", "rt", encoding="utf-8") as f:
        texts += [line.rstrip("\n") for line in f]
    terms = [t.text for t in PLANTED_TERMS]
    counts = count_terms(texts, terms)
    words = word_counts(texts)
    inside: collections.Counter = collections.Counter()
    for t in PLANTED_TERMS:
        for w in t.text.lower().split():
            inside[w] += counts[t.text][1]
    rows = []
    for t in PLANTED_TERMS:
        docs, occ = counts[t.text]
        content = [w for w in t.text.lower().split() if w not in ("of", "on")]
        outside = sum(words[w] - inside[w] for w in dict.fromkeys(content))
        rows.append((t, docs, occ, outside))
    tsv = ["term\twords\tdocuments_with_term\toccurrences\ttarget_rate"]
    tsv += [f"{t.text}\t{len(t.text.split())}\t{d}\t{o}\t{t.rate:.3f}" for t, d, o, _ in rows]
    _write_atomic(out / "planted_terms.tsv", ("\n".join(tsv) + "\n").encode("utf-8"))

    figures = {
        "documents": len(texts), "bulletins": len(corpus.bulletins),
        "logbooks": len(corpus.logbooks),
        "text_bytes": sum(len(t.encode("utf-8")) for t in texts),
        "jsonl_bytes": len(jsonl.encode("utf-8")), "txt_bytes": len(txt.encode("utf-8")),
        "words": sum(words.values()), "word_types": len(words),
        "non_ascii_docs": sum(1 for t in texts if not t.isascii()),
        **rank_figures(words),
    }
    _write_atomic(out / "README.md", render_readme(rows, figures, seed=seed,
                                                  documents=documents).encode("utf-8"))
    return figures


def rank_figures(words: collections.Counter) -> dict:
    """Rank-frequency slope (ranks 10-1,000) and tail share of word forms without digits."""
    freq = np.array(sorted((c for w, c in words.items() if not any(ch.isdigit() for ch in w)),
                           reverse=True), dtype=np.float64)
    ranks = np.arange(1, len(freq) + 1)
    fit = slice(9, min(1000, len(freq)))
    if fit.stop - fit.start < 2:
        return {"zipf_slope": float("nan"), "tail_share": 0.0}
    slope = float(np.polyfit(np.log(ranks[fit]), np.log(freq[fit]), 1)[0])
    return {"zipf_slope": slope, "tail_share": float(freq[2000:].sum() / freq.sum()),
            "alpha_types": len(freq)}


def render_readme(rows: list, figures: dict, *, seed: int, documents: int) -> str:
    """The sample corpus README, with figures counted from the written files."""
    n = figures["documents"]
    command = "python scripts/make_sample_corpus.py"
    if seed != 0:
        command += f" --seed {seed}"
    if documents != DEFAULT_DOCUMENTS:
        command += f" --documents {documents}"
    table = ["| term | words | target share of documents | documents with term | "
             "observed share | occurrences | its words outside the term |",
             "|---|---:|---:|---:|---:|---:|---:|"]
    for t, docs, occ, outside in rows:
        table.append(f"| {t.text} | {len(t.text.split())} | {100 * t.rate:.1f}% | {docs:,} | "
                     f"{100 * docs / n:.2f}% | {occ:,} | {outside:,} |")
    v = build_vocabulary()
    return README_TEMPLATE.format(
        command=command, seed=seed, table="\n".join(table),
        nouns=f"{len(v.nouns):,}", mass=f"{len(v.mass):,}",
        generated=f"{len(v.surnames) + len(v.places) - len(_words(SURNAMES)) - len(_words(PLACES)):,}",
        verbs=f"{len(v.transitive) + len(v.intransitive):,}",
        adjectives=f"{len(v.adjectives):,}", adverbs=f"{len(v.adverbs):,}",
        clauses=len(CLAUSES), frames=len(SENTENCES),
        zipf=f"{figures['zipf_slope']:.2f}", tail=f"{100 * figures['tail_share']:.1f}",
        alpha_types=f"{figures.get('alpha_types', 0):,}",
        documents=f"{n:,}", bulletins=f"{figures['bulletins']:,}",
        logbooks=f"{figures['logbooks']:,}",
        text_mb=f"{figures['text_bytes'] / 1e6:.2f}",
        jsonl_mb=f"{figures['jsonl_bytes'] / 1e6:.2f}",
        txt_mb=f"{figures['txt_bytes'] / 1e6:.2f}",
        words=f"{figures['words']:,}", word_types=f"{figures['word_types']:,}",
        non_ascii=f"{figures['non_ascii_docs']:,}")


README_TEMPLATE = """\
# Sample corpus

> **Synthetic text.** Everything here was generated by a script from sentence
> templates and word lists. It is not real English and not a benchmark of
> real-language behaviour: word order is templated, vocabulary is small and
> drawn from fixed pools, and the multi-word terms were planted on purpose.
> Use it to try maskprep (`maskprep demo`) and to test that planted units are
> found; do not quote figures measured on it as properties of real text.

This file is written by the generator; edit the script, not this page.

## Scenario

The Reach is an invented archipelago. Its small harbour authority issues
notices to mariners and keeps an office log; a ferry service runs between the
islands and posts sailing notices; the Thornsey Seaweed Growers Cooperative
farms kelp on longlines and sends bulletins to members; the Lowenna Strait
Tidal Observation Station reports water levels, swell and weather; and the
islanders put up community notices. All places, people, vessels,
organisations and technical terms are invented.

## Files

| file | reader format | documents | uncompressed |
|---|---|---:|---:|
| `bulletins.jsonl.gz` | JSON Lines: one object per line with `id`, `date` (ISO 8601), `kind` and `text` | {bulletins} | {jsonl_mb} MB |
| `logbooks.txt.gz` | plain text: one document per line | {logbooks} | {txt_mb} MB |
| `planted_terms.tsv` | tab-separated: `term`, `words`, `documents_with_term`, `occurrences`, `target_rate` | | |

In total {documents} documents, {text_mb} MB of document text (UTF-8),
{words} words ({word_types} distinct lower-cased word forms, counted as runs of
word characters). The text has punctuation, times, dates, numbers with
decimals and thousands separators, prices in £, temperatures with a degree
sign (°C), em dashes (—) and accented names (Inès, Søren, Zoë, Müller and
others); {non_ascii} documents contain at least one non-ASCII character.

## How it was generated

    {command}

with seed {seed}. The script uses only the Python standard library and numpy;
the same seed and `--documents` give byte-identical files (gzip without a file
name and with mtime 0; a different zlib build may compress differently, the
decompressed text stays the same). Ordinary words are drawn from ranked pools
({nouns} count nouns with their plurals, {mass} mass nouns, {verbs} verbs in
five forms, {adjectives} adjectives, {adverbs} adverbs, with derived forms such
as *repainted*, *unchecked*, *calmness* and *steadily* at the rare end; names
of people, places and boats, from short lists followed by {generated} generated
names) with weights proportional to 1 / (rank + 2.7), a flatter power for
given names and boats. Sentences come from {clauses} clause templates inside
{frames} sentence frames, plus openers and log entries of their own, so
function words such as *the*, *at* and *of* are the most frequent words. A
least-squares fit of log frequency on log rank over ranks 10 to 1,000 (word
forms without digits) gives a slope of {zipf}.

**The vocabulary is small.** There are {alpha_types} distinct word forms without
digits, and only {tail}% of word occurrences fall outside the 2,000 most
frequent forms; real English text of this size has many times more distinct
words and a far heavier tail. A tokenizer trained here therefore reaches
whole-word coverage at a much smaller vocabulary than on real text, and
fragmentation figures measured on this corpus are not those of English.

The templates also make some fixed phrases of their own that are not planted
and not in the table below, for example "per cent", "take place", "chart
zero", "until further notice", "came aboard" and barometer readings in hPa. A
good PMI ranking finds them too, as it would find such phrases in real text.

## Planted terms

Each planted term is put into a document with the stated probability,
independently per document and term; a document that gets a term mentions it
again with probability 0.3 per further mention. The figures below are counted
in the written files (whole words, case-insensitive, over the `text` of both
files), not copied from the plan; `planted_terms.tsv` holds the same counts.

{table}

The last column counts how often the term's content words occur anywhere
outside a full mention of the term. The words of planted terms are kept out of
the ordinary vocabulary, so it is zero for most terms, with deliberate
exceptions: for people a later mention in the same document sometimes uses the
surname alone; *tide* (in "tide gauge datum") and *grey* (in "Grey Petrel")
are also ordinary words; and "Isle of Carrowmere" and "Standing Committee on
Mooring Fees" contain the frequent function words *of* and *on*, which make
them harder for a PMI ranking that takes the weakest split of a term. Pairs of
frequent ordinary words ("of the", "at the", "was a") co-occur often by
chance, so a PMI ranking should put the planted terms near the top and such
pairs well below them.

## Licence

Invented text of our own, released under the same licence as maskprep: MIT.
"""


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description="Write maskprep's synthetic sample corpus (invented text, seeded).")
    parser.add_argument("--out", type=Path,
                        default=Path(__file__).resolve().parent.parent / "sample_corpus",
                        help="output folder (default: sample_corpus/ in this repository)")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")
    parser.add_argument("--documents", type=int, default=DEFAULT_DOCUMENTS,
                        help=f"number of documents in both files together (default: {DEFAULT_DOCUMENTS})")
    args = parser.parse_args(argv)
    if args.documents < 2:
        parser.error(f"--documents must be at least 2, got {args.documents}")
    if args.seed < 0:
        parser.error(f"--seed must be zero or positive, got {args.seed}")
    if args.out.exists() and not args.out.is_dir():
        parser.error(f"--out {args.out} is a file; pass a folder (it is created if missing)")
    clash = reserved_words() & vocabulary_words()
    if clash:
        raise SystemExit(f"planted-term words used by the ordinary vocabulary: {sorted(clash)}")
    corpus = generate(seed=args.seed, documents=args.documents)
    figures = write_corpus(corpus, args.out, seed=args.seed, documents=args.documents)
    print(f"wrote {figures['documents']:,} documents ({figures['text_bytes'] / 1e6:.2f} MB of text) "
          f"to {args.out}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
