"""Run the whole preparation from one pipeline file, skipping stages that are up to date.

`run_pipeline` reads a checked `RunConfig` (see `maskprep.pipeline.config`) and runs,
in data-flow order, the stages whose tables are present: tokenizer (train one,
or load the given file), audit, count, units, mask (one stage per strategy)
and compare, each writing into its own directory of the run's output
directory::

    OUT/tokenizer/tokenizer.json   OUT/encoded/  OUT/audit/   OUT/counts/   OUT/units/units.parquet
    OUT/mask/<strategy>/           OUT/compare/  OUT/pipeline.json

The corpus is tokenized once per run, by the ``encode`` stage (`maskprep.encoded`),
and count, mask, compare and the audit of the run's tokenizer read ``OUT/encoded/``
(their outputs are those of the raw corpus, byte for byte), so changing a masking
option reruns only the masks.

Each stage directory holds ``.stage.json`` (`maskprep.pipeline.stages`): a
fingerprint over the stage's options, the fingerprints of its inputs (corpus
contents, tokenizer hash, upstream stages) and the code version (package version and a hash of the
package's source files), plus the files it wrote. A stage whose fingerprint is
unchanged and whose files are all present is skipped; otherwise its directory
is replaced. A changed option therefore reruns that stage and the stages that
use its output or inherit the option (e.g. [mask] rate also reaches compare),
nothing else. ``force=True`` reruns everything. pipeline.json lists every stage
with its time: this run's for a stage that ran, and for a skipped one the time
it took when it last ran, marked ``"seconds_from": "an earlier run (skipped now)"``.

`run_demo` runs ``demo.toml`` of the bundled sample corpus (`sample_corpus_dir`).
This module computes nothing itself; it calls each stage's library function.
"""

from __future__ import annotations

import dataclasses
import importlib.resources
from pathlib import Path
from typing import Any

from ..errors import MaskprepError
from .._files import atomic_write_json as write_json
from .._files import read_json
from .config import RunConfig, load_run_config
from .stages import RUN_FILE, STAGE_FILE, RunResult, StageResult, StageRunner, code_version, \
    files_in, format_run_summary, stage_fingerprint

__all__ = [
    "StageResult",
    "RunResult",
    "run_pipeline",
    "run_demo",
    "sample_corpus_dir",
    "code_version",
    "stage_fingerprint",
    "format_run_summary",
    "STAGE_FILE",
    "RUN_FILE",
]


def _prepare_output(out: Path, config: RunConfig) -> None:
    if out.exists() and not out.is_dir():
        raise MaskprepError(f"-o {out}: exists and is not a directory")
    if (
        out.is_dir()
        and any(p.name != ".maskprep-lock" for p in out.iterdir())
        and not (out / RUN_FILE).is_file()
    ):
        raise MaskprepError(
            f"-o {out}: directory is not empty and holds no {RUN_FILE}, so it is not the output "
            "of maskprep run; choose a new or empty directory (stages replace their own "
            "subdirectories)"
        )
    out.mkdir(parents=True, exist_ok=True)
    if not (out / RUN_FILE).is_file():
        write_json(
            out / RUN_FILE, {"format": "maskprep-run", "config": str(config.path), "stages": []}
        )


