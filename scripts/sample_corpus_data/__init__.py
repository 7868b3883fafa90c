"""Data of the sample corpus generator (`scripts/make_sample_corpus.py`), no logic.

- `terms`: the planted multi-word terms and their per-document rates;
- `words`: ranked word pools, name lists and bases for derived word forms;
- `templates`: clause and sentence templates, openers, closers, log entries and
  the small phrase lists they draw from;
- ``README.template.md``: the page written to ``sample_corpus/README.md``
  (``str.format`` fields filled with figures counted in the written files).
"""
