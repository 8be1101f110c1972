"""massarc.summaries.report: the report page, one self-contained HTML file a referee opens
(``massarc report RUN -o report.html``).

It presents what the audit found (an :class:`~massarc.validators.AuditReport`, from the
validators' public API) and the run's summaries with their figures
(:mod:`massarc.summaries.figures`): :func:`report_page` returns the document for a list of
:class:`PageRun`. The page holds the metadata, every check (failures first, each status as
a word as well as a colour), the summaries and figures (inline PNG), and the provenance;
it needs no network and no script, and reads on a narrow screen and on paper.

>>> from massarc.archive import open_run
>>> from massarc.validators import AuditSettings, audit
>>> report = audit(["samples/dune-strip.zarr"], checks=["schema", "conservation"])
>>> one = PageRun(open_run("samples/dune-strip.zarr"), report.runs[0])
>>> page = report_page([one], report, AuditSettings(), command="(an example)")
>>> page.startswith("<!DOCTYPE html>"), "massarc summarize samples/dune-strip.zarr" in page
(True, True)

Layout: :mod:`.page` (the document), :mod:`.sections` (metadata, checks, summaries of one
run), :mod:`.images` (figures as inline images), :mod:`.markup` (escaping HTML builders),
:mod:`.style` (the style sheet and the status palette).
"""

from .page import PageRun, report_page
from .sections import PAGE_ORDER
from .style import STATUS_COLOURS

__all__ = ["PAGE_ORDER", "STATUS_COLOURS", "PageRun", "report_page"]
