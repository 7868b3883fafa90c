"""The whole preparation from one pipeline file (`maskprep run`), and the demo.

Checks the TOML file, runs the stages in order with fingerprints, skips the ones up to date.
"""

from .config import RunConfig, load_run_config
from .runner import run_demo, run_pipeline, sample_corpus_dir

__all__ = ["RunConfig", "load_run_config", "run_demo", "run_pipeline", "sample_corpus_dir"]