def run_pipeline(
    config: RunConfig | str | Path,
    *,
    output: str | Path | None = None,
    force: bool = False,
    executor: Any = None,
    quiet: bool = False,
) -> RunResult:
    """Run every stage of a pipeline file that is not up to date; return what ran and was skipped.

    >>> result = run_pipeline("sample_corpus/demo.toml", output="demo-out")  # doctest: +SKIP
    >>> [s.status for s in result.stages]  # doctest: +SKIP
    ['ran', 'ran', 'ran', 'ran', 'ran', 'ran', 'ran', 'ran', 'ran']
    """
    from ..corpus.reader import resolve_inputs
    from ..execute import Executor

    cfg = config if isinstance(config, RunConfig) else load_run_config(config, output=output)
    out = Path(output) if output is not None else cfg.output
    if out is None:
        raise MaskprepError(
            f'{cfg.path}: no output directory: add output = "DIR" to the file or pass -o DIR'
        )
    executor = executor or Executor()
    from .._paths import check_apart

    tokenizer_file = getattr(cfg, "tokenizer_path", None)
    check_apart(out, [*cfg.corpus, *resolve_inputs(list(cfg.corpus))], others=[tokenizer_file],
                option="-o" if output is not None else f"{cfg.path}: output =")
    from .._resume import LOCK_STATE, lock_dir

    made, fresh = not out.exists(), not (out / RUN_FILE).is_file()
    with lock_dir(out, LOCK_STATE):  # one run at a time in OUT; each stage locks its own folder too
        _prepare_output(out, cfg)
        runner = StageRunner(out, force=force, quiet=quiet)
        try:
            return _run_stages(cfg, runner, executor=executor, quiet=quiet)
        except BaseException as exc:
            if not isinstance(exc, KeyboardInterrupt):  # Ctrl-C: exit now, the stage reruns
                runner.settle()
            if (
                fresh
            ):  # a first run that failed leaves nothing behind: no pipeline.json, no empty folders
                _undo_first_run(out, made)
            raise


def _undo_first_run(out: Path, made: bool) -> None:
    (out / RUN_FILE).unlink(missing_ok=True)
    for d in sorted((p for p in out.rglob("*") if p.is_dir()), key=lambda p: -len(p.parts)):
        try:
            d.rmdir()  # only empty folders; whatever a stage left for --resume stays
        except OSError:
            pass
    if made:
        try:
            out.rmdir()
        except OSError:
            pass


