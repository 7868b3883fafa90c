"""The planted multi-word terms of the sample corpus, with their per-document rates.

Data only; `scripts/make_sample_corpus.py` plants them and recounts them.
"""
from __future__ import annotations

from dataclasses import dataclass


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
