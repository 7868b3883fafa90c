"""The edge-word and fragment filters of unit selection: their arithmetic on hand-worked values.

Every expected value below is worked out by hand in the test's docstring
(common practice: small cases computed on paper); the filters on real text
are measured against WordNet in test_unit_precision.py.
"""

from __future__ import annotations

import doctest

import numpy as np
import pytest

import maskprep.units.filters as filters
from maskprep.errors import MaskprepError
from maskprep.units.filters import edge_ok, fragment_shares, frequent_words


def test_doctests_of_the_filters_module():
    # Source: the hand-worked examples in maskprep/units/filters.py docstrings.
    result = doctest.testmod(filters)
    assert result.attempted >= 4 and result.failed == 0


def test_frequent_words_counts_then_text():
    """Counts: the 50, of 30, and 30, cat 30, dog 4, k = 3.

    Most frequent first: the (50); then three words tied at 30, taken in text
    order (UTF-8 bytes): "and" < "cat" < "of", so the third place goes to
    "cat" and "of" is out. Keys come back sorted: the=10, and=30, cat=40 ->
    [10, 30, 40]. k larger than the vocabulary gives every word.
    """
    keys = np.array([[10], [20], [30], [40], [50]], np.uint64)
    counts = np.array([50, 30, 30, 30, 4])
    texts = ["the", "of", "and", "cat", "dog"]
    got_keys, got_texts = frequent_words(keys, counts, texts, 3)
    assert got_texts == ["the", "and", "cat"]
    assert got_keys.tolist() == [10, 30, 40] and got_keys.dtype == np.uint64
    assert frequent_words(keys, counts, texts, 9)[1] == ["the", "and", "cat", "of", "dog"]
    assert frequent_words(keys, counts, texts, 0)[0].size == 0


def test_edge_filter_first_and_last_word_only():
    """Edge words {the=1, of=2}.

    point of view (5 2 6): of is inside -> kept.
    of course (2 7): begins with of -> dropped.
    the end (1 8): begins with the -> dropped.
    piece of the (9 2 1): ends with the -> dropped.
    ice cream (3 4): no edge word -> kept.
    With no edge words every row is kept.
    """
    rows = np.array([[5, 2, 6], [2, 7, 0], [1, 8, 0], [9, 2, 1], [3, 4, 0]], np.uint64)
    two = [rows[0], rows[1, :2], rows[2, :2], rows[3], rows[4, :2]]
    got = [bool(edge_ok(r[None, :], np.array([1, 2], np.uint64))[0]) for r in two]
    assert got == [True, False, False, False, True]
    assert edge_ok(rows, np.zeros(0, np.uint64)).all()


def test_fragment_share_left_and_right_extensions():
    """Bigrams a b (count 40), c d (count 10), e f (count 8); trigrams counted:

    a b x 30, y a b 10  -> share of a b = max(30, 10) / 40 = 0.75 (right extension);
    z c d 10            -> share of c d = 10 / 10 = 1.0 (left extension, every occurrence);
    c d e 3             -> smaller than z c d, does not change 1.0;
    nothing around e f  -> share 0.0;
    q r s 99            -> extends no candidate, ignored.
    At the default threshold 0.75, a b (share exactly 0.75) and c d are fragments, e f is not.
    """
    a, b, c, d, e, f, x, y, z, q, r, s = (np.uint64(v) for v in range(1, 13))
    keys = np.array([[a, b], [c, d], [e, f]], np.uint64)
    counts = np.array([40, 10, 8])
    longer = np.array([[a, b, x], [y, a, b], [z, c, d], [c, d, e], [q, r, s]], np.uint64)
    longer_counts = np.array([30, 10, 10, 3, 99])
    shares = fragment_shares(keys, counts, longer, longer_counts)
    assert shares.tolist() == [0.75, 1.0, 0.0]
    assert ((shares >= filters.DEFAULT_FRAGMENT_SHARE) == [True, True, False]).all()
    assert (
        fragment_shares(keys, counts, np.zeros((0, 3), np.uint64), np.zeros(0)).tolist()
        == [0.0] * 3
    )


def test_fragment_share_sums_nothing_across_extensions():
    """One n-gram is a fragment only of ONE longer n-gram: new york (100) with new york city
    (40) and new york times (40) has share max(40, 40) / 100 = 0.4, not (40 + 40) / 100."""
    ny = np.array([[1, 2]], np.uint64)
    longer = np.array([[1, 2, 3], [1, 2, 4]], np.uint64)
    assert fragment_shares(ny, np.array([100]), longer, np.array([40, 40])).tolist() == [0.4]


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"edge_words": -1}, "--edge-words: must be a whole number >= 0"),
        ({"edge_words": 2.5}, "--edge-words: must be a whole number >= 0"),
        ({"fragment_share": 1.5}, r"--fragment-share: must be a number in \[0, 1\]"),
        ({"fragment_share": -0.1}, r"--fragment-share: must be a number in \[0, 1\]"),
        ({"fragment_share": "half"}, r"--fragment-share: must be a number in \[0, 1\]"),
    ],
)
def test_filter_option_errors(kwargs, match):
    from maskprep.units.options import check_options

    meta = {"max_n": 3, "min_count": 2}
    with pytest.raises(MaskprepError, match=match):
        check_options(
            meta, measure="llr", top=10, min_count=None, per_length=None, max_n=None, **kwargs
        )