def _run_stages(cfg: RunConfig, runner: StageRunner, *, executor: Any, quiet: bool) -> RunResult:
    """The stages of `run_pipeline` in order, each skipped when up to date.

    Units are computed in the driver alone, so with local worker processes they run in the
    background, beside the masks that do not need them (their outputs are the same either way).
    """
    from ..corpus.reader import corpus_fingerprint, resolve_inputs
    from ..tokenizer.encoding import load_tokenizer

    out = runner.out
    corpus = list(cfg.corpus)
    copts = cfg.corpus_options
    corpus_fp = corpus_fingerprint(resolve_inputs(corpus), copts)
    read_opts = {
        "doc_sep": copts.doc_sep,
        "text_field": copts.text_field,
        "text_column": copts.text_column,
        "strict": copts.strict,
    }
    base_inputs = {"corpus": corpus_fp, "reading": read_opts}
    from ..units.words import resolve_words

    words = resolve_words(cfg.words, corpus, corpus_options=copts, quiet=quiet)

    # tokenizer
    if cfg.train is not None:
        from ..audit.measure import train_on_corpus

        train = cfg.train

        def run_tok(d: Path) -> list[str]:
            train_on_corpus(
                corpus,
                model=train.model,
                vocab_size=train.vocab_size,
                lowercase=train.lowercase,
                corpus_options=copts,
                output=d / "tokenizer.json",
                quiet=quiet,
                name=f"{train.model}-{train.vocab_size}",
                option=f"{cfg.path}: [tokenizer] vocab_size",
                sample=cfg.train_sample,
            )
            return ["tokenizer.json"]

        tok_options = train if cfg.train_sample is None else {"train": train,
                                                               "sample": cfg.train_sample}
        runner.stage("tokenizer", "tokenizer", tok_options, base_inputs, run_tok)
        tok_path = out / "tokenizer" / "tokenizer.json"
    else:
        assert cfg.tokenizer_path is not None
        tok_path = cfg.tokenizer_path
    info = load_tokenizer(tok_path)
    inputs = {**base_inputs, "tokenizer": info.hash, "words": words.describe()}
    if any(x is not None for x in (cfg.audit, cfg.count, cfg.mask, cfg.compare)):
        # tokenize once: every later stage reads the encoded directory (same outputs as from
        # the raw corpus)
        from ..encoded.write import encode_corpus

        def run_enc(d: Path) -> list[str]:
            encode_corpus(corpus, tokenizer=info, output=d, corpus_options=copts, executor=executor,
                          overwrite=True, words=words)
            return files_in(d)

        enc_fp = runner.stage(
            "encode", "encoded", {"words": words.describe()}, inputs, run_enc
        ).fingerprint
        inputs = {**inputs, "encoded": enc_fp}
        raw, corpus = corpus, [str(out / "encoded")]
    else:
        raw = corpus

    if cfg.audit is not None:
        from ..audit.measure import AuditConfig, run_audit
        from ..shards.write import file_sha256

        a = cfg.audit
        given = ((str(tok_path),) if a["include_tokenizer"] else ()) + tuple(a["tokenizers"])
        audit_cfg = AuditConfig(
            tokenizers=given,
            vocab_sizes=tuple(a["vocab_sizes"]),
            model=a["model"],
            lowercase=a["lowercase"],
            top_words=a["top_words"],
        )
        extra = {"audited": [file_sha256(p) for p in a["tokenizers"]]}

        # only the run's own tokenizer can read the encoded directory; others tokenize the raw text
        own = not audit_cfg.vocab_sizes and all(Path(p) == Path(tok_path) for p in given)
        own = own and a["sample"] is None  # a sample is drawn from the raw text

        def run_aud(d: Path) -> list[str]:
            run_audit(
                corpus if own else raw,
                audit_cfg,
                output=d,
                corpus_options=copts,
                quiet=quiet,
                executor=executor,
                size_option="[audit] vocab_sizes",
                words=words,
                sample=a["sample"],
            )
            return files_in(d)

        runner.stage(
            "audit",
            "audit",
            {**a, "tokenizers": len(a["tokenizers"])},
            {**inputs, **extra},
            run_aud,
        )

    counts_dir, units_path, units_fp = out / "counts", None, None
    if cfg.count is not None:
        count_cfg = dataclasses.replace(cfg.count, words=words)

        def run_cnt(d: Path) -> list[str]:
            _count(corpus, tok_path, d, count_cfg, copts, executor, quiet)
            return files_in(d)

        counts_fp = runner.stage("count", "counts", count_cfg, inputs, run_cnt).fingerprint
        if cfg.units is not None:
            u = cfg.units
            # beside the masks of other strategies, when those run on worker processes
            background = (
                not executor.dask
                and executor.workers > 1
                and cfg.mask is not None
                and any(s != "pmi" for s in cfg.mask["strategies"])
            )

            def run_units(d: Path) -> list[str]:
                from ..units.files import write_units
                from ..units.select import build_units

                vocab = build_units(
                    counts_dir,
                    measure=u["measure"],
                    top=u["top"],
                    min_count=u["min_count"],
                    per_length=u["per_length"],
                    max_n=u["max_n"],
                    edge_words=u["edge_words"],
                    fragment_share=u["fragment_share"],
                    quiet=quiet or background,  # no progress line across the masks' lines
                )
                write_units(vocab, d / "units.parquet")
                return ["units.parquet", "units.tsv"]

            units_fp = runner.stage(
                "units", "units", u, {"counts": counts_fp}, run_units, background=background
            ).fingerprint
            units_path = out / "units" / "units.parquet"

    if cfg.mask is not None:
        from ..masking.sampler import MaskingConfig
        from ..shards.write import write_shards

        m = cfg.mask
        for strategy in m["strategies"]:
            masking = MaskingConfig(
                **{
                    **{
                        k: getattr(m["masking"], k)
                        for k in ("rate", "mix", "mix_per", "span_p", "span_max")
                    },
                    "strategy": strategy,
                }
            )
            pmi = strategy == "pmi"
            if pmi:
                runner.wait("units")

            def run_mask(d: Path, masking: MaskingConfig = masking, pmi: bool = pmi) -> list[str]:
                write_shards(
                    corpus,
                    tokenizer=info,
                    output=d,
                    masking=masking,
                    packing=m["packing"],
                    shards=m["shards"],
                    units=units_path if pmi else None,
                    corpus_options=copts,
                    executor=executor,
                    overwrite=True,
                    words=words,
                )
                return files_in(d)

            runner.stage(f"mask.{strategy}", f"mask/{strategy}",
                         {"masking": masking, "packing": m["packing"], "shards": m["shards"]},
                         {**inputs, "units": units_fp if pmi else None}, run_mask)

    compare_doc = None
    if cfg.compare is not None:
        from ..compare.run import compare_strategies

        cc = cfg.compare
        runner.wait("units")

        def run_cmp(d: Path) -> list[str]:
            compare_strategies(
                corpus,
                tokenizer=info,
                output=d,
                config=cc,
                units=units_path,
                corpus_options=copts,
                executor=executor,
                words=words,
            )
            return ["compare.json", "compare.html"]

        r = runner.stage("compare", "compare", cc, {**inputs, "units": units_fp}, run_cmp)
        compare_doc = read_json(r.output / "compare.json", what="comparison")

    runner.finish()
    result = RunResult(
        output=out,
        config=cfg.path,
        stages=tuple(runner.results),
        tokenizer=tok_path,
        compare=compare_doc,
    )
    write_json(out / RUN_FILE, {
        "format": "maskprep-run", "config": str(cfg.path), "code": code_version(),
        "stages": [{"name": s.name, "status": s.status, "output": str(s.output.relative_to(out)),
                    "fingerprint": s.fingerprint, **s.timing()} for s in result.stages]})
    return result


