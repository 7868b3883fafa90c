"""Train tokenizers on a corpus, or on a seeded sample of it, for `train-tokenizer` and the audit.

`train_on_corpus` streams the corpus's documents (or those of a `--sample`, chosen by
`maskprep.corpus.sample`) into `maskprep.tokenizer.train.train_tokenizer`, checks that the
vocabulary reached its size and saves it. `train_on_sample` does the same and also returns
what the sample held, so the command line can say plainly that a sample was used and how big;
`sampled_tasks` gives the audit's worker tasks for a sample.

It does not audit (see `measure`) and refuses encoded directories: they hold ids, not text.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator

from ..corpus.reader import (CorpusOptions, ReadStats, iter_corpus, iter_documents,
                             resolve_inputs, task_weights)
from ..corpus.sample import SampleDraw, SampleSpec, draw_sample
from ..encoded.source import Source, SourceTask, open_source
from ..errors import MaskprepError
from ..progress import Progress
from ..tokenizer.encoding import TokenizerInfo, save_tokenizer
from ..tokenizer.train import TrainConfig, check_trained_size, train_tokenizer
from ..wording import name_files

__all__ = ["Trained", "train_on_corpus", "train_on_sample", "sampled_tasks"]


@dataclass
class Trained:
    """A tokenizer trained on a corpus, and the summary of the sample it saw (None: all of it)."""

    info: TokenizerInfo
    sample: dict[str, Any] | None = None


def train_on_corpus(corpus: list[str], *, model: str, vocab_size: int, lowercase: bool,
                    corpus_options: CorpusOptions = CorpusOptions(), output: Path | None = None,
                    quiet: bool = False, name: str | None = None,
                    option: str = "--vocab-size", sample: SampleSpec | None = None
                    ) -> TokenizerInfo:
    """Train a tokenizer on a corpus and optionally save it; `option` names the size in errors.

    >>> train_on_corpus(["sample_corpus"], model="wordpiece", vocab_size=8000,
    ...                 lowercase=True)  # doctest: +SKIP
    """
    return train_on_sample(corpus, model=model, vocab_size=vocab_size, lowercase=lowercase,
                           corpus_options=corpus_options, output=output, quiet=quiet,
                           name=name, option=option, sample=sample).info


def train_on_sample(corpus: list[str], *, model: str, vocab_size: int, lowercase: bool,
                    corpus_options: CorpusOptions = CorpusOptions(), output: Path | None = None,
                    quiet: bool = False, name: str | None = None,
                    option: str = "--vocab-size", sample: SampleSpec | None = None) -> Trained:
    """`train_on_corpus`, with the summary of the sample used (`corpus.sample.SampleDraw`).

    >>> train_on_sample(["data/"], model="bpe", vocab_size=8000, lowercase=False,
    ...                 sample=SampleSpec.parse("10%")).sample["documents"]  # doctest: +SKIP
    """
    config = TrainConfig(model=model, vocab_size=vocab_size, lowercase=lowercase)
    if open_source(corpus, corpus_options).encoded:
        raise MaskprepError(
            f"{name_files(corpus)}: an encoded directory holds token ids, not text; train "
            "tokenizers on the raw corpus files"
        )
    files = resolve_inputs(corpus)
    if output is not None:
        from .._paths import check_apart

        check_apart(output, [*corpus, *files])
    draw = None if sample is None else draw_sample(files, corpus_options, sample)
    stats = ReadStats()

    def texts() -> Iterator[str]:
        if draw is None:
            yield from iter_corpus([str(f) for f in files], corpus_options, stats)
        else:
            for task in draw.tasks:
                yield from iter_documents(task, corpus_options, stats)

    info: TokenizerInfo | None = None
    with Progress(f"train {model}-{vocab_size}", unit="documents", quiet=quiet) as progress:
        def docs() -> Any:
            for text in texts():
                progress.advance(1)
                yield text

        try:
            info = train_tokenizer(docs(), config, name=name, check_size=False, option=option)
        except MaskprepError:
            if stats.documents:
                raise
    if draw is not None:
        draw.check(stats)
    if stats.documents == 0 or info is None:
        raise MaskprepError(f"{name_files(corpus)}: corpus is empty (no non-empty documents)")
    check_trained_size(info, config, option)
    if output is not None:
        save_tokenizer(info, output)
    return Trained(info, None if draw is None else draw.summary(stats))


def sampled_tasks(source: Source, draw: SampleDraw, sample: SampleSpec) -> tuple[SourceTask, ...]:
    """A stage's tasks for a sample of a raw corpus (an encoded directory cannot be sampled)."""
    import dataclasses
    import os

    if source.encoded:
        raise MaskprepError(
            f"{sample.option}: {source.describe()} is an encoded directory; sample the raw "
            "corpus files instead"
        )
    picked = list(draw.tasks)
    return tuple(
        SourceTask(t.index, t.describe(), w,
                   raw=dataclasses.replace(t, path=os.path.abspath(t.path)))
        for t, w in zip(picked, task_weights(picked))
    )
