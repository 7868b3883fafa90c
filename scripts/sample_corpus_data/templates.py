"""Sentence templates and phrase lists of the sample corpus.

Data only. A template is a string with ``{slot}`` names that
`sample_corpus_grammar.Grammar` fills; weights are relative. ``{C}`` is the
main clause of a sentence frame, ``{c}`` a further clause, ``{T}`` the planted
term being placed and ``{S}`` its short form.
"""
from __future__ import annotations

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

