"""The report page (massarc.summaries.report): its structure passes the accessibility rules,
every datum is escaped, failures come first with their status as a word, a collection gets
a table of runs and a section per run, the summaries come stored, computed in memory (the
run untouched) or absent with the command that makes them, and the page works in a real
browser."""

from __future__ import annotations

import json
import re
import shutil
import sys
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest
from _browser import Browser, chromium_path
from _page_audit import page_problems, read_page

from massarc.archive import open_run
from massarc.summaries import summarize, summarize_in_memory
from massarc.summaries.api import SummaryOutcome
from massarc.summaries.figures import FIGURES
from massarc.summaries.report import PAGE_ORDER, STATUS_COLOURS, PageRun, report_page
from massarc.validators import AuditSettings, audit, resolve_settings

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
NAMES = ("depot-ring-unsettled", "depot-ring", "dune-strip")
SMALL = {"probes": 8, "resamples": 99}
STATUSES = {"pass", "warn", "fail", "skip", "error"}


def _tree(path: Path) -> dict[str, tuple[int, int]]:
    return {p.relative_to(path).as_posix(): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in [path, *path.rglob("*")]}  # fmt: skip


def _pages(paths: list[Path], settings: AuditSettings | None = None) -> tuple[list[PageRun], str]:
    """The page of ``paths``: stored summaries where a run has them, else none."""
    settings = settings or AuditSettings()
    report = audit(paths, options=settings.options)
    pages = []
    for path, checked in zip(paths, report.runs, strict=True):
        run = open_run(path)
        stored = run.summaries
        outcome = SummaryOutcome(run, stored, False, 0.0) if stored is not None else None
        pages.append(PageRun(run, checked, outcome, "stored" if outcome else "absent"))
    return pages, report_page(pages, report, settings, command="massarc report (test)")


@pytest.fixture(scope="module")
def sweep(tmp_path_factory) -> dict:
    """The three samples: the unsettled ring without summaries, the settled ring with
    summaries computed in memory, the dune strip with stored ones."""
    folder = tmp_path_factory.mktemp("page")
    paths = [Path(shutil.copytree(SAMPLES / f"{n}.zarr", folder / f"{n}.zarr")) for n in NAMES]
    summarize(paths[2], SMALL)
    trees = {p.name: _tree(p) for p in paths}
    report = audit(paths)
    runs = [open_run(p) for p in paths]
    held = summarize_in_memory(runs[1], SMALL)
    stored = SummaryOutcome(runs[2], runs[2].summaries, False, 0.0)
    pages = [
        PageRun(runs[0], report.runs[0]),
        PageRun(held.run, report.runs[1], held, "computed"),
        PageRun(runs[2], report.runs[2], stored, "stored"),
    ]
    settings = resolve_settings(cwd="/")
    page = report_page(pages, report, settings, command="massarc report samples -o r.html")
    out = folder / "report.html"
    out.write_text(page, encoding="utf-8")
    return {"paths": paths, "trees": trees, "report": report, "page": page, "file": out,
            "held": held}  # fmt: skip


def _sections(page: str) -> list[str]:
    return re.findall(r'<section id="run-\d+" class="run">(.*?)</section>', page, re.S)


def test_the_page_keeps_the_accessibility_rules(sweep) -> None:
    assert page_problems(sweep["page"]) == []
    facts = read_page(sweep["page"])
    assert facts.lang == "en" and "3 runs" in facts.title
    # the parser sees what the rules need: one image per figure of the two summarised runs
    assert len(facts.images) == 2 * len(FIGURES)


def test_the_accessibility_check_finds_breaches() -> None:
    # each rule can fail: a page breaking all of them (WCAG 2.1 techniques, see _page_audit)
    bad = ('<html><head></head><body><h2>x</h2><h4>y</h4><img src="a.png">'
           '<table><tr><th>a</th></tr></table><table><tr><td>b</td></tr></table>'
           '<script>1</script></body></html>')  # fmt: skip
    problems = "\n".join(page_problems(bad))
    for words in ("no lang", "no title", "expected one h1", "h4 'y' skips a level",
                  "image 0 has no alt", "without scope", "1 table(s) without header",
                  "outside the page: a.png", "1 script"):  # fmt: skip
        assert words in problems


