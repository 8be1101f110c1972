"""The style sheet of the report page: one inline ``<style>``, no fonts or files fetched.

Status colours come from the Okabe-Ito palette (Okabe and Ito, "Color Universal Design",
2008), chosen to stay apart for the common kinds of colour blindness; the status word is
always written out as well, and each status also has its own border pattern, so that
neither a grey printer nor a reader who cannot tell the colours apart loses the verdict.
Text on the tinted backgrounds is near-black (contrast well above 7:1).

Narrow screens: tables scroll inside their own box instead of widening the page, and
figures shrink to the width of the screen. Print: no backgrounds needed to read a status
(the words and borders carry it), each run starts on a new page, figures are not split.
"""

from __future__ import annotations

__all__ = ["STATUS_COLOURS", "STYLE"]

#: Status -> (border colour, background tint, border pattern).
STATUS_COLOURS: dict[str, tuple[str, str, str]] = {
    "fail": ("#D55E00", "#FBE3D6", "solid"),  # vermillion
    "error": ("#CC79A7", "#F6E4EE", "double"),  # reddish purple
    "warn": ("#E69F00", "#FDF0D2", "dashed"),  # orange
    "pass": ("#009E73", "#D9F2EA", "solid"),  # bluish green
    "skip": ("#6E6E6E", "#EDEDED", "dotted"),  # grey
}


def _status_rules() -> str:
    rules = []
    for status, (edge, tint, pattern) in STATUS_COLOURS.items():
        rules.append(
            f".st-{status} {{ background: {tint}; border-left: 0.35em {pattern} {edge}; }}\n"
            f".mark-{status} {{ background: {tint}; border: 2px {pattern} {edge}; }}"
        )
    return "\n".join(rules)


STYLE = (
    """
:root { --ink: #1a1a1a; --muted: #555; --rule: #c8c8c8; --paper: #ffffff; }
* { box-sizing: border-box; }
html { font-size: 100%; }
body { margin: 0 auto; padding: 1rem 1.25rem 3rem; max-width: 72rem; color: var(--ink);
  background: var(--paper); font: 1rem/1.45 system-ui, "Segoe UI", Roboto, Helvetica, Arial,
  sans-serif; }
h1 { font-size: 1.7rem; margin: 0.5rem 0 0.25rem; }
h2 { font-size: 1.35rem; margin: 2.2rem 0 0.5rem; padding-top: 0.6rem;
  border-top: 3px solid var(--ink); }
h3 { font-size: 1.1rem; margin: 1.4rem 0 0.4rem; }
p, li { max-width: 60rem; }
code { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace;
  font-size: 0.92em; overflow-wrap: anywhere; }
a { color: #0056A0; }
.lede { color: var(--muted); margin-top: 0; }
.verdict { padding: 0.6rem 0.9rem; margin: 0.8rem 0; font-size: 1.05rem; }
.mark { display: inline-block; min-width: 3.2em; padding: 0 0.35em; font-weight: 700;
  text-align: center; letter-spacing: 0.02em; }
.scroll { overflow-x: auto; max-width: 100%; }
table { border-collapse: collapse; margin: 0.4rem 0 1rem; }
caption { text-align: left; font-size: 0.9rem; color: var(--muted); padding: 0.2rem 0; }
th, td { text-align: left; vertical-align: top; padding: 0.3rem 0.55rem;
  border-bottom: 1px solid var(--rule); }
thead th { border-bottom: 2px solid var(--ink); }
th[scope="row"] { font-weight: 600; white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
table.checks td:first-child { white-space: nowrap; }
table.checks td.msg { min-width: 16rem; max-width: 38rem; }
table.checks td.kvs { min-width: 12rem; }
table.glance { font-size: 0.88rem; }
table.glance th, table.glance td { padding: 0.25rem 0.3rem; }
table.glance .mark { min-width: 0; padding: 0 0.2em; }
table.glance th[scope="row"] { white-space: normal; overflow-wrap: break-word; }
ul.kv { list-style: none; margin: 0; padding: 0; font-size: 0.9em; }
ul.kv code { overflow-wrap: normal; }
ul.kv li { margin: 0; }
figure { margin: 1rem 0 1.6rem; break-inside: avoid; page-break-inside: avoid; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: 0.9rem; color: var(--muted); margin-top: 0.3rem; }
.note { border-left: 0.35em solid var(--rule); padding: 0.4rem 0.8rem; background: #f4f4f4; }
section.run { margin-bottom: 2rem; }
@media (max-width: 40rem) {
  body { padding: 0.6rem 0.6rem 2rem; }
  h1 { font-size: 1.35rem; }
  h2 { font-size: 1.15rem; }
  table { font-size: 0.88rem; }
  table.checks td.msg { min-width: 12rem; }
}
@media print {
  @page { margin: 15mm; }
  body { max-width: none; padding: 0; font-size: 10pt; }
  a { color: inherit; text-decoration: none; }
  .scroll { overflow: visible; }
  table { font-size: 8pt; }
  th[scope="row"], table.checks td:first-child { white-space: normal; overflow-wrap: break-word; }
  table.checks td.msg, table.checks td.kvs { min-width: 0; }
  ul.kv code { overflow-wrap: anywhere; }
  .mark { min-width: 0; }
  table.glance thead th[scope="col"] { writing-mode: vertical-rl; transform: rotate(180deg);
    vertical-align: bottom; white-space: nowrap; }
  section.run { break-before: page; page-break-before: always; }
  h2, h3 { break-after: avoid; page-break-after: avoid; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  figure img { max-height: 120mm; width: auto; }
  .st-fail, .st-error { font-weight: 700; }
}
"""
    + _status_rules()
    + "\n"
)
