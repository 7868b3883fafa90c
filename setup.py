"""Packaging that pyproject.toml cannot say: the sample corpus ships inside the package.

The sample corpus is kept once in git, at the top level (``sample_corpus/``,
written by ``scripts/make_sample_corpus.py``, with the ``*.toml`` worked
examples). Here it is mapped onto the data-only package ``maskprep.sample_corpus``,
so a wheel or ``pip install .`` installs it as ``maskprep/sample_corpus/`` and
``maskprep demo`` runs from any directory; ``maskprep.pipeline.runner.sample_corpus_dir``
looks there first and then in the checkout. Everything else is in pyproject.toml.
"""

from setuptools import find_packages, setup

SAMPLE = "maskprep.sample_corpus"

setup(
    packages=[*find_packages(include=["maskprep", "maskprep.*"]), SAMPLE],
    package_dir={SAMPLE: "sample_corpus"},
    package_data={"maskprep": ["py.typed"], SAMPLE: ["*.gz", "*.toml", "*.tsv", "*.md"]},
)