def test_failed_checks_come_first_marked_by_words(sweep) -> None:
    report = sweep["report"]
    for section, run in zip(_sections(sweep["page"]), report.runs, strict=True):
        table = re.search(r'<table class="checks">(.*?)</table>', section, re.S).group(1)
        rows = re.findall(r'<tr class="st-(\w+)"><th scope="row"><code>([^<]+)</code>', table)
        statuses = [s for s, _ in rows]
        # the page's order: every status before the next one of PAGE_ORDER
        assert statuses == sorted(statuses, key=PAGE_ORDER.index)
        assert sorted(rows) == sorted((c.status, c.id) for c in run.checks)
        marks = re.findall(r'<span class="mark mark-(\w+)">(\w+)</span>', table)
        assert [w for _, w in marks] == statuses and all(a == b for a, b in marks)
    first = re.search(r'<tr class="st-(\w+)"><th scope="row"><code>([^<]+)', _sections(
        sweep["page"])[0]).groups()  # fmt: skip
    # the unsettled ring claims a steady state it never reached (samples/README.md)
    assert first == ("fail", "steady-state")
    assert set(read_page(sweep["page"]).marks) <= STATUSES


def test_a_collection_gets_a_table_of_runs_and_a_section_per_run(sweep) -> None:
    page, report = sweep["page"], sweep["report"]
    glance = re.search(r'<table class="glance">(.*?)</table>', page, re.S).group(1)
    ids = [c.id for c in report.runs[0].checks]
    head = re.findall(r'<th scope="col">([^<]*)</th>', glance)
    assert head == ["run", "overall", *ids]
    rows = re.findall(r"<tr><th scope=\"row\"><a href=\"#(run-\d+)\">([^<]+)</a></th>(.*?)</tr>",
                      glance)  # fmt: skip
    assert [name for _, name, _ in rows] == [r.path for r in report.runs]
    for (anchor, _, cells), run in zip(rows, report.runs, strict=True):
        shown = re.findall(r"mark-(\w+)", cells)
        assert shown == [run.status, *(c.status for c in run.checks)]
        assert f'<section id="{anchor}" class="run"><h2>Run {run.path}</h2>' in page
    assert len(_sections(page)) == len(report.runs)


def test_hostile_metadata_is_escaped(tmp_path) -> None:
    folder = tmp_path / "a<b>c"
    folder.mkdir()
    run = Path(shutil.copytree(SAMPLES / "dune-strip.zarr", folder / "x.zarr"))
    header = json.loads((run / "zarr.json").read_text())
    meta = header["attributes"]["massarc"]["metadata"]
    meta["simulator"]["name"] = "<script>alert('name')</script>"
    meta["run"]["time_units"] = '"><img src=x onerror=alert(1)>'
    meta["extra"] = {"</td></tr><h1>": "<b>bold</b> & <!-- comment -->"}
    (run / "zarr.json").write_text(json.dumps(header))
    _, page = _pages([run])
    facts = read_page(page)
    # html.parser (the standard library's) is the reader: no element came from the data
    assert facts.scripts == 0 and page_problems(page) == []
    assert not any(img.get("onerror") for img in facts.images)
    assert [level for level, _ in facts.headings].count(1) == 1
    for hostile in ("<script>alert('name')</script>", '"><img src=x onerror=alert(1)>',
                    "</td></tr><h1>", "<b>bold</b> & <!-- comment -->", "a<b>c"):  # fmt: skip
        assert hostile in facts.text  # shown as text, whole


def test_summaries_stored_computed_or_absent(sweep) -> None:
    absent, held, stored = _sections(sweep["page"])
    assert "This run has no stored summaries" in absent
    assert f"<code>massarc summarize {sweep['paths'][0]}</code>" in absent
    assert "<img" not in absent
    assert "held in memory; the run was not written" in held
    assert "Stored in the run by massarc" in stored
    for section in (held, stored):
        assert section.count("<figure>") == len(FIGURES)
        assert all(f"<strong>{name}</strong>" in section for name in FIGURES)


