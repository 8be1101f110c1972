"""An automated check of an HTML page's structure, with the standard library's parser.

The rules, each from the Web Content Accessibility Guidelines 2.1 and their techniques
(from memory): a ``lang`` on ``html`` (success criterion 3.1.1, technique H57); a non-empty
``title`` (2.4.2, H25); headings in order, starting at one ``h1`` and never skipping a level
on the way down (1.3.1 and 2.4.6, G141); a text alternative on every image (1.1.1, H37);
data tables with header cells that say what they head (1.3.1, H63: ``th`` with ``scope``).
Two more rules are the page's own contract: nothing is fetched (every ``src`` and ``href``
is a ``data:`` URI or a ``#`` fragment; no ``link`` element) and no script.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from html.parser import HTMLParser

__all__ = ["PageFacts", "page_problems", "read_page"]


@dataclass
class PageFacts:
    """What the parser saw."""

    lang: str | None = None
    title: str = ""
    headings: list[tuple[int, str]] = field(default_factory=list)
    images: list[dict[str, str | None]] = field(default_factory=list)
    header_cells: list[dict[str, str | None]] = field(default_factory=list)
    tables: int = 0
    tables_with_headers: int = 0
    links: list[str] = field(default_factory=list)
    scripts: int = 0
    link_elements: int = 0
    marks: list[str] = field(default_factory=list)
    text: str = ""


class _Reader(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.facts = PageFacts()
        self._stack: list[tuple[str, dict[str, str | None]]] = []
        self._heading: list[str] | None = None
        self._mark: list[str] | None = None
        self._in_title = False
        self._table_th: list[int] = []
        self._text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        f = self.facts
        if tag == "html":
            f.lang = a.get("lang")
        elif tag == "title":
            self._in_title = True
        elif tag in ("h1", "h2", "h3", "h4", "h5", "h6"):
            self._heading = []
        elif tag == "img":
            f.images.append(a)
        elif tag == "table":
            f.tables += 1
            self._table_th.append(0)
        elif tag == "th":
            f.header_cells.append(a)
            if self._table_th:
                self._table_th[-1] += 1
        elif tag == "script":
            f.scripts += 1
        elif tag == "link":
            f.link_elements += 1
        elif tag == "span" and "mark" in (a.get("class") or "").split():
            self._mark = []
        for key in ("src", "href"):
            if a.get(key) is not None:
                f.links.append(str(a[key]))
        if tag not in ("img", "meta", "br", "link"):
            self._stack.append((tag, a))

    def handle_endtag(self, tag: str) -> None:
        f = self.facts
        if tag == "title":
            self._in_title = False
        elif tag in ("h1", "h2", "h3", "h4", "h5", "h6") and self._heading is not None:
            f.headings.append((int(tag[1]), "".join(self._heading).strip()))
            self._heading = None
        elif tag == "span" and self._mark is not None:
            f.marks.append("".join(self._mark))
            self._mark = None
        elif tag == "table" and self._table_th:
            f.tables_with_headers += self._table_th.pop() > 0
        if self._stack and self._stack[-1][0] == tag:
            self._stack.pop()

    def handle_data(self, data: str) -> None:
        if self._in_title:
            self.facts.title += data
        if self._heading is not None:
            self._heading.append(data)
        if self._mark is not None:
            self._mark.append(data)
        self._text.append(data)

    def close(self) -> None:
        super().close()
        self.facts.text = "".join(self._text)


def read_page(document: str) -> PageFacts:
    """Parse ``document`` and return what it holds."""
    reader = _Reader()
    reader.feed(document)
    reader.close()
    return reader.facts


def page_problems(document: str) -> list[str]:
    """Every breach of the rules above (an empty list for a page that keeps them)."""
    f = read_page(document)
    out = []
    if not f.lang:
        out.append("html has no lang attribute")
    if not f.title.strip():
        out.append("no title")
    levels = [level for level, _ in f.headings]
    if not levels or levels[0] != 1 or levels.count(1) != 1:
        out.append(f"expected one h1, first; got levels {levels[:5]}...")
    for (before, _), (level, words) in zip(f.headings, f.headings[1:], strict=False):
        if level > before + 1:
            out.append(f"heading h{level} {words!r} skips a level after h{before}")
    for k, img in enumerate(f.images):
        if not (img.get("alt") or "").strip():
            out.append(f"image {k} has no alt text")
    for cell in f.header_cells:
        if cell.get("scope") not in ("col", "row"):
            out.append(f"a th without scope col or row: {cell}")
    if f.tables != f.tables_with_headers:
        out.append(f"{f.tables - f.tables_with_headers} table(s) without header cells")
    for link in f.links:
        if not (link.startswith("data:") or link.startswith("#")):
            out.append(f"a reference outside the page: {link[:80]}")
    if f.scripts or f.link_elements:
        out.append(f"{f.scripts} script and {f.link_elements} link element(s)")
    return out