def _count(
    corpus: list[str],
    tokenizer: Path,
    output: Path,
    config: Any,
    corpus_options: Any,
    executor: Any,
    quiet: bool,
) -> None:
    from ..count.driver import count_ngrams

    count_ngrams(
        corpus,
        tokenizer=tokenizer,
        output=output,
        config=config,
        corpus_options=corpus_options,
        executor=executor,
        overwrite=True,
        quiet=quiet,
    )


def sample_corpus_dir() -> Path:
    """The bundled sample corpus: the installed package data, else a checkout's ``sample_corpus/``.

    ``pip install .`` (or a wheel) installs it as ``maskprep/sample_corpus/``; an
    editable install or a checkout on ``PYTHONPATH`` has it at ``<repo>/sample_corpus``.

    >>> (sample_corpus_dir() / "demo.toml").is_file()  # doctest: +SKIP
    True
    """
    packaged = importlib.resources.files("maskprep") / "sample_corpus"
    checkout = Path(__file__).resolve().parents[2] / "sample_corpus"  # <repo>/maskprep/pipeline/..
    places: list[Path] = [packaged] if isinstance(packaged, Path) else []  # not so inside a zip
    places.append(checkout)
    for d in places:
        if (d / "demo.toml").is_file():
            return d
    raise MaskprepError(
        "the sample corpus (with demo.toml) is not installed: looked in "
        + " and ".join(str(d) for d in places)
        + "; reinstall maskprep (pip install .) or run from a clone of the repository"
    )


def run_demo(*, output: str | Path = "maskprep-demo", force: bool = False, executor: Any = None,
             quiet: bool = False) -> RunResult:
    """The whole pipeline on sample_corpus/ (``demo.toml``) into `output`.

    >>> run_demo(output="maskprep-demo").stage("compare").output  # doctest: +SKIP
    PosixPath('maskprep-demo/compare')
    """
    return run_pipeline(
        sample_corpus_dir() / "demo.toml",
        output=output,
        force=force,
        executor=executor,
        quiet=quiet,
    )