def test_computing_in_memory_writes_nothing_and_equals_storing(sweep, tmp_path) -> None:
    assert {p.name: _tree(p) for p in sweep["paths"]} == sweep["trees"]
    copy = Path(shutil.copytree(sweep["paths"][1], tmp_path / "ring.zarr"))
    [written] = summarize(copy, SMALL)
    held = sweep["held"].summaries
    assert sorted(held) == sorted(written.summaries)
    for name in held:
        # equal up to the order of floating-point sums (the pass merges chunks as they come)
        np.testing.assert_allclose(held.array(name), written.summaries.array(name), rtol=1e-12)
    assert held.provenance["window"] == written.summaries.provenance["window"]


def test_without_matplotlib_a_line_says_what_to_install(sweep, monkeypatch) -> None:
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib now fails
    _, page = _pages([sweep["paths"][2]])
    assert "Figures need the plot extra (matplotlib): pip install" in page
    assert "<img" not in page and page_problems(page) == []


def _luminance(colour: str) -> float:
    """Relative luminance, WCAG 2.1 definition (from memory)."""
    channels = [int(colour[k : k + 2], 16) / 255 for k in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def test_status_words_are_readable_on_their_tints() -> None:
    ink = _luminance("#1a1a1a")
    for status, (_, tint, _pattern) in STATUS_COLOURS.items():
        ratio = (_luminance(tint) + 0.05) / (ink + 0.05)
        assert ratio >= 7.0, status  # WCAG 2.1 success criterion 1.4.6 (AAA): 7:1
    patterns = [pattern for _, _, pattern in STATUS_COLOURS.values()]
    assert len(set(patterns)) >= 4  # kinds of border tell the statuses apart without colour


@pytest.mark.skipif(
    chromium_path() is None,
    # the machine, not the extras: Debian's chromium is installed by .ci/run, and cannot be
    # where apt has no network
    reason="chromium is not installed (apt-get install chromium; .ci/run does it)",
)
def test_the_page_in_a_real_browser(sweep, tmp_path) -> None:
    url = sweep["file"].resolve().as_uri()
    with Browser() as browser:
        browser.open(url, width=1280, height=1000)
        widths = browser.evaluate(
            "Array.from(document.images).map(i => i.complete ? i.naturalWidth : -1)"
        )
        assert len(widths) == 2 * len(FIGURES) and min(widths) > 0
        shot = browser.screenshot(tmp_path / "wide.png")
        pixels = matplotlib.image.imread(shot)
        assert pixels.shape[:2] == (1000, 1280)
        assert pixels[..., :3].var() > 1e-3  # not blank: a one-colour picture has none
        assert len(np.unique(pixels[..., :3].reshape(-1, 3), axis=0)) > 50
        # a narrow screen: the page never scrolls sideways (wide tables scroll in their box)
        browser.open(url, width=390, height=800)
        assert browser.evaluate("document.documentElement.scrollWidth") <= 390
        # paper (A4 at 96 dpi): nothing wider than the page
        browser.open(url, width=794, height=1123, media="print")
        assert browser.evaluate("document.documentElement.scrollWidth") <= 794
        assert browser.errors == []


@pytest.mark.skipif(
    chromium_path() is None,
    # the machine, not the extras, as above
    reason="chromium is not installed (apt-get install chromium; .ci/run does it)",
)
def test_the_browser_checks_can_fail(tmp_path) -> None:
    broken = tmp_path / "broken.html"
    broken.write_text('<!DOCTYPE html><html lang="en"><title>t</title><body>'
                      '<img src="data:image/png;base64,AAAA" alt="not a picture">'
                      '<script>console.error("planted")</script></body></html>')  # fmt: skip
    with Browser() as browser:
        browser.open(broken.resolve().as_uri(), width=400, height=300)
        assert browser.evaluate("Array.from(document.images).map(i => i.naturalWidth)") == [0]
        assert "planted" in browser.errors
        empty = tmp_path / "empty.html"
        empty.write_text('<!DOCTYPE html><html lang="en"><title>t</title><body></body></html>')
        browser.open(empty.resolve().as_uri(), width=400, height=300)
        pixels = matplotlib.image.imread(browser.screenshot(tmp_path / "blank.png"))
        assert pixels[..., :3].var() < 1e-3  # a page showing nothing is blank
